"""Create, read, update and delete records by their natural keys.

All writes go through :class:`~exposhift.store.writer.Writer` (versions and audit). Values of
controlled vocabularies are checked here too, so that no path into the store skips them.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from sqlalchemy import Connection, Table, select

from exposhift import vocab
from exposhift.errors import NotFoundError
from exposhift.store.models import (
    NATURAL_KEY,
    Appraisal,
    CertaintyJudgement,
    Estimate,
    Event,
    ExpectedDirection,
    Exposure,
    Outcome,
    Rating,
    Study,
)
from exposhift.store.writer import Writer

TABLES: dict[str, Table] = {
    "exposure": Exposure.__table__,
    "outcome": Outcome.__table__,
    "event": Event.__table__,
    "study": Study.__table__,
    "estimate": Estimate.__table__,
    "appraisal": Appraisal.__table__,
    "rating": Rating.__table__,
    "expected_direction": ExpectedDirection.__table__,
    "certainty_judgement": CertaintyJudgement.__table__,
}

_CODE_CHECKS = {
    "design": vocab.check_design,
    "change_kind": vocab.check_change_kind,
    "change_direction": vocab.check_direction,
    "measure": vocab.check_measure,
    "estimate_kind": vocab.check_estimate_kind,
}


def check_codes(values: Mapping[str, Any]) -> None:
    """Raise VocabularyError for any controlled-vocabulary value not accepted."""
    for col, check in _CODE_CHECKS.items():
        if col in values and values[col] is not None:
            check(values[col])


def date_precision(change_date: str) -> str:
    return {4: "year", 7: "month", 10: "day"}.get(len(change_date), "day")


def get(conn: Connection, entity: str, key: str) -> dict[str, Any]:
    """One row as a dict, by natural key. NotFoundError names the entity and key."""
    table = TABLES[entity]
    col = table.c[NATURAL_KEY[entity]]
    row = conn.execute(select(table).where(col == key)).mappings().first()
    if row is None:
        raise NotFoundError(f"no {entity} '{key}' in the evidence base")
    return dict(row)


def find(conn: Connection, entity: str, key: str) -> dict[str, Any] | None:
    try:
        return get(conn, entity, key)
    except NotFoundError:
        return None


def create(w: Writer, entity: str, values: Mapping[str, Any]) -> int:
    """Insert one record; returns its id."""
    vals = dict(values)
    check_codes(vals)
    if entity == "event" and "change_date" in vals and "date_precision" not in vals:
        vals["date_precision"] = date_precision(vals["change_date"])
    return w.insert(TABLES[entity], vals)


def update(
    w: Writer, entity: str, key: str, expected_version: int, changes: Mapping[str, Any]
) -> int:
    """Update one record if it is still at ``expected_version``; returns the new version."""
    check_codes(changes)
    changes = dict(changes)
    if entity == "event" and "change_date" in changes:
        changes["date_precision"] = date_precision(changes["change_date"])
    row = get(w.conn, entity, key)
    return w.update(TABLES[entity], row["id"], expected_version, changes, before=row)


def delete(w: Writer, entity: str, key: str, expected_version: int) -> None:
    row = get(w.conn, entity, key)
    w.delete(TABLES[entity], row["id"], expected_version)


def ensure_vocab(w: Writer, entity: str, name: str, extra: Mapping[str, Any] | None = None) -> int:
    """Id of the exposure/outcome ``name``, creating it when new."""
    row = find(w.conn, entity, name)
    if row is not None:
        return int(row["id"])
    return w.insert(TABLES[entity], {"name": name, **(extra or {})})
