"""Resolving the names users type (exposure, outcome) against the evidence base."""

from __future__ import annotations

import difflib

from sqlalchemy import Connection, select

from exposhift.errors import NotFoundError
from exposhift.store.models import Exposure, Outcome

_TABLES = {"exposure": Exposure.__table__, "outcome": Outcome.__table__}


def names(conn: Connection, entity: str) -> list[str]:
    t = _TABLES[entity]
    return sorted(n for (n,) in conn.execute(select(t.c.name)))


def require_name(conn: Connection, entity: str, name: str) -> str:
    """``name`` if it exists; otherwise NotFoundError naming close matches."""
    known = names(conn, entity)
    if name in known:
        return name
    close = difflib.get_close_matches(name, known, n=3, cutoff=0.5)
    hint = f"; did you mean {', '.join(repr(c) for c in close)}?" if close else (
        f"; known {entity}s: {', '.join(known[:12])}{' ...' if len(known) > 12 else ''}"
        if known else f"; the evidence base has no {entity}s yet (import a sheet first)")
    raise NotFoundError(f"no {entity} '{name}' in the evidence base{hint}")
