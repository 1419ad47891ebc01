"""Resolving the names users type (exposure, outcome) against the evidence base.

One rule everywhere a name is taken (pool, replication, list, export, ...): an exact match
wins; otherwise names match without regard to case or surrounding spaces ("Vellium" finds
"vellium"), as codes already do. Two stored names that differ only in case make a typed name
ambiguous: the error lists both.
"""

from __future__ import annotations

import difflib
from collections.abc import Sequence

from exposhift.errors import NotFoundError
from exposhift.store.queries import vocabulary_names


def fold(name: str) -> str:
    """The form names are compared in: stripped, case-folded, inner spaces collapsed."""
    return " ".join(str(name).split()).casefold()


def resolve_name(known: Sequence[str], entity: str, name: str) -> str:
    """The stored name that ``name`` designates; NotFoundError naming close matches."""
    if name in known:
        return name
    matches = [k for k in known if fold(k) == fold(name)]
    if len(matches) == 1:
        return matches[0]
    if matches:
        raise NotFoundError(
            f"{entity} '{name}' is ambiguous: the evidence base has "
            f"{', '.join(repr(m) for m in matches)}; type one exactly"
        )
    by_fold = {fold(k): k for k in known}
    close = [
        by_fold[c] for c in difflib.get_close_matches(fold(name), list(by_fold), n=3, cutoff=0.5)
    ]
    hint = (
        f"; did you mean {', '.join(repr(c) for c in close)}?"
        if close
        else (
            f"; known {entity}s: {', '.join(known[:12])}{' ...' if len(known) > 12 else ''}"
            if known
            else f"; the evidence base has no {entity}s yet (import a sheet first)"
        )
    )
    listing = f" ('exposhift list {entity}s' lists them)" if known else ""
    raise NotFoundError(f"no {entity} '{name}' in the evidence base{hint}{listing}")


def require_name(conn, entity: str, name: str) -> str:
    """The stored name of exposure or outcome ``name`` (see :func:`resolve_name`)."""
    return resolve_name(vocabulary_names(conn, entity), entity, name)
