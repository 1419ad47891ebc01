"""Column-wise bulk inserts with the same versions, stamps and audit entries as ``Writer``.

:meth:`Writer.insert_many` handles one dict per row; for a 100,000-row sheet its per-value
cleaning and per-row statement parameters dominate the import. :class:`BulkWriter` adds
:meth:`BulkWriter.insert_frame`, which writes a DataFrame whose values are already clean (``None``
for missing) with one ``executemany`` for the rows and one for their audit entries, in the same
transaction. The rows and audit entries are the ones ``insert_many`` would write: version 1,
``created_at``/``updated_at`` = the writer's timestamp, an ``insert`` audit entry per row whose
``after`` is the same JSON text (sorted keys, without id and timestamps).
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from json.encoder import encode_basestring_ascii

import pandas as pd

from exposhift.io.frames import python_column
from exposhift.store.audit_chain import hash_values, last_hash
from exposhift.store.data_version import mark_written
from exposhift.store.writer import AUDIT, Writer

_AUDIT_COLUMNS = (
    "at",
    "user",
    "table_name",
    "row_key",
    "action",
    "before",
    "after",
    "prev_hash",
    "entry_hash",
)
_SKIP_IN_AUDIT = {"id", "created_at", "updated_at"}


def _json_value(v) -> str:
    if v is None:
        return "null"
    if v is True:
        return "true"
    if v is False:
        return "false"
    kind = type(v)
    if kind is str:
        return encode_basestring_ascii(v)
    if kind is float:
        return float.__repr__(v)
    if kind is int:
        return int.__repr__(v)
    return json.dumps(v, default=str)


def _json_cells(values: list, kind: str) -> list[str]:
    """Each value as ``json.dumps`` writes it inside an object (floats via repr, ASCII-escaped).

    ``kind`` is the column's type as pandas holds it: "float", "int", "str", "bool" or "any".
    """
    if kind == "float":
        rep = float.__repr__
        return ["null" if v is None else rep(v) for v in values]
    if kind == "str":
        enc = encode_basestring_ascii
        return ["null" if v is None else enc(v) for v in values]
    if kind == "int":
        rep = int.__repr__
        return ["null" if v is None else rep(v) for v in values]
    return [_json_value(v) for v in values]


def _kind(dtype) -> str:
    if dtype == "float64":
        return "float"
    if dtype == "Int64" or dtype == "int64":
        return "int"
    if dtype == "str":
        return "str"
    return "any"


class BulkWriter(Writer):
    """A :class:`Writer` that can also insert a whole DataFrame column-wise."""

    def _sql(self, table_name: str, columns: Sequence[str]) -> str:
        q = self.conn.dialect.identifier_preparer.quote
        mark = "?" if self.conn.dialect.paramstyle == "qmark" else "%s"
        return (
            f"INSERT INTO {q(table_name)} ({', '.join(q(c) for c in columns)}) "
            f"VALUES ({', '.join([mark] * len(columns))})"
        )

    def _executemany(self, sql: str, rows: list[tuple]) -> None:
        """The driver's executemany on this transaction's connection (no per-row overhead)."""
        mark_written(self.conn)  # the driver's cursor bypasses the statement watch
        cursor = self.conn.connection.cursor()
        try:
            cursor.executemany(sql, rows)
        finally:
            cursor.close()

    def insert_frame(self, table, frame: pd.DataFrame, row_keys: Sequence[str]) -> None:
        """Insert every row of ``frame`` (table column names; ``None``/NaN for missing)."""
        n = len(frame)
        if n == 0:
            return
        self.flush()  # audit entries stay in the order the changes were made
        data: dict[str, list] = {c: python_column(frame[c]) for c in frame.columns if c != "id"}
        kinds = {c: _kind(frame[c].dtype) for c in data}
        if "version" in table.c:
            data["version"] = [1] * n
            kinds["version"] = "int"
        for stamp in ("created_at", "updated_at"):
            if stamp in table.c:
                data[stamp] = [self.now] * n
        columns = list(data)
        self._executemany(
            self._sql(table.name, columns), list(zip(*(data[c] for c in columns), strict=True))
        )
        audited = sorted(c for c in columns if c not in _SKIP_IN_AUDIT)
        template = "{{" + ", ".join(f"{json.dumps(c)}: {{}}" for c in audited) + "}}"
        cells = [_json_cells(data[c], kinds.get(c, "any")) for c in audited]
        after = [template.format(*row) for row in zip(*cells, strict=True)]
        keys = [str(k) for k in row_keys]
        # plain str: sqlite3 would try to adapt SQLAlchemy's quoted_name on every row
        at, user, name = str(self.now), str(self.user), str(table.name)
        prev = last_hash(self.conn)
        entries = []
        for key, aft in zip(keys, after, strict=True):
            h = hash_values(prev, at, user, name, key, "insert", None, aft)  # HASHED order
            entries.append((at, user, name, key, "insert", None, aft, prev, h))
            prev = h
        self._executemany(self._sql(AUDIT.name, _AUDIT_COLUMNS), entries)
