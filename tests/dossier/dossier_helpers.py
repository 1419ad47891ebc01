"""Helpers of the dossier tests (Chromium for the browser tests)."""

from __future__ import annotations

from pathlib import Path

import pytest

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking"]


def require_chromium() -> None:
    if not Path(CHROMIUM).is_file():
        pytest.fail(
            f"Chromium is missing at {CHROMIUM}: apt-get install -y chromium (these "
            "tests never skip)"
        )
