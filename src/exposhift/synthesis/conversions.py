"""Conversions between reported forms of an estimate and the analysis scale.

Scalar or vectorised (numpy arrays in, arrays out; a scalar in gives a float out). Each names
its source. :func:`exposhift.synthesis.harmonise.harmonise` applies them to whole frames and
re-exports them, so ``from exposhift.synthesis.harmonise import se_from_ci`` works as well.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy import stats

from exposhift.errors import AnalysisError
from exposhift.vocab import MEASURES

RATIO_MEASURES = frozenset({"RR", "OR", "HR", "IRR"})
#: flag a CI when its halves differ by more than this fraction of its width (common practice)
ASYMMETRY_TOL = 0.10


def _out(x: np.ndarray) -> Any:
    """A float for scalar input, else the array."""
    return float(x) if np.ndim(x) == 0 else x


def _arr(x: Any) -> np.ndarray:
    return np.asarray(x, dtype=float)


# --------------------------------------------------------------------------------------------
# conversion functions (scalar or vectorised)


def z_for_level(level: Any = 0.95) -> Any:
    """Two-sided normal quantile z for a confidence level, e.g. 1.959964 for 0.95.

    Source: the normal-theory interval estimate ± z·SE (Altman & Bland 2011, BMJ 343:d2090).
    """
    level = _arr(level)
    if np.any(~((level > 0) & (level < 1))):
        raise AnalysisError("a confidence level must be a fraction between 0 and 1 (e.g. 0.95)")
    return _out(stats.norm.ppf((1.0 + level) / 2.0))


def to_analysis_scale(measure: Any, value: Any) -> Any:
    """Put reported values on the analysis scale.

    log for RR/OR/HR/IRR; log(1 + p/100) for pct_change (the log of the implied ratio); identity
    for RD/MD/SMD. Analysing ratio measures on the log scale: Deeks, Higgins & Altman, Cochrane
    Handbook ch. 10 (2019), sec. 10.3; Woodward 2019 (Heart 105:1701) worked example.
    ``measure`` is one code or an array of codes matching ``value``.
    """
    value = _arr(value)
    measure = np.broadcast_to(np.asarray(measure, dtype=object), value.shape)
    known = np.isin(measure, list(MEASURES))
    if not known.all():
        bad = sorted({str(m) for m in measure[~known]})
        raise AnalysisError(
            f"unknown measure(s) {', '.join(bad)}; use one of {', '.join(MEASURES)}"
        )
    is_pct = measure == "pct_change"
    is_log = np.isin(measure, list(RATIO_MEASURES))
    if np.any(is_log & ~(value > 0)) or np.any(is_pct & ~(value > -100)):
        raise AnalysisError(
            "ratio measures need positive values and percent changes values above -100"
        )
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(is_log, np.log(value), np.where(is_pct, np.log1p(value / 100.0), value))
    return _out(out)


def from_analysis_scale(scale: Any, value: Any) -> Any:
    """Back-transform analysis-scale values for display: exp for ``"log"``, identity otherwise.

    (The inverse of :func:`to_analysis_scale`; a pooled log ratio becomes a ratio.)
    """
    value = _arr(value)
    scale = np.broadcast_to(np.asarray(scale, dtype=object), value.shape)
    return _out(np.where(scale == "log", np.exp(value), value))


def se_from_ci(low: Any, high: Any, level: Any = 0.95, scale: str = "log") -> Any:
    """SE from a confidence interval of any stated level: (h(U) − h(L)) / (2·z).

    h = log for ``scale="log"`` (limits of a ratio), identity for ``scale="identity"`` (limits
    already on the analysis scale); z = Φ⁻¹((1 + level)/2). Sources: Altman & Bland 2011, BMJ
    343:d2090 ("How to obtain the P value from a confidence interval"); Woodward 2019, Heart
    105:1701, Table 4 (SE = (ln U − ln L)/3.92 for a 95 % CI).
    """
    low, high = _arr(low), _arr(high)
    if scale not in ("log", "identity"):
        raise AnalysisError(f"scale must be 'log' or 'identity', got {scale!r}")
    if scale == "log":
        if np.any(~(low > 0) | ~(high > 0)):
            raise AnalysisError("confidence limits of a ratio must be positive")
        low, high = np.log(low), np.log(high)
    if np.any(~(high > low)):
        raise AnalysisError("the upper confidence limit must be above the lower one")
    return _out((high - low) / (2.0 * _arr(z_for_level(level))))


def z_from_p(p: Any) -> Any:
    """z for a two-sided p value, exact normal quantile Φ⁻¹(1 − p/2).

    Altman & Bland 2011 (BMJ 343:d2090) step 1, computed exactly instead of with their
    approximation (see :func:`z_from_p_approx`).
    """
    p = _arr(p)
    if np.any(~((p > 0) & (p <= 1))):
        raise AnalysisError("a p value must be in (0, 1]")
    return _out(stats.norm.isf(p / 2.0))


def z_from_p_approx(p: Any) -> Any:
    """The published approximation z = −0.862 + √(0.743 − 2.404·ln p) (Altman & Bland 2011).

    Kept to check our exact :func:`z_from_p` against the published worked examples; the
    library itself uses the exact quantile.
    """
    p = _arr(p)
    if np.any(~((p > 0) & (p <= 1))):
        raise AnalysisError("a p value must be in (0, 1]")
    return _out(-0.862 + np.sqrt(0.743 - 2.404 * np.log(p)))


def se_from_p(estimate_on_scale: Any, p: Any) -> Any:
    """SE = |estimate| / z, z from the two-sided p value (Altman & Bland 2011, BMJ 343:d2090).

    The estimate must be on the analysis scale (log ratio for ratios) and not at the null.
    """
    y = _arr(estimate_on_scale)
    z = _arr(z_from_p(p))
    if np.any(y == 0) or np.any(z == 0):
        raise AnalysisError(
            "an SE cannot be derived from a p value when the estimate is at the null or p = 1"
        )
    return _out(np.abs(y) / z)


def wald_ci(y: Any, se: Any, level: Any = 0.95) -> tuple[Any, Any]:
    """Normal-theory interval y ± z·SE on the analysis scale (Altman & Bland 2011)."""
    y, se = _arr(y), _arr(se)
    z = _arr(z_for_level(level))
    return _out(y - z * se), _out(y + z * se)


def ci_asymmetry(estimate: Any, low: Any, high: Any) -> Any:
    """Asymmetry of an interval on the analysis scale: |(U − y) − (y − L)| / (U − L).

    0 for a symmetric interval, 1 when the estimate sits on a limit. Values are analysis-scale
    (apply :func:`to_analysis_scale` first). A Wald interval on the analysis scale is symmetric
    (Altman & Bland 2011), so asymmetry points to limits given on another scale or rounding.
    """
    y, low, high = _arr(estimate), _arr(low), _arr(high)
    with np.errstate(invalid="ignore", divide="ignore"):
        return _out(np.abs((high - y) - (y - low)) / (high - low))


def ci_asymmetric(estimate: Any, low: Any, high: Any, tol: float = ASYMMETRY_TOL) -> Any:
    """Flag: :func:`ci_asymmetry` above ``tol`` (default 0.10, common practice)."""
    a = _arr(ci_asymmetry(estimate, low, high))
    flag = a > tol
    return bool(flag) if np.ndim(flag) == 0 else flag


def or_to_rr(or_: Any, baseline_risk: Any) -> Any:
    """Risk ratio from an odds ratio and the risk in the unexposed group P₀.

    RR = OR / (1 − P₀ + P₀·OR) (Zhang & Yu 1998, JAMA 280:1690). Applied to the limits of a CI
    as the authors propose; it is approximate for adjusted ORs (McNutt et al. 2003, Am J
    Epidemiol 157:940).
    """
    or_, p0 = _arr(or_), _arr(baseline_risk)
    if np.any(~(or_ > 0)):
        raise AnalysisError("odds ratios must be positive")
    if np.any(~((p0 > 0) & (p0 < 1))):
        raise AnalysisError("a baseline risk must be a proportion strictly between 0 and 1")
    return _out(or_ / (1.0 - p0 + p0 * or_))


_CHINN = np.pi / np.sqrt(3.0)


def smd_to_log_or(smd: Any, var: Any = None) -> tuple[Any, Any]:
    """ln OR = SMD·π/√3 and Var(ln OR) = Var(SMD)·π²/3 (Chinn 2000, Stat Med 19:3127; also
    Borenstein et al. 2009, Introduction to Meta-Analysis, ch. 7). Returns (ln OR, variance or
    None)."""
    smd = _arr(smd)
    return _out(smd * _CHINN), (None if var is None else _out(_arr(var) * _CHINN**2))


def log_or_to_smd(log_or: Any, var: Any = None) -> tuple[Any, Any]:
    """SMD = ln OR·√3/π and Var(SMD) = Var(ln OR)·3/π² (Chinn 2000; Borenstein et al. 2009,
    ch. 7). Returns (SMD, variance or None)."""
    lo = _arr(log_or)
    return _out(lo / _CHINN), (None if var is None else _out(_arr(var) / _CHINN**2))


def rescale_factor(old: Any, new: Any) -> Any:
    """new/old: the factor that moves a log-linear (or linear) slope from one increment to
    another (see :func:`rescale_increment`)."""
    old, new = _arr(old), _arr(new)
    if np.any(~np.isfinite(old) | (old == 0)) or np.any(~np.isfinite(new)):
        raise AnalysisError("exposure increments must be finite and the old one non-zero")
    return _out(new / old)


def rescale_increment(beta: Any, old: Any, new: Any) -> Any:
    """Rescale an analysis-scale estimate per ``old`` units of exposure to per ``new`` units.

    β_new = β·(new/old); its SE scales by |new/old|. Assumes the effect is linear on the
    analysis scale (log-linear for ratios): e.g. RR 0.7 per 8 mm Hg → 0.7^(10/8) = 0.64 per
    10 mm Hg (Law, Morris & Wald 2009, BMJ 338:b1665, methods).
    """
    return _out(_arr(beta) * _arr(rescale_factor(old, new)))
