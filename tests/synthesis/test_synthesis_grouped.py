"""pool_groups(): the vectorised route must give what pool() gives, group by group.

pool() is the second route here: it is written separately (scipy brentq for PM, a scalar
Newton/Fisher loop for REML), so agreement checks both.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from synthesis_helpers import KACKER_V, KACKER_Y, random_groups

import exposhift
from exposhift.errors import AnalysisError
from exposhift.synthesis.grouped import pool_groups
from exposhift.synthesis.pooling import SCALAR_FIELDS, pool

# iterations: PM counts brentq steps in pool() and Illinois steps in pool_groups()
COMPARED = [f for f in SCALAR_FIELDS if f != "iterations"]


def _assert_same(row: pd.Series, expected: dict, rel: float = 1e-10) -> None:
    for f in COMPARED:
        a, b = expected[f], row[f]
        if isinstance(a, str | bool | np.bool_) or isinstance(b, str):
            assert a == b, (f, a, b)
        elif np.isnan(float(a)):
            assert np.isnan(float(b)), (f, a, b)
        else:
            assert float(b) == pytest.approx(float(a), rel=rel, abs=1e-12), (f, a, b)


@pytest.mark.parametrize("method", ["fe", "dl", "pm", "reml"])
@pytest.mark.parametrize(("ci", "floor"), [("wald", False), ("hksj", False), ("hksj", True)])
def test_pool_groups_matches_pool_row_by_row(method, ci, floor):
    frame = random_groups(150, 1, 12, seed=3)
    out = pool_groups(frame, ["group"], method=method, ci=ci, hksj_floor=floor)
    assert list(out.columns) == ["group", *SCALAR_FIELDS]
    assert len(out) == 150
    for _, row in out.iterrows():
        sub = frame[frame["group"] == row["group"]]
        _assert_same(row, pool(sub["y"], sub["v"], method, ci, hksj_floor=floor).scalars())
    if method == "reml":
        # same algorithm, same iteration count
        for _, row in out.iterrows():
            sub = frame[frame["group"] == row["group"]]
            assert row["iterations"] == pool(sub["y"], sub["v"], "reml", ci).iterations


def test_group_of_one_and_of_two():
    frame = pd.DataFrame({"g": ["a", "b", "b"], "y": [0.3, 0.1, 0.4], "v": [0.01, 0.02, 0.03]})
    out = pool_groups(frame, ["g"]).set_index("g")
    assert out.loc["a", "estimate"] == 0.3 and out.loc["a", "k"] == 1
    assert "single estimate" in out.loc["a", "notes"]
    assert out.loc["b", "k"] == 2 and "k = 2" in out.loc["b", "notes"]


def test_row_order_does_not_matter():
    frame = random_groups(40, 2, 9, seed=5)
    a = pool_groups(frame, ["group"], method="reml")
    b = pool_groups(frame.sample(frac=1.0, random_state=1), ["group"], method="reml")
    pd.testing.assert_frame_equal(a, b, rtol=1e-12)


def test_several_keys_and_missing_key_values():
    frame = pd.DataFrame(
        {
            "family": ["x", "x", "x", "y", "y", None, None],
            "kind": ["change", "change", "level", "change", "change", "change", "change"],
            "y": [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7],
            "v": [0.1] * 7,
        }
    )
    out = pool_groups(frame, ["family", "kind"], method="dl")
    assert len(out) == 4
    missing = out[out["family"].isna()]
    assert len(missing) == 1 and missing["k"].iloc[0] == 2
    assert missing["estimate"].iloc[0] == pytest.approx(0.65)


def test_empty_by_pools_everything_and_top_level_name():
    frame = pd.DataFrame({"y": KACKER_Y, "v": KACKER_V})
    out = exposhift.pool_groups(frame, [], method="pm", ci="wald")
    r = pool(KACKER_Y, KACKER_V, "pm", "wald")
    assert len(out) == 1
    assert out["tau2"].iloc[0] == pytest.approx(r.tau2, rel=1e-10)


def test_empty_frame_gives_empty_table():
    out = pool_groups(pd.DataFrame({"g": [], "y": [], "v": []}), ["g"])
    assert len(out) == 0 and list(out.columns) == ["g", *SCALAR_FIELDS]


def test_bad_rows_are_named():
    frame = pd.DataFrame(
        {"g": [1, 1, 2], "y": [0.1, 0.2, 0.3], "v": [0.1, 0.0, 0.1]}, index=[10, 11, 12]
    )
    with pytest.raises(AnalysisError, match=r"row\(s\) 11: 'y' must be finite and 'v' positive"):
        pool_groups(frame, ["g"])
    with pytest.raises(AnalysisError, match="column\\(s\\) se not in the frame"):
        pool_groups(frame, ["g"], v="se")
    with pytest.raises(AnalysisError, match="unknown pooling method"):
        pool_groups(frame, ["g"], method="ml")


def test_many_groups_all_converge():
    frame = random_groups(3000, 1, 30, seed=9)
    for method in ("pm", "reml"):
        out = pool_groups(frame, ["group"], method=method)
        assert out["converged"].all()
        assert (out["tau2"].dropna() >= 0).all()
