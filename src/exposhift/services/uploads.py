"""A sheet uploaded in the browser: preview what it would change, then import it.

The same code path as ``exposhift import FILE [--dry-run]``: the uploaded bytes are written
under their own file name to a private temporary directory and read by
:func:`exposhift.services.importing.read_input` (signature check, input limits, validation),
then :func:`~exposhift.services.importing.import_frames` plans (``dry_run``) or writes the
import. The preview adds the list of records that would be added or changed, with the fields
that change by their labels (:mod:`exposhift.io.column_labels`; from the import's own plan).
The temporary copy is removed when the call returns.

An upload larger than the file-size limit of :mod:`exposhift.io.limits` is refused before it is
written anywhere; a file that is not a CSV or XLSX sheet is refused by the sheet reader with its
own message (what the file really is, from its first bytes).
"""

from __future__ import annotations

import contextlib
import tempfile
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from exposhift.errors import InputFileError, Problem
from exposhift.io.column_labels import field_label
from exposhift.io.frames import EvidenceFrames
from exposhift.io.limits import current_limits
from exposhift.services.acting import as_user
from exposhift.services.importing import (
    ImportReport,
    build_plans,
    import_frames,
    read_input,
    stored_study_events,
)
from exposhift.store.database import Store

KINDS = {"sheet": "extraction sheet", "events": "events sheet"}
SUFFIXES = (".csv", ".xlsx")
#: changed records listed in a preview (the counts cover all)
LISTED = 500


@dataclass(frozen=True)
class UploadPreview:
    """What importing the upload would do; nothing has been written."""

    report: ImportReport
    records: pd.DataFrame  # what, record, status ("added"/"changed"), fields
    listed_all: bool
    warnings: list[Problem] = field(default_factory=list)


def upload_limit_mb() -> int:
    """The largest upload accepted, in MB (``EXPOSHIFT_MAX_FILE_MB``, io/limits.py)."""
    return current_limits().max_file_mb


def _name(name: str) -> str:
    return Path(str(name).replace("\\", "/")).name or "upload"


@contextlib.contextmanager
def _saved(name: str, content: bytes) -> Iterator[Path]:
    """The upload as a file under its own name in a private temporary directory."""
    label = _name(name)
    limits = current_limits()
    if len(content) > limits.max_file_bytes:
        raise InputFileError(
            [
                Problem(
                    label,
                    None,
                    None,
                    f"the file is {len(content) / (1 << 20):.1f} MB; uploads are limited to "
                    f"{limits.max_file_mb} MB (EXPOSHIFT_MAX_FILE_MB). Split the sheet into "
                    "parts and upload each, or import it with 'exposhift import'",
                )
            ]
        )
    if Path(label).suffix.lower() not in SUFFIXES:
        raise InputFileError(
            [
                Problem(
                    label,
                    None,
                    None,
                    f"cannot upload '{Path(label).suffix or label}' files here; upload the "
                    "extraction sheet as .csv or .xlsx (see docs/extraction-sheet.md)",
                )
            ]
        )
    with tempfile.TemporaryDirectory(prefix="exposhift-upload-") as tmp:
        path = Path(tmp) / label
        path.write_bytes(content)
        yield path


def _read(store: Store, path: Path, kind: str) -> tuple[str, EvidenceFrames]:
    if kind not in KINDS:
        raise ValueError(f"unknown upload kind {kind!r}")
    return read_input(path, events_only=kind == "events", study_events=stored_study_events(store))


def _short(value) -> str:
    text = "" if value is None or (isinstance(value, float) and value != value) else str(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _records(store: Store, frames: EvidenceFrames) -> tuple[pd.DataFrame, bool]:
    rows: list[dict] = []
    with store.read() as conn:
        plans = build_plans(conn, frames)
    for entity, plan in plans.items():
        if entity == "appraisal":
            continue
        key = "name" if entity in ("exposure", "outcome") else "key"
        for k in plan.new[key].tolist() if len(plan.new) else []:
            rows.append({"what": entity, "record": k, "status": "added", "fields": ""})
        for before, changed, k in plan.changes:
            fields = "; ".join(
                f"{field_label(entity, f)}: {_short(before.get(f))} → {_short(v)}"
                for f, v in changed.items()
            )
            rows.append({"what": entity, "record": k, "status": "changed", "fields": fields})
    frame = pd.DataFrame(rows, columns=["what", "record", "status", "fields"])
    return frame.head(LISTED), len(frame) <= LISTED


def preview_upload(store: Store, name: str, content: bytes, kind: str = "sheet") -> UploadPreview:
    """Validate an uploaded sheet completely and plan its import (``--dry-run``): counts added /
    changed / unchanged per record type, and the records that would change. Any problem raises
    :class:`InputFileError` with every problem (file, row, column); nothing is written."""
    with _saved(name, content) as path:
        found, frames = _read(store, path, kind)
        report = import_frames(store, frames, file=path.name, kind=found, dry_run=True)
    records, complete = _records(store, frames)
    return UploadPreview(report, records, complete, list(frames.warnings))


def import_upload(
    store: Store, name: str, content: bytes, kind: str = "sheet", *, user: str | None
) -> ImportReport:
    """Import an uploaded sheet as ``user`` in one transaction (validated again first: the
    evidence base may have changed since the preview). The report says what was done."""
    acting = as_user(store, user, "import a sheet")
    with _saved(name, content) as path:
        found, frames = _read(acting, path, kind)
        return import_frames(acting, frames, file=path.name, kind=found)


def count_table(report: ImportReport) -> pd.DataFrame:
    """The report's counts as a table: one row per record type."""
    return pd.DataFrame(
        [
            {
                "records": k,
                "added": c.added,
                "changed": c.updated,
                "unchanged": c.unchanged,
            }
            for k, c in report.counts.items()
        ],
        columns=["records", "added", "changed", "unchanged"],
    )
