"""select_independent() and the pooling-strata helpers.

The rule under test is the one stated in METHODS.md section 4 ("one estimate per event x
population x outcome data source ... pick by primary flag, then appraisal") and issue 4 item 5;
the later tie-breakers (whole population, precision, identifier) are our own documented choice.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from exposhift.errors import AnalysisError
from exposhift.synthesis.independence import (
    POOLING_KEYS,
    check_poolable,
    pooling_keys,
    select_independent,
    split_strata,
)


def est(uid, study, **kw):
    base = {
        "estimate_uid": uid,
        "study_id": study,
        "event_id": "E1",
        "population": "adults",
        "data_source": "registry",
        "outcome": "asthma",
        "measure_group": "ratio",
        "estimate_kind": "change",
        "increment": "",
        "primary": False,
        "level": 2.0,
        "subgroup": "",
        "v": 0.02,
    }
    base.update(kw)
    return base


def pick(rows):
    kept, excluded = select_independent(pd.DataFrame(rows))
    return list(kept["estimate_uid"]), excluded


def test_primary_flag_beats_a_better_appraisal():
    kept, ex = pick([est("u1", "S1", level=3.0), est("u2", "S2", primary=True, level=1.0)])
    assert kept == ["u2"]
    assert ex["reason"].iloc[0] == (
        "same event E1, population, data source and outcome as "
        "study S2's estimate u2, kept because it is flagged primary"
    )
    assert ex["kept_estimate"].iloc[0] == "u2"


def test_better_appraisal_then_whole_population_then_precision_then_identifier():
    kept, ex = pick([est("u1", "S1", level=np.nan), est("u2", "S2", level=1.0)])
    assert kept == ["u2"] and "better appraised (level 1 vs not appraised)" in ex["reason"][0]
    kept, ex = pick([est("u1", "S1", subgroup="women", v=0.001), est("u2", "S2")])
    assert kept == ["u2"] and "subgroup 'women'" in ex["reason"].iloc[0]
    kept, ex = pick([est("u1", "S1", v=0.05), est("u2", "S2", v=0.01)])
    assert kept == ["u2"] and "more precise" in ex["reason"].iloc[0]
    kept, ex = pick([est("u2", "S1"), est("u1", "S2")])
    assert kept == ["u1"] and "first by identifier" in ex["reason"].iloc[0]


def test_no_level_column_and_text_flags():
    rows = [est("u1", "S1", primary="no"), est("u2", "S2", primary="yes")]
    frame = pd.DataFrame(rows).drop(columns="level")
    kept, _ = select_independent(frame)
    assert list(kept["estimate_uid"]) == ["u2"]


def test_distinct_units_are_all_kept():
    rows = [
        est("u1", "S1"),
        est("u2", "S2", event_id="E2"),
        est("u3", "S3", population="children"),
        est("u4", "S4", data_source="survey"),
        est("u5", "S5", outcome="copd"),
        est("u6", "S6", measure_group="mean_difference"),
        est("u7", "S7", estimate_kind="slope"),
    ]
    kept, ex = pick(rows)
    assert kept == [f"u{i}" for i in range(1, 8)] and len(ex) == 0


def test_blank_population_and_data_source_count_as_one_value():
    rows = [
        est("u1", "S1", population=None, data_source=""),
        est("u2", "S2", population="", data_source=np.nan, primary=True),
    ]
    kept, ex = pick(rows)
    assert kept == ["u2"] and len(ex) == 1


def test_selection_ignores_row_order_and_keeps_the_index():
    rng = np.random.default_rng(0)
    rows = [
        est(
            f"u{i}",
            f"S{i % 5}",
            event_id=f"E{i % 7}",
            level=float(rng.integers(0, 4)),
            primary=bool(rng.integers(0, 2)),
            v=float(rng.uniform(0.01, 0.1)),
        )
        for i in range(60)
    ]
    frame = pd.DataFrame(rows, index=np.arange(100, 160))
    kept_a, ex_a = select_independent(frame)
    kept_b, ex_b = select_independent(frame.sample(frac=1.0, random_state=3))
    assert set(kept_a["estimate_uid"]) == set(kept_b["estimate_uid"])
    assert len(kept_a) == 7 and len(kept_a) + len(ex_a) == 60
    assert set(kept_a.index) | set(ex_a.index) == set(frame.index)
    # the kept estimate of each event is the best by the stated order
    for _, grp in frame.groupby("event_id"):
        best = grp.sort_values(
            ["primary", "level", "v", "estimate_uid"], ascending=[False, False, True, True]
        ).iloc[0]
        assert best["estimate_uid"] in set(kept_a["estimate_uid"])


def test_needs_harmonised_columns():
    with pytest.raises(AnalysisError, match="measure_group, estimate_kind missing"):
        select_independent(pd.DataFrame([{"event_id": "E1", "outcome": "x"}]))
    kept, ex = select_independent(pd.DataFrame([est("u1", "S1")]).iloc[0:0])
    assert len(kept) == 0 and "reason" in ex.columns


# ---------------------------------------------------------------- strata


def test_pooling_keys_always_include_the_compatibility_columns():
    assert pooling_keys() == list(POOLING_KEYS)
    assert pooling_keys(["design_family", "estimate_kind"]) == [
        "design_family",
        "estimate_kind",
        "measure_group",
        "increment",
    ]


def test_check_poolable_refuses_mixed_kinds_and_scales():
    same = pd.DataFrame([est("u1", "S1"), est("u2", "S2", event_id="E2")])
    check_poolable(same)  # one stratum: no error
    mixed_kind = pd.DataFrame(
        [est("u1", "S1", estimate_kind="level"), est("u2", "S2", estimate_kind="slope")]
    )
    with pytest.raises(AnalysisError, match="different quantities.*level.*slope"):
        check_poolable(mixed_kind)
    mixed_scale = pd.DataFrame(
        [
            est("u1", "S1", scale="log"),
            est("u2", "S2", measure_group="mean_difference", scale="identity"),
        ]
    )
    with pytest.raises(AnalysisError, match="different analysis scales"):
        check_poolable(mixed_scale)
    per_unit = pd.DataFrame(
        [
            est("u1", "S1", estimate_kind="per-unit", increment="10 ug/m3"),
            est("u2", "S2", estimate_kind="change"),
        ]
    )
    with pytest.raises(AnalysisError, match="per-unit / 10 ug/m3"):
        check_poolable(per_unit)


def test_split_strata():
    frame = pd.DataFrame(
        [
            est("u1", "S1", estimate_kind="level"),
            est("u2", "S2", estimate_kind="slope"),
            est("u3", "S3", estimate_kind="level", event_id="E3"),
        ]
    )
    strata = split_strata(frame)
    assert set(strata) == {("ratio", "level", ""), ("ratio", "slope", "")}
    assert list(strata[("ratio", "level", "")]["estimate_uid"]) == ["u1", "u3"]
    for part in strata.values():
        check_poolable(part)
