"""Helpers for the import/export tests: small sheets written as real CSV files."""

from __future__ import annotations

import csv
from pathlib import Path

from sqlalchemy import select

from exposhift.io.columns import COLUMN_NAMES
from exposhift.store.models import AuditEntry
from exposhift.store.records import TABLES

#: one valid estimate row (spreadsheet row 2 when first)
BASE = {
    "study_id": "S1",
    "citation": "Invented, A. et al. 2005, Demo J",
    "year": "2005",
    "design": "its",
    "pre_points": "24",
    "post_points": "24",
    "checks": "pre-trends",
    "demo": "yes",
    "event_id": "E1",
    "exposure": "agent-x",
    "change_kind": "ban",
    "change_direction": "decrease",
    "change_size": "4.5",
    "change_unit": "ug/m3",
    "country": "NLD",
    "change_date": "2001-05",
    "outcome": "wheeze",
    "outcome_group": "respiratory",
    "measure": "RR",
    "estimate": "0.8",
    "ci_low": "0.7",
    "ci_high": "0.9",
    "primary": "yes",
}


def row(**changes) -> dict:
    return {**BASE, **changes}


def write_sheet(
    path: Path, rows: list[dict], columns: list[str] | None = None, encoding: str = "utf-8"
) -> Path:
    """A CSV file with ``columns`` (default: every column any row uses, in sheet order)."""
    if columns is None:
        used = {k for r in rows for k in r}
        columns = [c for c in COLUMN_NAMES if c in used] + sorted(used - set(COLUMN_NAMES))
    with open(path, "w", encoding=encoding, newline="") as fh:
        w = csv.writer(fh)
        w.writerow(columns)
        for r in rows:
            w.writerow([r.get(c, "") for c in columns])
    return path


def two_rows(**bad) -> list[dict]:
    """A valid row (row 2) and a row of another study and event with ``bad`` values (row 3)."""
    return [row(), row(**{"study_id": "S2", "event_id": "E2", "outcome": "asthma", **bad})]


def table_dump(store) -> dict[str, list[tuple]]:
    """Every row of every table (audit included), for 'exactly as before' comparisons."""
    tables = dict(TABLES, audit_entry=AuditEntry.__table__)
    out = {}
    with store.read() as conn:
        for name, table in tables.items():
            out[name] = [tuple(r) for r in conn.execute(select(table).order_by(table.c.id))]
    return out


def count(store, name: str) -> int:
    table = AuditEntry.__table__ if name == "audit_entry" else TABLES[name]
    with store.read() as conn:
        return store.count(conn, table)
