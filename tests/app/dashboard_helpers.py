"""Paths of the dashboard under test (shared by the tests of tests/app)."""

from __future__ import annotations

import sys
from pathlib import Path

APP_DIR = Path(__file__).resolve().parents[2] / "app"
ENTRY = APP_DIR / "exposhift_app.py"


def app_on_path() -> None:
    """Put ``app/`` first on the import path, as ``streamlit run`` does for its pages."""
    if str(APP_DIR) not in sys.path:
        sys.path.insert(0, str(APP_DIR))


def values(v) -> list:
    """A trace array from a figure's JSON: plain list, or plotly's typed-array form
    ``{"dtype": ..., "bdata": base64}``."""
    import base64

    import numpy as np

    if isinstance(v, dict) and "bdata" in v:
        return np.frombuffer(base64.b64decode(v["bdata"]), dtype=np.dtype(v["dtype"])).tolist()
    return list(v)


def cheap_hasher(monkeypatch) -> None:
    """Argon2 with argon2-cffi's cheapest parameters (``argon2.profiles.CHEAPEST``): tests
    only; a hash records its own parameters, so verification works either way."""
    from argon2 import PasswordHasher, profiles

    from exposhift.services import accounts

    monkeypatch.setattr(accounts, "_HASHER", PasswordHasher.from_parameters(profiles.CHEAPEST))
    accounts._dummy_hash.cache_clear()
