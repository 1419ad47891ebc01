"""pool(): sourced reference values, second routes through scipy, and edge cases.

Reference values: tests/data/meta_checks.json, Kacker (2004, Metrologia 41:132) interlaboratory
data with expected values that the statsmodels authors generated with an external reference
implementation (statsmodels/stats/tests/results/results_meta.py), status "external-reference".
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from scipy import optimize, stats
from synthesis_helpers import KACKER_V, KACKER_Y, check, restricted_nll

import exposhift
from exposhift.errors import AnalysisError
from exposhift.synthesis.pooling import PI_NOTE_FEW, SCALAR_FIELDS, PoolResult, pool


def approx(group: str, quantity: str):
    expected, tol = check(group, quantity)
    return pytest.approx(expected, abs=tol)


# ---------------------------------------------------------------- Kacker interlab (external ref)


def test_fixed_effect_matches_reference():
    # source: meta_checks.json kacker_interlab (statsmodels results_meta.py reference values)
    r = pool(KACKER_Y, KACKER_V, method="fe", ci="wald")
    assert r.estimate == approx("kacker_interlab", "FE mean")
    assert r.se == approx("kacker_interlab", "FE SE")
    assert r.ci_lower == approx("kacker_interlab", "FE 95% CI lower (z)")
    assert r.ci_upper == approx("kacker_interlab", "FE 95% CI upper (z)")
    assert r.tau2 == 0.0


def test_heterogeneity_statistics_match_reference():
    # source: meta_checks.json kacker_interlab; Q, p(Q), Q-based I2 and H2 (Higgins & Thompson 2002)
    for method in ("fe", "dl", "pm", "reml"):
        r = pool(KACKER_Y, KACKER_V, method=method)
        assert r.q == approx("kacker_interlab", "Q")
        assert r.q_pvalue == approx("kacker_interlab", "p(Q), chi2 df=8")
        assert r.i2 == approx("kacker_interlab", "I2 (Q-based, fraction)")  # Q-based every method
        assert r.h2 == approx("kacker_interlab", "H2 = Q/df")
        assert r.q_df == 8


def test_dersimonian_laird_matches_reference():
    # source: meta_checks.json kacker_interlab (DL rows)
    r = pool(KACKER_Y, KACKER_V, method="dl", ci="wald")
    assert r.tau2 == approx("kacker_interlab", "DL tau2")
    assert r.estimate == approx("kacker_interlab", "DL mean")
    assert r.se == approx("kacker_interlab", "DL SE")
    assert r.ci_lower == approx("kacker_interlab", "DL 95% CI lower (z)")
    assert r.ci_upper == approx("kacker_interlab", "DL 95% CI upper (z)")
    # for DL the tau2-based I2 equals the Q-based one (meta_checks.json conventions)
    assert r.i2_tau2 == pytest.approx(r.i2, abs=1e-12)


def test_dl_hksj_matches_reference():
    # source: meta_checks.json kacker_interlab (DL+HKSJ rows: t with 8 df, untruncated scale)
    r = pool(KACKER_Y, KACKER_V, method="dl", ci="hksj")
    assert r.se == approx("kacker_interlab", "DL+HKSJ SE")
    assert r.ci_lower == approx("kacker_interlab", "DL+HKSJ 95% CI lower (t, df=8)")
    assert r.ci_upper == approx("kacker_interlab", "DL+HKSJ 95% CI upper (t, df=8)")
    assert r.pvalue == approx("kacker_interlab", "DL+HKSJ p (t, df=8)")
    assert r.df == 8


def test_paule_mandel_matches_reference():
    # source: meta_checks.json kacker_interlab (PM rows, tau2-based I2 and H2 with PM tau2)
    r = pool(KACKER_Y, KACKER_V, method="pm", ci="wald")
    assert r.tau2 == approx("kacker_interlab", "PM tau2")
    assert r.estimate == approx("kacker_interlab", "PM mean")
    assert r.se == approx("kacker_interlab", "PM SE")
    assert r.ci_lower == approx("kacker_interlab", "PM 95% CI lower (z)")
    assert r.ci_upper == approx("kacker_interlab", "PM 95% CI upper (z)")
    assert r.i2_tau2 == approx("kacker_interlab", "I2 tau2-based with PM tau2 (fraction)")
    assert r.h2_tau2 == approx("kacker_interlab", "H2 tau2-based with PM tau2")
    assert r.converged


def test_paule_mandel_solves_its_estimating_equation():
    # definition (DerSimonian & Kacker 2007): sum w*(y - mu*)^2 = k - 1 at the PM tau2
    r = pool(KACKER_Y, KACKER_V, method="pm", ci="hksj")
    w = 1 / (KACKER_V + r.tau2)
    mu = w @ KACKER_Y / w.sum()
    assert w @ (KACKER_Y - mu) ** 2 == pytest.approx(8, rel=1e-12)
    # hence the HKSJ scale is exactly 1 for PM (the estimating equation itself)
    assert r.hksj_scale == pytest.approx(1.0, rel=1e-12)


# ---------------------------------------------------------------- REML against scipy


def _reml_by_scipy(y, v):
    """Direct numerical maximisation of the restricted likelihood (bounded Brent, scipy)."""
    upper = 10 * (np.var(y) + v.max())
    res = optimize.minimize_scalar(
        lambda t: restricted_nll(y, v, t),
        bounds=(0.0, upper),
        method="bounded",
        options={"xatol": 1e-13, "maxiter": 2000},
    )
    # the maximiser may sit on the boundary 0
    return 0.0 if restricted_nll(y, v, 0.0) <= res.fun else res.x


def test_reml_matches_direct_maximisation_on_kacker():
    # second route: scipy.optimize on the restricted likelihood written out in synthesis_helpers
    r = pool(KACKER_Y, KACKER_V, method="reml")
    assert r.converged and r.iterations < 50
    assert r.tau2 == pytest.approx(_reml_by_scipy(KACKER_Y, KACKER_V), rel=1e-6)
    # the score vanishes at the REML estimate: likelihood no higher on either side
    nll = restricted_nll(KACKER_Y, KACKER_V, r.tau2)
    assert nll <= restricted_nll(KACKER_Y, KACKER_V, r.tau2 * (1 + 1e-4))
    assert nll <= restricted_nll(KACKER_Y, KACKER_V, r.tau2 * (1 - 1e-4))


@pytest.mark.parametrize("seed", range(40))
def test_reml_matches_direct_maximisation_on_random_sets(seed):
    # second route: scipy.optimize (includes boundary cases where the maximum is at tau2 = 0)
    rng = np.random.default_rng(seed)
    k = int(rng.integers(2, 25))
    v = rng.uniform(0.01, 1.0, k)
    y = rng.normal(0, 1, k) * rng.choice([0.0, 0.3, 1.0]) + rng.normal(0, 1, k) * np.sqrt(v)
    r = pool(y, v, method="reml")
    ref = _reml_by_scipy(y, v)
    assert r.converged
    assert r.tau2 == pytest.approx(ref, abs=1e-7 * (1 + ref))
    assert restricted_nll(y, v, r.tau2) <= restricted_nll(y, v, ref) + 1e-10


# ---------------------------------------------------------------- intervals


def test_hksj_interval_formula_against_scipy_t():
    # IntHout et al. 2014 (meta_checks.json conventions 'hksj'): q = sum w*(y-mu)^2/(k-1),
    # SE = sqrt(q / sum w*), t quantile with k - 1 df from scipy.stats
    r = pool(KACKER_Y, KACKER_V, method="reml", ci="hksj")
    w = 1 / (KACKER_V + r.tau2)
    q = w @ (KACKER_Y - r.estimate) ** 2 / 8
    se = np.sqrt(q / w.sum())
    t = stats.t.isf(0.025, 8)
    assert r.se == pytest.approx(se, rel=1e-12)
    assert (r.ci_lower, r.ci_upper) == pytest.approx((r.estimate - t * se, r.estimate + t * se))


def test_hksj_untruncated_can_be_narrower_than_wald_and_floor_prevents_it():
    # estimates that agree more than their variances predict: q < 1 (IntHout et al. 2014 discuss
    # this; the floor max(q, 1) is Roever, Knapp & Friede 2015)
    y = np.array([0.10, 0.11, 0.09, 0.10, 0.105, 0.095])
    v = np.full(6, 0.04)
    wald = pool(y, v, method="dl", ci="wald")
    raw = pool(y, v, method="dl", ci="hksj", hksj_floor=False)
    floored = pool(y, v, method="dl", ci="hksj", hksj_floor=True)
    width = lambda r: r.ci_upper - r.ci_lower  # noqa: E731
    assert raw.hksj_scale < 1
    assert width(raw) < width(wald)
    assert any("narrower than the Wald" in n for n in raw.notes)
    assert width(floored) >= width(wald)
    assert floored.se == pytest.approx(wald.se)  # max(q, 1) = 1 here
    assert any("floored" in n for n in floored.notes)


def test_prediction_interval_formula():
    # Higgins, Thompson & Spiegelhalter 2009: mu +/- t(k-2) sqrt(tau2 + SE^2), with the SE of
    # the chosen CI method (Partlett & Riley 2017, Stat Med 36:301): Wald SE for a Wald
    # interval, the (floored) HKSJ SE for an HKSJ interval
    wald = pool(KACKER_Y, KACKER_V, method="dl", ci="wald")
    half = stats.t.isf(0.025, 7) * np.sqrt(wald.tau2 + wald.se**2)
    assert wald.pred_int() == pytest.approx((wald.estimate - half, wald.estimate + half), rel=1e-12)
    r = pool(KACKER_Y, KACKER_V, method="dl", ci="hksj")
    half = stats.t.isf(0.025, 7) * np.sqrt(r.tau2 + r.se**2)
    assert r.se >= wald.se
    assert r.pred_int() == pytest.approx((r.estimate - half, r.estimate + half), rel=1e-12)
    assert r.pi_note == ""


def test_two_equal_estimates_do_not_collapse_the_interval():
    # two equal estimates, z = 0.5 each: untruncated HKSJ gives a zero-width interval and
    # p = 0 (q = 0); the default floor (Roever, Knapp & Friede 2015) gives the HKSJ formula with
    # q = 1: SE = sqrt(1 / sum w), t with 1 df -- computed here from the formula
    y, v = np.array([0.5, 0.5]), np.array([1.0, 1.0])
    raw = pool(y, v, method="reml", ci="hksj", hksj_floor=False)
    assert raw.ci_upper - raw.ci_lower == pytest.approx(0.0, abs=1e-12)
    r = pool(y, v, method="reml", ci="hksj")
    se = np.sqrt(1 / 2.0)
    assert r.se == pytest.approx(se, rel=1e-12)
    assert r.ci_upper - r.ci_lower == pytest.approx(2 * stats.t.isf(0.025, 1) * se, rel=1e-12)
    assert r.pvalue == pytest.approx(2 * stats.t.sf(0.5 / se, 1), rel=1e-12)
    assert r.pvalue > 0.4


@pytest.mark.parametrize("k", [1, 2])
def test_prediction_interval_needs_three_estimates(k):
    r = pool(KACKER_Y[:k], KACKER_V[:k])
    assert np.isnan(r.pi_lower) and np.isnan(r.pi_upper)
    assert r.pi_note == PI_NOTE_FEW


def test_alpha_changes_the_level():
    r90 = pool(KACKER_Y, KACKER_V, method="fe", ci="wald", alpha=0.10)
    z = stats.norm.isf(0.05)
    assert r90.ci_upper - r90.estimate == pytest.approx(z * r90.se, rel=1e-12)


# ---------------------------------------------------------------- edge cases and errors


@pytest.mark.parametrize("method", ["fe", "dl", "pm", "reml"])
@pytest.mark.parametrize("ci", ["wald", "hksj"])
def test_single_estimate_is_returned_with_a_note(method, ci):
    r = pool([0.4], [0.01], method=method, ci=ci)
    assert r.k == 1 and r.estimate == 0.4 and r.se == pytest.approx(0.1)
    assert r.ci_method == "wald"
    assert r.conf_int() == pytest.approx((0.4 - 1.959964 * 0.1, 0.4 + 1.959964 * 0.1), abs=1e-6)
    assert np.isnan(r.tau2) and np.isnan(r.i2) and np.isnan(r.q_pvalue)
    assert "single estimate" in r.notes[0]


def test_tau2_truncated_at_zero_with_a_note():
    y = np.array([0.1, 0.1001, 0.0999])
    v = np.array([0.1, 0.2, 0.3])
    for method in ("dl", "pm", "reml"):
        r = pool(y, v, method=method)
        assert r.tau2 == 0.0
        assert r.i2 == 0.0
        assert any("truncated" in n for n in r.notes)


@pytest.mark.parametrize(
    ("y", "v", "words"),
    [
        ([0.1, 0.2], [0.1, 0.0], "zero, negative or not finite"),
        ([0.1, 0.2], [0.1, -0.2], "zero, negative or not finite"),
        ([0.1, 0.2], [0.1, np.nan], "zero, negative or not finite"),
        ([0.1, np.inf], [0.1, 0.1], "not finite"),
        ([0.1, 0.2, 0.3], [0.1, 0.1], "3 estimates but 2 variances"),
        ([], [], "nothing to pool"),
    ],
)
def test_bad_inputs_raise_analysis_error(y, v, words):
    with pytest.raises(AnalysisError, match=words):
        pool(y, v)


def test_unknown_options_raise():
    with pytest.raises(AnalysisError, match="unknown pooling method 'ml'"):
        pool([1, 2], [1, 1], method="ml")
    with pytest.raises(AnalysisError, match="confidence-interval method 'profile'"):
        pool([1, 2], [1, 1], ci="profile")
    with pytest.raises(AnalysisError, match="alpha"):
        pool([1, 2], [1, 1], alpha=1.5)


def test_result_object():
    r = exposhift.pool(KACKER_Y, KACKER_V)  # the lazy top-level name
    assert isinstance(r, PoolResult) and exposhift.PoolResult is PoolResult
    with pytest.raises(dataclasses.FrozenInstanceError):
        r.estimate = 0.0  # type: ignore[misc]
    assert r.weights.sum() == pytest.approx(1.0)
    assert not r.weights.flags.writeable
    assert list(r.scalars()) == list(SCALAR_FIELDS)
    frame = r.summary_frame(labels=[f"lab{i}" for i in range(9)])
    assert len(frame) == 11 and frame["label"].iloc[-2].startswith("pooled (reml, hksj)")
    assert frame["estimate"].iloc[-2] == r.estimate
    with pytest.raises(AnalysisError, match="3 labels for 9"):
        r.summary_frame(labels=["a", "b", "c"])
