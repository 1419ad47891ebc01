"""The data version moves in the same transaction as every write, and only then.

Runs on SQLite and on a real PostgreSQL server (fixture ``store``). The expectations are the
contract of :mod:`exposhift.store.data_version` (no outside source: a counter either moves or
it does not).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from sqlalchemy import text

from exposhift.services.importing import import_into
from exposhift.services.setup import init_database
from exposhift.store import records
from exposhift.store.writer import Writer

SHEET = Path(__file__).resolve().parents[2] / "docs" / "example-sheet.csv"


def _add_exposure(store, name: str) -> None:
    with store.write() as conn:
        w = Writer(conn, store.user)
        records.ensure_vocab(w, "exposure", name)
        w.flush()


def test_a_write_moves_the_version_once(store):
    before = store.data_version()
    _add_exposure(store, "agent-a")
    assert store.data_version() == before + 1
    _add_exposure(store, "agent-b")
    assert store.data_version() == before + 2


def test_a_write_that_fails_leaves_the_version(store):
    before = store.data_version()
    with pytest.raises(RuntimeError), store.write() as conn:
        w = Writer(conn, store.user)
        records.ensure_vocab(w, "exposure", "never-kept")
        w.flush()
        raise RuntimeError("abort")
    assert store.data_version() == before


def test_a_write_transaction_without_changes_leaves_the_version(store):
    before = store.data_version()
    with store.write() as conn:
        conn.execute(text("SELECT 1"))
    assert store.data_version() == before


def test_sign_in_bookkeeping_leaves_the_version(store):
    """A sign-in (attempts, sessions: bookkeeping, never evidence) keeps every cached result."""
    from exposhift.errors import ExposhiftError
    from exposhift.services.accounts import sign_in

    before = store.data_version()
    with pytest.raises(ExposhiftError):
        sign_in(store, "nobody-here", "wrong password")  # written: a failed attempt, audited
    assert store.data_version() == before
    with store.read() as conn:
        attempts = conn.execute(text("SELECT COUNT(*) FROM sign_in_attempt")).scalar_one()
    assert attempts >= 1  # the attempt was written: the version stayed for that reason


def test_bulk_import_moves_the_version_and_a_dry_run_does_not(store):
    before = store.data_version()
    import_into(store, SHEET, dry_run=True)
    assert store.data_version() == before
    import_into(store, SHEET)
    after = store.data_version()
    assert after == before + 1  # one import, one transaction, one step
    import_into(store, SHEET)  # the same sheet again: every record unchanged, nothing moves
    assert store.data_version() == after


def test_upgrading_a_current_base_leaves_the_version(db_url):
    init_database(db_url)
    from exposhift.services.setup import open_current

    s = open_current(db_url)
    try:
        _add_exposure(s, "agent-c")
        before = s.data_version()
        init_database(db_url)  # already at head: no record changes
        assert s.data_version() == before
    finally:
        s.dispose()
