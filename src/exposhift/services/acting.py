"""The person a dashboard write is made for: a store that records them in the audit trail.

The dashboard opens one store (engine) for everybody; each write names its acting user, who is
recorded in the audit entries of that write (:class:`exposhift.store.writer.Writer` takes the
store's ``user``). A write without a named user is refused before anything is read.
"""

from __future__ import annotations

import dataclasses

from exposhift.errors import ReviewError
from exposhift.store.database import Store


def require_user(user: str | None, action: str) -> str:
    """``user`` stripped, or ReviewError saying who must be named to ``action``."""
    name = (user or "").strip()
    if not name:
        raise ReviewError(
            f"to {action}, say who you are (sign in, or give your name in the sidebar): every "
            "change is recorded in the audit trail with the person who made it; nothing was "
            "written"
        )
    return name


def as_user(store: Store, user: str | None, action: str) -> Store:
    """The same store (same engine, no new connection pool) writing as ``user``."""
    return dataclasses.replace(store, user=require_user(user, action))
