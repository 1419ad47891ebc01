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

from dataclasses import dataclass, field
from pathlib import Path

from exposhift.access import Identity, require
from exposhift.errors import InputFileError, Problem
from exposhift.io.archive import read_archive
from exposhift.io.frames import PLURAL, EvidenceFrames
from exposhift.io.overlap import StudyEvents
from exposhift.io.problems import sorted_problems
from exposhift.io.sheet import read_sheet
from exposhift.io.validate import validate_events_sheet, validate_sheet
from exposhift.services.archive_appraisals import (
    audit_replacements,
    check_archive_appraisals,
    conflict_problems,
)
from exposhift.services.certainty_restore import COUNT_NAME, plan_judgements, write_judgements
from exposhift.services.method_restore import door_rubric, method_plan, restore_method
from exposhift.services.setup import open_current
from exposhift.store.bulk import BulkWriter
from exposhift.store.database import Store
from exposhift.store.import_plan import (
    ENTITIES,
    PAUSE_ENV,  # noqa: F401  (the test hooks' names, re-exported)
    PAUSE_SECONDS_ENV,  # noqa: F401
    EntityPlan,
    Progress,
    apply_plans,
    build_plans,
    rating_changes,
)
from exposhift.store.queries import study_events
from exposhift.store.writer import Writer


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
    #: what the file's checks warn about without refusing it (e.g. an implausible value)
    warnings: list[Problem] = field(default_factory=list)

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
            "warnings": [
                {"file": w.file, "row": w.row, "column": w.column, "message": w.message}
                for w in self.warnings
            ],
            "counts": {k: vars(v) for k, v in self.counts.items()},
        }


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


def _refuse_blinded(conn, frames: EvidenceFrames, file: str, viewer: Identity) -> None:
    """An archive's independent appraisals that would be compared with one ``viewer`` may not
    see are refused first (:mod:`exposhift.services.blind_imports`)."""
    from exposhift.services.blind_imports import blinded_problems

    apps = frames.appraisals
    if apps.empty:
        return
    rows = [
        (i + 1, study, reviewer, stage)
        for i, (study, reviewer, stage) in enumerate(
            apps[["study", "reviewer", "stage"]].itertuples(index=False, name=None)
        )
    ]
    problems = blinded_problems(conn, viewer, rows, f"{Path(file).name}: appraisals")
    if problems:
        raise InputFileError(problems)


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
    An archive's series sections and certainty judgements are written in the same
    transaction.
    """
    if not dry_run:
        require(store, "edit")
        if replace:
            require(store, "replace")
    notes: list[str] = []
    with store.read() if dry_run else store.write() as conn:
        if kind == "archive":  # before any comparison with the stored appraisals
            _refuse_blinded(conn, frames, file, Identity(store.user, store.role))
        plans = build_plans(conn, frames)
        rating_plan = rating_changes(conn, frames, plans["appraisal"])
        directions = _direction_counts(conn, frames)
        judged = plan_judgements(conn, frames, file) if kind == "archive" else None
        if judged is not None:
            directions[COUNT_NAME] = Counts(**judged)
        replaced = set()
        method_add: list[dict] = []
        if kind == "archive":
            method_add = method_plan(conn, frames, file)
            replaced = _archive_door(conn, frames, plans, rating_plan, file, rubric_path, replace)
        if not dry_run:
            w = BulkWriter(conn, store.user)
            audit_replacements(w, replaced, Path(file).name)
            apply_plans(w, frames, plans, progress)
            _apply_directions(w, frames)
            w.flush()
            notes = _import_series(w, frames)
            write_judgements(w, frames)
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
        warnings=list(frames.warnings),
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
