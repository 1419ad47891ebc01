"""Cross-check of DL and PM against statsmodels' combine_effects (a general-purpose library).

statsmodels 0.14/0.15 ``combine_effects`` is valid for DL only when Q >= k - 1 (it does not
truncate tau2 at 0) and for PM when its iteration converges to the root of the estimating
equation (its default tolerance is 1e-5 on that equation, so we pass a tight ``atol``).
"""

from __future__ import annotations

import numpy as np
import pytest
from statsmodels.stats.meta_analysis import combine_effects
from synthesis_helpers import KACKER_V, KACKER_Y

from exposhift.synthesis.pooling import cochran_q, pool


def _sets(n: int, seed: int):
    rng = np.random.default_rng(seed)
    for _ in range(n):
        k = int(rng.integers(3, 30))
        v = rng.uniform(0.01, 0.5, k)
        y = rng.normal(0, 1, k) * rng.uniform(0.2, 1.0) + rng.normal(0, 1, k) * np.sqrt(v)
        yield y, v


def test_dl_agrees_with_statsmodels_where_q_at_least_k_minus_1():
    checked = 0
    for y, v in _sets(60, seed=11):
        _, q = cochran_q(y, v)
        if q < y.size - 1:
            continue
        sm = combine_effects(y, v, method_re="dl")
        ours = pool(y, v, method="dl", ci="wald")
        assert ours.tau2 == pytest.approx(sm.tau2, rel=1e-10, abs=1e-14)
        assert ours.estimate == pytest.approx(sm.mean_effect_re, rel=1e-10, abs=1e-12)
        assert ours.se == pytest.approx(sm.sd_eff_w_re, rel=1e-10)
        assert ours.q == pytest.approx(sm.q, rel=1e-10)
        hk = pool(y, v, method="dl", ci="hksj", hksj_floor=False)  # statsmodels: untruncated
        assert hk.se == pytest.approx(sm.sd_eff_w_re_hksj, rel=1e-9)
        checked += 1
    assert checked >= 30  # the generator gives mostly heterogeneous sets


def test_pm_agrees_with_statsmodels_where_its_iteration_is_valid():
    checked = 0
    for y, v in _sets(60, seed=12):
        sm = combine_effects(y, v, method_re="pm", atol=1e-13, maxiter=500)
        w = 1 / (v + sm.tau2)
        mu = w @ y / w.sum()
        valid = abs(w @ (y - mu) ** 2 - (y.size - 1)) < 1e-8 or (
            sm.tau2 == 0 and cochran_q(y, v)[1] <= y.size - 1
        )
        if not valid:
            continue
        ours = pool(y, v, method="pm", ci="wald")
        assert ours.tau2 == pytest.approx(sm.tau2, rel=1e-8, abs=1e-12)
        assert ours.estimate == pytest.approx(sm.mean_effect_re, rel=1e-8, abs=1e-12)
        assert ours.se == pytest.approx(sm.sd_eff_w_re, rel=1e-8)
        checked += 1
    assert checked >= 30


def test_kacker_pm_and_dl_agree_with_statsmodels():
    # the same data set the statsmodels authors test against their external reference
    for method in ("dl", "pm"):
        sm = combine_effects(KACKER_Y, KACKER_V, method_re=method, atol=1e-13, maxiter=500)
        ours = pool(KACKER_Y, KACKER_V, method=method, ci="wald")
        assert ours.tau2 == pytest.approx(sm.tau2, rel=1e-9)
        assert ours.estimate == pytest.approx(sm.mean_effect_re, rel=1e-12)


def test_q_below_k_minus_1_statsmodels_dl_goes_negative_and_we_truncate():
    # homogeneous estimates: Q < k - 1. statsmodels keeps the negative moment estimate, so its
    # random-effects weights 1/(v + tau2) can turn negative; DerSimonian & Laird (1986) truncate
    # tau2 at 0, which makes the random-effects result equal the fixed-effect one.
    y = np.array([0.20, 0.21, 0.19, 0.205, 0.195])
    v = np.array([0.010, 0.020, 0.015, 0.012, 0.018])
    _, q = cochran_q(y, v)
    assert q < y.size - 1
    # its HKSJ variance becomes negative too: numpy warns when statsmodels takes its root
    with pytest.warns(RuntimeWarning, match="invalid value encountered in sqrt"):
        sm = combine_effects(y, v, method_re="dl")
    assert sm.tau2 < 0  # the weakness documented in METHODS.md section 4
    assert np.any(v + sm.tau2 < 0)  # here even a negative weight
    ours = pool(y, v, method="dl", ci="wald")
    fe = pool(y, v, method="fe", ci="wald")
    assert ours.tau2 == 0.0
    assert ours.estimate == pytest.approx(fe.estimate, rel=1e-14)
    assert ours.se == pytest.approx(fe.se, rel=1e-14)
    assert np.all(ours.weights > 0)
    assert ours.i2 == 0.0 and sm.i2 < 0  # statsmodels' I2 = 1 - 1/H2 is not truncated either


def test_statsmodels_pm_started_above_the_root_stops_at_zero_and_we_do_not():
    # statsmodels' PM iteration sets tau2 = 0 as soon as the estimating equation is negative,
    # which is the case whenever it starts above the root; our bracketing solver has no start.
    sm = combine_effects(KACKER_Y, KACKER_V, method_re="pm", tau2_start=5.0)
    assert sm.tau2 == 0
    ours = pool(KACKER_Y, KACKER_V, method="pm")
    assert ours.tau2 > 0.7
