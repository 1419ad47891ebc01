"""Typed results of the pooling service: the pooled group and an estimate left out.

Each has ``to_dict()`` (the exact JSON the CLI prints, key order included) and reads like a
read-only mapping (``g["estimate"]``) for the callers that still index results by key; new code
uses the attributes.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from exposhift.results import ReadsAsMapping


@dataclass(frozen=True, eq=False)
class Exclusion(ReadsAsMapping):
    """An estimate left out of pooling, and why (in words a user can act on)."""

    estimate_uid: Any
    study_id: Any
    event_id: Any
    reason: str

    def to_dict(self) -> dict[str, Any]:
        return {
            "estimate_uid": self.estimate_uid,
            "study_id": self.study_id,
            "event_id": self.event_id,
            "reason": self.reason,
        }


#: the pooled numbers of a group, on the analysis scale, in output order
POOLED_NUMBERS = (
    "estimate",
    "se",
    "ci_lower",
    "ci_upper",
    "pi_lower",
    "pi_upper",
    "tau2",
    "i2",
    "q",
    "q_pvalue",
    "pvalue",
    "df",
)
#: parts present only for some groups (left out of ``to_dict`` when absent), in output order
_OPTIONAL_TAIL = ("tau2_ci", "fixed_effect", "rho_sensitivity", "sensitivity")


@dataclass(frozen=True, eq=False)
class PooledGroup(ReadsAsMapping):
    """One pooling stratum's result (numbers on the analysis scale; ``natural`` back on the
    measure's own scale), with the options it was made with and what was left out."""

    stratum: dict[str, Any]  # the pooling keys and their values (measure group, kind, ...)
    k: int
    k_events: int
    k_estimates: int
    method: str
    ci_method: str
    within_event: str
    rho: float
    measure: str
    scale: str
    numbers: dict[str, Any]  # POOLED_NUMBERS -> value (None when not computed)
    notes: list[str]
    sign_flipped: int
    estimates: list[str]
    events: list[str]
    provenance: list[Any]
    natural: dict[str, Any]
    headline: str  # "single-event", "two-events" or "pooled"
    event_estimates: list[dict[str, Any]]
    back_transformed: dict[str, Any] | None = None
    tau2_ci: dict[str, Any] | None = None
    fixed_effect: dict[str, Any] | None = None
    rho_sensitivity: list[dict[str, Any]] | None = None
    sensitivity: dict[str, Any] | None = None
    excluded: list[Exclusion] = field(default_factory=list)

    @property
    def estimate(self) -> float | None:
        return self.numbers.get("estimate")

    @classmethod
    def from_record(
        cls, rec: dict[str, Any], keys: list[str], excluded: list[Exclusion]
    ) -> PooledGroup:
        """From the service's working record (stratum keys first, then the named parts)."""
        return cls(
            stratum={k: rec[k] for k in keys},
            numbers={f: rec[f] for f in POOLED_NUMBERS},
            excluded=excluded,
            **{
                f: rec[f]
                for f in (
                    "k",
                    "k_events",
                    "k_estimates",
                    "method",
                    "ci_method",
                    "within_event",
                    "rho",
                    "measure",
                    "scale",
                    "notes",
                    "sign_flipped",
                    "estimates",
                    "events",
                    "provenance",
                    "natural",
                    "headline",
                    "event_estimates",
                )
            },
            **{f: rec[f] for f in ("back_transformed", *_OPTIONAL_TAIL) if f in rec},
        )

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = dict(self.stratum)
        out.update(
            k=self.k,
            k_events=self.k_events,
            k_estimates=self.k_estimates,
            method=self.method,
            ci_method=self.ci_method,
            within_event=self.within_event,
            rho=self.rho,
            measure=self.measure,
            scale=self.scale,
        )
        out.update(self.numbers)
        out.update(
            notes=self.notes,
            sign_flipped=self.sign_flipped,
            estimates=self.estimates,
            events=self.events,
            provenance=self.provenance,
            natural=self.natural,
        )
        if self.back_transformed is not None:
            out["back_transformed"] = self.back_transformed
        out["headline"] = self.headline
        out["event_estimates"] = self.event_estimates
        for name in _OPTIONAL_TAIL:
            value = getattr(self, name)
            if value is not None:
                out[name] = value
        out["excluded"] = [e.to_dict() for e in self.excluded]
        return out
