"""An archive's certainty judgements at the import door: what they would change, and writing
them through the Writer in the import's transaction (:mod:`exposhift.io.certainty_archive`
says the rules of the section)."""

from __future__ import annotations

from pathlib import Path

from exposhift.errors import InputFileError
from exposhift.io.certainty_archive import unknown_names
from exposhift.io.frames import EvidenceFrames
from exposhift.store.certainty_records import VALUES, find_judgement, upsert_judgement
from exposhift.store.queries import vocabulary_names
from exposhift.store.writer import Writer

#: the report's name for the section's counts
COUNT_NAME = "certainty judgements"
#: a re-import of the same decision at another time is no change (as in upsert_judgement)
_NOT_COMPARED = {"decided_at"}


def plan_judgements(conn, frames: EvidenceFrames, file: str) -> dict[str, int] | None:
    """Counts (added, updated, unchanged) the archive's judgements would give; None when the
    archive has no such section. A judgement of an exposure or outcome that neither the
    archive nor the evidence base has raises InputFileError (nothing is written)."""
    if frames.certainty is None:
        return None
    exposures = set(frames.exposures["name"].dropna()) | set(vocabulary_names(conn, "exposure"))
    outcomes = set(frames.outcomes["name"].dropna()) | set(vocabulary_names(conn, "outcome"))
    problems = unknown_names(frames.certainty, Path(file).name, exposures, outcomes)
    if problems:
        raise InputFileError(problems)
    counts = {"added": 0, "updated": 0, "unchanged": 0}
    for rec in frames.certainty:
        stored = find_judgement(conn, rec["exposure"], rec["outcome"], rec["domain"])
        if stored is None:
            counts["added"] += 1
        elif any(
            stored[f] != (bool(rec[f]) if f == "overrides" else rec[f])
            for f in VALUES
            if f not in _NOT_COMPARED
        ):
            counts["updated"] += 1
        else:
            counts["unchanged"] += 1
    return counts


def write_judgements(w: Writer, frames: EvidenceFrames) -> None:
    """Write the archive's judgements (after its exposures and outcomes exist), audited; one
    equal to the stored judgement is left alone (no write, no audit entry)."""
    for rec in frames.certainty or []:
        upsert_judgement(w, rec["exposure"], rec["outcome"], rec["domain"], rec)
    w.flush()
