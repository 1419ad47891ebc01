"""The replication report of one exposure × outcome: status, rule, events and the evidence.

Assembles, for one key, the pieces computed by the grouped modules (so the status here is the
status the gap map shows for the same data): the independent events with their place, date,
direction and size of change, design, appraisal level and aligned estimate; the families of
change they belong to; the sign test; the pooled estimate per design family (τ², I², prediction
interval); the Q-between test across design families; temporal sequences and reversals;
dose-response.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from exposhift.replication.dose import DoseResponse, dose_response
from exposhift.replication.entries import FamilyEntry, PlaceSequence, Reversal
from exposhift.replication.families import direction_words
from exposhift.replication.settings import DEFAULTS, ReplicationSettings
from exposhift.replication.status import CAUTION, analyse, status_label
from exposhift.replication.temporal import place_sequences, reversals
from exposhift.replication.triangulation import STRATA

EVENT_FIELDS: tuple[str, ...] = (
    "event_id",
    "country",
    "area",
    "change_date",
    "direction",
    "change_kind",
    "change_size",
    "change_unit",
    "family",
    "design",
    "design_family",
    "study_id",
    "level",
    "estimate",
    "se",
    "ci_lower",
    "ci_upper",
    "measure",
    "measure_group",
    "estimate_kind",
    "sign_flipped",
    "significant",
    "concordant",
    "represents_event",
)
FAMILY_FIELDS: tuple[str, ...] = (
    "design_family",
    "measure_group",
    "estimate_kind",
    "increment",
    "k",
    "estimate",
    "se",
    "ci_lower",
    "ci_upper",
    "tau2",
    "i2",
    "q",
    "q_pvalue",
    "pi_lower",
    "pi_upper",
    "main",
    "supporting",
    "notes",
)


@dataclass(frozen=True)
class ReplicationReport:
    """Everything the ``replication`` command shows for one exposure × outcome."""

    exposure: str
    outcome: str
    status: str
    rule: str
    expected: int
    events: pd.DataFrame
    sign_test: dict[str, Any]
    by_design_family: pd.DataFrame
    triangulation: dict[str, Any]
    temporal: list[PlaceSequence]
    reversals: list[Reversal]
    dose_response: DoseResponse
    excluded: pd.DataFrame = field(default_factory=pd.DataFrame)
    families: list[FamilyEntry] = field(default_factory=list)
    settings: ReplicationSettings = DEFAULTS
    caution: str = CAUTION
    provisional: bool = False
    imprecise: bool = False
    expected_source: str = "inferred"
    headline: dict[str, Any] = field(default_factory=dict)
    event_level: pd.DataFrame = field(default_factory=pd.DataFrame)

    @property
    def label(self) -> str:
        """The status with its qualifiers (:func:`~exposhift.replication.status.status_label`)."""
        return status_label(self.status, self.provisional, self.imprecise)

    @property
    def expected_words(self) -> str:
        return direction_words(self.expected)

    def to_dict(self) -> dict[str, Any]:
        """The JSON shape of ``exposhift replication --json``."""
        excluded = []
        if not self.excluded.empty:
            cols = [
                c
                for c in ("estimate_uid", "study_id", "event_id", "reason")
                if c in self.excluded.columns
            ]
            excluded = _records(self.excluded[cols])
        return {
            "exposure": self.exposure,
            "outcome": self.outcome,
            "status": self.status,
            "rule": self.rule,
            "provisional": self.provisional,
            "imprecise": self.imprecise,
            "expected_direction": {
                "sign": self.expected,
                "meaning": self.expected_words,
                "basis": self.expected_source,
                "setting": self.settings.expected_direction,
            },
            "headline": {k: _clean(v) for k, v in self.headline.items()},
            "event_level": (
                _records(self.event_level[list(EVENT_LEVEL_FIELDS)])
                if len(self.event_level)
                else []
            ),
            "events": _records(self.events[list(EVENT_FIELDS)]),
            "sign_test_p": _clean(self.sign_test["p"]),
            "sign_test": {k: _clean(v) for k, v in self.sign_test.items()},
            "by_design_family": _records(self.by_design_family[list(FAMILY_FIELDS)]),
            "triangulation": {k: _clean(v) for k, v in self.triangulation.items()},
            "families": [f.to_dict() for f in self.families],
            "temporal": [t.to_dict() for t in self.temporal],
            "reversals": [r.to_dict() for r in self.reversals],
            "dose_response": self.dose_response.to_dict(),
            "excluded": excluded,
            "scale_note": "estimates are on the analysis scale (log scale for ratio measures) "
            "and aligned to an exposure increase (sign_flipped marks decreases)",
            "caution": self.caution,
        }


def _clean(value: Any) -> Any:
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and math.isnan(value):
        return None
    return value


def _records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    return [
        {k: _clean(v) if not (v is None or v is pd.NA) else None for k, v in row.items()}
        for row in frame.astype(object).where(frame.notna(), None).to_dict("records")
    ]


def replication_report(
    units: pd.DataFrame,
    exposure: str,
    outcome: str,
    settings: ReplicationSettings = DEFAULTS,
    excluded: pd.DataFrame | None = None,
    directions: pd.DataFrame | None = None,
) -> ReplicationReport:
    """The report for ``exposure`` × ``outcome`` from harmonised independent units;
    ``directions``: the committee's pre-specified expected directions."""
    sub = units[(units["exposure"] == exposure) & (units["outcome"] == outcome)]
    ex = (
        pd.DataFrame()
        if excluded is None
        else excluded[(excluded["exposure"] == exposure) & (excluded["outcome"] == outcome)]
    )
    if sub.empty:
        return _empty(exposure, outcome, settings, ex)
    a = analyse(sub, ("exposure", "outcome"), settings, directions)
    row = a.statuses.iloc[0]
    ev = a.events
    u = a.units
    z = stats.norm.isf(settings.alpha / 2)
    events = pd.DataFrame(
        {
            "event_id": u["event_id"],
            "country": u["country"],
            "area": _col(u, "area"),
            "change_date": u["change_date"].astype(str),
            "direction": u["change_direction"],
            "change_kind": _col(u, "change_kind"),
            "change_size": _col(u, "change_size"),
            "change_unit": _col(u, "change_unit"),
            "family": _col(u, "family"),
            "design": _col(u, "design"),
            "design_family": u["design_family"],
            "study_id": u["study_id"],
            "level": u["level"],
            "estimate": u["y"],
            "se": u["se"],
            "ci_lower": u["y"] - z * u["se"],
            "ci_upper": u["y"] + z * u["se"],
            "measure": _col(u, "measure"),
            "measure_group": u["measure_group"],
            "estimate_kind": u["estimate_kind"],
            "sign_flipped": _col(u, "sign_flipped"),
            "significant": u["significant"],
            "concordant": u["concordant"],
            "represents_event": u["unit_row"].isin(ev["unit_row"]),
            "_year": u["change_year"],
        }
    ).sort_values(["_year", "change_date", "event_id", "study_id"], kind="stable")
    events = events.drop(columns="_year").reset_index(drop=True)
    if "level" in events:
        events["level"] = events["level"].astype("float64")

    pools = a.pools.sort_values(
        ["main", "design_family"], ascending=[False, True], kind="stable"
    ).reset_index(drop=True)
    main = None
    if len(pools) and pools["main"].any():
        m = pools[pools["main"]].iloc[0]
        main = {c: m[c] for c in STRATA}
    tri = {
        "main_stratum": main and {c: str(v) for c, v in main.items()},
        "families_compared": row["families_list"],
        "n_families": int(row["n_families"]),
        "families_in_expected_direction": int(row["families_concordant"]),
        "q_between": row["q_between"],
        "q_between_df": int(row["q_between_df"]),
        "q_between_p": row["q_between_p"],
        "families_disagree": bool(row["families_disagree"]),
        "triangulated": bool(row["triangulated"]),
        "statement": _tri_statement(row, settings),
        "test": str(row.get("families_test_note", "")),
    }
    sign = {
        "n": int(row["sign_n"]),
        "k_expected": int(row["sign_k"]),
        "share": row["sign_share"],
        "p": row["sign_test_p"],
        "min_attainable_p": row["sign_min_p"],
        "basis": f"independent events at level ≥ {settings.min_level} with a non-zero "
        "estimate; exact two-sided binomial test, p = 1/2",
    }
    return ReplicationReport(
        exposure=exposure,
        outcome=outcome,
        status=str(row["status"]),
        rule=str(row["rule"]),
        expected=int(row["expected"]),
        events=events,
        sign_test=sign,
        by_design_family=pools,
        triangulation=tri,
        temporal=place_sequences(ev, settings),
        reversals=reversals(ev, settings),
        dose_response=dose_response(u, main, settings),
        excluded=ex,
        settings=settings,
        families=family_summary(ev),
        provisional=bool(row["provisional"]),
        imprecise=bool(row["imprecise"]),
        expected_source=str(row["expected_source"]),
        headline=_headline(row, settings),
        event_level=_event_level(ev, z),
    )


def _headline(row: pd.Series, s: ReplicationSettings) -> dict[str, Any]:
    """The pooled number shown with the status: good events, one per event, main stratum."""
    k = int(row["pooled_k_events"])
    out: dict[str, Any] = {
        "evidence_set": f"good events (overall level ≥ {s.min_level}), one number per event, "
        "in the stratum with the most good events",
        "k_events": k,
        "k_estimates": int(row["pooled_k_estimates"]),
        "stratum": str(row["pooled_stratum"]),
        "scale": str(row["pooled_scale"]),
        "method": f"{s.pool_method}, {s.pool_ci}",
    }
    if k:
        back = math.exp if row["pooled_scale"] == "log" else (lambda x: x)
        for f in ("estimate", "ci_lower", "ci_upper", "pi_lower", "pi_upper"):
            x = row[f"pooled_{f}"]
            out[f] = None if pd.isna(x) else float(back(float(x)))
        out["pvalue"] = _clean(row["pooled_pvalue"])
        out["excludes_no_effect_in_expected_direction"] = bool(row["pooled_supports"])
    return out


EVENT_LEVEL_FIELDS: tuple[str, ...] = (
    "event_id",
    "country",
    "change_date",
    "direction",
    "level",
    "k_combined",
    "estimate",
    "ci_lower",
    "ci_upper",
    "significant",
    "concordant",
    "counts",
    "counts_rev",
)


def _event_level(ev: pd.DataFrame, z: float) -> pd.DataFrame:
    """One row per event: the combined estimate behind the status (analysis scale)."""
    out = pd.DataFrame(
        {
            "event_id": ev["event_id"],
            "country": ev["country"],
            "change_date": ev["change_date"].astype(str),
            "direction": ev["change_direction"],
            "level": ev["level"].astype("float64"),
            "k_combined": ev["k_combined"],
            "estimate": ev["y"],
            "ci_lower": ev["y"] - z * ev["se"],
            "ci_upper": ev["y"] + z * ev["se"],
            "significant": ev["significant"],
            "concordant": ev["concordant"],
            "counts": ev["counts"],
            "counts_rev": ev["counts_rev"],
        }
    )
    return out.sort_values(["change_date", "event_id"], kind="stable").reset_index(drop=True)


def family_summary(events: pd.DataFrame) -> list[FamilyEntry]:
    """Families of exposure change among the events: the explicit family key of the event, or
    exposure / change kind. Per family: events, places, first and last change year."""
    fam = events["family"] if "family" in events.columns else None
    if fam is None or fam.isna().all():
        kind = events["change_kind"] if "change_kind" in events.columns else ""
        fam = events["exposure"].astype(str) + " / " + pd.Series(kind, index=events.index)
    ev = events.assign(_family=fam.astype(str))
    out = []
    for name, grp in ev.groupby("_family", sort=True):
        years = grp["change_year"].dropna()
        out.append(
            FamilyEntry(
                family=name,
                events=int(grp["event_id"].nunique()),
                places=sorted(grp["place"].unique().tolist()),
                first_year=int(years.min()) if len(years) else None,
                last_year=int(years.max()) if len(years) else None,
                directions=sorted(grp["change_direction"].dropna().unique().tolist()),
            )
        )
    return out


def _col(frame: pd.DataFrame, name: str) -> pd.Series:
    return (
        frame[name] if name in frame.columns else pd.Series(None, index=frame.index, dtype=object)
    )


def _tri_statement(row: pd.Series, s: ReplicationSettings) -> str:
    n = int(row["n_families"])
    if n == 0:
        return (
            f"no design family outside {', '.join(s.supporting_families)} has an estimate "
            f"at level ≥ {s.min_level}: triangulation not possible"
        )
    if n == 1:
        return (
            f"one design family with 2+ events or a significant estimate "
            f"({row['families_list']}): nothing to triangulate with"
        )
    if pd.isna(row["q_between"]):
        qb = row.get("families_test_note") or "no test of equal family effects"
    else:
        qb = (
            f"test of equal family effects (event-level meta-regression, estimates within "
            f"events) chi2 = {row['q_between']:.2f} on {int(row['q_between_df'])} df, "
            f"p = {row['q_between_p']:.3g}"
        )
    if row["families_disagree"]:
        return f"design families disagree: opposite directions and {qb}"
    if row["triangulated"]:
        return f"design families agree in direction ({row['families_list']}); {qb}" + (
            "; sizes differ" if row["q_between_p"] < s.alpha_between else ""
        )
    return (
        f"{int(row['families_concordant'])} of {n} design families point in the expected "
        f"direction (needs ≥ {s.min_design_families}); {qb}"
    )


def _empty(
    exposure: str, outcome: str, settings: ReplicationSettings, ex: pd.DataFrame
) -> ReplicationReport:
    return ReplicationReport(
        exposure=exposure,
        outcome=outcome,
        status="none",
        rule="none: no independent natural-experiment estimate for this exposure and outcome",
        expected=0,
        events=pd.DataFrame(columns=list(EVENT_FIELDS)),
        sign_test={"n": 0, "k_expected": 0, "share": None, "p": None, "basis": ""},
        by_design_family=pd.DataFrame(columns=list(FAMILY_FIELDS)),
        triangulation={"statement": "no evidence", "triangulated": False},
        temporal=[],
        reversals=[],
        dose_response=DoseResponse(False, "not run: no evidence"),
        excluded=ex,
        settings=settings,
    )
