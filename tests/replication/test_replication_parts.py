"""The ingredients: sign test, periods, dose-response, settings and regions."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pycountry
import pytest
import statsmodels.api as sm
from replication_helpers import frame, unit
from scipy import stats

from exposhift.errors import ConfigError
from exposhift.replication.dose import dose_response
from exposhift.replication.families import prepare_units
from exposhift.replication.regions import M49_REGIONS
from exposhift.replication.report import replication_report
from exposhift.replication.settings import (
    DEFAULTS,
    ReplicationSettings,
    load_settings,
    settings_from_mapping,
)
from exposhift.replication.spatial import sign_test_p

REPO = Path(__file__).resolve().parents[2]


def test_sign_test_equals_scipy_binomtest_for_every_k_up_to_n_40():
    # reference: scipy.stats.binomtest(k, n, 0.5), alternative="two-sided" (exact)
    for n in range(1, 41):
        k = np.arange(n + 1)
        ours = sign_test_p(k, np.full(n + 1, n))
        ref = [stats.binomtest(int(i), n, 0.5).pvalue for i in k]
        np.testing.assert_allclose(ours, ref, rtol=1e-10, atol=1e-15)
    assert np.isnan(sign_test_p(0, 0))


def test_sign_test_published_value():
    # 9 of 10 in one direction: two-sided p = 2 * 11/1024 = 0.021484375 (exact binomial
    # arithmetic, Hollander, Wolfe & Chicken 2014, §2.2)
    assert float(sign_test_p(9, 10)) == pytest.approx(22 / 1024, rel=1e-12)


def test_periods_merge_events_closer_than_min_months_apart():
    df = frame(
        unit("A", "PRT", 2000, "decrease", 0.2, 0.05, 2),
        unit("B", "PRT", 2001, "decrease", 0.2, 0.05, 2),
        unit("C", "PRT", 2004, "decrease", 0.2, 0.05, 2),
    )
    rep = replication_report(df, "agent", "o1", DEFAULTS.with_(min_months_apart=24))
    (seq,) = rep.temporal
    assert [e["period"] for e in seq["events"]] == [1, 1, 2]
    assert seq["periods_with_counting_event"] == 2 and seq["replicated"]
    # a weak event between two good ones does not join them into one period
    mixed = df.assign(level=[2.0, 1.0, 2.0])
    rep2 = replication_report(mixed, "agent", "o1", DEFAULTS.with_(min_months_apart=24))
    assert [e["period"] for e in rep2.temporal[0]["events"]] == [1, None, 2]
    assert rep2.temporal[0]["replicated"] and rep2.status == "replicated-time"
    rep3 = replication_report(df, "agent", "o1", DEFAULTS.with_(min_months_apart=60))
    assert [e["period"] for e in rep3.temporal[0]["events"]] == [1, 1, 1]
    assert rep3.status != "replicated-time"


def _dose_units(sizes, slope=0.02, se=0.03, intercept=0.01):
    rows = [
        unit(
            f"E{i}",
            f"C{i}",
            2000 + i,
            "decrease",
            intercept + slope * s,
            se,
            2,
            change_size=s,
            change_unit="ug/m3",
        )
        for i, s in enumerate(sizes)
    ]
    return prepare_units(frame(*rows))


def test_dose_response_runs_with_five_events_and_matches_weighted_least_squares():
    sizes = [1.0, 2.0, 3.5, 5.0, 8.0]
    units = _dose_units(sizes)
    # jitter off the line so the fit is not exact, but keep tau2 at 0
    units["y"] = units["y"] + np.array([0.004, -0.003, 0.002, -0.004, 0.001])
    res = dose_response(
        units, {"measure_group": "ratio", "estimate_kind": "change", "increment": ""}
    )
    assert res.run and res.k == 5 and res.unit == "ug/m3"
    # reference: statsmodels WLS with weights 1/v (tau2 = 0 here, as the residual Q < df)
    wls = sm.WLS(units["y"], sm.add_constant(np.array(sizes)), weights=1 / units["v"]).fit()
    assert res.tau2 == pytest.approx(0.0, abs=1e-12)
    assert res.slope == pytest.approx(wls.params.iloc[1], rel=1e-8)
    assert res.intercept == pytest.approx(wls.params.iloc[0], rel=1e-8)
    # on the natural scale: a ratio of ratios per unit of change, exp(slope)
    assert (
        f"multiplies the ratio for an exposure increase by {np.exp(res.slope):.3g}"
        in res.interpretation
    )


def test_dose_response_says_why_it_was_not_run():
    main = {"measure_group": "ratio", "estimate_kind": "change", "increment": ""}
    four = dose_response(_dose_units([1.0, 2.0, 3.0, 4.0]), main)
    assert not four.run
    assert four.reason == (
        "not run: 4 independent event(s) at level ≥ 2 report the size of "
        "the change in the main stratum; needs ≥ 5"
    )
    same = dose_response(_dose_units([2.0] * 6), main)
    assert not same.run and "same size of change" in same.reason
    assert not dose_response(_dose_units([1.0]), None).run
    assert dose_response(
        _dose_units(range(1, 7)), main, DEFAULTS.with_(dose_min_events=7)
    ).reason.endswith("needs ≥ 7")


def test_dose_response_never_mixes_units():
    units = _dose_units([1.0, 2.0, 3.0, 4.0, 5.0, 6.0])
    units.loc[units.index[:2], "change_unit"] = "ppb"
    res = dose_response(
        units, {"measure_group": "ratio", "estimate_kind": "change", "increment": ""}
    )
    assert not res.run and res.k == 4 and "'ppb' left out" in res.reason


def test_shipped_settings_file_equals_the_defaults():
    shipped = load_settings(REPO / "evidence" / "replication.toml")
    assert shipped == ReplicationSettings()


def test_settings_file_errors_name_the_problem(tmp_path):
    bad = tmp_path / "r.toml"
    bad.write_text("[thresholds]\nmin_place = 3\n", encoding="utf-8")
    with pytest.raises(ConfigError, match="unknown setting.*min_place"):
        load_settings(bad)
    with pytest.raises(ConfigError, match="alpha must be between 0 and 1"):
        settings_from_mapping({"thresholds": {"alpha": 5}})
    with pytest.raises(ConfigError, match="expected_direction must be one of"):
        DEFAULTS.with_(expected_direction="up")
    with pytest.raises(ConfigError, match="not found"):
        load_settings(tmp_path / "missing.toml")
    custom = settings_from_mapping(
        {"thresholds": {"min_places": 3}, "regions": {"Nordic": ["dnk", "SWE"]}}
    )
    assert custom.min_places == 3 and custom.regions["nordic"] == ("DNK", "SWE")
    assert custom.regions["europe"] == M49_REGIONS["europe"]


def test_m49_regions_are_valid_iso_codes_covering_every_country_once():
    # reference: pycountry's ISO 3166-1 table
    codes = {c.alpha_3 for c in pycountry.countries}
    listed = [c for region in M49_REGIONS.values() for c in region]
    assert set(listed) <= codes
    assert len(listed) == len(set(listed))  # no country in two regions
    assert codes - set(listed) == {"ATA"}  # Antarctica belongs to no M49 region


def test_prepare_units_flags():
    u = prepare_units(
        pd.DataFrame(
            [
                unit("A", "FRA", 2000, "decrease", 0.1, 0.05, 2),
                unit("B", "FRA", 2000, "decrease", 0.0, 0.05, 1),
            ]
        )
    )
    assert u["good"].tolist() == [True, False]
    assert u["sign"].tolist() == [1, 0]
    # |z| = 2 > 1.96 (alpha 0.05, two-sided normal quantile)
    assert u["significant"].tolist() == [True, False]
