"""Three-level random-effects meta-regression: estimates within events, the event as the unit.

Model (Konstantopoulos 2011, Res Synth Methods 2:61; Van den Noortgate, López-López, Marín-Martínez
& Sánchez-Meca 2013, Behav Res Methods 45:576):

    y_ij = x_ij'β + u_i + w_ij + e_ij,   u_i ~ N(0, σ²_event), w_ij ~ N(0, σ²_within),
    e_ij ~ N(0, v_ij) with v_ij the known sampling variance,

so the covariance is block diagonal, V_i = diag(v_i + σ²_within) + σ²_event 11' per event i.

The restricted likelihood, its score and information, and its maximisation are in
:mod:`exposhift.synthesis.multilevel_reml`.

*Singleton events* (every event with one estimate): σ²_event and σ²_within enter only as their
sum and are not separately identified; the sum is fitted (two-level REML) and reported as
σ²_event with σ²_within = 0, and a note says so.

*Inference.* Model-based: (X'V̂⁻¹X)⁻¹ with normal (Wald) tests. Robust: CR2 with the fitted model
as working model and Satterthwaite df, and the HTZ test for several constraints
(:mod:`exposhift.synthesis.robust`; Hedges, Tipton & Johnson 2010; Tipton 2015; Pustejovsky &
Tipton 2018). With few events CR2 inference is unreliable when df < 4 (Tipton 2015).

Pooled numbers support, never replace, expert judgement; see the cautions in the docs.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import stats

from exposhift.errors import AnalysisError
from exposhift.synthesis.multilevel_reml import RemlProblem, maximise_reml
from exposhift.synthesis.pooling import check_inputs
from exposhift.synthesis.robust import ClusterIndex, ClusterRobust, robust_blocks

INFERENCE: tuple[str, ...] = ("cr2", "model")
DF_UNRELIABLE = 4.0
NOTE_SINGLETON = (
    "every event has one estimate: between-event and within-event variance are not separately "
    "identified; their sum is reported as sigma2_event (sigma2_within = 0)"
)


@dataclass(frozen=True, eq=False)
class MultilevelFit:
    """REML fit of the three-level model; ``vcov_cr2``/``se_cr2``/``df_cr2`` are CR2 with
    Satterthwaite df per coefficient; ``loglik_reml`` is ℓ_R with its constant."""

    names: tuple[str, ...]
    coef: np.ndarray
    vcov_model: np.ndarray
    se_model: np.ndarray
    vcov_cr2: np.ndarray
    se_cr2: np.ndarray
    df_cr2: np.ndarray
    sigma2_event: float
    sigma2_within: float
    k_estimates: int
    k_events: int
    converged: bool
    iterations: int
    loglik_reml: float
    notes: tuple[str, ...] = ()
    robust: ClusterRobust | None = field(default=None, repr=False)

    def to_dict(self) -> dict[str, Any]:
        """Plain Python values (lists for arrays), without the robust helper object."""
        out: dict[str, Any] = {}
        for name in (
            "names",
            "coef",
            "vcov_model",
            "se_model",
            "vcov_cr2",
            "se_cr2",
            "df_cr2",
            "sigma2_event",
            "sigma2_within",
            "k_estimates",
            "k_events",
            "converged",
            "iterations",
            "loglik_reml",
            "notes",
        ):
            val = getattr(self, name)
            out[name] = (
                val.tolist()
                if isinstance(val, np.ndarray)
                else (list(val) if isinstance(val, tuple) else val)
            )
        return out


@dataclass(frozen=True)
class WaldTest:
    """Test of Rβ = r. ``method``: 'chi2' (model-based, statistic Q on q df), 't-satterthwaite'
    (CR2, q = 1: statistic t, df_den the Satterthwaite df) or 'htz' (CR2, q > 1: statistic F
    on (q, df_den); ``wald_q`` is the unscaled Q)."""

    method: str
    statistic: float
    df_num: float
    df_den: float
    pvalue: float
    wald_q: float
    estimate: tuple[float, ...]


@dataclass(frozen=True)
class MultilevelPool:
    """One event-level pooled estimate (intercept-only three-level model). ``k`` is the number of
    estimates, as in :class:`exposhift.synthesis.pooling.PoolResult`; ``df`` is inf for
    ``inference='model'`` (normal interval)."""

    k: int
    k_estimates: int
    k_events: int
    inference: str
    alpha: float
    estimate: float
    se: float
    ci_lower: float
    ci_upper: float
    z_or_t: float
    pvalue: float
    df: float
    sigma2_event: float
    sigma2_within: float
    converged: bool
    iterations: int
    notes: tuple[str, ...] = ()


def _check_design(X: Any, n: int, names: Any) -> tuple[np.ndarray, tuple[str, ...]]:
    if X is None:
        X = np.ones((n, 1))
        default = ("intercept",)
    else:
        X = np.asarray(X, dtype=float)
        if X.ndim == 1:
            X = X[:, None]
        default = tuple(f"x{j}" for j in range(X.shape[1]))
    if X.shape[0] != n:
        raise AnalysisError(f"the design matrix has {X.shape[0]} rows for {n} estimates")
    bad = np.flatnonzero(~np.all(np.isfinite(X), axis=1))
    if bad.size:
        raise AnalysisError(
            f"moderator value(s) missing or not finite in row(s) {', '.join(map(str, bad[:10]))}"
        )
    if np.linalg.matrix_rank(X) < X.shape[1]:
        raise AnalysisError(
            "the moderators are collinear (design not of full column rank); drop a redundant column"
        )
    names = default if names is None else tuple(str(x) for x in names)
    if len(names) != X.shape[1]:
        raise AnalysisError(f"{len(names)} names for {X.shape[1]} coefficients")
    return X, names


def fit_multilevel(y: Any, v: Any, cluster: Any, X: Any = None, names: Any = None) -> MultilevelFit:
    """Fit the three-level model by REML; see the module docstring for the formulas.

    ``cluster`` gives the event of each estimate. Raises :class:`AnalysisError` for non-finite
    estimates, non-positive or non-finite variances, missing event labels, fewer than 2 events,
    no more events than coefficients, or a collinear design.
    """
    y, v = check_inputs(y, v)
    n = y.size
    X, names = _check_design(X, n, names)
    groups = ClusterIndex.from_labels(cluster, n)
    p = X.shape[1]
    if groups.m < 2:
        raise AnalysisError(
            f"{groups.m} event: the event-level model needs estimates from at least 2 events"
        )
    if groups.m <= p:
        raise AnalysisError(
            f"{groups.m} events for {p} coefficients: cluster-robust inference "
            "needs more events than coefficients"
        )
    prob = RemlProblem(y, v, X, groups)
    singleton = bool(np.all(groups.counts == 1))
    theta, nit, converged = maximise_reml(prob, singleton)
    s2e, s2w = float(theta[0]), float(theta[1])
    nll, _, _, beta, bread = prob.evaluate(s2e, s2w, info=False)
    xs, ys = prob.Z[:, :p], prob.Z[:, p]
    d = prob.v + s2w

    def phi_blocks(ids: np.ndarray, m: int) -> np.ndarray:
        rows = groups.starts[ids][:, None] + np.arange(m)
        return d[rows][:, :, None] * np.eye(m) + s2e  # V̂_i = diag(v + σ²_w) + σ²_e 11'

    rob = robust_blocks(xs, ys - xs @ beta, bread, beta, groups, phi_blocks, "CR2")
    notes = [NOTE_SINGLETON] if singleton else []
    if not converged:
        notes.append(
            "REML maximisation did not converge: variance components are the best point found"
        )
    notes.extend(rob.notes)
    vm = 0.5 * (bread + bread.T)
    arrays = [beta, vm, np.sqrt(np.diag(vm)), rob.vcov, rob.se, rob.df]
    for arr in arrays:
        arr.setflags(write=False)
    beta, vm, se_model, vcov_cr2, se_cr2, df_cr2 = arrays
    return MultilevelFit(
        names=names,
        coef=beta,
        vcov_model=vm,
        se_model=se_model,
        vcov_cr2=vcov_cr2,
        se_cr2=se_cr2,
        df_cr2=df_cr2,
        sigma2_event=s2e,
        sigma2_within=s2w,
        k_estimates=n,
        k_events=groups.m,
        converged=converged,
        iterations=nit,
        loglik_reml=float(-nll),
        notes=tuple(notes),
        robust=rob,
    )


def wald_test(fit: MultilevelFit, R: Any, r: Any = None, vcov: str = "model") -> WaldTest:
    """Test Rβ = r: χ²(q) with the model covariance; with CR2 the t test on Satterthwaite df
    (q = 1) or the HTZ F test (q > 1; Pustejovsky & Tipton 2018)."""
    p = fit.coef.size
    R = np.atleast_2d(np.asarray(R, dtype=float))
    if R.shape[1] != p or not np.all(np.isfinite(R)):
        raise AnalysisError(f"the constraint matrix needs {p} finite columns, one per coefficient")
    q = R.shape[0]
    if np.linalg.matrix_rank(R) < q:
        raise AnalysisError("the constraints are redundant (R is not of full row rank)")
    r = np.zeros(q) if r is None else np.asarray(r, dtype=float).reshape(-1)
    if r.size != q:
        raise AnalysisError(f"{r.size} right-hand values for {q} constraints")
    d = R @ fit.coef - r
    est = tuple(float(x) for x in d)
    if vcov == "model":
        qstat = float(d @ np.linalg.solve(R @ fit.vcov_model @ R.T, d))
        return WaldTest(
            "chi2", qstat, float(q), float("inf"), float(stats.chi2.sf(qstat, q)), qstat, est
        )
    if vcov != "cr2":
        raise AnalysisError(f"unknown vcov '{vcov}'; use 'model' or 'cr2'")
    rob = fit.robust
    if rob is None:
        raise AnalysisError("this fit carries no robust covariance")
    if q == 1:
        se = float(np.sqrt(R[0] @ rob.vcov @ R[0]))
        df = rob.df_contrast(R[0])
        if not se > 0:
            raise AnalysisError("the robust SE of this contrast is 0; the test is undefined")
        tstat = float(d[0] / se)
        return WaldTest(
            "t-satterthwaite", tstat, 1.0, df, float(2 * stats.t.sf(abs(tstat), df)), tstat**2, est
        )
    f, df1, df2, pval, qstat = rob.htz(R, d)
    return WaldTest("htz", f, df1, df2, pval, qstat, est)


def pool_multilevel(
    y: Any,
    v: Any,
    cluster: Any,
    alpha: float = 0.05,
    inference: str = "cr2",
) -> MultilevelPool:
    """Event-level pooled estimate: the intercept of :func:`fit_multilevel`.

    ``inference='cr2'``: CR2 SE and a t interval on the Satterthwaite df (with a note when
    df < 4, Tipton 2015); ``'model'``: the model-based SE and a normal (Wald) interval.
    """
    if inference not in INFERENCE:
        raise AnalysisError(f"unknown inference '{inference}'; use one of: {', '.join(INFERENCE)}")
    if not (isinstance(alpha, float | int) and 0.0 < float(alpha) < 1.0):
        raise AnalysisError(f"alpha must be between 0 and 1 (e.g. 0.05), got {alpha!r}")
    alpha = float(alpha)
    fit = fit_multilevel(y, v, cluster)
    est = float(fit.coef[0])
    notes = list(fit.notes)
    if inference == "cr2":
        se, df = float(fit.se_cr2[0]), float(fit.df_cr2[0])
        if not (se > 0 and df > 0):
            raise AnalysisError(
                "the CR2 standard error is 0 or its degrees of freedom are "
                "undefined; use inference='model'"
            )
        crit = float(stats.t.isf(alpha / 2, df))
        stat = est / se
        pval = float(2 * stats.t.sf(abs(stat), df))
        if df < DF_UNRELIABLE:
            notes.append(
                f"CR2 Satterthwaite df = {df:.2f} < 4: robust inference is unreliable "
                f"with so few events ({fit.k_events}) (Tipton 2015)"
            )
    else:
        se, df = float(fit.se_model[0]), float("inf")
        crit = float(stats.norm.isf(alpha / 2))
        stat = est / se
        pval = float(2 * stats.norm.sf(abs(stat)))
    return MultilevelPool(
        k=fit.k_estimates,
        k_estimates=fit.k_estimates,
        k_events=fit.k_events,
        inference=inference,
        alpha=alpha,
        estimate=est,
        se=se,
        ci_lower=est - crit * se,
        ci_upper=est + crit * se,
        z_or_t=float(stat),
        pvalue=pval,
        df=df,
        sigma2_event=fit.sigma2_event,
        sigma2_within=fit.sigma2_within,
        converged=fit.converged,
        iterations=fit.iterations,
        notes=tuple(notes),
    )
