"""Fixtures for the dashboard tests: the invented demo evidence base, built once per session,
and the dashboard's own modules (``app/``) on the import path for the chart builders."""

from __future__ import annotations

from pathlib import Path

import pytest
from dashboard_helpers import app_on_path, cheap_hasher

from exposhift.services.demo import build_demo
from exposhift.services.setup import open_current

app_on_path()


@pytest.fixture(autouse=True)
def _real_identity_seam():
    """Tests of the writing pages replace ``identity.who`` (writing_helpers.open_page); the real
    seam is put back after every test."""
    import identity

    real = identity.who
    yield
    identity.who = real


@pytest.fixture(autouse=True)
def _cheap_password_hashes(monkeypatch):
    """Argon2 with argon2-cffi's cheapest profile, for speed (the parameters are read from each
    hash, so verification is unchanged; production keeps the RFC 9106 defaults)."""
    cheap_hasher(monkeypatch)


@pytest.fixture(scope="session")
def demo_db(tmp_path_factory) -> str:
    """A fresh demo evidence base (SQLite file path), built by the demo service."""
    path = tmp_path_factory.mktemp("dashboard") / "demo.db"
    build_demo(path, user="tester")
    return str(path)


@pytest.fixture(scope="session")
def demo_store(demo_db):
    store = open_current(demo_db, user="tester")
    yield store
    store.dispose()


@pytest.fixture(scope="module")
def browser():
    """Headless Debian Chromium through Playwright (fails, never skips, when it is missing)."""
    from playwright.sync_api import sync_playwright
    from test_app_browser import shots  # scripts/screenshots.py, loaded once

    assert Path(shots.CHROMIUM).exists(), (
        f"Chromium is missing at {shots.CHROMIUM}: apt-get install -y chromium "
        "(scripts/run_tests.sh does this when run as root)"
    )
    with sync_playwright() as pw:
        b = pw.chromium.launch(executable_path=shots.CHROMIUM, args=shots.CHROMIUM_ARGS)
        yield b
        b.close()
