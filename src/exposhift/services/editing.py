"""Add or correct a study, its events and its estimates, or register an event, from a form.

One code path with ``exposhift import``: a form is turned into the rows of an extraction sheet
(one row per estimate, the study's and the event's fields repeated on each) and validated by
:func:`exposhift.io.validate.validate_sheet` (an event alone: ``validate_events_sheet``), so a
form accepts and refuses exactly what a sheet would, with the same messages. It is then written
by the import's own planning and writing (:func:`exposhift.services.importing.build_plans` and
``apply_plans``: versions, audit entries, one transaction).

What a form adds to an import is the **version check**: the form remembers the version of every
record it showed; if any of them has changed since (someone else saved it), the save is refused
with :class:`StaleEditError`, which carries the other person's change from the audit trail, and
nothing is written. The check and the write are one transaction (the write lock is held), so
two people saving the same record cannot both succeed.

Like an import, a form never deletes: an estimate shown on the form must still be there when it
is saved (its identifying fields — outcome, measure, kind, subgroup, time window — cannot be
changed, because they make up its key; add a new row instead).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from exposhift.errors import ConflictError, InputFileError, Problem
from exposhift.io.columns import BY_NAME, EVENT_COLUMNS, STUDY_COLUMNS
from exposhift.io.exporter import neutralise
from exposhift.io.frames import estimate_keys
from exposhift.io.sheet import RawSheet
from exposhift.io.validate import (
    ESTIMATE_SHEET,
    EVENTS_SHEET_COLUMNS,
    validate_events_sheet,
    validate_sheet,
)
from exposhift.services.acting import as_user
from exposhift.services.importing import (
    Counts,
    apply_plans,
    build_plans,
    stored_study_events,
)
from exposhift.store.bulk import BulkWriter
from exposhift.store.database import Store
from exposhift.store.form_reads import (
    changes_since,
    current_rows,
    events_by_key,
    study_rows,
    versions_of,
)

STUDY_FORM = "study form"
EVENT_FORM = "event form"
#: the estimate columns of the form (the sheet's estimate columns, with the event named)
#: the estimate fields of the form: the sheet's estimate columns after its keys (one list: a
#: column added to the sheet appears in the form), with the outcome's group
ESTIMATE_FORM_COLUMNS = ("event_id", "outcome", "outcome_group", *ESTIMATE_SHEET[3:])
ENTITIES = ("exposure", "outcome", "event", "study", "estimate")


@dataclass
class StudyDraft:
    """What the form shows: text cells as a sheet holds them, and the versions they were at."""

    key: str | None  # None: a new study
    study: dict[str, str]
    events: pd.DataFrame  # EVENT_COLUMNS
    estimates: pd.DataFrame  # ESTIMATE_FORM_COLUMNS
    versions: dict[str, dict[str, int]] = field(default_factory=dict)  # entity -> key -> version


@dataclass(frozen=True)
class Conflict:
    """One record changed by someone else since the form read it."""

    entity: str
    key: str
    your_version: int
    now_version: int | None  # None: deleted since
    changes: list[dict[str, Any]]  # audit entries since your version (user, at, before, after)
    now: dict[str, Any] | None  # the record as stored now


class StaleEditError(ConflictError):
    """A form was saved on a stale copy of a record; nothing was written."""

    def __init__(self, conflicts: list[Conflict]):
        self.conflicts = conflicts
        lines = []
        for c in conflicts:
            who = ", ".join(sorted({f"{e['user']} at {e['at']}" for e in c.changes})) or "someone"
            if c.now_version is None:
                lines.append(f"{c.entity} '{c.key}' was deleted by {who}")
            else:
                lines.append(
                    f"{c.entity} '{c.key}' was changed by {who} (you edited version "
                    f"{c.your_version}, it is now at version {c.now_version})"
                )
        super().__init__(
            "; ".join(lines) + ". Nothing was written: reload the record, compare, and apply "
            "your edit again"
        )


@dataclass(frozen=True)
class SaveResult:
    user: str
    counts: dict[str, Counts]
    warnings: list[Problem]

    @property
    def changed(self) -> bool:
        return any(c.added or c.updated for c in self.counts.values())


# ------------------------------------------------------------------------------- reading
def _text(value: Any, column: str) -> str:
    """A stored value as the sheet's text cell (what ``exposhift export`` writes)."""
    kind = BY_NAME[column].kind
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return "no" if kind == "bool" else ""
    if kind == "bool":
        return "yes" if value else "no"
    if kind == "int":
        return str(int(value))
    if kind == "float":
        return repr(float(value))
    return str(neutralise(pd.Series([str(value)])).iat[0])


def _stored_field(column: str) -> str:
    return {"study_id": "key", "event_id": "key", "estimate": "point"}.get(column, column)


def _event_texts(row: dict[str, Any]) -> dict[str, str]:
    return {c: _text(row.get(_stored_field(c)), c) for c in EVENT_COLUMNS}


def blank_draft() -> StudyDraft:
    """The form for a new study: empty fields and one empty estimate row."""
    study = {c: "" for c in STUDY_COLUMNS}
    study["demo"] = "no"
    return StudyDraft(
        key=None,
        study=study,
        events=pd.DataFrame(columns=list(EVENT_COLUMNS), dtype="str"),
        estimates=pd.DataFrame([{c: "" for c in ESTIMATE_FORM_COLUMNS}], dtype="str"),
        versions={},
    )


def load_draft(store: Store, key: str) -> StudyDraft:
    """The study ``key`` as the form shows it, with the versions of its records."""
    with store.read() as conn:
        rows = study_rows(conn, key)
    if rows is None:
        raise InputFileError(
            [Problem(STUDY_FORM, None, "study_id", f"no study '{key}' in the evidence base")]
        )
    st = rows["study"][0]
    study = {c: _text(st.get(_stored_field(c)), c) for c in STUDY_COLUMNS}
    events = pd.DataFrame([_event_texts(e) for e in rows["events"]], columns=list(EVENT_COLUMNS))
    ests = [
        {
            c: _text(e.get("event" if c == "event_id" else _stored_field(c)), c)
            for c in ESTIMATE_FORM_COLUMNS
        }
        for e in rows["estimates"]
    ]
    estimates = pd.DataFrame(ests, columns=list(ESTIMATE_FORM_COLUMNS))
    versions = {
        "study": {st["key"]: int(st["version"])},
        "event": {e["key"]: int(e["version"]) for e in rows["events"]},
        "estimate": {e["key"]: int(e["version"]) for e in rows["estimates"]},
    }
    return StudyDraft(key, study, events, estimates, versions)


# ------------------------------------------------------------------------------- the sheet
def _cells(frame: pd.DataFrame, columns) -> pd.DataFrame:
    out = frame.reindex(columns=list(columns)).astype("object")
    return out.where(out.notna(), "").astype("str").apply(lambda s: s.str.strip())


def form_sheet(
    store: Store,
    draft: StudyDraft,
    study: dict[str, Any],
    events: pd.DataFrame,
    estimates: pd.DataFrame,
    file: str = STUDY_FORM,
) -> tuple[RawSheet, dict[str, int], list[Problem]]:
    """The form as extraction-sheet rows (row n = estimate row n of the form, blank rows left
    out but counted, so that a problem names the row the user sees); the versions of stored
    events the rows name without showing them; and the form's own problems. ``file`` names
    the form in the problems."""
    problems: list[Problem] = []
    ests = _cells(estimates, ESTIMATE_FORM_COLUMNS).reset_index(drop=True)
    kept = (ests != "").any(axis=1).to_numpy()
    ests = ests[kept].reset_index(drop=True)
    evs = _cells(events, EVENT_COLUMNS)
    evs = evs[(evs != "").any(axis=1)].reset_index(drop=True)
    by_event = {r["event_id"]: r for r in evs.to_dict("records") if r["event_id"]}
    named = sorted(set(ests["event_id"]) - set(by_event) - {""})
    extra_versions: dict[str, int] = {}
    if named:
        with store.read() as conn:
            stored = events_by_key(conn, named)
        for k, row in stored.items():
            by_event[k] = _event_texts(row)
            extra_versions[k] = int(row["version"])
    shown = set(draft.versions.get("event", {}))
    if named or len(evs):
        with store.read() as conn:
            existing = versions_of(conn, "event", sorted(set(evs["event_id"]) - shown - {""}))
        for pos, k in enumerate(evs["event_id"]):
            if k in existing:
                problems.append(
                    Problem(
                        EVENT_FORM,
                        pos + 1,
                        "event_id",
                        f"event '{k}' is already in the evidence base; to use it, give only "
                        "its event_id and leave the event's other fields empty (they are taken "
                        "from the evidence base); to correct it, open a study of that event",
                    )
                )
    study_cells = {
        c: str(study.get(c, "") if study.get(c) is not None else "").strip() for c in STUDY_COLUMNS
    }
    rows = []
    for r in ests.to_dict("records"):
        ev = by_event.get(r["event_id"], {c: "" for c in EVENT_COLUMNS})
        rows.append({**study_cells, **ev, **r, "event_id": r["event_id"]})
    columns = [*STUDY_COLUMNS, *EVENT_COLUMNS, *ESTIMATE_FORM_COLUMNS[1:]]
    frame = pd.DataFrame(rows, columns=columns).fillna("")
    return RawSheet(file, frame, np.flatnonzero(kept) + 1), extra_versions, problems


def _form_problems(draft: StudyDraft, frames, sheet: RawSheet) -> list[Problem]:
    """What a form refuses beyond the sheet's rules: a changed study key, and a shown estimate
    that is no longer on the form (forms never delete or rename an estimate)."""
    problems: list[Problem] = []
    keys = set(frames.studies["key"]) if len(frames.studies) else set()
    if draft.key is not None and keys and keys != {draft.key}:
        problems.append(
            Problem(
                STUDY_FORM,
                None,
                "study_id",
                f"the study key cannot be changed here (it was '{draft.key}'); to record "
                "another study, add it as a new study",
            )
        )
    now = set(estimate_keys(frames.estimates)) if len(frames.estimates) else set()
    for key in sorted(set(draft.versions.get("estimate", {})) - now):
        parts = key.split("|")
        problems.append(
            Problem(
                STUDY_FORM,
                None,
                "estimate",
                f"the stored estimate '{key}' ({' / '.join(p for p in parts[2:] if p)}) is no "
                "longer on the form: a form never deletes an estimate, and its outcome, "
                "measure, kind, subgroup and time window are its key. Put the row back as it "
                "was and add a new row for the corrected estimate",
            )
        )
    return problems


def conflicts_of(conn, expected: dict[str, dict[str, int]]) -> list[Conflict]:
    """The records of ``expected`` (entity -> key -> version) that are no longer at that
    version, each with the changes since from the audit trail and the record as stored."""
    out = []
    for entity, wanted in expected.items():
        if not wanted:
            continue
        now = versions_of(conn, entity, sorted(wanted))
        stale = [k for k, v in wanted.items() if now.get(k) != v]
        rows = current_rows(conn, entity, stale)
        for k in stale:
            out.append(
                Conflict(
                    entity,
                    k,
                    wanted[k],
                    now.get(k),
                    changes_since(conn, entity, k, wanted[k]),
                    rows.get(k),
                )
            )
    return out


def _new_keys_taken(conn, draft: StudyDraft, frames) -> list[Conflict]:
    """A new study whose key someone else added since the form opened (or already existed)."""
    if draft.key is not None or not len(frames.studies):
        return []
    keys = frames.studies["key"].tolist()
    taken = versions_of(conn, "study", keys)
    rows = current_rows(conn, "study", list(taken))
    return [
        Conflict("study", k, 0, v, changes_since(conn, "study", k, 0), rows.get(k))
        for k, v in taken.items()
    ]


def write_checked(store: Store, frames, expected, check_new) -> dict[str, Counts]:
    """Write validated ``frames`` through the import's planning and writing, in one
    transaction that first checks the ``expected`` versions (entity -> key -> version) and
    ``check_new(conn)`` (more conflicts): any conflict raises :class:`StaleEditError` and
    nothing is written."""
    with store.write() as conn:
        conflicts = conflicts_of(conn, expected) + check_new(conn)
        if conflicts:
            raise StaleEditError(conflicts)
        plans = build_plans(conn, frames)
        apply_plans(BulkWriter(conn, store.user), frames, plans)
    return {
        e: Counts(len(plans[e].new), len(plans[e].changes), plans[e].unchanged) for e in ENTITIES
    }


def save_study(
    store: Store,
    draft: StudyDraft,
    study: dict[str, Any],
    events: pd.DataFrame,
    estimates: pd.DataFrame,
    *,
    user: str | None,
) -> SaveResult:
    """Validate the form as an extraction sheet and write it as ``user`` — unless a record it
    showed has changed since (:class:`StaleEditError`), or it has problems
    (:class:`InputFileError`, every problem with its estimate row and column). Nothing is
    written in either case."""
    acting = as_user(store, user, "save a study")
    sheet, extra_versions, problems = form_sheet(store, draft, study, events, estimates)
    if len(sheet) == 0:
        problems.append(
            Problem(
                STUDY_FORM,
                None,
                "estimate",
                "the form has no estimate; a study is recorded with at least one estimate "
                "(one row per estimate, as in the extraction sheet)",
            )
        )
        raise InputFileError(problems)
    try:
        frames = validate_sheet(sheet, study_events=stored_study_events(store))
    except InputFileError as exc:
        raise InputFileError(problems + exc.problems) from None
    problems += _form_problems(draft, frames, sheet)
    if problems:
        raise InputFileError(problems)
    expected = {e: dict(v) for e, v in draft.versions.items()}
    expected.setdefault("event", {}).update(extra_versions)
    counts = write_checked(
        acting, frames, expected, lambda conn: _new_keys_taken(conn, draft, frames)
    )
    return SaveResult(acting.user, counts, list(frames.warnings))


def register_event(store: Store, values: dict[str, Any], *, user: str | None) -> SaveResult:
    """Register one exposure-change event without a study (the events sheet's rules); refused
    when its key is already in the evidence base."""
    acting = as_user(store, user, "register an event")
    row = {
        c: str(values.get(c) if values.get(c) is not None else "").strip()
        for c in EVENTS_SHEET_COLUMNS
    }
    if not row["demo"]:
        row["demo"] = "no"
    sheet = RawSheet(EVENT_FORM, pd.DataFrame([row]), np.array([1]))
    frames = validate_events_sheet(sheet)
    key = row["event_id"]

    def taken(conn) -> list[Conflict]:
        now = versions_of(conn, "event", [key])
        if not now:
            return []
        raise InputFileError(
            [
                Problem(
                    EVENT_FORM,
                    1,
                    "event_id",
                    f"an event '{key}' is already in the evidence base; choose another key "
                    "(to correct that event, open a study of it)",
                )
            ]
        )

    counts = write_checked(acting, frames, {}, taken)
    return SaveResult(acting.user, counts, list(frames.warnings))
