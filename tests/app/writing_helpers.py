"""Helpers of the tests of the writing pages: a private copy of the demo evidence base per test,
an AppTest on one page as a named person, and counts read with sqlite3 (outside exposhift)."""

from __future__ import annotations

import sqlite3

from dashboard_helpers import ENTRY
from streamlit.testing.v1 import AppTest


def copy_db(src: str, dst) -> str:
    """A consistent copy of a SQLite evidence base (sqlite3's online backup)."""
    a, b = sqlite3.connect(src), sqlite3.connect(str(dst))
    try:
        a.backup(b)
    finally:
        a.close()
        b.close()
    return str(dst)


def sql(db: str, query: str, *args, read_only: bool = False) -> list[tuple]:
    """Rows read with the standard library's sqlite3. ``read_only`` beside a running dashboard
    server: a read-write connection of another process that closes last checkpoints and removes
    the WAL files under it (seen as "disk I/O error" in the dashboard)."""
    target = f"file:{db}?mode=ro" if read_only else db
    con = sqlite3.connect(target, uri=read_only)
    try:
        return con.execute(query, args).fetchall()
    finally:
        con.close()


def count(db: str, table: str) -> int:
    return sql(db, f"select count(*) from {table}")[0][0]  # noqa: S608 - fixed table names


#: the role each page's person gets by default (``open_page``): the least that page needs to write
PAGE_ROLE = {"upload": "editor", "records": "editor", "appraise": "reviewer", "downloads": "admin"}


def open_page(page: str, name: str | None, role: str | None = None) -> AppTest:
    """The dashboard on ``views/PAGE.py`` as the signed-in person ``name`` with ``role``
    (default :data:`PAGE_ROLE`); ``name`` None: nobody signed in (a reader who sees consensus
    only). The identity seam (``identity.who``) is replaced for the test; tests/app/conftest.py
    puts the real one back after each test, and tests/app/test_app_signin.py tests it."""
    import identity

    who = (
        identity.Identity(name, role or PAGE_ROLE.get(page, "reviewer"), True)
        if name
        else identity.NOBODY
    )
    identity.who = lambda: who
    at = AppTest.from_file(str(ENTRY), default_timeout=180)
    at.run()
    at.switch_page(f"views/{page}.py")
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def texts(at: AppTest) -> str:
    parts = [m.value for m in at.markdown] + [c.value for c in at.caption]
    for kind in (at.info, at.warning, at.success, at.error):
        parts += [e.value for e in kind]
    return "\n".join(parts)


def table(at: AppTest, key: str):
    for d in at.dataframe:
        if d.proto.id and key in d.proto.id:
            return d.value
    raise AssertionError(f"no table {key!r}")


def button(at: AppTest, label: str):
    for b in at.button:
        if b.label == label:
            return b
    raise AssertionError(f"no button {label!r}: {[b.label for b in at.button]}")


def frame_with(at: AppTest, column: str):
    """The first table or dataframe on the page with ``column`` (a table's index as a column)."""
    for t in list(at.table) + list(at.dataframe):
        value = t.value
        if value.index.name and value.index.name not in value.columns:
            value = value.reset_index()
        if column in value.columns:
            return value
    raise AssertionError(f"no table with column {column!r}: {texts(at)}")
