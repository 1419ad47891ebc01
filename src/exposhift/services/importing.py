"""Import an extraction sheet, an events sheet or a JSON archive into the evidence base.

One import is one transaction (:meth:`Store.write`): either every record of the file is written,
or — on any problem, an interruption or a killed process — nothing is. The file is validated
completely before the database is touched.

Records are matched by natural key: a record that is new is added (bulk inserts, audited), one
that differs is updated through :meth:`Writer.update` (version checked, audited), one that is the
same is left alone (no write, no audit entry). Importing the same file twice changes nothing.
Nothing is ever deleted by an import, except the ratings of an appraisal that an archive
replaces as a whole (only with ``replace``: see :mod:`exposhift.services.archive_appraisals`).
"""

from __future__ import annotations

import os
import sys
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from exposhift.access import require
from exposhift.errors import InputFileError, Problem
from exposhift.io.archive import read_archive
from exposhift.io.frames import FIELDS, PLURAL, EvidenceFrames, coerce, to_records
from exposhift.io.overlap import StudyEvents
from exposhift.io.problems import sorted_problems
from exposhift.io.rules import same_values
from exposhift.io.sheet import read_sheet
from exposhift.io.validate import validate_events_sheet, validate_sheet
from exposhift.services.archive_appraisals import (
    audit_replacements,
    check_archive_appraisals,
    conflict_problems,
)
from exposhift.services.bulk import BulkWriter
from exposhift.services.exporting import read_table, with_refs
from exposhift.services.method_restore import door_rubric, method_plan, restore_method
from exposhift.services.setup import open_current
from exposhift.store.database import Store
from exposhift.store.queries import study_events
from exposhift.store.records import TABLES
from exposhift.store.writer import Writer, keyed_ids

#: (stage, rows done, rows in total)
Progress = Callable[[str, int, int], None]

ENTITIES = ("exposure", "outcome", "event", "study", "estimate", "appraisal")
KEY_FIELD = {
    "exposure": "name",
    "outcome": "name",
    "event": "key",
    "study": "key",
    "estimate": "key",
    "appraisal": "_key",
}
#: fields whose blank value in a file means "not stated" rather than "clear it"
KEEP_WHEN_BLANK = {"exposure": {"agent_class"}, "outcome": {"outcome_group"}}
#: fields never compared: the natural key and what the key already encodes
NOT_COMPARED = {
    "exposure": {"name"},
    "outcome": {"name"},
    "event": {"key"},
    "study": {"key"},
    "estimate": {
        "key",
        "study",
        "event",
        "outcome",
        "measure",
        "estimate_kind",
        "subgroup",
        "time_window",
    },
    "appraisal": {"study", "reviewer", "stage"},
}
#: reference field -> (database column, referenced entity)
REFS = {
    "exposure": ("exposure_id", "exposure"),
    "study": ("study_id", "study"),
    "event": ("event_id", "event"),
    "outcome": ("outcome_id", "outcome"),
}
ESTIMATE_CHUNK = 5000
PAUSE_ENV = "EXPOSHIFT_TEST_PAUSE_AFTER_ROWS"
PAUSE_SECONDS_ENV = "EXPOSHIFT_TEST_PAUSE_SECONDS"


@dataclass
class Counts:
    added: int = 0
    updated: int = 0
    unchanged: int = 0


@dataclass
class ImportReport:
    """What an import did (or, with ``dry_run``, would do), per entity."""

    file: str
    url: str
    kind: str  # "sheet", "events" or "archive"
    rows: int
    dry_run: bool
    counts: dict[str, Counts]
    notes: list[str] = field(default_factory=list)

    @property
    def changed(self) -> bool:
        return any(c.added or c.updated for c in self.counts.values())

    def to_dict(self) -> dict:
        return {
            "file": self.file,
            "database": self.url,
            "kind": self.kind,
            "rows": self.rows,
            "dry_run": self.dry_run,
            "notes": self.notes,
            "counts": {k: vars(v) for k, v in self.counts.items()},
        }


@dataclass
class EntityPlan:
    entity: str
    new: pd.DataFrame
    changes: list[tuple[dict, dict, str]]  # (row as stored, changed fields, natural key)
    unchanged: int


# ---------------------------------------------------------------------------------- reading
def read_input(
    path: str | Path,
    *,
    events_only: bool = False,
    encoding: str | None = None,
    ignore_extra: bool = False,
    study_events: StudyEvents | None = None,
    delimiter: str | None = None,
    sheet: str | None = None,
) -> tuple[str, EvidenceFrames]:
    """Validate a file completely; returns its kind and its records (or raises every problem).

    ``study_events`` looks up evidence-base studies named in ``same_population_as``.
    ``delimiter`` (CSV) and ``sheet`` (XLSX worksheet) choose how a sheet is read; the notes of
    the result say which delimiter and worksheet were used when it was not the plain default.
    """
    path = Path(path)
    if path.suffix.lower() == ".json":
        if events_only:
            raise InputFileError(
                [
                    Problem(
                        path.name,
                        None,
                        None,
                        "'events import' reads an events sheet (.csv or "
                        ".xlsx); import archives with 'exposhift import'",
                    )
                ]
            )
        if not path.is_file():
            raise InputFileError(
                [Problem(path.name, None, None, f"no such file: {path}; check the path")]
            )
        return "archive", read_archive(path, encoding, study_events)
    raw = read_sheet(path, encoding, delimiter=delimiter, sheet=sheet)
    try:
        if events_only:
            kind, frames = "events", validate_events_sheet(raw, ignore_extra=ignore_extra)
        else:
            kind, frames = (
                "sheet",
                validate_sheet(raw, ignore_extra=ignore_extra, study_events=study_events),
            )
    except InputFileError as exc:  # say how the file was read: the notes may be the cause
        if raw.notes:
            exc.args = (str(exc) + "".join(f"\n  note: {n}" for n in raw.notes),)
        raise
    frames.notes[:0] = raw.notes
    return kind, frames


def stored_study_events(store: Store) -> StudyEvents:
    """A lookup of evidence-base studies and their events, read from ``store`` when called."""

    def lookup(keys: list[str]) -> dict[str, set[str]]:
        with store.read() as conn:
            return study_events(conn, keys)

    return lookup


# ---------------------------------------------------------------------------------- planning
def _appraisal_key(frame: pd.DataFrame) -> pd.Series:
    return (
        frame["study"].fillna("").astype("str")
        + "|"
        + frame["reviewer"].astype("str")
        + "|"
        + frame["stage"].astype("str")
    )


def _stored(conn, entity: str, keys: list[str], cache: dict) -> pd.DataFrame:
    if entity == "appraisal":
        raw = read_table(conn, entity)
    else:
        raw = read_table(conn, entity, keys, KEY_FIELD[entity])
    stored = with_refs(conn, entity, raw, cache)
    if entity == "appraisal":
        stored["_key"] = _appraisal_key(stored)
    return stored


def plan_entity(conn, entity: str, frames: EvidenceFrames, cache: dict) -> EntityPlan:
    """Split the file's records of one entity into new, changed and unchanged."""
    new = frames.frame(entity)
    if entity == "appraisal":
        new = new.assign(_key=_appraisal_key(new))
    key = KEY_FIELD[entity]
    if new.empty:
        return EntityPlan(entity, new, [], 0)
    stored = _stored(conn, entity, new[key].tolist(), cache)
    given = frames.fields_given(entity)
    compared = [
        f
        for f in FIELDS[entity]
        if f in given and f in new.columns and f not in NOT_COMPARED[entity]
    ]
    stored_by_key = stored.set_index(key, drop=False)
    found = new[key].isin(stored_by_key.index).to_numpy()
    plan_new = new[~found].reset_index(drop=True)
    old_new = new[found].reset_index(drop=True)
    old = stored_by_key.loc[old_new[key].to_numpy()].reset_index(drop=True)
    differs = {}
    for f in compared:
        d = ~same_values(old_new[f], old[f])
        if f in KEEP_WHEN_BLANK.get(entity, ()):
            d &= old_new[f].notna().to_numpy()
        differs[f] = d
    any_diff = np.zeros(len(old_new), bool)
    for d in differs.values():
        any_diff |= d
    changes = []
    positions = np.flatnonzero(any_diff)
    if len(positions):
        rows_new = to_records(old_new.iloc[positions], compared)
        rows_old = to_records(old.iloc[positions])
        for pos, vals, before in zip(positions, rows_new, rows_old, strict=True):
            changed = {f: vals[f] for f in compared if differs[f][pos]}
            changes.append((before, changed, str(old_new[key].iat[pos])))
    return EntityPlan(entity, plan_new, changes, int(len(old_new) - any_diff.sum()))


def _rating_changes(conn, frames: EvidenceFrames, plan: EntityPlan) -> dict[str, dict]:
    """Per stored appraisal key: ratings to add, replace and remove."""
    ratings = frames.ratings
    if ratings.empty and frames.appraisals.empty:
        return {}
    stored = read_table(conn, "rating")
    apps = read_table(conn, "appraisal")
    studies = with_refs(conn, "appraisal", apps, {})
    app_key = dict(zip(studies["id"].tolist(), _appraisal_key(studies).tolist(), strict=True))
    stored["_key"] = stored["appraisal_id"].map(app_key)
    existing = set(_appraisal_key(frames.appraisals)) - set(_appraisal_key(plan.new))
    out: dict[str, dict] = {}
    file_ratings = (
        ratings.assign(_key=_appraisal_key(ratings))
        if not ratings.empty
        else ratings.assign(_key=pd.Series([], dtype="str"))
    )
    by_key_file = {k: g for k, g in file_ratings.groupby("_key", sort=False)}
    by_key_db = {k: g for k, g in stored.groupby("_key", sort=False)}
    fields = ["level", "reporting", "justification", "suggested_level", "suggestion_reason"]
    for k in existing:
        f = by_key_file.get(k, file_ratings.iloc[0:0])
        d = by_key_db.get(k, stored.iloc[0:0])
        f_recs = {
            r["domain"]: r for r in to_records(coerce(f, FIELDS["rating"]), ["domain", *fields])
        }
        d_recs = {r["domain"]: r for r in d.to_dict("records")}
        add, replace, remove = [], [], []
        for dom, r in f_recs.items():
            if dom not in d_recs:
                add.append(r)
            elif any(_differ(r[x], d_recs[dom][x]) for x in fields):
                replace.append((d_recs[dom], r))
        remove = [d_recs[dom] for dom in d_recs if dom not in f_recs]
        if add or replace or remove:
            out[k] = {"add": add, "replace": replace, "remove": remove}
    return out


def _differ(a, b) -> bool:
    na = a is None or (isinstance(a, float) and a != a)
    nb = b is None or (isinstance(b, float) and b != b)
    if na or nb:
        return na != nb
    return a != b


def build_plans(conn, frames: EvidenceFrames) -> dict[str, EntityPlan]:
    cache: dict = {}
    return {e: plan_entity(conn, e, frames, cache) for e in ENTITIES}


# ---------------------------------------------------------------------------------- writing
def _test_pause(written: int) -> None:
    """Test hook: sleep inside the open transaction (to kill the process mid-import)."""
    sys.stderr.write(
        f"exposhift: test pause inside the import transaction after {written} "
        f"estimate rows ({PAUSE_ENV})\n"
    )
    sys.stderr.flush()
    time.sleep(float(os.environ.get(PAUSE_SECONDS_ENV, "60")))


def _with_ids(conn, frame: pd.DataFrame, entity: str, ids: dict) -> pd.DataFrame:
    out = frame.copy()
    for ref, (col, target) in REFS.items():
        if ref in out.columns and entity != target:
            if target not in ids:
                ids[target] = keyed_ids(conn, TABLES[target], KEY_FIELD[target])
            out[col] = out[ref].map(ids[target]).astype("int64")
    for f, kind in FIELDS[entity].items():  # fields a sheet left out: their defaults
        if f not in out.columns and kind == "bool":
            out[f] = False
    return out


def _db_changes(conn, entity: str, changes: dict, ids: dict) -> dict:
    out = {}
    for f, v in changes.items():
        if f in REFS and entity != REFS[f][1]:
            col, target = REFS[f]
            if target not in ids:
                ids[target] = keyed_ids(conn, TABLES[target], KEY_FIELD[target])
            out[col] = ids[target][v]
        else:
            out[f] = v
    return out


def _insert(
    w: BulkWriter,
    entity: str,
    frame: pd.DataFrame,
    ids: dict,
    progress: Progress | None,
    pause_after: int | None,
) -> None:
    if frame.empty:
        return
    table = TABLES[entity]
    frame = _with_ids(w.conn, frame, entity, ids)
    cols = [
        c.name for c in table.columns if c.name not in ("id", "version", "created_at", "updated_at")
    ]
    for c in cols:  # every column is written (and audited), missing values as NULL
        if c not in frame.columns:
            frame[c] = None
    keys = frame[KEY_FIELD[entity]].astype("str").tolist()
    total = len(frame)
    done = 0
    paused = False
    for start in range(0, total, ESTIMATE_CHUNK):
        part = frame.iloc[start : start + ESTIMATE_CHUNK]
        w.insert_frame(table, part[cols], keys[start : start + ESTIMATE_CHUNK])
        done += len(part)
        if progress is not None:
            progress(PLURAL[entity], done, total)
        if pause_after is not None and not paused and done >= pause_after:
            _test_pause(done)
            paused = True


def _update(w: Writer, entity: str, plan: EntityPlan, ids: dict) -> None:
    table = TABLES[entity]
    for before, changes, key in plan.changes:
        w.update(
            table,
            int(before["id"]),
            int(before["version"]),
            _db_changes(w.conn, entity, changes, ids),
            before=before,
            row_key=key,
        )


def _apply_ratings(w: Writer, rating_plan: dict[str, dict], plan: EntityPlan) -> None:
    """Replace changed ratings of stored appraisals; bump those appraisals' versions."""
    if not rating_plan:
        return
    table = TABLES["rating"]
    apps = with_refs(w.conn, "appraisal", read_table(w.conn, "appraisal"), {})
    apps["_key"] = _appraisal_key(apps)
    by_key = apps.set_index("_key")
    updated = {key for _, _, key in plan.changes}
    for key, todo in rating_plan.items():
        app = by_key.loc[key]
        for old in todo["remove"] + [o for o, _ in todo["replace"]]:
            w.delete(table, int(old["id"]))
        new = todo["add"] + [n for _, n in todo["replace"]]
        if new:
            w.insert_many(
                table,
                [dict(r, appraisal_id=int(app["id"])) for r in new],
                row_keys=[f"{key}|{r['domain']}" for r in new],
            )
        if key not in updated:
            w.update(
                TABLES["appraisal"],
                int(app["id"]),
                int(app["version"]),
                {},
                before=app.to_dict(),
                row_key=key,
            )


def _insert_ratings(w: Writer, frames: EvidenceFrames, plan: EntityPlan) -> None:
    if plan.new.empty or frames.ratings.empty:
        return
    new_keys = set(plan.new["_key"])
    ratings = frames.ratings.assign(_key=_appraisal_key(frames.ratings))
    ratings = ratings[ratings["_key"].isin(new_keys)]
    if ratings.empty:
        return
    apps = with_refs(w.conn, "appraisal", read_table(w.conn, "appraisal"), {})
    app_ids = dict(zip(_appraisal_key(apps).tolist(), apps["id"].tolist(), strict=True))
    ratings = ratings.assign(appraisal_id=ratings["_key"].map(app_ids).astype("int64"))
    cols = [
        "appraisal_id",
        "domain",
        "level",
        "reporting",
        "justification",
        "suggested_level",
        "suggestion_reason",
    ]
    w.insert_many(
        TABLES["rating"],
        to_records(ratings, cols),
        row_keys=(ratings["_key"] + "|" + ratings["domain"]).tolist(),
    )


def apply_plans(
    w: BulkWriter,
    frames: EvidenceFrames,
    plans: dict[str, EntityPlan],
    progress: Progress | None = None,
) -> None:
    pause = os.environ.get(PAUSE_ENV)
    pause_after = int(pause) if pause else None
    ids: dict = {}
    rating_plan = _rating_changes(w.conn, frames, plans["appraisal"])
    for entity in ENTITIES:
        plan = plans[entity]
        _insert(
            w,
            entity,
            plan.new,
            ids,
            progress if entity == "estimate" else None,
            pause_after if entity == "estimate" else None,
        )
        ids.pop(entity, None)
        _update(w, entity, plan, ids)
    _insert_ratings(w, frames, plans["appraisal"])
    _apply_ratings(w, rating_plan, plans["appraisal"])
    _apply_directions(w, frames)
    w.flush()


def _apply_directions(w: Writer, frames: EvidenceFrames) -> None:
    """Write an archive's expected directions (after exposures and outcomes exist)."""
    if frames.directions is not None:
        from exposhift.services.directions import write_directions

        write_directions(w, frames.directions)


def _direction_counts(conn, frames: EvidenceFrames) -> dict[str, Counts]:
    """Counts of an archive's expected directions (none when the archive has no section)."""
    if frames.directions is None:
        return {}
    from exposhift.services.directions import plan_directions

    return {"expected directions": Counts(**plan_directions(conn, frames.directions))}


# ---------------------------------------------------------------------------------- services
#: the entities an import of each kind of file reports on
REPORTED = {
    "events": ("exposure", "event"),
    "sheet": ("exposure", "outcome", "event", "study", "estimate"),
    "archive": ENTITIES,
}


def _counts(plans: dict[str, EntityPlan], kind: str, rating_plan: dict) -> dict[str, Counts]:
    out = {}
    for e in REPORTED[kind]:
        p = plans[e]
        c = Counts(len(p.new), len(p.changes), p.unchanged)
        if e == "appraisal":
            extra = len(set(rating_plan) - {k for _, _, k in p.changes})
            c.updated += extra
            c.unchanged -= extra
        out[PLURAL[e]] = c
    return out


def _archive_door(
    conn,
    frames: EvidenceFrames,
    plans: dict[str, EntityPlan],
    rating_plan: dict,
    file: str,
    rubric_path,
    replace: bool,
) -> set[str]:
    """The appraisal rules of ``appraise import`` for an archive; returns the appraisals it
    replaces (only with ``replace``), or raises every problem."""
    if frames.appraisals.empty:
        return set()
    conflicts = {k for _, _, k in plans["appraisal"].changes} | set(rating_plan)
    label = Path(file).name
    rubric = door_rubric(conn, frames, rubric_path)
    problems = check_archive_appraisals(conn, frames, rubric, label, conflicts)
    if conflicts and not replace:
        problems += conflict_problems(frames, conflicts, label)
    if problems:
        raise InputFileError(sorted_problems(problems))
    return conflicts


def import_frames(
    store: Store,
    frames: EvidenceFrames,
    *,
    file: str,
    kind: str,
    dry_run: bool = False,
    progress: Progress | None = None,
    replace: bool = False,
    rubric_path: str | Path | None = None,
) -> ImportReport:
    """Write validated records in one transaction (or, with ``dry_run``, only plan it).

    An archive's appraisals pass the rules of ``appraise import``
    (:mod:`exposhift.services.archive_appraisals`); one that would change a stored appraisal
    is refused unless ``replace`` is given, and each replacement is audited as ``replace``.
    An archive's series sections are written in the same transaction.
    """
    if not dry_run:
        require(store, "edit")
        if replace:
            require(store, "replace")
    notes: list[str] = []
    with store.read() if dry_run else store.write() as conn:
        plans = build_plans(conn, frames)
        rating_plan = _rating_changes(conn, frames, plans["appraisal"])
        directions = _direction_counts(conn, frames)
        replaced = set()
        method_add: list[dict] = []
        if kind == "archive":
            method_add = method_plan(conn, frames, file)
            replaced = _archive_door(conn, frames, plans, rating_plan, file, rubric_path, replace)
        if not dry_run:
            w = BulkWriter(conn, store.user)
            audit_replacements(w, replaced, Path(file).name)
            apply_plans(w, frames, plans, progress)
            notes = _import_series(w, frames)
            w.flush()  # the method versions' audit entries follow in the chain
            notes += restore_method(conn, store.user, method_add)
    return ImportReport(
        file=file,
        url=store.masked_url,
        kind=kind,
        rows=frames.rows,
        dry_run=dry_run,
        counts={**_counts(plans, kind, rating_plan), **directions},
        notes=list(frames.notes) + notes,
    )


def _import_series(w: Writer, frames: EvidenceFrames) -> list[str]:
    """Write an archive's series sections in the same transaction (nothing when it has none)."""
    series = frames.series
    if series is None or not len(series):
        return []
    from exposhift.store.series_records import write_fits, write_series

    c = write_series(w, series.series, series.points)
    fits = write_fits(w, series.fits)
    w.flush()
    return [
        f"series: {c['added']} added, {c['updated']} updated, {c['unchanged']} unchanged; "
        f"{fits} stored re-estimation(s) added"
    ]


def import_into(
    store: Store,
    path: str | Path,
    *,
    events_only: bool = False,
    dry_run: bool = False,
    encoding: str | None = None,
    ignore_extra: bool = False,
    progress: Progress | None = None,
    replace: bool = False,
    rubric_path: str | Path | None = None,
) -> ImportReport:
    """Validate ``path`` completely, then import it into ``store`` in one transaction."""
    kind, frames = read_input(
        path,
        events_only=events_only,
        encoding=encoding,
        ignore_extra=ignore_extra,
        study_events=stored_study_events(store),
    )
    return import_frames(
        store,
        frames,
        file=str(path),
        kind=kind,
        dry_run=dry_run,
        progress=progress,
        replace=replace,
        rubric_path=rubric_path,
    )


def import_file(
    path: str | Path,
    *,
    db: str | None = None,
    user: str | None = None,
    events_only: bool = False,
    dry_run: bool = False,
    encoding: str | None = None,
    ignore_extra: bool = False,
    progress: Progress | None = None,
    delimiter: str | None = None,
    sheet: str | None = None,
    replace: bool = False,
    rubric_path: str | Path | None = None,
) -> ImportReport:
    """``exposhift import`` / ``exposhift events import``: open the store and import a file.

    The file is validated before the database is opened for writing; any problem raises
    :class:`InputFileError` with every problem found, and nothing is written.
    """
    opened: list[Store] = []

    def lookup(keys: list[str]) -> dict[str, set[str]]:  # opens the store only when needed
        if not opened:
            opened.append(open_current(db, user))
        return stored_study_events(opened[0])(keys)

    try:
        kind, frames = read_input(
            path,
            events_only=events_only,
            encoding=encoding,
            ignore_extra=ignore_extra,
            study_events=lookup,
            delimiter=delimiter,
            sheet=sheet,
        )
    except BaseException:
        for s in opened:
            s.dispose()
        raise
    store = opened[0] if opened else open_current(db, user)
    try:
        return import_frames(
            store,
            frames,
            file=str(path),
            kind=kind,
            dry_run=dry_run,
            progress=progress,
            replace=replace,
            rubric_path=rubric_path,
        )
    finally:
        store.dispose()
