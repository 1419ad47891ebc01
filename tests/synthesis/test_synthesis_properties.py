"""Property tests (hypothesis): what must hold for any valid input."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from exposhift.synthesis.grouped import pool_groups
from exposhift.synthesis.pooling import pool

METHODS = ["fe", "dl", "pm", "reml"]

estimates = st.lists(
    st.tuples(
        st.floats(-5, 5, allow_nan=False, allow_infinity=False),
        st.floats(1e-3, 10, allow_nan=False, allow_infinity=False),
    ),
    min_size=1,
    max_size=15,
)


def _arrays(pairs):
    y = np.array([p[0] for p in pairs])
    v = np.array([p[1] for p in pairs])
    return y, v


@settings(max_examples=60, deadline=None)
@given(
    pairs=estimates,
    method=st.sampled_from(METHODS),
    ci=st.sampled_from(["wald", "hksj"]),
    seed=st.integers(0, 2**16),
)
def test_permutation_invariance(pairs, method, ci, seed):
    y, v = _arrays(pairs)
    perm = np.random.default_rng(seed).permutation(y.size)
    a, b = pool(y, v, method, ci), pool(y[perm], v[perm], method, ci)
    scale = 1.0 + np.abs(y).max()
    for f in ("estimate", "se", "ci_lower", "ci_upper", "q", "i2", "pi_lower"):
        x1, x2 = getattr(a, f), getattr(b, f)
        assert (np.isnan(x1) and np.isnan(x2)) or x1 == pytest.approx(
            x2, rel=1e-7, abs=1e-9 * scale
        )
    assert (np.isnan(a.tau2) and np.isnan(b.tau2)) or a.tau2 == pytest.approx(
        b.tau2, rel=1e-6, abs=1e-10 * scale
    )
    assert b.weights == pytest.approx(a.weights[perm], rel=1e-6, abs=1e-12)


@settings(max_examples=80, deadline=None)
@given(
    pairs=estimates,
    method=st.sampled_from(METHODS),
    ci=st.sampled_from(["wald", "hksj"]),
    floor=st.booleans(),
)
def test_invariants(pairs, method, ci, floor):
    y, v = _arrays(pairs)
    r = pool(y, v, method, ci, hksj_floor=floor)
    assert r.ci_lower <= r.estimate <= r.ci_upper  # CI contains the estimate
    if r.k >= 2:
        assert r.tau2 >= 0  # truncated at 0 everywhere
        assert 0.0 <= r.i2 <= 1.0 and 0.0 <= r.i2_tau2 <= 1.0
        assert r.h2 >= 0 and r.h2_tau2 >= 1.0
        assert r.weights.sum() == pytest.approx(1.0) and np.all(r.weights > 0)
        assert np.min(y) - 1e-9 <= r.estimate <= np.max(y) + 1e-9  # a weighted mean
        assert r.converged
    if r.k >= 3:
        assert r.pi_lower <= r.estimate <= r.pi_upper
    if ci == "hksj" and floor and r.k >= 2:
        wald = pool(y, v, method, "wald")
        assert r.ci_upper - r.ci_lower >= (wald.ci_upper - wald.ci_lower) * (1 - 1e-12)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), vmax=st.floats(0.05, 2.0))
def test_hksj_and_wald_agree_with_many_studies_and_tiny_heterogeneity(seed, vmax):
    # With k large and tau2 ~ 0, q = sum w*(y-mu)^2/(k-1) -> 1 (sd ~ sqrt(2/k) = 0.02) and
    # t(k-1) -> z, so the HKSJ interval approaches the Wald one (Hartung & Knapp 2001).
    rng = np.random.default_rng(seed)
    k = 5000
    v = rng.uniform(0.01, vmax, k)
    y = 0.3 + rng.normal(0, 1, k) * np.sqrt(v + 1e-6 * vmax)
    for method in ("dl", "reml"):
        wald = pool(y, v, method, "wald")
        hk = pool(y, v, method, "hksj")
        ratio = (hk.ci_upper - hk.ci_lower) / (wald.ci_upper - wald.ci_lower)
        assert abs(ratio - 1) < 0.1
        assert hk.estimate == wald.estimate
        assert stats.t.isf(0.025, hk.df) / stats.norm.isf(0.025) < 1.001


groups = st.lists(estimates, min_size=1, max_size=8)


@settings(max_examples=40, deadline=None)
@given(gs=groups, method=st.sampled_from(METHODS), ci=st.sampled_from(["wald", "hksj"]))
def test_pool_groups_equals_pool_on_generated_groups(gs, method, ci):
    rows = [(g, y, v) for g, pairs in enumerate(gs) for y, v in pairs]
    frame = pd.DataFrame(rows, columns=["g", "y", "v"])
    out = pool_groups(frame, ["g"], method=method, ci=ci)
    for g, pairs in enumerate(gs):
        y, v = _arrays(pairs)
        r = pool(y, v, method, ci)
        row = out.iloc[g]
        scale = 1.0 + np.abs(y).max()
        assert row["estimate"] == pytest.approx(r.estimate, rel=1e-8, abs=1e-10 * scale)
        assert row["ci_upper"] == pytest.approx(r.ci_upper, rel=1e-8, abs=1e-10 * scale)
        if r.k >= 2:
            assert row["tau2"] == pytest.approx(r.tau2, rel=1e-7, abs=1e-10 * scale)
        assert row["notes"] == "; ".join(r.notes)


@settings(max_examples=200, deadline=None)
@given(
    data=st.lists(
        st.tuples(st.floats(-3, 3, allow_nan=False), st.floats(1e-3, 2.0)), min_size=3, max_size=12
    ),
    method=st.sampled_from(["dl", "pm", "reml"]),
    floor=st.booleans(),
)
def test_prediction_interval_never_narrower_than_ci(data, method, floor):
    # Partlett & Riley 2017 (Stat Med 36:301): with the Wald SE in the PI and the HKSJ SE in the
    # CI the PI can be the narrower one; with the chosen method's SE in both it never is
    y = np.array([d[0] for d in data])
    v = np.array([d[1] for d in data])
    r = pool(y, v, method=method, ci="hksj", hksj_floor=floor)
    assert r.pi_lower <= r.ci_lower + 1e-12
    assert r.pi_upper >= r.ci_upper - 1e-12
    g = pool_groups(
        pd.DataFrame({"g": 0, "y": y, "v": v}), ["g"], method=method, ci="hksj", hksj_floor=floor
    )
    assert g["pi_lower"].iloc[0] <= g["ci_lower"].iloc[0] + 1e-12
    assert g["pi_upper"].iloc[0] >= g["ci_upper"].iloc[0] - 1e-12
