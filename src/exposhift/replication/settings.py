"""The thresholds behind replication statuses and gap states, as documented settings.

Every number that decides a status or a state lives here, with what it means. The defaults are
written out in ``exposhift/data/replication.toml`` (the packaged copy ``exposhift init`` stores
in a new evidence base) and ``evidence/replication.toml`` (the repository's template a committee
copies and edits; a test checks that all three agree). The settings in force are a record of the
evidence base (``exposhift method show`` / ``method set settings FILE``); :func:`load_settings`
reads a file (one-run ``--settings FILE``) and, without a path, gives the defaults. Nothing is
read from the working folder.

Which thresholds are published and which are ours:

- ``min_level = 2``: the rubric's "adequate" level (METHODS.md §2; our rubric).
- ``min_places = 2``, ``min_periods = 2``, ``min_design_families = 2``: the smallest numbers
  that make "again elsewhere", "again later" and "by another design" true (issue definition).
- ``ready_min_events = 3``: three independent events at level ≥ 2 before synthesis, because a
  prediction interval needs k ≥ 3 (Higgins, Thompson & Spiegelhalter 2009, JRSS A 172:137).
- ``dose_min_events = 5``: meta-regression needs about 5+ events (METHODS.md §5; common
  practice, no published threshold).
- ``alpha = 0.05``, ``alpha_between = 0.05``: conventional significance levels (common
  practice).
- ``min_months_apart = 12``: two events in one place are separate periods when their change
  dates are at least this many months apart, measured conservatively from the full dates (a
  date known to the year only may lie anywhere in that year; our choice).
- ``within_event_rho = 0.8``: the within-event correlation used to combine several estimates of
  one event (:mod:`exposhift.synthesis.events`; common practice, Hedges, Tipton & Johnson 2010).
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields, replace
from pathlib import Path
from typing import Any

from exposhift.errors import ConfigError
from exposhift.replication.regions import M49_REGIONS

EXPECTED_CHOICES = ("pooled", "raises", "lowers")
POOL_METHODS = ("fe", "dl", "pm", "reml")
POOL_CIS = ("wald", "hksj")


@dataclass(frozen=True)
class ReplicationSettings:
    """Thresholds of the replication statuses and gap states (see docs/replication.md)."""

    #: overall appraisal level from which evidence counts ("good" evidence); below is weak
    min_level: int = 2
    #: significance level of a single event's effect (its Wald interval excludes no effect)
    alpha: float = 0.05
    #: significance level of the Q-between test across design families
    alpha_between: float = 0.05
    #: distinct places needed for replicated-place
    min_places: int = 2
    #: events in separate periods of one place needed for replicated-time
    min_periods: int = 2
    #: change dates at least this many months apart (conservatively, from their precision)
    #: make two events in one place separate periods
    min_months_apart: int = 12
    #: design families agreeing in direction needed for convergent (triangulation)
    min_design_families: int = 2
    #: design families that support but never triangulate (no comparison group)
    supporting_families: tuple[str, ...] = ("uncontrolled",)
    #: independent events at level >= min_level for the state ready-for-synthesis
    ready_min_events: int = 3
    #: independent events reporting the size of the change before a dose-response regression
    dose_min_events: int = 5
    #: direction for the exposure x outcome pairs the committee has not pre-specified one for
    #: (``exposhift direction set``): "pooled" infers it from the data (sign of Stouffer's
    #: combined z of the good events) and marks the status provisional; "raises"/"lowers" fix it
    expected_direction: str = "pooled"
    #: within-event correlation when several estimates of one event are combined
    within_event_rho: float = 0.8
    #: pooling within design families (exposhift.synthesis)
    pool_method: str = "reml"
    pool_ci: str = "hksj"
    #: region name -> ISO 3166-1 alpha-3 codes, for the gap map's region filter
    regions: dict[str, tuple[str, ...]] = field(default_factory=lambda: dict(M49_REGIONS))

    def __post_init__(self) -> None:
        problems = []
        for name in (
            "min_level",
            "min_places",
            "min_periods",
            "min_design_families",
            "ready_min_events",
            "dose_min_events",
        ):
            value = getattr(self, name)
            if not isinstance(value, int) or isinstance(value, bool) or value < 0:
                problems.append(f"{name} must be a whole number >= 0 (got {value!r})")
        if (
            not isinstance(self.min_months_apart, int)
            or isinstance(self.min_months_apart, bool)
            or self.min_months_apart < 0
        ):
            problems.append(
                f"min_months_apart must be a whole number >= 0 (got {self.min_months_apart!r})"
            )
        if (
            not isinstance(self.within_event_rho, float | int)
            or not 0.0 <= float(self.within_event_rho) <= 1.0
        ):
            problems.append(
                f"within_event_rho must be between 0 and 1 (got {self.within_event_rho!r})"
            )
        for name in ("alpha", "alpha_between"):
            value = getattr(self, name)
            if not isinstance(value, float | int) or not 0.0 < float(value) < 1.0:
                problems.append(f"{name} must be between 0 and 1 (got {value!r})")
        if self.expected_direction not in EXPECTED_CHOICES:
            problems.append(
                f"expected_direction must be one of {', '.join(EXPECTED_CHOICES)} "
                f"(got {self.expected_direction!r})"
            )
        if self.pool_method not in POOL_METHODS:
            problems.append(f"pool_method must be one of {', '.join(POOL_METHODS)}")
        if self.pool_ci not in POOL_CIS:
            problems.append(f"pool_ci must be one of {', '.join(POOL_CIS)}")
        if problems:
            raise ConfigError("replication settings: " + "; ".join(problems))

    def with_(self, **changes: Any) -> ReplicationSettings:
        """A copy with some settings changed (validated)."""
        return replace(self, **changes)


DEFAULTS = ReplicationSettings()


def settings_from_mapping(data: dict[str, Any], source: str = "settings") -> ReplicationSettings:
    """Settings from the ``[thresholds]`` and ``[regions]`` tables of a parsed TOML file."""
    known = {f.name for f in fields(ReplicationSettings)} - {"regions"}
    thresholds = dict(data.get("thresholds", {}))
    unknown = sorted(set(thresholds) - known)
    renamed = {
        "min_years_apart": "min_months_apart (months, e.g. 12)",
        "concordance_needs_significance": "nothing: an event now always counts only "
        "when significant, or when the pooled estimate of the good events excludes no "
        "effect (docs/replication.md)",
    }
    old = [k for k in unknown if k in renamed]
    if old:
        raise ConfigError(
            f"{source}: setting(s) {', '.join(old)} replaced; use "
            + "; ".join(f"{k} -> {renamed[k]}" for k in old)
        )
    if unknown:
        raise ConfigError(
            f"{source}: unknown setting(s) {', '.join(unknown)} in [thresholds]; "
            f"known: {', '.join(sorted(known))}"
        )
    if "supporting_families" in thresholds:
        thresholds["supporting_families"] = tuple(thresholds["supporting_families"])
    regions = dict(M49_REGIONS)
    for name, codes in data.get("regions", {}).items():
        if not isinstance(codes, list) or not all(isinstance(c, str) for c in codes):
            raise ConfigError(f"{source}: region '{name}' must be a list of ISO alpha-3 codes")
        regions[str(name).lower()] = tuple(sorted(c.upper() for c in codes))
    try:
        return ReplicationSettings(**thresholds, regions=regions)
    except TypeError as exc:  # pragma: no cover - guarded by the unknown-key check
        raise ConfigError(f"{source}: {exc}") from None


def load_settings(path: str | Path | None = None) -> ReplicationSettings:
    """Settings from the file ``path`` (every problem named by its line), else the defaults."""
    if path is None:
        return DEFAULTS
    from exposhift.replication.settings_file import settings_from_bytes

    p = Path(path)
    if not p.is_file():
        raise ConfigError(f"replication settings file not found: {p}; give an existing TOML file")
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise ConfigError(f"cannot read the settings file {p}: {exc.strerror}") from None
    return settings_from_bytes(data, str(p))
