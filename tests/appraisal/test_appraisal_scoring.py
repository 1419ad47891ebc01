"""The summary rule on crafted rating sets, and its invariants on generated ones.

Expected values follow the rule as stated in issue 5 and RUBRIC.md ("Summary rule"): overall =
lowest of origin, counterfactual, design_checks, concurrent_changes; a 0 in any other domain
except applicability caps it at 1; falsification never lifts a weak core; applicability is
reported apart; overall 0 is left out of pooled estimates by default.
"""

from __future__ import annotations

import numpy as np
import pytest
from appraisal_helpers import RUBRIC_FILE, edited, write
from hypothesis import given, settings
from hypothesis import strategies as st

from exposhift import score_appraisal as top_level_score
from exposhift.appraisal.rubric import load_rubric
from exposhift.appraisal.scoring import score_appraisal
from exposhift.errors import RubricError

CORE = ("origin", "counterfactual", "design_checks", "concurrent_changes")
OTHER = ("falsification", "timing", "exposure_shift", "outcome_data", "inference", "transparency")
ALL = (*CORE[:3], "falsification", "timing", "concurrent_changes", *OTHER[2:], "applicability")


def ratings(**levels: int) -> dict[str, int]:
    """All domains at 3 (strong) unless given."""
    out = {k: 3 for k in ALL}
    out.update(levels)
    return out


# (case, ratings, overall, deciding domain, capped_by)
CRAFTED = [
    ("all strong", ratings(), 3, "origin", None),
    ("lowest core decides", ratings(counterfactual=1, origin=2), 1, "counterfactual", None),
    (
        "core tie: first in rubric order",
        ratings(design_checks=2, concurrent_changes=2),
        2,
        "design_checks",
        None,
    ),
    ("fatal core", ratings(concurrent_changes=0), 0, "concurrent_changes", None),
    ("fatal non-core caps at 1", ratings(inference=0), 1, "inference", "inference"),
    ("cap from an adequate core", ratings(origin=2, timing=0), 1, "timing", "timing"),
    (
        "first capping domain in rubric order",
        ratings(transparency=0, timing=0),
        1,
        "timing",
        "timing",
    ),
    ("falsification 0 caps too", ratings(falsification=0), 1, "falsification", "falsification"),
    ("weak core already below the cap", ratings(origin=1, outcome_data=0), 1, "origin", None),
    (
        "fatal core and fatal non-core",
        ratings(counterfactual=0, timing=0),
        0,
        "counterfactual",
        None,
    ),
    ("weak non-core does not cap", ratings(exposure_shift=1, inference=1), 3, "origin", None),
    ("applicability fatal does not cap", ratings(applicability=0), 3, "origin", None),
    (
        "strong falsification does not lift a weak core",
        ratings(counterfactual=1, falsification=3),
        1,
        "counterfactual",
        None,
    ),
]


@pytest.mark.parametrize("case", CRAFTED, ids=[c[0] for c in CRAFTED])
def test_summary_rule_on_crafted_sets(case, rubric):
    _, r, overall, deciding, capped_by = case
    res = score_appraisal(r, rubric)
    assert (res.overall, res.deciding_domain, res.capped_by) == (overall, deciding, capped_by)
    assert res.overall_name == ("fatal", "weak", "adequate", "strong")[overall]
    assert res.excluded_from_pooling == (overall == 0)


def test_reason_in_words(rubric):
    res = score_appraisal(ratings(counterfactual=1), rubric)
    assert res.reason == "lowest core domain: counterfactual = 1 (weak)"
    tie = score_appraisal(ratings(origin=2, concurrent_changes=2), rubric)
    assert tie.reason == "lowest core domain: origin = 2 (adequate), tied with concurrent_changes"
    cap = score_appraisal(ratings(origin=2, timing=0), rubric)
    assert cap.reason == (
        "capped at 1 (weak) by timing = 0 (fatal); lowest core domain: origin = 2 (adequate)"
    )


def test_cap_that_changes_nothing_is_noted(rubric):
    res = score_appraisal(ratings(origin=1, timing=0, inference=0), rubric)
    assert res.capped_by is None
    assert any("timing = 0 (fatal) would cap" in n for n in res.notes)
    assert any("also rated fatal or lower: inference" in n for n in res.notes)


def test_no_lifting_is_shown(rubric):
    res = score_appraisal(ratings(design_checks=1, falsification=3), rubric)
    assert res.overall == 1
    assert (
        "falsification = 3 (strong) is shown but does not lift the overall level (summary rule)"
    ) in res.notes
    plain = score_appraisal(ratings(), rubric)
    assert not any("does not lift" in n for n in plain.notes)


def test_applicability_reported_apart(rubric):
    for a in range(4):
        res = score_appraisal(ratings(counterfactual=2, applicability=a), rubric)
        assert res.overall == 2 and res.applicability == a
    res = score_appraisal({k: v for k, v in ratings().items() if k != "applicability"}, rubric)
    assert res.applicability is None and res.missing == ()


def test_fatal_overall_is_excluded_from_pooling_with_a_note(rubric):
    res = score_appraisal(ratings(origin=0), rubric)
    assert res.excluded_from_pooling
    assert any("left out of pooled estimates by default" in n for n in res.notes)
    assert not score_appraisal(ratings(origin=1), rubric).excluded_from_pooling


def test_result_records_the_rubric(rubric):
    res = score_appraisal(ratings(), rubric)
    assert (res.rubric_id, res.rubric_version, res.rubric_hash) == (
        rubric.rubric_id,
        rubric.version,
        rubric.content_hash,
    )
    d = res.as_dict()
    assert d["ratings"]["origin"] == 3 and d["overall"] == 3 and d["capped_by"] is None
    # top-level import and default rubric give the same answer
    assert top_level_score(ratings(timing=0)).overall == 1


def test_missing_core_domain_is_an_error(rubric):
    r = ratings()
    del r["counterfactual"]
    r["origin"] = None
    with pytest.raises(RubricError, match="core domains not rated: origin, counterfactual"):
        score_appraisal(r, rubric)


def test_missing_other_domains_are_listed(rubric):
    r = {k: 2 for k in CORE}
    r["timing"] = float("nan")  # a blank spreadsheet cell
    res = score_appraisal(r, rubric)
    assert res.overall == 2
    assert res.missing == OTHER
    assert any(n.startswith("not rated: falsification, timing") for n in res.notes)


@pytest.mark.parametrize("bad", [4, -1, 2.5, True, "2", None])
def test_levels_outside_0_3_are_rejected_with_the_accepted_levels(bad, rubric):
    r = ratings()
    r["timing"] = bad
    if bad is None:  # None means not rated, not an error
        assert score_appraisal(r, rubric).missing == ("timing",)
        return
    with pytest.raises(RubricError) as info:
        score_appraisal(r, rubric)
    assert f"level outside 0-3 for timing = {bad!r}" in str(info.value)
    assert "accepted levels: 0 (fatal), 1 (weak), 2 (adequate), 3 (strong)" in str(info.value)


def test_unknown_domains_are_rejected_with_the_accepted_ones(rubric):
    r = ratings(blinding=2, timeliness=1)
    with pytest.raises(RubricError) as info:
        score_appraisal(r, rubric)
    msg = str(info.value)
    assert "unknown domains 'blinding', 'timeliness'" in msg
    assert "accepted domains: origin, counterfactual, design_checks" in msg
    with pytest.raises(RubricError, match="must be a mapping"):
        score_appraisal([("origin", 3)], rubric)


def test_numpy_and_whole_float_levels_are_accepted(rubric):
    r = {k: np.int64(2) for k in ALL}
    r["origin"] = 1.0
    res = score_appraisal(r, rubric)
    assert res.overall == 1 and isinstance(res.overall, int)


def test_the_rule_is_read_from_the_rubric_file(tmp_path, rubric_text, rubric):
    # a committee that caps at 2 and treats applicability as a capping domain
    text = edited(rubric_text, "cap_at = 1\n", "cap_at = 2\n")
    text = edited(text, 'apart = ["applicability"]', "apart = []")
    adapted = load_rubric(write(tmp_path, text))
    r = ratings(applicability=0)
    assert score_appraisal(r, rubric).overall == 3
    res = score_appraisal(r, adapted)
    assert (res.overall, res.capped_by) == (2, "applicability")
    assert res.rubric_hash != rubric.content_hash


# ---- invariants on generated rating sets (the rule as stated in issue 5) --------------------

RUBRIC = load_rubric(RUBRIC_FILE)  # module level: hypothesis does not mix with fixtures
levels = st.integers(min_value=0, max_value=3)
full_sets = st.fixed_dictionaries({k: levels for k in ALL})


@settings(max_examples=300, deadline=None)
@given(full_sets)
def test_overall_matches_the_stated_rule(r):
    res = score_appraisal(r, RUBRIC)
    core_min = min(r[k] for k in CORE)
    expected = min(core_min, 1) if any(r[k] == 0 for k in OTHER) else core_min
    assert res.overall == expected
    assert res.overall <= core_min
    if res.capped_by is None:
        assert res.deciding_domain in CORE and r[res.deciding_domain] == res.overall
    else:
        assert res.deciding_domain == res.capped_by in OTHER
        assert r[res.capped_by] == 0 and res.overall == 1 < core_min


@settings(max_examples=200, deadline=None)
@given(full_sets, st.sampled_from(ALL), levels)
def test_lowering_one_rating_never_raises_the_overall(r, key, new):
    before = score_appraisal(r, RUBRIC).overall
    lowered = dict(r)
    lowered[key] = min(r[key], new)
    assert score_appraisal(lowered, RUBRIC).overall <= before


@settings(max_examples=200, deadline=None)
@given(full_sets, levels, levels)
def test_falsification_and_applicability_never_lift(r, f, a):
    base = dict(r, falsification=max(r["falsification"], 1))  # keep the cap out of it
    changed = dict(base, falsification=max(f, 1), applicability=a)
    assert score_appraisal(changed, RUBRIC).overall == score_appraisal(base, RUBRIC).overall
