"""The estimate grid's services on SQLite and PostgreSQL: a check writes nothing and says what a
save would do row by row; a save is one transaction (the data version moves by one) written as
the named person; problems name their grid row and sheet column; a stale row refuses the whole
batch with both versions; a reader is refused.

Outside routes: the example sheet is read with the standard library's ``csv`` module; stored
values are read back with SQLAlchemy Core text queries (not exposhift's readers).
"""

from __future__ import annotations

import csv
from pathlib import Path

import pytest
from sqlalchemy import text

from exposhift.access import AccessError
from exposhift.errors import InputFileError
from exposhift.services import editing, estimate_grid, uploads
from exposhift.services.estimate_grid import StaleGridError
from exposhift.services.setup import init_database

EXAMPLE = Path(__file__).resolve().parents[2] / "docs" / "example-sheet.csv"
STUDY = "Example2004"  # two estimates in the example sheet: a level and a slope


def _one(store, sql: str, **args):
    with store.engine.connect() as conn:
        return conn.execute(text(sql), args).scalar_one()


def _counts(store) -> tuple[int, int]:
    return _one(store, "select count(*) from estimate"), _one(
        store, "select count(*) from audit_entry"
    )


@pytest.fixture
def base(store):
    init_database(store.url)
    uploads.import_upload(store, EXAMPLE.name, EXAMPLE.read_bytes(), user="seed")
    return store


def _grid(store):
    draft = editing.load_draft(store, STUDY)
    return draft, estimate_grid.grid_frame(draft)


def _row(grid, kind: str) -> int:
    return int(grid.index[grid["estimate_kind"] == kind][0])


def _new_row(**over) -> dict:
    with open(EXAMPLE, newline="", encoding="utf-8") as fh:
        first = next(r for r in csv.DictReader(fh) if r["study_id"] == STUDY)
    row = {c: first.get(c, "") for c in estimate_grid.GRID_COLUMNS}
    row.update(outcome="stillbirth", estimate_kind="change", estimate="0.9", ci_low="0.8")
    row.update(ci_high="1.01", outcome_group="birth outcomes", primary="no", **over)
    return row


def test_check_writes_nothing_and_save_is_one_transaction(base):
    draft, grid = _grid(base)
    level = _row(grid, "level")
    grid.loc[level, "ci_low"] = "0.78"
    grid.loc[len(grid)] = _new_row()
    before, version = _counts(base), base.data_version()
    check = estimate_grid.check_grid(base, draft, grid)
    assert _counts(base) == before and base.data_version() == version
    status = dict(zip(check.rows["grid row"], check.rows["status"], strict=True))
    assert status == {level + 1: "changed", 2 - level: "unchanged", 3: "added"}
    assert check.counts["outcome"].added == 1  # "stillbirth" is new
    assert (
        "Lower CI limit: 0.78"
        in check.rows.loc[check.rows["status"] == "changed", "changes"].iloc[0]
    )

    saved = estimate_grid.save_grid(base, draft, grid, user="dana")
    assert (saved.counts["estimate"].added, saved.counts["estimate"].updated) == (1, 1)
    assert base.data_version() == version + 1  # one write transaction for the whole grid
    key = f"{STUDY}|EXA-NLD-2001|preterm birth|RR|level||2001-2003"
    assert _one(base, "select ci_low from estimate where key = :k", k=key) == 0.78
    assert _one(base, "select version from estimate where key = :k", k=key) == 2
    users = _one(
        base,
        'select count(distinct "user") from audit_entry where row_key like :p and "user" = :u',
        p=f"{STUDY}|%",
        u="dana",
    )
    assert users == 1
    assert _one(base, "select count(*) from estimate") == before[0] + 1


def test_every_problem_names_its_grid_row_and_column_and_nothing_is_written(base):
    draft, grid = _grid(base)
    level, slope = _row(grid, "level"), _row(grid, "slope")
    grid.loc[level, "estimate"] = "abc"
    grid.loc[slope, "time_window"] = "2001-2004"  # a key cell of a stored estimate
    grid.loc[2] = _new_row(measure="XX")
    grid.loc[3] = _new_row(event_id="NOPE-1999", subgroup="other")
    before = _counts(base)
    with pytest.raises(InputFileError) as err:
        estimate_grid.check_grid(base, draft, grid)
    found = {(p.file, p.row, p.column) for p in err.value.problems}
    assert {
        ("estimate grid", level + 1, "estimate"),
        ("estimate grid", slope + 1, "time_window"),
        ("estimate grid", 3, "measure"),
        ("estimate grid", 4, "event_id"),
    } <= found
    # the unknown event's empty fields are not repeated as problems of their own
    assert not {p for p in err.value.problems if p.row == 4 and p.column == "exposure"}
    with pytest.raises(InputFileError):
        estimate_grid.save_grid(base, draft, grid, user="dana")
    assert _counts(base) == before


def test_an_emptied_row_is_refused_not_deleted(base):
    draft, grid = _grid(base)
    grid.loc[0] = ""
    with pytest.raises(InputFileError) as err:
        estimate_grid.save_grid(base, draft, grid, user="dana")
    assert [(p.row, p.column) for p in err.value.problems] == [(1, None)]
    assert "does not delete" in err.value.problems[0].message
    assert _one(base, "select count(*) from estimate") == 4


def test_a_stale_row_refuses_the_whole_batch_with_both_versions(base):
    draft, grid = _grid(base)  # dana's grid
    theirs, their_grid = _grid(base)
    level = _row(their_grid, "level")
    their_grid.loc[level, "ci_high"] = "0.97"
    estimate_grid.save_grid(base, theirs, their_grid, user="bob")
    grid.loc[level, "ci_high"] = "0.98"
    grid.loc[len(grid)] = _new_row()
    before = _counts(base)
    with pytest.raises(StaleGridError) as err:
        estimate_grid.save_grid(base, draft, grid, user="dana")
    (conflict,) = err.value.conflicts
    assert conflict.your_version == 1 and conflict.now_version == 2
    assert conflict.changes[-1]["user"] == "bob"
    assert conflict.changes[-1]["after"]["ci_high"] == 0.97  # their version
    assert err.value.yours[conflict.key]["ci_high"] == "0.98"  # yours
    assert _counts(base) == before  # the added row is not written either
    with pytest.raises(StaleGridError):
        estimate_grid.check_grid(base, draft, grid)


def test_a_reader_is_refused(base):
    reader = base.acting("rita", "reader")
    draft, grid = _grid(reader)
    with pytest.raises(AccessError):
        estimate_grid.check_grid(reader, draft, grid)
    with pytest.raises(AccessError):
        estimate_grid.save_grid(reader, draft, grid, user="rita")
