"""Two imports adding the same new exposure and outcome at the same moment both succeed.

The defect: on PostgreSQL the second import planned its inserts while the first was still open,
then failed on the unique name with a raw driver traceback. Now every write transaction takes
one advisory lock (PostgreSQL) or BEGIN IMMEDIATE (SQLite), so the second waits and then sees the
names the first added. The first importer is held open inside its transaction with the test
pause hook, and the second is started while it waits.
"""

from __future__ import annotations

import os
import subprocess
import sys

from io_helpers import row, write_sheet
from test_io_kill import _wait_for_pause

from exposhift.services.importing import PAUSE_ENV, PAUSE_SECONDS_ENV, import_into
from exposhift.services.setup import init_database, open_current
from exposhift.store import records
from exposhift.store.audit_chain import verify_chain


def _importer(db_url, path, **env):
    return subprocess.Popen(
        [
            sys.executable,
            "-c",
            "from exposhift.cli.main import app; app()",
            "--db",
            db_url,
            "--user",
            path.stem,
            "import",
            str(path),
            "--quiet",
        ],
        env={**os.environ, **env},
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )


def test_two_imports_of_the_same_new_names_at_once(db_url, tmp_path):
    init_database(db_url, "tester")
    a = write_sheet(
        tmp_path / "first.csv",
        [row(study_id="SA", event_id="EA", exposure="new-agent", outcome="new-outcome")],
    )
    b = write_sheet(
        tmp_path / "second.csv",
        [row(study_id="SB", event_id="EB", exposure="new-agent", outcome="new-outcome")],
    )
    first = _importer(db_url, a, **{PAUSE_ENV: "1", PAUSE_SECONDS_ENV: "4"})
    _wait_for_pause(first)  # the first import is inside its transaction, names inserted
    store = open_current(db_url, "second")
    try:
        # the second import starts at once (this process is warm) and waits for the first
        report = import_into(store, b)
        first.wait(timeout=120)
        assert first.returncode == 0, first.stderr.read()
        assert report.counts["exposures"].unchanged == 1
        with store.read() as conn:
            assert records.get(conn, "study", "SA") and records.get(conn, "study", "SB")
            assert store.count(conn, records.TABLES["exposure"]) == 1
            assert store.count(conn, records.TABLES["outcome"]) == 1
            assert verify_chain(conn).ok  # the two writers left one linear chain
    finally:
        store.dispose()
