"""``exposhift users ...`` and the audited ``--user`` on the command line: exit codes and exact
output, in-process (typer's CliRunner)."""

from __future__ import annotations

import json

import argon2
import pytest
from typer.testing import CliRunner

from blinding_scenario import build, hidden_markers, marker
from exposhift.cli.main import app
from exposhift.services import accounts
from exposhift.services.setup import init_database, open_current

runner = CliRunner()


@pytest.fixture(autouse=True)
def _cheap(monkeypatch):
    monkeypatch.setattr(
        accounts, "_HASHER", argon2.PasswordHasher.from_parameters(argon2.profiles.CHEAPEST)
    )
    accounts._dummy_hash.cache_clear()


@pytest.fixture
def db(tmp_path) -> str:
    path = str(tmp_path / "evidence.db")
    init_database(path, user="tester")
    return path


def _run(db, *args, user="chair", input=None):
    return runner.invoke(app, ["--db", db, "--user", user, *args], input=input)


def test_add_list_set_role_disable_enable(db):
    added = _run(
        db, "users", "add", "ana", "--role", "reviewer", "--password-stdin", input="pw-of-ana-1\n"
    )
    assert added.exit_code == 0, added.output
    assert added.stdout == "added account 'ana' (reviewer)\n"
    listed = _run(db, "users", "list", "--json")
    (row,) = json.loads(listed.stdout)
    assert row["name"] == "ana" and row["role"] == "reviewer" and row["disabled"] is False
    assert "hash" not in listed.stdout and "pw-of-ana" not in listed.stdout
    assert _run(db, "users", "set-role", "ana", "editor").stdout == (
        "account 'ana' now has the role editor\n"
    )
    assert _run(db, "users", "disable", "ana").stdout == "account 'ana' is disabled\n"
    assert "disabled" in _run(db, "users", "list").stdout
    assert _run(db, "users", "enable", "ana").stdout == "account 'ana' is active\n"
    new = _run(db, "users", "set-password", "ana", "--password-stdin", input="pw-of-ana-2\n")
    assert new.exit_code == 0 and "open sessions were ended" in new.stdout
    store = open_current(db)
    try:
        assert accounts.sign_in(store, "ana", "pw-of-ana-2").identity.role == "editor"
    finally:
        store.dispose()


def test_no_accounts_says_what_to_do(db):
    result = _run(db, "users", "list")
    assert result.exit_code == 0
    assert "no accounts" in result.stdout and "users add NAME --role admin" in result.stdout


def test_the_password_is_never_an_argument_nor_read_without_a_terminal(db):
    result = _run(db, "users", "add", "ana", "--role", "reviewer", input="")
    assert result.exit_code == 2
    assert result.stderr.startswith("error: no terminal to type the password on")
    empty = _run(db, "users", "add", "ana", "--role", "reviewer", "--password-stdin", input="")
    assert empty.exit_code == 2 and "standard input is empty" in empty.stderr
    assert "no accounts" in _run(db, "users", "list").stdout  # nothing was written


@pytest.mark.parametrize(
    ("args", "password", "message", "code"),
    [
        (["users", "add", "bo", "--role", "boss"], "long-enough-1", "'boss' is not a role", 7),
        (["users", "add", "bo", "--role", "reader"], "short", "at least 8", 2),
        (["users", "add", "dashboard", "--role", "reader"], "long-enough-1", "reserved", 2),
        (["users", "set-role", "nobody", "editor"], None, "no account 'nobody'", 5),
        (["users", "disable", "nobody"], None, "no account 'nobody'", 5),
    ],
)
def test_bad_input_is_one_error_line(db, args, password, message, code):
    if password is not None:
        args = [*args, "--password-stdin"]
    result = _run(db, *args, input=None if password is None else password + "\n")
    assert result.exit_code == code, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and message in lines[0]
    assert "no accounts" in _run(db, "users", "list").stdout


def test_a_reviewer_or_reader_cannot_manage_accounts(db):
    _run(db, "users", "add", "ana", "--role", "reviewer", "--password-stdin", input="pw-of-ana-1\n")
    result = _run(
        db,
        "users",
        "add",
        "bo",
        "--role",
        "admin",
        "--password-stdin",
        input="pw-of-bo-1\n",
        user="ana",
    )
    assert result.exit_code == 7
    assert "'ana' has the role reviewer and may not manage accounts" in result.stderr
    assert [r["name"] for r in json.loads(_run(db, "users", "list", "--json").stdout)] == ["ana"]


def test_appraise_show_and_export_follow_the_user(tmp_path):
    path = str(tmp_path / "scenario.db")
    init_database(path, user="tester")
    store = open_current(path, user="tester")
    try:
        build(store, tmp_path)
    finally:
        store.dispose()
    as_cy = _run(path, "appraise", "show", "B1", "--json", user="cy")
    shown = json.loads(as_cy.stdout)
    assert [a["blinded"] for a in shown["appraisals"]] == [True, True]
    as_ben = json.loads(_run(path, "appraise", "show", "B1", "--json", user="ben").stdout)
    assert [a["blinded"] for a in as_ben["appraisals"]] == [False, False]
    out = tmp_path / "rita.json"
    exported = _run(path, "export", str(out), user="rita")
    assert exported.exit_code == 0, exported.output
    assert "independent appraisal(s) left out" in exported.stderr
    text = out.read_text(encoding="utf-8")
    assert not {m for m in hidden_markers("rita") if m in text}
    audit = _run(path, "audit", "show", "--record", "B0", user="ben")
    assert marker("B0", "ana") not in audit.stdout and "hidden until you and" in audit.stdout
    refused = _run(
        path,
        "direction",
        "set",
        "--exposure",
        "invented-agent",
        "--outcome",
        "invented-outcome",
        "--expect",
        "raises",
        "--why",
        "x",
        user="rita",
    )
    assert refused.exit_code == 7 and "'rita' has the role reader" in refused.stderr
    disabled = _run(path, "users", "disable", "ana", user="root")
    assert disabled.exit_code == 0
    gone = _run(path, "appraise", "show", "B0", user="ana")
    assert gone.exit_code == 7 and "'ana' is disabled" in gone.stderr


def test_the_dashboard_beyond_loopback_needs_accounts(db):
    result = _run(db, "dashboard", "--host", "0.0.0.0", "--port", "8597")
    assert result.exit_code == 2
    assert "has no accounts yet" in result.stderr and "users add NAME --role admin" in result.stderr
