"""A study's estimates edited in a grid: check the whole grid, then save it in one transaction.

The grid holds one row per estimate of the study, as text cells of the extraction sheet
(:data:`GRID_COLUMNS`: the estimate form's columns); rows can be corrected and new rows added.
It goes through the same code path as the study form and ``exposhift import``
(:func:`exposhift.services.editing.form_sheet`, :func:`exposhift.io.validate.validate_sheet`,
the import's planning and writing): the study's and its events' fields are the stored ones, so
the grid changes estimates (and adds the outcomes new rows name) only.

:func:`check_grid` reads only: every problem (with its grid row and column), what saving would
add, change and leave unchanged, row by row, and the rows someone else has changed since the
grid was opened. :func:`save_grid` validates again and writes as the signed-in user, the version
of every estimate the grid showed checked in the same transaction: one stale row refuses the
whole batch (:class:`StaleGridError`, with both versions), and so does one problem.

A grid never deletes: an import has no audited way to remove an estimate, so a stored row that
is emptied is a problem of that row (put the values back), and so is a change of the cells that
make up an estimate's key (event, outcome, measure, kind, subgroup, time window).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd

from exposhift.access import require
from exposhift.errors import InputFileError, Problem
from exposhift.io.column_labels import STORED_AS, field_label, label
from exposhift.io.columns import EVENT_COLUMNS
from exposhift.io.frames import EvidenceFrames, estimate_keys
from exposhift.io.problems import sorted_problems
from exposhift.io.validate import validate_sheet
from exposhift.services.acting import as_user
from exposhift.services.editing import (
    ENTITIES,
    ESTIMATE_FORM_COLUMNS,
    Conflict,
    SaveResult,
    StaleEditError,
    StudyDraft,
    conflicts_of,
    form_sheet,
    write_checked,
)
from exposhift.services.importing import Counts, build_plans, stored_study_events
from exposhift.store.database import Store
from exposhift.store.form_reads import versions_of

GRID = "estimate grid"
#: the grid's columns: the estimate form's (the sheet's estimate columns, the event named)
GRID_COLUMNS = ESTIMATE_FORM_COLUMNS
#: grid column -> estimate key part: the cells that make up an estimate's key
KEY_CELLS = {
    "event_id": "event",
    "outcome": "outcome",
    "measure": "measure",
    "estimate_kind": "estimate_kind",
    "subgroup": "subgroup",
    "time_window": "time_window",
}
STATUS_COLUMNS = ["grid row", "status", "estimate", "changes"]


@dataclass(frozen=True)
class GridCheck:
    """What saving the grid would do; nothing has been written."""

    rows: pd.DataFrame  # STATUS_COLUMNS: one row per filled grid row
    counts: dict[str, Counts]
    warnings: list[Problem] = field(default_factory=list)

    @property
    def changed(self) -> bool:
        return any(c.added or c.updated for c in self.counts.values())


class StaleGridError(StaleEditError):
    """Rows of the grid were changed by someone else since it was opened; nothing written.
    ``yours``: estimate key -> stored field -> the grid's text for it (your version)."""

    def __init__(self, conflicts: list[Conflict], yours: dict[str, dict[str, str]]):
        super().__init__(conflicts)
        self.yours = yours


# ------------------------------------------------------------------------------- the grid
def grid_frame(draft: StudyDraft) -> pd.DataFrame:
    """The grid the page shows: the study's estimates as sheet text cells, one row each."""
    return draft.estimates.reindex(columns=list(GRID_COLUMNS)).fillna("").astype("str")


def _stored_keys(draft: StudyDraft) -> list[str]:
    """The key of each stored estimate row of the draft (its position = its grid row - 1)."""
    est = draft.estimates.reindex(columns=list(GRID_COLUMNS)).fillna("").astype("str")
    parts = est.rename(columns={"event_id": "event"}).assign(study=draft.key or "")
    parts["estimate_kind"] = parts["estimate_kind"].where(parts["estimate_kind"] != "", "change")
    return estimate_keys(parts).tolist()


def _cells(grid: pd.DataFrame) -> pd.DataFrame:
    out = grid.reindex(columns=list(GRID_COLUMNS)).astype("object")
    return out.where(out.notna(), "").astype("str").apply(lambda s: s.str.strip())


def _unknown_events(store: Store, draft: StudyDraft, cells: pd.DataFrame) -> list[Problem]:
    """An added row naming an event that is neither the study's nor in the evidence base."""
    known = set(draft.events["event_id"]) if len(draft.events) else set()
    named = sorted(set(cells["event_id"]) - known - {""})
    with store.read() as conn:
        stored = versions_of(conn, "event", named)
    out = []
    for pos, key in enumerate(cells["event_id"]):
        if key and key not in known and key not in stored:
            out.append(
                Problem(
                    GRID,
                    pos + 1,
                    "event_id",
                    f"no event '{key}' in the evidence base; name an event already recorded, "
                    "or register this one first (the 'Register an event' tab) and add the row "
                    "again",
                )
            )
    return out


def _same(column: str, typed: str, stored: str) -> bool:
    if column == "estimate_kind":
        typed = typed or "change"
    if column in ("measure", "estimate_kind"):  # codes are read case-insensitively
        return typed.casefold() == stored.casefold()
    return typed == stored


def _row_problems(draft: StudyDraft, cells: pd.DataFrame) -> list[Problem]:
    """A stored row emptied, or a stored row whose key cells were changed."""
    out = []
    for i, key in enumerate(_stored_keys(draft)):
        grid_row = i + 1
        row = cells.iloc[i] if i < len(cells) else None
        if row is None or not (row != "").any():
            out.append(
                Problem(
                    GRID,
                    grid_row,
                    None,
                    f"this row held the stored estimate '{key}' and is now empty: the grid "
                    "does not delete estimates. Put its values back (or reload the grid)",
                )
            )
            continue
        before = dict(zip(KEY_CELLS, key.split("|")[1:], strict=True))
        for column in KEY_CELLS:
            if not _same(column, str(row[column]), before[column]):
                out.append(
                    Problem(
                        GRID,
                        grid_row,
                        column,
                        f"{label(column)} of a stored estimate is part of its key and cannot "
                        f"be changed here (it was '{before[column]}'): put it back, and add a "
                        "new row for the corrected estimate",
                    )
                )
    return out


def _validated(store: Store, draft: StudyDraft, grid: pd.DataFrame):
    """The grid validated as an extraction sheet, or InputFileError with every problem."""
    if draft.key is None:
        raise InputFileError(
            [Problem(GRID, None, "study_id", "choose a stored study; add a new study on the form")]
        )
    cells = _cells(grid)
    unknown = _unknown_events(store, draft, cells)
    sheet, extra_versions, problems = form_sheet(
        store, draft, draft.study, draft.events, cells, file=GRID
    )
    problems += unknown + _row_problems(draft, cells)
    if len(sheet) == 0:
        problems.append(Problem(GRID, None, None, "the grid has no estimate; add a row"))
        raise InputFileError(problems)
    try:
        frames = validate_sheet(sheet, study_events=stored_study_events(store))
    except InputFileError as exc:
        # an unknown event's empty fields would only repeat that the event is unknown
        skip = {p.row for p in unknown}
        problems += [
            p for p in exc.problems if not (p.row in skip and p.column in EVENT_COLUMNS[1:])
        ]
        raise InputFileError(sorted_problems(problems)) from None
    if problems:
        raise InputFileError(sorted_problems(problems))
    expected = {e: dict(v) for e, v in draft.versions.items()}
    expected.setdefault("event", {}).update(extra_versions)
    return cells, sheet, frames, expected


def _yours(draft: StudyDraft, cells: pd.DataFrame, conflicts: list[Conflict]):
    """For each stale estimate, the grid's text of every stored field (your version)."""
    row_of = {k: i for i, k in enumerate(_stored_keys(draft))}
    inverse = {v: k for k, v in STORED_AS["estimate"].items()}
    out: dict[str, dict[str, str]] = {}
    for c in conflicts:
        if c.entity == "estimate" and c.key in row_of:
            row = cells.iloc[row_of[c.key]]
            out[c.key] = {inverse.get(col, col): str(row[col]) for col in GRID_COLUMNS}
    return out


def _status(frames: EvidenceFrames, rows, plans) -> pd.DataFrame:
    plan = plans["estimate"]
    new = set(plan.new["key"]) if len(plan.new) else set()
    changes = {k: changed for _before, changed, k in plan.changes}
    out = []
    for key, grid_row in zip(estimate_keys(frames.estimates), rows, strict=True):
        if key in new:
            status, what = "added", ""
        elif key in changes:
            status = "changed"
            what = "; ".join(
                f"{field_label('estimate', f)}: {'' if v is None else v}"
                for f, v in changes[key].items()
            )
        else:
            status, what = "unchanged", ""
        out.append({"grid row": int(grid_row), "status": status, "estimate": key, "changes": what})
    return pd.DataFrame(out, columns=STATUS_COLUMNS)


def check_grid(store: Store, draft: StudyDraft, grid: pd.DataFrame) -> GridCheck:
    """Check the grid as saving would, without writing: every problem (InputFileError, with
    grid row and column), rows someone else changed since the grid opened
    (:class:`StaleGridError`), else what would be added, changed and left unchanged."""
    require(store, "edit")
    cells, sheet, frames, expected = _validated(store, draft, grid)
    with store.read() as conn:
        stale = conflicts_of(conn, expected)
        if stale:
            raise StaleGridError(stale, _yours(draft, cells, stale))
        plans = build_plans(conn, frames)
    counts = {
        e: Counts(len(plans[e].new), len(plans[e].changes), plans[e].unchanged) for e in ENTITIES
    }
    return GridCheck(_status(frames, sheet.rows, plans), counts, list(frames.warnings))


def save_grid(store: Store, draft: StudyDraft, grid: pd.DataFrame, *, user: str | None):
    """Validate the grid again and write it as ``user`` in one transaction, refused whole when
    any estimate it showed has changed since (:class:`StaleGridError`) or when it has a
    problem (:class:`InputFileError`). Returns a :class:`~exposhift.services.editing.SaveResult`."""
    acting = as_user(store, user, "save the estimates")
    require(acting, "edit")
    cells, _sheet, frames, expected = _validated(acting, draft, grid)
    try:
        counts = write_checked(acting, frames, expected, lambda conn: [])
    except StaleEditError as exc:
        raise StaleGridError(exc.conflicts, _yours(draft, cells, exc.conflicts)) from None
    return SaveResult(acting.user, counts, list(frames.warnings))
