"""Around the pooled number: τ² interval, influence, cumulative, subgroups, small-study effects.

All functions take analysis-scale estimates ``y`` and variances ``v`` (see
:mod:`exposhift.synthesis.harmonise`) and return dataclasses or DataFrames. Leave-one-out and
cumulative analyses pool all their subsets in one vectorised call
(:func:`exposhift.synthesis.grouped.pool_segments`). Meta-regression lives in
:mod:`exposhift.synthesis.metareg` and is re-exported here.

Subgroup differences and small-study tests are observational comparisons between studies:
they suggest, they do not establish (Cochrane Handbook ch. 10.11; Sterne et al. 2011).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from scipy import optimize, stats

from exposhift.errors import AnalysisError
from exposhift.synthesis.grouped import pool_groups, pool_segments
from exposhift.synthesis.metareg import MetaRegressionResult, meta_regression
from exposhift.synthesis.pooling import (
    PM_RTOL,
    SCALAR_FIELDS,
    check_inputs,
    check_options,
    generalised_q,
    pool,
    s2_typical,
    standardise,
)

__all__ = [
    "EggerResult",
    "FunnelData",
    "MetaRegressionResult",
    "SubgroupResult",
    "Tau2Interval",
    "cumulative",
    "egger_test",
    "funnel_data",
    "leave_one_out",
    "meta_regression",
    "subgroup_test",
    "tau2_ci_qprofile",
]

EGGER_MIN_K = 10


# --------------------------------------------------------------------------------------------
# Q-profile interval for τ²


@dataclass(frozen=True)
class Tau2Interval:
    """Q-profile confidence interval for τ², with the matching τ and τ²-based I² bounds."""

    k: int
    alpha: float
    tau2_lower: float
    tau2_upper: float
    tau_lower: float
    tau_upper: float
    i2_lower: float
    i2_upper: float
    q_target_lower: float  # χ²(k−1) quantile that Q(τ²_lower) equals (upper α/2 quantile)
    q_target_upper: float  # χ²(k−1) quantile that Q(τ²_upper) equals (lower α/2 quantile)
    note: str


def _solve_gen_q(y: np.ndarray, v: np.ndarray, target: float) -> float:
    """τ² ≥ 0 with generalised Q(τ²) = target (0 if Q(0) ≤ target). Q is decreasing in τ²
    (Viechtbauer 2007); upper bracket SS/target since Q(τ²) ≤ SS/(τ² + v_min)."""
    if generalised_q(y, v, 0.0) <= target:
        return 0.0
    hi = float(np.sum((y - y.mean()) ** 2) / target)
    for _ in range(200):
        if generalised_q(y, v, hi) < target:
            break
        hi *= 2.0
    return float(
        optimize.brentq(
            lambda t: generalised_q(y, v, t) - target,
            0.0,
            hi,
            xtol=1e-300,
            rtol=PM_RTOL,
            maxiter=500,
        )
    )


def tau2_ci_qprofile(y: Any, v: Any, alpha: float = 0.05) -> Tau2Interval:
    """Q-profile interval for τ² (Viechtbauer 2007, Stat Med 26:37).

    The bounds solve Q(τ²) = χ²_{k−1, 1−α/2} (lower) and Q(τ²) = χ²_{k−1, α/2} (upper), Q the
    generalised Q statistic, each set to 0 when Q(0) is already below its target. The
    interval is exact under the random-effects model with known within-study variances.
    """
    y, v = check_inputs(y, v)
    check_options("dl", "wald", alpha)
    k = y.size
    nan = float("nan")
    if k < 2:
        return Tau2Interval(
            k,
            alpha,
            nan,
            nan,
            nan,
            nan,
            nan,
            nan,
            nan,
            nan,
            "a tau2 interval needs at least 2 estimates",
        )
    q_lo_target = float(stats.chi2.isf(alpha / 2, k - 1))
    q_hi_target = float(stats.chi2.ppf(alpha / 2, k - 1))
    ys, vs, scale = standardise(y, v)  # Q is shift invariant and scale equivariant in τ²
    lower = scale * _solve_gen_q(ys, vs, q_lo_target)
    upper = scale * _solve_gen_q(ys, vs, q_hi_target)
    s2 = s2_typical(1.0 / v)
    note = ""
    if upper == 0.0:
        note = (
            "the estimates agree more than their variances predict: the interval is "
            "the single point 0"
        )
    elif lower == 0.0:
        note = "lower bound truncated at 0"
    return Tau2Interval(
        k=k,
        alpha=float(alpha),
        tau2_lower=lower,
        tau2_upper=upper,
        tau_lower=float(np.sqrt(lower)),
        tau_upper=float(np.sqrt(upper)),
        i2_lower=lower / (lower + s2),
        i2_upper=upper / (upper + s2),
        q_target_lower=q_lo_target,
        q_target_upper=q_hi_target,
        note=note,
    )


# --------------------------------------------------------------------------------------------
# leave-one-out and cumulative


def _labels(labels: Any, k: int) -> np.ndarray:
    if labels is None:
        return np.array([str(i) for i in range(k)], dtype=object)
    out = np.asarray(list(labels), dtype=object)
    if out.size != k:
        raise AnalysisError(f"{out.size} labels for {k} estimates")
    return out


def leave_one_out(
    y: Any,
    v: Any,
    labels: Any = None,
    method: str = "reml",
    ci: str = "hksj",
    alpha: float = 0.05,
    hksj_floor: bool = True,
) -> pd.DataFrame:
    """Pool the estimates k times, each time without one of them.

    One row per omitted estimate: ``omitted`` (its label), ``shift`` (pooled estimate minus
    the estimate with all k) and the :class:`PoolResult` scalar fields. Influence analysis as
    in the Cochrane Handbook (ch. 10.14) and Viechtbauer & Cheung (2010, Res Synth Methods 1:112).
    """
    check_options(method, ci, alpha)
    y, v = check_inputs(y, v)
    k = y.size
    if k < 2:
        raise AnalysisError("leave-one-out needs at least 2 estimates")
    lab = _labels(labels, k)
    keep = ~np.eye(k, dtype=bool)
    idx = np.nonzero(keep)[1]  # row i of the mask lists every j != i
    starts = np.arange(k) * (k - 1)
    res = pool_segments(y[idx], v[idx], starts, method, ci, alpha, hksj_floor)
    full = pool(y, v, method, ci, alpha, hksj_floor).estimate
    out = pd.DataFrame({"omitted": lab, "shift": res["estimate"] - full})
    return pd.concat([out, pd.DataFrame(res)[list(SCALAR_FIELDS)]], axis=1)


def cumulative(
    y: Any,
    v: Any,
    order: Any,
    labels: Any = None,
    method: str = "reml",
    ci: str = "hksj",
    alpha: float = 0.05,
    hksj_floor: bool = True,
) -> pd.DataFrame:
    """Cumulative meta-analysis: add the estimates one at a time in ``order`` (e.g. year).

    Ties keep the input order. One row per step: ``added`` (label), ``order`` (its sort key) and
    the :class:`PoolResult` fields of the estimates added so far (Lau et al. 1992, NEJM
    327:248). The first step holds a single estimate.
    """
    check_options(method, ci, alpha)
    y, v = check_inputs(y, v)
    k = y.size
    order = np.asarray(order)
    if order.shape != (k,):
        raise AnalysisError(f"{order.size} sort keys for {k} estimates")
    if pd.isna(pd.Series(order)).any():
        raise AnalysisError("the cumulative sort key (e.g. year) is missing for some estimates")
    lab = _labels(labels, k)
    perm = np.argsort(order, kind="stable")
    sizes = np.arange(1, k + 1)
    idx = np.concatenate([perm[:n] for n in sizes])
    starts = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    res = pool_segments(y[idx], v[idx], starts, method, ci, alpha, hksj_floor)
    out = pd.DataFrame({"added": lab[perm], "order": order[perm]})
    return pd.concat([out, pd.DataFrame(res)[list(SCALAR_FIELDS)]], axis=1)


# --------------------------------------------------------------------------------------------
# subgroups


@dataclass(frozen=True)
class SubgroupResult:
    """Pooled result per subgroup and the test for differences between subgroups."""

    table: pd.DataFrame
    q_between: float
    df: int
    pvalue: float
    note: str


def subgroup_test(
    y: Any,
    v: Any,
    groups: Any,
    method: str = "reml",
    ci: str = "hksj",
    alpha: float = 0.05,
    hksj_floor: bool = True,
) -> SubgroupResult:
    """Pool each subgroup (its own τ²) and test whether the subgroup means differ.

    Q_between = Σ_g (μ̂_g − μ̄)²/SE_g², μ̄ the inverse-SE²-weighted mean of the subgroup
    estimates, SE_g the Wald SE of each subgroup's random-effects (or fixed-effect) estimate,
    compared with χ²(G − 1) (Borenstein et al. 2009, Introduction to Meta-Analysis, ch. 19;
    Cochrane Handbook ch. 10.11.3). A subgroup with one estimate enters with its own SE.
    """
    check_options(method, ci, alpha)
    y, v = check_inputs(y, v)
    g = pd.Series(np.asarray(groups, dtype=object))
    if len(g) != y.size:
        raise AnalysisError(f"{len(g)} subgroup labels for {y.size} estimates")
    if g.isna().any():
        raise AnalysisError("some estimates have no subgroup label; label them or leave them out")
    frame = pd.DataFrame({"subgroup": g.astype(str), "y": y, "v": v})
    if frame["subgroup"].nunique() < 2:
        raise AnalysisError("a subgroup test needs at least 2 subgroups")
    table = pool_groups(
        frame, ["subgroup"], method=method, ci=ci, alpha=alpha, hksj_floor=hksj_floor
    )
    wald = pool_groups(frame, ["subgroup"], method=method, ci="wald", alpha=alpha)
    mu = wald["estimate"].to_numpy(dtype=float)
    w = 1.0 / wald["se"].to_numpy(dtype=float) ** 2
    mbar = np.dot(w, mu) / w.sum()
    qb = float(np.dot(w, (mu - mbar) ** 2))
    df = len(table) - 1
    note = (
        "separate tau2 per subgroup; Q-between from the Wald SE of each subgroup estimate; "
        "a between-study comparison (observational)"
    )
    return SubgroupResult(
        table=table, q_between=qb, df=df, pvalue=float(stats.chi2.sf(qb, df)), note=note
    )


# --------------------------------------------------------------------------------------------
# small-study effects


@dataclass(frozen=True)
class EggerResult:
    """Egger's regression test for funnel-plot asymmetry; ``run`` False with the reason."""

    run: bool
    reason: str
    k: int
    intercept: float = float("nan")
    intercept_se: float = float("nan")
    t: float = float("nan")
    df: int = 0
    pvalue: float = float("nan")
    ci_lower: float = float("nan")
    ci_upper: float = float("nan")
    slope: float = float("nan")


def egger_test(y: Any, v: Any, alpha: float = 0.05, min_k: int = EGGER_MIN_K) -> EggerResult:
    """Egger et al. (1997, BMJ 315:629): OLS of yᵢ/SEᵢ on 1/SEᵢ; the intercept, tested with t
    (k − 2 df), measures small-study asymmetry. Run only with k ≥ 10 estimates (Sterne et al.
    2011, BMJ 343:d4002), and only when the SEs differ. Asymmetry has causes other than
    publication bias (true heterogeneity, chance, artefacts); the test has low power.
    """
    y, v = check_inputs(y, v)
    k = y.size
    if k < min_k:
        return EggerResult(
            run=False,
            k=k,
            reason=f"not run: {k} estimate{'s' if k != 1 else ''}; tests for funnel-plot "
            f"asymmetry need at least {min_k} (Sterne et al. 2011)",
        )
    se = np.sqrt(v)
    if np.ptp(se) <= 1e-12 * se.max():
        return EggerResult(
            run=False,
            k=k,
            reason="not run: all standard errors are equal, so "
            "there is no spread of study precision to test",
        )
    X = np.column_stack([np.ones(k), 1.0 / se])
    z = y / se
    beta, *_ = np.linalg.lstsq(X, z, rcond=None)
    resid = z - X @ beta
    df = k - 2
    sigma2 = float(resid @ resid / df)
    cov = sigma2 * np.linalg.inv(X.T @ X)
    b0, se0 = float(beta[0]), float(np.sqrt(cov[0, 0]))
    t = b0 / se0
    crit = float(stats.t.isf(alpha / 2, df))
    return EggerResult(
        run=True,
        reason="",
        k=k,
        intercept=b0,
        intercept_se=se0,
        t=t,
        df=df,
        pvalue=float(2 * stats.t.sf(abs(t), df)),
        ci_lower=b0 - crit * se0,
        ci_upper=b0 + crit * se0,
        slope=float(beta[1]),
    )


@dataclass(frozen=True)
class FunnelData:
    """What a funnel plot needs: the points, the pseudo-confidence lines and the centre."""

    points: pd.DataFrame  # label, y, se, outside (beyond the pseudo-CI lines)
    lines: pd.DataFrame  # se, lower, upper
    center: float
    alpha: float


def funnel_data(
    y: Any,
    v: Any,
    labels: Any = None,
    center: float | None = None,
    alpha: float = 0.05,
    n_points: int = 50,
) -> FunnelData:
    """Funnel-plot data: each estimate against its SE, with lines centre ± z·SE (Sterne et al.
    2011, BMJ 343:d4002, Box 1). The centre defaults to the fixed-effect estimate, as there."""
    y, v = check_inputs(y, v)
    check_options("fe", "wald", alpha)
    se = np.sqrt(v)
    c = pool(y, v, method="fe", ci="wald").estimate if center is None else float(center)
    z = float(stats.norm.isf(alpha / 2))
    grid = np.linspace(0.0, se.max() * 1.05, max(2, int(n_points)))
    points = pd.DataFrame(
        {
            "label": _labels(labels, y.size),
            "y": y,
            "se": se,
            "outside": np.abs(y - c) > z * se,
        }
    )
    lines = pd.DataFrame({"se": grid, "lower": c - z * grid, "upper": c + z * grid})
    return FunnelData(points=points, lines=lines, center=c, alpha=float(alpha))
