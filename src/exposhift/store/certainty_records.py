"""Certainty judgements in the store: read and upsert, versioned and audited.

Every write goes through :class:`~exposhift.store.writer.Writer`: an ``insert``/``update``
audit entry in the same transaction, keyed ``exposure|outcome|domain``; an edit based on a
version that has moved on raises :class:`~exposhift.errors.ConflictError` and changes nothing.
Also here: the consensus rating of one rubric domain per study (for indirectness).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import pandas as pd
from sqlalchemy import Connection, select
from sqlalchemy.exc import IntegrityError

from exposhift.errors import ConflictError, NotFoundError
from exposhift.store.models import (
    Appraisal,
    CertaintyJudgement,
    Exposure,
    Outcome,
    Rating,
    Study,
)
from exposhift.store.writer import Writer

TABLE = CertaintyJudgement.__table__
EX, OU = Exposure.__table__, Outcome.__table__
AP, RA, ST = Appraisal.__table__, Rating.__table__, Study.__table__
#: the values a judgement holds besides its key
VALUES = (
    "rating",
    "why",
    "suggested",
    "suggestion_reason",
    "overrides",
    "numbers",
    "settings_hash",
    "decided_by",
    "decided_at",
)
FRAME_COLUMNS = ("exposure", "outcome", "domain", *VALUES, "version", "updated_at")


def row_key(exposure: str, outcome: str, domain: str) -> str:
    """The natural key of a judgement in the audit trail."""
    return f"{exposure}|{outcome}|{domain}"


def _select():
    return (
        select(TABLE, EX.c.name.label("exposure"), OU.c.name.label("outcome"))
        .join(EX, TABLE.c.exposure_id == EX.c.id)
        .join(OU, TABLE.c.outcome_id == OU.c.id)
    )


def judgements_frame(
    conn: Connection, exposure: str | None = None, outcome: str | None = None
) -> pd.DataFrame:
    """Recorded judgements (columns FRAME_COLUMNS), sorted by exposure, outcome, domain."""
    stmt = _select()
    if exposure is not None:
        stmt = stmt.where(EX.c.name == exposure)
    if outcome is not None:
        stmt = stmt.where(OU.c.name == outcome)
    rows = [dict(r) for r in conn.execute(stmt).mappings()]
    frame = pd.DataFrame(rows, columns=[*FRAME_COLUMNS])
    if frame.empty:
        return frame
    frame["overrides"] = frame["overrides"].astype(bool)
    frame = frame.sort_values(["exposure", "outcome", "domain"], kind="stable")
    return frame[list(FRAME_COLUMNS)].reset_index(drop=True)


def find_judgement(
    conn: Connection, exposure: str, outcome: str, domain: str
) -> dict[str, Any] | None:
    """The stored judgement (with id and version), or None."""
    stmt = _select().where(EX.c.name == exposure, OU.c.name == outcome, TABLE.c.domain == domain)
    row = conn.execute(stmt).mappings().first()
    return dict(row) if row is not None else None


def _id(conn: Connection, table, name: str, what: str) -> int:
    found = conn.execute(select(table.c.id).where(table.c.name == name)).scalar_one_or_none()
    if found is None:
        raise NotFoundError(f"no {what} '{name}' in the evidence base")
    return int(found)


def upsert_judgement(
    w: Writer,
    exposure: str,
    outcome: str,
    domain: str,
    values: Mapping[str, Any],
    *,
    expected_version: int | None = None,
) -> tuple[str, int]:
    """Insert or update one judgement (values: :data:`VALUES`, already checked).

    Returns (``"added"``, ``"updated"`` or ``"unchanged"``, the version after).
    """
    vals = {f: values[f] for f in VALUES}
    vals["overrides"] = bool(vals["overrides"])
    key = row_key(exposure, outcome, domain)
    stored = find_judgement(w.conn, exposure, outcome, domain)
    if stored is None:
        if expected_version is not None:
            raise ConflictError(
                f"certainty judgement '{key}' does not exist (you edited version "
                f"{expected_version}); nothing was changed"
            )
        ids = {
            "exposure_id": _id(w.conn, EX, exposure, "exposure"),
            "outcome_id": _id(w.conn, OU, outcome, "outcome"),
            "domain": domain,
        }
        try:
            w.insert(TABLE, {**ids, **vals}, row_key=key)
        except IntegrityError:
            raise ConflictError(
                f"certainty judgement '{key}' was recorded by someone else at the same time; "
                "nothing was changed. Reload and record it again"
            ) from None
        return "added", 1
    version = int(stored["version"]) if expected_version is None else expected_version
    same = {"decided_at"}  # a re-import of the same decision is no change
    changes = {f: v for f, v in vals.items() if stored[f] != v and f not in same}
    if not changes and version == int(stored["version"]):
        return "unchanged", version
    changes["decided_at"] = vals["decided_at"]
    before = {k: stored[k] for k in (c.name for c in TABLE.columns)}
    new_version = w.update(TABLE, int(stored["id"]), version, changes, before=before, row_key=key)
    return "updated", new_version


def consensus_domain_levels(conn: Connection, domain: str) -> dict[str, float]:
    """The consensus rating of rubric ``domain`` per study key (studies without one absent)."""
    stmt = (
        select(ST.c.key, RA.c.level)
        .join(AP, AP.c.study_id == ST.c.id)
        .join(RA, RA.c.appraisal_id == AP.c.id)
        .where(AP.c.stage == "consensus", RA.c.domain == domain)
    )
    return {str(k): float(lv) for k, lv in conn.execute(stmt) if lv is not None}
