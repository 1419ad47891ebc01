"""Expected directions in the store: read, upsert and delete, versioned and audited.

Every write goes through :class:`~exposhift.store.writer.Writer`: an ``insert``/``update``/
``delete`` audit entry in the same transaction, keyed ``exposure|outcome``; an edit based on a
version that has moved on raises :class:`~exposhift.errors.ConflictError` and changes nothing.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import pandas as pd
from sqlalchemy import Connection, select
from sqlalchemy.exc import IntegrityError

from exposhift.errors import ConfigError, ConflictError, NotFoundError
from exposhift.store.models import ExpectedDirection, Exposure, Outcome
from exposhift.store.writer import Writer

TABLE = ExpectedDirection.__table__
EX, OU = Exposure.__table__, Outcome.__table__
VALUES = ("direction", "rationale", "decided_by", "decided_at")
#: columns of :func:`directions_frame`
FRAME_COLUMNS = (
    "exposure",
    "outcome",
    "direction",
    "rationale",
    "decided_by",
    "decided_at",
    "version",
)
ACCEPTED = ("raises", "lowers")


def row_key(exposure: str, outcome: str) -> str:
    """The natural key of a direction in the audit trail."""
    return f"{exposure}|{outcome}"


def _select():
    return (
        select(TABLE, EX.c.name.label("exposure"), OU.c.name.label("outcome"))
        .join(EX, TABLE.c.exposure_id == EX.c.id)
        .join(OU, TABLE.c.outcome_id == OU.c.id)
    )


def directions_frame(conn: Connection) -> pd.DataFrame:
    """Every expected direction, sorted by exposure then outcome (columns FRAME_COLUMNS)."""
    rows = [dict(r) for r in conn.execute(_select()).mappings()]
    frame = pd.DataFrame(rows, columns=[*FRAME_COLUMNS])
    if frame.empty:
        return frame.astype({c: "str" for c in FRAME_COLUMNS[:-1]} | {"version": "int64"})
    frame = frame.sort_values(["exposure", "outcome"], kind="stable").reset_index(drop=True)
    return frame[list(FRAME_COLUMNS)].astype({"version": "int64"})


def find_direction(conn: Connection, exposure: str, outcome: str) -> dict[str, Any] | None:
    """The stored direction of ``exposure`` x ``outcome`` (with id and version), or None."""
    stmt = _select().where(EX.c.name == exposure, OU.c.name == outcome)
    row = conn.execute(stmt).mappings().first()
    return dict(row) if row is not None else None


def _id(conn: Connection, table, name: str, what: str) -> int:
    found = conn.execute(select(table.c.id).where(table.c.name == name)).scalar_one_or_none()
    if found is None:
        raise NotFoundError(f"no {what} '{name}' in the evidence base")
    return int(found)


def _check(values: Mapping[str, Any]) -> None:
    if values.get("direction") not in ACCEPTED:
        raise ConfigError(
            f"expected direction {values.get('direction')!r} is not one of {', '.join(ACCEPTED)}"
        )
    for f in ("rationale", "decided_by", "decided_at"):
        if not str(values.get(f) or "").strip():
            raise ConfigError(f"an expected direction needs {f}; nothing was written")


def upsert_direction(
    w: Writer,
    exposure: str,
    outcome: str,
    values: Mapping[str, Any],
    *,
    expected_version: int | None = None,
) -> tuple[str, int]:
    """Insert or update the direction of ``exposure`` x ``outcome``.

    ``values`` holds direction, rationale, decided_by and decided_at. With
    ``expected_version`` the edit applies only to that version (else ConflictError); without it
    the stored version is taken as read now. Returns (``"added"``, ``"updated"`` or
    ``"unchanged"``, the version after).
    """
    vals = {f: values[f] for f in VALUES}
    _check(vals)
    key = row_key(exposure, outcome)
    stored = find_direction(w.conn, exposure, outcome)
    if stored is None:
        if expected_version is not None:
            raise ConflictError(
                f"expected direction '{key}' no longer exists (you edited "
                f"version {expected_version}; it was cleared since); nothing "
                "was changed. Reload it and set it again"
            )
        ids = {
            "exposure_id": _id(w.conn, EX, exposure, "exposure"),
            "outcome_id": _id(w.conn, OU, outcome, "outcome"),
        }
        try:  # the unique pair: another writer may have set it since it was read
            w.insert(TABLE, {**ids, **vals}, row_key=key)
        except IntegrityError:
            raise ConflictError(
                f"expected direction '{key}' was set by someone else at the "
                "same time; nothing was changed. Reload it and apply your edit "
                "again"
            ) from None
        return "added", 1
    version = int(stored["version"]) if expected_version is None else expected_version
    changes = {f: v for f, v in vals.items() if stored[f] != v}
    if not changes and version == int(stored["version"]):
        return "unchanged", version
    before = {k: stored[k] for k in (c.name for c in TABLE.columns)}
    new_version = w.update(TABLE, int(stored["id"]), version, changes, before=before, row_key=key)
    return "updated", new_version


def delete_direction(
    w: Writer, exposure: str, outcome: str, *, expected_version: int | None = None
) -> int:
    """Delete the direction of ``exposure`` x ``outcome``; returns the version deleted."""
    key = row_key(exposure, outcome)
    stored = find_direction(w.conn, exposure, outcome)
    if stored is None:
        if expected_version is not None:
            raise ConflictError(
                f"expected direction '{key}' was cleared by someone else since "
                "you read it; nothing was changed"
            )
        raise NotFoundError(
            f"no expected direction is set for {exposure} x {outcome}; "
            "nothing to clear ('exposhift direction list' shows those set)"
        )
    version = int(stored["version"]) if expected_version is None else expected_version
    w.delete(TABLE, int(stored["id"]), version, row_key=key)
    return version
