"""Fixtures for the dashboard tests: the invented demo evidence base, built once per session,
and the dashboard's own modules (``app/``) on the import path for the chart builders."""

from __future__ import annotations

import pytest
from dashboard_helpers import app_on_path

from exposhift.services.demo import build_demo
from exposhift.services.setup import open_current

app_on_path()


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
