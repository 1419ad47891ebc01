"""Periods of an extracted series: parsing, ordering and seasons.

Accepted spellings (one unit per series):

========  ============  ==========================================
unit      example       integer index used by the models
========  ============  ==========================================
year      ``2015``      the year
quarter   ``2015-Q2``   4 * year + quarter - 1
month     ``2015-03``   12 * year + month - 1
week      ``2015-W07``  ISO week: Monday's ordinal day // 7
========  ============  ==========================================

Plain integers are accepted too (unit ``index``: no calendar, so no seasonality).
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from exposhift.errors import AnalysisError

TIME_UNITS: tuple[str, ...] = ("year", "quarter", "month", "week")
#: periods per year of each sub-annual unit (the seasonal cycle)
SEASON_LENGTH = {"quarter": 4, "month": 12, "week": 52}

_PATTERNS = {
    "year": re.compile(r"^(\d{4})$"),
    "quarter": re.compile(r"^(\d{4})-?Q([1-4])$", re.IGNORECASE),
    "month": re.compile(r"^(\d{4})-(\d{1,2})$"),
    "week": re.compile(r"^(\d{4})-?W(\d{1,2})$", re.IGNORECASE),
}


def period_unit(text: str) -> str | None:
    """The unit a period is written in, or None when it is not a period."""
    text = str(text).strip()
    for unit, pat in _PATTERNS.items():
        m = pat.match(text)
        if m and _index(unit, m) is not None:
            return unit
    return None


def _index(unit: str, m: re.Match) -> int | None:
    year = int(m.group(1))
    if unit == "year":
        return year
    part = int(m.group(2))
    if unit == "quarter":
        return 4 * year + part - 1
    if unit == "month":
        return 12 * year + part - 1 if 1 <= part <= 12 else None
    try:
        return dt.date.fromisocalendar(year, part, 1).toordinal() // 7
    except ValueError:
        return None


def period_index(text: str, unit: str) -> int | None:
    """Integer index of ``text`` in ``unit``, or None when it is not written in that unit."""
    m = _PATTERNS[unit].match(str(text).strip())
    return _index(unit, m) if m else None


def season_of(text: str, unit: str) -> int:
    """0-based position within the year (month 0-11, quarter 0-3, ISO week 0-51)."""
    m = _PATTERNS[unit].match(str(text).strip())
    if m is None or unit == "year":
        return 0
    return min(int(m.group(2)) - 1, SEASON_LENGTH[unit] - 1)


def period_of_date(date: str, unit: str) -> str:
    """The period (in ``unit``) that contains an event date ``YYYY``, ``YYYY-MM`` or
    ``YYYY-MM-DD`` (a year-only date maps to its first period)."""
    parts = [int(p) for p in date.split("-")]
    year, month, day = (parts + [1, 1])[:3]
    if unit == "year":
        return f"{year:04d}"
    if unit == "quarter":
        return f"{year:04d}-Q{(month - 1) // 3 + 1}"
    if unit == "month":
        return f"{year:04d}-{month:02d}"
    iso = dt.date(year, month, day).isocalendar()
    return f"{iso.year:04d}-W{iso.week:02d}"


@dataclass(frozen=True)
class Timeline:
    """Parsed periods of one series: ``index`` (int), ``season`` (0-based), ``unit``."""

    labels: tuple[str, ...]
    index: np.ndarray
    season: np.ndarray
    unit: str

    @property
    def season_length(self) -> int | None:
        return SEASON_LENGTH.get(self.unit)

    def position(self, change_at: str | int) -> int:
        """Position of the first period at or after ``change_at``; AnalysisError when
        ``change_at`` is outside the series."""
        if self.unit == "index":
            target = int(change_at)
        else:
            target = period_index(str(change_at), self.unit)
            if target is None:
                raise AnalysisError(
                    f"change period {change_at!r} is not a {self.unit} "
                    f"period like the series' ({self.labels[0]!r})"
                )
        if target <= self.index[0] or target > self.index[-1]:
            raise AnalysisError(
                f"change period {change_at!r} is outside the series ({self.labels[0]} to "
                f"{self.labels[-1]}): there must be points before it and from it on"
            )
        return int(np.searchsorted(self.index, target))


def timeline(periods: Sequence, unit: str | None = None) -> Timeline:
    """Parse ``periods`` (all one unit; in increasing order, no duplicates)."""
    labels = tuple(str(p).strip() for p in periods)
    if len(labels) and all(isinstance(p, (int, np.integer)) for p in periods):
        idx = np.asarray(periods, dtype=np.int64)
        unit = "index"
        season = np.zeros(len(idx), dtype=np.int64)
    else:
        units = {period_unit(p) for p in labels}
        if None in units:
            bad = next(p for p in labels if period_unit(p) is None)
            raise AnalysisError(
                f"period {bad!r} is not a year, quarter, month or week "
                "(2015, 2015-Q2, 2015-03, 2015-W07)"
            )
        if len(units) > 1:
            raise AnalysisError(
                f"periods mix time units ({', '.join(sorted(units))}); use one unit per series"
            )
        found = units.pop() if units else "year"
        if unit is not None and found != unit and labels:
            raise AnalysisError(f"periods are {found}s but the series says {unit}")
        unit = found
        idx = np.array([period_index(p, unit) for p in labels], dtype=np.int64)
        season = np.array([season_of(p, unit) for p in labels], dtype=np.int64)
    if len(idx) > 1 and np.any(np.diff(idx) <= 0):
        i = int(np.flatnonzero(np.diff(idx) <= 0)[0]) + 1
        what = "repeats" if idx[i] == idx[i - 1] else "comes before"
        raise AnalysisError(
            f"period {labels[i]!r} {what} the previous one ({labels[i - 1]!r}); "
            "points must be in increasing order with no duplicates"
        )
    return Timeline(labels, idx, season, unit)
