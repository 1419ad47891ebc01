"""The method a page's numbers were made with, in one caption (the rubric, settings and
certainty versions stored in the evidence base, with their content hashes), as the CLI's
``method parts:`` line and the dossier's manifest record it."""

from __future__ import annotations

import streamlit as st

import data
from exposhift.services.workspace import method_in_force


@st.cache_data(show_spinner=False, max_entries=4)
def _words(db: str | None, key: tuple) -> str:
    return method_in_force(data.store(db)).words()


def caption(db: str | None) -> None:
    """``Method parts: rubric version 1 (d01b9c26dae8), ...`` under a page's results."""
    st.caption(
        f"Method parts: {_words(db, data.stamp(db))}. The method is stored in the evidence "
        "base; `exposhift method show` gives it in full."
    )
