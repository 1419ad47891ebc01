"""Dual independent review: importing appraisals, blinding, consensus, agreement.

Rules enforced here (not only in a user interface):

- **Blinding.** A reviewer's independent ratings of a study are hidden from everyone else until
  the study has at least ``REVIEWERS_BEFORE_UNBLINDING`` independent appraisals.
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

from exposhift.appraisal.agreement import agreement_table, overall_level_row
from exposhift.appraisal.rubric import load_rubric
from exposhift.appraisal.scoring import score_appraisal
from exposhift.errors import NotFoundError
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


def import_appraisals(
    store: Store,
    path: str | Path,
    *,
    encoding: str | None = None,
    rubric_path: str | Path | None = None,
    dry_run: bool = False,
) -> AppraisalImportSummary:
    """Import appraisals from a CSV/XLSX file in one transaction (all or nothing)."""
    rubric = load_rubric(rubric_path)
    sheet = read_sheet(path, encoding)
    frame = sheet.frame.set_axis(sheet.rows.tolist())
    label = sheet.file
    summary = AppraisalImportSummary(rubric=rubric.label, dry_run=dry_run)
    with store.write() as conn:
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

    def to_dict(self) -> dict[str, Any]:
        """What ``exposhift appraise show --json`` prints."""
        return {
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
    store: Store, study_key: str, viewer: str | None = None, rubric_path: str | Path | None = None
) -> StudyAppraisals:
    """A study's appraisals as ``viewer`` may see them (blinding applied)."""
    rubric = load_rubric(rubric_path)
    with store.read() as conn:
        studies = studies_by_key(conn)
        if study_key not in studies:
            raise NotFoundError(f"no study '{study_key}' in the evidence base")
        study = studies[study_key]
        aps = appraisals_of_study(conn, study["id"])
    by_ap = {a["id"]: a["ratings"] for a in aps}
    n_indep = sum(1 for a in aps if a["stage"] == "independent")
    unblinded = n_indep >= REVIEWERS_BEFORE_UNBLINDING
    views = []
    for a in aps:
        rs = {r["domain"]: r["level"] for r in by_ap.get(a["id"], [])}
        hidden = a["stage"] == "independent" and not unblinded and a["reviewer"] != viewer
        label = a["rubric_id"] + " (" + a["rubric_hash"][:12] + ")"
        if hidden:
            views.append(
                AppraisalView(
                    a["reviewer"],
                    a["stage"],
                    label,
                    None,
                    None,
                    "hidden until both independent appraisals are in",
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
        study_id=study_key,
        citation=study["citation"],
        design=study["design"],
        appraisals=views,
        of_record=record,
        independent=n_indep,
        domains=rubric.domain_keys,
        caution=rubric.caution,
    )


def agreement(store: Store) -> pd.DataFrame:
    """Agreement between independent reviewers: one row per domain, ``all domains`` (every
    study x domain pair; n = pairs) and ``overall level`` (n = studies). Percent agreement is
    0-100."""
    with store.read() as conn:
        rows = independent_ratings(conn)
        overall = independent_overall_levels(conn)
    frame = pd.DataFrame(rows, columns=["study_id", "reviewer", "domain", "level"])
    table = agreement_table(frame)
    levels = pd.DataFrame(overall, columns=["study_id", "reviewer", "overall"])
    out = pd.concat([table, pd.DataFrame([overall_level_row(levels)])], ignore_index=True)
    out.attrs = dict(table.attrs)
    return out
