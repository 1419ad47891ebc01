"""Reads behind the dashboard's entry forms: one study with its events and estimates (with
their versions), the current version of named records, and the audit entries of a record since
a version.

The forms send their edits through the import path (:mod:`exposhift.services.editing`); these
reads only give them what to show and the versions the edit is based on.
"""

from __future__ import annotations

import json
from typing import Any

from sqlalchemy import Connection, select

from exposhift.store.models import (
    NATURAL_KEY,
    Appraisal,
    AuditEntry,
    Estimate,
    Event,
    Exposure,
    Outcome,
    Study,
)
from exposhift.store.records import TABLES

ST, EV, ES = Study.__table__, Event.__table__, Estimate.__table__
EX, OU = Exposure.__table__, Outcome.__table__
AUDIT = AuditEntry.__table__
AP = Appraisal.__table__

#: a stored field holding another record's integer id -> that record's entity
ID_FIELDS: dict[str, str] = {
    "study_id": "study",
    "event_id": "event",
    "exposure_id": "exposure",
    "outcome_id": "outcome",
    "appraisal_id": "appraisal",
}


def study_rows(conn: Connection, key: str) -> dict[str, list[dict[str, Any]]] | None:
    """The study ``key`` (one row), the events its estimates refer to and its estimates, each
    row with its ``version``; None when there is no such study."""
    study = conn.execute(select(ST).where(ST.c.key == key)).mappings().first()
    if study is None:
        return None
    est_stmt = (
        select(
            ES,
            EV.c.key.label("event"),
            OU.c.name.label("outcome"),
            OU.c.outcome_group.label("outcome_group"),
        )
        .join(EV, EV.c.id == ES.c.event_id)
        .join(OU, OU.c.id == ES.c.outcome_id)
        .where(ES.c.study_id == study["id"])
        .order_by(ES.c.key)
    )
    estimates = [dict(r) for r in conn.execute(est_stmt).mappings()]
    event_ids = sorted({r["event_id"] for r in estimates})
    ev_stmt = (
        select(EV, EX.c.name.label("exposure"))
        .join(EX, EX.c.id == EV.c.exposure_id)
        .where(EV.c.id.in_(event_ids))
        .order_by(EV.c.key)
    )
    events = [dict(r) for r in conn.execute(ev_stmt).mappings()] if event_ids else []
    return {"study": [dict(study)], "events": events, "estimates": estimates}


def events_by_key(conn: Connection, keys: list[str]) -> dict[str, dict[str, Any]]:
    """The stored events named in ``keys`` (each with its exposure's name and version)."""
    if not keys:
        return {}
    stmt = select(EV, EX.c.name.label("exposure")).join(EX, EX.c.id == EV.c.exposure_id)
    rows = conn.execute(stmt.where(EV.c.key.in_(keys))).mappings()
    return {r["key"]: dict(r) for r in rows}


def event_keys(conn: Connection) -> list[str]:
    """Every event key, sorted (for the forms' choices)."""
    return [k for (k,) in conn.execute(select(EV.c.key).order_by(EV.c.key))]


def versions_of(conn: Connection, entity: str, keys: list[str]) -> dict[str, int]:
    """The current version of each named record of ``entity`` that exists (absent: deleted)."""
    if not keys:
        return {}
    table = TABLES[entity]
    col = table.c[NATURAL_KEY[entity]]
    out: dict[str, int] = {}
    for i in range(0, len(keys), 500):
        part = keys[i : i + 500]
        out.update(dict(conn.execute(select(col, table.c.version).where(col.in_(part))).all()))
    return out


def current_rows(conn: Connection, entity: str, keys: list[str]) -> dict[str, dict[str, Any]]:
    """The stored rows of the named records of ``entity`` (by natural key)."""
    if not keys:
        return {}
    table = TABLES[entity]
    col = table.c[NATURAL_KEY[entity]]
    rows = conn.execute(select(table).where(col.in_(keys))).mappings()
    return {r[NATURAL_KEY[entity]]: dict(r) for r in rows}


def changes_since(
    conn: Connection, table_name: str, key: str, version: int
) -> list[dict[str, Any]]:
    """Audit entries of one record written after it was at ``version`` (oldest first): the
    update entries whose version before was ``version`` or later, and any delete."""
    stmt = (
        select(AUDIT)
        .where(AUDIT.c.table_name == table_name, AUDIT.c.row_key == key)
        .order_by(AUDIT.c.id)
    )
    out = []
    for r in conn.execute(stmt).mappings():
        before = json.loads(r["before"]) if r["before"] else None
        after = json.loads(r["after"]) if r["after"] else None
        if r["action"] == "delete" or (
            r["action"] == "update" and before and int(before.get("version") or 0) >= version
        ):
            out.append(dict(r, before=before, after=after))
    return out


def natural_keys(conn: Connection, ids: dict[str, set[int]]) -> dict[str, dict[int, str]]:
    """The natural key of each record named by its integer id (entity -> id -> key); an
    appraisal's key is ``study|reviewer|stage``. Ids of records deleted since are absent."""
    out: dict[str, dict[int, str]] = {}
    for entity, wanted in ids.items():
        wanted_ids = sorted(int(i) for i in wanted)
        if not wanted_ids:
            continue
        if entity == "appraisal":
            stmt = (
                select(AP.c.id, ST.c.key, AP.c.reviewer, AP.c.stage)
                .join(ST, ST.c.id == AP.c.study_id)
                .where(AP.c.id.in_(wanted_ids))
            )
            out[entity] = {i: f"{k}|{r}|{g}" for i, k, r, g in conn.execute(stmt)}
            continue
        table = TABLES[entity]
        col = table.c[NATURAL_KEY[entity]]
        rows = conn.execute(select(table.c.id, col).where(table.c.id.in_(wanted_ids)))
        out[entity] = {int(i): str(k) for i, k in rows}
    return out
