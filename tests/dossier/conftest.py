"""Fixtures for the dossier tests: the invented demo evidence base, built once per session by
the demo service, and a private copy of it for tests that edit records."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from exposhift.services.demo import build_demo
from exposhift.services.setup import open_current


@pytest.fixture(scope="session")
def demo_db(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("dossier") / "demo.db"
    build_demo(path, user="tester")
    return path


@pytest.fixture(scope="session")
def demo_store(demo_db):
    store = open_current(str(demo_db), user="tester")
    yield store
    store.dispose()


@pytest.fixture
def demo_copy(demo_db, tmp_path):
    """A store on a private copy of the demo evidence base (safe to edit)."""
    path = tmp_path / "copy.db"
    shutil.copy(demo_db, path)
    store = open_current(str(path), user="tester")
    yield store
    store.dispose()
