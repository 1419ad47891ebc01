"""--db naming something that is not an evidence base, and driver errors that escape a write.

Each was a traceback before (the journal-mode pragma on a non-database file; a raw
``UniqueViolation`` from the bulk writer's cursor); now each is one ``error:`` line.
"""

from __future__ import annotations

import pytest
from typer.testing import CliRunner

from exposhift.cli.main import app
from exposhift.errors import DatabaseError
from exposhift.services.setup import open_current
from exposhift.store.records import TABLES


@pytest.mark.parametrize(
    "command", [["info"], ["gaps"], ["export", "out.json"], ["init"], ["audit", "verify"]]
)
@pytest.mark.parametrize("kind", ["csv", "directory", "binary"])
def test_db_that_is_not_a_database(tmp_path, monkeypatch, kind, command):
    monkeypatch.chdir(tmp_path)
    target = tmp_path / f"thing.{kind}"
    if kind == "directory":
        target.mkdir()
    elif kind == "csv":
        target.write_text("study_id,citation\nS1,x\n", encoding="utf-8")
    else:
        target.write_bytes(bytes(range(256)) * 8)
    result = CliRunner().invoke(app, ["--db", str(target), *command])
    assert result.exit_code == 3, result.output
    lines = result.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"error: --db {target} ")
    assert ("is a directory" if kind == "directory" else "is not an SQLite database") in lines[0]
    assert "Traceback" not in result.output


def test_driver_error_from_a_raw_cursor_is_one_database_error(store):
    """The bulk writer uses the driver's cursor; its errors are not SQLAlchemy's."""
    mark = "?" if store.is_sqlite else "%s"
    with pytest.raises(DatabaseError, match="refused the change .*nothing was written"):
        with store.write() as conn:
            cur = conn.connection.cursor()
            cur.executemany(
                f"INSERT INTO exposure (name, version) VALUES ({mark}, 1)", [("same",), ("same",)]
            )
    with store.read() as conn:
        assert store.count(conn, TABLES["exposure"]) == 0


def test_sqlite_header_check_keeps_empty_and_real_files(tmp_path, sqlite_store):
    # a real evidence base opens; an empty file is a new SQLite database, not refused here
    assert open_current(sqlite_store.url).is_sqlite
    empty = tmp_path / "empty.db"
    empty.write_bytes(b"")
    with pytest.raises(DatabaseError, match="has no exposhift schema"):
        open_current(str(empty))
