"""Dual independent review: importing appraisals, blinding, consensus, agreement.

Rules enforced here (not only in a user interface):

- **Blinding by identity** (:func:`exposhift.access.may_see_independent`). A reviewer sees
  another reviewer's independent ratings of a study once both have submitted, or once the
  consensus is in; an editor or admin (the chair) once ``REVIEWERS_BEFORE_UNBLINDING`` are in;
  a reader never: readers see consensus appraisals only. Everyone sees her own. The viewer is
  the identity passed in, else the store's own (``--user`` and its account's role).
- **Who may write.** A reviewer records only her own independent appraisals; a consensus needs
  an editor; a reader writes nothing. Another reviewer's independent appraisal is imported
  only by an admin, or by an editor where the base already shows it to her, and this is
  checked before any comparison with the stored ones (:mod:`exposhift.services.blind_imports`:
  no answer tells a blinded rating).
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
from exposhift.appraisal.scoring import score_appraisal
from exposhift.errors import InputFileError, NotFoundError, Problem
from exposhift.io.appraisal_sheet import validate_appraisal_sheet
from exposhift.io.sheet import read_sheet
from exposhift.results import ReadsAsMapping
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

REVIEWERS_BEFORE_UNBLINDING = 2


@dataclass
class AppraisalImportSummary:
    added: int = 0
    unchanged: int = 0
    by_stage: dict[str, int] = field(default_factory=dict)
    rubric: str = ""
    dry_run: bool = False


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


def _refuse_blinded(conn, frame: pd.DataFrame, label: str, actor: Identity) -> None:
    """Before any comparison with the stored appraisals: refuse the rows that would compare
    with an independent appraisal ``actor`` may not see
    (:mod:`exposhift.services.blind_imports`)."""
    from exposhift.services.blind_imports import blinded_problems

    if not {"study_id", "reviewer", "stage"} <= set(frame.columns):
        return  # (missing columns are reported by the validation)
    rows = [
        (
            row,
            str(frame.at[row, "study_id"]),
            str(frame.at[row, "reviewer"]),
            frame.at[row, "stage"],
        )
        for row in frame.index
    ]
    problems = blinded_problems(conn, actor, rows, label)
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
    rubric = rubric_in_force(store, rubric_path)
    sheet = read_sheet(path, encoding)
    frame = sheet.frame.set_axis(sheet.rows.tolist())
    label = sheet.file
    summary = AppraisalImportSummary(rubric=rubric.label, dry_run=dry_run)
    require(store, "appraise")
    _check_authorship(frame, label, Identity(store.user, store.role))
    with store.write() as conn:
        _refuse_blinded(conn, frame, label, Identity(store.user, store.role))
        studies = studies_by_key(conn)
        parsed = validate_appraisal_sheet(frame, label, rubric, studies, existing_appraisals(conn))
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

    def to_dict(self) -> dict[str, Any]:
        return dict(vars(self))


@dataclass(frozen=True, eq=False)
class StudyAppraisals(ReadsAsMapping):
    """A study's appraisals as one viewer may see them (blinding applied); ``of_record`` is the
    consensus, the appraisal of record."""

    study_id: str
    citation: str
    design: str
    appraisals: list[AppraisalView]
    of_record: AppraisalView | None
    independent: int
    domains: tuple[str, ...]
    caution: str
    #: words for a consensus made under another rubric than the one in force (None: not so)
    older_rubric: str | None = None

    def to_dict(self) -> dict[str, Any]:
        """What ``exposhift appraise show --json`` prints."""
        return {
            **({"older_rubric": self.older_rubric} if self.older_rubric else {}),
            "study_id": self.study_id,
            "citation": self.citation,
            "design": self.design,
            "appraisals": [v.to_dict() for v in self.appraisals],
            "of_record": self.of_record.to_dict() if self.of_record else None,
            "independent": self.independent,
            "domains": self.domains,
            "caution": self.caution,
        }

    def __getitem__(self, key: str) -> Any:
        # callers that index by key get the views themselves, as before
        if key in ("appraisals", "of_record"):
            return getattr(self, key)
        return super().__getitem__(key)


def show_appraisals(
    store: Store,
    study_key: str,
    viewer: Identity | str | None = None,
    rubric_path: str | Path | None = None,
) -> StudyAppraisals:
    """A study's appraisals as ``viewer`` may see them (blinding by identity applied).

    ``viewer``: an :class:`~exposhift.access.Identity` (the dashboard's signed-in person), a
    name (with its account's role, else the store's), or None (the store's own identity).
    When the consensus of record was made under another rubric than the one in force, the
    result has ``older_rubric`` (:func:`older_rubric_note`); the views keep the hash each
    appraisal was made with.
    """
    from exposhift.services.accounts import viewer_of

    ident = viewer_of(store, viewer)
    rubric = rubric_in_force(store, rubric_path)
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
    return StudyAppraisals(
        older_rubric=older_rubric_note(store, aps, rubric),
        study_id=study_key,
        citation=study["citation"],
        design=study["design"],
        appraisals=views,
        of_record=record,
        independent=n_indep,
        domains=rubric.domain_keys,
        caution=rubric.caution,
    )


def visible_studies(conn, viewer: Identity) -> set[str]:
    """Studies all of whose independent appraisals ``viewer`` may see (blinding by identity)."""
    return {
        study
        for study, (reviewers, has_consensus) in review_states(conn).items()
        if all(may_see_independent(viewer, r, reviewers, has_consensus) for r in reviewers)
    }


def rubric_in_force(store: Store, rubric_path: str | Path | None = None):
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
    table = agreement_table(frame, rubric_in_force(store))
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
