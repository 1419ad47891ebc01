"""Numbers of the demo scenario: reported estimates drawn around invented true effects.

Each reported estimate is the true effect (on the analysis scale) plus normal sampling noise
with the study's standard error, so the spread of the reported numbers is consistent with the
uncertainty they report. The reported form then follows the study: a confidence interval
(95% or 90%), an SE only, or a p value only. Conversions on the way:

- ratio measures: estimate = exp(b), limits = exp(b -/+ z * SE);
- percent change: 100 * (exp(b) - 1), limits likewise (analysis scale log(1 + p/100));
- mean and risk differences: b -/+ z * SE;
- two-sided p = 2 * (1 - Phi(|b| / SE)) (the inverse of the SE-from-p conversion in
  Altman & Bland 2011, BMJ 343:d2090), z = Phi^-1(1 - (1 - level) / 2).
"""

from __future__ import annotations

import math

import pandas as pd
from scipy.stats import norm

from exposhift.demo_scenario.catalogue import STUDIES
from exposhift.demo_scenario.events import EVENTS, OUTCOMES, REGISTERED, TRUE_EFFECTS
from exposhift.demo_scenario.model import Est, Event, Study, keyed_rng
from exposhift.io.columns import COLUMN_NAMES, COLUMNS, EVENT_COLUMNS
from exposhift.vocab import MEASURES

#: the sheet columns of the demo's evidence.csv: every extraction-sheet column except
#: ``same_population_as`` (optional; no demo study declares an overlap, and the column is left
#: out so that the seed file keeps its bytes; an import leaves the field blank)
SHEET_COLUMNS: tuple[str, ...] = tuple(c for c in COLUMN_NAMES if c != "same_population_as")

FORMS = ("ci", "ci95", "ci90", "se", "p", "ci+se", "ci+p")
_CI_LEVEL = {
    "ci": None,
    "ci95": 0.95,
    "ci90": 0.9,
    "se": None,
    "p": None,
    "ci+se": None,
    "ci+p": 0.95,
}


def _yes(flag: bool) -> str:
    return "yes" if flag else "no"


def event_fields(event: Event) -> dict[str, object]:
    return {
        "event_id": event.event_id,
        "exposure": event.exposure,
        "change_kind": event.change_kind,
        "change_direction": event.change_direction,
        "change_size": event.change_size,
        "change_unit": event.change_unit,
        "country": event.country,
        "area": event.area,
        "change_date": event.change_date,
        "family": event.family,
    }


def study_fields(study: Study) -> dict[str, object]:
    return {
        "study_id": study.study_id,
        "citation": study.citation,
        "year": study.year,
        "doi": study.doi,
        "design": study.design,
        "comparison": study.comparison,
        "population": study.population,
        "data_source": study.data_source,
        "assignment_grade": study.assignment_grade,
        "pre_points": study.pre_points,
        "post_points": study.post_points,
        "checks": ";".join(study.checks) if study.checks else None,
        "demo": "yes",
    }


def _decimals(measure: str, se: float) -> int:
    if measure == "pct_change":
        return 1
    if measure == "MD":
        return 1
    if measure in ("RD", "SMD"):
        return 4
    return 3 if se < 0.04 else 2


def _report(measure: str, b: float) -> float:
    """Analysis-scale value -> the scale the measure is reported on."""
    if measure == "pct_change":
        return 100.0 * math.expm1(b)
    if MEASURES[measure] == "log":
        return math.exp(b)
    return b


def true_effect(study: Study, est: Est) -> float:
    base = est.truth if est.truth is not None else TRUE_EFFECTS[(est.event_id, est.outcome)]
    return base + est.offset + study.bias


def estimate_fields(study: Study, est: Est) -> dict[str, object]:
    """Draw one reported estimate and write it in the study's reporting form."""
    if est.form not in FORMS:
        raise ValueError(f"unknown reporting form {est.form!r}; use one of {FORMS}")
    rng = keyed_rng(
        "estimate",
        study.study_id,
        est.event_id,
        est.outcome,
        est.kind,
        est.subgroup,
        est.time_window,
    )
    b = true_effect(study, est) + rng.normal(0.0, est.se)
    nd = _decimals(est.measure, est.se)
    row: dict[str, object] = {
        "outcome": est.outcome,
        "outcome_group": OUTCOMES[est.outcome],
        "measure": est.measure,
        "estimate_kind": est.kind,
        "per_unit": est.per_unit,
        "estimate": round(_report(est.measure, b), nd),
        "ci_low": None,
        "ci_high": None,
        "ci_level": _CI_LEVEL[est.form],
        "se": None,
        "p_value": None,
        "baseline_risk": est.baseline_risk,
        "subgroup": est.subgroup,
        "time_window": est.time_window,
        "primary": _yes(est.primary),
    }
    if est.form.startswith("ci"):
        level = 0.9 if est.form == "ci90" else 0.95
        z = float(norm.ppf(1.0 - (1.0 - level) / 2.0))
        row["ci_low"] = round(_report(est.measure, b - z * est.se), nd)
        row["ci_high"] = round(_report(est.measure, b + z * est.se), nd)
        if not row["ci_low"] < row["estimate"] < row["ci_high"]:
            raise ValueError(f"{study.study_id}: rounding put the estimate on a CI limit")
    if est.form in ("se", "ci+se"):
        row["se"] = round(est.se, 4)
    if est.form in ("p", "ci+p"):
        p = 2.0 * float(norm.sf(abs(b) / est.se))
        row["p_value"] = max(float(f"{p:.2g}"), 1e-6)
    return row


_KINDS = {c.name: c.kind for c in COLUMNS}


def _typed(frame: pd.DataFrame) -> pd.DataFrame:
    """Numbers as numbers (nullable integers where a value may be missing), text as objects
    with ``None`` for missing values."""
    for name in frame.columns:
        kind = _KINDS.get(name, "text")
        if name == "year":
            frame[name] = frame[name].astype("int64")
        elif kind == "int":
            frame[name] = frame[name].astype("Int64")
        elif kind == "float":
            frame[name] = frame[name].astype("float64")
        else:
            frame[name] = frame[name].astype(object).where(frame[name].notna(), None)
    return frame


def estimates_frame(studies: tuple[Study, ...] = STUDIES) -> pd.DataFrame:
    """The extraction sheet: one row per estimate, columns exactly ``SHEET_COLUMNS``."""
    rows = []
    for study in studies:
        for est in study.estimates:
            rows.append(
                {
                    **study_fields(study),
                    **event_fields(EVENTS[est.event_id]),
                    **estimate_fields(study, est),
                }
            )
    return _typed(pd.DataFrame(rows, columns=list(SHEET_COLUMNS)))


def events_frame() -> pd.DataFrame:
    """Registered events with no study: the event columns plus ``demo``."""
    rows = [{**event_fields(e), "demo": "yes"} for e in REGISTERED.values()]
    return _typed(pd.DataFrame(rows, columns=[*EVENT_COLUMNS, "demo"]))
