"""Schema only through Alembic: from empty, idempotent, no drift, refusing unknown revisions."""

from __future__ import annotations

import pytest
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from sqlalchemy import inspect, text

from exposhift.errors import DatabaseError
from exposhift.method.parts import METHOD_PARTS
from exposhift.services.setup import database_info, init_database, open_current
from exposhift.store import records
from exposhift.store.database import open_store
from exposhift.store.migrate import head_revision
from exposhift.store.models import metadata
from exposhift.store.writer import Writer


def test_migrate_from_empty_creates_every_table(db_url):
    result = init_database(db_url)
    assert result.before is None and result.after == head_revision()
    store = open_store(db_url)
    with store.read() as conn:
        tables = set(inspect(conn).get_table_names())
    store.dispose()
    assert set(metadata.tables) <= tables


def test_models_and_migrations_agree(db_url):
    """No drift: autogenerate finds nothing to change after upgrading to head."""
    init_database(db_url)
    store = open_store(db_url)
    with store.read() as conn:
        ctx = MigrationContext.configure(conn, opts={"compare_type": True})
        diff = compare_metadata(ctx, metadata)
    store.dispose()
    assert diff == []


def test_init_again_keeps_every_row(db_url):
    init_database(db_url)
    store = open_current(db_url)
    with store.write() as conn:
        w = Writer(conn, "t")
        records.ensure_vocab(w, "exposure", "kept-agent")
        w.flush()
    store.dispose()
    again = init_database(db_url)
    assert again.before == again.after == head_revision()
    info = database_info(db_url)
    # one audit entry for the exposure, one per method part recorded when the base was created
    assert info.counts["exposures"] == 1
    assert info.counts["audit_entries"] == 1 + len(METHOD_PARTS)


def test_newer_revision_is_refused_and_nothing_written(db_url):
    init_database(db_url)
    store = open_store(db_url)
    with store.write() as conn:
        conn.execute(text("UPDATE alembic_version SET version_num = 'f00dfeed9999'"))
    store.dispose()
    with pytest.raises(DatabaseError, match="newer than this exposhift"):
        init_database(db_url)
    with pytest.raises(DatabaseError, match="newer than this exposhift"):
        open_current(db_url)
    store = open_store(db_url)
    with store.read() as conn:
        assert conn.execute(text("SELECT version_num FROM alembic_version")).scalar_one() == (
            "f00dfeed9999"
        )
    store.dispose()


def test_uninitialised_database_is_named(db_url):
    if db_url.startswith("sqlite"):
        open_store(db_url, create=True).dispose()
    with pytest.raises(DatabaseError, match="run 'exposhift init'"):
        open_current(db_url)


def test_database_with_foreign_tables_is_not_touched(sqlite_url):
    store = open_store(sqlite_url, create=True)
    with store.write() as conn:
        conn.execute(text("CREATE TABLE somebody_elses (x INTEGER)"))
    store.dispose()
    with pytest.raises(DatabaseError, match="refusing to touch it"):
        init_database(sqlite_url)
