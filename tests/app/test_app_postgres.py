"""The dashboard on a shared PostgreSQL evidence base (the committee's server deployment).

The demo evidence base is copied into PostgreSQL through its JSON archive (export, import), then
every page runs in Streamlit's AppTest against the PostgreSQL URL. Counts shown are checked
against the server read with plain SQL through SQLAlchemy (not through exposhift's store); a
write made by another connection (an import) shows at the next rerun, because the caches are
keyed on the data version the write moved in its own transaction. These tests need the
PostgreSQL test server and fail (never skip) without it.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from dashboard_helpers import ENTRY
from sqlalchemy import create_engine, text
from streamlit.testing.v1 import AppTest

from exposhift.services.exporting import export_file
from exposhift.services.importing import import_file, import_into
from exposhift.services.setup import init_database, open_current

SHEET = Path(__file__).resolve().parents[2] / "docs" / "example-sheet.csv"
PAGES = ("studies", "pooling", "replication", "gaps", "series", "upload", "records", "appraise")


def _count(url: str, table: str) -> int:
    engine = create_engine(url)
    try:
        with engine.connect() as conn:
            return int(conn.execute(text(f"SELECT count(*) FROM {table}")).scalar_one())
    finally:
        engine.dispose()


@pytest.fixture
def pg_demo(demo_db, db_url, tmp_path) -> str:
    """The demo evidence base, copied into an empty PostgreSQL database."""
    archive = tmp_path / "demo.json"
    export_file(archive, db=demo_db, user="tester")
    init_database(db_url, user="tester")
    import_file(archive, db=db_url, user="tester")
    return db_url


@pytest.mark.postgres
@pytest.mark.parametrize("db_url", ["postgresql"], indirect=True)
def test_every_page_runs_on_postgresql_and_follows_a_write(pg_demo, monkeypatch):
    url = pg_demo
    monkeypatch.setenv("EXPOSHIFT_DB", url)
    at = AppTest.from_file(str(ENTRY), default_timeout=180)
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    metrics = lambda: {m.label: m.value for m in at.metric}  # noqa: E731
    for label, table in (("Studies", "study"), ("Estimates", "estimate"), ("Events", "event")):
        assert metrics()[label] == str(_count(url, table))
    assert metrics()["Studies"] == "42"  # the demo's 42 invented studies made it across

    before = _count(url, "study")
    store = open_current(url, user="chair")
    try:
        import_into(store, SHEET)  # another connection writes: two new invented studies
    finally:
        store.dispose()
    at.run()  # no reload pressed
    assert not at.exception
    assert _count(url, "study") > before
    assert metrics()["Studies"] == str(_count(url, "study"))

    for page in PAGES:
        at.switch_page(f"views/{page}.py")
        at.run()
        assert not at.exception, (page, [e.value for e in at.exception])
        assert not at.error, (page, [e.value for e in at.error])
