"""The "Add or correct records" page with AppTest, on a private copy of the demo base.

A correction is saved through the sheet's rules as the named person (version and audit entry
checked with ``sqlite3``); every problem of a bad form is shown with its row and field and
nothing is written; a stale edit is refused with the other person's change shown; an estimate is
added; an event is registered alone (bad and duplicate events refused); a record's history
matches the audit trail read with ``sqlite3`` and hides blinded ratings; a reader gets no
working controls.
"""

from __future__ import annotations

import pytest
from writing_helpers import button, copy_db, count, frame_with, open_page, sql, texts

from exposhift.services import editing
from exposhift.services.setup import open_current

STUDY = "Pemberton2012"  # one estimate, one independent appraisal (moreau) in the demo
P = f"rec0_{STUDY}_0_"


@pytest.fixture
def db(demo_db, tmp_path, monkeypatch) -> str:
    path = copy_db(demo_db, tmp_path / "evidence.db")
    monkeypatch.setenv("EXPOSHIFT_DB", path)
    return path


def _study_page(name: str | None = "ann", role: str | None = None):
    at = open_page("records", name, role)
    at.selectbox(key="records_study").set_value(STUDY)
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _save(at, label: str = "Save"):
    button(at, label).click()
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _problems(at):
    return frame_with(at, "problem")


def test_a_correction_is_saved_versioned_and_audited(db):
    at = _study_page()
    at.text_input(key=P + "s_population").set_value("all births, Australia (corrected)")
    at = _save(at)
    assert any("Study saved" in s.value and "ann" in s.value for s in at.success)
    assert sql(db, "select population, version from study where key = ?", STUDY) == [
        ("all births, Australia (corrected)", 2)
    ]
    assert sql(
        db,
        "select user from audit_entry where row_key = ? and action = 'update'",
        STUDY,
    ) == [("ann",)]


def test_every_problem_of_a_bad_form_is_shown_and_nothing_written(db):
    at = _study_page()
    at.text_input(key=P + "s_year").set_value("20x")
    at.text_input(key=P + "s_design").set_value("itz")
    at.text_input(key=P + "e_estimate").set_value("abc")
    at.text_input(key=P + "v_change_date").set_value("2003-13")
    audit = count(db, "audit_entry")
    at = _save(at)
    problems = _problems(at)
    found = set(zip(problems["where"], problems["sheet column"], strict=True))
    assert {
        ("estimate row 1", "year"),
        ("estimate row 1", "design"),
        ("estimate row 1", "estimate"),
        ("estimate row 1", "change_date"),
    } <= found
    assert "nothing was written" in texts(at)
    assert count(db, "audit_entry") == audit


def test_a_stale_edit_is_refused_with_the_other_change_shown(db):
    at = _study_page()  # ann's form shows version 1
    other = open_current(db, user="x")
    try:
        theirs = editing.load_draft(other, STUDY)
        editing.save_study(
            other,
            theirs,
            dict(theirs.study, comparison="states that banned it later (bob)"),
            theirs.events,
            theirs.estimates,
            user="bob",
        )
    finally:
        other.dispose()
    at.text_input(key=P + "s_comparison").set_value("ann's comparison")
    at = _save(at)
    assert any("someone else changed this record" in e.value for e in at.error)
    theirs_table = frame_with(at, "their value")
    row = theirs_table[theirs_table["sheet column"] == "comparison"].iloc[0]
    assert row["who"] == "bob" and row["their value"] == "states that banned it later (bob)"
    assert sql(db, "select comparison from study where key = ?", STUDY) == [
        ("states that banned it later (bob)",)
    ]


def test_an_estimate_is_added_to_a_study(db):
    at = _study_page()
    at.selectbox(key=f"records_estimate_0_{STUDY}").set_value("(add a new estimate)")
    at.run()
    p = f"rec0_{STUDY}_None_e_"
    for field, value in {
        "event_id": "DRV-AUS-2003",
        "outcome": "preterm birth",
        "measure": "RR",
        "estimate": "0.91",
        "ci_low": "0.84",
        "ci_high": "0.99",
        "subgroup": "first births",
        "time_window": "2003-2008",
    }.items():
        at.text_input(key=p + field).set_value(value)
    before = count(db, "estimate")
    at = _save(at)
    assert any("1 added" in s.value for s in at.success), texts(at)
    assert count(db, "estimate") == before + 1


EVENT = {
    "event_id": "DRV-NZL-2011",
    "exposure": "dravonil",
    "change_kind": "ban",
    "change_direction": "decrease",
    "country": "NZL",
    "change_date": "2011-07",
    "demo": "yes",
}


def _event_form(at, values: dict):
    for field, value in values.items():
        at.text_input(key=f"event_{field}").set_value(value)
    return _save(at, "Register the event")


def test_an_event_is_registered_without_a_study(db):
    before = count(db, "event")
    at = _event_form(open_page("records", "ann"), EVENT)
    assert any("Event saved" in s.value for s in at.success), texts(at)
    assert count(db, "event") == before + 1
    assert sql(
        db,
        "select country, change_date, date_precision from event where key = ?",
        EVENT["event_id"],
    ) == [("NZL", "2011-07", "month")]
    at = _event_form(at, EVENT)  # the same key again
    assert "already in the evidence base" in _problems(at)["problem"].iloc[0]
    assert count(db, "event") == before + 1


def test_a_bad_event_lists_every_problem(db):
    before = count(db, "audit_entry")
    at = _event_form(
        open_page("records", "ann"),
        dict(EVENT, change_kind="closure?", change_direction="down", change_date="2011-13"),
    )
    fields = set(_problems(at)["sheet column"])
    assert {"change_kind", "change_direction", "change_date"} <= fields
    assert count(db, "audit_entry") == before


def test_history_matches_the_audit_trail_and_hides_blinded_ratings(db):
    at = open_page("records", "ann")
    at.selectbox(key="history_key").set_value(STUDY)
    at.run()
    trail = next(d.value for d in at.dataframe if "record type" in d.value.columns)
    n = sql(
        db,
        "select count(*) from audit_entry where row_key = ? or row_key like ?",
        STUDY,
        STUDY + "|%",
    )[0][0]
    assert len(trail) == n
    moreau = trail[trail["record"].str.startswith(f"{STUDY}|moreau|independent")]
    assert len(moreau) and set(moreau["change"]) == {
        "hidden until both independent appraisals are in"
    }


def test_a_reader_gets_no_working_controls(db, monkeypatch):
    at = _study_page("rita", "reader")
    assert button(at, "Save").disabled
    assert at.text_input(key=P + "s_population").disabled
    assert button(at, "Register the event").disabled
    assert "needs the editor role" in texts(at)


def test_history_names_records_by_their_keys_not_their_ids(db):
    """An estimate's insert entry names its study and event by key (read back with sqlite3),
    never by the integer ids the audit entry stores."""
    at = open_page("records", "ann")
    at.selectbox(key="history_key").set_value(STUDY)
    at.run()
    trail = next(d.value for d in at.dataframe if "record type" in d.value.columns)
    ((event, study_id, event_id),) = sql(
        db,
        "select v.key, e.study_id, e.event_id from estimate e join event v on v.id = e.event_id "
        "join study s on s.id = e.study_id where s.key = ?",
        STUDY,
    )
    inserted = trail[(trail["record type"] == "estimate") & (trail["action"] == "insert")]
    change = inserted["change"].iloc[0]
    assert f"Event key: {event}" in change and f"Study key: {STUDY}" in change
    assert f"event_id: {event_id}" not in change and f"study_id: {study_id}" not in change
    assert "Lower CI limit" in change or "Estimate: " in change  # fields by their labels
