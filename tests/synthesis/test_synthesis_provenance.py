"""Provenance flags of harmonised rows, their counts and their words.

Outside references: the Woodward (2019, Heart 105:1701) CI example and the Altman & Bland (2011,
BMJ 343:d2090) ratio example from tests/data/meta_checks.json; the Zhang & Yu (1998, JAMA
280:1690) conversion RR = OR/(1 − P₀ + P₀·OR) and the Chinn (2000) factor π/√3 written out here;
t and z quantiles from scipy.stats.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from synthesis_helpers import check

from exposhift.synthesis.harmonise import ADDED_COLUMNS, harmonise
from exposhift.synthesis.provenance import (
    PROVENANCE_CODES,
    PROVENANCE_WORDS,
    provenance_lines,
    provenance_summary,
)

BASE = {
    "measure": "RR",
    "estimate": 2.15,
    "ci_low": 1.33,
    "ci_high": 3.47,
    "change_direction": "increase",
}


def one(**changes) -> pd.Series:
    return harmonise(pd.DataFrame([{**BASE, **changes}])).iloc[0]


def flags_of(r: pd.Series) -> set[str]:
    return {c for c in PROVENANCE_CODES if r[c]}


def test_every_code_has_words_and_a_column():
    assert set(PROVENANCE_WORDS) == set(PROVENANCE_CODES)
    assert {"provenance", *PROVENANCE_CODES} <= set(ADDED_COLUMNS)
    assert "McNutt" in PROVENANCE_WORDS["or_converted"]


def test_plain_ci_row_has_no_flags():
    r = one()
    # Woodward 2019: SE = (ln 3.47 - ln 1.33)/3.92 (meta_checks.json conversions)
    expected, tol = check("conversions", "SE = (ln hi - ln lo)/3.92 (= average of the two)")
    # published with 3.92; the library uses the exact 2·z (scipy), so rescale the check value
    assert np.sqrt(r["v"]) == pytest.approx(expected * 3.92 / (2 * stats.norm.ppf(0.975)), abs=tol)
    assert r["provenance"] == "" and flags_of(r) == set()


def test_or_converted_flag_and_mcnutt_note():
    r = one(measure="OR", estimate=2.0, ci_low=1.5, ci_high=2.7, baseline_risk=0.2)
    assert flags_of(r) == {"or_converted"}
    # Zhang & Yu 1998, written out
    assert np.exp(r["y"]) == pytest.approx(2.0 / (1 - 0.2 + 0.2 * 2.0), rel=1e-12)
    assert "McNutt" in r["harmonise_note"]


def test_se_from_p_and_p_bound():
    # Altman & Bland 2011 ratio example: RR 0.30, P = 0.034; SE = |ln RR|/z, z exact (scipy)
    exact = dict(estimate=0.30, ci_low=np.nan, ci_high=np.nan, p_value=0.034)
    r = one(**exact)
    assert flags_of(r) == {"se_from_p"}
    assert np.sqrt(r["v"]) == pytest.approx(abs(np.log(0.30)) / stats.norm.isf(0.017), rel=1e-12)
    b = one(**exact, p_bound=True)
    assert flags_of(b) == {"se_from_p", "p_bound"}
    assert b["provenance"] == "se_from_p;p_bound"
    assert b["v"] == r["v"]  # the bound is analysed as the p value (conservative SE)
    assert "upper bound" in b["harmonise_note"]
    # a bound that is not used (the row has a CI) carries no flag
    assert not one(p_value=0.001, p_bound=True)["p_bound"]


@pytest.mark.parametrize(
    "pre, post, flagged",
    [
        (8, 10, True),
        (12, 17, True),
        (15, 15, False),
        (40, 40, False),
        (None, None, False),
        (10, None, False),
    ],
)
def test_se_from_ci_z_only_for_short_series(pre, post, flagged):
    r = one(pre_points=pre, post_points=post)
    assert bool(r["se_from_ci_z"]) is flagged
    if flagged:
        df = pre + post - 4  # segmented regression: 4 parameters
        over = stats.t.ppf(0.975, df) / stats.norm.ppf(0.975) - 1  # scipy
        assert f"overstated by {round(over * 100):g}%" in r["harmonise_note"]
    # the SE itself is unchanged (z as documented): the flag says what could be off
    expected, tol = check("conversions", "SE = (ln hi - ln lo)/3.92 (= average of the two)")
    assert np.sqrt(r["v"]) == pytest.approx(expected * 3.92 / (2 * stats.norm.ppf(0.975)), abs=tol)


def test_se_from_ci_z_not_for_an_se_row():
    r = one(ci_low=np.nan, ci_high=np.nan, se=0.2, pre_points=5, post_points=5)
    assert not r["se_from_ci_z"]


def test_smd_rescaled_flipped_asymmetric_and_implausible():
    frame = pd.DataFrame(
        [
            {"measure": "SMD", "estimate": 0.5, "se": 0.1, "change_direction": "increase"},
            {
                "measure": "MD",
                "estimate": 2.0,
                "se": 0.5,
                "estimate_kind": "per-unit",
                "per_unit": 5.0,
                "change_unit": "ug/m3",
            },
            {
                "measure": "MD",
                "estimate": 2.0,
                "se": 0.5,
                "estimate_kind": "per-unit",
                "per_unit": 10.0,
                "change_unit": "ug/m3",
            },
            {
                "measure": "RR",
                "estimate": 0.8,
                "ci_low": 0.7,
                "ci_high": 0.9,
                "change_direction": "decrease",
            },
            {
                "measure": "RR",
                "estimate": 1.2,
                "ci_low": 1.19,
                "ci_high": 1.9,
                "change_direction": "increase",
            },
            {"measure": "RR", "estimate": 1.2, "se": 2.0, "change_direction": "increase"},
            {"measure": "pct_change", "estimate": 10.0, "se": 5.0, "change_direction": "increase"},
            {"measure": "pct_change", "estimate": 10.0, "se": 0.05, "change_direction": "increase"},
        ]
    )
    out = harmonise(frame, smd_as_log_or=True, per_unit_to=10.0)
    got = [flags_of(r) for _, r in out.iterrows()]
    assert got == [
        {"smd_converted"},
        {"per_unit_rescaled"},
        set(),
        {"sign_flipped"},
        {"ci_asymmetric"},
        {"se_implausible"},
        {"se_implausible"},
        set(),
    ]
    assert out["y"].iloc[0] == pytest.approx(0.5 * np.pi / np.sqrt(3))  # Chinn 2000
    assert "percent points" in out["harmonise_note"].iloc[6]
    summary = provenance_summary(out)
    assert summary == {
        "smd_converted": 1,
        "ci_asymmetric": 1,
        "per_unit_rescaled": 1,
        "sign_flipped": 1,
        "se_implausible": 2,
    }
    assert list(summary) == [c for c in PROVENANCE_CODES if c in summary]  # stable order
    lines = provenance_lines(out)
    assert lines[-1] == f"2 of 8 estimates: {PROVENANCE_WORDS['se_implausible']} [se_implausible]"


def test_summary_from_the_text_column_alone():
    frame = pd.DataFrame({"provenance": ["se_from_p;p_bound", "", "se_from_p", None]})
    assert provenance_summary(frame) == {"se_from_p": 2, "p_bound": 1}
    assert provenance_summary(pd.DataFrame({"y": [1.0]})) == {}
    assert provenance_lines(pd.DataFrame({"provenance": ["", ""]})) == []
