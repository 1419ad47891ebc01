"""The dashboard's caches follow the data version: a write shows at the next rerun without a
reload, and a rerun without a write recomputes nothing.

The counts shown are checked against the file read with the standard library's sqlite3 (a
route outside exposhift); "recomputes nothing" is counted on the one function that reads the
evidence base for every page (the snapshot).
"""

from __future__ import annotations

import shutil
import sqlite3
import sys
from pathlib import Path

import pytest
from dashboard_helpers import ENTRY
from streamlit.testing.v1 import AppTest

from exposhift.services.importing import import_into
from exposhift.services.setup import open_current

SHEET = Path(__file__).resolve().parents[2] / "docs" / "example-sheet.csv"


def _studies(db: Path) -> int:
    con = sqlite3.connect(db)
    try:
        return con.execute("SELECT count(*) FROM study").fetchone()[0]
    finally:
        con.close()


@pytest.fixture
def base(demo_db, tmp_path) -> Path:
    copy = tmp_path / "copy.db"
    shutil.copy(demo_db, copy)
    return copy


def test_a_write_shows_at_the_next_rerun_and_nothing_else_recomputes(base, monkeypatch):
    monkeypatch.setenv("EXPOSHIFT_DB", str(base))
    at = AppTest.from_file(str(ENTRY), default_timeout=120)
    at.run()
    assert not at.exception
    metric = lambda: {m.label: m.value for m in at.metric}["Studies"]  # noqa: E731
    assert metric() == str(_studies(base))

    data = sys.modules["data"]  # the dashboard's cached data module, as the page imported it
    reads = []
    real = data.take_snapshot
    monkeypatch.setattr(data, "take_snapshot", lambda store: reads.append(1) or real(store))

    at.run()  # nothing written: every result from the caches
    assert reads == [] and not at.exception

    before = _studies(base)
    store = open_current(str(base), user="tester")
    try:
        import_into(store, SHEET)  # two new invented studies
    finally:
        store.dispose()
    at.run()  # no reload button pressed
    assert metric() == str(_studies(base)) and _studies(base) > before
    assert reads == [1]

    at.run()
    assert reads == [1]
