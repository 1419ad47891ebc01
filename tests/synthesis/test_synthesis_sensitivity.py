"""Sensitivity analyses and meta-regression, checked by second routes and published identities."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import optimize, stats
from synthesis_helpers import KACKER, KACKER_V, KACKER_Y, restricted_nll

from exposhift.errors import AnalysisError
from exposhift.synthesis import sensitivity as sens
from exposhift.synthesis.pooling import pool


def gen_q(y, v, tau2):
    """Generalised Q written out (DerSimonian & Kacker 2007, eq. 7) for the checks below."""
    w = 1.0 / (v + tau2)
    mu = np.sum(w * y) / np.sum(w)
    return float(np.sum(w * (y - mu) ** 2))


# ---------------------------------------------------------------- Q-profile


def test_qprofile_bounds_solve_the_qprofile_equation():
    # Viechtbauer 2007: Q(tau2_lo) = chi2_{k-1, 0.975}, Q(tau2_hi) = chi2_{k-1, 0.025}
    ci = sens.tau2_ci_qprofile(KACKER_Y, KACKER_V)
    assert gen_q(KACKER_Y, KACKER_V, ci.tau2_lower) == pytest.approx(
        stats.chi2.isf(0.025, 8), rel=1e-10
    )
    assert gen_q(KACKER_Y, KACKER_V, ci.tau2_upper) == pytest.approx(
        stats.chi2.ppf(0.025, 8), rel=1e-10
    )
    pm = pool(KACKER_Y, KACKER_V, method="pm").tau2  # solves Q = k - 1, between the quantiles
    assert ci.tau2_lower < pm < ci.tau2_upper
    assert ci.tau_upper == pytest.approx(np.sqrt(ci.tau2_upper))
    assert 0 < ci.i2_lower < ci.i2_upper < 1


def test_qprofile_coverage_matches_its_exactness():
    # Under the random-effects model with known v, Q(true tau2) ~ chi2(k-1) exactly (Viechtbauer
    # 2007), so the interval covers the true tau2 with probability 0.95. 600 simulated sets:
    # binomial sd = 0.0089; accept 0.95 +/- 0.035 (4 sd).
    rng = np.random.default_rng(2024)
    tau2, hits, n = 0.1, 0, 600
    for _ in range(n):
        k = 8
        v = rng.uniform(0.02, 0.3, k)
        y = rng.normal(0, np.sqrt(v + tau2))
        ci = sens.tau2_ci_qprofile(y, v)
        hits += ci.tau2_lower <= tau2 <= ci.tau2_upper
    assert abs(hits / n - 0.95) < 0.035


def test_qprofile_degenerate_interval():
    y = np.array([0.1, 0.1001, 0.0999, 0.1])
    v = np.array([0.5, 0.5, 0.5, 0.5])
    ci = sens.tau2_ci_qprofile(y, v)
    assert ci.tau2_lower == 0 and ci.tau2_upper == 0
    assert "single point 0" in ci.note
    assert "at least 2" in sens.tau2_ci_qprofile([0.1], [0.1]).note


# ---------------------------------------------------------------- leave-one-out, cumulative


def test_leave_one_out_equals_pool_on_each_subset():
    labels = KACKER["labels"]
    out = sens.leave_one_out(KACKER_Y, KACKER_V, labels=labels, method="reml", ci="hksj")
    full = pool(KACKER_Y, KACKER_V, "reml", "hksj").estimate
    assert list(out["omitted"]) == labels
    for i, row in out.iterrows():
        keep = np.arange(9) != i
        r = pool(KACKER_Y[keep], KACKER_V[keep], "reml", "hksj")
        assert row["estimate"] == pytest.approx(r.estimate, rel=1e-12)
        assert row["tau2"] == pytest.approx(r.tau2, rel=1e-9, abs=1e-14)
        assert row["shift"] == pytest.approx(r.estimate - full, abs=1e-12)
        assert row["k"] == 8
    # dropping the outlying LNE lab (65.9) moves the estimate down
    assert out.set_index("omitted").loc["LNE", "shift"] < 0
    with pytest.raises(AnalysisError, match="at least 2"):
        sens.leave_one_out([0.1], [0.1])


def test_cumulative_by_year():
    years = [2001, 1999, 2005, 1999, 2010, 2003, 2007, 2002, 2008]
    out = sens.cumulative(KACKER_Y, KACKER_V, order=years, labels=KACKER["labels"], method="dl")
    assert list(out["order"]) == sorted(years)
    assert list(out["added"][:2]) == ["NMi", "KRISS"]  # the 1999 tie keeps input order
    assert list(out["k"]) == list(range(1, 10))
    assert out["estimate"].iloc[0] == KACKER_Y[1]
    last = pool(KACKER_Y, KACKER_V, "dl")
    assert out["estimate"].iloc[-1] == pytest.approx(last.estimate, rel=1e-12)
    third = pool(KACKER_Y[[1, 3, 0]], KACKER_V[[1, 3, 0]], "dl")
    assert out["ci_upper"].iloc[2] == pytest.approx(third.ci_upper, rel=1e-12)
    with pytest.raises(AnalysisError, match="missing"):
        sens.cumulative(KACKER_Y, KACKER_V, order=[None] + years[1:])


# ---------------------------------------------------------------- subgroups


GROUPS = np.array(["a", "a", "b", "b", "a", "b", "b", "a", "b"])


def test_subgroup_table_equals_pool_per_subgroup():
    res = sens.subgroup_test(KACKER_Y, KACKER_V, GROUPS, method="reml", ci="hksj")
    for _, row in res.table.iterrows():
        m = GROUPS == row["subgroup"]
        r = pool(KACKER_Y[m], KACKER_V[m], "reml", "hksj")
        assert row["estimate"] == pytest.approx(r.estimate, rel=1e-12)
        assert row["ci_lower"] == pytest.approx(r.ci_lower, rel=1e-12)
    assert res.df == 1 and 0 <= res.pvalue <= 1


def test_fixed_effect_q_between_is_the_q_decomposition():
    # Borenstein et al. 2009 ch. 19: with fixed-effect weights, Q_total = Q_within + Q_between
    res = sens.subgroup_test(KACKER_Y, KACKER_V, GROUPS, method="fe", ci="wald")
    q_within = sum(pool(KACKER_Y[GROUPS == g], KACKER_V[GROUPS == g], "fe").q for g in "ab")
    q_total = pool(KACKER_Y, KACKER_V, "fe").q
    assert res.q_between == pytest.approx(q_total - q_within, rel=1e-10)
    assert res.pvalue == pytest.approx(stats.chi2.sf(res.q_between, 1))


def test_subgroup_errors():
    with pytest.raises(AnalysisError, match="at least 2 subgroups"):
        sens.subgroup_test(KACKER_Y, KACKER_V, ["a"] * 9)
    with pytest.raises(AnalysisError, match="no subgroup label"):
        sens.subgroup_test(KACKER_Y, KACKER_V, [None] + ["a"] * 8)


# ---------------------------------------------------------------- meta-regression


def _reg_data(seed=7, k=25):
    rng = np.random.default_rng(seed)
    dose = rng.uniform(0, 10, k)
    family = rng.choice(["common-trend", "trend-extrapolation", "weighted-fit"], k)
    v = rng.uniform(0.01, 0.2, k)
    y = (
        0.1
        + 0.03 * dose
        + (family == "weighted-fit") * 0.2
        + rng.normal(0, 0.3, k)
        + rng.normal(0, 1, k) * np.sqrt(v)
    )
    return y, v, pd.DataFrame({"dose": dose, "family": family})


@pytest.mark.parametrize("method", ["fe", "dl", "pm", "reml"])
def test_meta_regression_matches_statsmodels_wls(method):
    # statsmodels WLS with weights 1/(v + tau2): same coefficients; its estimated-scale SEs are
    # the Knapp-Hartung SEs, its fixed-scale (scale = 1) SEs the Wald ones
    y, v, mods = _reg_data()
    kh = sens.meta_regression(y, v, mods, method=method, knapp_hartung=True)
    wald = sens.meta_regression(y, v, mods, method=method, knapp_hartung=False)
    assert (kh.tau2 > 0.01) == (method != "fe")
    X = kh.design.to_numpy()
    w = 1 / (v + kh.tau2)
    fit = sm.WLS(y, X, weights=w).fit()
    fixed = sm.WLS(y, X, weights=w).fit(cov_type="fixed scale", cov_kwds={"scale": 1.0})
    assert kh.coefficients["estimate"].to_numpy() == pytest.approx(fit.params, rel=1e-10)
    assert kh.coefficients["se"].to_numpy() == pytest.approx(fit.bse, rel=1e-10)
    assert kh.coefficients["pvalue"].to_numpy() == pytest.approx(fit.pvalues, rel=1e-8)
    assert wald.coefficients["se"].to_numpy() == pytest.approx(fixed.bse, rel=1e-10)
    # omnibus F test of all moderators (Knapp & Hartung 2003) = WLS F test of those terms
    ftest = fit.f_test(np.eye(X.shape[1])[1:])
    assert kh.omnibus_stat == pytest.approx(float(ftest.fvalue), rel=1e-9)
    assert kh.omnibus_pvalue == pytest.approx(float(ftest.pvalue), rel=1e-8)
    assert kh.omnibus_df1 == 3 and kh.df_resid == 21
    assert list(kh.coefficients["term"]) == [
        "intercept",
        "dose",
        "family[trend-extrapolation]",
        "family[weighted-fit]",
    ]


def test_meta_regression_reml_matches_direct_maximisation():
    # second route: scipy.optimize on the restricted likelihood with covariates (helpers)
    y, v, mods = _reg_data(seed=8, k=30)
    res = sens.meta_regression(y, v, mods, method="reml")
    X = res.design.to_numpy()
    opt = optimize.minimize_scalar(
        lambda t: restricted_nll(y, v, t, X),
        bounds=(0, 5),
        method="bounded",
        options={"xatol": 1e-12},
    )
    ref = 0.0 if restricted_nll(y, v, 0.0, X) <= opt.fun else opt.x
    assert res.converged
    assert res.tau2 == pytest.approx(ref, rel=1e-6, abs=1e-9)


def test_meta_regression_pm_solves_its_estimating_equation():
    y, v, mods = _reg_data(seed=9)
    res = sens.meta_regression(y, v, mods, method="pm")
    assert res.tau2 > 0.01  # an interior root, not the boundary
    fit = sm.WLS(y, res.design.to_numpy(), weights=1 / (v + res.tau2)).fit()
    assert np.sum(fit.resid**2 / (v + res.tau2)) == pytest.approx(res.df_resid, rel=1e-10)
    assert res.kh_scale == pytest.approx(1.0, rel=1e-10)


def test_binary_moderator_reproduces_the_subgroup_structure():
    # fixed effect: the indicator's coefficient is the difference of the subgroup means and its
    # squared Wald z is the Q-between statistic (Borenstein et al. 2009 ch. 19-20)
    mods = pd.DataFrame({"group": GROUPS})
    reg = sens.meta_regression(KACKER_Y, KACKER_V, mods, method="fe", knapp_hartung=False)
    sub = sens.subgroup_test(KACKER_Y, KACKER_V, GROUPS, method="fe", ci="wald")
    mu = sub.table.set_index("subgroup")["estimate"]
    coef = reg.coefficients.set_index("term")
    assert coef.loc["intercept", "estimate"] == pytest.approx(mu["a"], rel=1e-12)
    assert coef.loc["group[b]", "estimate"] == pytest.approx(mu["b"] - mu["a"], rel=1e-10)
    assert coef.loc["group[b]", "stat"] ** 2 == pytest.approx(sub.q_between, rel=1e-10)
    assert reg.omnibus_stat == pytest.approx(sub.q_between, rel=1e-10)
    # with one common tau2, the intercept is subgroup a's mean with weights 1/(v + tau2)
    t2 = 0.3
    common = sens.meta_regression(KACKER_Y, KACKER_V, mods, tau2=t2)
    w = 1 / (KACKER_V + t2)
    a = GROUPS == "a"
    assert common.coefficients["estimate"].iloc[0] == pytest.approx(
        np.sum(w[a] * KACKER_Y[a]) / np.sum(w[a]), rel=1e-12
    )
    assert common.method == "fixed" and "tau2 fixed" in common.notes[0]


def test_meta_regression_r2_and_residual_q():
    y, v, mods = _reg_data(seed=3, k=40)
    res = sens.meta_regression(y, v, mods, method="reml")
    assert 0 <= res.r2 <= 1
    fe = sm.WLS(y, res.design.to_numpy(), weights=1 / v).fit()
    assert res.q_e == pytest.approx(np.sum(fe.resid**2 / v), rel=1e-10)
    assert res.conf_int().shape == (4, 2)


def test_meta_regression_errors():
    y, v, mods = _reg_data()
    with pytest.raises(AnalysisError, match="collinear"):
        sens.meta_regression(y, v, pd.DataFrame({"a": mods["dose"], "b": 2 * mods["dose"]}))
    with pytest.raises(AnalysisError, match="moderator 'dose' is missing"):
        sens.meta_regression(y, v, mods.assign(dose=[np.nan] + list(mods["dose"][1:])))
    with pytest.raises(AnalysisError, match="cannot support"):
        sens.meta_regression(y[:2], v[:2], np.array([1.0, 2.0]))
    with pytest.raises(AnalysisError, match="moderator rows"):
        sens.meta_regression(y, v, np.arange(3.0))


# ---------------------------------------------------------------- Egger, funnel


def test_egger_not_run_below_ten():
    res = sens.egger_test(KACKER_Y, KACKER_V)
    assert not res.run and "at least 10" in res.reason and "Sterne" in res.reason
    assert np.isnan(res.pvalue)
    same = sens.egger_test(np.arange(12.0), np.full(12, 0.1))
    assert not same.run and "equal" in same.reason


def test_egger_matches_statsmodels_ols():
    # Egger et al. 1997: OLS of y/se on 1/se; intercept tested with t (k - 2 df)
    rng = np.random.default_rng(4)
    v = rng.uniform(0.005, 0.5, 15)
    y = 0.2 + 0.8 * np.sqrt(v) + rng.normal(0, 1, 15) * np.sqrt(v)  # built-in asymmetry
    res = sens.egger_test(y, v)
    se = np.sqrt(v)
    fit = sm.OLS(y / se, sm.add_constant(1 / se)).fit()
    assert res.run and res.df == 13
    assert res.intercept == pytest.approx(fit.params[0], rel=1e-10)
    assert res.intercept_se == pytest.approx(fit.bse[0], rel=1e-10)
    assert res.pvalue == pytest.approx(fit.pvalues[0], rel=1e-8)
    assert (res.ci_lower, res.ci_upper) == pytest.approx(tuple(fit.conf_int()[0]), rel=1e-10)


def test_funnel_data():
    fd = sens.funnel_data(KACKER_Y, KACKER_V, labels=KACKER["labels"])
    fe = pool(KACKER_Y, KACKER_V, "fe").estimate
    assert fd.center == pytest.approx(fe)
    z = stats.norm.isf(0.025)
    pts = fd.points.set_index("label")
    assert pts.loc["LNE", "outside"] and not pts.loc["NIST", "outside"]
    assert (
        pts["outside"].to_numpy().tolist()
        == (np.abs(KACKER_Y - fe) > z * np.sqrt(KACKER_V)).tolist()
    )
    assert fd.lines["upper"].iloc[-1] - fe == pytest.approx(z * fd.lines["se"].iloc[-1])
    assert fd.lines["se"].max() >= np.sqrt(KACKER_V).max()
