"""The data version: one counter that moves in the same transaction as every write.

Caches of computed results (the dashboard's, the dossier's analysis frame) are keyed on it, so a
result is recomputed exactly when the evidence base changed, and a write shows at once.

How it is kept (see :meth:`exposhift.store.database.Store.write`):

- every statement executed on a write connection is looked at before it runs
  (:func:`watch`); an ``INSERT``, ``UPDATE`` or ``DELETE`` marks the transaction as written.
  Raw driver cursors (the bulk importer's ``executemany``) call :func:`mark_written` themselves;
- when a marked transaction's block ends, :func:`bump` adds one to the single row of table
  ``data_version`` before the commit: the counter and the change commit or roll back together;
- statements on ``alembic_version`` and on ``data_version`` itself do not count, so a schema
  upgrade that changes no record leaves the version alone; in a transaction that also ran DDL
  (a migration to an older revision, in tests) the bump is skipped while the table is absent.
"""

from __future__ import annotations

import re
from datetime import UTC, datetime

from sqlalchemy import Connection, Engine, event, inspect, select, update

from exposhift.store.models import DataVersion

DV = DataVersion.__table__
_WRITE = re.compile(r"^\s*(insert|update|delete)\b", re.IGNORECASE)
_DDL = re.compile(r"^\s*(create|alter|drop)\b", re.IGNORECASE)
_IGNORED = ("alembic_version", "data_version")
WROTE, DDL = "exposhift_wrote", "exposhift_ddl"


def mark_written(conn: Connection) -> None:
    """Record that this transaction changed rows (for writes that bypass SQLAlchemy)."""
    conn.info[WROTE] = True


def begin(conn: Connection) -> None:
    """Forget the marks of an earlier transaction on the same pooled connection."""
    conn.info[WROTE] = False
    conn.info[DDL] = False


def wrote(conn: Connection) -> bool:
    return bool(conn.info.get(WROTE))


def watch(engine: Engine) -> None:
    """Mark write connections whose statements insert, update or delete rows."""

    @event.listens_for(engine, "before_cursor_execute")
    def _seen(conn, _cursor, statement, _params, _context, _executemany):
        if not conn.get_execution_options().get("exposhift_write"):
            return
        head = statement[:200].lower()
        if _WRITE.match(statement):
            if not any(name in head for name in _IGNORED):
                conn.info[WROTE] = True
        elif _DDL.match(statement):
            conn.info[DDL] = True


def bump(conn: Connection) -> None:
    """Add one to the data version (inside the caller's open write transaction)."""
    now = datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")
    if conn.info.get(DDL) and not inspect(conn).has_table(DV.name):
        return  # a migration to a revision before the table existed
    done = conn.execute(
        update(DV).where(DV.c.id == 1).values(version=DV.c.version + 1, changed_at=now)
    )
    if done.rowcount == 0:
        conn.execute(DV.insert().values(id=1, version=1, changed_at=now))


def current(conn: Connection) -> int:
    """The data version now (0 for an evidence base that has never been written)."""
    value = conn.execute(select(DV.c.version).where(DV.c.id == 1)).scalar_one_or_none()
    return int(value or 0)
