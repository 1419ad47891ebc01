"""Extreme and non-finite inputs: an AnalysisError, never a ZeroDivisionError, a numpy warning or
a silent NaN; and results that follow the scale of the data over many decades.

Outside references: the Kacker (2004) interlaboratory data with the statsmodels reference values
(tests/data/meta_checks.json, status external-reference), rescaled by powers of ten; the
equivariance of every τ² estimator used here (τ²(a + c·y, c²·v) = c²·τ²(y, v)) follows from
their definitions (DerSimonian & Laird 1986; Paule & Mandel 1982; Viechtbauer 2005), and the
typical variance of Higgins & Thompson (2002, eq. 9) is exactly v for k equal variances.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from synthesis_helpers import KACKER_V, KACKER_Y, check

from exposhift.errors import AnalysisError
from exposhift.synthesis.grouped import pool_groups
from exposhift.synthesis.harmonise import harmonise
from exposhift.synthesis.metareg import meta_regression
from exposhift.synthesis.pooling import cross_sum, pool, s2_typical, tau2_dl, tau2_pm, tau2_reml
from exposhift.synthesis.sensitivity import (
    cumulative,
    egger_test,
    funnel_data,
    leave_one_out,
    subgroup_test,
    tau2_ci_qprofile,
)

METHODS = ["fe", "dl", "pm", "reml"]


@pytest.fixture(autouse=True)
def _warnings_are_errors():
    """Every numpy overflow/underflow/divide/invalid warning fails the test."""
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with np.errstate(over="raise", divide="raise", invalid="raise", under="ignore"):
            yield


# ------------------------------------------------------------------------------------------
# non-finite and unrepresentable inputs

BAD_SETS = {
    "inf variance": ([0.1, 0.2, 0.3], [0.01, np.inf, 0.02]),
    "nan variance": ([0.1, 0.2, 0.3], [0.01, np.nan, 0.02]),
    "zero variance": ([0.1, 0.2, 0.3], [0.01, 0.0, 0.02]),
    "inf estimate": ([0.1, np.inf, 0.3], [0.01, 0.01, 0.02]),
    "nan estimate": ([0.1, np.nan, 0.3], [0.01, 0.01, 0.02]),
    "variances 1e-300 and 1e300": ([0.1, 0.2, 0.3], [1e-300, 1.0, 1e300]),
    "huge estimates": ([1e200, -1e200, 0.0], [1.0, 1.0, 1.0]),
    "estimates 1e120 SEs apart": ([0.0, 1e110, 0.0], [1e-20, 1e-20, 1e-20]),
}


def _calls(y, v):
    k = len(y)
    return {
        "pool": lambda: pool(y, v),
        "pool_groups": lambda: pool_groups(pd.DataFrame({"g": 1, "y": y, "v": v}), ["g"]),
        "leave_one_out": lambda: leave_one_out(y, v),
        "cumulative": lambda: cumulative(y, v, order=list(range(k))),
        "tau2_ci_qprofile": lambda: tau2_ci_qprofile(y, v),
        "egger_test": lambda: egger_test(y, v),
        "funnel_data": lambda: funnel_data(y, v),
        "subgroup_test": lambda: subgroup_test(y, v, ["a", "b", "a"][:k]),
        "meta_regression": lambda: meta_regression(y, v, np.array([0.0, 1.0, 4.0])[:k]),
    }


@pytest.mark.parametrize("case", list(BAD_SETS))
@pytest.mark.parametrize("call", list(_calls([0.0], [1.0])))
def test_bad_sets_raise_analysis_error(case, call):
    y, v = BAD_SETS[case]
    with pytest.raises(AnalysisError):
        _calls(np.array(y), np.array(v))[call]()


@pytest.mark.parametrize("method", METHODS)
def test_pool_groups_names_the_rows_of_an_extreme_group(method):
    frame = pd.DataFrame(
        {"g": ["a", "a", "b", "b"], "y": [0.1, 0.2, 0.1, 0.3], "v": [0.01, 0.02, 1e-200, 1e200]},
        index=[10, 11, 12, 13],
    )
    with pytest.raises(AnalysisError, match=r"rows 12, 13: the variances range"):
        pool_groups(frame, ["g"], method=method)


GOOD_SETS = {
    "variances 1e300": ([0.1, 0.2, 0.35], [1e300, 2e300, 3e300]),
    "variances 1e-300": ([1e-151, 2e-151, 3.5e-151], [1e-300, 2e-300, 3e-300]),
    "variances 1e-20": ([1e-11, 3e-11, -2e-11, 4e-11], [1e-22, 2e-22, 1e-22, 3e-22]),
    "variances 1e20": ([1e10, 3e10, -2e10, 4e10], [1e18, 2e18, 1e18, 3e18]),
    "huge y, agreeing": ([1e140, 1.1e140, 1.3e140], [1e278, 1e278, 2e278]),
    "identical y": ([0.5, 0.5, 0.5], [0.01, 0.02, 0.03]),
    "identical huge y, tiny variances": ([1e12, 1e12, 1e12], [1e-30, 2e-30, 3e-30]),
    "k = 2": ([0.3, 0.5], [0.01, 0.02]),
    "k = 2 identical": ([0.5, 0.5], [0.04, 0.04]),
}


@pytest.mark.parametrize("case", list(GOOD_SETS))
@pytest.mark.parametrize("method", METHODS)
def test_tau2_and_typical_variance_finite_at_the_ends_of_the_range(case, method):
    y, v = (np.array(x, dtype=float) for x in GOOD_SETS[case])
    r = pool(y, v, method=method, ci="wald")
    g = pool_groups(pd.DataFrame({"g": 1, "y": y, "v": v}), ["g"], method=method, ci="wald")
    for x in (r.estimate, r.se, r.tau2, r.i2_tau2, r.h2_tau2, r.q):
        assert np.isfinite(x)
    assert r.tau2 >= 0
    assert g["tau2"].iloc[0] == pytest.approx(r.tau2, rel=1e-8, abs=1e-10 * v.min())
    assert g["i2_tau2"].iloc[0] == pytest.approx(r.i2_tau2, rel=1e-8, abs=1e-12)
    if np.ptp(y) == 0:  # equal estimates: no heterogeneity, exactly
        assert r.tau2 == 0.0 and r.q == 0.0


@pytest.mark.parametrize("method", METHODS)
def test_k1_returns_the_estimate(method):
    r = pool([0.3], [0.01], method=method)
    assert r.estimate == 0.3 and r.se == pytest.approx(0.1)
    g = pool_groups(pd.DataFrame({"g": [1], "y": [0.3], "v": [0.01]}), ["g"], method=method)
    assert g["estimate"].iloc[0] == 0.3 and np.isnan(g["tau2"].iloc[0])


def test_sensitivity_and_metareg_at_variances_near_the_ends_of_the_range():
    for c in (1e-140, 1.0, 1e140):  # v ~ c² spans 1e-280 .. 1e280
        y = np.array([0.1, 0.5, 0.2, 0.9, 0.4]) * c
        v = np.array([0.01, 0.02, 0.015, 0.03, 0.01]) * c * c
        q = tau2_ci_qprofile(y, v)
        assert np.isfinite(q.tau2_upper) and q.tau2_lower <= q.tau2_upper
        loo = leave_one_out(y, v)
        assert np.isfinite(loo["estimate"].to_numpy(dtype=float)).all()
        m = meta_regression(y, v, np.array([0.0, 1.0, 0.0, 2.0, 1.0]))
        assert np.isfinite(m.coefficients["se"].to_numpy()).all()
        assert m.tau2 / (c * c) == pytest.approx(
            meta_regression(y / c, v / (c * c), np.array([0.0, 1.0, 0.0, 2.0, 1.0])).tau2,
            rel=1e-7,
            abs=1e-12,
        )


def test_metareg_exact_fit_with_knapp_hartung_raises():
    # the moderator reproduces y exactly: a zero-width interval would follow
    with pytest.raises(AnalysisError, match="zero width"):
        meta_regression([0.1, 0.2, 0.3], [0.01, 0.01, 0.01], np.array([1.0, 2.0, 3.0]))


@pytest.mark.parametrize(
    "row",
    [
        {"se": np.inf},
        {"se": 1e300},
        {"se": 1e-300},
        {"estimate": np.inf},
        {"estimate": np.nan},
        {"ci_low": -np.inf, "ci_high": 2.0},
        {"p_value": np.inf},
        {"estimate_kind": "per-unit", "per_unit": 1e-300, "change_unit": "ug/m3"},
    ],
)
def test_harmonise_non_finite_or_unrepresentable_raises(row):
    base = {"measure": "MD", "estimate": 1.0, "se": 0.1, "change_direction": "increase"}
    frame = pd.DataFrame([{**base, **row}, {**base, "per_unit": 10.0}])
    if "per_unit" in row:
        frame["estimate_kind"] = "per-unit"
        frame["change_unit"] = "ug/m3"
        frame["estimate"] = [1e10, 1.0]
    with pytest.raises(AnalysisError, match="row 0"):
        harmonise(frame, per_unit_to=10.0)


# ------------------------------------------------------------------------------------------
# the typical within-study variance without cancellation


@pytest.mark.parametrize("w", [1e-300, 1e-150, 1e-20, 1.0, 3.7, 1e20, 1e150, 1e300])
@pytest.mark.parametrize("k", [2, 3, 7, 100])
def test_s2_equal_weights_is_exactly_v(w, k):
    # Higgins & Thompson (2002) eq. 9 with k equal weights w: (k-1)kw/(k²w² - kw²) = 1/w
    weights = np.full(k, w)
    assert s2_typical(weights) == pytest.approx(1.0 / w, rel=4e-16)
    assert cross_sum(weights) == pytest.approx(k * (k - 1) * w * w, rel=4e-16) or w**2 == 0


def test_s2_one_dominant_weight_keeps_the_small_ones():
    # (Σw)² − Σw² = 2·1·1e-17 + 0: the subtraction form gives 0 (or noise) in double precision
    w = np.array([1.0, 1e-17])
    naive = w.sum() ** 2 - np.dot(w, w)
    assert naive == 0.0  # the cancellation this form avoids
    assert cross_sum(w) == pytest.approx(2e-17, rel=1e-15)
    assert s2_typical(w) == pytest.approx(1.0 * (1 + 1e-17) / 2e-17, rel=1e-15)


# ------------------------------------------------------------------------------------------
# scale equivariance over many decades


@pytest.mark.parametrize("power", [-100, -60, -20, -5, 0, 5, 20, 60, 100])
def test_kacker_rescaled_matches_statsmodels_reference(power):
    # source: meta_checks.json kacker_interlab (statsmodels results_meta.py), y·c and v·c²
    c = 10.0**power
    y, v = KACKER_Y * c, KACKER_V * c * c
    for method, name in (("dl", "DL tau2"), ("pm", "PM tau2")):
        expected, tol = check("kacker_interlab", name)
        r = pool(y, v, method=method, ci="wald")
        assert r.tau2 / (c * c) == pytest.approx(expected, abs=tol * 10)
        g = pool_groups(pd.DataFrame({"g": 1, "y": y, "v": v}), ["g"], method=method)
        assert g["tau2"].iloc[0] / (c * c) == pytest.approx(expected, abs=tol * 10)
    expected, tol = check("kacker_interlab", "I2 tau2-based with PM tau2 (fraction)")
    assert pool(y, v, method="pm").i2_tau2 == pytest.approx(expected, abs=tol)
    expected, tol = check("kacker_interlab", "DL mean")
    assert pool(y, v, method="dl", ci="wald").estimate / c == pytest.approx(expected, abs=tol)


pairs = st.lists(
    st.tuples(st.floats(-3, 3, allow_nan=False), st.floats(0.01, 1.0, allow_nan=False)),
    min_size=2,
    max_size=12,
)


@settings(max_examples=80, deadline=None)
@given(
    pairs=pairs,
    power=st.integers(-100, 100),
    shift=st.floats(-50, 50),
    method=st.sampled_from(["dl", "pm", "reml"]),
)
def test_scale_equivariance_property(pairs, power, shift, method):
    """pool(a + c·y, c²·v): estimate a + c·μ, τ² c²·τ², I² and Q unchanged (definitions)."""
    y = np.array([p[0] for p in pairs])
    v = np.array([p[1] for p in pairs])
    c = 10.0**power
    base = pool(y, v, method=method, ci="wald")
    a = shift * c
    r = pool(a + c * y, c * c * v, method=method, ci="wald")
    assert r.tau2 / (c * c) == pytest.approx(base.tau2, rel=1e-6, abs=1e-9)
    assert (r.estimate - a) / c == pytest.approx(
        base.estimate, rel=1e-6, abs=1e-9 * (1 + abs(shift))
    )
    assert r.se / c == pytest.approx(base.se, rel=1e-9)
    assert r.q == pytest.approx(base.q, rel=1e-6, abs=1e-9)
    assert r.i2_tau2 == pytest.approx(base.i2_tau2, rel=1e-6, abs=1e-9)
    g = pool_groups(
        pd.DataFrame({"g": 1, "y": a + c * y, "v": c * c * v}), ["g"], method=method, ci="wald"
    )
    assert g["tau2"].iloc[0] / (c * c) == pytest.approx(base.tau2, rel=1e-6, abs=1e-9)


@settings(max_examples=40, deadline=None)
@given(pairs=pairs, power=st.integers(-100, 100))
def test_direct_tau2_functions_scale(pairs, power):
    y = np.array([p[0] for p in pairs])
    v = np.array([p[1] for p in pairs])
    c = 10.0**power
    assert tau2_dl(y * c, v * c * c) / (c * c) == pytest.approx(tau2_dl(y, v), rel=1e-8, abs=1e-12)
    assert tau2_pm(y * c, v * c * c)[0] / (c * c) == pytest.approx(
        tau2_pm(y, v)[0], rel=1e-8, abs=1e-12
    )
    assert tau2_reml(y * c, v * c * c)[0] / (c * c) == pytest.approx(
        tau2_reml(y, v)[0], rel=1e-7, abs=1e-10
    )
