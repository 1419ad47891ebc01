"""The series sheet (long format: one row per point) and its validation.

Columns (documented in docs/series-sheet.md): ``series_id``, ``study_id``, ``event_id``,
``outcome``, ``role``, ``place``, ``time_unit``, ``value_kind``, ``period``, ``value``,
``denominator``, ``source``, ``extracted_by``, ``change_at``, ``demo``. The series-level columns
repeat on every row of a series and must agree. Every problem is collected (file, row, column,
what to do) and raised together; nothing is written.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from exposhift.errors import InputFileError, Problem
from exposhift.io.cells import clean_text, parse_bool, parse_float
from exposhift.io.problems import ProblemLog, quote, sorted_problems
from exposhift.io.sheet import RawSheet
from exposhift.series.periods import TIME_UNITS, period_index, period_of_date, period_unit

ROLES: tuple[str, ...] = ("exposed", "comparison", "negative-control")
VALUE_KINDS: tuple[str, ...] = ("count", "rate", "mean")
#: series-level fields (sheet column -> frame field); they repeat on each row of a series
SERIES_COLUMNS = {
    "series_id": "key",
    "study_id": "study",
    "event_id": "event",
    "outcome": "outcome",
    "role": "role",
    "place": "place",
    "time_unit": "time_unit",
    "value_kind": "value_kind",
    "change_at": "change_at",
    "extracted_by": "extracted_by",
    "demo": "demo",
}
POINT_COLUMNS = ("period", "value", "denominator", "source")
COLUMNS: tuple[str, ...] = (*SERIES_COLUMNS, *POINT_COLUMNS)
REQUIRED = (
    "series_id",
    "study_id",
    "event_id",
    "outcome",
    "role",
    "time_unit",
    "value_kind",
    "period",
    "value",
)
SERIES_FIELDS = {
    "key": "text",
    "study": "text",
    "event": "text",
    "outcome": "text",
    "role": "text",
    "place": "text",
    "time_unit": "text",
    "value_kind": "text",
    "change_at": "text",
    "extracted_by": "text",
    "demo": "bool",
}
POINT_FIELDS = {
    "series": "text",
    "period": "text",
    "value": "float",
    "denominator": "float",
    "source": "text",
}
FIT_FIELDS = {
    "estimate": "text",
    "series": "text",
    "model": "text",
    "options": "text",
    "figures": "text",
}


def _empty(kinds: dict[str, str]) -> pd.DataFrame:
    dtype = {"text": "str", "float": "float64", "bool": bool}
    return pd.DataFrame({c: pd.Series([], dtype=dtype[k]) for c, k in kinds.items()})


@dataclass
class SeriesFrames:
    """Series records keyed by natural keys: ``series``, ``points`` and stored ``fits``."""

    series: pd.DataFrame = field(default_factory=lambda: _empty(SERIES_FIELDS))
    points: pd.DataFrame = field(default_factory=lambda: _empty(POINT_FIELDS))
    fits: pd.DataFrame = field(default_factory=lambda: _empty(FIT_FIELDS))

    def __len__(self) -> int:
        return len(self.series)


@dataclass(frozen=True)
class Context:
    """What the evidence base already holds: event change dates and exposed series periods
    (``(study, event, outcome) -> (unit, periods)``)."""

    event_dates: Mapping[str, str] = field(default_factory=dict)
    studies: frozenset[str] | None = None  # None: not checked
    exposed: Mapping[tuple[str, str, str], tuple[str, frozenset[str]]] = field(default_factory=dict)


def validate_long(raw: pd.DataFrame, log: ProblemLog, ctx: Context) -> SeriesFrames:
    """Check a long frame of cell text (columns :data:`COLUMNS`) and return typed records."""
    n = len(raw)
    for c in COLUMNS:
        if c not in raw.columns:
            raw[c] = ""
    for c in REQUIRED:
        log.flag((raw[c] == "").to_numpy(), c, "required value missing")
    text = {c: clean_text(raw[c]) for c in COLUMNS if c not in ("value", "denominator", "demo")}
    value = parse_float(raw["value"], "value", log)
    denom = parse_float(raw["denominator"], "denominator", log)
    demo = parse_bool(raw["demo"], "demo", log)
    role, unit, kind = text["role"], text["time_unit"], text["value_kind"]
    for col, s, accepted in (
        ("role", role, ROLES),
        ("time_unit", unit, TIME_UNITS),
        ("value_kind", kind, VALUE_KINDS),
    ):
        bad = s.notna().to_numpy() & ~s.isin(accepted).to_numpy()
        vals = s.to_numpy()
        log.flag(
            bad,
            col,
            lambda i, vals=vals, accepted=accepted, col=col: (
                f"unknown {col} {quote(vals[i])}; accepted: {', '.join(accepted)}"
            ),
        )
    count = (kind == "count").to_numpy()
    log.flag(
        count & (value < 0).to_numpy(),
        "value",
        "a count cannot be negative; correct the value read from the source",
    )
    log.flag(
        (denom <= 0).to_numpy(),
        "denominator",
        "a denominator (population) must be above 0; leave it blank when not known",
    )
    periods = text["period"].fillna("").to_numpy()
    units = unit.fillna("").to_numpy()
    keys = text["series_id"].fillna("").to_numpy()
    # period spelled in the series' unit
    p_unit = np.array([period_unit(p) if p else None for p in periods], dtype=object)
    for i in range(n):
        if not periods[i] or units[i] not in TIME_UNITS:
            continue
        if p_unit[i] is None:
            log.add(
                int(log.rows[i]),
                "period",
                f"{quote(periods[i])} is not a period; write "
                "2015 (year), 2015-Q2 (quarter), 2015-03 (month) or 2015-W07 (week)",
            )
        elif p_unit[i] != units[i]:
            log.add(
                int(log.rows[i]),
                "period",
                f"{quote(periods[i])} is a {p_unit[i]} but "
                f"series {quote(keys[i])} is in {units[i]}s; use one time unit per series",
            )
    # series-level columns agree within a series
    first: dict[str, int] = {}
    for i, k in enumerate(keys):
        if k:
            first.setdefault(k, i)
    for col in SERIES_COLUMNS:
        if col == "series_id":
            continue
        vals = raw[col].to_numpy()
        for i, k in enumerate(keys):
            j = first.get(k)
            if j is not None and i != j and vals[i] != vals[j]:
                log.add(
                    int(log.rows[i]),
                    col,
                    f"{quote(vals[i])} differs from row "
                    f"{int(log.rows[j])} ({quote(vals[j])}) of series {quote(k)}; a series "
                    "has one value here",
                )
    # order and duplicates within each series
    index = np.array(
        [
            period_index(periods[i], units[i])
            if p_unit[i] == units[i] and units[i] in TIME_UNITS
            else None
            for i in range(n)
        ],
        dtype=object,
    )
    last: dict[str, tuple[int, int]] = {}
    spans: dict[str, list[int]] = {}
    for i, k in enumerate(keys):
        if not k or index[i] is None:
            continue
        spans.setdefault(k, []).append(int(index[i]))
        if k in last:
            j, prev = last[k]
            if index[i] == prev:
                log.add(
                    int(log.rows[i]),
                    "period",
                    f"period {quote(periods[i])} of series "
                    f"{quote(k)} appears twice (also row {int(log.rows[j])}); keep one point",
                )
                continue
            if index[i] < prev:
                log.add(
                    int(log.rows[i]),
                    "period",
                    f"period {quote(periods[i])} of series "
                    f"{quote(k)} comes after {quote(periods[j])} (row {int(log.rows[j])}); "
                    "sort the points by period",
                )
                continue
        last[k] = (i, int(index[i]))
    # change period inside the series
    events = text["event_id"].fillna("").to_numpy()
    change = text["change_at"].fillna("").to_numpy()
    for k, j in first.items():
        u = units[j]
        if u not in TIME_UNITS or k not in spans:
            continue
        col, at = "change_at", change[j]
        if not at:
            date = ctx.event_dates.get(events[j])
            if date is None:
                if events[j]:
                    log.add(
                        int(log.rows[j]),
                        "event_id",
                        f"no event {quote(events[j])} in the "
                        "evidence base; import the event first or correct the id",
                    )
                continue
            col, at = "event_id", period_of_date(date, u)
        idx = period_index(at, u)
        if idx is None:
            log.add(
                int(log.rows[j]),
                col,
                f"change period {quote(at)} is not a {u}; write it like the periods",
            )
            continue
        lo, hi = min(spans[k]), max(spans[k])
        if not lo < idx <= hi:
            log.add(
                int(log.rows[j]),
                col,
                f"the change ({at}) is outside series {quote(k)} "
                f"(its points run from {_label(lo, u, periods, index, keys, k)} to "
                f"{_label(hi, u, periods, index, keys, k)}); there must be points before and "
                "after it: correct change_at or the event date",
            )
    studies = text["study_id"].fillna("").to_numpy()
    if ctx.studies is not None:
        for j in first.values():
            if studies[j] and studies[j] not in ctx.studies:
                log.add(
                    int(log.rows[j]),
                    "study_id",
                    f"no study {quote(studies[j])} in the "
                    "evidence base; import the extraction sheet first or correct the id",
                )
    _check_comparisons(raw, first, keys, units, periods, spans, log, ctx)
    return _typed(raw, text, value, denom, demo, first)


def _label(idx, unit, periods, index, keys, k) -> str:
    for i in range(len(keys)):
        if keys[i] == k and index[i] == idx:
            return str(periods[i])
    return str(idx)


def _check_comparisons(raw, first, keys, units, periods, spans, log, ctx: Context) -> None:
    """A comparison needs an exposed series (same study, event, outcome) with its time unit and
    at least one common period."""
    group = {
        k: (raw["study_id"].iat[j], raw["event_id"].iat[j], raw["outcome"].iat[j])
        for k, j in first.items()
    }
    exposed: dict[tuple, tuple[str, set]] = {g: (u, set(p)) for g, (u, p) in ctx.exposed.items()}
    for k, j in first.items():
        if raw["role"].iat[j] == "exposed":
            exposed[group[k]] = (units[j], {periods[i] for i in range(len(keys)) if keys[i] == k})
    for k, j in first.items():
        if raw["role"].iat[j] != "comparison" or k not in spans:
            continue
        g = group[k]
        if g not in exposed:
            continue  # compared with an exposed series imported later
        unit, pts = exposed[g]
        if unit != units[j]:
            log.add(
                int(log.rows[j]),
                "time_unit",
                f"comparison series {quote(k)} is in "
                f"{units[j]}s but the exposed series of study {quote(g[0])} is in {unit}s; "
                "use one time unit",
            )
        elif not pts & {periods[i] for i in range(len(keys)) if keys[i] == k}:
            log.add(
                int(log.rows[j]),
                "period",
                f"comparison series {quote(k)} has no period in "
                f"common with the exposed series of study {quote(g[0])}; extract the same "
                "periods",
            )


def _typed(raw, text, value, denom, demo, first) -> SeriesFrames:
    rows = sorted(first.values())
    series = pd.DataFrame(
        {
            f: text[c].iloc[rows].to_numpy() if c != "demo" else demo.iloc[rows].to_numpy()
            for c, f in SERIES_COLUMNS.items()
        }
    )
    points = pd.DataFrame(
        {
            "series": text["series_id"].to_numpy(),
            "period": text["period"].to_numpy(),
            "value": value.to_numpy(),
            "denominator": denom.to_numpy(),
            "source": text["source"].to_numpy(),
        }
    )
    series = series.sort_values("key", kind="stable").reset_index(drop=True)
    return SeriesFrames(series=series, points=points.reset_index(drop=True))


def validate_series_sheet(sheet: RawSheet, ctx: Context) -> SeriesFrames:
    """Validate a series sheet completely; raise :class:`InputFileError` with every problem."""
    log = ProblemLog(sheet.file, sheet.rows)
    unknown = [c for c in sheet.frame.columns if c not in COLUMNS]
    if unknown:
        raise InputFileError(
            [
                Problem(
                    sheet.file,
                    1,
                    c,
                    f"unknown column; the series sheet has "
                    f"{', '.join(COLUMNS)} (docs/series-sheet.md)",
                )
                for c in unknown
            ]
        )
    missing = [c for c in REQUIRED if c not in sheet.frame.columns]
    if missing:
        raise InputFileError(
            [
                Problem(sheet.file, 1, c, "required column missing; see docs/series-sheet.md")
                for c in missing
            ]
        )
    if len(sheet) == 0:
        raise InputFileError([Problem(sheet.file, None, None, "the sheet has no points")])
    frames = validate_long(sheet.frame.copy(), log, ctx)
    if log.problems:
        raise InputFileError(sorted_problems(log.problems))
    return frames
