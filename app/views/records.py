"""Add or correct records: a study with its events and estimates, an exposure-change event
without a study, and the history of a record from the audit trail.

The grid tab (estimate_grid.py) edits all estimates of one study at once. The forms hold the
cells of an extraction sheet and are checked by the import's own validation
(same rules, same messages); a save is refused when someone else has changed a record the form
showed, with their change shown. One service call per action (services/editing.py,
services/history.py)."""

import estimate_grid
import forms
import pandas as pd
import streamlit as st
import ui

import data
from exposhift.errors import ExposhiftError, InputFileError
from exposhift.io import column_labels
from exposhift.io.columns import EVENT_COLUMNS, STUDY_COLUMNS
from exposhift.io.validate import EVENTS_SHEET_COLUMNS
from exposhift.services import editing
from exposhift.services.editing import StaleEditError

db = data.db_target()
NEW = "(a new study)"
st.title("Add or correct records")
with ui.guard():
    ui.demo_notice(data.summary(db))
    studies = data.studies(db)
    events = data.events(db)

tab_study, tab_grid, tab_event, tab_history = st.tabs(
    ["Study, events and estimates", "Estimates in a grid", "Register an event", "Record history"]
)


NEW_ESTIMATE = "(add a new estimate)"


def _fields(title: str, columns, shown: dict, prefix: str, may: bool, locked: set) -> dict:
    """Text boxes holding a sheet's cells (the sheet's rules check them on saving)."""
    st.markdown(f"**{title}**")
    cols = st.columns(3)
    return {
        c: cols[i % 3].text_input(
            column_labels.label(c),
            value=str(shown.get(c, "") or ""),
            key=prefix + c,
            help=column_labels.help_text(c),
            disabled=not may or c in locked,
        )
        for i, c in enumerate(columns)
    }


def _with_event(events: pd.DataFrame, key: str, typed: dict, shown: dict) -> pd.DataFrame:
    """The form's events: the shown event with the typed fields, or a new one when any field
    was typed for an event the form did not show (a stored event needs no fields)."""
    key = key.strip()
    rows = events.to_dict("records")
    known = [r["event_id"] for r in rows]
    if key in known:
        if shown.get("event_id") == key:  # the form showed this event: its fields as typed
            i = known.index(key)
            rows[i] = {**rows[i], **typed, "event_id": key}
    elif any(str(v).strip() for v in typed.values()):
        rows.append({**typed, "event_id": key})
    return pd.DataFrame(rows, columns=list(EVENT_COLUMNS))


def _saved(result: editing.SaveResult, what: str) -> None:
    forms.after_write()
    parts = [
        f"{c.added} added and {c.updated} changed {e}{'s' if e != 'study' else ''}"
        for e, c in result.counts.items()
        if c.added or c.updated
    ]
    st.session_state["records_message"] = (
        f"**{what} saved** as {result.user}: " + "; ".join(parts) + "."
        if parts
        else f"**Nothing to save:** the {what.lower()} is as stored."
    )
    st.session_state["records_warnings"] = [str(w) for w in result.warnings]


def _show_message() -> None:
    msg = st.session_state.pop("records_message", None)
    if msg:
        st.success(msg)
    for w in st.session_state.pop("records_warnings", []):
        st.warning(f"Valid but looks wrong: {w}")


# 1. a study, its events and its estimates ----------------------------------------------------
with tab_study:
    _show_message()
    may = forms.who_line("editor", "add or correct a study")
    choice = ui.pick_capped(
        "Study",
        ui.study_search(studies, "records_search"),
        key="records_study",
        first=(NEW,),
        noun="matching studies",
    )
    gen = st.session_state.setdefault("records_gen", 0)
    locked = {"study_id"} if choice != NEW else set()
    loaded = st.session_state.get("records_draft")
    if loaded is None or loaded[0] != (choice, gen):
        with ui.guard():
            draft = (
                editing.blank_draft()
                if choice == NEW
                else editing.load_draft(forms.store(), choice)
            )
        st.session_state["records_draft"] = ((choice, gen), draft)
    draft = st.session_state["records_draft"][1]
    if draft.key is not None:
        v = draft.versions["study"][draft.key]
        st.caption(
            f"Showing version {v} of study `{draft.key}`. If someone else saves it before you, "
            "your save is refused and their change is shown; nothing is lost."
        )
        if st.button("Reload from the evidence base", key="records_reload"):
            st.session_state["records_gen"] = gen + 1
            st.rerun()
    est_rows = draft.estimates.to_dict("records")
    shown_rows = [i for i, r in enumerate(est_rows) if r["outcome"] or r["estimate"]]
    labels = [
        f"{n + 1}: {r['outcome']} · {r['measure']} {r['estimate_kind']} · {r['estimate']}"
        + (f" · {r['subgroup']}" if r["subgroup"] else "")
        + (f" · {r['time_window']}" if r["time_window"] else "")
        for n, r in enumerate(est_rows[i] for i in shown_rows)
    ]
    if labels:
        st.markdown(f"**Estimates of this study** ({len(labels)})")
        ui.table(draft.estimates, key="records_estimates", titles=column_labels.LABELS)
    pick = st.selectbox(
        "Estimate to correct or add",
        [*labels, NEW_ESTIMATE],
        key=f"records_estimate_{gen}_{choice}",
        help="The form edits the study, one estimate and that estimate's event; the other "
        "estimates are saved as they are.",
    )
    row = shown_rows[labels.index(pick)] if pick in labels else None
    est = est_rows[row] if row is not None else {c: "" for c in editing.ESTIMATE_FORM_COLUMNS}
    ev_rows = {r["event_id"]: r for r in draft.events.to_dict("records")}
    ev = ev_rows.get(est["event_id"], {c: "" for c in EVENT_COLUMNS})
    p = f"rec{gen}_{choice}_{row}_"
    with st.form(f"study_form_{gen}_{choice}_{row}", border=False):
        values = _fields("Study", STUDY_COLUMNS, draft.study, p + "s_", may, locked)
        est_values = _fields("Estimate", editing.ESTIMATE_FORM_COLUMNS, est, p + "e_", may, set())
        ev_values = _fields(
            "Its event (an event already in the evidence base needs only its event key above)",
            EVENT_COLUMNS[1:],
            ev,
            p + "v_",
            may,
            set(),
        )
        save = st.form_submit_button("Save", type="primary", disabled=not may)
    if save:
        try:
            with st.spinner("Checking and saving…"):
                estimates = draft.estimates.copy()
                if row is None:
                    estimates = pd.concat([estimates, pd.DataFrame([est_values])])
                else:
                    for c, v in est_values.items():
                        estimates.iat[row, estimates.columns.get_loc(c)] = v
                events = _with_event(draft.events, est_values["event_id"], ev_values, ev)
                result = editing.save_study(
                    forms.store(), draft, values, events, estimates, user=forms.me().name
                )
        except InputFileError as exc:
            forms.problems(exc, row_word="estimate row", key="records_problems")
        except StaleEditError as exc:
            forms.conflict(exc)
        except ExposhiftError as exc:
            st.error(str(exc))
        else:
            _saved(result, "Study")
            key = values["study_id"].strip()
            st.session_state["records_gen"] = gen + 1
            if draft.key is None and key:
                st.session_state["records_study"] = key
            st.rerun()

# 2. a study's estimates in a grid ------------------------------------------------------------
with tab_grid:
    estimate_grid.show(studies)

# 3. an event with no study yet ----------------------------------------------------------------
with tab_event:
    st.caption(
        "An exposure change that no study has evaluated yet: it appears in the gap map's "
        "opportunities until a study of it is recorded."
    )
    may_event = forms.who_line("editor", "register an event")
    with st.form("event_form", clear_on_submit=False, border=False):
        cols = st.columns(3)
        ev_values = {}
        for i, c in enumerate(EVENTS_SHEET_COLUMNS):
            ev_values[c] = cols[i % 3].text_input(
                column_labels.label(c),
                value="no" if c == "demo" else "",
                key=f"event_{c}",
                help=column_labels.help_text(c),
                disabled=not may_event,
            )
        register = st.form_submit_button(
            "Register the event", type="primary", disabled=not may_event
        )
    if register:
        try:
            result = editing.register_event(forms.store(), ev_values, user=forms.me().name)
        except InputFileError as exc:
            forms.problems(exc, key="event_problems")
        except ExposhiftError as exc:
            st.error(str(exc))
        else:
            _saved(result, "Event")
            st.rerun()
    _show_message()

# 4. history -----------------------------------------------------------------------------------
with tab_history:
    keys = studies["study_id"].tolist() + sorted(events["event_id"].tolist())
    ev_text = events.sort_values("event_id")
    hay = (studies["study_id"] + " " + studies["citation"].fillna("")).tolist() + (
        ev_text["event_id"]
        + " "
        + ev_text["exposure"].fillna("")
        + " "
        + ev_text["country"].fillna("")
    ).tolist()
    found = ui.search_options(
        keys,
        st.text_input(
            "Search studies and events (key, citation, exposure or country)", key="history_search"
        ),
        hay,
    )
    if not found:
        st.info("No study or event matches this search.")
        st.stop()
    key = ui.pick_capped("Study or event", found, key="history_key", noun="matching records")
    with ui.guard():
        trail = data.record_history(db, key, forms.me())
    st.caption(
        f"{len(trail)} audit entries for `{key}` and the records under it (estimates, "
        "appraisals, ratings), oldest first. Another reviewer's independent ratings stay "
        "hidden until both independent appraisals are in."
    )
    st.dataframe(trail, hide_index=True, width="stretch", key="history_table")
