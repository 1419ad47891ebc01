"""Dual independent review: importing appraisals, blinding, consensus, agreement.

Rules enforced here (not only in a user interface):

- **Blinding by identity** (:func:`exposhift.access.may_see_independent`). A reviewer sees
  another reviewer's independent ratings of a study once both have submitted, or once the
  consensus is in; an editor or admin (the chair) once ``REVIEWERS_BEFORE_UNBLINDING`` are in;
  a reader never: readers see consensus appraisals only. Everyone sees her own. The viewer is
  the identity passed in, else the store's own (``--user`` and its account's role).
- **Who may write.** A reviewer records only her own independent appraisals; a consensus, or an
  appraisal under another reviewer's name, needs an editor; a reader writes nothing.
- **Consensus** may be recorded only after two independent appraisals exist; it becomes the
  study's appraisal of record (``analysis_frame``'s ``level``).
- One appraisal per study, reviewer and stage. Re-importing an identical appraisal changes
  nothing; a different one for the same study, reviewer and stage is refused.
- A rating above a level the engine suggests from the recorded facts needs a justification
  (``<domain>_why``); the suggestion and its reason are stored beside the rating.
- Every appraisal records the rubric id and content hash it was made with.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from exposhift.access import (
    Identity,
    hidden_reason,
    may_see_independent,
    require,
)
from exposhift.appraisal.agreement import agreement_table, overall_level_row
from exposhift.appraisal.rubric import load_rubric
from exposhift.appraisal.rubric_types import Rubric
from exposhift.appraisal.scoring import StudyFacts, score_appraisal, suggest_levels
from exposhift.appraisal.suggestions import facts_from_record
from exposhift.errors import InputFileError, NotFoundError, Problem
from exposhift.io.sheet import read_sheet
from exposhift.store.appraisals import (
    APPRAISAL_TABLE,
    RATING_TABLE,
    appraisals_of_study,
    existing_appraisals,
    independent_overall_levels,
    independent_ratings,
    review_states,
    studies_by_key,
)
from exposhift.store.database import Store
from exposhift.store.writer import Writer
from exposhift.vocab import REVIEW_STAGES

META_COLUMNS = ("study_id", "reviewer", "stage")


@dataclass
class AppraisalImportSummary:
    added: int = 0
    unchanged: int = 0
    by_stage: dict[str, int] = field(default_factory=dict)
    rubric: str = ""
    dry_run: bool = False


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


def _validate(frame: pd.DataFrame, label: str, rubric: Rubric, studies, existing):
    """Every problem in one pass; returns parsed appraisals in file order."""
    problems: list[Problem] = []
    domains = rubric.domain_keys
    known = (
        set(META_COLUMNS)
        | set(domains)
        | {f"{d}_why" for d in domains}
        | {f"{d}_reporting" for d in domains}
    )
    for col in META_COLUMNS:
        if col not in frame.columns:
            problems.append(Problem(label, 1, col, "required column is missing"))
    unknown = [c for c in frame.columns if c not in known]
    for col in unknown:
        problems.append(
            Problem(
                label,
                1,
                col,
                f"unknown column; accepted domain keys: {', '.join(domains)} (with optional "
                "'<domain>_why' and '<domain>_reporting' columns)",
            )
        )
    if problems:
        raise InputFileError(problems)
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
            problems.append(Problem(label, row, "study_id", "empty; name the study"))
            bad = True
        elif study not in studies:
            problems.append(
                Problem(
                    label,
                    row,
                    "study_id",
                    f"no study '{study}' in the evidence base; import it first",
                )
            )
            bad = True
        if not reviewer:
            problems.append(Problem(label, row, "reviewer", "empty; name the reviewer"))
            bad = True
        if stage not in REVIEW_STAGES:
            problems.append(
                Problem(
                    label,
                    row,
                    "stage",
                    f"'{stage}' is not a stage; accepted: {', '.join(REVIEW_STAGES)}",
                )
            )
            bad = True
        ratings: dict[str, int] = {}
        why: dict[str, str] = {}
        reporting: dict[str, str] = {}
        for d in domains:
            text = rec.get(d, "")
            if text == "":
                if d in rubric.core_domains:
                    problems.append(
                        Problem(label, row, d, "core domain not rated; give a level 0-3")
                    )
                    bad = True
                continue
            level = _int_level(text)
            if level is None or level not in (0, 1, 2, 3):
                what = "is not one of the levels" if level is None else "is outside 0-3"
                problems.append(
                    Problem(
                        label,
                        row,
                        d,
                        f"level '{text}' {what}; accepted: 0 (fatal), 1 (weak), "
                        "2 (adequate), 3 (strong)",
                    )
                )
                bad = True
                continue
            ratings[d] = level
            if rec.get(f"{d}_why", ""):
                why[d] = rec[f"{d}_why"]
            rep = rec.get(f"{d}_reporting", "")
            if rep:
                if rep not in reporting_keys:
                    problems.append(
                        Problem(
                            label,
                            row,
                            f"{d}_reporting",
                            f"'{rep}' is not a reporting value; accepted: "
                            f"{', '.join(sorted(reporting_keys))}",
                        )
                    )
                    bad = True
                else:
                    reporting[d] = rep
        if bad:
            continue
        key = (study, reviewer, stage)
        if key in seen:
            problems.append(
                Problem(
                    label,
                    row,
                    "reviewer",
                    f"'{reviewer}' already appraises study '{study}' at stage "
                    f"'{stage}' in row {seen[key]}; keep one row",
                )
            )
            continue
        seen[key] = row
        suggestions = suggest_levels(facts_of(studies[study]), rubric)
        for d, level in ratings.items():
            s = suggestions.get(d)
            if s is None or s.allows(level) or d in why:
                continue
            wanted = f"{s.level}" if s.level is not None else f"at most {s.max_level}"
            problems.append(
                Problem(
                    label,
                    row,
                    d,
                    f"level {level} departs from the suggested {wanted} ({s.reason}); use the "
                    f"suggested level or give the reason for overriding in '{d}_why'",
                )
            )
            bad = True
        if bad:
            continue
        if key in existing:
            if existing[key]["ratings"] == ratings:
                parsed.append({"key": key, "row": row, "unchanged": True})
                continue
            problems.append(
                Problem(
                    label,
                    row,
                    "reviewer",
                    f"'{reviewer}' has already appraised study '{study}' at stage '{stage}' with "
                    "other ratings; an appraisal is not overwritten. Settle differences in the "
                    "consensus appraisal",
                )
            )
            continue
        if stage == "independent":
            independents.setdefault(study, set()).add(reviewer)
        elif len(independents.get(study, set())) < 2:
            n = len(independents.get(study, set()))
            problems.append(
                Problem(
                    label,
                    row,
                    "stage",
                    f"a consensus for study '{study}' needs two independent appraisals first "
                    f"(it has {n}); import the independent appraisals before the consensus",
                )
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
    if problems:
        raise InputFileError(sorted(problems, key=lambda p: (p.row or 0, p.column or "")))
    return parsed


def _check_authorship(frame: pd.DataFrame, label: str, actor: Identity) -> None:
    """A reviewer may record only her own independent appraisals (every row checked)."""
    if actor.may_do("appraise-others") or not {"reviewer", "stage"} <= set(frame.columns):
        return  # (missing columns are reported by the validation)
    problems = []
    for row in frame.index:
        reviewer, stage = frame.at[row, "reviewer"], frame.at[row, "stage"]
        if stage == "consensus":
            problems.append(
                Problem(
                    label,
                    row,
                    "stage",
                    f"'{actor.name}' has the role {actor.role} and may not record a consensus "
                    "(needs editor or higher); leave the consensus to the chair",
                )
            )
        elif reviewer != actor.name:
            problems.append(
                Problem(
                    label,
                    row,
                    "reviewer",
                    f"'{actor.name}' has the role {actor.role} and may record only her own "
                    f"appraisals, not '{reviewer}''s; put your own name in this column",
                )
            )
    if problems:
        raise InputFileError(problems)


def import_appraisals(
    store: Store,
    path: str | Path,
    *,
    encoding: str | None = None,
    rubric_path: str | Path | None = None,
    dry_run: bool = False,
) -> AppraisalImportSummary:
    """Import appraisals from a CSV/XLSX file in one transaction (all or nothing), under the
    rubric the evidence base records (``rubric_path``: a one-run override)."""
    rubric = _rubric(store, rubric_path)
    sheet = read_sheet(path, encoding)
    frame = sheet.frame.set_axis(sheet.rows.tolist())
    label = sheet.file
    summary = AppraisalImportSummary(rubric=rubric.label, dry_run=dry_run)
    require(store, "appraise")
    _check_authorship(frame, label, Identity(store.user, store.role))
    with store.write() as conn:
        studies = studies_by_key(conn)
        parsed = _validate(frame, label, rubric, studies, existing_appraisals(conn))
        w = Writer(conn, store.user)
        for item in parsed:
            if item["unchanged"]:
                summary.unchanged += 1
                continue
            study, reviewer, stage = item["key"]
            score = score_appraisal(item["ratings"], rubric)
            summary.added += 1
            summary.by_stage[stage] = summary.by_stage.get(stage, 0) + 1
            if dry_run:
                continue
            ap_id = w.insert(
                APPRAISAL_TABLE,
                {
                    "study_id": studies[study]["id"],
                    "reviewer": reviewer,
                    "stage": stage,
                    "rubric_id": rubric.rubric_id,
                    "rubric_hash": rubric.content_hash,
                    "overall": score.overall,
                },
                row_key=f"{study}|{reviewer}|{stage}",
            )
            rows = []
            for d, level in item["ratings"].items():
                s = item["suggestions"].get(d)
                rows.append(
                    {
                        "appraisal_id": ap_id,
                        "domain": d,
                        "level": level,
                        "reporting": item["reporting"].get(d),
                        "justification": item["why"].get(d),
                        "suggested_level": None if s is None else s.max_level,
                        "suggestion_reason": None if s is None else s.reason,
                    }
                )
            w.insert_many(
                RATING_TABLE,
                rows,
                row_keys=[f"{study}|{reviewer}|{stage}|{r['domain']}" for r in rows],
            )
        w.flush()
        if dry_run:
            conn.rollback()
    return summary


# ----------------------------------------------------------------------------- reading
@dataclass(frozen=True)
class AppraisalView:
    reviewer: str
    stage: str
    rubric: str
    overall: int | None
    decided_by: str | None
    reason: str
    ratings: dict[str, int] | None  # None while blinded
    justifications: dict[str, str]
    suggestions: dict[str, tuple[int | None, str]]
    blinded: bool


def show_appraisals(
    store: Store,
    study_key: str,
    viewer: Identity | str | None = None,
    rubric_path: str | Path | None = None,
) -> dict[str, Any]:
    """A study's appraisals as ``viewer`` may see them (blinding by identity applied).

    ``viewer``: an :class:`~exposhift.access.Identity` (the dashboard's signed-in person), a
    name (with its account's role, else the store's), or None (the store's own identity).
    When the consensus of record was made under another rubric than the one in force, the
    result has ``older_rubric`` (:func:`older_rubric_note`); the views keep the hash each
    appraisal was made with.
    """
    from exposhift.services.accounts import viewer_of

    ident = viewer_of(store, viewer)
    rubric = _rubric(store, rubric_path)
    with store.read() as conn:
        studies = studies_by_key(conn)
        if study_key not in studies:
            raise NotFoundError(f"no study '{study_key}' in the evidence base")
        study = studies[study_key]
        aps = appraisals_of_study(conn, study["id"])
    by_ap = {a["id"]: a["ratings"] for a in aps}
    n_indep = sum(1 for a in aps if a["stage"] == "independent")
    reviewers = {a["reviewer"] for a in aps if a["stage"] == "independent"}
    has_consensus = any(a["stage"] == "consensus" for a in aps)
    views = []
    for a in aps:
        rs = {r["domain"]: r["level"] for r in by_ap.get(a["id"], [])}
        hidden = a["stage"] == "independent" and not may_see_independent(
            ident, a["reviewer"], reviewers, has_consensus
        )
        label = a["rubric_id"] + " (" + a["rubric_hash"][:12] + ")"
        if hidden:
            views.append(
                AppraisalView(
                    a["reviewer"],
                    a["stage"],
                    label,
                    None,
                    None,
                    hidden_reason(ident),
                    None,
                    {},
                    {},
                    True,
                )
            )
            continue
        score = score_appraisal(rs, rubric)
        views.append(
            AppraisalView(
                a["reviewer"],
                a["stage"],
                label,
                a["overall"],
                score.deciding_domain,
                score.reason,
                rs,
                {
                    r["domain"]: r["justification"]
                    for r in by_ap.get(a["id"], [])
                    if r["justification"]
                },
                {
                    r["domain"]: (r["suggested_level"], r["suggestion_reason"])
                    for r in by_ap.get(a["id"], [])
                    if r["suggestion_reason"]
                },
                False,
            )
        )
    record = next((v for v in views if v.stage == "consensus"), None)
    older = older_rubric_note(store, aps, rubric)
    return {
        **({"older_rubric": older} if older else {}),
        "study_id": study_key,
        "citation": study["citation"],
        "design": study["design"],
        "appraisals": views,
        "of_record": record,
        "independent": n_indep,
        "domains": rubric.domain_keys,
        "caution": rubric.caution,
    }


def visible_studies(conn, viewer: Identity) -> set[str]:
    """Studies all of whose independent appraisals ``viewer`` may see (blinding by identity)."""
    return {
        study
        for study, (reviewers, has_consensus) in review_states(conn).items()
        if all(may_see_independent(viewer, r, reviewers, has_consensus) for r in reviewers)
    }


def _rubric(store: Store, rubric_path: str | Path | None):
    """The rubric file of a one-run ``--rubric``, else the rubric the evidence base records."""
    if rubric_path is not None:
        return load_rubric(rubric_path)
    from exposhift.services.workspace import stored_rubric

    return stored_rubric(store)


def older_rubric_note(store: Store, aps: list[dict], rubric) -> str | None:
    """Words for a consensus made under a rubric other than ``rubric`` (None otherwise)."""
    consensus = next((a for a in aps if a["stage"] == "consensus"), None)
    if consensus is None or consensus["rubric_hash"] == rubric.content_hash:
        return None
    from exposhift.store.method_records import method_versions

    with store.read() as conn:
        held = [
            v for v in method_versions(conn, "rubric") if v.content_hash == consensus["rubric_hash"]
        ]
    made = (
        f"rubric version {held[-1].number} ({held[-1].declared})"
        if held
        else f"rubric {consensus['rubric_id']} (hash {consensus['rubric_hash'][:12]}), "
        "not stored in this evidence base"
    )
    return (
        f"consensus made under an older rubric: {made}; the rubric in force is {rubric.label}. "
        "Its overall level stands as decided; re-appraise to apply the rubric in force"
    )


def agreement(store: Store, viewer: Identity | str | None = None) -> pd.DataFrame:
    """Agreement between independent reviewers: one row per domain, ``all domains`` (every
    study x domain pair; n = pairs) and ``overall level`` (n = studies). Percent agreement is
    0-100.

    Only studies whose independent appraisals ``viewer`` may all see are counted (readers:
    none); ``attrs["studies_counted"]`` says how many, ``attrs["blinded_note"]`` why fewer.
    """
    from exposhift.services.accounts import viewer_of

    ident = viewer_of(store, viewer)
    with store.read() as conn:
        seen = visible_studies(conn, ident)
        total = len(review_states(conn))
        rows = [r for r in independent_ratings(conn) if r["study_id"] in seen]
        overall = [r for r in independent_overall_levels(conn) if r["study_id"] in seen]
    frame = pd.DataFrame(rows, columns=["study_id", "reviewer", "domain", "level"])
    table = agreement_table(frame, _rubric(store, None))
    levels = pd.DataFrame(overall, columns=["study_id", "reviewer", "overall"])
    out = pd.concat([table, pd.DataFrame([overall_level_row(levels)])], ignore_index=True)
    out.attrs = dict(table.attrs)
    out.attrs["studies_counted"] = len(seen)
    out.attrs["blinded_note"] = (
        ""
        if len(seen) == total
        else f"{total - len(seen)} of {total} appraised studies are left out: their independent "
        f"appraisals are blinded for {ident.name or 'this session'} ({ident.role})"
    )
    return out
