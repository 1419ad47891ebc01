"""Pieces the writing pages share (upload, records, appraise, downloads): the store they write
through, the list of problems of a refused input, the conflict of a stale edit, and what to do
after a write. The pages compute nothing; they call one service per action."""

from __future__ import annotations

import identity
import pandas as pd
import streamlit as st

import data
from exposhift.errors import InputFileError
from exposhift.io import column_labels
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
PROBLEM_COLUMNS = ["file", "where", "field", "sheet column", "problem"]


def problems(exc: InputFileError, row_word: str = "row", key: str | None = None) -> None:
    """Every problem of a refused input, in one table (where, field by its label, the sheet's
    column name, what to do)."""
    n = len(exc.problems)
    st.error(f"**{n} problem{'s' if n != 1 else ''} found; nothing was written.**")
    frame = pd.DataFrame(
        [
            {
                "file": p.file,
                "where": where(p, row_word),
                "field": column_labels.LABELS.get(p.column or "", p.column or ""),
                "sheet column": p.column or "",
                "problem": p.message,
            }
            for p in exc.problems[:SHOWN]
        ],
        columns=PROBLEM_COLUMNS,
    )
    st.table(frame.set_index("where"))
    if n > SHOWN:
        st.caption(f"… and {n - SHOWN} more; correct these and check again.")


def conflict(exc, yours: dict[str, dict[str, str]] | None = None) -> None:
    """A stale edit: the other person's change from the audit trail, beside the values the
    edit was based on and (``yours``: record key -> stored field -> text) the edit's own."""
    st.error(f"**Not saved: someone else changed this record.** {exc}")
    for c in exc.conflicts:
        mine = (yours or {}).get(c.key)
        rows = []
        for e in c.changes:
            before, after = e.get("before") or {}, e.get("after") or {}
            for f in sorted((set(before) | set(after)) - {"version"}):
                row = {
                    "who": e["user"],
                    "when": e["at"],
                    "field": column_labels.field_label(c.entity, f),
                    "sheet column": column_labels.STORED_AS.get(c.entity, {}).get(f, f),
                    "before": "" if before.get(f) is None else str(before.get(f)),
                    "their value": "" if after.get(f) is None else str(after.get(f)),
                }
                if mine is not None:
                    row["your value"] = mine.get(f, "")
                rows.append(row)
        columns = ["who", "when", "field", "sheet column", "before", "their value"]
        st.markdown(f"**{c.entity} `{c.key}`** — their change (from the audit trail):")
        st.table(pd.DataFrame(rows, columns=columns + ([] if mine is None else ["your value"])))


def after_write() -> None:
    """Every page reads the evidence base again after a write."""
    data.clear()
