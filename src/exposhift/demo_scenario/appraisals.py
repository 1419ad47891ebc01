"""Invented dual-review appraisals for the demo scenario.

Each study has intended ("true") ratings per rubric domain, built from its recorded facts:
its tier, its design, the checks it reports, the precision of the change date, whether the
size of the exposure change is known, and ratings fixed by a recorded fact (``Study.firm``,
e.g. an interrupted time series with two points before the change is fatal on the
counterfactual). Ratings also stay within the limits that recorded facts put on them, as the
rubric's suggestions do (origin at most the assignment grade; a single series at most 2, or 1
with fewer than 12 points on a side; no falsification test means 1; one test at most 2; a time
series without autocorrelation handled at most 1 on inference), so a reviewer departs from a
suggestion only with a written reason. Two invented reviewers then rate independently: each
rating departs from the intended one by one level now and then and rarely by two (ratings fixed
by a fact are seen alike by both). The consensus settles each domain at the intended rating
when it lies between the two independent ratings, otherwise at the nearer of the two.

The summary rule used to describe the scenario (:func:`overall_level`) follows the rubric notes
(design notes RUBRIC.md): overall = lowest of the core domains; a 0 in another domain except
applicability caps it at 1. The rubric file and :mod:`exposhift.appraisal` hold the rule of
record; this copy only describes the demo.
"""

from __future__ import annotations

import pandas as pd

from exposhift.demo_scenario.catalogue import STUDIES
from exposhift.demo_scenario.events import EVENTS
from exposhift.demo_scenario.model import CONSENSUS_REVIEWER, REVIEWERS, Study, keyed_rng

DOMAINS: tuple[str, ...] = (
    "origin",
    "counterfactual",
    "design_checks",
    "falsification",
    "timing",
    "concurrent_changes",
    "exposure_shift",
    "outcome_data",
    "inference",
    "transparency",
    "applicability",
)
CORE: tuple[str, ...] = ("origin", "counterfactual", "design_checks", "concurrent_changes")
WHY_COLUMNS: tuple[str, ...] = tuple(f"{d}_why" for d in DOMAINS)
APPRAISAL_COLUMNS: tuple[str, ...] = ("study_id", "reviewer", "stage", *DOMAINS, *WHY_COLUMNS)

#: checks that are falsification tests (a subset of exposhift.appraisal.checks)
FALSIFICATION_CHECKS = frozenset(
    {
        "placebo-date",
        "placebo-place",
        "negative-control-outcome",
        "negative-control-exposure",
        "in-space-placebo",
    }
)
#: designs with no concurrent comparison: the counterfactual can be at most adequate
SINGLE_SERIES = frozenset({"its", "rd-time", "before-after"})
#: time-series designs whose inference needs autocorrelation handled
SERIES = frozenset({"its", "controlled-its", "rd-time"})

#: a reviewer's note for a weak rating that no recorded fact fixed
WHY_WEAK: dict[str, str] = {
    "origin": "reasons for the change mixed; a response to the outcome not excluded",
    "counterfactual": "comparison not convincingly shown similar before the change",
    "design_checks": "design diagnostics only partly reported or borderline",
    "falsification": "no convincing negative-control or placebo test",
    "timing": "change date coarser than the analysis unit, or phase-in not handled",
    "concurrent_changes": "concurrent changes acknowledged but not handled",
    "exposure_shift": "exposure change inferred, not measured before and after",
    "outcome_data": "a recording change inside the window only acknowledged",
    "inference": "standard errors may not reflect autocorrelation or clustering",
    "transparency": "no pre-specification and few sensitivity analyses",
    "applicability": "contrast or population far from the decision context",
}

#: a reviewer's note for a fatal rating that no recorded fact fixed (the rubric's level-0 cases)
WHY_FATAL: dict[str, str] = {
    "origin": "the change answered an outcome spike and nothing in the design handles it",
    "counterfactual": "no comparison and fewer than 3 points on a side",
    "design_checks": "minimum design diagnostics absent or clearly failed",
    "falsification": "a placebo or negative-control test shows an effect as large as the main one",
    "timing": "timing of the change unknown at the analysis resolution",
    "concurrent_changes": "a known major concurrent change left unaddressed",
    "exposure_shift": "no evidence that the exposure changed",
    "outcome_data": "outcome source or definition differs between groups or periods",
    "inference": "model clearly mismatched to the data",
    "transparency": "signs of selective reporting",
    "applicability": "the contrast does not answer the committee's question",
}

#: chance of departing from the intended rating by 0, -1, +1, -2, +2 levels, per reviewer
#: (the second reviewer is a little more lenient)
_STEPS = (0, -1, 1, -2, 2)
_DEPARTURE = {
    REVIEWERS[0]: (0.80, 0.10, 0.08, 0.01, 0.01),
    REVIEWERS[1]: (0.80, 0.07, 0.11, 0.01, 0.01),
}


def overall_level(ratings: dict[str, int]) -> int:
    """Summary rule of the rubric notes: lowest core domain; a 0 elsewhere (not applicability)
    caps the overall level at 1."""
    level = min(ratings[d] for d in CORE)
    if any(ratings[d] == 0 for d in DOMAINS if d not in CORE and d != "applicability"):
        level = min(level, 1)
    return level


def fact_limits(study: Study) -> dict[str, int]:
    """Highest level each domain can take given the recorded facts (domains without a limit
    are left out)."""
    limits: dict[str, int] = {}
    if study.assignment_grade is not None:
        limits["origin"] = study.assignment_grade
    if study.design in SINGLE_SERIES:
        points = [p for p in (study.pre_points, study.post_points) if p is not None]
        fewest = min(points) if len(points) == 2 else None
        limits["counterfactual"] = 2 if fewest is None or fewest >= 12 else 1 if fewest >= 3 else 0
    n_false = sum(c in FALSIFICATION_CHECKS for c in study.checks)
    limits["falsification"] = 1 if n_false == 0 else 2 if n_false == 1 else 3
    if study.design in SERIES and "autocorrelation" not in study.checks:
        limits["inference"] = 1
    return limits


def intended_ratings(study: Study) -> dict[str, int]:
    """The ratings the facts of the study support (before reviewer disagreement)."""
    rng = keyed_rng("intended", study.study_id)
    t = study.tier
    core = [t] * 4
    if t < 3:
        for i in range(4):
            core[i] = min(3, t + int(rng.integers(0, 2)))
        core[int(rng.integers(0, 4))] = t  # at least one core domain sits at the tier
    r = dict(zip(CORE, core, strict=True))
    limits = fact_limits(study)
    r["falsification"] = limits["falsification"]
    event = EVENTS[study.estimates[0].event_id]
    by_year = len(event.change_date) == 4
    r["timing"] = 2 if by_year or t < 3 else 3
    if event.change_size is None:
        r["exposure_shift"] = 1
    else:
        r["exposure_shift"] = 3 if t == 3 else 2
    r["outcome_data"] = 3 if t == 3 else 2
    r["inference"] = min(3, max(1, t))
    r["transparency"] = min(3, max(1, t))
    r["applicability"] = 2 + int(rng.integers(0, 2))
    for domain, limit in limits.items():
        r[domain] = min(r[domain], limit)
    for domain, (level, _why) in study.firm.items():
        r[domain] = level
    return {d: r[d] for d in DOMAINS}


def _independent(study: Study, reviewer: str, intended: dict[str, int]) -> dict[str, int]:
    rng = keyed_rng("independent", study.study_id, reviewer)
    limits = fact_limits(study)
    out = {}
    for d in DOMAINS:
        step = int(rng.choice(_STEPS, p=_DEPARTURE[reviewer]))
        out[d] = intended[d] if d in study.firm else min(3, max(0, intended[d] + step))
        if d in limits and d not in study.firm:  # reviewers see the same suggestions
            out[d] = min(out[d], limits[d])
    if not any(c in FALSIFICATION_CHECKS for c in study.checks):
        out["falsification"] = 1  # no test reported: nothing to fail, nothing to credit
    return out


def _why(study: Study, domain: str, level: int) -> str | None:
    if domain in study.firm:
        return study.firm[domain][1]
    if level == 0:
        return WHY_FATAL[domain]
    if level == 1:
        return WHY_WEAK[domain]
    return None


def _row(
    study: Study, reviewer: str, stage: str, ratings: dict[str, int], notes: dict[str, str | None]
) -> dict[str, object]:
    return {
        "study_id": study.study_id,
        "reviewer": reviewer,
        "stage": stage,
        **ratings,
        **{f"{d}_why": notes.get(d) for d in DOMAINS},
    }


def study_appraisals(study: Study) -> list[dict[str, object]]:
    """Independent appraisals (``study.appraised`` of them) and, with two, the consensus."""
    intended = intended_ratings(study)
    rows = []
    ratings = []
    for reviewer in REVIEWERS[: study.appraised]:
        rated = _independent(study, reviewer, intended)
        ratings.append(rated)
        notes = {d: _why(study, d, rated[d]) for d in DOMAINS}
        rows.append(_row(study, reviewer, "independent", rated, notes))
    if len(ratings) == 2:
        a, b = ratings
        consensus, notes = {}, {}
        for d in DOMAINS:
            lo, hi = sorted((a[d], b[d]))
            consensus[d] = min(hi, max(lo, intended[d]))
            if a[d] != b[d] and d not in study.firm:
                notes[d] = (
                    f"settled at {consensus[d]} after discussion "
                    f"({REVIEWERS[0]} {a[d]}, {REVIEWERS[1]} {b[d]})"
                )
            else:
                notes[d] = _why(study, d, consensus[d])
        rows.append(_row(study, CONSENSUS_REVIEWER, "consensus", consensus, notes))
    return rows


def appraisals_frame(studies: tuple[Study, ...] = STUDIES) -> pd.DataFrame:
    """All demo appraisals: columns ``APPRAISAL_COLUMNS``, levels as integers 0-3."""
    rows = [row for study in studies for row in study_appraisals(study)]
    frame = pd.DataFrame(rows, columns=list(APPRAISAL_COLUMNS))
    for d in DOMAINS:
        frame[d] = frame[d].astype("int64")
    for c in WHY_COLUMNS:
        frame[c] = frame[c].astype(object).where(frame[c].notna(), None)
    return frame


def consensus_levels(frame: pd.DataFrame) -> dict[str, int]:
    """study_id -> overall level of the consensus appraisal (studies with one)."""
    cons = frame[frame["stage"] == "consensus"]
    return {
        row["study_id"]: overall_level({d: int(row[d]) for d in DOMAINS})
        for _, row in cons.iterrows()
    }
