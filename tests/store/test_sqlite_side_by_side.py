"""The command line writes safely next to a running dashboard (SQLite).

The dashboard keeps one long-lived store (``app/data.py``) and opens further stores for some
pages. Opening a store used to read the file's header with a plain ``open``; closing that
descriptor released every POSIX lock the process held on the file, the long-lived connection's
included (SQLite, "How To Corrupt An SQLite Database File", section 2.2). The next process that
closed its connection then took itself for the last one and deleted the ``-wal`` and ``-shm``
files: the long-lived store went on reading stale pages (the write never showed) or failed
with "disk I/O error".

Here a long-lived store reads; in this process another store is opened and closed (as a page
does); other processes open and close the file with Python's ``sqlite3`` and run real CLI
writes (``exposhift events import``, ``exposhift import``); the long-lived store then reads
without error and sees every write. The write-ahead log must still exist after each other
process closed (it did not believe it was the last connection). SQLite only: PostgreSQL has no
such file locks.
"""

from __future__ import annotations

import csv
import subprocess
import sys
from pathlib import Path

from sqlalchemy import select

from exposhift.services.demo import seed_dir
from exposhift.services.importing import import_into
from exposhift.services.setup import init_database, open_current
from exposhift.store.models import Estimate, Event, Study

CLI = str(Path(sys.executable).with_name("exposhift"))
PLAIN_OPEN_CLOSE = (
    "import sqlite3, sys\n"
    "c = sqlite3.connect(sys.argv[1])\n"
    "c.execute('SELECT count(*) FROM study').fetchone()\n"
    "c.close()\n"
)


def _counts(store) -> tuple[int, int]:
    with store.read() as conn:
        return store.count(conn, Event.__table__), store.count(conn, Estimate.__table__)


def _other_process(args: list[str], db: Path) -> None:
    out = subprocess.run(args, capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    # the other process did not take itself for the last connection: the log is still there
    assert Path(f"{db}-wal").exists(), args


def _first_rows(src: Path, dest: Path, n: int) -> Path:
    with open(src, encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.reader(fh))
    with open(dest, "w", encoding="utf-8", newline="") as fh:
        csv.writer(fh).writerows(rows[: n + 1])
    return dest


def test_cli_writes_beside_a_long_lived_store_are_seen(tmp_path):
    db = tmp_path / "side.db"
    init_database(str(db), "tester")
    seeds = seed_dir()
    setup = open_current(str(db), "tester")
    try:
        import_into(setup, seeds / "evidence.csv")
    finally:
        setup.dispose()
    dashboard = open_current(str(db), "dashboard")  # long-lived, as app/data.py's cached store
    dashboard.role = "reader"
    try:
        events, estimates = _counts(dashboard)
        version = dashboard.data_version()
        page = open_current(str(db), "page")  # a page opening and closing its own store
        page.dispose()
        _other_process([sys.executable, "-c", PLAIN_OPEN_CLOSE, str(db)], db)
        _other_process(
            [CLI, "--db", str(db), "events", "import", str(seeds / "registered_events.csv")], db
        )
        got_events, got_estimates = _counts(dashboard)  # no "disk I/O error", no stale read
        assert got_events > events and got_estimates == estimates
        assert dashboard.data_version() > version
        # again: a plain open-close, then an import that changes an estimate
        page = open_current(str(db), "page")
        page.dispose()
        _other_process([sys.executable, "-c", PLAIN_OPEN_CLOSE, str(db)], db)
        version = dashboard.data_version()
        sheet = _first_rows(seeds / "evidence.csv", tmp_path / "one.csv", 1)
        with open(sheet, encoding="utf-8", newline="") as fh:
            rows = list(csv.DictReader(fh))
        rows[0]["population"] = "changed by the command line (invented)"
        with open(sheet, "w", encoding="utf-8", newline="") as fh:
            w = csv.DictWriter(fh, fieldnames=list(rows[0]))
            w.writeheader()
            w.writerows(rows)
        _other_process([CLI, "--db", str(db), "import", str(sheet)], db)
        assert dashboard.data_version() > version
        with dashboard.read() as conn:
            populations = set(conn.execute(select(Study.__table__.c.population)).scalars())
        assert "changed by the command line (invented)" in populations
    finally:
        dashboard.dispose()
