"""Fixtures for the import/export tests."""

from __future__ import annotations

import pytest
from io_helpers import write_sheet


@pytest.fixture
def sheet(tmp_path):
    """Write a sheet into the test's directory: ``sheet(rows, name=..., columns=...)``."""

    def make(rows, name="sheet.csv", columns=None, encoding="utf-8"):
        return write_sheet(tmp_path / name, rows, columns, encoding)

    return make
