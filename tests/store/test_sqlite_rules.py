"""SQLite specifics: pragmas, read-only files, missing files, two writers at once."""

from __future__ import annotations

import subprocess
import sys
import textwrap

import pytest

from exposhift.errors import DatabaseError
from exposhift.method.parts import METHOD_PARTS
from exposhift.services.setup import database_info, init_database, open_current
from exposhift.store import records
from exposhift.store.database import open_store
from exposhift.store.writer import Writer


def test_pragmas_wal_foreign_keys_busy_timeout(sqlite_store):
    with sqlite_store.read() as conn:
        assert conn.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
        assert conn.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
        assert conn.exec_driver_sql("PRAGMA busy_timeout").scalar() >= 5000


def test_missing_file_is_not_created_by_reading(tmp_path):
    target = tmp_path / "nothing-here.db"
    with pytest.raises(DatabaseError, match="run 'exposhift init'"):
        database_info(str(target))
    assert not target.exists()


def test_read_only_database_gets_one_clear_error_and_no_write(tmp_path):
    path = tmp_path / "evidence.db"
    init_database(str(path))
    ro_url = f"sqlite:///file:{path}?mode=ro&uri=true"
    store = open_current(ro_url)
    with pytest.raises(DatabaseError, match="read-only"), store.write() as conn:
        records.ensure_vocab(Writer(conn, "t"), "exposure", "should-not-land")
    store.dispose()
    assert database_info(str(path)).counts["exposures"] == 0


_WRITER = textwrap.dedent(
    """
    import sys
    from exposhift.services.setup import open_current
    from exposhift.store import records
    from exposhift.store.writer import Writer
    url, tag, n = sys.argv[1], sys.argv[2], int(sys.argv[3])
    store = open_current(url, user=tag)
    for i in range(n):
        with store.write() as conn:
            w = Writer(conn, tag)
            records.ensure_vocab(w, "exposure", f"{tag}-{i}")
            w.flush()
    print("done", tag)
    """
)


def test_two_processes_write_one_file_without_locking_errors(tmp_path):
    url = f"sqlite:///{tmp_path / 'shared.db'}"
    init_database(url)
    n = 150
    procs = [
        subprocess.Popen(
            [sys.executable, "-c", _WRITER, url, tag, str(n)],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )
        for tag in ("alpha", "beta")
    ]
    outs = [p.communicate(timeout=300) for p in procs]
    for p, (_out, err) in zip(procs, outs, strict=True):
        assert p.returncode == 0, err
        assert "database is locked" not in err
    info = database_info(url)
    assert info.counts["exposures"] == 2 * n
    assert info.counts["audit_entries"] == 2 * n + len(METHOD_PARTS)  # + method versions


def test_open_store_creates_parent_directory_only_for_init(tmp_path):
    target = tmp_path / "new" / "dir" / "evidence.db"
    with pytest.raises(DatabaseError):
        open_store(str(target))
    assert not target.parent.exists()
    init_database(str(target))
    assert target.exists()
