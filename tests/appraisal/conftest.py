"""Shared fixtures for the appraisal tests: the shipped rubric."""

from __future__ import annotations

import pytest
from appraisal_helpers import RUBRIC_FILE

from exposhift.appraisal.rubric import load_rubric


@pytest.fixture(scope="session")
def rubric():
    return load_rubric(RUBRIC_FILE)


@pytest.fixture(scope="session")
def rubric_text() -> str:
    return RUBRIC_FILE.read_text(encoding="utf-8")
