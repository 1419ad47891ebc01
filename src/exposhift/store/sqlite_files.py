"""SQLite files as whole files: what a demo file holds, copies, checkpoints and removal.

The demo service (:mod:`exposhift.services.demo`) decides whether a file may be replaced; the
file-level reading and copying it needs is here, so that only ``store/`` talks to SQLite.
"""

from __future__ import annotations

import contextlib
import sqlite3
from pathlib import Path


def non_demo_records(target: Path) -> int | None:
    """How many studies and events of the SQLite file ``target`` are not flagged demo
    (``None`` when the file is no exposhift database)."""
    try:
        con = sqlite3.connect(f"file:{target}?mode=ro", uri=True)
        try:
            return int(
                con.execute(
                    "SELECT (SELECT count(*) FROM study WHERE NOT demo) + "
                    "(SELECT count(*) FROM event WHERE NOT demo)"
                ).fetchone()[0]
            )
        finally:
            con.close()
    except sqlite3.Error:
        return None


def checkpoint(path: Path) -> None:
    """Fold the write-ahead log into the database file (before it is renamed into place)."""
    con = sqlite3.connect(path)
    try:
        con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    finally:
        con.close()


def remove_database(path: Path) -> None:
    """Remove a SQLite file and its -wal, -shm and -journal side files (those that exist)."""
    for p in (path, Path(f"{path}-wal"), Path(f"{path}-shm"), Path(f"{path}-journal")):
        with contextlib.suppress(FileNotFoundError):
            p.unlink()


#: tables whose rows are compared by content (the rest: by row count)
_SKIP_TABLES = ("alembic_version", "sqlite_sequence")


def _tables(con: sqlite3.Connection) -> list[str]:
    return [
        n
        for (n,) in con.execute(
            "SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%'"
        )
        if n not in _SKIP_TABLES
    ]


def _audit(con: sqlite3.Connection) -> set[tuple[str, str, str]]:
    return set(con.execute("SELECT table_name, row_key, action FROM audit_entry"))


def foreign_content(target: Path, fresh: Path) -> list[str]:
    """What ``target`` holds that a fresh demo build (``fresh``) does not: an empty list when the
    file holds only what the demo generates. Each entry is a readable reason."""
    try:
        con = sqlite3.connect(f"file:{target}?mode=ro", uri=True)
        try:
            tables = _tables(con)
            if "audit_entry" not in tables:
                return ["it is not an exposhift database"]
            old_counts = {
                t: con.execute(f'SELECT count(*) FROM "{t}"').fetchone()[0] for t in tables
            }
            old_audit = _audit(con)
        finally:
            con.close()
    except sqlite3.Error:
        return ["it is not an exposhift database (not readable as SQLite)"]
    con = sqlite3.connect(fresh)
    try:
        new_tables = set(_tables(con))
        new_counts = {
            t: con.execute(f'SELECT count(*) FROM "{t}"').fetchone()[0] for t in new_tables
        }
        new_audit = _audit(con)
    finally:
        con.close()
    reasons = []
    words = {"insert": "added", "update": "changed", "delete": "deleted"}
    by_kind: dict[tuple[str, str], int] = {}
    for table, _, action in old_audit - new_audit:
        by_kind[(table, action)] = by_kind.get((table, action), 0) + 1
    reasons += [
        f"{n} {table} record(s) {words.get(action, action)} that the demo does not make"
        for (table, action), n in sorted(by_kind.items())
    ]
    covered = {t for t, _ in by_kind}
    for t in tables:
        if t != "audit_entry" and t not in covered and old_counts[t] > new_counts.get(t, 0):
            reasons.append(
                f"{old_counts[t] - new_counts.get(t, 0)} row(s) in table {t} that "
                "the demo does not write"
            )
    return reasons


def copy_database(target: Path, dest: Path) -> None:
    """Copy ``target`` to ``dest`` (SQLite's online backup when it is a database: the WAL is
    included; a byte copy otherwise)."""
    try:
        src = sqlite3.connect(f"file:{target}?mode=ro", uri=True)
        try:
            src.execute("SELECT count(*) FROM sqlite_master").fetchone()
            out = sqlite3.connect(dest)
            try:
                src.backup(out)
            finally:
                out.close()
        finally:
            src.close()
    except sqlite3.Error:
        remove_database(dest)
        import shutil

        shutil.copy2(target, dest)


def _remove_sqlite(path: Path) -> None:
    for p in (path, Path(f"{path}-wal"), Path(f"{path}-shm"), Path(f"{path}-journal")):
        with contextlib.suppress(FileNotFoundError):
            p.unlink()
