"""The invented demo evidence base, built once per session by the demo service (it records the
demo committee's judgements from seed_records/judgements.csv)."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from exposhift.services.demo import build_demo
from exposhift.services.setup import open_current


@pytest.fixture(scope="session")
def demo_db(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("certainty") / "demo.db"
    build_demo(path, user="tester")
    return path


@pytest.fixture(scope="session")
def demo_store(demo_db):
    store = open_current(str(demo_db), user="tester")
    yield store
    store.dispose()


@pytest.fixture
def demo_copy(demo_db, tmp_path):
    path = tmp_path / "copy.db"
    shutil.copy(demo_db, path)
    store = open_current(str(path), user="tester")
    yield store
    store.dispose()
