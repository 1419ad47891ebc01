"""Read-only queries that hand the evidence base to the pure computation modules.

:func:`analysis_frame` returns one row per estimate with the extraction-sheet column names (see
:mod:`exposhift.io.columns`) plus the derived columns of ``ANALYSIS_EXTRA`` and
``re_estimated`` (the estimate was written by a stored series re-estimation). It is the single
entry point from the store into synthesis, replication and gaps.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sqlalchemy import Connection, select

from exposhift.store.cursor_frames import select_frame
from exposhift.store.models import Appraisal, Estimate, Event, Exposure, Outcome, Study
from exposhift.vocab import DESIGNS

ST, EV, ES = Study.__table__, Event.__table__, Estimate.__table__
EX, OU, AP = Exposure.__table__, Outcome.__table__, Appraisal.__table__


def consensus_levels(conn: Connection) -> dict[str, int]:
    """Overall level of each study's appraisal of record (the consensus appraisal)."""
    stmt = (
        select(ST.c.key, AP.c.overall)
        .join(AP, AP.c.study_id == ST.c.id)
        .where(AP.c.stage == "consensus")
    )
    return {k: lvl for k, lvl in conn.execute(stmt) if lvl is not None}


STUDY_COLUMNS = (
    ("study_id", ST.c.key),
    ("citation", ST.c.citation),
    ("year", ST.c.year),
    ("doi", ST.c.doi),
    ("design", ST.c.design),
    ("comparison", ST.c.comparison),
    ("population", ST.c.population),
    ("data_source", ST.c.data_source),
    ("same_population_as", ST.c.same_population_as),
    ("assignment_grade", ST.c.assignment_grade),
    ("pre_points", ST.c.pre_points),
    ("post_points", ST.c.post_points),
    ("checks", ST.c.checks),
    ("demo", ST.c.demo),
)
EVENT_COLUMNS = (
    ("event_id", EV.c.key),
    ("exposure", EX.c.name),
    ("change_kind", EV.c.change_kind),
    ("change_direction", EV.c.change_direction),
    ("change_size", EV.c.change_size),
    ("change_unit", EV.c.change_unit),
    ("country", EV.c.country),
    ("area", EV.c.area),
    ("change_date", EV.c.change_date),
    ("family", EV.c.family),
)
ESTIMATE_COLUMNS = (
    ("outcome", OU.c.name),
    ("outcome_group", OU.c.outcome_group),
    ("measure", ES.c.measure),
    ("estimate_kind", ES.c.estimate_kind),
    ("per_unit", ES.c.per_unit),
    ("estimate", ES.c.point),
    ("ci_low", ES.c.ci_low),
    ("ci_high", ES.c.ci_high),
    ("ci_level", ES.c.ci_level),
    ("se", ES.c.se),
    ("p_value", ES.c.p_value),
    ("p_bound", ES.c.p_bound),
    ("baseline_risk", ES.c.baseline_risk),
    ("subgroup", ES.c.subgroup),
    ("time_window", ES.c.time_window),
    ("primary", ES.c.primary),
)
#: the analysis frame's columns before :func:`add_derived`, in order
FRAME_COLUMNS = (
    "estimate_uid",
    *(n for n, _ in STUDY_COLUMNS),
    *(n for n, _ in EVENT_COLUMNS),
    *(n for n, _ in ESTIMATE_COLUMNS),
)


def _frame(conn: Connection, stmt, names: list[str], ids: set | None = None) -> pd.DataFrame:
    """Rows of ``stmt`` as a DataFrame with ``names`` (read through the driver cursor:
    :func:`~exposhift.store.cursor_frames.select_frame`); with ``ids``, only rows whose first
    value is in it, so each column's type is inferred from the rows used, as a one-query join
    would."""
    return select_frame(conn, stmt, names, ids)


def analysis_frame(
    conn: Connection, *, exposure: str | None = None, outcome: str | None = None
) -> pd.DataFrame:
    """One row per estimate, joined with its study, event, exposure, outcome and level.

    Read as three narrow queries (estimates; their studies; their events) joined here, so a
    study's or event's text is read once rather than once per estimate.
    """
    est_cols = [("estimate_uid", ES.c.key), ("_study", ES.c.study_id), ("_event", ES.c.event_id)]
    est_cols += ESTIMATE_COLUMNS
    stmt = (
        select(*(c.label(n) for n, c in est_cols))
        .join(OU, ES.c.outcome_id == OU.c.id)
        .order_by(ES.c.key)
    )
    if exposure is not None:
        stmt = stmt.join(EV, ES.c.event_id == EV.c.id).join(EX, EV.c.exposure_id == EX.c.id)
        stmt = stmt.where(EX.c.name == exposure)
    if outcome is not None:
        stmt = stmt.where(OU.c.name == outcome)
    est = _frame(conn, stmt, [n for n, _ in est_cols])
    studies = _frame(
        conn,
        select(ST.c.id, *(c.label(n) for n, c in STUDY_COLUMNS)),
        ["_study", *(n for n, _ in STUDY_COLUMNS)],
        set(est["_study"].tolist()),
    )
    events = _frame(
        conn,
        select(EV.c.id, *(c.label(n) for n, c in EVENT_COLUMNS)).join(
            EX, EV.c.exposure_id == EX.c.id
        ),
        ["_event", *(n for n, _ in EVENT_COLUMNS)],
        set(est["_event"].tolist()),
    )
    frame = est.merge(studies, on="_study", how="left", sort=False, validate="many_to_one")
    frame = frame.merge(events, on="_event", how="left", sort=False, validate="many_to_one")
    frame = frame[list(FRAME_COLUMNS)]
    frame["same_population_as"] = (
        frame["same_population_as"]
        .astype(object)
        .where(frame["same_population_as"].notna() & (frame["same_population_as"] != ""), None)
    )
    out = add_derived(frame, consensus_levels(conn))
    from exposhift.store.series_records import re_estimated_keys

    out["re_estimated"] = out["estimate_uid"].isin(re_estimated_keys(conn)).astype(bool)
    return out


def add_derived(frame: pd.DataFrame, levels: dict[str, int]) -> pd.DataFrame:
    """Add design_family, change_year, family (default key) and level columns."""
    out = frame.copy()
    out["design_family"] = out["design"].map(lambda d: DESIGNS[d][0] if d in DESIGNS else None)
    out["change_year"] = pd.to_numeric(out["change_date"].astype(str).str[:4], errors="coerce")
    default_family = out["exposure"].astype(str) + " / " + out["change_kind"].astype(str)
    out["family"] = out["family"].where(
        out["family"].notna() & (out["family"] != ""), default_family
    )
    out["level"] = out["study_id"].map(levels).astype("float64")
    for col in (
        "change_size",
        "per_unit",
        "estimate",
        "ci_low",
        "ci_high",
        "ci_level",
        "se",
        "p_value",
        "baseline_risk",
    ):
        out[col] = pd.to_numeric(out[col], errors="coerce").astype("float64")
    out["primary"] = out["primary"].fillna(False).astype(bool)
    out["p_bound"] = out["p_bound"].fillna(False).astype(bool)
    if out.empty:
        out["change_year"] = out["change_year"].astype("float64")
    return out


def events_frame(conn: Connection) -> pd.DataFrame:
    """Every registered exposure-change event, with the number of studies that analyse it."""
    n_studies = (
        select(ES.c.event_id, ST.c.key).join(ST, ES.c.study_id == ST.c.id).distinct()
    ).subquery()
    from sqlalchemy import func

    counts = (
        select(n_studies.c.event_id, func.count().label("studies"))
        .group_by(n_studies.c.event_id)
        .subquery()
    )
    stmt = (
        select(
            EV.c.key.label("event_id"),
            EX.c.name.label("exposure"),
            EV.c.change_kind,
            EV.c.change_direction,
            EV.c.change_size,
            EV.c.change_unit,
            EV.c.country,
            EV.c.area,
            EV.c.change_date,
            EV.c.family,
            EV.c.demo,
            func.coalesce(counts.c.studies, 0).label("studies"),
        )
        .join(EX, EV.c.exposure_id == EX.c.id)
        .outerjoin(counts, counts.c.event_id == EV.c.id)
        .order_by(EV.c.key)
    )
    rows = conn.execute(stmt).mappings().all()
    frame = pd.DataFrame([dict(r) for r in rows], columns=list(stmt.selected_columns.keys()))
    frame["studies"] = frame["studies"].astype(np.int64)
    frame["change_year"] = pd.to_numeric(frame["change_date"].astype(str).str[:4], errors="coerce")
    default_family = frame["exposure"].astype(str) + " / " + frame["change_kind"].astype(str)
    frame["family"] = frame["family"].where(
        frame["family"].notna() & (frame["family"] != ""), default_family
    )
    return frame


def vocabulary_names(conn: Connection, entity: str) -> list[str]:
    """Sorted names of the exposures (``entity="exposure"``) or outcomes (``"outcome"``)."""
    table = {"exposure": EX, "outcome": OU}[entity]
    return sorted(n for (n,) in conn.execute(select(table.c.name)))


def study_events(conn: Connection, keys: list[str]) -> dict[str, set[str]]:
    """For each study key that exists, the keys of the events it has estimates for.

    A study without estimates maps to an empty set; keys not in the evidence base are left out
    (used to check ``same_population_as``, see :mod:`exposhift.io.overlap`).
    """
    out: dict[str, set[str]] = {}
    for i in range(0, len(keys), 500):
        part = keys[i : i + 500]
        for (k,) in conn.execute(select(ST.c.key).where(ST.c.key.in_(part))):
            out[k] = set()
        stmt = (
            select(ST.c.key, EV.c.key)
            .distinct()
            .join(ES, ES.c.study_id == ST.c.id)
            .join(EV, ES.c.event_id == EV.c.id)
            .where(ST.c.key.in_(part))
        )
        for study, event in conn.execute(stmt):
            out[study].add(event)
    return out
