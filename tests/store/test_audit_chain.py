"""The tamper-evident audit trail: the hash chain catches UPDATE, DELETE, INSERT and reordering.

Reference for the hash: SHA-256 from Python's hashlib (FIPS 180-4); the test recomputes one
entry's hash independently of exposhift.store.audit_chain.
"""

from __future__ import annotations

import hashlib
import json

import pytest
from alembic import command
from sqlalchemy import text
from typer.testing import CliRunner

from exposhift.cli.main import app
from exposhift.method.parts import METHOD_PARTS
from exposhift.services.auditing import show_audit, verify_audit
from exposhift.services.setup import init_database, open_current
from exposhift.store import records
from exposhift.store.audit_chain import GENESIS, audit_chain_head, verify_chain
from exposhift.store.database import open_store
from exposhift.store.migrate import alembic_config
from exposhift.store.writer import Writer

#: a new evidence base starts with one audited version of each method part
METHOD = len(METHOD_PARTS)


def _seed(store, n=4):
    for i in range(n):
        with store.write() as conn:
            w = Writer(conn, f"user{i % 2}")
            records.ensure_vocab(w, "exposure", f"agent-{i}")
            records.ensure_vocab(w, "outcome", f"outcome-{i}")
            w.flush()


def _verify(store, expected=None):
    with store.read() as conn:
        return verify_chain(conn, expected)


def _sql(store, sql, **params):
    with store.write() as conn:
        conn.execute(text(sql), params)


def test_untouched_chain_verifies_and_hash_is_sha256_of_the_entry(store):
    _seed(store)
    report = _verify(store)
    assert report.ok and report.checked == 8 + METHOD and report.bad_id is None
    with store.read() as conn:
        first = conn.execute(text("SELECT * FROM audit_entry ORDER BY id LIMIT 1")).mappings().one()
    payload = json.dumps(
        [
            GENESIS,
            first["at"],
            first["user"],
            first["table_name"],
            first["row_key"],
            first["action"],
            first["before"],
            first["after"],
        ],
        ensure_ascii=False,
        separators=(",", ":"),
    )
    assert first["entry_hash"] == hashlib.sha256(payload.encode()).hexdigest()
    assert audit_chain_head(store).head == report.head.head
    assert audit_chain_head(store).entries == 8 + METHOD


def test_update_of_an_entry_is_caught(store):
    _seed(store)
    _sql(
        store,
        "UPDATE audit_entry SET \"user\" = 'someone-else' WHERE id = "
        "(SELECT MIN(id) + 2 FROM audit_entry)",
    )
    report = _verify(store)
    assert not report.ok and report.checked == 2
    assert "was changed after it was written" in report.problem
    assert "someone-else" in report.problem


def test_delete_of_an_entry_is_caught(store):
    _seed(store)
    _sql(store, "DELETE FROM audit_entry WHERE id = (SELECT MIN(id) + 3 FROM audit_entry)")
    report = _verify(store)
    assert not report.ok and report.checked == 3
    assert "the entry before it was deleted" in report.problem


def test_reordered_entries_are_caught(store):
    _seed(store)
    with store.read() as conn:
        ids = [r[0] for r in conn.execute(text("SELECT id FROM audit_entry ORDER BY id"))]
    a, b = ids[1], ids[2]
    # swap the two entries completely (content and hashes), as a reordering would
    _sql(store, "UPDATE audit_entry SET id = -1 WHERE id = :a", a=a)
    _sql(store, "UPDATE audit_entry SET id = :a WHERE id = :b", a=a, b=b)
    _sql(store, "UPDATE audit_entry SET id = :b WHERE id = -1", b=b)
    report = _verify(store)
    assert not report.ok and report.bad_id == a
    assert "out of order" in report.problem


def test_inserted_entry_is_caught(store):
    _seed(store, 1)
    _sql(
        store,
        'INSERT INTO audit_entry (at, "user", table_name, row_key, action) '
        "VALUES ('2026-01-01T00:00:00.000000Z', 'x', 'study', 'S9', 'insert')",
    )
    report = _verify(store)
    assert not report.ok and "written outside exposhift" in report.problem


def test_a_recorded_head_reveals_a_rebuilt_or_shortened_chain(store):
    _seed(store, 2)
    head = audit_chain_head(store)
    _seed(store, 1)
    assert _verify(store, head).ok  # the chain grew past the recorded head: fine
    # cut the newest entries off the end: the rest is a valid chain, the head shows it
    _sql(store, "DELETE FROM audit_entry WHERE id > (SELECT MIN(id) + 1 FROM audit_entry)")
    assert _verify(store).ok
    report = _verify(store, head)
    assert not report.ok and "removed from the end" in report.problem


def test_migration_chains_entries_written_before_it(db_url):
    store = open_store(db_url, create=True)
    with store.write() as conn:
        command.upgrade(alembic_config(conn), "0001")
        for i in range(3):
            conn.execute(
                text(
                    'INSERT INTO audit_entry (at, "user", table_name, row_key, '
                    "action, after) VALUES (:at, 'old', 'exposure', :k, 'insert', "
                    "'{}')"
                ),
                {"at": f"2026-01-0{i + 1}T00:00:00.000000Z", "k": f"a{i}"},
            )
    store.dispose()
    init_database(db_url)
    s = open_current(db_url, user="new")
    try:
        _seed(s, 1)
        report = _verify(s)
        assert report.ok and report.checked == 3 + METHOD + 2
    finally:
        s.dispose()


def test_cli_verify_and_show(store):
    _seed(store)
    runner = CliRunner()
    ok = runner.invoke(app, ["--db", store.url, "audit", "verify"])
    assert ok.exit_code == 0 and f"audit trail intact: {8 + METHOD} entries" in ok.output
    shown = runner.invoke(app, ["--db", store.url, "audit", "show", "--user", "user1"])
    assert shown.exit_code == 0
    assert shown.output.count("insert") == 4 and "user0" not in shown.output
    assert [e["row_key"] for e in show_audit(store.url, record="agent-2").entries] == ["agent-2"]
    assert show_audit(store.url, since="2999-01-01").entries == []
    _sql(store, "UPDATE audit_entry SET after = '{}' WHERE id = (SELECT MAX(id) FROM audit_entry)")
    bad = runner.invoke(app, ["--db", store.url, "audit", "verify"])
    assert bad.exit_code == 7
    assert bad.output.startswith(
        f"error: audit trail broken after {7 + METHOD} intact entries: entry "
    )
    since = runner.invoke(app, ["--db", store.url, "audit", "show", "--since", "yesterday"])
    assert since.exit_code == 2 and "YYYY-MM-DD" in since.output
    with pytest.raises(Exception, match="--entries N and --head"):
        verify_audit(store.url, entries=3)
