"""A SELECT read straight into a DataFrame through the driver's cursor.

SQLAlchemy builds one ``Row`` object per result row and runs each value through its type's
result processor; for the hundred thousand rows of a large evidence base that costs more than
the read itself. :func:`select_frame` compiles the statement for the connection's dialect,
runs it on the driver cursor of the same connection (so inside the same read transaction),
builds the frame from the plain tuples and then applies each column's result processor once
per column (e.g. SQLite's 0/1 to ``bool``), so the values are the ones ``conn.execute`` would
have returned.
"""

from __future__ import annotations

import pandas as pd
from sqlalchemy import Connection
from sqlalchemy.sql import Select


def _driver_params(compiled) -> tuple | dict:
    """The bound values in the form the driver's paramstyle wants (tuple or mapping)."""
    params = compiled.params
    if compiled.positiontup is not None:
        return tuple(params[name] for name in compiled.positiontup)
    return params


def select_frame(
    conn: Connection, stmt: Select, names: list[str], first_in: set | None = None
) -> pd.DataFrame:
    """The rows of ``stmt`` as a DataFrame whose columns are ``names`` (one per selected
    column, in order); values as SQLAlchemy would return them. With ``first_in``, only the
    rows whose first value is in it (dropped before the column types are inferred)."""
    dialect = conn.dialect
    compiled = stmt.compile(dialect=dialect, compile_kwargs={"render_postcompile": True})
    columns = list(stmt.selected_columns)
    if len(columns) != len(names):
        raise ValueError(f"{len(names)} names for {len(columns)} selected columns")
    cursor = conn.connection.cursor()
    try:
        cursor.execute(str(compiled), _driver_params(compiled))
        rows = cursor.fetchall()
        if first_in is not None:
            rows = [r for r in rows if r[0] in first_in]
    finally:
        cursor.close()
    frame = pd.DataFrame.from_records(rows, columns=names)
    for name, col in zip(names, columns, strict=True):
        proc = col.type.result_processor(dialect, None)
        if proc is not None and len(frame):
            raw = frame[name].tolist()
            frame[name] = pd.Series([None if v is None else proc(v) for v in raw], dtype=object)
            frame[name] = frame[name].infer_objects()
    return frame
