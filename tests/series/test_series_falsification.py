"""Placebo dates, placebo places and negative controls; the facts they give the appraisal."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from exposhift.appraisal.suggestions import facts_from_record, suggest_levels
from exposhift.series import analyse_series, estimate_its, placebo_dates, placebo_places
from exposhift.series.analysis import SeriesData
from exposhift.series.placebo import rank_and_p, verdict

YEARS = [str(y) for y in range(1990, 2016)]  # 26 yearly points
T = np.arange(len(YEARS))


def _trend_only(seed=5):
    """A pure pre-existing decline and no change at all."""
    rng = np.random.default_rng(seed)
    return 100.0 - 1.5 * T + rng.normal(0, 1.0, len(T))


def test_pure_trend_fools_a_naive_before_after_but_not_segmented_model_with_placebo_dates():
    y = _trend_only()
    cut = YEARS.index("2008")
    # naive before-after: Welch t-test of the means (scipy reference) finds an "effect"
    naive = stats.ttest_ind(y[cut:], y[:cut], equal_var=False)
    assert naive.pvalue < 1e-6 and y[cut:].mean() < y[:cut].mean()
    r = estimate_its(YEARS, y, "2008")
    assert r.effect_ci[0] <= 0.0 <= r.effect_ci[1]  # the segmented model sees no change
    p = placebo_dates(YEARS, y, "2008", real=r)
    assert len(p.effects) == cut - 2 * 3 + 1  # every date with 3 pre-change points each side
    assert p.rank > 2 and p.p_value > 0.10 and p.status == "failed"
    # the naive before-after finds an "effect" at the false dates too: the trend
    assert p.naive_real < 0 and np.all(p.naive_effects < 0)


def test_a_real_level_change_stands_out_among_placebo_dates():
    rng = np.random.default_rng(6)
    y = 100.0 - 1.5 * T - 12.0 * (T >= YEARS.index("2008")) + rng.normal(0, 1.0, len(T))
    p = placebo_dates(YEARS, y, "2008")
    assert p.rank == 1 and p.p_value == pytest.approx(1 / (len(p.effects) + 1))
    assert p.status == "passed"


def test_rank_and_p_value_count_ties_against_the_real_effect():
    # permutation-style p (Abadie et al. 2010): rank / (placebos + 1), worked by hand
    assert rank_and_p(-0.5, [0.1, -0.2, 0.5]) == (2, 0.5)
    assert rank_and_p(0.9, [0.1, 0.2]) == (1, pytest.approx(1 / 3))
    assert verdict(1 / 3, 2) == "inconclusive"  # 3 p values possible: cannot reach 0.10
    assert verdict(0.1, 9) == "passed" and verdict(0.2, 9) == "failed"


def test_placebo_dates_use_only_pre_change_points_and_the_same_model():
    rng = np.random.default_rng(7)
    y = rng.poisson(200 * np.exp(-0.01 * T - 0.3 * (T >= 18))).astype(float)
    p = placebo_dates(YEARS, y, "2008", model="poisson")
    assert all(lab < "2008" for lab in p.labels)
    first = estimate_its(YEARS[:18], y[:18], p.labels[0], model="poisson")
    assert p.effects[0] == pytest.approx(first.effect, rel=1e-8)


def _series(key, y, role="exposed", seed=0):
    return SeriesData(key, tuple(YEARS), np.asarray(y, float), None, "mean", role)


def test_placebo_places_and_negative_control_feed_the_appraisal_check_codes():
    rng = np.random.default_rng(8)
    step = (T >= YEARS.index("2008")) * -10.0
    exposed = _series("E", 80 - 0.5 * T + step + rng.normal(0, 1, len(T)))
    comps = [
        _series(f"C{i}", 70 - 0.5 * T + rng.normal(0, 1, len(T)), "comparison") for i in range(9)
    ]
    neg = _series("N", 50 + 0.2 * T + rng.normal(0, 1, len(T)), "negative-control")
    a = analyse_series(exposed, "2008", comparisons=comps, negative_controls=[neg], seasonal=None)
    assert a.placebo_places is not None and a.placebo_places.rank == 1
    assert a.placebo_places.p_value == pytest.approx(0.1)
    assert set(a.checks_passed) == {"placebo-date", "placebo-place", "negative-control-outcome"}
    # the rubric's suggestions look for these codes: the falsification limit rises
    before = suggest_levels(facts_from_record("its", 18, 8, checks=""))
    after = suggest_levels(facts_from_record("its", 18, 8, checks=";".join(a.checks_passed)))
    assert before["falsification"].max_level == 1
    assert "falsification" not in after or after["falsification"].max_level > 1
    fig = a.figure.to_dict()
    assert len(fig["counterfactual_low"]) == len(YEARS) and fig["change_at"] == "2008"
    assert fig["placebo_effects"] == list(a.placebo_dates.effects)


def test_placebo_places_alone_rank_among_comparisons():
    real = estimate_its(YEARS, 80 - 10.0 * (T >= 18) + np.sin(T), "2008")
    comps = {
        f"C{i}": estimate_its(YEARS, 60 + np.cos(T + i) + 0.2 * i * T, "2008") for i in range(4)
    }
    p = placebo_places(real, comps)
    assert p.rank == 1 and p.status == "inconclusive"  # 5 places: p cannot reach 0.10
