"""One transaction: a process killed with SIGKILL in the middle of an import leaves the database
exactly as it was, on SQLite and on PostgreSQL.

The importer is started as a separate process with ``EXPOSHIFT_TEST_PAUSE_AFTER_ROWS``: after
writing that many estimate rows inside its open transaction it says so on stderr and sleeps. The
test checks that the write transaction is really open (SQLite: the write lock is held;
PostgreSQL: the importer's session is "idle in transaction"), kills the process with SIGKILL and
compares every table, audit trail included, with the state before.
"""

from __future__ import annotations

import os
import queue
import signal
import sqlite3
import subprocess
import sys
import threading
import time

import pandas as pd
import pytest
from io_helpers import table_dump
from sqlalchemy import text

from exposhift.io.synthetic import synthetic_sheet
from exposhift.services.importing import PAUSE_ENV, PAUSE_SECONDS_ENV, import_into
from exposhift.services.setup import init_database, open_current
from exposhift.store.database import sqlite_path

pytestmark = pytest.mark.slow


def _lines(stream, q: queue.Queue) -> None:
    for line in stream:
        q.put(line)
    q.put(None)


def _wait_for_pause(proc, timeout: float = 120) -> str:
    q: queue.Queue = queue.Queue()
    threading.Thread(target=_lines, args=(proc.stderr, q), daemon=True).start()
    deadline = time.monotonic() + timeout
    seen = []
    while time.monotonic() < deadline:
        try:
            line = q.get(timeout=1)
        except queue.Empty:
            continue
        if line is None:
            break
        seen.append(line)
        if "test pause" in line:
            return line
    proc.kill()
    pytest.fail(f"the importer never paused; stderr: {''.join(seen)}")


def _transaction_is_open(db_url: str, store) -> bool:
    path = sqlite_path(db_url)
    if path is not None:
        con = sqlite3.connect(path, timeout=0.2)
        try:
            con.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as exc:
            return "locked" in str(exc)
        finally:
            con.close()
        return False
    with store.read() as conn:
        n = conn.execute(
            text("SELECT count(*) FROM pg_stat_activity WHERE state = 'idle in transaction'")
        ).scalar_one()
    return n >= 1


def test_sigkill_mid_import_leaves_database_as_before(db_url, tmp_path):
    init_database(db_url, "tester")
    store = open_current(db_url, "tester")
    try:
        old = synthetic_sheet(200, seed=1, prefix="OLD")
        old_path = tmp_path / "old.csv"
        old.to_csv(old_path, index=False)
        import_into(store, old_path)
        before = table_dump(store)

        changed = old.copy()
        changed.loc[changed["study_id"] == "OLD-S000000", "citation"] = "corrected citation"
        big = synthetic_sheet(12_000, seed=2, prefix="NEW")
        big_path = tmp_path / "big.csv"
        pd.concat([changed, big]).to_csv(big_path, index=False)

        env = {**os.environ, PAUSE_ENV: "5000", PAUSE_SECONDS_ENV: "300"}
        proc = subprocess.Popen(
            [
                sys.executable,
                "-c",
                "from exposhift.cli.main import app; app()",
                "--db",
                db_url,
                "--user",
                "killed",
                "import",
                "--quiet",
                str(big_path),
            ],
            stderr=subprocess.PIPE,
            stdout=subprocess.DEVNULL,
            text=True,
            env=env,
        )
        try:
            line = _wait_for_pause(proc)
            assert "after 5000 estimate rows" in line
            assert _transaction_is_open(db_url, store)
        finally:
            os.kill(proc.pid, signal.SIGKILL)
            proc.wait(timeout=30)
        assert proc.returncode == -signal.SIGKILL

        assert table_dump(store) == before

        path = sqlite_path(db_url)
        if path is not None:
            con = sqlite3.connect(path)
            assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
            con.close()
        # the evidence base is usable: the same import now runs to the end
        report = import_into(store, big_path)
        assert report.counts["estimates"].added == 12_000
        assert report.counts["studies"].updated == 1
    finally:
        store.dispose()
