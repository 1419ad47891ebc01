"""The series sections of the JSON archive: ``series`` (each with its ``points``) and
``series_fits`` (stored re-estimations).

Layout, after ``appraisals``::

    "series": [{"key", "study", "event", "outcome", "role", "place", "time_unit",
                "value_kind", "change_at", "extracted_by", "demo",
                "points": [{"period", "value", "denominator", "source"}, ...]}, ...],
    "series_fits": [{"estimate", "series", "model", "options", "figures"}, ...]

Same determinism as the rest of the archive: series sorted by key, points in period order, fits
by estimate key, fixed field order, floats with ``repr``; ``options`` and ``figures`` are the
stored JSON text, written verbatim. An archive without these sections reads as having no series.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd

from exposhift.io.problems import ProblemLog, quote
from exposhift.io.series_sheet import (
    COLUMNS,
    FIT_FIELDS,
    SERIES_FIELDS,
    Context,
    SeriesFrames,
    validate_long,
)
from exposhift.series.periods import period_index

_POINT_KEYS = ("period", "value", "denominator", "source")


def _py(v):
    if v is None or (isinstance(v, float) and v != v):
        return None
    if isinstance(v, np.floating):
        return float(v)
    if isinstance(v, np.bool_):
        return bool(v)
    return v


def series_lines(frames: SeriesFrames | None, list_lines) -> list[str]:
    """The archive lines of the two sections (``list_lines`` writes one JSON list)."""
    series, fits = series_records(frames if frames is not None else SeriesFrames())
    return list_lines("series", series, "  ", False) + list_lines("series_fits", fits, "  ", True)


def series_records(frames: SeriesFrames) -> tuple[list[dict], list[dict]]:
    """The ``series`` and ``series_fits`` records, in archive order."""
    pts: dict[str, list[dict]] = {}
    for p in frames.points.to_dict(orient="records"):
        pts.setdefault(p["series"], []).append({k: _py(p[k]) for k in _POINT_KEYS})
    out = []
    for s in sorted(frames.series.to_dict(orient="records"), key=lambda r: r["key"]):
        rec = {k: _py(s[k]) for k in SERIES_FIELDS}
        rec["demo"] = bool(rec["demo"])
        unit = rec["time_unit"]
        rec["points"] = sorted(
            pts.get(s["key"], []), key=lambda p: period_index(p["period"], unit) or 0
        )
        out.append(rec)
    fits = sorted(
        ({k: _py(f[k]) for k in FIT_FIELDS} for f in frames.fits.to_dict(orient="records")),
        key=lambda r: r["estimate"],
    )
    return out, fits


def _text(v) -> str | None:
    """JSON value as cell text (None when the JSON type cannot be cell text)."""
    if v is None:
        return ""
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, str):
        return v
    if isinstance(v, int | float):
        return repr(float(v))
    return None


def read_series_sections(
    doc: dict,
    log: ProblemLog,
    file: str,
    *,
    event_dates: dict,
    studies: set[str],
    estimates: set[str],
    outcomes: set[str] | None = None,
) -> SeriesFrames:
    """Validate the series sections of an archive (problems go to ``log``).

    ``outcomes``: the outcome names the archive holds (its ``vocabularies.outcomes`` and the
    outcomes of its estimates); a series naming any other is refused, so that an archive
    imports only whole (None: not checked).
    """
    records = doc.get("series", [])
    if not isinstance(records, list):
        log.add(None, "series", "'series' must be a list of records")
        records = []
    rows, where = {c: [] for c in COLUMNS}, []
    back = {"key": "series_id", "study": "study_id", "event": "event_id"}
    sec = ProblemLog(f"{file}: series")
    sec.problems = log.problems
    for i, rec in enumerate(records):
        if not isinstance(rec, dict):
            sec.add(i + 1, None, "each series must be a JSON object")
            continue
        for extra in sorted(set(rec) - set(SERIES_FIELDS) - {"points"}):
            sec.add(i + 1, extra, "unknown field; remove it (is this an exposhift export?)")
        named = rec.get("outcome")
        if outcomes is not None and isinstance(named, str) and named and named not in outcomes:
            sec.add(
                i + 1,
                "outcome",
                f"outcome {quote(named)} is not in the archive (neither in "
                "vocabularies.outcomes nor named by an estimate); add it to "
                "vocabularies.outcomes with its outcome_group, or export the archive again",
            )
        points = rec.get("points", [])
        if not isinstance(points, list) or not points:
            sec.add(i + 1, "points", "a series needs a list of points")
            continue
        for j, p in enumerate(points):
            if not isinstance(p, dict):
                sec.add(i + 1, f"points[{j}]", "each point must be a JSON object")
                continue
            for extra in sorted(set(p) - set(_POINT_KEYS)):
                sec.add(i + 1, f"points[{j}].{extra}", "unknown field; remove it")
            cells = {
                **{back.get(f, f): rec.get(f) for f in SERIES_FIELDS},
                **{k: p.get(k) for k in _POINT_KEYS},
            }
            for c in COLUMNS:
                t = _text(cells.get(c))
                if t is None:
                    sec.add(i + 1, c, f"expected text or a number, not {quote(cells.get(c))}")
                    t = ""
                rows[c].append(t)
            where.append(i + 1)
    raw = pd.DataFrame({c: pd.Series(v, dtype="str") for c, v in rows.items()})
    frames = validate_long(
        raw,
        sec.at(f"{file}: series", np.array(where, dtype=np.int64)),
        Context(event_dates=event_dates, studies=frozenset(studies)),
    )
    fits = doc.get("series_fits", [])
    fsec = log.at(
        f"{file}: series_fits", np.arange(1, (len(fits) if isinstance(fits, list) else 0) + 1)
    )
    fit_rows = []
    keys = set(frames.series["key"])
    for i, f in enumerate(fits if isinstance(fits, list) else []):
        if not isinstance(f, dict):
            fsec.add(i + 1, None, "each fit must be a JSON object")
            continue
        for extra in sorted(set(f) - set(FIT_FIELDS)):
            fsec.add(i + 1, extra, "unknown field; remove it")
        row = {k: f.get(k) for k in FIT_FIELDS}
        for k, v in row.items():
            if not isinstance(v, str) or not v:
                fsec.add(i + 1, k, "required text missing")
        if isinstance(row["estimate"], str) and row["estimate"] not in estimates:
            fsec.add(i + 1, "estimate", "no estimate with this key in the archive's estimates")
        if isinstance(row["series"], str) and row["series"] not in keys:
            fsec.add(i + 1, "series", "no series with this key in the archive's series")
        for k in ("options", "figures"):
            try:
                json.loads(row[k]) if isinstance(row[k], str) else None
            except json.JSONDecodeError:
                fsec.add(i + 1, k, "not valid JSON text; export the evidence base again")
        fit_rows.append(row)
    frames.fits = (
        pd.DataFrame(fit_rows, columns=list(FIT_FIELDS)).astype("str") if fit_rows else frames.fits
    )
    return frames
