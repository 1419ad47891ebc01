"""Series with a comparison: controlled interrupted time series and a two-period
difference-in-differences on the aggregates, with a pre-period parallel-trends test.

* **Controlled ITS** (Lopez Bernal, Cummins & Gasparrini 2018, J Clin Epidemiol 103:82; Wagner
  et al. 2002): the exposed (``z = 1``) and comparison (``z = 0``) series, stacked on their
  common periods, fitted with::

      g(E[y]) = b0 + b1 time + b2 post + b3 since + g0 z + g1 z time + g2 z post + g3 z since
                [+ seasonal terms shared by both]  [+ log denominator]

  ``g2`` is the difference in level change, ``g3`` the difference in slope change and ``g1``
  the difference in pre-change slopes (the parallel-trends test: its interval should include
  0). Newey-West covariance with the scores of the two series summed per period
  (Driscoll & Kraay 1998), lag chosen as for one series; t intervals with n - k df. The
  standard-form effect is ``g2 + g3 (h - 1) / 2`` as for one series.
* **Two-period DiD** on the aggregates (Card & Krueger 1994, Am Econ Rev 84:772):
  ``(E_post - E_pre) - (C_post - C_pre)`` of the means (SE from the four segments' variances
  of the mean, points taken as independent), or for counts the log of the ratio of rate ratios
  with SE ``sqrt(sum 1 / total count)`` over the four cells (Poisson counts; Rothman,
  Greenland & Lash 2008, Modern Epidemiology 3rd ed., ch. 14).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from exposhift.errors import AnalysisError
from exposhift.series import fit as F
from exposhift.series.its import Z95, _arrays, check_points, seasonal_terms
from exposhift.series.periods import Timeline, timeline


@dataclass(frozen=True)
class ControlledResult:
    model: str
    hac_lag: int | None
    n_common: int
    level_change_diff: float
    level_change_diff_se: float
    slope_change_diff: float
    slope_change_diff_se: float
    pre_slope_diff: float
    pre_slope_diff_se: float
    pre_slope_diff_ci: tuple[float, float]
    effect: float
    effect_se: float
    effect_ci: tuple[float, float]
    did: float
    did_se: float
    did_ci: tuple[float, float]
    effect_scale: str

    @property
    def parallel_pre_trends(self) -> bool:
        lo, hi = self.pre_slope_diff_ci
        return lo <= 0.0 <= hi

    def to_dict(self) -> dict[str, Any]:
        out = dict(vars(self))
        for k in ("pre_slope_diff_ci", "effect_ci", "did_ci"):
            out[k] = list(out[k])
        out["parallel_pre_trends"] = self.parallel_pre_trends
        return out


def _common(tl_e: Timeline, tl_c: Timeline) -> tuple[np.ndarray, np.ndarray]:
    if tl_e.unit != tl_c.unit:
        raise AnalysisError(
            f"the comparison series is in {tl_c.unit}s, the exposed series in "
            f"{tl_e.unit}s; use one time unit"
        )
    common, ie, ic = np.intersect1d(tl_e.index, tl_c.index, return_indices=True)
    if len(common) == 0:
        raise AnalysisError("the comparison series has no period in common with the exposed series")
    return ie, ic


def _did(y_e, y_c, d_e, d_c, post, model: str) -> tuple[float, float]:
    cells = [(y_e, d_e, post), (y_e, d_e, ~post), (y_c, d_c, post), (y_c, d_c, ~post)]
    if model == "gaussian":
        means, var = [], 0.0
        for y, d, m in cells:
            v = y[m] / d[m]
            means.append(v.mean())
            var += v.var(ddof=1) / len(v)
        return (means[0] - means[1]) - (means[2] - means[3]), float(np.sqrt(var))
    logs, var = [], 0.0
    for y, d, m in cells:
        total = y[m].sum()
        if total <= 0:
            raise AnalysisError(
                "a segment of the series has no events: the aggregate rate ratio is undefined"
            )
        logs.append(np.log(total / d[m].sum()))
        var += 1.0 / total
    return (logs[0] - logs[1]) - (logs[2] - logs[3]), float(np.sqrt(var))


def estimate_controlled(
    periods: Sequence,
    values: Sequence[float],
    comp_periods: Sequence,
    comp_values: Sequence[float],
    change_at,
    *,
    denominators: Sequence[float] | None = None,
    comp_denominators: Sequence[float] | None = None,
    model: str = "gaussian",
    seasonal: str | None = None,
    horizon: int | None = None,
    hac_lag: int | None = None,
) -> ControlledResult:
    """Controlled ITS and two-period DiD of an exposed and a comparison series (module doc)."""
    tl_e, tl_c = timeline(periods), timeline(comp_periods)
    y_e, off_e = _arrays(values, denominators, model)
    y_c, off_c = _arrays(comp_values, comp_denominators, model)
    ie, ic = _common(tl_e, tl_c)
    tl = Timeline(tuple(tl_e.labels[i] for i in ie), tl_e.index[ie], tl_e.season[ie], tl_e.unit)
    cut = tl.position(change_at)
    n = len(ie)
    check_points(cut, n - cut, seasonal)
    if horizon is not None and not 1 <= horizon <= n - cut:
        raise AnalysisError(
            f"horizon {horizon} is outside 1..{n - cut} (the common points after the change)"
        )
    d_e = np.ones(n) if off_e is None else np.exp(off_e[ie])
    d_c = np.ones(n) if off_c is None else np.exp(off_c[ic])
    ye, yc = y_e[ie], y_c[ic]
    time = (tl.index - tl.index[0]).astype(float)
    post = np.arange(n) >= cut
    since = np.where(post, time - time[cut], 0.0)
    seas, _ = seasonal_terms(tl, seasonal)
    base = np.column_stack([np.ones(n), time, post.astype(float), since])
    x = np.vstack([np.hstack([base, base, seas]), np.hstack([base, np.zeros_like(base), seas])])
    groups = np.r_[np.arange(n), np.arange(n)]
    if model == "gaussian":
        fit = F.fit_ols(x, np.r_[ye / d_e, yc / d_c])
    else:
        fit = F.fit_model(model, x, np.r_[ye, yc], np.log(np.r_[d_e, d_c]))
    covs = F.covariance(fit, hac_lag, model != "gaussian", groups)
    lag = covs.lag
    crit = F.t_crit(len(groups) - x.shape[1])
    se = np.sqrt(covs.diag())
    c = np.zeros(x.shape[1])
    c[6] = 1.0
    if horizon is not None:
        c[7] = (horizon - 1) / 2.0
    eff, eff_se = float(c @ fit.params), float(np.sqrt(max(covs.var(c), 0.0)))
    did, did_se = _did(ye, yc, d_e, d_c, post, model)
    b = fit.params
    return ControlledResult(
        model=model,
        hac_lag=lag,
        n_common=n,
        level_change_diff=float(b[6]),
        level_change_diff_se=float(se[6]),
        slope_change_diff=float(b[7]),
        slope_change_diff_se=float(se[7]),
        pre_slope_diff=float(b[5]),
        pre_slope_diff_se=float(se[5]),
        pre_slope_diff_ci=(float(b[5] - crit * se[5]), float(b[5] + crit * se[5])),
        effect=eff,
        effect_se=eff_se,
        effect_ci=(eff - crit * eff_se, eff + crit * eff_se),
        did=did,
        did_se=did_se,
        did_ci=(did - Z95 * did_se, did + Z95 * did_se),
        effect_scale="identity" if model == "gaussian" else "log",
    )
