"""Single-series interrupted time series: segmented regression with a level and a slope change.

Model (Wagner, Soumerai, Zhang & Ross-Degnan 2002, J Clin Pharm Ther 27:299)::

    g(E[y_t]) = b0 + b1 time_t + b2 post_t + b3 since_t  [+ seasonal terms]  [+ log d_t]

``time`` counts periods from the first point, ``post`` is 1 from ``change_at`` (the first period
after the change) on, ``since`` is ``time - time(change_at)`` from then on and 0 before, so
``b2`` is the jump at the first post-change period and ``b3`` the change in slope per period.
``g`` is the identity (``model="gaussian"``, OLS) or the log with the log denominator as offset
(``"poisson"``, ``"negbin"``; Bernal, Cummins & Gasparrini 2017, Int J Epidemiol 46:348).
Seasonality for sub-annual units: ``seasonal="fourier"`` (two sine/cosine pairs of the yearly
cycle; Bhaskaran et al. 2013, Int J Epidemiol 42:1187) or ``"month"`` (one indicator per month
or quarter of the year). Standard errors are Newey-West with the lag and its rule stated (see
:mod:`exposhift.series.fit`); 95 % intervals use Student's t with n - k degrees of freedom.

Standard-form effect (``effect``): with ``horizon=None`` the level change ``b2``; with
``horizon=h`` the average effect over the first ``h`` periods after the change,
``b2 + b3 (h - 1) / 2`` (the mean of ``b2 + b3 k`` for ``k = 0..h-1``), on the analysis scale: a
mean difference for the gaussian model, a log rate ratio for counts (``exp`` gives the
geometric-mean rate ratio over the horizon). Its SE is ``sqrt(c' V c)``.

Minimum data: 3 points on each side (Wagner et al. 2002); fewer is refused, not estimated. With
seasonal terms fewer than 8 points on a side is noted (common practice).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from exposhift.errors import AnalysisError
from exposhift.series import fit as F
from exposhift.series.periods import Timeline, timeline

MIN_POINTS = 3
SEASONAL_MIN_POINTS = 8  # common practice
SEASONAL: tuple[str, ...] = ("fourier", "month")
Z95 = 1.959963984540054


class TooFewPoints(AnalysisError):
    """Fewer than the minimum points on one side of the change: no number is given."""


def seasonal_terms(tl: Timeline, seasonal: str | None) -> tuple[np.ndarray, list[str]]:
    """Columns of the seasonal terms (none when ``seasonal`` is None)."""
    n = len(tl.index)
    if seasonal is None:
        return np.zeros((n, 0)), []
    if seasonal not in SEASONAL:
        raise AnalysisError(
            f"unknown seasonal option {seasonal!r}; accepted: {', '.join(SEASONAL)} or none"
        )
    length = tl.season_length
    if length is None:
        raise AnalysisError(
            f"seasonal terms need a sub-annual unit (quarter, month, week), not {tl.unit}"
        )
    if seasonal == "month":
        if tl.unit == "week":
            raise AnalysisError(
                "one indicator per week of the year is too many; use "
                "seasonal='fourier' for weekly series"
            )
        cols = [(tl.season == s).astype(float) for s in range(1, length)]
        return np.column_stack(cols), [f"season_{s + 1}" for s in range(1, length)]
    cols, names = [], []
    for k in (1, 2):
        if 2 * k > length:
            break
        ang = 2 * np.pi * k * tl.season / length
        if 2 * k < length:
            cols.append(np.sin(ang))
            names.append(f"sin{k}")
        cols.append(np.cos(ang))
        names.append(f"cos{k}")
    return np.column_stack(cols), names


def design(tl: Timeline, cut: int, seasonal_cols: np.ndarray) -> np.ndarray:
    """``[1, time, post, since, seasonal...]`` for a change at position ``cut``."""
    time = (tl.index - tl.index[0]).astype(float)
    post = (np.arange(len(time)) >= cut).astype(float)
    since = np.where(post > 0, time - time[cut], 0.0)
    return np.column_stack([np.ones_like(time), time, post, since, seasonal_cols])


def effect_vector(k: int, horizon: int | None) -> np.ndarray:
    c = np.zeros(k)
    c[2] = 1.0
    if horizon is not None:
        c[3] = (horizon - 1) / 2.0
    return c


@dataclass(frozen=True)
class ITSResult:
    """A fitted single series. Effects are on the analysis scale (``effect_scale``)."""

    model: str
    seasonal: str | None
    horizon: int | None
    hac_lag: int | None  # None: model-based covariance (no autocorrelation detected)
    n_pre: int
    n_post: int
    level_change: float
    level_change_se: float
    slope_change: float
    slope_change_se: float
    pre_slope: float
    pre_slope_se: float
    effect: float
    effect_se: float
    effect_ci: tuple[float, float]
    effect_scale: str  # "log" (rate ratio) or "identity" (mean difference)
    measure: str  # "IRR" or "MD"
    estimate_kind: str  # "level" (horizon None) or "change" (average over the horizon)
    diagnostics: dict[str, Any]
    change_at: str
    periods: tuple[str, ...]
    observed: np.ndarray = field(repr=False)
    fitted: np.ndarray = field(repr=False)
    counterfactual: np.ndarray = field(repr=False)
    counterfactual_low: np.ndarray = field(repr=False)
    counterfactual_high: np.ndarray = field(repr=False)
    params: dict[str, float] = field(repr=False, default_factory=dict)
    notes: tuple[str, ...] = ()

    @property
    def ratio(self) -> tuple[float, float, float] | None:
        """``(rate ratio, low, high)`` for count models, else None."""
        if self.effect_scale != "log":
            return None
        return (
            float(np.exp(self.effect)),
            float(np.exp(self.effect_ci[0])),
            float(np.exp(self.effect_ci[1])),
        )

    def to_dict(self) -> dict[str, Any]:
        out = {
            k: getattr(self, k)
            for k in (
                "model",
                "seasonal",
                "horizon",
                "hac_lag",
                "n_pre",
                "n_post",
                "level_change",
                "level_change_se",
                "slope_change",
                "slope_change_se",
                "pre_slope",
                "pre_slope_se",
                "effect",
                "effect_se",
                "effect_scale",
                "measure",
                "estimate_kind",
                "change_at",
            )
        }
        out["effect_ci"] = list(self.effect_ci)
        r = self.ratio
        out["rate_ratio"] = None if r is None else {"estimate": r[0], "low": r[1], "high": r[2]}
        out["diagnostics"] = dict(self.diagnostics)
        out["params"] = dict(self.params)
        out["notes"] = list(self.notes)
        out["points"] = {
            "periods": list(self.periods),
            "observed": self.observed.tolist(),
            "fitted": self.fitted.tolist(),
            "counterfactual": self.counterfactual.tolist(),
            "counterfactual_low": self.counterfactual_low.tolist(),
            "counterfactual_high": self.counterfactual_high.tolist(),
        }
        return out


def _arrays(values, denominators, model: str):
    y = np.asarray(values, dtype=float)
    if np.any(~np.isfinite(y)):
        raise AnalysisError("every point needs a finite value")
    offset = None
    if denominators is not None:
        d = np.asarray(denominators, dtype=float)
        if d.shape != y.shape:
            raise AnalysisError("denominators must have one value per point")
        if np.any(~(d > 0)):
            raise AnalysisError("every denominator must be above 0")
        offset = np.log(d)
    if model in ("poisson", "negbin") and np.any(y < 0):
        raise AnalysisError("count models need counts of 0 or more")
    if model not in F.MODELS:
        raise AnalysisError(f"unknown model {model!r}; accepted: {', '.join(F.MODELS)}")
    return y, offset


def check_points(n_pre: int, n_post: int, seasonal: str | None) -> list[str]:
    if min(n_pre, n_post) < MIN_POINTS:
        raise TooFewPoints(
            f"{n_pre} point(s) before and {n_post} from the change: segmented regression needs "
            f"at least {MIN_POINTS} on each side (Wagner et al. 2002); no estimate"
        )
    if seasonal and min(n_pre, n_post) < SEASONAL_MIN_POINTS:
        return [
            f"fewer than {SEASONAL_MIN_POINTS} points on a side with seasonal terms "
            "(8 or more recommended, common practice)"
        ]
    return []


def fit_its(
    tl: Timeline,
    y,
    offset,
    cut: int,
    model: str,
    seas: np.ndarray,
    lag: int | None,
    horizon: int | None,
    start=None,
) -> tuple[F.Fit, F.Covariance, float, float]:
    """Fit at change position ``cut``; returns (fit, covariance, effect, effect SE).
    ``lag=None`` chooses it (:func:`exposhift.series.fit.covariance`)."""
    x = design(tl, cut, seas)
    if model == "gaussian" and offset is not None:
        fit = F.fit_ols(x, y / np.exp(offset))
    else:
        fit = F.fit_model(model, x, y, offset, start)
    cov = F.covariance(fit, lag, model != "gaussian")
    c = effect_vector(x.shape[1], horizon)
    return fit, cov, float(c @ fit.params), float(np.sqrt(max(cov.var(c), 0.0)))


def estimate_its(
    periods: Sequence,
    values: Sequence[float],
    change_at,
    *,
    denominators: Sequence[float] | None = None,
    model: str = "gaussian",
    seasonal: str | None = None,
    horizon: int | None = None,
    hac_lag: int | None = None,
) -> ITSResult:
    """Segmented regression of one series with a change at ``change_at`` (see module doc).

    With ``denominators`` the gaussian model fits the rate ``value / denominator``; count models
    use ``log(denominator)`` as offset.
    """
    tl = timeline(periods)
    y, offset = _arrays(values, denominators, model)
    if len(y) != len(tl.index):
        raise AnalysisError("values must have one entry per period")
    cut = tl.position(change_at)
    n_pre, n_post = cut, len(y) - cut
    notes = check_points(n_pre, n_post, seasonal)
    if horizon is not None and not 1 <= int(horizon) <= n_post:
        raise AnalysisError(
            f"horizon {horizon} is outside 1..{n_post} (the points after the "
            "change); the effect is never extrapolated"
        )
    seas, seas_names = seasonal_terms(tl, seasonal)
    fit, cov, eff, eff_se = fit_its(tl, y, offset, cut, model, seas, hac_lag, horizon)
    lag, rule = cov.lag, cov.rule
    df = len(y) - len(fit.params)
    crit = F.t_crit(df)
    se = np.sqrt(cov.diag())
    names = ["intercept", "time", "level_change", "slope_change", *seas_names]
    dw = F.durbin_watson(fit.pearson)
    q, q_p, q_lags = F.ljung_box(fit.pearson)
    diagnostics = {
        "durbin_watson": dw,
        "ljung_box_q": q,
        "ljung_box_p": q_p,
        "ljung_box_lags": q_lags,
        "hac_lag": lag,
        "se_method": rule,
        "df": df,
        "interval": f"Student t, {df} df",
        "dispersion": fit.scale if model != "gaussian" else None,
        "negbin_alpha": fit.alpha if model == "negbin" else None,
        "iterations": fit.iterations,
        "n": len(y),
    }
    # counterfactual: the pre-change segment continued (post = since = 0)
    x = design(tl, cut, seas)
    xcf = x.copy()
    xcf[:, 2:4] = 0.0
    eta = xcf @ fit.params
    sd = np.sqrt(cov.rows(xcf))
    lo, hi = eta - crit * sd, eta + crit * sd
    observed, fitted = y.copy(), fit.mu.copy()
    if model != "gaussian":
        eta, lo, hi = np.exp(eta), np.exp(lo), np.exp(hi)
        if offset is not None:  # show rates: value / denominator
            observed = y / np.exp(offset)
            fitted = fit.mu / np.exp(offset)
    elif offset is not None:
        observed = y / np.exp(offset)
    log = model != "gaussian"
    return ITSResult(
        model=model,
        seasonal=seasonal,
        horizon=None if horizon is None else int(horizon),
        hac_lag=lag,
        n_pre=n_pre,
        n_post=n_post,
        level_change=float(fit.params[2]),
        level_change_se=float(se[2]),
        slope_change=float(fit.params[3]),
        slope_change_se=float(se[3]),
        pre_slope=float(fit.params[1]),
        pre_slope_se=float(se[1]),
        effect=eff,
        effect_se=eff_se,
        effect_ci=(eff - crit * eff_se, eff + crit * eff_se),
        effect_scale="log" if log else "identity",
        measure="IRR" if log else "MD",
        estimate_kind="level" if horizon is None else "change",
        diagnostics=diagnostics,
        change_at=tl.labels[cut],
        periods=tl.labels,
        observed=observed,
        fitted=fitted,
        counterfactual=eta,
        counterfactual_low=lo,
        counterfactual_high=hi,
        params=dict(zip(names, map(float, fit.params), strict=True)),
        notes=tuple(notes),
    )
