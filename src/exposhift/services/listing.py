"""What ``exposhift list`` and ``exposhift show`` print: the names to type into the other
commands, and one study's record with its events, estimates and appraisal of record.

Read-only. Exposure and outcome names given as filters are resolved by
:func:`exposhift.services.lookup.resolve_name` (case-insensitive), like everywhere else.
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass
from typing import Any

import pandas as pd

from exposhift.errors import ConfigError, NotFoundError
from exposhift.services.appraising import StudyAppraisals, show_appraisals
from exposhift.services.browse import list_studies
from exposhift.services.lookup import resolve_name
from exposhift.store.appraisals import studies_by_key
from exposhift.store.database import Store
from exposhift.store.queries import analysis_frame, events_frame, vocabulary_names

LISTS = ("exposures", "outcomes", "studies", "events")

#: columns of each listing, in order
COLUMNS = {
    "exposures": ["exposure", "events", "events_evaluated", "studies", "outcomes", "estimates"],
    "outcomes": ["outcome", "outcome_group", "exposures", "studies", "estimates"],
    "studies": [
        "study_id",
        "year",
        "design",
        "level",
        "exposures",
        "outcomes",
        "estimates",
        "citation",
    ],
    "events": [
        "event_id",
        "exposure",
        "change_kind",
        "change_direction",
        "country",
        "change_date",
        "studies",
        "family",
    ],
}

#: the count columns of each listing (0 where nothing is counted)
COUNTS = {
    "exposures": COLUMNS["exposures"][1:],
    "outcomes": ["exposures", "studies", "estimates"],
    "studies": ["estimates"],
    "events": ["studies"],
}


def _counts(frame: pd.DataFrame, by: str, **named: tuple[str, str]) -> pd.DataFrame:
    out = frame.groupby(by, sort=True).agg(**named).reset_index()
    return out.astype({by: object})  # an empty group-by gives a float key column


def list_records(store: Store, what: str, exposure: str | None = None) -> pd.DataFrame:
    """One listing (``exposures``, ``outcomes``, ``studies`` or ``events``), optionally only
    the records of one exposure. Every known name is listed, with or without estimates."""
    if what not in LISTS:
        raise ConfigError(f"cannot list '{what}'; choose one of: {', '.join(LISTS)}")
    with store.read() as conn:
        names = {e: vocabulary_names(conn, e) for e in ("exposure", "outcome")}
        if exposure is not None:
            exposure = resolve_name(names["exposure"], "exposure", exposure)
        frame = analysis_frame(conn, exposure=exposure)
        events = events_frame(conn)
    if exposure is not None:
        events = events[events["exposure"] == exposure]
    if what == "exposures":
        base = pd.DataFrame(
            {"exposure": [exposure] if exposure else names["exposure"]}, dtype=object
        )
        ev = _counts(
            events.assign(evaluated=events["studies"] > 0),
            "exposure",
            events=("event_id", "size"),
            events_evaluated=("evaluated", "sum"),
        )
        est = _counts(
            frame,
            "exposure",
            studies=("study_id", "nunique"),
            outcomes=("outcome", "nunique"),
            estimates=("estimate_uid", "size"),
        )
        out = base.merge(ev, on="exposure", how="left").merge(est, on="exposure", how="left")
    elif what == "outcomes":
        groups = frame.drop_duplicates("outcome").set_index("outcome")["outcome_group"]
        base = pd.DataFrame(
            {"outcome": sorted(frame["outcome"].unique()) if exposure else names["outcome"]},
            dtype=object,
        )
        est = _counts(
            frame,
            "outcome",
            exposures=("exposure", "nunique"),
            studies=("study_id", "nunique"),
            estimates=("estimate_uid", "size"),
        )
        out = base.merge(est, on="outcome", how="left")
        out["outcome_group"] = out["outcome"].map(groups)
    elif what == "studies":
        out = list_studies(store)
        if exposure is not None:
            keep = set(frame["study_id"])
            out = out[out["study_id"].isin(keep)]
    else:
        out = events
    out = out.reset_index(drop=True)
    for c in COLUMNS[what]:
        if c not in out.columns:
            out[c] = None
    for c in COUNTS[what]:
        out[c] = out[c].fillna(0).astype("int64")
    return out[COLUMNS[what]]


@dataclass(frozen=True)
class StudyRecord:
    """One study as ``exposhift show`` prints it."""

    study: dict[str, Any]
    events: pd.DataFrame
    estimates: pd.DataFrame
    appraisals: StudyAppraisals  # show_appraisals(): blinding applied, of_record = consensus

    def to_dict(self) -> dict[str, Any]:
        ap = self.appraisals
        return {
            "study": self.study,
            "events": self.events.to_dict(orient="records"),
            "estimates": self.estimates.to_dict(orient="records"),
            "appraisal_of_record": ap.of_record.to_dict() if ap.of_record else None,
            "appraisals": [
                {
                    "reviewer": v.reviewer,
                    "stage": v.stage,
                    "overall": v.overall,
                    "blinded": v.blinded,
                }
                for v in ap.appraisals
            ],
            "caution": ap.caution,
        }


STUDY_FIELDS = (
    "key",
    "citation",
    "year",
    "doi",
    "design",
    "comparison",
    "population",
    "data_source",
    "assignment_grade",
    "pre_points",
    "post_points",
    "checks",
    "demo",
)
EVENT_COLUMNS = [
    "event_id",
    "exposure",
    "change_kind",
    "change_direction",
    "change_size",
    "change_unit",
    "country",
    "area",
    "change_date",
    "family",
]
ESTIMATE_COLUMNS = [
    "estimate_uid",
    "event_id",
    "outcome",
    "measure",
    "estimate_kind",
    "estimate",
    "ci_low",
    "ci_high",
    "ci_level",
    "se",
    "p_value",
    "subgroup",
    "time_window",
    "primary",
]


def study_record(store: Store, study_id: str, viewer: str | None = None) -> StudyRecord:
    """The study ``study_id`` with its events, estimates and appraisals (independent ones stay
    hidden from ``viewer`` until both are in; the consensus appraisal is the one of record)."""
    with store.read() as conn:
        studies = studies_by_key(conn)
        if study_id not in studies:
            folded = {k.casefold(): k for k in studies}
            if study_id.casefold() in folded:
                study_id = folded[study_id.casefold()]
            else:
                close = difflib.get_close_matches(study_id, list(studies), n=3, cutoff=0.6)
                hint = (
                    f"; did you mean {', '.join(map(repr, close))}?"
                    if close
                    else "; 'exposhift list studies' lists them"
                )
                raise NotFoundError(f"no study '{study_id}' in the evidence base{hint}")
        frame = analysis_frame(conn)
    frame = frame[frame["study_id"] == study_id]
    row = studies[study_id]
    study = {k: row[k] for k in STUDY_FIELDS}
    study["study_id"] = study.pop("key")
    events = frame.drop_duplicates("event_id")[EVENT_COLUMNS].reset_index(drop=True)
    events["change_date"] = events["change_date"].astype(str)
    estimates = frame[ESTIMATE_COLUMNS].reset_index(drop=True)
    appraisals = show_appraisals(store, study_id, viewer)
    return StudyRecord(study, events, estimates, appraisals)
