"""What an overview of the evidence base needs, counted by the database: no estimate is read.

The overview (:func:`exposhift.services.browse.evidence_overview`) shows per exposure × outcome
how many studies, events and estimates there are, and per design family and appraisal level
how many studies have estimates. Counted with SQL aggregates these cost a few small queries
on any size of evidence base, where reading the analysis frame costs one row per estimate.
"""

from __future__ import annotations

import pandas as pd
from sqlalchemy import Connection, func, select

from exposhift.store.cursor_frames import select_frame
from exposhift.store.queries import ES, EV, EX, OU, ST, consensus_levels

PAIR_COLUMNS = ["exposure", "outcome", "outcome_group", "studies", "events", "estimates"]


def pair_counts(conn: Connection) -> pd.DataFrame:
    """Per exposure × outcome with at least one estimate: its outcome group and the number of
    distinct studies, distinct events and estimates (unsorted)."""
    stmt = (
        select(
            EX.c.name,
            OU.c.name,
            OU.c.outcome_group,
            func.count(ES.c.study_id.distinct()),
            func.count(ES.c.event_id.distinct()),
            func.count(),
        )
        .select_from(ES)
        .join(EV, ES.c.event_id == EV.c.id)
        .join(EX, EV.c.exposure_id == EX.c.id)
        .join(OU, ES.c.outcome_id == OU.c.id)
        .group_by(EX.c.name, OU.c.name, OU.c.outcome_group)
    )
    frame = select_frame(conn, stmt, PAIR_COLUMNS)
    for col in ("studies", "events", "estimates"):
        frame[col] = frame[col].astype("int64")
    return frame


def studies_with_estimates(conn: Connection) -> pd.DataFrame:
    """One row per study that has at least one estimate: ``study_id`` (its key), ``design``,
    ``demo`` and ``level`` (the overall level of its consensus appraisal, NaN without one)."""
    stmt = (
        select(ST.c.key, ST.c.design, ST.c.demo)
        .where(ST.c.id.in_(select(ES.c.study_id).distinct()))
        .order_by(ST.c.key)
    )
    frame = select_frame(conn, stmt, ["study_id", "design", "demo"])
    frame["level"] = frame["study_id"].map(consensus_levels(conn)).astype("float64")
    return frame


#: what a study list joins per study: the listing's column -> the column read for it
STUDY_LINKS = {
    "exposures": ("exposure", EX.c.name),
    "outcomes": ("outcome", OU.c.name),
    "events": ("event_id", EV.c.key),
    "countries": ("country", EV.c.country),
}


def study_links(conn: Connection) -> dict[str, pd.DataFrame]:
    """Per entry of :data:`STUDY_LINKS`: the distinct (``study_id``, value) pairs of the
    studies' estimates (values that are not NULL), one small query each."""
    out = {}
    for name, (col, column) in STUDY_LINKS.items():
        stmt = (
            select(ST.c.key, column)
            .distinct()
            .select_from(ES)
            .join(ST, ES.c.study_id == ST.c.id)
            .join(EV, ES.c.event_id == EV.c.id)
            .join(EX, EV.c.exposure_id == EX.c.id)
            .join(OU, ES.c.outcome_id == OU.c.id)
            .where(column.is_not(None))
        )
        out[name] = select_frame(conn, stmt, ["study_id", col])
    return out


def estimates_per_study(conn: Connection) -> pd.DataFrame:
    """``study_id`` and ``estimates`` (how many) of every study with at least one estimate,
    with its ``level`` of record (NaN without a consensus appraisal)."""
    stmt = (
        select(ST.c.key, func.count())
        .select_from(ES)
        .join(ST, ES.c.study_id == ST.c.id)
        .group_by(ST.c.key)
    )
    frame = select_frame(conn, stmt, ["study_id", "estimates"])
    frame["estimates"] = frame["estimates"].astype("int64")
    frame["level"] = frame["study_id"].map(consensus_levels(conn)).astype("float64")
    return frame
