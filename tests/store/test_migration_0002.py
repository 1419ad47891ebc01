"""Revision 0002_event_unit upgrades a populated 0001 evidence base without losing a row.

The 0001 rows are written with plain SQL (the models already describe the newer schema); the
upgrade runs through Alembic as ``exposhift init`` does, on SQLite and PostgreSQL.
"""

from __future__ import annotations

from alembic import command
from sqlalchemy import inspect, text

from exposhift.services.setup import init_database, open_current
from exposhift.store.database import open_store
from exposhift.store.migrate import alembic_config, current_revision, head_revision

T = "2026-01-01T00:00:00.000000Z"


def _at_0001_with_rows(db_url) -> None:
    store = open_store(db_url, create=True)
    with store.write() as conn:
        command.upgrade(alembic_config(conn), "0001")
        conn.execute(text("INSERT INTO exposure (id, name, version) VALUES (1, 'agent-x', 1)"))
        conn.execute(text("INSERT INTO outcome (id, name, version) VALUES (1, 'wheeze', 1)"))
        conn.execute(
            text(
                "INSERT INTO study (id, key, citation, year, design, population, demo, version, "
                "created_at, updated_at) VALUES (1, 'S1', 'Invented 2005', 2005, 'its', "
                f"'all births', true, 3, '{T}', '{T}')"
            )
        )
        conn.execute(
            text(
                "INSERT INTO event (id, key, exposure_id, change_kind, change_direction, country, "
                "change_date, date_precision, demo, version, created_at, updated_at) VALUES "
                f"(1, 'E1', 1, 'ban', 'decrease', 'NLD', '2001', 'year', true, 1, '{T}', '{T}')"
            )
        )
        conn.execute(
            text(
                "INSERT INTO estimate (id, key, study_id, event_id, outcome_id, measure, "
                'estimate_kind, point, se, "primary", version, created_at, updated_at) VALUES '
                "(1, 'S1|E1|wheeze|RR|change||', 1, 1, 1, 'RR', 'change', 0.8, 0.1, true, 1, "
                f"'{T}', '{T}')"
            )
        )
        assert current_revision(conn) == "0001"
    store.dispose()


def test_upgrade_from_0001_keeps_rows_and_leaves_the_new_field_null(db_url):
    _at_0001_with_rows(db_url)
    result = init_database(db_url)
    assert (result.before, result.after) == ("0001", head_revision())
    store = open_current(db_url)
    try:
        with store.read() as conn:
            study = conn.execute(
                text("SELECT key, population, version, same_population_as FROM study")
            ).one()
            est = conn.execute(text("SELECT key, point, se FROM estimate")).one()
            n_dirs = conn.execute(text("SELECT count(*) FROM expected_direction")).scalar()
            uniques = inspect(conn).get_unique_constraints("expected_direction")
    finally:
        store.dispose()
    assert tuple(study) == ("S1", "all births", 3, None)
    assert tuple(est) == ("S1|E1|wheeze|RR|change||", 0.8, 0.1)
    assert n_dirs == 0
    assert [sorted(u["column_names"]) for u in uniques] == [["exposure_id", "outcome_id"]]


def test_downgrade_to_0001_drops_only_the_new_schema(db_url):
    _at_0001_with_rows(db_url)
    init_database(db_url)
    store = open_store(db_url)
    with store.write() as conn:
        command.downgrade(alembic_config(conn), "0001")
    with store.read() as conn:
        tables = set(inspect(conn).get_table_names())
        cols = {c["name"] for c in inspect(conn).get_columns("study")}
        n = conn.execute(text("SELECT count(*) FROM estimate")).scalar()
    store.dispose()
    assert "expected_direction" not in tables and "same_population_as" not in cols
    assert n == 1
