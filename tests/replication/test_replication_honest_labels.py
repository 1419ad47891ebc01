"""Labels that cannot say more than their numbers: the crafted cases of the numbers issue.

Each case was a status an independent statistician would not sign; each test states the label
the same numbers now get. Reference values: scipy (normal quantiles, exact binomial test) and
the published rules cited in exposhift.replication.status.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from replication_helpers import frame, unit
from scipy import stats

from exposhift.replication.families import month_interval
from exposhift.replication.gaps import STATE_OF_STATUS, gap_map
from exposhift.replication.settings import DEFAULTS
from exposhift.replication.status import replication_statuses
from exposhift.synthesis.grouped import pool_groups

COUNTRIES = ["FRA", "ESP", "ITA", "DEU", "AUT", "BEL", "NLD", "PRT", "SWE"]


def status_of(df, settings=DEFAULTS, directions=None):
    st = replication_statuses(df, settings=settings, directions=directions)
    assert len(st) == 1
    return st.iloc[0]


def lowers():
    return pd.DataFrame({"exposure": ["agent"], "outcome": ["o1"], "direction": ["lowers"]})


def test_two_non_significant_events_are_not_replicated_place():
    # z = 1.0 and 1.2 (both p > 0.05); their pooled estimate with HKSJ (floored) on 1 df
    # includes no effect: neither event counts, so no place replicates
    df = frame(
        unit("A", "FRA", 2000, "decrease", 0.05, 0.05, 2),
        unit("B", "ESP", 2004, "decrease", 0.06, 0.05, 2),
    )
    row = status_of(df)
    assert row["status"] == "not-replicated"
    assert row["places_count"] == 0 and not row["pooled_supports"]
    # the pooled interval shown is the engine's: compare with pool_groups on the same events
    ref = pool_groups(df.assign(g=0), ["g"], method="reml", ci="hksj").iloc[0]
    assert row["pooled_ci_lower"] == pytest.approx(ref["ci_lower"], rel=1e-12)
    assert row["pooled_ci_lower"] < 0 < row["pooled_ci_upper"]


def test_three_events_at_z_point_three_are_not_convergent():
    # three events at z = 0.3 in two places and two periods, two design families: pooled
    # p is about 0.6 (as in the issue): nothing counts
    df = frame(
        unit("A", "FRA", 2000, "decrease", 0.03, 0.1, 2),
        unit("B", "FRA", 2010, "decrease", 0.03, 0.1, 2, family="weighted-fit"),
        unit("C", "ESP", 2005, "decrease", 0.03, 0.1, 2),
    )
    row = status_of(df)
    assert row["status"] == "not-replicated"
    assert row["pooled_pvalue"] > 0.5
    assert row["n_counting"] == 0


def test_one_precise_event_against_seven_imprecise_is_discordant():
    # one significant increase effect (z = 4) and seven imprecise opposite ones (z = -0.5):
    # the majority points one way, a significant event the other
    rows = [unit("P", "FRA", 2000, "decrease", 0.2, 0.05, 3)]
    rows += [unit(f"N{i}", COUNTRIES[i + 1], 2001 + i, "decrease", -0.05, 0.1, 2) for i in range(7)]
    row = status_of(frame(*rows))
    assert row["status"] == "discordant"
    assert row["sig_against_majority"]
    assert "against the direction most good events point in" in row["rule"]


def test_significant_effects_against_a_prespecified_direction_replicate_against():
    # five significant effects (z = 4) where the committee expected the opposite direction
    rows = [unit(f"E{i}", COUNTRIES[i], 2000 + 2 * i, "decrease", 0.2, 0.05, 2) for i in range(5)]
    row = status_of(frame(*rows), directions=lowers())
    assert row["expected"] == -1 and row["expected_source"] == "pre-specified"
    assert row["status"] == "replicated-against"
    assert not row["provisional"]
    assert "was expected to lower the outcome" in row["rule"]
    assert row["places_rev_count"] == 5 and row["places_count"] == 0


def test_an_inferred_direction_makes_the_status_provisional():
    rows = [unit(f"E{i}", COUNTRIES[i], 2000 + 2 * i, "decrease", 0.2, 0.05, 2) for i in range(3)]
    inferred = status_of(frame(*rows))
    assert inferred["status"] == "replicated-place" and inferred["provisional"]
    assert "provisional" in inferred["rule"]
    raises = pd.DataFrame({"exposure": ["agent"], "outcome": ["o1"], "direction": ["raises"]})
    fixed = status_of(frame(*rows), directions=raises)
    assert fixed["status"] == "replicated-place" and not fixed["provisional"]
    assert "provisional" not in fixed["rule"]


def test_change_dates_one_month_apart_are_one_period_and_years_apart_are_two():
    def two(d1, d2):
        df = frame(
            unit("A", "PRT", 2000, "decrease", 0.2, 0.05, 2),
            unit("B", "PRT", 2001, "decrease", 0.2, 0.05, 2),
        )
        df["change_date"] = [d1, d2]
        return status_of(df)

    assert two("2000-12", "2001-01")["time_periods"] == 1  # one month apart
    assert two("2001-01", "2001-12")["time_periods"] == 1  # eleven months apart, same rule
    assert two("2000", "2001-03")["time_periods"] == 1  # "2000" may be December 2000
    row = two("2000-01", "2001-06")
    assert row["time_periods"] == 2 and row["status"] == "replicated-time"
    first, last = month_interval(pd.Series(["1997", "1997-05", "1997-05-20"]))
    assert list(last - first) == [11, 0, 0]


def test_each_status_states_its_event_count_sign_test_and_minimum_p():
    rows = [unit(f"E{i}", COUNTRIES[i], 2000 + 2 * i, "decrease", 0.2, 0.05, 2) for i in range(3)]
    row = status_of(frame(*rows))
    # exact two-sided sign test, 3 of 3: p = 0.25 = the smallest attainable at n = 3
    assert row["sign_test_p"] == pytest.approx(stats.binomtest(3, 3, 0.5).pvalue, rel=1e-12)
    assert row["sign_min_p"] == pytest.approx(0.25, rel=1e-12)
    assert "good events (at level ≥ 2): 3" in row["rule"]
    assert "smallest possible with 3: 0.25" in row["rule"]
    assert "3 events" in row["rule"]


def test_an_event_counts_once_whatever_its_number_of_estimates():
    # one event with three populations: one good event, its estimate the combination
    df = frame(
        unit("A", "FRA", 2000, "decrease", 0.20, 0.05, 2, population="adults"),
        unit("A", "FRA", 2000, "decrease", 0.25, 0.06, 3, population="children"),
        unit("A", "FRA", 2000, "decrease", 0.22, 0.05, 2, population="elderly"),
        unit("B", "ESP", 2003, "decrease", 0.21, 0.05, 2),
    )
    row = status_of(df)
    assert row["n_good"] == 2 and row["pooled_k_events"] == 2
    assert row["pooled_k_estimates"] == 4


def test_gap_state_never_contradicts_the_status():
    rng = np.random.default_rng(3)
    rows = []
    for x in range(5):
        for e in range(int(rng.integers(1, 6))):
            rows.append(
                unit(
                    f"X{x}E{e}",
                    COUNTRIES[int(rng.integers(0, 9))],
                    int(rng.integers(1990, 2020)),
                    "decrease",
                    float(rng.normal(0.1, 0.15)),
                    float(rng.uniform(0.03, 0.1)),
                    [None, 1, 2, 3][int(rng.integers(0, 4))],
                    exposure=f"x{x}",
                )
            )
    cells = gap_map(frame(*rows))
    assert len(cells) == 5
    for status, state in zip(cells["status"], cells["state"], strict=True):
        assert state == STATE_OF_STATUS[status]


def test_significance_threshold_is_the_normal_quantile():
    # an event at z just below / above the two-sided 5% critical value (scipy norm.isf)
    z = stats.norm.isf(0.025)
    below = frame(
        unit("A", "FRA", 2000, "decrease", 0.05 * (z - 0.01), 0.05, 2),
        unit("B", "ESP", 2004, "decrease", 0.05 * (z - 0.01), 0.05, 2),
    )
    above = frame(
        unit("A", "FRA", 2000, "decrease", 0.05 * (z + 0.01), 0.05, 2),
        unit("B", "ESP", 2004, "decrease", 0.05 * (z + 0.01), 0.05, 2),
    )
    assert status_of(below)["places_count"] == 0
    assert status_of(above)["places_count"] == 2


# --- a replication status beside a pooled interval that includes no effect ------------------


def _two_significant_places_far_apart():
    # two events, each significant on its own in the expected direction (z = 4 and z = 5, a
    # decrease lowering the outcome), but far apart: with two events the HKSJ interval uses t
    # on 1 df (scipy: t.ppf(0.975, 1) = 12.71), so the pooled interval includes no effect
    return frame(
        unit("A", "FRA", 2000, "decrease", 0.20, 0.05, 2),
        unit("B", "ESP", 2004, "decrease", 1.50, 0.30, 2),
    )


def test_replicated_place_with_an_inconclusive_pool_is_marked_imprecise():
    from exposhift.replication.status import status_label

    df = _two_significant_places_far_apart()
    row = status_of(df, directions=lowers().assign(direction="raises"))
    # each event's own Wald interval excludes no effect (scipy normal quantile)
    z975 = stats.norm.ppf(0.975)
    assert 0.20 - z975 * 0.05 > 0 and 1.50 - z975 * 0.30 > 0
    assert row["status"] == "replicated-place"
    # the pooled interval shown beside it is the engine's; check it against statsmodels'
    # combine_effects (REML is not offered there: its DL tau2 with the HKSJ scale, floored at
    # 1 as ours, gives an interval that also includes no effect)
    from statsmodels.stats.meta_analysis import combine_effects

    ref = combine_effects(np.array([0.20, 1.50]), np.array([0.05**2, 0.30**2]), use_t=True)
    lo_ref, hi_ref = ref.conf_int()[1]  # row 1: the random-effects pool
    assert lo_ref < 0 < hi_ref  # the reference pool is inconclusive too
    assert row["pooled_ci_lower"] < 0 < row["pooled_ci_upper"]
    assert not row["pooled_supports"]
    assert bool(row["imprecise"]) and not bool(row["provisional"])
    assert "imprecise: the pooled estimate of the 2 good events does not exclude" in row["rule"]
    assert status_label(row["status"], row["provisional"], row["imprecise"]) == (
        "replicated-place (imprecise)"
    )


def test_a_pool_that_backs_the_status_is_not_imprecise():
    # the same two places with close, precise effects: the pooled interval excludes no effect
    df = frame(
        unit("A", "FRA", 2000, "decrease", 0.20, 0.02, 2),
        unit("B", "ESP", 2004, "decrease", 0.21, 0.02, 2),
    )
    row = status_of(df, directions=lowers().assign(direction="raises"))
    assert row["status"] == "replicated-place"
    assert row["pooled_ci_lower"] > 0 and row["pooled_supports"]
    assert not bool(row["imprecise"])
    assert "imprecise" not in row["rule"]


def test_an_imprecise_cell_is_not_shown_as_settled_on_the_gap_map():
    df = _two_significant_places_far_apart()
    cells = gap_map(df, directions=lowers().assign(direction="raises"))
    cell = cells.iloc[0]
    assert cell["status"] == "replicated-place" and bool(cell["imprecise"])
    assert cell["state"] == "replicated-in-part"
    assert "imprecise: the pooled interval" in cell["state_rule"]
