"""The dashboard's sign-in (Streamlit AppTest): the form whenever the evidence base has
accounts or the dashboard listens beyond loopback, wrong password, rate limit, expiry, sign
out, and blinding by the signed-in identity on every page (no hidden rating shown anywhere).

The review in progress is the invented scenario of ``tests/blinding_scenario.py``; what each
person may see is its hand-written table ``VISIBLE``.
"""

from __future__ import annotations

import sqlite3

import pytest
from dashboard_helpers import ENTRY
from streamlit.testing.v1 import AppTest

from blinding_scenario import INDEPENDENT, PASSWORDS, ROLES, VISIBLE, build, every_marker
from exposhift.access import AccessError, Identity
from exposhift.services.setup import init_database, open_current

PAGES = ("overview", "studies", "pooling", "replication", "gaps", "series")


@pytest.fixture(scope="module")
def scenario_db(tmp_path_factory) -> str:
    from argon2 import PasswordHasher, profiles

    from exposhift.services import accounts

    hasher, accounts._HASHER = accounts._HASHER, PasswordHasher.from_parameters(profiles.CHEAPEST)
    path = tmp_path_factory.mktemp("signin") / "scenario.db"
    init_database(str(path), user="tester")
    store = open_current(str(path), user="tester")
    try:
        build(store, path.parent)
    finally:
        store.dispose()
        accounts._HASHER = hasher
    return str(path)


def _app(db, monkeypatch) -> AppTest:
    monkeypatch.setenv("EXPOSHIFT_DB", db)
    at = AppTest.from_file(str(ENTRY), default_timeout=120)
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _everything(at: AppTest) -> str:
    """Every text the page shows, tables included."""
    parts = [m.value for m in at.markdown] + [c.value for c in at.caption]
    parts += [t.value for t in at.title] + [h.value for h in at.subheader]
    for kind in (at.info, at.warning, at.success, at.error):
        parts += [e.value for e in kind]
    for d in at.dataframe:
        parts.append(d.value.to_csv())
    for e in at.expander:
        parts.append(str(e.label))
    return "\n".join(map(str, parts))


def _sign_in(at: AppTest, name: str, password: str) -> AppTest:
    at.text_input(key="signin_name").input(name)
    at.text_input(key="signin_password").input(password)
    at.button[0].click().run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _is_form(at: AppTest) -> bool:
    return bool(at.title) and at.title[0].value == "Sign in to exposhift"


def test_accounts_mean_a_sign_in_form_and_nothing_else(scenario_db, monkeypatch):
    at = _app(scenario_db, monkeypatch)
    assert _is_form(at)
    text = _everything(at)
    assert not at.dataframe and not at.metric and not at.get("plotly_chart")
    assert not {m for m in every_marker() if m in text} and "Invented study" not in text
    at.switch_page("views/studies.py").run()  # a page's address: still the form
    assert _is_form(at) and not at.dataframe


def test_wrong_password_then_right_one(scenario_db, monkeypatch):
    at = _sign_in(_app(scenario_db, monkeypatch), "ana", "not-her-password")
    assert _is_form(at)
    assert [e.value for e in at.error] == ["sign-in failed: the name or the password is wrong"]
    at = _sign_in(at, "nobody-at-all", "not-her-password")  # the same message: no hint
    assert [e.value for e in at.error] == ["sign-in failed: the name or the password is wrong"]
    at = _sign_in(at, "ana", PASSWORDS["ana"])
    assert not _is_form(at) and at.title[0].value == "Evidence at a glance"
    assert any("Signed in as **ana** (reviewer)" in c.value for c in at.sidebar.caption)


def test_sign_out_and_expiry_bring_the_form_back(scenario_db, monkeypatch):
    at = _sign_in(_app(scenario_db, monkeypatch), "ben", PASSWORDS["ben"])
    assert not _is_form(at)
    at.sidebar.button(key="signout").click().run()
    assert _is_form(at) and "You have signed out." in [w.value for w in at.warning]
    at = _sign_in(at, "ben", PASSWORDS["ben"])
    con = sqlite3.connect(scenario_db)  # two hours without use, written straight to the file
    with con:
        con.execute("UPDATE account_session SET last_seen_at = '2000-01-01T00:00:00.000000Z'")
    con.close()
    at.run()
    assert _is_form(at)
    assert any("expired" in w.value for w in at.warning)


def test_a_disabled_account_is_refused_with_its_own_message(scenario_db, monkeypatch, tmp_path):
    import shutil

    from exposhift.services.accounts import disable_account

    db = str(tmp_path / "copy.db")
    shutil.copy(scenario_db, db)
    store = open_current(db, user="root")
    try:
        disable_account(store, "cy")
    finally:
        store.dispose()
    at = _sign_in(_app(db, monkeypatch), "cy", PASSWORDS["cy"])
    assert _is_form(at) and "'cy' is disabled" in at.error[0].value


def test_failed_sign_ins_are_rate_limited(scenario_db, monkeypatch, tmp_path):
    import shutil

    db = str(tmp_path / "copy.db")
    shutil.copy(scenario_db, db)
    at = _app(db, monkeypatch)
    for i in range(5):
        at = _sign_in(at, "ed", f"guess-{i}")
    at = _sign_in(at, "ed", PASSWORDS["ed"])
    assert _is_form(at) and at.error[0].value.startswith("sign-in refused: 5 failed attempts")
    con = sqlite3.connect(db)
    audited = con.execute(
        "SELECT count(*) FROM audit_entry WHERE row_key = 'ed' AND action = 'sign-in refused'"
    ).fetchone()[0]
    con.close()
    assert audited == 6


def test_beyond_loopback_the_form_is_shown_even_without_accounts(tmp_path, monkeypatch):
    from streamlit import config

    db = str(tmp_path / "empty.db")
    init_database(db, user="tester")
    config.set_option("server.address", "0.0.0.0")
    try:
        at = _app(db, monkeypatch)
    finally:
        config.set_option("server.address", "127.0.0.1")
    assert _is_form(at)
    assert any("no accounts yet" in w.value for w in at.warning)


def test_no_accounts_on_loopback_is_the_os_user(tmp_path, monkeypatch):
    from exposhift.store.database import default_user

    db = str(tmp_path / "empty.db")
    init_database(db, user="tester")
    at = _app(db, monkeypatch)
    assert not _is_form(at)
    assert any(f"Local session as **{default_user()}**" in c.value for c in at.sidebar.caption)


@pytest.mark.parametrize("name", sorted(ROLES))
def test_the_studies_page_shows_each_person_what_she_may_see(scenario_db, monkeypatch, name):
    at = _sign_in(_app(scenario_db, monkeypatch), name, PASSWORDS[name])
    at.switch_page("views/studies.py").run()
    assert not at.exception and not _is_form(at)
    con = sqlite3.connect(scenario_db)
    try:
        for study, reviewers in INDEPENDENT.items():
            at.selectbox(key="studies_pick").set_value(study).run()
            table = next(d.value for d in at.dataframe if "domain" in d.value.columns)
            table = table.set_index("domain")
            for r in reviewers:
                col = table[f"{r} (independent)"]
                if (study, r) in VISIBLE[name]:
                    stored = dict(
                        con.execute(
                            "SELECT r.domain, r.level FROM rating r JOIN appraisal a ON "
                            "a.id = r.appraisal_id JOIN study s ON s.id = a.study_id WHERE "
                            "s.key = ? AND a.reviewer = ? AND a.stage = 'independent'",
                            (study, r),
                        ).fetchall()
                    )
                    assert {d: col[d] for d in stored} == {d: str(v) for d, v in stored.items()}
                else:
                    assert set(col) == {"hidden"}, (name, study, r)
            if study == "B2":
                assert "ed (consensus)" in table.columns and "hidden" not in set(
                    table["ed (consensus)"]
                )
            assert not {m for m in every_marker() if m in _everything(at)}
    finally:
        con.close()


@pytest.mark.parametrize("name", ["rita", "ana"])
def test_no_page_shows_a_blinded_rating(scenario_db, monkeypatch, name):
    at = _sign_in(_app(scenario_db, monkeypatch), name, PASSWORDS[name])
    for page in PAGES:
        at.switch_page(f"views/{page}.py").run()
        assert not at.exception, (page, [e.value for e in at.exception])
        assert not _is_form(at)
        text = _everything(at)
        assert not {m for m in every_marker() if m in text}, page


def test_the_dashboard_store_acts_for_the_signed_in_person_only(scenario_db, monkeypatch):
    import data

    monkeypatch.setenv("EXPOSHIFT_DB", scenario_db)
    assert data.store(scenario_db).role == "reader"  # a page that forgets the identity
    with pytest.raises(AccessError, match="'rita' has the role reader"):
        with data.acting(scenario_db, Identity("rita", "reader", True)).write():
            pass
    ana = data.acting(scenario_db, Identity("ana", "reviewer", True))
    assert (ana.user, ana.role) == ("ana", "reviewer")
