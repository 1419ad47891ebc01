"""The appraisal sheet: its columns and the checks of every row, in one pass.

A row is one reviewer's appraisal of one study at one stage (``study_id``, ``reviewer``,
``stage``, one column per rubric domain, optional ``<domain>_why`` and ``<domain>_reporting``).
The rules (levels 0-3, core domains rated, a departure from the suggested level justified, one
appraisal per study, reviewer and stage, a consensus only after two independent appraisals) are
described in docs/appraisal.md; ``services/appraising.py`` writes what passes.
"""

from __future__ import annotations

from typing import Any

import pandas as pd

from exposhift.appraisal.rubric_types import Rubric
from exposhift.appraisal.scoring import StudyFacts, suggest_levels
from exposhift.appraisal.suggestions import facts_from_record
from exposhift.errors import InputFileError
from exposhift.io.problems import ProblemLog
from exposhift.vocab import REVIEW_STAGES

#: the columns that say whose appraisal a row is
META_COLUMNS = ("study_id", "reviewer", "stage")


def _int_level(text: str) -> int | None:
    try:
        value = float(text)
    except ValueError:
        return None
    return int(value) if value.is_integer() else None


def facts_of(study: dict[str, Any]) -> StudyFacts:
    """The recorded facts of a study that appraisal suggestions are made from."""
    return facts_from_record(
        study["design"],
        study.get("pre_points"),
        study.get("post_points"),
        study.get("checks") or None,
        study.get("assignment_grade"),
        has_comparison=bool(study.get("comparison")) or None,
    )


def validate_appraisal_sheet(
    frame: pd.DataFrame,
    label: str,
    rubric: Rubric,
    studies: dict[str, dict[str, Any]],
    existing: dict[tuple[str, str, str], dict[str, Any]],
) -> list[dict[str, Any]]:
    """Check an appraisal sheet against the rubric and the evidence base, every problem in one
    pass (:class:`~exposhift.io.problems.ProblemLog`); returns parsed appraisals in file order.

    ``frame`` is indexed by spreadsheet row; ``studies`` maps a study key to its stored record
    (``design``, points, checks...), ``existing`` maps (study, reviewer, stage) to the stored
    appraisal (``ratings``). Raises :class:`InputFileError` with every problem found.
    """
    log = ProblemLog(label)
    domains = rubric.domain_keys
    known = (
        set(META_COLUMNS)
        | set(domains)
        | {f"{d}_why" for d in domains}
        | {f"{d}_reporting" for d in domains}
    )
    for col in META_COLUMNS:
        if col not in frame.columns:
            log.add(1, col, "required column is missing")
    unknown = [c for c in frame.columns if c not in known]
    for col in unknown:
        log.add(
            1,
            col,
            f"unknown column; accepted domain keys: {', '.join(domains)} (with optional "
            "'<domain>_why' and '<domain>_reporting' columns)",
        )
    if log:
        raise InputFileError(log.problems)
    reporting_keys = {r.key for r in rubric.reporting}
    parsed: list[dict[str, Any]] = []
    seen: dict[tuple[str, str, str], int] = {}
    independents: dict[str, set[str]] = {}
    for study, reviewer, stage in existing:
        if stage == "independent":
            independents.setdefault(study, set()).add(reviewer)
    # independent appraisals first, so a file may hold both stages of a study
    order = sorted(frame.index, key=lambda r: (frame.at[r, "stage"] != "independent", r))
    for row in order:
        rec = frame.loc[row]
        study, reviewer, stage = rec["study_id"], rec["reviewer"], rec["stage"]
        bad = False
        if not study:
            log.add(row, "study_id", "empty; name the study")
            bad = True
        elif study not in studies:
            log.add(
                row,
                "study_id",
                f"no study '{study}' in the evidence base; import it first",
            )
            bad = True
        if not reviewer:
            log.add(row, "reviewer", "empty; name the reviewer")
            bad = True
        if stage not in REVIEW_STAGES:
            log.add(
                row,
                "stage",
                f"'{stage}' is not a stage; accepted: {', '.join(REVIEW_STAGES)}",
            )
            bad = True
        ratings: dict[str, int] = {}
        why: dict[str, str] = {}
        reporting: dict[str, str] = {}
        for d in domains:
            text = rec.get(d, "")
            if text == "":
                if d in rubric.core_domains:
                    log.add(row, d, "core domain not rated; give a level 0-3")
                    bad = True
                continue
            level = _int_level(text)
            if level is None or level not in (0, 1, 2, 3):
                what = "is not one of the levels" if level is None else "is outside 0-3"
                log.add(
                    row,
                    d,
                    f"level '{text}' {what}; accepted: 0 (fatal), 1 (weak), "
                    "2 (adequate), 3 (strong)",
                )
                bad = True
                continue
            ratings[d] = level
            if rec.get(f"{d}_why", ""):
                why[d] = rec[f"{d}_why"]
            rep = rec.get(f"{d}_reporting", "")
            if rep:
                if rep not in reporting_keys:
                    log.add(
                        row,
                        f"{d}_reporting",
                        f"'{rep}' is not a reporting value; accepted: "
                        f"{', '.join(sorted(reporting_keys))}",
                    )
                    bad = True
                else:
                    reporting[d] = rep
        if bad:
            continue
        key = (study, reviewer, stage)
        if key in seen:
            log.add(
                row,
                "reviewer",
                f"'{reviewer}' already appraises study '{study}' at stage "
                f"'{stage}' in row {seen[key]}; keep one row",
            )
            continue
        seen[key] = row
        suggestions = suggest_levels(facts_of(studies[study]), rubric)
        for d, level in ratings.items():
            s = suggestions.get(d)
            if s is None or s.allows(level) or d in why:
                continue
            wanted = f"{s.level}" if s.level is not None else f"at most {s.max_level}"
            log.add(
                row,
                d,
                f"level {level} departs from the suggested {wanted} ({s.reason}); use the "
                f"suggested level or give the reason for overriding in '{d}_why'",
            )
            bad = True
        if bad:
            continue
        if key in existing:
            if existing[key]["ratings"] == ratings:
                parsed.append({"key": key, "row": row, "unchanged": True})
                continue
            log.add(
                row,
                "reviewer",
                f"'{reviewer}' has already appraised study '{study}' at stage '{stage}' with "
                "other ratings; an appraisal is not overwritten. Settle differences in the "
                "consensus appraisal",
            )
            continue
        if stage == "independent":
            independents.setdefault(study, set()).add(reviewer)
        elif len(independents.get(study, set())) < 2:
            n = len(independents.get(study, set()))
            log.add(
                row,
                "stage",
                f"a consensus for study '{study}' needs two independent appraisals first "
                f"(it has {n}); import the independent appraisals before the consensus",
            )
            continue
        parsed.append(
            {
                "key": key,
                "row": row,
                "ratings": ratings,
                "why": why,
                "reporting": reporting,
                "suggestions": suggestions,
                "unchanged": False,
            }
        )
    if log:
        raise InputFileError(sorted(log.problems, key=lambda p: (p.row or 0, p.column or "")))
    return parsed
