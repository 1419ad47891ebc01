"""Series records in the store: reading them by natural key and writing them through the
:class:`~exposhift.store.writer.Writer` (versions and audit entries, one transaction).

A series is matched by its key: new series are inserted with their points; a series whose
fields differ is updated (version checked); when its points differ they are replaced as a whole
(each deleted and inserted point audited under ``series|period``). Identical series are left
alone. Stored re-estimations (``series_fit``) are inserted once per estimate.
"""

from __future__ import annotations

import json
import math
from typing import Any

import pandas as pd
from sqlalchemy import Connection, delete, select

from exposhift.errors import ExposhiftError
from exposhift.store.models import (
    Estimate,
    Event,
    Outcome,
    Series,
    SeriesFit,
    SeriesPoint,
    Study,
)
from exposhift.store.writer import Writer, keyed_ids

SE, SP, SF = Series.__table__, SeriesPoint.__table__, SeriesFit.__table__
ST, EV, OU, ES = Study.__table__, Event.__table__, Outcome.__table__, Estimate.__table__
SERIES_COLS = (
    "key",
    "study",
    "event",
    "outcome",
    "role",
    "place",
    "time_unit",
    "value_kind",
    "change_at",
    "extracted_by",
    "demo",
)


def _none(v: Any) -> Any:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return None
    return v


def series_rows(conn: Connection, key: str | None = None) -> list[dict[str, Any]]:
    """Series with natural-key references (study, event, outcome), sorted by key."""
    stmt = (
        select(
            SE.c.id,
            SE.c.key,
            ST.c.key.label("study"),
            EV.c.key.label("event"),
            OU.c.name.label("outcome"),
            SE.c.role,
            SE.c.place,
            SE.c.time_unit,
            SE.c.value_kind,
            SE.c.change_at,
            SE.c.extracted_by,
            SE.c.demo,
            SE.c.version,
            EV.c.change_date,
        )
        .join(ST, SE.c.study_id == ST.c.id)
        .join(EV, SE.c.event_id == EV.c.id)
        .join(OU, SE.c.outcome_id == OU.c.id)
        .order_by(SE.c.key)
    )
    if key is not None:
        stmt = stmt.where(SE.c.key == key)
    return [dict(r) for r in conn.execute(stmt).mappings()]


def point_rows(conn: Connection, series_ids: list[int] | None = None) -> list[dict[str, Any]]:
    stmt = (
        select(
            SE.c.key.label("series"),
            SP.c.series_id,
            SP.c.period,
            SP.c.value,
            SP.c.denominator,
            SP.c.source,
        )
        .join(SE, SP.c.series_id == SE.c.id)
        .order_by(SE.c.key, SP.c.id)
    )
    if series_ids is not None:
        stmt = stmt.where(SP.c.series_id.in_(series_ids))
    return [dict(r) for r in conn.execute(stmt).mappings()]


def fit_rows(conn: Connection) -> list[dict[str, Any]]:
    stmt = (
        select(
            ES.c.key.label("estimate"),
            SE.c.key.label("series"),
            SF.c.model,
            SF.c.options,
            SF.c.figures,
        )
        .join(ES, SF.c.estimate_id == ES.c.id)
        .join(SE, SF.c.series_id == SE.c.id)
        .order_by(ES.c.key)
    )
    return [dict(r) for r in conn.execute(stmt).mappings()]


def re_estimated_keys(conn: Connection) -> set[str]:
    """Keys of the estimates written by a stored re-estimation."""
    stmt = select(ES.c.key).join(SF, SF.c.estimate_id == ES.c.id)
    return {k for (k,) in conn.execute(stmt)}


def exposed_periods(conn: Connection) -> dict[tuple[str, str, str], tuple[str, frozenset]]:
    rows = [r for r in series_rows(conn) if r["role"] == "exposed"]
    pts = point_rows(conn, [r["id"] for r in rows]) if rows else []
    by: dict[str, set] = {}
    for p in pts:
        by.setdefault(p["series"], set()).add(p["period"])
    return {
        (r["study"], r["event"], r["outcome"]): (r["time_unit"], frozenset(by.get(r["key"], ())))
        for r in rows
    }


def _point_values(p: dict) -> tuple:
    return (p["period"], float(p["value"]), _none(p["denominator"]), _none(p["source"]))


def write_series(w: Writer, series: pd.DataFrame, points: pd.DataFrame) -> dict[str, int]:
    """Insert or update ``series`` and their ``points``; returns counts added/updated/unchanged."""
    conn = w.conn
    studies, events = keyed_ids(conn, ST), keyed_ids(conn, EV)
    outcomes = keyed_ids(conn, OU, "name")
    stored = {r["key"]: r for r in series_rows(conn)}
    stored_pts: dict[str, list[tuple]] = {}
    for p in point_rows(conn):
        stored_pts.setdefault(p["series"], []).append(_point_values(p))
    by_series: dict[str, list[dict]] = {}
    for p in points.to_dict(orient="records"):
        by_series.setdefault(p["series"], []).append(p)
    _refuse_unknown(series, studies, events, outcomes)
    counts = {"added": 0, "updated": 0, "unchanged": 0}
    for rec in series.to_dict(orient="records"):
        key = rec["key"]
        values = {
            "key": key,
            "study_id": studies[rec["study"]],
            "event_id": events[rec["event"]],
            "outcome_id": outcomes[rec["outcome"]],
            "role": rec["role"],
            "place": _none(rec["place"]),
            "time_unit": rec["time_unit"],
            "value_kind": rec["value_kind"],
            "change_at": _none(rec["change_at"]),
            "extracted_by": _none(rec["extracted_by"]),
            "demo": bool(rec["demo"]),
        }
        new_pts = [_point_values(p) for p in by_series.get(key, [])]
        old = stored.get(key)
        if old is None:
            sid = w.insert(SE, values)
            _insert_points(w, sid, key, new_pts)
            counts["added"] += 1
            continue
        old_vals = {
            "study_id": studies[old["study"]],
            "event_id": events[old["event"]],
            "outcome_id": outcomes[old["outcome"]],
            **{
                c: old[c]
                for c in (
                    "role",
                    "place",
                    "time_unit",
                    "value_kind",
                    "change_at",
                    "extracted_by",
                    "demo",
                )
            },
        }
        changes = {k: v for k, v in values.items() if k != "key" and old_vals[k] != v}
        same_points = stored_pts.get(key, []) == new_pts
        if not changes and same_points:
            counts["unchanged"] += 1
            continue
        before = {"key": key, **old_vals}
        w.update(SE, old["id"], old["version"], changes, before=before, row_key=key)
        if not same_points:
            for p in point_rows(conn, [old["id"]]):
                w._record(
                    SP,
                    f"{key}|{p['period']}",
                    "delete",
                    {k: p[k] for k in ("period", "value", "denominator", "source")},
                    None,
                )
            conn.execute(delete(SP).where(SP.c.series_id == old["id"]))
            _insert_points(w, old["id"], key, new_pts)
        counts["updated"] += 1
    return counts


def _refuse_unknown(series: pd.DataFrame, studies: dict, events: dict, outcomes: dict) -> None:
    """A clear error, before anything is written, when a series names a study, event or
    outcome the evidence base does not hold (the readers check this first; this guard keeps a
    caller that skipped them from failing half-way with a bare lookup error)."""
    known = {"study": studies, "event": events, "outcome": outcomes}
    for rec in series.to_dict(orient="records"):
        for field, ids in known.items():
            if rec[field] not in ids:
                raise ExposhiftError(
                    f"series {rec['key']!r} names the {field} {rec[field]!r}, which the "
                    f"evidence base does not hold; add that {field} first (import it with "
                    "its records), then the series. Nothing was written"
                )


def _insert_points(w: Writer, sid: int, key: str, pts: list[tuple]) -> None:
    rows = [
        {"series_id": sid, "period": p, "value": v, "denominator": d, "source": s}
        for p, v, d, s in pts
    ]
    w.insert_many(SP, rows, row_keys=[f"{key}|{r['period']}" for r in rows])


def write_fit(
    w: Writer,
    estimate_key: str,
    series_key: str,
    model: str,
    options: dict | str,
    figures: dict | str,
) -> None:
    """Record that ``estimate_key`` was re-estimated from ``series_key`` (audited)."""
    conn = w.conn
    est_id = conn.execute(select(ES.c.id).where(ES.c.key == estimate_key)).scalar_one()
    sid = conn.execute(select(SE.c.id).where(SE.c.key == series_key)).scalar_one()
    w.insert(
        SF,
        {
            "estimate_id": est_id,
            "series_id": sid,
            "model": model,
            "options": options if isinstance(options, str) else json.dumps(options, sort_keys=True),
            "figures": figures
            if isinstance(figures, str)
            else json.dumps(figures, sort_keys=True, allow_nan=False),
        },
        row_key=estimate_key,
    )


def write_fits(w: Writer, fits: pd.DataFrame) -> int:
    """Insert the fits not yet stored (archive import); returns how many."""
    have = {r["estimate"] for r in fit_rows(w.conn)}
    n = 0
    for rec in fits.to_dict(orient="records"):
        if rec["estimate"] in have:
            continue
        write_fit(w, rec["estimate"], rec["series"], rec["model"], rec["options"], rec["figures"])
        n += 1
    return n
