"""Appraise a study in the browser: the rubric form, submitting, comparing, the consensus.

One code path with ``exposhift appraise import``: a submitted form is written as a one-row
appraisal sheet (``study_id, reviewer, stage, <domain>, <domain>_why, <domain>_reporting``) to a
private temporary directory and imported by
:func:`exposhift.services.appraising.import_appraisals`. A form therefore obeys every rule of
the appraisal sheet — core domains rated, levels 0-3, a justification when a rating departs from
the level the rubric suggests from the recorded facts, one appraisal per study, reviewer and
stage, a consensus only after two independent appraisals — with the same messages, and its
problems come back with the domain as their column. Blinding is the reading service's
(:func:`~exposhift.services.appraising.show_appraisals`): the comparison exists only once both
independent appraisals are in.
"""

from __future__ import annotations

import csv
import io
import tempfile
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from exposhift.appraisal.rubric_types import DesignCriteria, ReportingDef
from exposhift.appraisal.suggestions import Suggestion, suggest_levels
from exposhift.errors import NotFoundError
from exposhift.io.appraisal_sheet import facts_of
from exposhift.services.acting import as_user
from exposhift.services.appraising import (
    REVIEWERS_BEFORE_UNBLINDING,
    AppraisalImportSummary,
    AppraisalView,
    import_appraisals,
    rubric_in_force,
    show_appraisals,
)
from exposhift.store.appraisals import studies_by_key
from exposhift.store.database import Store

FORM_FILE = "appraisal-form.csv"


@dataclass(frozen=True)
class DomainForm:
    """One rubric domain as the form shows it."""

    key: str
    title: str
    question: str
    core: bool
    apart: bool
    look_for: tuple[str, ...]
    levels: tuple[tuple[int, str, tuple[str, ...]], ...]  # (level, name, criteria), 3 down to 0
    design: DesignCriteria | None  # the criteria for this study's design, if the rubric has any
    suggestion: Suggestion | None  # the tool's suggested level (or limit) and its reason


@dataclass(frozen=True)
class AppraisalForm:
    study: str
    citation: str
    design: str
    rubric: str
    summary_rule: str
    domains: tuple[DomainForm, ...]
    reporting: tuple[ReportingDef, ...]
    appraisals: tuple[AppraisalView, ...]  # as the viewer may see them (blinding applied)
    independent: int
    caution: str

    def own(self, reviewer: str | None, stage: str = "independent") -> AppraisalView | None:
        """The viewer's own appraisal at ``stage``, if it is in."""
        return next(
            (a for a in self.appraisals if a.reviewer == reviewer and a.stage == stage), None
        )

    @property
    def consensus(self) -> AppraisalView | None:
        return next((a for a in self.appraisals if a.stage == "consensus"), None)

    @property
    def unblinded(self) -> bool:
        return self.independent >= REVIEWERS_BEFORE_UNBLINDING


def needs_reason(suggestion: Suggestion | None, level: int | None) -> bool:
    """Whether ``level`` departs from the suggestion, so that a reason must be given (the rule of
    the appraisal sheet: :meth:`Suggestion.allows`)."""
    return suggestion is not None and level is not None and not suggestion.allows(level)


def appraisal_form(
    store: Store, study: str, viewer: str | None, rubric_path: str | Path | None = None
) -> AppraisalForm:
    """The rubric form for ``study``: each domain's question, its levels' criteria, the
    suggestion from the study's recorded facts; and the appraisals ``viewer`` may see."""
    rubric = rubric_in_force(store, rubric_path)
    with store.read() as conn:
        studies = studies_by_key(conn)
    if study not in studies:
        raise NotFoundError(f"no study '{study}' in the evidence base")
    record = studies[study]
    suggestions = suggest_levels(facts_of(record), rubric)
    domains = tuple(
        DomainForm(
            key=d.key,
            title=d.title,
            question=d.question,
            core=d.key in rubric.core_domains,
            apart=d.key in rubric.apart_domains,
            look_for=d.look_for,
            levels=tuple((lv, rubric.level_name(lv), crit) for lv, crit in d.levels),
            design=d.for_design(record["design"]),
            suggestion=suggestions.get(d.key),
        )
        for d in rubric.domains
    )
    view = show_appraisals(store, study, viewer, rubric_path)
    return AppraisalForm(
        study=study,
        citation=record["citation"],
        design=record["design"],
        rubric=rubric.label,
        summary_rule=rubric.summary_text,
        domains=domains,
        reporting=rubric.reporting,
        appraisals=tuple(view["appraisals"]),
        independent=int(view["independent"]),
        caution=rubric.caution,
    )


def form_csv(
    study: str,
    reviewer: str,
    stage: str,
    ratings: dict[str, int | None],
    reasons: dict[str, str],
    reporting: dict[str, str | None],
    domains: tuple[str, ...],
) -> bytes:
    """The form as a one-row appraisal sheet (the format of ``exposhift appraise import``)."""
    header = ["study_id", "reviewer", "stage"]
    row = [study, reviewer, stage]
    for d in domains:
        level = ratings.get(d)
        header += [d, f"{d}_why", f"{d}_reporting"]
        row += [
            "" if level is None else str(int(level)),
            (reasons.get(d) or "").strip(),
            reporting.get(d) or "",
        ]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    w.writerow(row)
    return buf.getvalue().encode("utf-8")


def submit_appraisal(
    store: Store,
    study: str,
    ratings: dict[str, int | None],
    reasons: dict[str, str] | None = None,
    reporting: dict[str, str | None] | None = None,
    *,
    reviewer: str | None,
    stage: str = "independent",
    rubric_path: str | Path | None = None,
) -> AppraisalImportSummary:
    """Record ``reviewer``'s appraisal of ``study`` at ``stage`` through the appraisal import
    (every rule, one transaction). Problems raise :class:`InputFileError` whose columns are
    the domain keys; nothing is written then."""
    acting = as_user(store, reviewer, "record an appraisal")
    rubric = rubric_in_force(store, rubric_path)
    text = form_csv(
        study,
        acting.user,
        stage,
        ratings,
        reasons or {},
        reporting or {},
        rubric.domain_keys,
    )
    with tempfile.TemporaryDirectory(prefix="exposhift-appraisal-") as tmp:
        path = Path(tmp) / FORM_FILE
        path.write_bytes(text)
        return import_appraisals(acting, path, rubric_path=rubric_path)


def comparison(form: AppraisalForm) -> pd.DataFrame | None:
    """The independent appraisals side by side, one row per domain, with ``differs`` marking a
    disagreement; None while any independent appraisal is hidden or fewer than two are in."""
    indep = [a for a in form.appraisals if a.stage == "independent"]
    if len(indep) < REVIEWERS_BEFORE_UNBLINDING or any(a.blinded for a in indep):
        return None
    rows = []
    for d in form.domains:
        levels = [(a.ratings or {}).get(d.key) for a in indep]
        given = {lv for lv in levels if lv is not None}
        s = d.suggestion
        rows.append(
            {
                "domain": d.title,
                "key": d.key,
                **{a.reviewer: lv for a, lv in zip(indep, levels, strict=True)},
                "differs": len(given) > 1 or (len(given) == 1 and None in levels),
                "suggested": ""
                if s is None
                else (str(s.level) if s.level is not None else f"at most {s.max_level}"),
            }
        )
    rows.append(
        {
            "domain": "overall level (the rubric's summary rule)",
            "key": "overall",
            **{a.reviewer: a.overall for a in indep},
            "differs": len({a.overall for a in indep}) > 1,
            "suggested": "",
        }
    )
    return pd.DataFrame(rows)
