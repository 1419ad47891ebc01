"""The estimate grid of the "Add or correct records" page with AppTest, on a private copy of the
demo base; the written values are read back with the standard library's sqlite3.

A good edit is checked (changed / unchanged per row) and saved as the signed-in person (value,
version and audit user checked); an added row is saved; a bad cell is listed with its grid
row and column (label and sheet column) and nothing is written; a row someone else saved since
the grid opened is refused with both versions and nothing of the batch is written (also when it
happens between the check and the save); a reader sees no grid and the service refuses.
"""

from __future__ import annotations

import json

import pytest
from writing_helpers import button, copy_db, count, frame_with, open_page, sql, texts

from exposhift.access import AccessError, Identity
from exposhift.services import editing, estimate_grid
from exposhift.services.accounts import acting_store
from exposhift.services.setup import open_current

STUDY = "Gallagher2010"  # three estimates in the demo, rows ordered by key:
ROW1 = "Gallagher2010|DRV-AUS-2003|low birth weight|RR|change||0-2 years after ban"
ROW2 = "Gallagher2010|DRV-AUS-2003|preterm birth|RR|change||0-2 years after ban"
NEW_ROW = {
    "event_id": "DRV-AUS-2003",
    "outcome": "preterm birth",
    "measure": "RR",
    "estimate": "0.88",
    "ci_low": "0.80",
    "ci_high": "0.97",
    "subgroup": "first births",
    "time_window": "0-2 years after ban",
}


@pytest.fixture
def db(demo_db, tmp_path, monkeypatch) -> str:
    path = copy_db(demo_db, tmp_path / "evidence.db")
    monkeypatch.setenv("EXPOSHIFT_DB", path)
    return path


def _grid_page(name: str | None = "ann", role: str | None = None):
    at = open_page("records", name, role)
    at.selectbox(key="grid_study").set_value(STUDY)
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _edit(at, edited: dict | None = None, added: list | None = None):
    """Edit the grid as the browser does: the editing state of ``st.data_editor``."""
    at.session_state[f"grid_{STUDY}_0"] = {
        "edited_rows": edited or {},
        "added_rows": added or [],
        "deleted_rows": [],
    }
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _click(at, label: str):
    button(at, label).click()
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _estimate(db: str, key: str) -> tuple:
    return sql(db, "select point, ci_low, ci_high, version from estimate where key = ?", key)[0]


def test_the_grid_shows_every_estimate_with_human_titles(db):
    at = _grid_page()
    editor = next(d for d in at.dataframe if d.proto.editing_mode != 0)
    assert len(editor.value) == 3  # the study's three estimates (sqlite3 count below)
    assert sql(
        db,
        "select count(*) from estimate e join study s on s.id = e.study_id where s.key = ?",
        STUDY,
    ) == [(3,)]
    config = json.loads(editor.proto.columns)
    assert config["ci_low"]["label"] == "Lower CI limit"
    assert "`ci_low`" in config["ci_low"]["help"]  # the sheet column, to match the file


def test_a_good_edit_is_checked_then_saved_versioned_and_audited(db):
    at = _edit(_grid_page(), edited={0: {"ci_low": "0.80", "ci_high": "1.02"}})
    at = _click(at, "Check")
    status = frame_with(at, "status")
    assert status.set_index("row")["status"].to_dict() == {
        1: "changed",
        2: "unchanged",
        3: "unchanged",
    }
    assert _estimate(db, ROW1)[3] == 1  # the check wrote nothing
    at = _click(at, "Save the estimates")
    assert any("Estimates saved" in s.value and "ann" in s.value for s in at.success), texts(at)
    assert _estimate(db, ROW1) == (0.91, 0.80, 1.02, 2)
    assert sql(
        db, "select user from audit_entry where row_key = ? and action = 'update'", ROW1
    ) == [("ann",)]
    assert _estimate(db, ROW2)[3] == 1  # an unchanged row is not rewritten


def test_a_row_is_added(db):
    before = count(db, "estimate")
    at = _click(_edit(_grid_page(), added=[NEW_ROW]), "Check")
    status = frame_with(at, "status").set_index("row")["status"]
    assert status[4] == "added"
    at = _click(at, "Save the estimates")
    assert count(db, "estimate") == before + 1
    key = "Gallagher2010|DRV-AUS-2003|preterm birth|RR|change|first births|0-2 years after ban"
    assert _estimate(db, key) == (0.88, 0.80, 0.97, 1)
    assert sql(db, "select user from audit_entry where row_key = ?", key) == [("ann",)]


def test_a_bad_cell_is_listed_with_its_row_and_column_and_nothing_written(db):
    audit, estimates = count(db, "audit_entry"), count(db, "estimate")
    at = _edit(
        _grid_page(),
        edited={1: {"estimate": "abc"}, 2: {"outcome": "renamed outcome"}},
        added=[dict(NEW_ROW, measure="XX"), dict(NEW_ROW, event_id="NOPE-2000", subgroup="x")],
    )
    at = _click(at, "Check")
    problems = frame_with(at, "problem")
    found = set(zip(problems["where"], problems["field"], problems["sheet column"], strict=True))
    assert {
        ("grid row 2", "Estimate", "estimate"),
        ("grid row 3", "Outcome", "outcome"),  # a key cell of a stored estimate
        ("grid row 4", "Effect measure", "measure"),
        ("grid row 5", "Event key", "event_id"),  # an event not in the evidence base
    } <= found
    assert "nothing was written" in texts(at)
    assert not [b for b in at.button if b.label == "Save the estimates"]
    assert count(db, "audit_entry") == audit and count(db, "estimate") == estimates


def _bob_saves_row2(db: str) -> None:
    other = open_current(db, user="x")
    try:
        theirs = editing.load_draft(other, STUDY)
        grid = estimate_grid.grid_frame(theirs)
        grid.loc[1, "ci_high"] = "0.99"  # ROW2
        estimate_grid.save_grid(other, theirs, grid, user="bob")
    finally:
        other.dispose()


def test_a_stale_row_is_refused_with_both_versions(db):
    at = _grid_page()  # ann's grid shows version 1 of every row
    _bob_saves_row2(db)
    at = _edit(at, edited={1: {"ci_high": "1.05"}})
    at = _click(at, "Check")
    assert any("someone else changed this record" in e.value for e in at.error), texts(at)
    both = frame_with(at, "your value")
    row = both[both["sheet column"] == "ci_high"].iloc[0]
    assert (row["who"], row["their value"], row["your value"]) == ("bob", "0.99", "1.05")
    assert _estimate(db, ROW2)[2:] == (0.99, 2)


def test_a_row_gone_stale_after_the_check_refuses_the_whole_batch(db):
    estimates = count(db, "estimate")
    at = _edit(_grid_page(), edited={1: {"ci_high": "1.05"}}, added=[NEW_ROW])
    at = _click(at, "Check")
    assert frame_with(at, "status")["status"].tolist().count("added") == 1
    _bob_saves_row2(db)  # between ann's check and her save
    at = _click(at, "Save the estimates")
    assert any("someone else changed this record" in e.value for e in at.error), texts(at)
    assert frame_with(at, "your value") is not None
    assert count(db, "estimate") == estimates  # ann's added row is not written either
    assert _estimate(db, ROW2)[2:] == (0.99, 2)


def test_a_reader_sees_no_grid_and_the_service_refuses(db):
    at = open_page("records", "rita", "reader")
    assert not [d for d in at.dataframe if d.proto.editing_mode != 0]
    assert "needs the editor role" in texts(at)
    base = open_current(db, user="x")
    try:
        reader = acting_store(base, Identity("rita", "reader"))
        draft = editing.load_draft(reader, STUDY)
        grid = estimate_grid.grid_frame(draft)
        grid.loc[0, "ci_high"] = "1.05"
        audit = count(db, "audit_entry")
        with pytest.raises(AccessError):
            estimate_grid.check_grid(reader, draft, grid)
        with pytest.raises(AccessError):
            estimate_grid.save_grid(reader, draft, grid, user="rita")
        assert count(db, "audit_entry") == audit
    finally:
        base.dispose()
