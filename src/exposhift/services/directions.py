"""Expected directions: the committee pre-specifies, per exposure x outcome, what an exposure
increase does to the outcome (``raises`` or ``lowers``), with a rationale.

``exposhift direction set/clear/list/import`` call these. Each write is one transaction through
the store's Writer (versions, audit entries); a stale edit raises ConflictError. Cells without a
direction are left to the replication rules, which then say the direction was inferred from the
same data and mark the status provisional.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from exposhift.access import require
from exposhift.io import directions as checks
from exposhift.io.sheet import read_sheet
from exposhift.services.lookup import require_name
from exposhift.store.database import Store
from exposhift.store.directions import (
    delete_direction,
    directions_frame,
    find_direction,
    upsert_direction,
)
from exposhift.store.queries import vocabulary_names
from exposhift.store.writer import Writer, utc_now


@dataclass(frozen=True)
class DirectionChange:
    """What ``set`` or ``clear`` did."""

    exposure: str
    outcome: str
    action: str  # "added", "updated", "unchanged", "cleared"
    version: int
    record: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        return {
            "exposure": self.exposure,
            "outcome": self.outcome,
            "action": self.action,
            "version": self.version,
            **self.record,
        }


@dataclass(frozen=True)
class DirectionImport:
    file: str
    dry_run: bool
    added: int
    updated: int
    unchanged: int

    def to_dict(self) -> dict:
        return dict(vars(self))


def _now() -> str:
    return checks.normalise_time(utc_now()) or utc_now()


def set_direction(
    store: Store,
    exposure: str,
    outcome: str,
    direction: str,
    rationale: str,
    *,
    decided_by: str | None = None,
    decided_at: str | None = None,
    expected_version: int | None = None,
) -> DirectionChange:
    """Pre-specify (or change) the expected direction of ``exposure`` x ``outcome``.

    ``decided_by`` defaults to the store's user, ``decided_at`` to now (UTC). With
    ``expected_version`` the edit applies only if the record is still at that version.
    """
    values = {
        "direction": checks.check_direction(direction),
        "rationale": checks.check_rationale(rationale),
        "decided_by": (decided_by or "").strip() or store.user,
        "decided_at": checks.check_time(decided_at) if decided_at else _now(),
    }
    require(store, "edit")
    with store.write() as conn:
        exposure = require_name(conn, "exposure", exposure)
        outcome = require_name(conn, "outcome", outcome)
        w = Writer(conn, store.user)
        action, version = upsert_direction(
            w, exposure, outcome, values, expected_version=expected_version
        )
        w.flush()
    return DirectionChange(exposure, outcome, action, version, values)


def clear_direction(
    store: Store, exposure: str, outcome: str, *, expected_version: int | None = None
) -> DirectionChange:
    """Remove the pre-specified direction of ``exposure`` x ``outcome`` (audited)."""
    require(store, "edit")
    with store.write() as conn:
        exposure = require_name(conn, "exposure", exposure)
        outcome = require_name(conn, "outcome", outcome)
        w = Writer(conn, store.user)
        version = delete_direction(w, exposure, outcome, expected_version=expected_version)
        w.flush()
    return DirectionChange(exposure, outcome, "cleared", version)


def list_directions(store: Store) -> pd.DataFrame:
    """Every pre-specified direction: exposure, outcome, direction, rationale, decided_by,
    decided_at, version (sorted by exposure, outcome)."""
    with store.read() as conn:
        return directions_frame(conn)


def get_direction(store: Store, exposure: str, outcome: str) -> dict | None:
    """The stored direction of one exposure x outcome, or None when not pre-specified."""
    with store.read() as conn:
        return find_direction(conn, exposure, outcome)


KEPT_WHEN_BLANK = ("decided_by", "decided_at")


def _values(rec: dict, stored: dict | None, default_by: str, default_at: str) -> dict:
    """The record's values; a blank decided_by/decided_at keeps the stored one (or defaults)."""
    vals = {f: rec[f] for f in checks.FIELDS[2:]}
    for f, default in zip(KEPT_WHEN_BLANK, (default_by, default_at), strict=True):
        if not vals[f]:
            vals[f] = stored[f] if stored is not None else default
    return vals


def plan_directions(conn, frame: pd.DataFrame) -> dict[str, int]:
    """How many checked direction records would be added, updated or left unchanged."""
    plan = {"added": 0, "updated": 0, "unchanged": 0}
    for rec in frame.to_dict("records"):
        stored = find_direction(conn, rec["exposure"], rec["outcome"])
        if stored is None:
            plan["added"] += 1
        elif any(stored[f] != v for f, v in _values(rec, stored, "", "").items()):
            plan["updated"] += 1
        else:
            plan["unchanged"] += 1
    return plan


def write_directions(
    w: Writer, frame: pd.DataFrame, *, default_by: str | None = None, default_at: str | None = None
) -> dict[str, int]:
    """Upsert checked direction records inside the caller's transaction; returns counts.

    A blank ``decided_by``/``decided_at`` keeps the stored value, or for a new record takes
    ``default_by`` (the writer's user) and ``default_at`` (now).
    """
    counts = {"added": 0, "updated": 0, "unchanged": 0}
    by, at = default_by or w.user, default_at or _now()
    for rec in frame.to_dict("records"):
        stored = find_direction(w.conn, rec["exposure"], rec["outcome"])
        action, _ = upsert_direction(
            w, rec["exposure"], rec["outcome"], _values(rec, stored, by, at)
        )
        counts[action] += 1
    return counts


def import_directions(
    store: Store, path: str | Path, *, encoding: str | None = None, dry_run: bool = False
) -> DirectionImport:
    """Import a directions sheet (CSV/XLSX) in one transaction; nothing is written on error.

    Every problem of the file (row, column, what to do) is raised at once as InputFileError.
    """
    sheet = read_sheet(path, encoding)
    with store.read() as conn:
        exposures = vocabulary_names(conn, "exposure")
        outcomes = vocabulary_names(conn, "outcome")
    frame = checks.validate_directions_sheet(
        sheet, exposures, outcomes, default_by="", default_at=""
    )
    if dry_run:
        with store.read() as conn:
            plan = plan_directions(conn, frame)
        return DirectionImport(str(path), True, **plan)
    require(store, "edit")
    with store.write() as conn:
        w = Writer(conn, store.user)
        counts = write_directions(w, frame)
        w.flush()
    return DirectionImport(str(path), False, **counts)
