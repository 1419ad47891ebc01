"""Migration 0006_method: an existing evidence base records the method it used until now.

Until this revision, commands read ``./evidence/rubric.toml`` and ``./evidence/replication.toml``
of the folder they ran from, and the usual layout keeps the database in that folder. The
expected content hash is recomputed here with ``hashlib.sha256`` (FIPS 180-4).
"""

from __future__ import annotations

import hashlib

import pytest
from alembic import command
from sqlalchemy import text

from exposhift.appraisal.rubric import packaged_rubric_path
from exposhift.errors import RubricError
from exposhift.services.setup import init_database, open_current
from exposhift.services.workspace import method_in_force
from exposhift.store import records
from exposhift.store.database import open_store
from exposhift.store.migrate import alembic_config, current_revision
from exposhift.store.writer import Writer


def _base_at_0005(folder) -> str:
    """A SQLite base at revision 0005 holding one record, in ``folder``."""
    url = f"sqlite:///{folder / 'evidence.db'}"
    store = open_store(url, create=True)
    with store.write() as conn:
        command.upgrade(alembic_config(conn), "0005_series")
        w = Writer(conn, "old")
        records.ensure_vocab(w, "exposure", "kept-agent")
        w.flush()
    store.dispose()
    return url


def test_existing_base_records_the_files_next_to_it(tmp_path):
    rubric = (
        packaged_rubric_path()
        .read_text(encoding="utf-8")
        .replace('version = "1.0"', 'version = "ours-3"', 1)
    )
    (tmp_path / "rubric.toml").write_text(rubric, encoding="utf-8")
    url = _base_at_0005(tmp_path)
    init_database(url, "upgrader")
    store = open_current(url)
    try:
        m = method_in_force(store)
        part = m.parts["rubric"]
        assert part.number == 1 and m.rubric.version == "ours-3"
        assert part.content_hash == hashlib.sha256(rubric.encode("utf-8")).hexdigest()
        assert "next to the database" in part.source and part.created_by == "upgrader"
        assert m.parts["settings"].source == "packaged default"  # no replication.toml there
    finally:
        store.dispose()


def test_a_bad_file_next_to_the_base_stops_the_upgrade_and_changes_nothing(tmp_path):
    bad = (
        packaged_rubric_path().read_text(encoding="utf-8").replace("level = 3\n", "level = 7\n", 1)
    )
    (tmp_path / "rubric.toml").write_text(bad, encoding="utf-8")
    url = _base_at_0005(tmp_path)
    line = next(i for i, ln in enumerate(bad.splitlines(), start=1) if ln == "level = 7")
    with pytest.raises(RubricError, match=rf"rubric\.toml, line {line}"):
        init_database(url)
    store = open_store(url)
    try:
        with store.read() as conn:
            assert current_revision(conn) == "0005_series"
            assert conn.execute(text("SELECT COUNT(*) FROM audit_entry")).scalar_one() == 1
    finally:
        store.dispose()


def test_a_new_base_gets_the_packaged_defaults_even_beside_files(tmp_path):
    (tmp_path / "rubric.toml").write_text("not a rubric", encoding="utf-8")
    url = f"sqlite:///{tmp_path / 'evidence.db'}"
    init_database(url)
    store = open_current(url)
    try:
        parts = method_in_force(store).parts
        assert {p.source for p in parts.values()} == {"packaged default"}
    finally:
        store.dispose()
