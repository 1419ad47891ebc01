"""Each replication status from a small crafted evidence base (pure level, DataFrames in)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from replication_helpers import frame, unit
from scipy import stats

from exposhift.replication.report import replication_report
from exposhift.replication.settings import DEFAULTS
from exposhift.replication.status import STATUSES, analyse, replication_statuses
from exposhift.synthesis.sensitivity import subgroup_test


def status_of(df, settings=DEFAULTS):
    st = replication_statuses(df, settings=settings)
    assert len(st) == 1
    return st.iloc[0]


def convergent_base():
    return frame(
        unit("A", "FRA", 2000, "decrease", 0.20, 0.05, 2),
        unit("B", "ESP", 2004, "decrease", 0.15, 0.05, 3, family="weighted-fit"),
        unit("C", "FRA", 2010, "decrease", 0.10, 0.04, 2),
        unit("D", "FRA", 2015, "increase", 0.12, 0.04, 2),
    )


def test_convergent_needs_place_time_and_two_design_families():
    row = status_of(convergent_base())
    assert row["status"] == "convergent"
    assert row["places_count"] == 2 and row["time_periods"] == 3 and row["reversal"]
    assert row["families_concordant"] == 2 and row["triangulated"]
    assert "replicated in place (2 places (ESP, FRA))" in row["rule"]
    assert row["rule"].startswith("convergent: provisional")  # direction inferred
    # without the second design family the same events are replicated in place and time only
    one_family = convergent_base().assign(design_family="common-trend")
    assert status_of(one_family)["status"] == "replicated-place"
    assert "also replicated in time" in status_of(one_family)["rule"]


def test_replicated_place_counts_distinct_places_at_level_two():
    df = frame(
        unit("A", "FRA", 2000, "decrease", 0.2, 0.05, 2),
        unit("B", "ESP", 2001, "decrease", 0.2, 0.08, 3),  # z = 2.5: significant
        unit("C", "ITA", 2002, "decrease", 0.3, 0.05, 1),
    )  # weak: does not count
    row = status_of(df)
    assert row["status"] == "replicated-place"
    assert row["places_count"] == 2 and row["places_list"] == "ESP, FRA"
    assert "(rule: ≥ 2 places)" in row["rule"]
    # the threshold is a setting
    assert status_of(df, DEFAULTS.with_(min_places=3))["status"] == "not-replicated"


def test_replicated_time_in_one_place_and_the_period_setting():
    df = frame(
        unit("A", "PRT", 2000, "decrease", 0.2, 0.05, 2),
        unit("B", "PRT", 2008, "decrease", 0.15, 0.05, 2),
    )
    row = status_of(df)
    assert row["status"] == "replicated-time"
    assert row["time_place"] == "PRT" and row["time_periods"] == 2 and not row["reversal"]
    assert "in PRT, 2 separate periods" in row["rule"]
    # change dates less than min_months_apart apart fall into one period
    merged = status_of(df, DEFAULTS.with_(min_months_apart=120))
    assert merged["status"] == "not-replicated" and merged["time_periods"] == 1


def test_reversal_counts_as_temporal_replication():
    # a decrease lowered the outcome (raw -0.2 -> aligned +0.2); the policy removal raised it
    # back (raw +0.1, aligned +0.1): the outcome moved back
    df = frame(
        unit("DOWN", "PRT", 2000, "decrease", 0.2, 0.05, 2),
        unit("UP", "PRT", 2010, "increase", 0.1, 0.04, 2),
    )
    row = status_of(df)
    assert row["status"] == "replicated-time" and row["reversal"]
    assert row["reversal_place"] == "PRT" and "including a reversal in PRT" in row["rule"]
    rep = replication_report(df, "agent", "o1")
    assert rep.reversals == [
        {
            "place": "PRT",
            "decrease_event": "DOWN",
            "decrease_date": "2000",
            "increase_event": "UP",
            "increase_date": "2010",
            "outcome_moved_back": True,
            "counts": True,
        }
    ]


def test_reversal_without_the_outcome_moving_back_is_not_replication():
    # after the removal the outcome kept falling: raw -0.05 -> aligned -0.05 (not significant)
    df = frame(
        unit("DOWN", "PRT", 2000, "decrease", 0.2, 0.05, 2),
        unit("UP", "PRT", 2010, "increase", -0.05, 0.04, 2),
    )
    row = status_of(df)
    assert row["status"] == "not-replicated" and not row["reversal"]
    rev = replication_report(df, "agent", "o1").reversals
    assert len(rev) == 1 and not rev[0]["outcome_moved_back"] and not rev[0]["counts"]


def test_discordant_significant_events_in_opposite_directions():
    df = frame(
        unit("A", "FRA", 2000, "decrease", 0.30, 0.05, 2),
        unit("B", "ESP", 2001, "decrease", -0.30, 0.05, 2),
        unit("C", "ITA", 2002, "decrease", 0.20, 0.05, 2),
    )
    row = status_of(df)
    assert row["status"] == "discordant" and row["sig_pos"] and row["sig_neg"]
    assert "significant effects in opposite directions" in row["rule"]
    # a significant opposite effect at level 1 does not make the evidence discordant
    weak = df.assign(level=[2.0, 1.0, 2.0])
    assert status_of(weak)["status"] == "replicated-place"


def test_discordant_design_families_with_q_between():
    # no single event is significant (|z| = 1.4 to 1.8), but the two families' pooled
    # estimates point in opposite directions and differ (Q-between p < 0.05)
    rows = [
        unit(f"P{i}", c, 2000 + i, "decrease", y, 0.05, 2)
        for i, (c, y) in enumerate([("FRA", 0.07), ("ESP", 0.08), ("ITA", 0.09)])
    ]
    rows += [
        unit(f"N{i}", c, 2000 + i, "decrease", y, 0.05, 2, family="weighted-fit")
        for i, (c, y) in enumerate([("DEU", -0.07), ("AUT", -0.08), ("BEL", -0.09)])
    ]
    df = frame(*rows)
    row = status_of(df)
    assert not (row["sig_pos"] and row["sig_neg"])
    assert row["families_disagree"] and row["status"] == "discordant"
    assert (
        "design families (common-trend, weighted-fit) point in opposite directions" in row["rule"]
    )
    # Q-between cross-checked against the synthesis engine's subgroup test (Borenstein et al.
    # 2009 ch. 19, separate tau2 per subgroup)
    ref = subgroup_test(df["y"], df["v"], df["design_family"], method="reml", ci="hksj")
    assert row["q_between"] == pytest.approx(ref.q_between, rel=1e-9)
    assert row["q_between_p"] == pytest.approx(ref.pvalue, rel=1e-9)


def test_family_test_matches_a_reml_meta_regression_built_from_scipy_and_statsmodels():
    # one estimate per event here, so the three-level model is the two-level meta-regression
    # y_i = beta_family + u_i, var(u_i) = tau2: tau2 by a direct maximisation of the restricted
    # likelihood (scipy), the family coefficients and their covariance by statsmodels WLS with
    # weights 1/(v + tau2) at a fixed scale of 1; the Wald chi2 of beta_1 - beta_2 = 0
    import statsmodels.api as sm
    from scipy import optimize

    df = convergent_base()
    row = status_of(df)
    good = df[df["level"] >= 2]
    y, v = good["y"].to_numpy(), good["v"].to_numpy()
    X = pd.get_dummies(good["design_family"]).to_numpy(dtype=float)

    def nll(t2):
        w = 1 / (v + t2)
        xtwx = X.T @ (w[:, None] * X)
        b = np.linalg.solve(xtwx, X.T @ (w * y))
        r = y - X @ b
        return 0.5 * (np.sum(np.log(v + t2)) + np.linalg.slogdet(xtwx)[1] + np.sum(w * r * r))

    t2 = optimize.minimize_scalar(nll, bounds=(0, 1), method="bounded", options={"xatol": 1e-12}).x
    t2 = t2 if nll(t2) < nll(0.0) else 0.0
    fit = sm.WLS(y, X, weights=1 / (v + t2)).fit(cov_type="fixed scale")
    d = fit.params[0] - fit.params[1]
    cov = fit.cov_params()
    chi2 = d * d / (cov[0, 0] + cov[1, 1] - 2 * cov[0, 1])
    assert row["q_between"] == pytest.approx(chi2, rel=1e-5)
    assert row["q_between_df"] == 1
    assert row["q_between_p"] == pytest.approx(stats.chi2.sf(chi2, 1), rel=1e-5)


def test_uncontrolled_designs_support_but_never_triangulate():
    df = frame(
        unit("A", "FRA", 2000, "decrease", 0.2, 0.05, 2),
        unit("B", "ESP", 2001, "decrease", 0.2, 0.05, 2, family="uncontrolled"),
    )
    row = status_of(df)
    assert row["status"] == "replicated-place"
    assert row["n_families"] == 1 and not row["triangulated"]


def test_weak_only_when_nothing_reaches_level_two():
    df = frame(
        unit("A", "FRA", 2000, "decrease", 0.2, 0.05, 1),
        unit("B", "ESP", 2001, "decrease", 0.2, 0.05, None),
        unit("C", "ITA", 2002, "decrease", 0.2, 0.05, 0),
    )
    row = status_of(df)
    assert row["status"] == "weak-only"
    assert row["rule"].startswith(
        "weak-only: none of the 3 independent events has evidence at "
        "level ≥ 2 (2 weaker, 1 not appraised)"
    )


def test_single_event_when_no_rule_is_met():
    df = frame(
        unit("A", "FRA", 2000, "decrease", 0.2, 0.05, 3),
        unit("B", "ESP", 2001, "decrease", 0.2, 0.05, 1),
    )
    row = status_of(df)
    assert row["status"] == "single-event" and row["n_good"] == 1
    assert "nothing to replicate it" in row["rule"]


def test_none_for_an_exposure_outcome_without_evidence():
    rep = replication_report(convergent_base(), "agent", "another outcome")
    assert rep.status == "none" and rep.rule.startswith("none:")
    assert rep.to_dict()["events"] == []


def test_units_of_one_event_count_once():
    # one event analysed for two populations and by two designs: one place, one event
    df = frame(
        unit("A", "FRA", 2000, "decrease", 0.20, 0.05, 2, population="adults"),
        unit("A", "FRA", 2000, "decrease", 0.25, 0.06, 3, population="children"),
        unit("A", "FRA", 2000, "decrease", 0.22, 0.05, 2, family="weighted-fit"),
    )
    row = status_of(df)
    assert row["n_events"] == 1 and row["sign_n"] == 1 and row["places_count"] == 1
    assert row["status"] == "single-event"
    rep = replication_report(df, "agent", "o1")
    assert len(rep.events) == 3 and rep.events["represents_event"].sum() == 1
    # the representative is the best-appraised unit
    assert rep.events.loc[rep.events["represents_event"], "level"].item() == 3


def test_sign_test_uses_events_at_level_two_against_scipy():
    ys = [0.2, 0.1, 0.15, 0.05, 0.3, 0.12, -0.04]
    df = frame(
        *[
            unit(f"E{i}", c, 2000 + i, "decrease", y, 0.05, 2)
            for i, (c, y) in enumerate(
                zip(["FRA", "ESP", "ITA", "DEU", "AUT", "BEL", "NLD"], ys, strict=True)
            )
        ],
        unit("W", "PRT", 2001, "decrease", 0.3, 0.05, 1),
    )  # weak: left out
    row = status_of(df)
    assert (row["sign_n"], row["sign_k"]) == (7, 6)
    # reference: scipy.stats.binomtest, exact two-sided
    assert row["sign_test_p"] == pytest.approx(stats.binomtest(6, 7, 0.5).pvalue, rel=1e-12)


def test_expected_direction_can_be_fixed_in_advance():
    df = frame(
        unit("A", "FRA", 2000, "decrease", 0.2, 0.05, 2),
        unit("B", "ESP", 2001, "decrease", 0.1, 0.08, 3),
    )
    assert status_of(df)["expected"] == 1
    lowers = status_of(df, DEFAULTS.with_(expected_direction="lowers"))
    assert lowers["expected"] == -1 and lowers["n_good_concordant"] == 0
    # both events point the other way; A is significant (z = 4): replicated against the
    # expected direction only if B counts too (significant, or backed by the pooled estimate)
    assert lowers["status"] in ("replicated-against", "not-replicated")
    assert not lowers["provisional"]
    # the two-sided sign test does not depend on which direction is called expected
    assert lowers["sign_test_p"] == status_of(df)["sign_test_p"]


def test_a_non_significant_event_counts_only_when_the_pooled_estimate_excludes_no_effect():
    df = frame(
        unit("A", "FRA", 2000, "decrease", 0.2, 0.05, 2),
        unit("B", "ESP", 2001, "decrease", 0.05, 0.08, 3),
    )  # z = 0.6
    row = status_of(df)
    # the two-event pool (HKSJ floored, t on 1 df) includes no effect, so B does not count
    assert not row["pooled_supports"]
    assert row["status"] == "not-replicated" and row["places_count"] == 1


def test_whole_base_statuses_equal_per_key_statuses():
    """Grouped computation over many keys gives each key the status it gets alone."""
    rng = np.random.default_rng(7)
    countries = ["FRA", "ESP", "ITA", "DEU", "PRT"]
    families = ["common-trend", "weighted-fit", "trend-extrapolation", "uncontrolled"]
    rows = []
    for x in range(6):
        for o in range(4):
            for e in range(int(rng.integers(1, 7))):
                rows.append(
                    unit(
                        f"X{x}O{o}E{e}",
                        countries[int(rng.integers(0, 5))],
                        int(rng.integers(1990, 2020)),
                        ["decrease", "increase"][int(rng.integers(0, 2))],
                        float(rng.normal(0.1, 0.15)),
                        float(rng.uniform(0.03, 0.1)),
                        [None, 0, 1, 2, 3][int(rng.integers(0, 5))],
                        family=families[int(rng.integers(0, 4))],
                        outcome=f"o{o}",
                        exposure=f"x{x}",
                    )
                )
    df = frame(*rows)
    whole = analyse(df).statuses.set_index(["exposure", "outcome"])
    seen = set()
    for (x, o), sub in df.groupby(["exposure", "outcome"]):
        alone = status_of(sub)
        assert whole.loc[(x, o), "status"] == alone["status"]
        assert whole.loc[(x, o), "rule"] == alone["rule"]
        seen.add(alone["status"])
    assert len(seen) >= 4  # the random base exercises several rules
    assert seen <= set(STATUSES)


def test_statuses_per_family_of_change():
    df = convergent_base().assign(family=["f1", "f2", "f1", "f1"])
    st = replication_statuses(df, by=("exposure", "family", "outcome")).set_index("family")
    assert st.loc["f1", "status"] == "replicated-time"  # FRA 2000, 2010, 2015
    assert st.loc["f2", "status"] == "single-event"
