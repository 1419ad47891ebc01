"""Vectorised parsing of sheet cells: text, whole numbers, numbers, yes/no, codes, countries, dates.

Every parser takes a column of raw strings (blank cells are ``""``), returns the typed column
(missing values as ``NaN``/``<NA>``) and flags the cells it cannot read in a
:class:`~exposhift.io.problems.ProblemLog`, saying what to write instead.
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from functools import lru_cache

import numpy as np
import pandas as pd

from exposhift.io.problems import ProblemLog, quote

#: characters that make a spreadsheet run a text cell as a formula
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")

_NUMBER = r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
_WHOLE = r"[+-]?[0-9]+(?:\.0*)?"
_DATE = r"([0-9]{4})(?:-([0-9]{2})(?:-([0-9]{2}))?)?"
_QUOTED_FORMULA = r"^'+[=+\-@\t\r]"

TRUE_WORDS = ("yes", "true", "1")
FALSE_WORDS = ("no", "false", "0")
_BOOL = {**{w: True for w in TRUE_WORDS}, **{w: False for w in FALSE_WORDS}}


def blank_to_na(s: pd.Series) -> pd.Series:
    """``""`` -> missing, keeping the ``str`` dtype."""
    s = s.astype("str")
    return s.mask(s == "")


def clean_text(s: pd.Series, *, verbatim: bool = False) -> pd.Series:
    """Strip surrounding whitespace and undo export's formula neutralising (``'=x`` -> ``=x``).

    ``verbatim`` (JSON archives) keeps values exactly as written; blanks still become missing.
    """
    s = s.fillna("").astype("str")
    if not verbatim:  # sheet cells arrive stripped (exposhift.io.sheet)
        quoted = s.str.contains(_QUOTED_FORMULA, regex=True).to_numpy(dtype=bool)
        if quoted.any():
            s = s.where(~quoted, s.str.slice(1))
    return blank_to_na(s)


def parse_float(s: pd.Series, column: str, log: ProblemLog) -> pd.Series:
    """Decimal numbers (``1.5``, ``-0.2``, ``1e-3``); parsed exactly (round-trips ``repr``)."""
    s = s.fillna("").astype("str")
    given = (s != "").to_numpy()
    ok = s.str.fullmatch(_NUMBER).fillna(False).to_numpy(dtype=bool)
    out = np.full(len(s), np.nan)
    if ok.any():
        out[ok] = s[ok].astype("float64").to_numpy() + 0.0  # + 0.0: no negative zero
    bad = given & ~ok
    if bad.any():
        vals = s.to_numpy()
        comma = (
            pd.Series(vals, dtype="str")
            .str.fullmatch(r"[+-]?[0-9]*,[0-9]+")
            .fillna(False)
            .to_numpy(dtype=bool)
        )
        log.flag(
            bad & comma,
            column,
            lambda i: f"{quote(vals[i])} is not a number; use a decimal point, not a comma",
        )
        log.flag(
            bad & ~comma,
            column,
            lambda i: (
                f"{quote(vals[i])} is not a number; write a plain number such as 0.85 or 1.2e-3"
            ),
        )
    inf = ok & ~np.isfinite(out)
    if inf.any():
        log.flag(inf, column, "number too large; write a finite number")
        out[inf] = np.nan
    return pd.Series(out, index=s.index, dtype="float64")


_BOUND = r"^(?:[pP]\s*)?(?:<=|<|≤)\s*"


def parse_p_value(s: pd.Series, column: str, log: ProblemLog) -> tuple[pd.Series, pd.Series]:
    """A p value, or a bound written ``<0.001`` (also ``< 0.001``, ``p<0.001``, ``<=``, ``≤``).

    Returns (value, bound): the number, and True where it was written as a bound. A bound is
    analysed as the p value itself, which makes the SE recovered from it an upper bound
    (conservative); the flag carries that into every pool (provenance ``p_bound``).
    """
    s = s.fillna("").astype("str")
    bound = s.str.contains(_BOUND, regex=True).fillna(False).to_numpy(dtype=bool)
    stripped = s.str.replace(_BOUND, "", regex=True) if bound.any() else s
    return parse_float(stripped, column, log), pd.Series(bound, index=s.index, dtype=bool)


def parse_int(s: pd.Series, column: str, log: ProblemLog) -> pd.Series:
    """Whole numbers (``2005``; ``2005.0`` as spreadsheets sometimes write it)."""
    s = s.fillna("").astype("str")
    given = (s != "").to_numpy()
    shaped = s.str.fullmatch(_WHOLE).fillna(False).to_numpy(dtype=bool)
    digits = s.str.replace(r"\.0*$", "", regex=True)
    too_long = shaped & (digits.str.lstrip("+-").str.len().to_numpy() > 15)
    ok = shaped & ~too_long
    out = pd.Series(pd.NA, index=s.index, dtype="Int64")
    if ok.any():
        out[ok] = digits[ok].astype("int64").to_numpy()
    vals = s.to_numpy()
    log.flag(
        given & ~shaped,
        column,
        lambda i: f"{quote(vals[i])} is not a whole number; write e.g. 2005 or 12",
    )
    log.flag(too_long, column, "number too large; write a smaller whole number")
    return out


def parse_bool(s: pd.Series, column: str, log: ProblemLog) -> pd.Series:
    """yes/no, true/false, 1/0 (any case); blank is no."""
    low = s.fillna("").astype("str").str.lower()
    bad = ((low != "") & ~low.isin(list(_BOOL))).to_numpy()
    if bad.any():
        vals = s.to_numpy()
        log.flag(
            bad,
            column,
            lambda i: (
                f"{quote(vals[i])} is not yes or no; write yes, no, true, false, 1, "
                "0 or leave it blank (= no)"
            ),
        )
    return pd.Series(low.isin(TRUE_WORDS).to_numpy(), index=s.index, dtype=bool)


def _code_key(value: str) -> str:
    return re.sub(r"[ \t_]+", "-", value.strip().lower())


def _factorize(s: pd.Series) -> tuple[np.ndarray, pd.Series]:
    """(codes, distinct values): columns repeat a few values many times, so per-value work is
    done once per distinct value and spread back with ``take``."""
    codes, uniques = pd.factorize(s.fillna("").astype("str"), sort=False)
    return codes, pd.Series(np.asarray(uniques, dtype=object), dtype="str")


def _spread(values, codes: np.ndarray, index: pd.Index) -> pd.Series:
    """Per-distinct-value results back onto every row (an Arrow ``take``, no Python loop)."""
    small = pd.Series(np.asarray(values, dtype=object), dtype="str")
    out = small.take(codes)
    out.index = index
    return out


def parse_code(
    s: pd.Series,
    column: str,
    log: ProblemLog,
    accepted: Iterable[str],
    what: str,
    *,
    default: str | None = None,
) -> pd.Series:
    """A controlled-vocabulary code; case, spaces and underscores are forgiven.

    Unknown codes are flagged with the list of accepted ones.
    """
    accepted = list(accepted)
    lookup = {_code_key(c): c for c in accepted}
    codes, uniq = _factorize(s)
    mapped = np.array(
        [lookup.get(_code_key(v)) if v else (default or None) for v in uniq.tolist()], dtype=object
    )
    bad_u = np.array([bool(v) for v in uniq.tolist()], dtype=bool) & (mapped == None)  # noqa: E711
    bad = bad_u[codes]
    if bad.any():
        vals = uniq.to_numpy(dtype=object)[codes]
        log.flag(
            bad,
            column,
            lambda i: f"unknown {what} {quote(vals[i])}; accepted: {', '.join(accepted)}",
        )
    return _spread(mapped, codes, s.index)


@lru_cache(maxsize=1)
def _alpha3() -> frozenset[str]:
    import pycountry

    return frozenset(c.alpha_3 for c in pycountry.countries)


def _country_hint(value: str) -> str:
    import pycountry

    try:
        found = pycountry.countries.lookup(value)
    except LookupError:
        return "use an ISO 3166-1 alpha-3 code such as NLD, GBR or USA"
    return f"did you mean {found.alpha_3} ({found.name})?"


def parse_country(s: pd.Series, column: str, log: ProblemLog) -> pd.Series:
    """ISO 3166-1 alpha-3 codes (upper-cased)."""
    codes, uniq = _factorize(s)
    up = uniq.str.upper()
    known_u = up.isin(_alpha3()).to_numpy()
    bad_u = (uniq != "").to_numpy() & ~known_u
    bad = bad_u[codes]
    if bad.any():
        vals = uniq.to_numpy(dtype=object)[codes]
        hints = {v: _country_hint(v) for v in uniq[bad_u]}
        log.flag(
            bad,
            column,
            lambda i: f"unknown ISO 3166-1 alpha-3 country code {quote(vals[i])}; {hints[vals[i]]}",
        )
    return _spread(up.where(pd.Series(known_u), None).to_numpy(dtype=object), codes, s.index)


def parse_date(s: pd.Series, column: str, log: ProblemLog) -> tuple[pd.Series, pd.Series]:
    """``YYYY``, ``YYYY-MM`` or ``YYYY-MM-DD`` real calendar dates; returns (date, precision).

    Calendar rules: proleptic Gregorian (leap years: divisible by 4, except centuries not
    divisible by 400), as Python's :class:`datetime.date`.
    """
    codes, raw = _factorize(s)
    parts = raw.str.extract(f"^{_DATE}$")
    shaped = parts[0].notna().to_numpy()
    year = pd.to_numeric(parts[0], errors="coerce").to_numpy(dtype=float)
    month = pd.to_numeric(parts[1], errors="coerce").to_numpy(dtype=float)
    day = pd.to_numeric(parts[2], errors="coerce").to_numpy(dtype=float)
    has_m = ~np.isnan(month)
    has_d = ~np.isnan(day)
    y = np.nan_to_num(year).astype(np.int64)
    m = np.nan_to_num(month, nan=1).astype(np.int64)
    leap = ((y % 4 == 0) & (y % 100 != 0)) | (y % 400 == 0)
    mdays = np.array([31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31])[np.clip(m, 1, 12) - 1]
    mdays = mdays + ((m == 2) & leap)
    bad_month = has_m & ((month < 1) | (month > 12))
    bad_day = has_d & ~bad_month & ((day < 1) | (day > mdays))
    bad_year = shaped & (year < 1)
    given = (raw != "").to_numpy()
    impossible = shaped & (bad_month | bad_day | bad_year)
    ok = shaped & ~impossible
    texts = raw.to_numpy(dtype=object)
    log.flag(
        (given & ~shaped)[codes],
        column,
        lambda i: (
            f"{quote(texts[codes[i]])} is not a date; write YYYY, YYYY-MM or "
            "YYYY-MM-DD (e.g. 2004, 2004-07 or 2004-07-01)"
        ),
    )
    log.flag(
        impossible[codes],
        column,
        lambda i: f"{quote(texts[codes[i]])} is not a real calendar date; check the month and day",
    )
    date = np.where(ok, raw.to_numpy(dtype=object), None)
    precision = np.where(ok, np.where(has_d, "day", np.where(has_m, "month", "year")), None)
    return _spread(date, codes, s.index), _spread(precision.astype(object), codes, s.index)


def _checks_value(text: str) -> str | None:
    items: list[str] = []
    for part in text.split(";"):
        code = re.sub(r"-+", "-", re.sub(r"[ \t_]+", "-", part.strip().lower())).strip("-")
        if code and code not in items:
            items.append(code)
    return ";".join(items) or None


def normalise_checks(s: pd.Series) -> pd.Series:
    """``'Pre trends; placebo_date'`` -> ``'pre-trends;placebo-date'`` (order kept, no repeats)."""
    codes, uniq = _factorize(s)
    norm = np.array([_checks_value(v) for v in uniq.tolist()], dtype=object)
    return _spread(norm, codes, s.index)
