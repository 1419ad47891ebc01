"""Model fitting for series re-estimation, in plain numpy (fast enough to refit at every placebo
date), checked against statsmodels in the tests.

* Ordinary least squares: ``b = (X'X)^-1 X'y``.
* Poisson and negative-binomial (NB2) GLMs with a log link and an offset, by iteratively
  reweighted least squares (McCullagh & Nelder 1989, Generalized Linear Models, 2nd ed., §2.5):
  weights ``mu / (1 + alpha mu)``, working response ``eta - offset + (y - mu) / mu``. For the
  negative binomial the dispersion ``alpha`` comes from the auxiliary regression of Cameron &
  Trivedi (1990, J Econometrics 46:347) on the Poisson fit:
  ``((y - mu)^2 - y) / mu = alpha mu + e`` (no intercept), floored at 1e-8. The bread of the
  covariance is the inverse observed information, weights ``mu (1 + alpha y) / (1 + alpha mu)^2``
  (the log link is not canonical for NB2).
* Newey-West (1987, Econometrica 55:703) heteroskedasticity- and autocorrelation-consistent
  covariance: ``B S B`` with bread ``B = (X'WX)^-1`` and meat
  ``S = sum_l w_l (G_l + G_l')``, Bartlett weights ``w_l = 1 - l / (L + 1)``, ``G_l`` the lag-l
  cross-products of the scores ``x_t (y_t - mu_t) / (1 + alpha mu_t)``, times the
  small-sample factor ``n / (n - k)`` (statsmodels' ``cov_type="HAC"`` with
  ``use_correction=True``); intervals use Student's t with ``n - k`` degrees of freedom. Scores
  of several series observed at the same period are summed before the lags are taken (Driscoll
  & Kraay 1998, Rev Econ Stat 80:549; statsmodels' ``hac-groupsum``).
* Default (:func:`covariance` with no lag given): when the residuals show autocorrelation
  (Ljung-Box p < 0.05) Newey-West with the Newey & West (1994, Rev Econ Stud 61:631) plug-in
  lag ``floor(4 (n / 100)^(2/9))``; otherwise the model-based covariance (``s^2 (X'X)^-1``, or
  for counts the GLM covariance times the Pearson dispersion when above 1, as quasi-likelihood;
  McCullagh & Nelder 1989 §9.2). Newey-West standard errors are biased down in short series
  (Andrews 1991, Econometrica 59:817), so they are used where there is autocorrelation to
  correct, and then never let a variance fall below the model-based one (the same idea as the
  floor on Hartung-Knapp intervals). A lag given by the reviewer (0 included) means plain
  Newey-West. The method and lag are reported.
* Diagnostics: Durbin-Watson (1950, Biometrika 37:409) and Ljung-Box (1978, Biometrika 65:297)
  ``Q = n (n + 2) sum_k r_k^2 / (n - k)`` on the (Pearson) residuals, ``m = min(10, n // 5)``
  lags (common practice), chi-square with ``m`` degrees of freedom.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

from exposhift.errors import AnalysisError

MODELS: tuple[str, ...] = ("gaussian", "poisson", "negbin")
MAX_ITER = 100
TOL = 1e-10


class NotConverged(AnalysisError):
    """The count model's iterations did not settle: reported as such, no estimate."""


@dataclass(frozen=True)
class Fit:
    params: np.ndarray
    bread: np.ndarray  # (X'WX)^-1
    mu: np.ndarray  # fitted means (counts for GLMs, including the offset)
    scores: np.ndarray  # n x k score contributions
    pearson: np.ndarray  # Pearson residuals
    alpha: float  # NB2 dispersion (0 for Poisson and gaussian)
    iterations: int
    scale: float  # residual variance (gaussian) or Pearson chi2 / df (GLMs)


def default_lag(n: int) -> int:
    """Newey & West (1994) plug-in rule: floor(4 (n/100)^(2/9))."""
    return int(math.floor(4 * (n / 100.0) ** (2.0 / 9.0)))


LB_ALPHA = 0.05


def choose_lag(fit: Fit, given: int | None) -> tuple[int | None, str]:
    """The Newey-West lag (None: model-based covariance) and the rule that gave it."""
    if given is not None:
        if given < 0:
            raise AnalysisError("the Newey-West lag must be 0 or more")
        return int(given), f"Newey-West, lag {int(given)} given"
    n = len(fit.pearson)
    _, p, m = ljung_box(fit.pearson)
    if p < LB_ALPHA:
        lag = default_lag(n)
        return lag, (
            f"Newey-West, lag {lag}: residual autocorrelation (Ljung-Box p {p:.3f} < "
            f"{LB_ALPHA}, {m} lags); lag floor(4 (n/100)^(2/9)), Newey & West 1994"
        )
    return None, (
        f"model-based: no residual autocorrelation detected (Ljung-Box p {p:.3f} >= "
        f"{LB_ALPHA}, {m} lags)"
    )


def model_cov(fit: Fit, glm: bool) -> np.ndarray:
    """``s^2 (X'X)^-1`` (OLS) or the GLM covariance times max(1, Pearson dispersion)."""
    return (max(fit.scale, 1.0) if glm else fit.scale) * fit.bread


@dataclass(frozen=True)
class Covariance:
    """The covariance used, with the model-based one as a floor for variances of contrasts
    when Newey-West is chosen by default (module doc)."""

    cov: np.ndarray
    floor: np.ndarray | None
    lag: int | None
    rule: str

    def var(self, c: np.ndarray) -> float:
        v = float(c @ self.cov @ c)
        return max(v, float(c @ self.floor @ c)) if self.floor is not None else v

    def rows(self, x: np.ndarray) -> np.ndarray:
        """Variance of each row's linear predictor ``x_i b``."""
        v = np.einsum("ij,jk,ik->i", x, self.cov, x)
        if self.floor is not None:
            v = np.maximum(v, np.einsum("ij,jk,ik->i", x, self.floor, x))
        return np.clip(v, 0, None)

    def diag(self) -> np.ndarray:
        return self.rows(np.eye(len(self.cov)))


def covariance(
    fit: Fit, given: int | None, glm: bool, groups: np.ndarray | None = None
) -> Covariance:
    """The covariance of ``fit.params`` by the rule of the module doc."""
    lag, rule = choose_lag(fit, given)
    if lag is None:
        return Covariance(model_cov(fit, glm), None, None, rule)
    if given is not None:
        return Covariance(hac_cov(fit, lag, groups), None, lag, rule)
    return Covariance(
        hac_cov(fit, lag, groups),
        model_cov(fit, glm),
        lag,
        rule + "; never below the model-based variance",
    )


def t_crit(df: int, level: float = 0.95) -> float:
    return float(stats.t.ppf(0.5 + level / 2.0, max(df, 1)))


def _inv(xtx: np.ndarray) -> np.ndarray:
    if np.linalg.cond(xtx) > 1e12:
        raise AnalysisError(
            "the model's design is singular (too few distinct periods for the "
            "terms asked for); drop the seasonal terms or add points"
        )
    return np.linalg.inv(xtx)


def fit_ols(x: np.ndarray, y: np.ndarray) -> Fit:
    bread = _inv(x.T @ x)
    b = bread @ (x.T @ y)
    mu = x @ b
    e = y - mu
    df = max(len(y) - x.shape[1], 1)
    s2 = float(e @ e) / df
    return Fit(b, bread, mu, x * e[:, None], e / math.sqrt(s2) if s2 > 0 else e, 0.0, 1, s2)


def _irls(x, y, offset, alpha, start=None) -> tuple[np.ndarray, int]:
    if start is None:
        eta = np.log(y + 0.5)
        mu = np.exp(eta)
    else:
        eta = x @ start + offset
        mu = np.exp(eta)
    b = start
    dev_old = np.inf
    for it in range(1, MAX_ITER + 1):
        w = mu / (1.0 + alpha * mu)
        z = eta - offset + (y - mu) / mu
        xw = x * w[:, None]
        b = np.linalg.solve(xw.T @ x, xw.T @ z)
        eta = x @ b + offset
        if np.any(eta > 700):
            raise NotConverged("the count model diverged (fitted counts overflow); no estimate")
        mu = np.exp(eta)
        dev = float(np.sum(y * np.log(np.where(y > 0, y / mu, 1.0)) - (y - mu)))
        if abs(dev - dev_old) <= TOL * (abs(dev) + 0.1):
            return b, it
        dev_old = dev
    raise NotConverged(
        f"the count model did not converge in {MAX_ITER} iterations; "
        "no estimate (try --model gaussian or fewer terms)"
    )


def fit_glm(
    x: np.ndarray,
    y: np.ndarray,
    offset: np.ndarray,
    *,
    negbin: bool = False,
    start: np.ndarray | None = None,
) -> Fit:
    """Poisson (or NB2 with ``negbin``) log-link GLM by IRLS."""
    if np.any(y < 0):
        raise AnalysisError("count models need counts of 0 or more")
    b, it = _irls(x, y, offset, 0.0, start)
    alpha = 0.0
    if negbin:
        mu = np.exp(x @ b + offset)
        aux = ((y - mu) ** 2 - y) / mu
        alpha = max(float(aux @ mu / (mu @ mu)), 1e-8)
        b, it2 = _irls(x, y, offset, alpha, b)
        it += it2
    mu = np.exp(x @ b + offset)
    # observed information: mu (1 + alpha y) / (1 + alpha mu)^2 (= mu for Poisson), as
    # statsmodels' GLM uses in its sandwich
    w = mu * (1.0 + alpha * y) / (1.0 + alpha * mu) ** 2
    bread = _inv((x * w[:, None]).T @ x)
    var = mu + alpha * mu**2
    pearson = (y - mu) / np.sqrt(var)
    df = max(len(y) - x.shape[1], 1)
    scores = x * ((y - mu) / (1.0 + alpha * mu))[:, None]
    return Fit(b, bread, mu, scores, pearson, alpha, it, float(pearson @ pearson) / df)


def fit_model(model: str, x, y, offset=None, start=None) -> Fit:
    if model == "gaussian":
        return fit_ols(x, y)
    if model in ("poisson", "negbin"):
        off = np.zeros(len(y)) if offset is None else offset
        return fit_glm(x, y, off, negbin=model == "negbin", start=start)
    raise AnalysisError(f"unknown model {model!r}; accepted: {', '.join(MODELS)}")


def hac_cov(
    fit: Fit, lag: int, groups: np.ndarray | None = None, *, correction: bool = True
) -> np.ndarray:
    """Newey-West covariance of ``fit.params`` with ``lag`` lags (Bartlett kernel), times
    ``n / (n - k)`` with ``correction``.

    ``groups`` (sorted period positions, one per row) sums the scores of rows observed at the
    same period first (Driscoll-Kraay).
    """
    u = fit.scores
    n, k = u.shape
    factor = n / (n - k) if correction and n > k else 1.0
    if groups is not None:
        _, inv = np.unique(groups, return_inverse=True)
        summed = np.zeros((inv.max() + 1, u.shape[1]))
        np.add.at(summed, inv, u)
        u = summed
    meat = u.T @ u
    for lag_ in range(1, min(lag, len(u) - 1) + 1):
        g = u[lag_:].T @ u[:-lag_]
        meat += (1.0 - lag_ / (lag + 1.0)) * (g + g.T)
    return factor * (fit.bread @ meat @ fit.bread)


def durbin_watson(resid: np.ndarray) -> float:
    """Durbin & Watson (1950): sum of squared successive differences over the sum of squares."""
    return float(np.sum(np.diff(resid) ** 2) / np.sum(resid**2))


def ljung_box(resid: np.ndarray, lags: int | None = None) -> tuple[float, float, int]:
    """Ljung & Box (1978) Q, its chi-square p value and the number of lags used."""
    n = len(resid)
    m = lags if lags is not None else max(1, min(10, n // 5))
    e = resid - resid.mean()
    denom = float(e @ e)
    r = np.array([float(e[k:] @ e[:-k]) / denom for k in range(1, m + 1)])
    q = float(n * (n + 2) * np.sum(r**2 / (n - np.arange(1, m + 1))))
    return q, float(stats.chi2.sf(q, m)), m
