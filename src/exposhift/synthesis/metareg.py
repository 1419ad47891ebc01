"""Random-effects meta-regression with the Knapp–Hartung adjustment.

Model: yᵢ = xᵢ'β + uᵢ + εᵢ, uᵢ ~ N(0, τ²), εᵢ ~ N(0, vᵢ) (Thompson & Sharp 1999, Stat Med
18:2693; Raudenbush 2009, in The Handbook of Research Synthesis and Meta-Analysis, ch. 16).

τ² (residual heterogeneity, truncated at 0): ``fe`` 0; ``dl`` method of moments
(Raudenbush 2009, eq. 16.43: (Q_E − (k − p)) / (tr W − tr[(X'WX)⁻¹X'W²X]), W = diag(1/vᵢ));
``pm`` root of Σwᵢ*(yᵢ − xᵢ'β*)² = k − p (the generalised Q of the residuals; bracket
[0, RSS_OLS/(k − p)] by the same argument as :func:`exposhift.synthesis.pooling.pm_upper_bracket`);
``reml`` Newton–Raphson / Fisher scoring with step halving on the restricted likelihood
ℓ_R = −½[Σlog(vᵢ + τ²) + log|X'W*X| + r'W*r] (Harville 1977; Viechtbauer 2005); or a fixed
number passed as ``tau2``.

Inference: Knapp & Hartung (2003, Stat Med 22:2693): Var(β) = s²·(X'W*X)⁻¹ with
s² = Σwᵢ*(yᵢ − xᵢ'β)²/(k − p), t with k − p df, omnibus F(p − 1, k − p) test of the moderators;
s² is not truncated at 1 (as the HKSJ default of :func:`pool`). Without it: Wald z and χ²(p − 1).
The residual heterogeneity test Q_E uses the fixed-effect weights (χ², k − p df). R² is the
proportional reduction of τ² from the model without moderators (Raudenbush 2009), truncated to
[0, 1].

Categorical moderators (text, category, bool) are coded as indicators against their first
level in sorted order; numeric moderators enter as they are. Missing moderator values are an
error: rows are never dropped silently.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy import optimize, stats

from exposhift.errors import AnalysisError
from exposhift.synthesis.pooling import (
    METHODS,
    PM_RTOL,
    REML_MAX_ITER,
    REML_RTOL,
    check_inputs,
    pool,
    standardise,
)

#: residuals smaller than this fraction of the spread of y count as an exact fit
EXACT_FIT_RTOL = 1e-12


def design_matrix(moderators: Any, k: int) -> pd.DataFrame:
    """Intercept plus moderators as a float DataFrame (indicator coding for categories)."""
    if isinstance(moderators, pd.Series):
        moderators = moderators.to_frame()
    if isinstance(moderators, pd.DataFrame):
        mods = moderators.reset_index(drop=True)
    else:
        arr = np.asarray(moderators)
        if arr.ndim == 1:
            arr = arr[:, None]
        if arr.ndim != 2:
            raise AnalysisError("moderators must be a DataFrame or a 1-D/2-D array")
        mods = pd.DataFrame(arr, columns=[f"x{j + 1}" for j in range(arr.shape[1])])
    if len(mods) != k:
        raise AnalysisError(f"{len(mods)} moderator rows for {k} estimates")
    if mods.shape[1] == 0:
        raise AnalysisError("give at least one moderator")
    cols: dict[str, np.ndarray] = {"intercept": np.ones(k)}
    for name in mods.columns:
        col = mods[name]
        missing = col.isna().to_numpy()
        if missing.any():
            rows = ", ".join(str(i) for i in np.flatnonzero(missing)[:10])
            raise AnalysisError(
                f"moderator '{name}' is missing at position(s) {rows}; fill it or leave those "
                "estimates out explicitly"
            )
        if pd.api.types.is_bool_dtype(col.dtype) or not pd.api.types.is_numeric_dtype(col.dtype):
            levels = sorted(col.astype(str).unique())
            for lev in levels[1:]:
                cols[f"{name}[{lev}]"] = (col.astype(str) == lev).to_numpy(dtype=float)
        else:
            cols[str(name)] = col.to_numpy(dtype=float)
    return pd.DataFrame(cols)


def _wls(X: np.ndarray, y: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """β = (X'WX)⁻¹X'Wy and (X'WX)⁻¹.

    Computed with the weights divided by the largest one (β does not depend on the scale of W,
    and (X'WX)⁻¹ scales by its inverse), so weights near the ends of the double range neither
    underflow nor overflow in X'WX.
    """
    m = float(w.max())
    u = w / m
    inv_u = np.linalg.inv(X.T @ (u[:, None] * X))
    return inv_u @ (X.T @ (u * y)), inv_u / m


def _q_resid(X: np.ndarray, y: np.ndarray, w: np.ndarray) -> float:
    beta, _ = _wls(X, y, w)
    r = y - X @ beta
    return float(np.dot(w, r * r))


def restricted_loglik_reg(X: np.ndarray, y: np.ndarray, v: np.ndarray, tau2: float) -> float:
    """ℓ_R(τ²) = −½[Σlog(vᵢ + τ²) + log|X'W*X| + r'W*r], constant dropped (Harville 1977)."""
    w = 1.0 / (v + tau2)
    beta, _ = _wls(X, y, w)
    r = y - X @ beta
    m = float(w.max())  # log|X'WX| = log|X'(W/m)X| + p·log m (no underflow)
    _, logdet = np.linalg.slogdet(X.T @ ((w / m)[:, None] * X))
    logdet += X.shape[1] * np.log(m)
    return float(-0.5 * (np.log(v + tau2).sum() + logdet + np.dot(w, r * r)))


def _p_matrix(X: np.ndarray, w: np.ndarray) -> np.ndarray:
    """P = W − WX(X'WX)⁻¹X'W."""
    _, inv = _wls(X, np.zeros(w.size), w)
    wx = w[:, None] * X
    return np.diag(w) - wx @ inv @ wx.T


def _tau2_reml_reg(X: np.ndarray, y: np.ndarray, v: np.ndarray) -> tuple[float, int, bool]:
    tau2 = max(0.0, _tau2_dl_reg(X, y, v))
    floor = float(v.min())
    ll = restricted_loglik_reg(X, y, v, tau2)
    for it in range(1, REML_MAX_ITER + 1):
        P = _p_matrix(X, 1.0 / (v + tau2))
        py = P @ y
        pp_tr = float(np.sum(P * P))  # tr(PP), P symmetric
        score = float(py @ py) - float(np.trace(P))
        observed = 2.0 * float(py @ P @ py) - pp_tr
        step = score / (observed if observed > 0 else pp_tr)
        new = max(0.0, tau2 + step)
        ll_new = restricted_loglik_reg(X, y, v, new)
        for _ in range(50):
            if ll_new >= ll - 1e-12 * (1.0 + abs(ll)):
                break
            step *= 0.5
            new = max(0.0, tau2 + step)
            ll_new = restricted_loglik_reg(X, y, v, new)
        done = abs(new - tau2) <= REML_RTOL * (new + floor)
        tau2, ll = new, ll_new
        if done:
            return tau2, it, True
    return tau2, REML_MAX_ITER, False


def _tau2_dl_reg(X: np.ndarray, y: np.ndarray, v: np.ndarray) -> float:
    k, p = X.shape
    w = 1.0 / v
    q_e = _q_resid(X, y, w)
    _, inv = _wls(X, y, w)
    denom = w.sum() - np.trace(inv @ (X.T @ ((w * w)[:, None] * X)))
    return float(max(0.0, (q_e - (k - p)) / denom))


def _tau2_pm_reg(X: np.ndarray, y: np.ndarray, v: np.ndarray) -> tuple[float, int, bool]:
    k, p = X.shape
    df = k - p
    if _q_resid(X, y, 1.0 / v) <= df:
        return 0.0, 0, True
    beta_ols, *_ = np.linalg.lstsq(X, y, rcond=None)
    hi = float(np.sum((y - X @ beta_ols) ** 2) / df)
    for _ in range(200):
        if _q_resid(X, y, 1.0 / (v + hi)) < df:
            break
        hi *= 2.0
    root, info = optimize.brentq(
        lambda t: _q_resid(X, y, 1.0 / (v + t)) - df,
        0.0,
        hi,
        xtol=1e-300,
        rtol=PM_RTOL,
        maxiter=500,
        full_output=True,
        disp=False,
    )
    return max(0.0, float(root)), int(info.iterations), bool(info.converged)


@dataclass(frozen=True, eq=False)
class MetaRegressionResult:
    """Coefficients (one row per term) and model statistics of a meta-regression."""

    coefficients: pd.DataFrame
    k: int
    n_coef: int
    method: str
    knapp_hartung: bool
    alpha: float
    tau2: float
    r2: float
    df_resid: int
    q_e: float
    q_e_pvalue: float
    omnibus_test: str
    omnibus_stat: float
    omnibus_df1: int
    omnibus_df2: float
    omnibus_pvalue: float
    kh_scale: float
    converged: bool
    iterations: int
    design: pd.DataFrame = field(repr=False)
    notes: tuple[str, ...] = ()

    def conf_int(self) -> pd.DataFrame:
        """ci_lower / ci_upper per term."""
        return self.coefficients.set_index("term")[["ci_lower", "ci_upper"]]

    def summary_frame(self) -> pd.DataFrame:
        return self.coefficients.copy()


def meta_regression(
    y: Any,
    v: Any,
    moderators: Any,
    method: str = "reml",
    knapp_hartung: bool = True,
    alpha: float = 0.05,
    tau2: float | None = None,
) -> MetaRegressionResult:
    """Mixed-effects meta-regression of ``y`` (variances ``v``) on ``moderators``.

    ``moderators``: a DataFrame (numeric columns as they are, text/category/bool columns as
    indicators), a Series or an array. An intercept is added. ``tau2`` fixes τ² instead of
    estimating it with ``method``. See the module docstring for the estimators and sources.
    """
    y, v = check_inputs(y, v)
    if method not in METHODS:
        raise AnalysisError(f"unknown method '{method}'; use one of: {', '.join(METHODS)}")
    if not 0 < alpha < 1:
        raise AnalysisError("alpha must be between 0 and 1")
    k = y.size
    design = design_matrix(moderators, k)
    X = design.to_numpy(dtype=float)
    p = X.shape[1]
    if np.linalg.matrix_rank(X) < p:
        raise AnalysisError(
            "the moderators are collinear (or a category has a single level): drop or merge "
            f"columns of {', '.join(design.columns[1:])}"
        )
    if k <= p:
        raise AnalysisError(f"{k} estimates cannot support {p} coefficients; use fewer moderators")
    notes: list[str] = []
    iterations, converged = 0, True
    if tau2 is not None:
        if not (np.isfinite(tau2) and tau2 >= 0):
            raise AnalysisError("a fixed tau2 must be a non-negative number")
        t2 = float(tau2)
        notes.append("tau2 fixed by the caller")
    elif method == "fe":
        t2 = 0.0
    else:
        # τ² on standardised data (shift invariant with an intercept, scale equivariant), see
        # exposhift.synthesis.pooling.standardise
        ys, vs, scale = standardise(y, v)
        if method == "dl":
            t2 = _tau2_dl_reg(X, ys, vs)
        elif method == "pm":
            t2, iterations, converged = _tau2_pm_reg(X, ys, vs)
        else:
            t2, iterations, converged = _tau2_reml_reg(X, ys, vs)
        t2 *= scale
    if not converged:
        notes.append(f"{method.upper()} did not converge: tau2 is the last iterate")

    w = 1.0 / (v + t2)
    beta, cov = _wls(X, y, w)
    resid = y - X @ beta
    df_resid = k - p
    s2 = float(np.dot(w, resid * resid) / df_resid)
    mean_w = np.dot(w, y) / w.sum()
    spread = float(np.dot(w, (y - mean_w) ** 2))
    # exact fit up to rounding: residuals below 1e-12 of the spread of y (numerical limit)
    if knapp_hartung and not s2 * df_resid > EXACT_FIT_RTOL**2 * spread:
        raise AnalysisError(
            "the moderators reproduce the estimates exactly (residual Knapp-Hartung scale 0), "
            "so every interval would have zero width; use knapp_hartung=False, fewer "
            "moderators or more estimates"
        )
    if knapp_hartung:
        cov = cov * s2
        crit = stats.t.isf(alpha / 2, df_resid)
    else:
        crit = stats.norm.isf(alpha / 2)
    se = np.sqrt(np.diag(cov))
    stat = beta / se
    pval = (
        2 * stats.t.sf(np.abs(stat), df_resid) if knapp_hartung else 2 * stats.norm.sf(np.abs(stat))
    )
    coefs = pd.DataFrame(
        {
            "term": list(design.columns),
            "estimate": beta,
            "se": se,
            "stat": stat,
            "pvalue": pval,
            "ci_lower": beta - crit * se,
            "ci_upper": beta + crit * se,
        }
    )

    b1 = beta[1:]
    qm = float(b1 @ np.linalg.solve(cov[1:, 1:], b1))
    if knapp_hartung:
        om_test, om_stat, om_df2 = "F", qm / (p - 1), float(df_resid)
        om_p = float(stats.f.sf(om_stat, p - 1, df_resid))
    else:
        om_test, om_stat, om_df2 = "chi2", qm, float("nan")
        om_p = float(stats.chi2.sf(qm, p - 1))

    q_e = _q_resid(X, y, 1.0 / v)
    if tau2 is None and method != "fe" and k >= 2:
        t0 = pool(y, v, method=method, ci="wald").tau2
        r2 = float(min(1.0, max(0.0, (t0 - t2) / t0))) if t0 > 0 else float("nan")
    else:
        r2 = float("nan")
    if knapp_hartung and s2 < 1.0:
        notes.append("Knapp-Hartung scale below 1: intervals narrower than the Wald ones")
    return MetaRegressionResult(
        coefficients=coefs,
        k=k,
        n_coef=p,
        method=method if tau2 is None else "fixed",
        knapp_hartung=bool(knapp_hartung),
        alpha=float(alpha),
        tau2=t2,
        r2=r2,
        df_resid=df_resid,
        q_e=q_e,
        q_e_pvalue=float(stats.chi2.sf(q_e, df_resid)),
        omnibus_test=om_test,
        omnibus_stat=float(om_stat),
        omnibus_df1=p - 1,
        omnibus_df2=om_df2,
        omnibus_pvalue=om_p,
        kh_scale=s2 if knapp_hartung else float("nan"),
        converged=bool(converged),
        iterations=int(iterations),
        design=design,
        notes=tuple(notes),
    )
