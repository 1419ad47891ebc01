"""Series actions: import a series sheet; re-estimate a series (fit, comparison, falsification)
and, on request, store the standard-form effect as a new estimate flagged re-estimated.

Storing is one transaction: the estimate (``time_window`` names the series and options), its
``series_fit`` row (model, options and the falsification figures, JSON), and — when a
falsification check passed — the check code added to the study's ``checks`` (so the rubric's
suggestions see it), each audited. A model that does not converge stores nothing.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from exposhift import cautions
from exposhift.access import require
from exposhift.appraisal.checks import parse_checks
from exposhift.errors import ConfigError, NotFoundError
from exposhift.io.series_sheet import Context, SeriesFrames, validate_series_sheet
from exposhift.io.sheet import read_sheet
from exposhift.series.analysis import SeriesAnalysis, SeriesData, analyse_series
from exposhift.series.periods import period_of_date
from exposhift.services.setup import open_current
from exposhift.store import records
from exposhift.store.database import Store
from exposhift.store.series_records import (
    exposed_periods,
    point_rows,
    series_rows,
    write_fit,
    write_series,
)
from exposhift.store.writer import Writer

CAUTION = cautions.SERIES


@dataclass(frozen=True)
class SeriesImportReport:
    file: str
    url: str
    series: int
    points: int
    counts: dict[str, int]

    def to_dict(self) -> dict[str, Any]:
        return dict(vars(self))


def _context(conn) -> Context:
    from exposhift.store.queries import events_frame

    ev = events_frame(conn)
    studies = {r["key"] for r in _studies(conn)}
    return Context(
        event_dates=dict(zip(ev["event_id"], ev["change_date"], strict=True)),
        studies=frozenset(studies),
        exposed=exposed_periods(conn),
    )


def _studies(conn) -> list[dict]:
    from exposhift.store.appraisals import studies_by_key

    return [{"key": k} for k in studies_by_key(conn)]


def import_series_frames(store: Store, frames: SeriesFrames, file: str) -> SeriesImportReport:
    require(store, "edit")
    with store.write() as conn:
        w = Writer(conn, store.user)
        for name in sorted(set(frames.series["outcome"])):
            records.ensure_vocab(w, "outcome", name)
        counts = write_series(w, frames.series, frames.points)
        w.flush()
    return SeriesImportReport(
        file, store.masked_url, len(frames.series), len(frames.points), counts
    )


def import_series_into(
    store: Store, path: str | Path, encoding: str | None = None
) -> SeriesImportReport:
    """Validate a series sheet against the evidence base, then write it in one transaction."""
    sheet = read_sheet(Path(path), encoding)
    with store.read() as conn:
        ctx = _context(conn)
    frames = validate_series_sheet(sheet, ctx)
    return import_series_frames(store, frames, str(path))


def import_series_file(
    path: str | Path, *, db: str | None = None, user: str | None = None, encoding: str | None = None
) -> SeriesImportReport:
    """``exposhift series import FILE``."""
    store = open_current(db, user)
    try:
        return import_series_into(store, path, encoding)
    finally:
        store.dispose()


# ------------------------------------------------------------------------------ estimation
@dataclass
class SeriesEstimate:
    analysis: SeriesAnalysis
    series: dict[str, Any]
    change_at: str
    stored_estimate: str | None = None
    checks_added: list[str] = field(default_factory=list)
    caution: str = CAUTION

    def to_dict(self) -> dict[str, Any]:
        return {
            "series": {k: v for k, v in self.series.items() if k not in ("id", "version")},
            "change_at": self.change_at,
            **self.analysis.to_dict(),
            "stored_estimate": self.stored_estimate,
            "checks_added": self.checks_added,
            "caution": self.caution,
        }


def _data(row: dict, pts: list[dict]) -> SeriesData:
    den = [p["denominator"] for p in pts]
    has_den = all(d is not None for d in den) and den
    return SeriesData(
        key=row["key"],
        periods=tuple(p["period"] for p in pts),
        values=np.array([p["value"] for p in pts], dtype=float),
        denominators=np.array(den, dtype=float) if has_den else None,
        value_kind=row["value_kind"],
        role=row["role"],
        place=row["place"],
    )


def _load(conn, key: str) -> tuple[dict, SeriesData, list[SeriesData], list[SeriesData]]:
    rows = series_rows(conn, key)
    if not rows:
        raise NotFoundError(
            f"no series '{key}' in the evidence base; list them in the series "
            "sheet you imported (exposhift series import FILE)"
        )
    row = rows[0]
    if row["role"] != "exposed":
        raise ConfigError(
            f"series '{key}' is a {row['role']} series; estimate the exposed "
            "series of the study (its comparisons are used with it)"
        )
    related = [
        r
        for r in series_rows(conn)
        if r["study"] == row["study"] and r["event"] == row["event"] and r["key"] != key
    ]
    comps = [r for r in related if r["role"] == "comparison" and r["outcome"] == row["outcome"]]
    negs = [r for r in related if r["role"] == "negative-control"]
    ids = [row["id"], *(r["id"] for r in comps + negs)]
    pts: dict[int, list[dict]] = {}
    for p in point_rows(conn, ids):
        pts.setdefault(p["series_id"], []).append(p)
    return (
        row,
        _data(row, pts.get(row["id"], [])),
        [_data(r, pts.get(r["id"], [])) for r in comps],
        [_data(r, pts.get(r["id"], [])) for r in negs],
    )


def _clean(value: Any) -> Any:
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_clean(v) for v in value]
    if isinstance(value, float | np.floating):
        return None if not math.isfinite(float(value)) else float(value)
    if isinstance(value, np.integer):
        return int(value)
    return value


def _store(w: Writer, row: dict, a: SeriesAnalysis) -> tuple[str, list[str]]:
    its = a.its
    opts = a.options()
    what = (
        "level change"
        if its.horizon is None
        else f"average over {its.horizon} periods after the change"
    )
    window = f"re-estimated from series {row['key']} ({a.model}; {what})"
    lo, hi = its.effect_ci
    z = its.effect / its.effect_se if its.effect_se > 0 else float("nan")
    from scipy import stats

    log = its.effect_scale == "log"
    values = {
        "study_id": records.get(w.conn, "study", row["study"])["id"],
        "event_id": records.get(w.conn, "event", row["event"])["id"],
        "outcome_id": records.get(w.conn, "outcome", row["outcome"])["id"],
        "measure": its.measure,
        "estimate_kind": its.estimate_kind,
        "point": math.exp(its.effect) if log else its.effect,
        "ci_low": math.exp(lo) if log else lo,
        "ci_high": math.exp(hi) if log else hi,
        "ci_level": 0.95,
        "se": its.effect_se,
        "p_value": (
            float(2 * stats.t.sf(abs(z), its.diagnostics["df"])) if math.isfinite(z) else None
        ),
        "subgroup": None,
        "time_window": window,
        "primary": False,
    }
    key = "|".join(
        [row["study"], row["event"], row["outcome"], its.measure, its.estimate_kind, "", window]
    )
    if records.find(w.conn, "estimate", key) is not None:
        raise ConfigError(
            f"this re-estimate is already stored as estimate '{key}'; nothing was written"
        )
    records.create(w, "estimate", {"key": key, **values})
    figures = _clean(
        {
            "effect": its.effect,
            "effect_se": its.effect_se,
            "effect_ci": list(its.effect_ci),
            "measure": its.measure,
            "diagnostics": its.diagnostics,
            **a.falsification(),
        }
    )
    write_fit(w, key, row["key"], a.model, _clean(opts), figures)
    study = records.get(w.conn, "study", row["study"])
    have = parse_checks(study["checks"]).codes if study["checks"] else ()
    added = [c for c in a.checks_passed if c not in have]
    if added:
        records.update(
            w, "study", row["study"], study["version"], {"checks": ";".join([*have, *added])}
        )
    return key, added


def estimate_series(
    store: Store,
    key: str,
    *,
    horizon: int | None = None,
    model: str = "auto",
    seasonal: str | None = "auto",
    hac_lag: int | None = None,
    save: bool = False,
) -> SeriesEstimate:
    """Re-estimate series ``key`` with its comparisons and negative controls; ``save`` stores
    the standard-form effect (see module doc)."""
    with store.read() as conn:
        row, exposed, comps, negs = _load(conn, key)
    change_at = row["change_at"] or period_of_date(row["change_date"], row["time_unit"])
    analysis = analyse_series(
        exposed,
        change_at,
        comparisons=comps,
        negative_controls=negs,
        model=model,
        seasonal=seasonal,
        horizon=horizon,
        hac_lag=hac_lag,
    )
    out = SeriesEstimate(analysis, row, change_at)
    if save:
        require(store, "edit")
        with store.write() as conn:
            w = Writer(conn, store.user)
            out.stored_estimate, out.checks_added = _store(w, row, analysis)
            w.flush()
    return out


def estimate_series_in(
    key: str, *, db: str | None = None, user: str | None = None, **options: Any
) -> SeriesEstimate:
    """``exposhift series estimate SERIES_ID``: open the evidence base and estimate."""
    store = open_current(db, user)
    try:
        return estimate_series(store, key, **options)
    finally:
        store.dispose()


def list_series(store: Store):
    """Every series with its study, event, outcome, role, place and number of points."""
    import pandas as pd

    with store.read() as conn:
        rows = series_rows(conn)
        pts = point_rows(conn)
    n: dict[str, int] = {}
    for p in pts:
        n[p["series"]] = n.get(p["series"], 0) + 1
    cols = ["key", "study", "event", "outcome", "role", "place", "time_unit", "value_kind"]
    frame = pd.DataFrame(rows, columns=[*cols, "id"])[cols]
    frame["points"] = frame["key"].map(n).fillna(0).astype(int)
    return frame
