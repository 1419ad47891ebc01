"""The checks on sheet values, vectorised over all rows.

Each check sees the typed columns (sheet names) that the file has and flags the failing rows in
a :class:`~exposhift.io.problems.ProblemLog` with what to do. Thresholds:

- ratio measures (RR, OR, HR, IRR) are positive and a percent change is above -100 %: they are
  analysed on the log scale (``docs/methods.md``), where anything else is undefined;
- a confidence level lies strictly between 0 and 1; a standard error is positive; a p value is
  in (0, 1]; the point estimate lies within its confidence interval;
- every estimate carries some uncertainty (a CI, an SE or a p value), without which it cannot be
  weighted;
- the publication year lies in 1800-2100 and the assignment grade in 0-3 (common practice
  sanity bounds, not published rules).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from exposhift.io.followon import report_inconsistent
from exposhift.io.problems import ProblemLog, quote

RATIO_MEASURES = ("RR", "OR", "HR", "IRR")
YEAR_RANGE = (1800, 2100)
#: text columns that become parts of the estimate key, joined by '|'
KEY_TEXT = ("study_id", "event_id", "outcome", "subgroup", "time_window")


def _arr(t: pd.DataFrame, col: str) -> np.ndarray | None:
    if col not in t.columns:
        return None
    s = t[col]
    if s.dtype == "Int64":
        return s.astype("float64").to_numpy()
    return s.to_numpy()


def _num(x) -> str:
    f = float(x)
    return str(int(f)) if f.is_integer() and abs(f) < 1e15 else repr(f)


def check_key_text(t: pd.DataFrame, log: ProblemLog) -> None:
    for col in KEY_TEXT:
        if col in t.columns:
            bad = t[col].str.contains("|", regex=False).fillna(False).to_numpy(dtype=bool)
            log.flag(
                bad,
                col,
                "must not contain '|' (it separates the parts of an estimate "
                "key); use another character",
            )


def check_ranges(t: pd.DataFrame, log: ProblemLog) -> None:
    year = _arr(t, "year")
    if year is not None:
        lo, hi = YEAR_RANGE
        bad = ~np.isnan(year) & ((year < lo) | (year > hi))
        log.flag(
            bad,
            "year",
            lambda i: f"publication year {_num(year[i])} is outside {lo}-{hi}; check it",
        )
    grade = _arr(t, "assignment_grade")
    if grade is not None:
        bad = ~np.isnan(grade) & ((grade < 0) | (grade > 3))
        log.flag(
            bad,
            "assignment_grade",
            lambda i: (
                f"grade {_num(grade[i])} is not 0, 1, 2 "
                "or 3 (3: as-if random assignment is highly plausible, 0: implausible)"
            ),
        )
    for col in ("pre_points", "post_points"):
        v = _arr(t, col)
        if v is not None:
            log.flag(~np.isnan(v) & (v < 0), col, "a number of time points cannot be negative")
    size = _arr(t, "change_size")
    if size is not None:
        log.flag(
            ~np.isnan(size) & (size < 0),
            "change_size",
            "give the size of the change as a positive number; the direction goes in "
            "change_direction",
        )
    per_unit = _arr(t, "per_unit")
    if per_unit is not None:
        log.flag(
            ~np.isnan(per_unit) & (per_unit <= 0),
            "per_unit",
            "the exposure increment must be positive",
        )
    level = _arr(t, "ci_level")
    if level is not None:
        bad = ~np.isnan(level) & ((level <= 0) | (level >= 1))
        log.flag(
            bad,
            "ci_level",
            lambda i: (
                f"confidence level {_num(level[i])} is outside "
                "(0, 1); write 0.95 for a 95% interval"
            ),
        )
    se = _arr(t, "se")
    if se is not None:
        log.flag(
            ~np.isnan(se) & (se <= 0),
            "se",
            lambda i: (
                f"standard error {_num(se[i])} is not positive; give the SE on the "
                "analysis scale, or leave it blank and give a CI or p value"
            ),
        )
    p = _arr(t, "p_value")
    if p is not None:
        bad = ~np.isnan(p) & ((p <= 0) | (p > 1))
        log.flag(
            bad,
            "p_value",
            lambda i: (
                f"p value {_num(p[i])} is not above 0 and at most 1 (for 'p < 0.001' write <0.001)"
            ),
        )
    bound = _arr(t, "p_bound")
    if bound is not None:
        no_p = np.ones(len(t), bool) if p is None else np.isnan(p)
        log.flag(
            bound.astype(bool) & no_p,
            "p_bound",
            "p_bound is yes but p_value is blank; give the bound in p_value (e.g. <0.001)",
        )
    risk = _arr(t, "baseline_risk")
    if risk is not None:
        bad = ~np.isnan(risk) & ((risk <= 0) | (risk >= 1))
        log.flag(bad, "baseline_risk", "a baseline risk lies between 0 and 1 (e.g. 0.04)")


def check_estimates(t: pd.DataFrame, log: ProblemLog, unreadable: np.ndarray | None = None) -> None:
    """CI pairs, CI containing the estimate, log-scale measures, some uncertainty given.

    ``unreadable`` marks rows with an uncertainty cell that could not be read (already
    reported): they are not reported again as having no uncertainty.
    """
    n = len(t)
    nan = np.full(n, np.nan)
    est = _arr(t, "estimate")
    est = nan if est is None else est
    low = _arr(t, "ci_low")
    low = nan if low is None else low
    high = _arr(t, "ci_high")
    high = nan if high is None else high
    se = _arr(t, "se")
    p = _arr(t, "p_value")
    has_low, has_high = ~np.isnan(low), ~np.isnan(high)
    log.flag(
        has_low & ~has_high,
        "ci_high",
        "ci_high is blank but ci_low is given; give both limits or neither",
    )
    log.flag(
        has_high & ~has_low,
        "ci_low",
        "ci_low is blank but ci_high is given; give both limits or neither",
    )
    pair = has_low & has_high
    order_bad = pair & (low >= high)
    log.flag(
        order_bad,
        "ci_low",
        lambda i: f"ci_low {_num(low[i])} is not below ci_high {_num(high[i])}; check the limits",
    )
    has_est = ~np.isnan(est)
    outside = pair & ~order_bad & has_est & ((est < low) | (est > high))
    log.flag(
        outside,
        "estimate",
        lambda i: (
            f"the estimate {_num(est[i])} lies outside its "
            f"confidence interval {_num(low[i])} to {_num(high[i])}; check the numbers (and "
            "that all three are on the same scale)"
        ),
    )
    if "measure" in t.columns:
        measure = t["measure"].fillna("").to_numpy(dtype=object)
        ratio = np.isin(measure, RATIO_MEASURES)
        log.flag(
            ratio & has_est & (est <= 0),
            "estimate",
            lambda i: (
                f"{measure[i]} is a ratio and must be positive, not "
                f"{_num(est[i])}; check the measure and the value"
            ),
        )
        log.flag(
            ratio & has_low & (low <= 0),
            "ci_low",
            lambda i: (
                f"{measure[i]} is a ratio: its lower limit must be positive, not "
                f"{_num(low[i])}; check the measure and the value"
            ),
        )
        pct = measure == "pct_change"
        log.flag(
            pct & has_est & (est <= -100),
            "estimate",
            lambda i: f"a percent change must be above -100, not {_num(est[i])}",
        )
        log.flag(
            pct & has_low & (low <= -100),
            "ci_low",
            lambda i: f"the lower limit of a percent change must be above -100, not {_num(low[i])}",
        )
    has_se = np.zeros(n, bool) if se is None else ~np.isnan(se)
    has_p = np.zeros(n, bool) if p is None else ~np.isnan(p)
    none = ~(pair | has_se | has_p | has_low | has_high)
    if unreadable is not None:
        none &= ~unreadable
    log.flag(
        none,
        "ci_low",
        "no uncertainty given; fill ci_low and ci_high, or se, or "
        "p_value (an estimate without uncertainty cannot be weighted)",
    )
    if "estimate_kind" in t.columns:
        kind = t["estimate_kind"].fillna("").to_numpy(dtype=object)
        per_unit = _arr(t, "per_unit")
        missing = (kind == "per-unit") & (
            np.ones(n, bool) if per_unit is None else np.isnan(per_unit)
        )
        log.flag(
            missing,
            "per_unit",
            "a per-unit estimate needs per_unit: the exposure "
            "increment it refers to, in change_unit",
        )


def same_values(a: pd.Series, b: pd.Series) -> np.ndarray:
    """Elementwise equality where two missing values are equal."""
    a = a.reset_index(drop=True)
    b = b.reset_index(drop=True)
    na = a.isna().to_numpy() & b.isna().to_numpy()
    eq = a.eq(b)
    if eq.dtype != bool:
        eq = eq.fillna(False)
    return eq.to_numpy(dtype=bool) | na


def shown(value) -> str:
    if value is None or (isinstance(value, float) and np.isnan(value)) or value is pd.NA:
        return "blank"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    return quote(value)


def check_consistent(
    t: pd.DataFrame,
    key_col: str,
    fields: list[str],
    log: ProblemLog,
    what: str,
    unreadable: dict[str, np.ndarray] | None = None,
) -> np.ndarray:
    """Rows that repeat a study/event must repeat its fields exactly.

    Cells that could not be read (``unreadable``, already reported) are not compared. Returns
    the frame positions of the first row of each key (the row the record is taken from).
    """
    unreadable = unreadable or {}
    keys = t[key_col]
    pos = pd.Series(np.arange(len(t)), index=t.index)
    first = pos.groupby(keys, sort=False).transform("min")
    first = first.fillna(pos).astype(np.int64).to_numpy()
    has_key = keys.notna().to_numpy()
    repeat = has_key & (first != np.arange(len(t)))
    if repeat.any():
        key_vals = keys.to_numpy()
        diffs = {}
        for f in fields:
            if f not in t.columns:
                continue
            col = t[f]
            ref = col.iloc[first]
            bad = repeat & ~same_values(col, ref)
            if f in unreadable:
                bad &= ~unreadable[f] & ~unreadable[f][first]
            if bad.any():
                cv, rv = col.to_numpy(), ref.to_numpy()
                texts = {
                    int(i): f"{shown(cv[i])} here but {shown(rv[i])} in row {log.rows[first[i]]}"
                    for i in np.flatnonzero(bad)
                }
                diffs[f] = (bad, texts)
        report_inconsistent(log, what, key_col, key_vals, first, diffs)
    return np.flatnonzero(has_key & (first == np.arange(len(t))))
