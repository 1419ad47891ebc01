"""Harmonise reported estimates: one analysis-scale value ``y`` and variance ``v`` per row.

The conversions (each naming its source) live in :mod:`exposhift.synthesis.conversions` and
are re-exported here. :func:`harmonise` applies them to a whole analysis
frame at once (numpy arrays, no per-row Python loop on the numeric path).

Rules of :func:`harmonise` (documented here, shown per row in ``harmonise_note``):

* **Scale.** RR, OR, HR, IRR: natural log. Percent change p: log(1 + p/100), the log of the
  ratio it implies. RD, MD, SMD: identity.
* **Uncertainty precedence: CI, then SE, then p.** A CI with both limits is used first: it is
  what papers report most, on the reported scale, so it needs no assumption about which scale
  an SE refers to. Then an SE (read as on the analysis scale, as the extraction sheet says),
  then a two-sided p value. A row with a single CI limit, or a zero-width CI, falls back to its
  SE or p value with a note, and is an error when it has neither.
* **The scale of an entered SE** (column ``se``) is the analysis scale, per measure:

  ======================  ==============================================================
  RR, OR, HR, IRR         SE of the natural log of the ratio (the SE of a log-linear,
                          logistic or Cox coefficient), never the SE of the ratio itself
  pct_change              SE of log(1 + p/100), i.e. of the log-linear coefficient the
                          percent change was computed from; *not* in percent points. A
                          paper's SE in percent points: leave ``se`` blank and give the CI
                          p ± 1.96·SE, or enter SE/(100 + p) (delta method)
  RD                      SE of the risk difference, in the units of the estimate
  MD                      SE of the mean difference, in the units of the estimate
  SMD                     SE of the standardised mean difference
  ======================  ==============================================================

  An entered log-scale SE above 1.5 for a ratio or above 1 for a percent change is
  implausible (common practice): it is used as entered, flagged ``se_implausible`` and noted,
  and the import warns about it (:func:`exposhift.io.plausible.check_plausible`).
* **Provenance.** Each row carries the flags of :mod:`exposhift.synthesis.provenance` (OR
  converted, SE from a p value, p entered as a bound, SE from a z-based CI of a short series,
  SMD converted, asymmetric CI, per-unit rescaled, sign flipped, implausible SE) as boolean
  columns and as the ';'-joined ``provenance`` column; :func:`provenance_summary` and
  :func:`provenance_lines` count and word them for a pool.
* **Asymmetry.** A CI whose two halves differ on the analysis scale by more than
  ``asymmetry_tol`` (default 10 %, common practice) of its width is flagged: it often means the
  limits were reported on another scale, or rounded heavily. The SE still comes from the full
  width (Altman & Bland 2011).
* **Measure groups** (what may be pooled together): ``ratio`` = RR, HR, IRR and percent change
  (all log ratios; treating a hazard ratio or rate ratio like a risk ratio is common practice
  when the outcome is rare); ``odds_ratio`` = OR, kept apart because an OR departs from the RR
  when the outcome is common, *unless* a baseline risk is given and ``convert_or`` is on: then
  it is converted to an RR (Zhang & Yu 1998) and joins ``ratio``. ``risk_difference`` (RD),
  ``mean_difference`` (MD) and ``smd`` (SMD) stay apart; with ``smd_as_log_or`` an SMD becomes
  a log OR (Chinn 2000) and joins ``odds_ratio``.
* **Direction.** Every row is expressed as the effect of an exposure change in the direction
  ``align_to``. A change/level/slope estimate from a change in the other direction has its sign
  flipped on the analysis scale (a ratio becomes its reciprocal); this assumes the effect of a
  decrease mirrors that of an increase, and ``sign_flipped`` shows it. Per-unit estimates are
  read as per ``per_unit`` increase of exposure (a negative ``per_unit`` means a decrease); they
  are rescaled to the target increment with the sign of ``align_to``.
* **Per-unit increments.** Per-unit estimates are rescaled log-linearly (β·new/old on the
  analysis scale, variance ·(new/old)²) to one increment per ``change_unit``: ``per_unit_to``
  (a number, or a mapping unit → number), by default the increment most often reported for that
  unit (the smaller one on a tie). The ``increment`` column ("10 ug/m3") keeps different units
  apart when pooling.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from exposhift.errors import AnalysisError
from exposhift.synthesis.conversions import (
    _CHINN,
    ASYMMETRY_TOL,
    RATIO_MEASURES,
    ci_asymmetric,
    ci_asymmetry,
    from_analysis_scale,
    log_or_to_smd,
    or_to_rr,
    rescale_factor,
    rescale_increment,
    se_from_ci,
    se_from_p,
    smd_to_log_or,
    to_analysis_scale,
    wald_ci,
    z_for_level,
    z_from_p,
    z_from_p_approx,
)
from exposhift.synthesis.provenance import (
    PROVENANCE_CODES,
    PROVENANCE_WORDS,
    SMALL_SERIES_POINTS,
    provenance_lines,
    provenance_summary,
    provenance_text,
    se_implausible,
    series_t_over_z,
)
from exposhift.vocab import DIRECTIONS, ESTIMATE_KINDS, MEASURES

__all__ = [
    "ADDED_COLUMNS",
    "ASYMMETRY_TOL",
    "GROUP_SCALES",
    "MEASURE_GROUPS",
    "PROVENANCE_CODES",
    "PROVENANCE_WORDS",
    "RATIO_MEASURES",
    "provenance_lines",
    "provenance_summary",
    "UNCERTAINTY_PRECEDENCE",
    "ci_asymmetric",
    "ci_asymmetry",
    "from_analysis_scale",
    "harmonise",
    "log_or_to_smd",
    "or_to_rr",
    "rescale_factor",
    "rescale_increment",
    "se_from_ci",
    "se_from_p",
    "smd_to_log_or",
    "to_analysis_scale",
    "wald_ci",
    "z_for_level",
    "z_from_p",
    "z_from_p_approx",
]

LOG_MEASURES = frozenset(m for m, s in MEASURES.items() if s == "log")

#: measure -> pooling-compatible group (before any OR -> RR or SMD -> log OR conversion)
MEASURE_GROUPS: dict[str, str] = {
    "RR": "ratio",
    "HR": "ratio",
    "IRR": "ratio",
    "pct_change": "ratio",
    "OR": "odds_ratio",
    "RD": "risk_difference",
    "MD": "mean_difference",
    "SMD": "smd",
}
GROUP_SCALES: dict[str, str] = {
    "ratio": "log",
    "odds_ratio": "log",
    "risk_difference": "identity",
    "mean_difference": "identity",
    "smd": "identity",
}
UNCERTAINTY_PRECEDENCE: tuple[str, ...] = ("ci", "se", "p")
#: columns added by :func:`harmonise`
ADDED_COLUMNS: tuple[str, ...] = (
    "y",
    "v",
    "scale",
    "se_source",
    "ci_asymmetric",
    "sign_flipped",
    "measure_group",
    "increment",
    "harmonise_note",
    "provenance",
    *(c for c in PROVENANCE_CODES if c not in ("ci_asymmetric", "sign_flipped")),
)


# --------------------------------------------------------------------------------------------
# harmonise a frame


class _Problems:
    """Row problems found in one pass; raised together as one AnalysisError."""

    def __init__(self, frame: pd.DataFrame, limit: int = 20):
        self.index = frame.index
        self.uid = (
            frame["estimate_uid"].astype("string").fillna("").to_numpy()
            if "estimate_uid" in frame.columns
            else None
        )
        self.items: list[tuple[int, str]] = []
        self.count = 0
        self.limit = limit

    def add(self, mask: np.ndarray, message: Any) -> None:
        pos = np.flatnonzero(mask)
        self.count += pos.size
        for i in pos[: self.limit]:
            text = message(i) if callable(message) else message
            self.items.append((int(i), text))

    def where(self, i: int) -> str:
        name = f"row {self.index[i]}"
        if self.uid is not None and self.uid[i]:
            name += f" (estimate {self.uid[i]})"
        return name

    def raise_if_any(self) -> None:
        if not self.items:
            return
        self.items.sort()
        shown = "\n".join(f"  {self.where(i)}: {m}" for i, m in self.items[: self.limit])
        more = self.count - min(len(self.items), self.limit)
        tail = f"\n  ... and {more} more" if more > 0 else ""
        raise AnalysisError(
            f"{self.count} estimate problem{'s' if self.count != 1 else ''} stop harmonisation; "
            f"fix them in the extraction sheet:\n{shown}{tail}"
        )


def _num(frame: pd.DataFrame, col: str, probs: _Problems) -> np.ndarray:
    if col not in frame.columns:
        return np.full(len(frame), np.nan)
    raw = frame[col]
    if pd.api.types.is_numeric_dtype(raw.dtype) and not pd.api.types.is_bool_dtype(raw.dtype):
        num = raw.to_numpy(dtype=float, na_value=np.nan)
        _infinite(num, col, probs)
        return num
    num = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    _infinite(num, col, probs)
    cand = np.flatnonzero(np.isnan(num) & raw.notna().to_numpy())
    if cand.size:
        vals = raw.to_numpy(dtype=object)
        bad = np.zeros(len(raw), dtype=bool)
        bad[cand] = [str(vals[i]).strip() != "" for i in cand]
        probs.add(bad, lambda i: f"{col} {vals[i]!r} is not a number")
    return num


def _flag(frame: pd.DataFrame, col: str) -> np.ndarray:
    """A yes/no column as booleans (missing column or value = no)."""
    if col not in frame.columns:
        return np.zeros(len(frame), dtype=bool)
    return frame[col].fillna(False).astype(bool).to_numpy()


def _infinite(num: np.ndarray, col: str, probs: _Problems) -> None:
    if col != "estimate":  # the estimate has its own message
        probs.add(np.isinf(num), f"{col} is infinite; give a finite number")


def _text(frame: pd.DataFrame, col: str) -> np.ndarray:
    """Stripped text of a column ("" for missing), converting each distinct value once."""
    if col not in frame.columns:
        return np.full(len(frame), "", dtype=object)
    codes, uniques = pd.factorize(frame[col], use_na_sentinel=True)
    clean = np.array([str(u).strip() for u in uniques] + [""], dtype=object)
    return clean[codes]  # code -1 (missing) picks the trailing ""


def _fmt(values: np.ndarray) -> np.ndarray:
    """'%g' text of each value, formatting each distinct value once."""
    uniq, inv = np.unique(np.asarray(values, dtype=float), return_inverse=True)
    return np.array([f"{x:g}" for x in uniq], dtype=object)[inv.reshape(-1)]


def _join_notes(n: int, pieces: list[tuple[np.ndarray, Any]]) -> np.ndarray:
    """'; '-joined notes; each piece is (mask, text) with text a string or a function of the
    row positions returning one string per masked row."""
    out = np.full(n, "", dtype=object)
    for mask, text in pieces:
        pos = np.flatnonzero(mask)
        if not pos.size:
            continue
        t = text(pos) if callable(text) else text
        cur = out[pos]
        out[pos] = np.where(cur == "", t, cur + "; " + t)
    return out


def _target_increments(
    unit: np.ndarray,
    per_unit: np.ndarray,
    is_pu: np.ndarray,
    per_unit_to: float | Mapping[str, float] | None,
    probs: _Problems,
) -> np.ndarray:
    """Absolute target increment for each per-unit row (nan elsewhere)."""
    target = np.full(unit.size, np.nan)
    ok = is_pu & np.isfinite(per_unit) & (per_unit != 0)
    if not ok.any():
        return target
    if per_unit_to is None:
        df = pd.DataFrame({"unit": unit[ok], "inc": np.abs(per_unit[ok])})
        counts = df.groupby(["unit", "inc"]).size().reset_index(name="n")
        counts = counts.sort_values(["unit", "n", "inc"], ascending=[True, False, True])
        modal = counts.drop_duplicates("unit").set_index("unit")["inc"]
        target[ok] = pd.Series(unit[ok]).map(modal).to_numpy(dtype=float)
    elif isinstance(per_unit_to, Mapping):
        mapped = pd.Series(unit[ok]).map(lambda u: per_unit_to.get(u, np.nan))
        target[ok] = mapped.to_numpy(dtype=float)
        missing = ok & ~np.isfinite(target)
        probs.add(
            missing,
            lambda i: f"no target increment for change_unit '{unit[i]}' in per_unit_to; add it",
        )
    else:
        target[ok] = float(per_unit_to)
    bad = ok & np.isfinite(target) & ~(target > 0)
    probs.add(bad, "the target increment must be positive")
    return target


def harmonise(
    frame: pd.DataFrame,
    align_to: str = "increase",
    *,
    convert_or: bool = True,
    smd_as_log_or: bool = False,
    per_unit_to: float | Mapping[str, float] | None = None,
    asymmetry_tol: float = ASYMMETRY_TOL,
) -> pd.DataFrame:
    """Add analysis-scale columns to an analysis frame (extraction-sheet column names).

    Reads ``measure, estimate, ci_low, ci_high, ci_level (blank = 0.95), se, p_value,
    baseline_risk, estimate_kind (blank = change), per_unit, change_unit, change_direction``
    and adds :data:`ADDED_COLUMNS`: ``y, v`` (value and variance on the analysis scale),
    ``scale`` ("log"/"identity"), ``se_source`` ("ci", "se", "p"), ``ci_asymmetric``,
    ``sign_flipped``, ``measure_group``, ``increment`` (per-unit rows: "10 ug/m3"; else ""),
    ``harmonise_note``, ``provenance`` (';'-joined codes of
    :data:`~exposhift.synthesis.provenance.PROVENANCE_CODES`) and one boolean column per code;
    blank ``estimate_kind`` is filled with "change". Optional inputs read when present:
    ``p_bound`` (yes when the p value was reported as "p < x"), ``pre_points`` and
    ``post_points`` (time points, for ``se_from_ci_z``). The rules are in the module docstring.
    Every row that cannot be harmonised is reported in one :class:`AnalysisError` naming the
    row (index, and estimate_uid when present).
    """
    if align_to not in DIRECTIONS:
        raise AnalysisError(f"align_to must be one of {', '.join(DIRECTIONS)}, got {align_to!r}")
    if not 0 < asymmetry_tol < 1:
        raise AnalysisError("asymmetry_tol must be a fraction between 0 and 1")
    n = len(frame)
    probs = _Problems(frame)
    if "measure" not in frame.columns or "estimate" not in frame.columns:
        raise AnalysisError("the frame needs at least the columns 'measure' and 'estimate'")

    measure = _text(frame, "measure")
    est = _num(frame, "estimate", probs)
    low = _num(frame, "ci_low", probs)
    high = _num(frame, "ci_high", probs)
    level = _num(frame, "ci_level", probs)
    se_in = _num(frame, "se", probs)
    p_in = _num(frame, "p_value", probs)
    p0 = _num(frame, "baseline_risk", probs)
    per_unit = _num(frame, "per_unit", probs)
    kind = _text(frame, "estimate_kind")
    kind = np.where(kind == "", "change", kind).astype(object)
    direction = _text(frame, "change_direction")
    unit = _text(frame, "change_unit")
    p_bound = _flag(frame, "p_bound")
    points = _num(frame, "pre_points", probs) + _num(frame, "post_points", probs)

    # ---- checks that do not depend on the uncertainty source
    known = np.isin(measure, list(MEASURES))
    probs.add(~known, lambda i: f"unknown measure '{measure[i]}'; use one of {', '.join(MEASURES)}")
    probs.add(~np.isfinite(est) & ~np.isnan(est), "estimate is not finite")
    probs.add(np.isnan(est), "estimate is missing")
    is_ratio = np.isin(measure, list(RATIO_MEASURES))
    is_pct = measure == "pct_change"
    probs.add(
        is_ratio & np.isfinite(est) & ~(est > 0),
        lambda i: f"{measure[i]} needs a positive estimate, got {est[i]:g}",
    )
    probs.add(
        is_pct & np.isfinite(est) & ~(est > -100),
        lambda i: f"a percent change must be above -100, got {est[i]:g}",
    )
    bad_kind = ~np.isin(kind, list(ESTIMATE_KINDS))
    probs.add(
        bad_kind,
        lambda i: f"unknown estimate_kind '{kind[i]}'; use one of {', '.join(ESTIMATE_KINDS)}",
    )
    is_pu = kind == "per-unit"
    probs.add(
        is_pu & ~(np.isfinite(per_unit) & (per_unit != 0)),
        "a per-unit estimate needs per_unit, the exposure increment it refers to",
    )
    probs.add(
        ~is_pu & ~np.isin(direction, list(DIRECTIONS)),
        lambda i: f"change_direction must be {' or '.join(DIRECTIONS)}, got '{direction[i]}'",
    )
    level = np.where(np.isnan(level), 0.95, level)
    probs.add(
        (level >= 1) & (level < 100),
        lambda i: (
            f"ci_level {level[i]:g} looks like a percentage; give it as a fraction "
            f"({level[i] / 100:g})"
        ),
    )
    probs.add(
        ~((level > 0) & (level < 1)) & ~((level >= 1) & (level < 100)),
        lambda i: f"ci_level {level[i]:g} must be a fraction between 0 and 1",
    )
    probs.add(np.isfinite(se_in) & ~(se_in > 0), lambda i: f"se must be positive, got {se_in[i]:g}")
    probs.add(
        np.isfinite(p_in) & ~((p_in > 0) & (p_in < 1)),
        lambda i: f"p_value must be strictly between 0 and 1, got {p_in[i]:g}",
    )
    is_or = measure == "OR"
    has_p0 = np.isfinite(p0)
    probs.add(
        has_p0 & ~((p0 > 0) & (p0 < 1)),
        lambda i: f"baseline_risk must be a proportion between 0 and 1, got {p0[i]:g}",
    )
    level = np.where((level > 0) & (level < 1), level, 0.95)

    # ---- which uncertainty source each row uses (CI, then SE, then p)
    valid_est = known & np.isfinite(est) & ~(is_ratio & ~(est > 0)) & ~(is_pct & ~(est > -100))
    both = np.isfinite(low) & np.isfinite(high)
    one = np.isfinite(low) ^ np.isfinite(high)
    lim_ok = (
        both & ~(is_ratio & ~((low > 0) & (high > 0))) & ~(is_pct & ~((low > -100) & (high > -100)))
    )
    probs.add(
        both & ~lim_ok,
        "confidence limits out of range for the measure (ratios need "
        "positive limits, percent changes limits above -100)",
    )
    probs.add(lim_ok & (low > high), lambda i: f"ci_low {low[i]:g} is above ci_high {high[i]:g}")
    outside = lim_ok & (low <= high) & np.isfinite(est) & ((est < low) | (est > high))
    probs.add(
        outside,
        lambda i: (
            f"estimate {est[i]:g} lies outside its interval "
            f"({low[i]:g}, {high[i]:g}); check the extraction"
        ),
    )
    use_ci = lim_ok & (low < high) & ~outside
    se_ok = np.isfinite(se_in) & (se_in > 0)
    p_ok = np.isfinite(p_in) & (p_in > 0) & (p_in < 1)
    use_se = ~use_ci & se_ok
    use_p = ~use_ci & ~se_ok & p_ok
    none = ~(use_ci | use_se | use_p)
    zero_width = lim_ok & (low == high)
    probs.add(none & one, "only one confidence limit given; give both, or an SE or a p value")
    probs.add(
        none & zero_width & ~one,
        "the confidence interval has zero width; give the "
        "limits with more decimals, or an SE or a p value",
    )
    probs.add(
        none & ~one & ~zero_width & ~both, "no confidence interval, SE or p value; give one of them"
    )

    # ---- OR -> RR (Zhang & Yu) on the reported scale, before taking logs
    conv_or = is_or & has_p0 & (p0 > 0) & (p0 < 1) & convert_or & valid_est
    meas_eff = measure.copy()
    est_eff, low_eff, high_eff = est.copy(), low.copy(), high.copy()
    level_eff = level.copy()
    if conv_or.any():
        lo_or = np.log(np.where(conv_or, est, 1.0))
        se_or = np.where(conv_or & use_se, se_in, np.nan)
        p_sel = conv_or & use_p
        if p_sel.any():
            se_or[p_sel] = np.abs(lo_or[p_sel]) / stats.norm.isf(p_in[p_sel] / 2.0)
        need_ci = conv_or & (use_se | (use_p & (lo_or != 0)))
        z95 = stats.norm.ppf(0.975)
        low_eff = np.where(need_ci, np.exp(lo_or - z95 * se_or), low_eff)
        high_eff = np.where(need_ci, np.exp(lo_or + z95 * se_or), high_eff)
        level_eff = np.where(need_ci, 0.95, level_eff)
        ok = conv_or & (use_ci | need_ci)
        r = lambda x: np.where(ok, x / (1.0 - p0 + p0 * x), x)  # noqa: E731  Zhang & Yu 1998
        with np.errstate(invalid="ignore", divide="ignore"):
            est_eff = np.where(ok, r(est), est_eff)
            low_eff, high_eff = r(low_eff), r(high_eff)
        meas_eff = np.where(ok, "RR", meas_eff).astype(object)
        conv_or = ok

    probs.raise_if_any()

    # ---- analysis scale (everything valid from here on)
    log_m = np.isin(meas_eff, list(RATIO_MEASURES))
    pct_m = meas_eff == "pct_change"

    def h(x: np.ndarray) -> np.ndarray:
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(log_m, np.log(x), np.where(pct_m, np.log1p(x / 100.0), x))

    y = h(est_eff)
    hl, hh = h(low_eff), h(high_eff)
    with np.errstate(invalid="ignore", divide="ignore"):
        se_ci = (hh - hl) / (2.0 * stats.norm.ppf((1.0 + level_eff) / 2.0))
        se_p = np.abs(y) / stats.norm.isf(np.where(use_p, p_in, 0.5) / 2.0)
    zero_p = use_p & (y == 0)
    probs.add(
        zero_p,
        "an SE cannot come from a p value when the estimate is at the null (give a CI or an SE)",
    )
    probs.raise_if_any()
    from_ci = use_ci | conv_or  # converted ORs take the SE from their converted limits
    se = np.where(from_ci, se_ci, np.where(use_se, se_in, se_p))
    with np.errstate(over="ignore", under="ignore"):  # caught below, with a message
        v = se * se
    asym = use_ci & ~conv_or & (np.abs((hh - y) - (y - hl)) > asymmetry_tol * (hh - hl))

    group = pd.Series(measure).map(MEASURE_GROUPS).to_numpy(dtype=object)
    group = np.where(conv_or, "ratio", group).astype(object)
    smd_conv = (measure == "SMD") & bool(smd_as_log_or)
    with np.errstate(over="ignore"):
        y = np.where(smd_conv, y * _CHINN, y)
        v = np.where(smd_conv, v * _CHINN**2, v)
    group = np.where(smd_conv, "odds_ratio", group).astype(object)

    # ---- per-unit rescaling and direction alignment
    sign = 1.0 if align_to == "increase" else -1.0
    target = _target_increments(unit, per_unit, is_pu, per_unit_to, probs)
    probs.raise_if_any()
    factor = np.where(is_pu, sign * target / np.where(is_pu, per_unit, 1.0), 1.0)
    flip_dir = ~is_pu & (direction != align_to)
    factor = np.where(flip_dir, -1.0, factor)
    with np.errstate(over="ignore", under="ignore", invalid="ignore"):  # caught below
        y = y * factor
        v = v * factor * factor
    flipped = factor < 0
    rescaled = is_pu & (np.abs(factor) != 1.0)
    increment = np.full(n, "", dtype=object)
    if is_pu.any():
        inc = _fmt(target[is_pu])
        u = unit[is_pu]
        increment[is_pu] = np.where(u == "", inc, inc + " " + u)

    # ---- provenance flags (exposhift.synthesis.provenance)
    from_p = use_p
    bound = use_p & p_bound
    small = use_ci & np.isfinite(points) & (points < SMALL_SERIES_POINTS)
    t_over_z = series_t_over_z(points, level)
    wild_se = use_se & se_implausible(measure, se_in)
    flags = {
        "or_converted": conv_or,
        "se_from_p": from_p,
        "p_bound": bound,
        "se_from_ci_z": small,
        "smd_converted": smd_conv,
        "ci_asymmetric": asym,
        "per_unit_rescaled": rescaled,
        "sign_flipped": flipped,
        "se_implausible": wild_se,
    }

    # ---- notes
    def pct(pos: np.ndarray) -> np.ndarray:
        return _fmt(np.round(level_eff[pos] * 100, 6))

    def small_note(pos: np.ndarray) -> np.ndarray:
        r = t_over_z[pos]
        txt = np.where(np.isfinite(r), _fmt(np.round((r - 1.0) * 100.0, 0)) + "%", "much")
        return (
            "only " + _fmt(points[pos]) + " time points: if the CI used t, the SE is "
            "overstated by " + txt
        )

    notes = _join_notes(
        n,
        [
            (use_ci & ~conv_or, lambda i: "SE from " + pct(i) + "% CI"),
            (use_se & ~conv_or, "SE as reported"),
            (
                use_p & ~conv_or,
                lambda i: "SE from p = " + _fmt(p_in[i]) + " (exact normal quantile)",
            ),
            (one & ~use_ci, "only one CI limit given"),
            (zero_width & ~use_ci, "zero-width CI ignored"),
            (is_pct, "percent change p taken as log(1 + p/100)"),
            (
                conv_or,
                lambda i: (
                    "OR converted to RR with baseline risk "
                    + _fmt(p0[i])
                    + " (Zhang & Yu 1998); SE from the converted "
                    + pct(i)
                    + "% limits; biased for an "
                    "adjusted OR (McNutt et al. 2003)"
                ),
            ),
            (bound, "p given as a bound: the SE is an upper bound (conservative)"),
            (small, small_note),
            (
                wild_se,
                lambda i: (
                    "SE " + _fmt(se_in[i]) + " is implausibly large on the log scale: "
                    "check that it is not in percent points or on the ratio scale"
                ),
            ),
            (smd_conv, "SMD converted to log OR (Chinn 2000)"),
            (asym, "CI asymmetric on the analysis scale: check the scale of the reported limits"),
            (
                rescaled,
                lambda i: (
                    "rescaled log-linearly from per "
                    + _fmt(np.abs(per_unit[i]))
                    + " to per "
                    + increment[i]
                ),
            ),
            (
                flip_dir,
                lambda i: (
                    "sign flipped: effect of a "
                    + direction[i]
                    + " expressed as that of an "
                    + align_to
                    + " (assumes a mirrored effect)"
                ),
            ),
            (is_pu & flipped, "per-unit estimate re-expressed per " + align_to),
        ],
    )

    # ---- what double precision cannot hold (an SE of 1e-200 squares to 0, 1e200 to inf)
    probs.add(
        ~np.isfinite(y),
        "the estimate on the analysis scale is not finite (check the "
        "estimate, per_unit and the target increment)",
    )
    probs.add(
        np.isfinite(y) & ~(np.isfinite(v) & (v > 0)),
        lambda i: (
            f"the variance on the analysis scale ({v[i]:g}) is zero or infinite in "
            "double precision: check the scale of the SE, CI or p value"
        ),
    )
    probs.raise_if_any()

    out = frame.copy()
    out["estimate_kind"] = kind
    out["y"] = y
    out["v"] = v
    out["scale"] = pd.Series(group).map(GROUP_SCALES).to_numpy(dtype=object)
    out["se_source"] = np.where(use_ci, "ci", np.where(use_se, "se", "p")).astype(object)
    out["ci_asymmetric"] = asym
    out["sign_flipped"] = flipped
    out["measure_group"] = group
    out["increment"] = increment
    out["harmonise_note"] = notes
    out["provenance"] = provenance_text(flags, n)
    for code in PROVENANCE_CODES:
        out[code] = np.asarray(flags[code], dtype=bool)
    return out
