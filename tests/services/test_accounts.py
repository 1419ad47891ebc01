"""Accounts and sign-in in the service layer, on SQLite and PostgreSQL: the hash is not the
password, wrong password / unknown name look the same, disabled accounts, session expiry,
rate limiting, audit entries, role checks on writes."""

from __future__ import annotations

import json
from datetime import UTC, datetime, timedelta

import argon2
import pytest
from sqlalchemy import text

from blinding_scenario import build
from exposhift.access import AccessError, SignInError
from exposhift.errors import ConfigError, ConflictError, InputFileError
from exposhift.services import accounts
from exposhift.services.appraising import import_appraisals
from exposhift.services.directions import set_direction
from exposhift.services.setup import open_current
from exposhift.store.writer import audit_rows

T0 = datetime(2026, 12, 3, 9, 0, tzinfo=UTC)


@pytest.fixture(autouse=True)
def _cheap(monkeypatch):
    """argon2-cffi's cheapest parameters for speed (a hash carries its own parameters)."""
    monkeypatch.setattr(
        accounts, "_HASHER", argon2.PasswordHasher.from_parameters(argon2.profiles.CHEAPEST)
    )
    accounts._dummy_hash.cache_clear()


def _rows(store, sql):
    with store.read() as conn:
        return conn.execute(text(sql)).all()


def test_the_hash_is_argon2id_and_the_password_is_stored_nowhere(store):
    accounts.add_account(store, "ana", "reviewer", "correct horse battery")
    ((hashed,),) = _rows(store, "SELECT password_hash FROM account")
    # the PHC string format of Argon2 (RFC 9106; argon2-cffi docs): $argon2id$v=19$m=...,t=...
    assert hashed.startswith("$argon2id$v=19$") and "correct horse" not in hashed
    # checked by the reference library itself, not through our code
    assert argon2.PasswordHasher().verify(hashed, "correct horse battery")
    entries = audit_rows(store.engine.connect(), table_name="account")
    assert [e["action"] for e in entries] == ["insert"]
    assert entries[0]["after"] == {
        "name": "ana",
        "role": "reviewer",
        "disabled": False,
        "version": 1,
        "password": "(set)",
    }
    for table in ("audit_entry", "account", "account_session", "sign_in_attempt"):
        dump = json.dumps([list(map(str, r)) for r in _rows(store, f"SELECT * FROM {table}")])
        assert "correct horse" not in dump and hashed[30:] not in dump.replace(hashed, "")


def test_the_sqlite_file_never_holds_the_password(sqlite_store, tmp_path):
    accounts.add_account(sqlite_store, "ana", "admin", "plain-text-never-stored")
    accounts.sign_in(sqlite_store, "ana", "plain-text-never-stored")
    with pytest.raises(SignInError):
        accounts.sign_in(sqlite_store, "ana", "plain-text-never-stored-typo")
    path = sqlite_store.url.removeprefix("sqlite:///")
    blob = b"".join(
        open(p, "rb").read() for p in (path, path + "-wal") if __import__("os").path.exists(p)
    )
    assert b"plain-text-never-stored" not in blob


def test_wrong_password_and_unknown_name_get_the_same_message_and_are_audited(store):
    accounts.add_account(store, "ana", "reviewer", "the-right-one")
    with pytest.raises(SignInError) as wrong:
        accounts.sign_in(store, "ana", "the-wrong-one", now=T0)
    with pytest.raises(SignInError) as unknown:
        accounts.sign_in(store, "nobody-here", "the-wrong-one", now=T0)
    assert str(wrong.value) == str(unknown.value) == accounts.WRONG
    with store.read() as conn:
        refused = [e for e in audit_rows(conn, table_name="account") if e["action"] != "insert"]
    assert [(e["row_key"], e["action"]) for e in refused] == [
        ("ana", "sign-in refused"),
        ("nobody-here", "sign-in refused"),
    ]
    assert {e["after"]["reason"] for e in refused} == {"wrong name or password"}
    assert sorted(_rows(store, "SELECT name, outcome FROM sign_in_attempt")) == [
        ("ana", "failed"),
        ("nobody-here", "failed"),
    ]
    ok = accounts.sign_in(store, "ana", "the-right-one", now=T0)
    assert ok.identity.name == "ana" and ok.identity.role == "reviewer" and ok.identity.signed_in
    ((stored,),) = _rows(store, "SELECT token_hash FROM account_session")
    assert ok.token not in stored and len(stored) == 64  # SHA-256 hex, never the token


def test_a_disabled_account_cannot_sign_in_and_its_sessions_end(store):
    accounts.add_account(store, "ana", "reviewer", "the-right-one")
    open_session = accounts.sign_in(store, "ana", "the-right-one", now=T0)
    accounts.disable_account(store, "ana", now=T0)
    with pytest.raises(SignInError, match="expired or was ended"):
        accounts.session_identity(store, open_session.token, now=T0 + timedelta(seconds=5))
    with pytest.raises(SignInError, match="'ana' is disabled; ask an administrator"):
        accounts.sign_in(store, "ana", "the-right-one", now=T0)
    with pytest.raises(SignInError) as wrong:  # a wrong password tells nothing more
        accounts.sign_in(store, "ana", "guess", now=T0)
    assert str(wrong.value) == accounts.WRONG
    with pytest.raises(AccessError, match="'ana' is disabled"):  # nor on the command line
        open_current(store.url, user="ana")
    accounts.enable_account(store, "ana", now=T0)
    assert accounts.sign_in(store, "ana", "the-right-one", now=T0).identity.name == "ana"


def test_sessions_expire_when_idle_and_after_the_longest_time(store, monkeypatch):
    monkeypatch.delenv("EXPOSHIFT_SESSION_IDLE_MINUTES", raising=False)
    monkeypatch.delenv("EXPOSHIFT_SESSION_MAX_HOURS", raising=False)
    accounts.add_account(store, "ana", "reviewer", "the-right-one")
    idle = accounts.sign_in(store, "ana", "the-right-one", now=T0)
    assert accounts.session_identity(store, idle.token, now=T0 + timedelta(minutes=59)).name
    # used at 59 min: idle from then on; still open at 59 + 59 min
    assert accounts.session_identity(store, idle.token, now=T0 + timedelta(minutes=118)).name
    with pytest.raises(SignInError, match="expired"):
        accounts.session_identity(store, idle.token, now=T0 + timedelta(minutes=179))
    busy = accounts.sign_in(store, "ana", "the-right-one", now=T0)
    for minutes in range(50, 12 * 60, 50):  # used every 50 minutes: never idle for an hour
        accounts.session_identity(store, busy.token, now=T0 + timedelta(minutes=minutes))
    with pytest.raises(SignInError, match="expired"):
        accounts.session_identity(store, busy.token, now=T0 + timedelta(hours=12, minutes=1))
    with store.read() as conn:
        actions = [e["action"] for e in audit_rows(conn, table_name="account")]
    assert actions.count("session expired") == 2
    monkeypatch.setenv("EXPOSHIFT_SESSION_IDLE_MINUTES", "soon")
    with pytest.raises(ConfigError, match="EXPOSHIFT_SESSION_IDLE_MINUTES='soon'"):
        accounts.session_idle()


def test_signing_out_ends_the_session(store):
    accounts.add_account(store, "ana", "reviewer", "the-right-one")
    s = accounts.sign_in(store, "ana", "the-right-one", now=T0)
    accounts.sign_out(store, s.token, now=T0)
    accounts.sign_out(store, s.token, now=T0)  # twice: nothing more happens
    with pytest.raises(SignInError, match="ended"):
        accounts.session_identity(store, s.token, now=T0)
    with store.read() as conn:
        actions = [e["action"] for e in audit_rows(conn, table_name="account")]
    assert actions == ["insert", "sign-in", "sign-out"]


@pytest.mark.parametrize("name", ["ana", "no-such-person"])
def test_failed_sign_ins_are_rate_limited_alike_for_any_name(store, name):
    accounts.add_account(store, "ana", "reviewer", "the-right-one")
    for i in range(accounts.FAILED_SIGN_INS_ALLOWED):
        with pytest.raises(SignInError, match="the name or the password is wrong"):
            accounts.sign_in(store, name, f"guess-{i}", now=T0 + timedelta(seconds=i))
    with pytest.raises(SignInError, match="5 failed attempts for this name") as limited:
        accounts.sign_in(store, name, "the-right-one", now=T0 + timedelta(minutes=1))
    assert "exist" not in str(limited.value)
    # the window has passed (counted from the attempts, 15 min): the right password works
    later = T0 + timedelta(minutes=16)
    if name == "ana":
        assert accounts.sign_in(store, "ana", "the-right-one", now=later).identity.name == "ana"
    outcomes = [r[0] for r in _rows(store, "SELECT outcome FROM sign_in_attempt ORDER BY id")]
    assert outcomes[:6] == ["failed"] * 5 + ["limited"]


def test_a_role_change_applies_to_an_open_session_at_once(store):
    accounts.add_account(store, "ana", "reviewer", "the-right-one")
    s = accounts.sign_in(store, "ana", "the-right-one", now=T0)
    accounts.set_role(store, "ana", "editor", now=T0)
    assert accounts.session_identity(store, s.token, now=T0).role == "editor"
    assert [a.role for a in accounts.list_accounts(store)] == ["editor"]


def test_bad_account_input_is_refused_with_a_clear_message(store):
    accounts.add_account(store, "Ana", "reviewer", "the-right-one")
    with pytest.raises(ConflictError, match="'Ana' exists already"):
        accounts.add_account(store, "ana", "admin", "the-right-one")
    with pytest.raises(AccessError, match="'chief' is not a role; accepted: reader, reviewer"):
        accounts.add_account(store, "bo", "chief", "the-right-one")
    with pytest.raises(ConfigError, match="at least 8"):
        accounts.add_account(store, "bo", "reader", "short")
    with pytest.raises(ConfigError, match="reserved"):
        accounts.add_account(store, "dashboard", "reader", "the-right-one")
    with pytest.raises(ConfigError, match="spaces at its ends"):
        accounts.add_account(store, " bo", "reader", "the-right-one")
    assert [a.name for a in accounts.list_accounts(store)] == ["Ana"]


def test_only_an_admin_manages_accounts(store):
    accounts.add_account(store, "ana", "reviewer", "the-right-one")
    as_ana = open_current(store.url, user="ana")
    try:
        assert as_ana.role == "reviewer"
        with pytest.raises(AccessError, match="'ana' has the role reviewer and may not manage"):
            accounts.add_account(as_ana, "bo", "admin", "the-right-one")
        with pytest.raises(AccessError):
            accounts.set_role(as_ana, "ana", "admin")
    finally:
        as_ana.dispose()
    assert [a.role for a in accounts.list_accounts(store)] == ["reviewer"]


def test_a_reader_writes_nothing_and_a_reviewer_only_her_own(store, tmp_path):
    build(store, tmp_path)
    with store.read() as conn:
        before = len(audit_rows(conn))
    rita = open_current(store.url, user="rita")
    ana = open_current(store.url, user="ana")
    try:
        with pytest.raises(AccessError, match="'rita' has the role reader and may not"):
            set_direction(rita, "invented-agent", "invented-outcome", "raises", "because")
        sheet = tmp_path / "new.csv"
        sheet.write_text(
            "study_id,reviewer,stage,origin\nB3,ben,independent,2\nB1,ana,consensus,2\n",
            encoding="utf-8",
        )
        with pytest.raises(AccessError, match="reader"):
            import_appraisals(rita, sheet)
        with pytest.raises(InputFileError) as err:
            import_appraisals(ana, sheet)
        text_ = str(err.value)
        assert "new.csv, row 2, column 'reviewer'" in text_ and "only her own" in text_
        assert "new.csv, row 3, column 'stage'" in text_ and "consensus" in text_
        with pytest.raises(AccessError, match="'ana' has the role reviewer"):
            set_direction(ana, "invented-agent", "invented-outcome", "raises", "because")
        # the store the dashboard hands to a write service for a signed-in reader
        view = accounts.acting_store(store, accounts.Identity("rita", "reader", True))
        with pytest.raises(AccessError), view.write():
            pass
    finally:
        rita.dispose()
        ana.dispose()
    with store.read() as conn:
        assert len(audit_rows(conn)) == before  # nothing written by any refusal


def test_names_sign_in_without_regard_to_case(store):
    accounts.add_account(store, "Ana", "reviewer", "the-right-one")
    assert accounts.sign_in(store, "ana", "the-right-one").identity.name == "Ana"


def test_an_editor_imports_but_only_an_admin_replaces_appraisals(store, tmp_path):
    from exposhift.services.exporting import export_store
    from exposhift.services.importing import import_into

    build(store, tmp_path)
    archive = tmp_path / "whole.json"
    export_store(store, archive)
    ed = open_current(store.url, user="ed")
    try:
        own = tmp_path / "ed.json"  # the editor's own export: what she may see
        export_store(ed, own)
        assert import_into(ed, own).kind  # nothing new, but allowed
        # the administrator's archive holds B0's appraisal, still blinded for the editor: an
        # import must not compare with it (services/blind_imports.py)
        with pytest.raises(InputFileError, match="may not import 'ana''s independent"):
            import_into(ed, archive)
        with pytest.raises(AccessError, match="'ed' has the role editor and may not replace"):
            import_into(ed, archive, replace=True)
    finally:
        ed.dispose()


def test_the_last_active_admin_stays(store):
    accounts.add_account(store, "root", "admin", "the-right-one")
    with pytest.raises(AccessError, match="'root' is the last active admin"):
        accounts.disable_account(store, "root")
    with pytest.raises(AccessError, match="last active admin"):
        accounts.set_role(store, "root", "editor")
    accounts.add_account(store, "second", "admin", "the-right-one")
    assert accounts.set_role(store, "root", "editor").role == "editor"
