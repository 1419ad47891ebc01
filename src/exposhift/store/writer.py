"""The write path: every insert, update and delete goes through :class:`Writer`.

It keeps two promises of the store:

- **No lost updates.** An update or delete names the version it was based on; if the row has
  moved on, :class:`ConflictError` is raised and nothing is changed (the surrounding
  transaction is rolled back by :meth:`Store.write`).
- **Audit trail.** Each change writes an :class:`AuditEntry` in the same transaction: who, when
  (UTC), which table and row (natural key), the action, and the values before and after; each
  entry's hash is chained to the previous one (:mod:`exposhift.store.audit_chain`).
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from datetime import UTC, datetime
from typing import Any

from sqlalchemy import Connection, Table, insert, select, update
from sqlalchemy import delete as sa_delete

from exposhift.errors import ConflictError, NotFoundError
from exposhift.store.audit_chain import last_hash, link
from exposhift.store.models import NATURAL_KEY, AuditEntry

AUDIT = AuditEntry.__table__


def utc_now() -> str:
    """ISO-8601 UTC timestamp with microseconds and a ``Z`` suffix."""
    return datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def _clean(value: Any) -> Any:
    if isinstance(value, float) and math.isnan(value):
        return None
    return value


def _json(values: Mapping[str, Any] | None) -> str | None:
    if values is None:
        return None
    return json.dumps({k: _clean(v) for k, v in values.items()}, sort_keys=True, default=str)


_SKIP_IN_AUDIT = {"id", "created_at", "updated_at"}


def _audit_values(values: Mapping[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in values.items() if k not in _SKIP_IN_AUDIT}


class Writer:
    """Writes rows with versions and audit entries inside one open transaction."""

    def __init__(self, conn: Connection, user: str, *, now: str | None = None):
        self.conn = conn
        self.user = user
        self.now = now or utc_now()
        self._audit: list[dict[str, Any]] = []

    # ------------------------------------------------------------------ helpers
    def note(
        self,
        table_name: str,
        key: str,
        action: str,
        before: Mapping[str, Any] | None,
        after: Mapping[str, Any] | None,
    ) -> None:
        """An audit entry that records a decision rather than a row change (e.g. ``replace``)."""
        self._audit.append(
            {
                "at": self.now,
                "user": self.user,
                "table_name": table_name,
                "row_key": key,
                "action": action,
                "before": _json(before),
                "after": _json(after),
            }
        )

    def _row_key(self, table: Table, values: Mapping[str, Any]) -> str:
        col = NATURAL_KEY.get(table.name)
        if col and values.get(col) is not None:
            return str(values[col])
        return str(values.get("id"))

    def _record(self, table: Table, key: str, action: str, before, after) -> None:
        self._audit.append(
            {
                "at": self.now,
                "user": self.user,
                "table_name": table.name,
                "row_key": key,
                "action": action,
                "before": _json(before),
                "after": _json(after),
            }
        )
        if len(self._audit) >= 5000:
            self.flush()

    def flush(self) -> None:
        """Write buffered audit entries (called automatically; call before commit)."""
        if self._audit:
            link(self._audit, last_hash(self.conn))
            self.conn.execute(insert(AUDIT), self._audit)
            self._audit = []

    def _stamp(self, table: Table, values: dict[str, Any], *, new: bool) -> dict[str, Any]:
        cols = table.c
        if new and "created_at" in cols and "created_at" not in values:
            values["created_at"] = self.now
        if "updated_at" in cols:
            values["updated_at"] = self.now
        return values

    # ------------------------------------------------------------------ writes
    def insert(self, table: Table, values: Mapping[str, Any], *, row_key: str | None = None) -> int:
        """Insert one row (version 1) and return its id."""
        vals = self._stamp(table, {k: _clean(v) for k, v in values.items()}, new=True)
        if "version" in table.c:
            vals["version"] = 1
        new_id = self.conn.execute(insert(table).values(**vals).returning(table.c.id)).scalar_one()
        self._record(
            table, row_key or self._row_key(table, vals), "insert", None, _audit_values(vals)
        )
        return int(new_id)

    def insert_many(
        self,
        table: Table,
        rows: Sequence[Mapping[str, Any]],
        *,
        row_keys: Sequence[str] | None = None,
    ) -> None:
        """Insert many rows at once (executemany), each audited. Ids are not returned."""
        if not rows:
            return
        prepared = []
        for r in rows:
            vals = self._stamp(table, {k: _clean(v) for k, v in r.items()}, new=True)
            if "version" in table.c:
                vals["version"] = 1
            prepared.append(vals)
        self.conn.execute(insert(table), prepared)
        for i, vals in enumerate(prepared):
            key = row_keys[i] if row_keys is not None else self._row_key(table, vals)
            self._record(table, key, "insert", None, _audit_values(vals))

    def update(
        self,
        table: Table,
        row_id: int,
        expected_version: int,
        changes: Mapping[str, Any],
        *,
        before: Mapping[str, Any] | None = None,
        row_key: str | None = None,
    ) -> int:
        """Update one row if it is still at ``expected_version``; returns the new version.

        ``before`` (the row as read) avoids a second read when the caller has it.
        """
        if before is None:
            before = self._fetch(table, row_id)
        changes = {k: _clean(v) for k, v in changes.items()}
        vals = self._stamp(table, dict(changes), new=False)
        vals["version"] = expected_version + 1
        result = self.conn.execute(
            update(table)
            .where(table.c.id == row_id, table.c.version == expected_version)
            .values(**vals)
        )
        key = row_key or self._row_key(table, before)
        if result.rowcount != 1:
            self._conflict(table, row_id, expected_version, key)
        changed_before = {k: before.get(k) for k in changes}
        changed_before["version"] = expected_version
        after = dict(changes, version=expected_version + 1)
        self._record(table, key, "update", changed_before, after)
        return expected_version + 1

    def delete(
        self,
        table: Table,
        row_id: int,
        expected_version: int | None = None,
        *,
        row_key: str | None = None,
    ) -> None:
        """Delete one row (if still at ``expected_version`` when the table is versioned)."""
        before = self._fetch(table, row_id)
        key = row_key or self._row_key(table, before)
        stmt = sa_delete(table).where(table.c.id == row_id)
        if "version" in table.c:
            if expected_version is None:
                raise TypeError("versioned tables need expected_version to delete")
            stmt = stmt.where(table.c.version == expected_version)
        result = self.conn.execute(stmt)
        if result.rowcount != 1:
            self._conflict(table, row_id, expected_version or -1, key)
        self._record(table, key, "delete", _audit_values(before), None)

    # ------------------------------------------------------------------ reads
    def _fetch(self, table: Table, row_id: int) -> dict[str, Any]:
        row = self.conn.execute(select(table).where(table.c.id == row_id)).mappings().first()
        if row is None:
            raise NotFoundError(f"no {table.name} with id {row_id}")
        return dict(row)

    def _conflict(self, table: Table, row_id: int, expected: int, key: str) -> None:
        row = self.conn.execute(
            select(table.c.version).where(table.c.id == row_id)
        ).scalar_one_or_none()
        if row is None:
            raise ConflictError(
                f"{table.name} '{key}' was deleted by someone else since you read it; "
                "nothing was changed"
            )
        raise ConflictError(
            f"{table.name} '{key}' was changed by someone else since you read it (you edited "
            f"version {expected}, it is now at version {row}); nothing was changed. Reload it "
            "and apply your edit again"
        )


def audit_rows(
    conn: Connection, *, row_key: str | None = None, table_name: str | None = None
) -> list[dict[str, Any]]:
    """Audit entries in the order written, optionally for one row or table."""
    stmt = select(AUDIT).order_by(AUDIT.c.id)
    if row_key is not None:
        stmt = stmt.where(AUDIT.c.row_key == row_key)
    if table_name is not None:
        stmt = stmt.where(AUDIT.c.table_name == table_name)
    out = []
    for r in conn.execute(stmt).mappings():
        d = dict(r)
        d["before"] = json.loads(d["before"]) if d["before"] else None
        d["after"] = json.loads(d["after"]) if d["after"] else None
        out.append(d)
    return out


def keyed_ids(conn: Connection, table: Table, key_col: str = "key") -> dict[str, int]:
    """Map every row's natural key (``key_col``) to its id."""
    col = table.c[key_col]
    return {k: i for k, i in conn.execute(select(col, table.c.id))}
