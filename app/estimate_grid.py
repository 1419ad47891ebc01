"""The "Estimates in a grid" tab of the records page: all estimates of one study in an editable
grid (correct cells, add rows), one check that lists what saving would add, change and leave
unchanged and every problem with its grid row and column, then one save of the whole grid.

The page computes nothing: one service call per action (services/estimate_grid.py: the sheet's
validation and the import's writing, the version of every row checked in the save's
transaction). A person who may not edit sees no grid; the service refuses them anyway."""

from __future__ import annotations

import hashlib

import forms
import pandas as pd
import streamlit as st
import ui

from exposhift.errors import ExposhiftError, InputFileError
from exposhift.io.column_labels import help_text, label
from exposhift.services import editing, estimate_grid
from exposhift.services.estimate_grid import GRID_COLUMNS, StaleGridError

STATUS_TITLES = {"grid row": "row", "estimate": "estimate (its key)", "changes": "new values"}


def _digest(frame: pd.DataFrame) -> str:
    cells = frame.reindex(columns=list(GRID_COLUMNS)).astype("object")
    text = cells.where(cells.notna(), "").astype("str").to_csv(index=False)
    return hashlib.sha256(text.encode()).hexdigest()


def _config() -> dict:
    config = {c: st.column_config.TextColumn(label(c), help=help_text(c)) for c in GRID_COLUMNS}
    config["_index"] = st.column_config.NumberColumn(
        "row", help="The grid row named in problems", disabled=True
    )
    return config


def _draft(choice: str, gen: int) -> editing.StudyDraft:
    loaded = st.session_state.get("grid_draft")
    if loaded is None or loaded[0] != (choice, gen):
        with ui.guard():
            draft = editing.load_draft(forms.store(), choice)
        st.session_state["grid_draft"] = ((choice, gen), draft)
        st.session_state.pop("grid_checked", None)
    return st.session_state["grid_draft"][1]


def _show_check(check: estimate_grid.GridCheck) -> None:
    rows = check.rows
    n = {s: int((rows["status"] == s).sum()) for s in ("added", "changed", "unchanged")}
    outcomes = check.counts["outcome"].added
    st.success(
        f"**Checked: no problems.** Saving would add {n['added']}, change {n['changed']} and "
        f"leave {n['unchanged']} estimates unchanged"
        + (f" (and add {outcomes} new outcome{'s' if outcomes != 1 else ''})" if outcomes else "")
        + ". Nothing is written until you save."
    )
    ui.table(rows, key="grid_status", titles=STATUS_TITLES)
    for w in check.warnings:
        st.warning(f"Valid but looks wrong: {w}")


def show(studies: pd.DataFrame) -> None:
    """The tab: pick a study, edit its estimates, check, save."""
    message = st.session_state.pop("grid_message", None)
    if message:
        st.success(message)
    if not forms.who_line("editor", "correct or add estimates"):
        return
    keys = studies["study_id"].tolist()
    if not keys:
        st.info("No study yet: add one on the first tab or upload a sheet.")
        return
    found = ui.study_search(studies, "grid_search")
    if not found:
        st.info("No study matches this search.")
        return
    choice = ui.pick_capped("Study", found, key="grid_study", noun="matching studies")
    gen = st.session_state.setdefault("grid_gen", 0)
    draft = _draft(choice, gen)
    v = draft.versions["study"][choice]
    st.caption(
        f"{len(draft.estimates)} estimates of study `{choice}` (study version {v}); each row "
        "is one row of the extraction sheet. Correct cells or add rows at the bottom (a new "
        "row is numbered on from the last one in the check), then check. A row someone else "
        "saves before you is refused with both versions shown; nothing of the grid is written "
        "then. The grid does not delete estimates, nor change "
        "an estimate's key cells (event, outcome, measure, kind, subgroup, time window): add "
        "a new row instead."
    )
    grid = estimate_grid.grid_frame(draft)
    grid.index = pd.RangeIndex(1, len(grid) + 1)
    edited = st.data_editor(
        grid,
        key=f"grid_{choice}_{gen}",
        num_rows="add",
        hide_index=False,
        column_config=_config(),
        placeholder=ui.EMPTY,
        width="stretch",
    )
    digest = _digest(edited)
    left, mid, right = st.columns([1, 1, 3])
    if left.button("Check", key="grid_check", type="secondary"):
        try:
            with st.spinner("Checking…"):
                check = estimate_grid.check_grid(forms.store(), draft, edited)
        except ExposhiftError as exc:  # problems, a stale row, a refusal: shown below
            st.session_state["grid_checked"] = (digest, exc)
        else:
            st.session_state["grid_checked"] = (digest, check)
    if mid.button("Reload", key="grid_reload", help="Read the study's estimates again"):
        st.session_state["grid_gen"] = gen + 1
        st.rerun()
    checked = st.session_state.get("grid_checked")
    if checked is None:
        right.caption("Check the grid to see what saving would do.")
        return
    if checked[0] != digest:
        right.caption("The grid has changed since the last check: check it again.")
        return
    result = checked[1]
    if isinstance(result, InputFileError):
        forms.problems(result, row_word="grid row", key="grid_problems")
        return
    if isinstance(result, StaleGridError):
        forms.conflict(result, yours=result.yours)
        return
    if isinstance(result, ExposhiftError):
        st.error(str(result))
        return
    _show_check(result)
    if not result.changed:
        st.info("Saving would change nothing: every estimate is as stored.")
        return
    if st.button("Save the estimates", key="grid_save", type="primary"):
        try:
            with st.spinner("Saving…"):
                saved = estimate_grid.save_grid(forms.store(), draft, edited, user=forms.me().name)
        except InputFileError as exc:
            forms.problems(exc, row_word="grid row", key="grid_save_problems")
        except StaleGridError as exc:
            forms.conflict(exc, yours=exc.yours)
        except ExposhiftError as exc:
            st.error(str(exc))
        else:
            forms.after_write()
            c = saved.counts["estimate"]
            st.session_state["grid_message"] = (
                f"**Estimates saved** as {saved.user}: {c.added} added and {c.updated} changed."
            )
            st.session_state["grid_gen"] = gen + 1
            st.session_state.pop("grid_checked", None)
            st.rerun()
