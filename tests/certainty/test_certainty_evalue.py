"""E-values (VanderWeele & Ding 2017, Ann Intern Med 167:268) against worked numbers and a
direct computation in the test.

Sources of the expected values:

* smoking and lung cancer, RR 10.73 (95% CI 8.02 to 14.36): E-values 20.95 and 15.52 — the
  Hammond & Horn example of Ding & VanderWeele 2016 (Epidemiology 27:368), as reproduced in a
  public tutorial on the method (secondary source, not checked against the paper);
* breastfeeding and infant respiratory death, RR 3.9 (1.8 to 8.7): E-value of the lower limit
  3.0 — the worked example of VanderWeele & Ding 2017 (from memory, not checked against the
  paper); the point E-value is checked only by the direct computation;
* every other expected value is computed in the test from the paper's formulas, written out
  here independently of the library.
"""

from __future__ import annotations

import math

import pytest

import exposhift
from exposhift.errors import AnalysisError
from exposhift.synthesis.evalue import e_value, e_value_of_pooled


def direct(rr: float) -> float:
    """The paper's formula, written out in the test (RR below 1 inverted first)."""
    r = rr if rr >= 1 else 1 / rr
    return r + math.sqrt(r * r - r)


def test_lazy_top_level_export():
    assert exposhift.e_value is e_value
    assert "e_value" in exposhift.__all__


def test_smoking_example_secondary_source():
    ev = e_value(10.73, 8.02, 14.36)
    assert ev.point == pytest.approx(20.95, abs=0.005)  # secondary source (see module doc)
    assert ev.ci == pytest.approx(15.52, abs=0.005)
    assert ev.point == pytest.approx(direct(10.73), rel=1e-12)


def test_breastfeeding_example_from_memory():
    ev = e_value(3.9, 1.8, 8.7)
    assert ev.ci == pytest.approx(3.0, abs=1e-9)  # from memory: 1.8 + sqrt(1.8 * 0.8) = 3
    assert ev.point == pytest.approx(direct(3.9), rel=1e-12)


def test_protective_ratio_uses_the_upper_limit():
    ev = e_value(0.8, 0.7, 0.9)
    assert ev.point == pytest.approx(direct(1 / 0.8))
    assert ev.ci == pytest.approx(direct(1 / 0.9))


@pytest.mark.parametrize("est,lo,hi", [(1.3, 0.9, 1.8), (0.7, 0.4, 1.2), (1.2, 1.0, 1.4)])
def test_interval_including_no_effect_gives_one(est, lo, hi):
    ev = e_value(est, lo, hi)
    assert ev.ci == 1.0
    assert ev.point == pytest.approx(direct(est))


def test_no_effect_point_is_one_and_no_interval_is_none():
    assert e_value(1.0).point == 1.0
    assert e_value(2.0).ci is None


def test_odds_ratio_common_outcome_square_root():
    # VanderWeele & Ding 2017: common outcome (>= 15 %), RR ≈ sqrt(OR)
    ev = e_value(4.0, 2.25, 9.0, measure="OR", baseline_risk=0.3)
    assert ev.rr == pytest.approx(2.0)
    assert ev.point == pytest.approx(direct(2.0))
    assert ev.ci == pytest.approx(direct(1.5))
    rare = e_value(4.0, measure="OR", baseline_risk=0.05)
    assert rare.point == pytest.approx(direct(4.0))
    assumed = e_value(4.0, measure="OR")
    assert "assumed rare" in assumed.conversion and assumed.point == pytest.approx(direct(4.0))


def test_hazard_ratio_common_outcome_conversion():
    hr = 2.0
    rr = (1 - 0.5 ** math.sqrt(hr)) / (1 - 0.5 ** math.sqrt(1 / hr))  # the paper's formula
    ev = e_value(hr, measure="HR", baseline_risk=0.2)
    assert ev.rr == pytest.approx(rr)
    assert ev.point == pytest.approx(direct(rr))


def test_standardised_difference_approximation():
    d, se = 0.5, 0.1
    lo_rr = math.exp(0.91 * d - 1.78 * se)  # the paper's approximate interval
    ev = e_value(d, se=se, measure="SMD")
    assert ev.rr == pytest.approx(math.exp(0.91 * d))
    assert ev.point == pytest.approx(direct(math.exp(0.91 * d)))
    assert ev.ci == pytest.approx(direct(lo_rr))
    with_ci = e_value(d, d - 1.959963984540054 * se, d + 1.959963984540054 * se, measure="SMD")
    assert with_ci.ci == pytest.approx(ev.ci)


@pytest.mark.parametrize("measure", ["MD", "RD", "beta"])
def test_raw_differences_are_not_defined_with_a_reason(measure):
    ev = e_value(3.0, 1.0, 5.0, measure=measure)
    assert not ev.defined and ev.point is None
    assert "standard deviation" in ev.reason
    assert ev.words().startswith("E-value not defined")


def test_bad_input_raises():
    with pytest.raises(AnalysisError, match="swap"):
        e_value(1.5, 2.0, 1.2)
    with pytest.raises(AnalysisError, match="baseline_risk"):
        e_value(1.5, measure="OR", baseline_risk=15)
    assert not e_value(-0.2, measure="RR").defined  # a log ratio given by mistake


def test_pooled_labels():
    nat = {"estimate": 1.2, "ci_lower": 1.1, "ci_upper": 1.3}
    mixed = e_value_of_pooled(nat, "OR/RR")
    assert mixed.defined and "read as a risk ratio" in mixed.conversion
    assert mixed.point == pytest.approx(direct(1.2))
    pct = e_value_of_pooled(nat, "pct_change")
    assert pct.defined and pct.point == pytest.approx(direct(1.2))
    assert not e_value_of_pooled({"estimate": -35.0}, "MD").defined
