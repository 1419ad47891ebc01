"""Resolving the names users type (exposure, outcome) against the evidence base."""

from __future__ import annotations

import difflib

from exposhift.errors import NotFoundError
from exposhift.store.queries import vocabulary_names


def require_name(conn, entity: str, name: str) -> str:
    """``name`` if it exists; otherwise NotFoundError naming close matches."""
    known = vocabulary_names(conn, entity)
    if name in known:
        return name
    close = difflib.get_close_matches(name, known, n=3, cutoff=0.5)
    hint = f"; did you mean {', '.join(repr(c) for c in close)}?" if close else (
        f"; known {entity}s: {', '.join(known[:12])}{' ...' if len(known) > 12 else ''}"
        if known else f"; the evidence base has no {entity}s yet (import a sheet first)")
    raise NotFoundError(f"no {entity} '{name}' in the evidence base{hint}")
