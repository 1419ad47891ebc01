"""Each rate-down and rate-up suggestion on crafted evidence: one case where it fires, one where
it must not. The crafted numbers are chosen so the expected answer follows from the rule as
written in docs/certainty.md; Egger's test is cross-checked against statsmodels OLS.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from exposhift.certainty.facts import CellFacts
from exposhift.certainty.settings import load_certainty_settings
from exposhift.certainty.suggestions import suggest

S = load_certainty_settings(None)


def facts(
    *,
    est=1.5,
    ci=(1.3, 1.7),
    pi=None,
    k=None,
    levels=None,
    weights=None,
    applicability=None,
    tau2=0.0,
    tau2_ci=(0.0, 0.01),
    q_p=0.5,
    scale="log",
    measure="RR",
    status="replicated-place",
    provisional=False,
    imprecise=False,
    expected=1,
    dose=None,
    reversals=(),
    tri=None,
    y=None,
    v=None,
) -> CellFacts:
    k = k or (len(levels) if levels else 4)
    levels = levels if levels is not None else [3] * k
    w = np.asarray(weights if weights is not None else [1.0] * k, float)
    y0 = math.log(est) if scale == "log" else est
    y = np.asarray(y if y is not None else [y0] * k, float)
    v = np.asarray(v if v is not None else [0.01] * k, float)
    events = pd.DataFrame(
        {
            "event_id": [f"E{i}" for i in range(k)],
            "y": y,
            "v": v,
            "weight": w / w.sum(),
            "level": np.asarray(levels, float),
            "applicability": np.asarray(
                applicability if applicability is not None else [3] * k, float
            ),
        }
    )
    natural = {"estimate": est, "ci_lower": ci[0], "ci_upper": ci[1]}
    if pi is not None:
        natural.update(pi_lower=pi[0], pi_upper=pi[1])
    pooled = {
        "k": k,
        "k_events": k,
        "k_estimates": k,
        "measure": measure,
        "scale": scale,
        "estimate": math.log(est) if scale == "log" else est,
        "tau2": tau2,
        "tau2_ci": {"lower": tau2_ci[0], "upper": tau2_ci[1]},
        "q_pvalue": q_p,
        "natural": natural,
    }
    return CellFacts(
        "agent-x",
        "wheeze",
        pooled=pooled,
        events=events,
        status=status,
        status_rule="crafted",
        provisional=provisional,
        imprecise=imprecise,
        expected=expected,
        dose_response=dose or {"run": False, "reason": "not run: crafted"},
        reversals=list(reversals),
        triangulation=tri or {"triangulated": False, "statement": "crafted"},
        n_groups=1,
    )


def rating(f: CellFacts, domain: str) -> str:
    return suggest(f, S).of(domain).rating


# ------------------------------------------------------------------ rating down
def test_bias_fires_on_weight_at_weak():
    assert rating(facts(levels=[1, 1, 3, 3], weights=[3, 3, 1, 1]), "bias") == "down-one"
    assert rating(facts(levels=[0, 1, 1, 3], weights=[3, 3, 3, 0.5]), "bias") == "down-two"
    s = suggest(facts(levels=[1, 1, 3, 3], weights=[3, 3, 1, 1]), S).of("bias")
    assert s.numbers["weight_share_weak"] == pytest.approx(0.75)
    assert "75%" in s.reason


def test_bias_does_not_fire_when_weight_is_on_good_studies():
    assert rating(facts(levels=[1, 3, 3, 3], weights=[1, 3, 3, 3]), "bias") == "none"
    # not appraised counts as weak by default
    assert rating(facts(levels=[np.nan, np.nan, 3, 3], weights=[3, 3, 1, 1]), "bias") == "down-one"


def test_inconsistency_fires_on_heterogeneity_changing_the_conclusion():
    f = facts(est=1.2, ci=(1.1, 1.3), pi=(0.95, 1.5), tau2=0.01, tau2_ci=(0.002, 0.05), q_p=0.01)
    assert rating(f, "inconsistency") == "down-one"
    both = facts(
        est=1.2, ci=(1.1, 1.3), pi=(0.95, 1.5), tau2_ci=(0.002, 0.05), q_p=0.01, status="discordant"
    )
    assert rating(both, "inconsistency") == "down-two"
    assert rating(facts(status="discordant", k=2), "inconsistency") == "down-one"


def test_inconsistency_does_not_fire():
    # PI crosses no effect but heterogeneity is not shown (Q p 0.5, τ² interval from 0)
    f = facts(est=1.2, ci=(1.1, 1.3), pi=(0.95, 1.5), tau2_ci=(0.0, 0.05), q_p=0.5)
    assert rating(f, "inconsistency") == "none"
    # heterogeneity shown but the PI excludes no effect
    g = facts(est=1.5, ci=(1.3, 1.7), pi=(1.1, 2.0), tau2_ci=(0.01, 0.1), q_p=0.01)
    assert rating(g, "inconsistency") == "none"
    assert rating(facts(k=2), "inconsistency") == "not-assessable"


def test_imprecision_against_the_decision_threshold():
    assert rating(facts(est=1.3, ci=(0.95, 1.8)), "imprecision") == "down-one"  # no effect
    assert rating(facts(est=1.3, ci=(1.05, 1.6)), "imprecision") == "down-one"  # crosses 1.1
    assert rating(facts(est=1.0, ci=(0.8, 1.3)), "imprecision") == "down-two"  # both sides
    assert rating(facts(est=1.3, ci=(1.15, 1.5)), "imprecision") == "none"
    assert rating(facts(est=1.04, ci=(1.01, 1.08)), "imprecision") == "none"  # trivial, precise
    r = suggest(facts(est=1.3, ci=(1.15, 1.5)), S).of("imprecision")
    assert "optimal information size not assessed" in r.reason


def test_imprecision_of_differences_without_threshold():
    d = facts(est=-35.0, ci=(-151.0, 80.0), scale="identity", measure="MD")
    assert rating(d, "imprecision") == "down-one"
    assert (
        rating(facts(est=-35.0, ci=(-60.0, -10.0), scale="identity", measure="MD"), "imprecision")
        == "none"
    )


def test_indirectness():
    assert rating(facts(applicability=[1, 1, 1, 3]), "indirectness") == "down-one"
    assert rating(facts(applicability=[1, 3, 3, 3]), "indirectness") == "none"
    assert rating(facts(applicability=[np.nan] * 4), "indirectness") == "not-assessable"


def test_small_study_only_from_ten_events_and_equals_statsmodels():
    assert rating(facts(k=9), "small-study") == "not-assessable"
    rng = np.random.default_rng(1)
    se = np.linspace(0.05, 0.5, 12)
    y = 0.1 + 2.0 * se + rng.normal(0, 0.01, 12)  # strong asymmetry: small events, big effects
    f = facts(k=12, y=y, v=se**2)
    s = suggest(f, S).of("small-study")
    assert s.rating == "down-one"
    ols = sm.OLS(y / se, sm.add_constant(1 / se)).fit()  # Egger 1997 regression by statsmodels
    assert s.numbers["intercept"] == pytest.approx(ols.params[0], rel=1e-9)
    assert s.numbers["pvalue"] == pytest.approx(ols.pvalues[0], rel=1e-6)
    sym = facts(k=12, y=0.1 + 0.3 * se * np.tile([1.0, -1.0], 6), v=se**2)  # symmetric
    assert rating(sym, "small-study") == "none"


# -------------------------------------------------------------------- rating up
def test_large_effect():
    assert rating(facts(est=2.5, ci=(1.8, 3.4)), "large-effect") == "up-one"
    assert rating(facts(est=6.0, ci=(2.5, 12.0)), "large-effect") == "up-two"
    assert rating(facts(est=1.6, ci=(1.3, 2.0)), "large-effect") == "none"
    assert rating(facts(est=2.5, ci=(0.9, 6.0)), "large-effect") == "none"
    assert rating(facts(est=0.3, ci=(0.2, 0.45)), "large-effect") == "up-one"  # 3.3x protective
    # not while risk of bias is a concern
    weak = facts(est=2.5, ci=(1.8, 3.4), levels=[1, 1, 1, 3], weights=[3, 3, 3, 1])
    assert rating(weak, "large-effect") == "none"


def test_dose_response():
    up = {
        "run": True,
        "k": 6,
        "slope": 0.09,
        "slope_ci_lower": 0.02,
        "slope_ci_upper": 0.16,
        "unit": "u",
    }
    flat = {**up, "slope": 0.01, "slope_ci_lower": -0.03, "slope_ci_upper": 0.05}
    assert rating(facts(dose=up), "dose-response") == "up-one"
    assert rating(facts(dose=flat), "dose-response") == "none"
    assert rating(facts(dose=up, expected=-1), "dose-response") == "none"  # wrong direction
    assert rating(facts(), "dose-response") == "not-assessable"


REV = {
    "place": "PRT",
    "decrease_event": "A",
    "decrease_date": "2012",
    "increase_event": "B",
    "increase_date": "2019",
}


def test_reversal():
    assert rating(facts(reversals=[{**REV, "counts": True}]), "reversal") == "up-one"
    assert rating(facts(reversals=[{**REV, "counts": False}]), "reversal") == "none"
    assert (
        rating(facts(reversals=[{**REV, "counts": True}], provisional=True), "reversal") == "none"
    )


def test_replication():
    assert rating(facts(status="replicated-place"), "replication") == "up-one"
    assert rating(facts(status="not-replicated"), "replication") == "none"
    assert rating(facts(status="replicated-place", provisional=True), "replication") == "none"
    # replicated, but its pooled interval includes no effect: imprecision, not a strength
    # (our rule: an imprecise status is rated under imprecision, never rated up)
    assert rating(facts(status="replicated-place", imprecise=True), "replication") == "none"
    # replicated in time only through a counting reversal: rated under reversal, not twice
    only_rev = facts(status="replicated-time", reversals=[{**REV, "counts": True}])
    assert rating(only_rev, "replication") == "none" and rating(only_rev, "reversal") == "up-one"


def test_triangulation():
    assert (
        rating(facts(tri={"triangulated": True, "statement": "agree"}), "triangulation") == "up-one"
    )
    disagree = {"triangulated": True, "families_disagree": True, "statement": "x"}
    assert rating(facts(tri=disagree), "triangulation") == "none"
    assert rating(facts(), "triangulation") == "none"


def test_no_rate_up_from_a_single_event_and_the_cap():
    one = facts(k=1, est=3.0, ci=(2.2, 4.0), tri={"triangulated": True, "statement": "x"})
    assert rating(one, "large-effect") == "none" and rating(one, "triangulation") == "none"
    many = facts(
        est=2.5,
        ci=(2.2, 2.8),
        tri={"triangulated": True, "statement": "x"},
        reversals=[{**REV, "counts": True}],
    )
    s = suggest(many, S)
    ups = sum(d.steps for d in s.domains if d.steps > 0)
    assert ups == 4  # large-effect, reversal, replication, triangulation
    assert s.level == "firm"  # fair + min(4, max_steps_up=2), kept on the scale
    low = suggest(facts(est=1.3, ci=(0.95, 1.8), levels=[1, 1, 1, 1]), S)
    assert low.level == "very limited"  # fair - 2 (bias) - 1 (imprecision), kept on the scale
