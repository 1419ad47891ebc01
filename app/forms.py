"""Pieces the writing pages share (upload, records, appraise, downloads): the store they write
through, the list of problems of a refused input, the conflict of a stale edit, and what to do
after a write. The pages compute nothing; they call one service per action."""

from __future__ import annotations

import identity
import pandas as pd
import streamlit as st

import data
from exposhift.errors import InputFileError
from exposhift.io.columns import BY_NAME
from exposhift.services.setup import open_current


@st.cache_resource(show_spinner=False)
def _store(db: str | None):
    return open_current(db, user="dashboard")


def store():
    """The evidence base as the person signed in (:func:`identity.who`): a write records their
    name and is checked against their role in the services (a reader's view refuses every
    write), and reads apply their blinding."""
    from exposhift.services.accounts import acting_store

    return acting_store(_store(data.db_target()), identity.who())


def me() -> identity.Identity:
    return identity.who()


def who_line(role: str, action: str) -> bool:
    """True when this session may ``action`` (holds ``role``); otherwise say so and False."""
    person = me()
    if not person.name:
        st.info(f"Sign in to {action}: every change is recorded with the person who made it.")
        return False
    if not person.may(role):
        st.info(
            f"You are signed in as a {person.role}: {action} needs the {role} role. Ask an "
            "administrator of this evidence base."
        )
        return False
    return True


def where(p, row_word: str) -> str:
    if p.row is None:
        return "whole form" if "form" in p.file else "whole file"
    return f"{row_word} {p.row}"


def section(column: str | None) -> str:
    if not column:
        return ""
    col = BY_NAME.get(column)
    return col.entity if col is not None else ""


#: problems listed on a page (all are counted)
SHOWN = 200


def problems(exc: InputFileError, row_word: str = "row", key: str | None = None) -> None:
    """Every problem of a refused input, in one table (where, field, what to do)."""
    n = len(exc.problems)
    st.error(f"**{n} problem{'s' if n != 1 else ''} found; nothing was written.**")
    frame = pd.DataFrame(
        [
            {
                "file": p.file,
                "where": where(p, row_word),
                "field": p.column or "",
                "problem": p.message,
            }
            for p in exc.problems[:SHOWN]
        ],
        columns=["file", "where", "field", "problem"],
    )
    st.table(frame.set_index("where"))
    if n > SHOWN:
        st.caption(f"… and {n - SHOWN} more; correct these and check again.")


def conflict(exc) -> None:
    """A stale edit: the other person's change from the audit trail, beside the stored values."""
    st.error(f"**Not saved: someone else changed this record.** {exc}")
    for c in exc.conflicts:
        rows = []
        for e in c.changes:
            before, after = e.get("before") or {}, e.get("after") or {}
            for f in sorted((set(before) | set(after)) - {"version"}):
                rows.append(
                    {
                        "who": e["user"],
                        "when": e["at"],
                        "field": f,
                        "before": "" if before.get(f) is None else str(before.get(f)),
                        "their value": "" if after.get(f) is None else str(after.get(f)),
                    }
                )
        st.markdown(f"**{c.entity} `{c.key}`** — their change (from the audit trail):")
        st.table(pd.DataFrame(rows, columns=["who", "when", "field", "before", "their value"]))


def after_write() -> None:
    """Every page reads the evidence base again after a write."""
    data.clear()
