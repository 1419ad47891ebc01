"""Suggestions from recorded facts: every rule of the shipped rubric fires when it should and
not on a near miss; merging; the reviewer's override rule; check-code normalisation.

Rule sources: RUBRIC.md "Suggestions from recorded facts" (ITS/before-after with < 3 points on a
side -> counterfactual 0, the Cochrane EPOC minimum; single series >= 12 + 12 -> at most 2
without a comparison, Wagner et al. 2002; IV without first-stage F -> design_checks at most 1,
Staiger & Stock 1997; staggered adoption without a robust estimator -> at most 1, Callaway &
Sant'Anna 2021 / Goodman-Bacon 2021; no falsification test -> falsification 1) and the level
criteria of RUBRIC.md for the further rules (minimum design-specific sets, McCrary 2008,
Abadie et al. 2010, Hausman & Rapson 2018).
"""

from __future__ import annotations

import numpy as np
import pytest
from appraisal_helpers import edited, write

from exposhift.appraisal.checks import ALIASES, CHECKS, ROLES, normalise_check, parse_checks
from exposhift.appraisal.rubric import load_rubric
from exposhift.appraisal.suggestions import (
    StudyFacts,
    apply_override,
    confirm,
    facts_from_record,
    suggest_levels,
)
from exposhift.errors import AnalysisError, RubricError, VocabularyError

F = StudyFacts
ALL_FALSIFICATION = "placebo-date; negative-control-outcome"

# (rule id, facts that fire it, domain, expected level (exact) or None, expected max_level,
#  near-miss facts that must not fire it)
RULES = [
    (
        "few-points",
        F("its", 2, 10, checks="autocorrelation"),
        "counterfactual",
        0,
        0,
        F("its", 3, 10, checks="autocorrelation"),
    ),
    (
        "few-points",
        F("before-after", 1, 1),
        "counterfactual",
        0,
        0,
        F("before-after", 1, 1, has_comparison=True),
    ),
    ("short-single-series", F("its", 6, 20), "counterfactual", None, 1, F("its", 12, 20)),
    (
        "long-single-series",
        F("its", 12, 12),
        "counterfactual",
        None,
        2,
        F("its", 12, 12, has_comparison=True),
    ),
    (
        "similarity-not-shown",
        F("did", 4, 4, checks=""),
        "counterfactual",
        None,
        1,
        F("did", 4, 4, checks="Parallel trends"),
    ),
    (
        "synthetic-fit-not-shown",
        F("synthetic-control", checks="in-space-placebo"),
        "counterfactual",
        None,
        1,
        F("synthetic-control", checks="pre period fit"),
    ),
    ("its-minimum-points", F("its", 2, 30), "design_checks", 0, 0, F("rd-time", 2, 30)),
    (
        "its-autocorrelation",
        F("its", 12, 12, checks="seasonality"),
        "design_checks",
        None,
        1,
        F("its", 12, 12, checks="serial correlation"),
    ),
    ("did-one-pre-period", F("did", 1, 6), "design_checks", 0, 0, F("did", 2, 6)),
    (
        "did-no-pre-trends",
        F("controlled-its", 6, 6, checks="autocorrelation"),
        "design_checks",
        None,
        1,
        F("controlled-its", 6, 6, checks="autocorrelation; pre-trends"),
    ),
    (
        "staggered-no-robust-estimator",
        F("staggered-did", checks="pre-trends"),
        "design_checks",
        None,
        1,
        F("staggered-did", checks="Callaway & Sant'Anna"),
    ),
    (
        "staggered-no-robust-estimator",
        F("staggered-did", checks="pre-trends"),
        "design_checks",
        None,
        1,
        F("staggered-did", checks="Goodman-Bacon"),
    ),
    (
        "synthetic-minimum",
        F("synthetic-control", checks="pre-period-fit"),
        "design_checks",
        None,
        1,
        F("synthetic-control", checks="pre-period-fit; placebo in space"),
    ),
    (
        "rd-minimum",
        F("rd", checks="density-test"),
        "design_checks",
        None,
        1,
        F("rd", checks="McCrary; covariate continuity"),
    ),
    (
        "rd-minimum",
        F("rd-geo", checks="covariate_continuity"),
        "design_checks",
        None,
        1,
        F("rd-geo", checks="density test; covariate continuity"),
    ),
    (
        "rd-time-minimum",
        F("rd-time", checks="narrow-window"),
        "design_checks",
        None,
        1,
        F("rd-time", checks="narrow window; placebo dates"),
    ),
    (
        "iv-no-first-stage",
        F("iv", checks="balance"),
        "design_checks",
        None,
        1,
        F("iv", checks="First stage F"),
    ),
    (
        "iv-no-first-stage",
        F("iv", checks=()),
        "design_checks",
        None,
        1,
        F("iv", checks="weak_iv_robust"),
    ),
    (
        "no-balance",
        F("as-if-random", checks=()),
        "design_checks",
        None,
        1,
        F("as-if-random", checks="covariate balance"),
    ),
    (
        "no-balance",
        F("exposed-cohort", checks="placebo-date"),
        "design_checks",
        None,
        1,
        F("exposed-cohort", checks="balance"),
    ),
    (
        "no-falsification",
        F("did", 4, 4, checks="pre-trends"),
        "falsification",
        1,
        1,
        F("did", 4, 4, checks="pre-trends; negative control"),
    ),
    (
        "one-kind-of-falsification",
        F("rd", checks="placebo-place"),
        "falsification",
        None,
        2,
        F("rd", checks=ALL_FALSIFICATION),
    ),
    (
        "series-naive-inference",
        F("rd-time", 30, 30, checks="placebo-date"),
        "inference",
        None,
        1,
        F("rd-time", 30, 30, checks="autocorrelation"),
    ),
    (
        "assignment-grade",
        F("as-if-random", assignment_grade=1),
        "origin",
        None,
        1,
        F("as-if-random"),
    ),
]


@pytest.mark.parametrize("case", RULES, ids=[f"{c[0]}-{c[1].design}" for c in RULES])
def test_each_rule_fires_and_misses(case, rubric):
    rule, facts, domain, level, max_level, near_miss = case
    got = suggest_levels(facts, rubric)
    assert domain in got, f"{rule} did not fire"
    s = got[domain]
    assert rule in s.rules
    assert (s.level, s.max_level) == (level, max_level)
    assert s.reason
    missed = suggest_levels(near_miss, rubric).get(domain)
    assert missed is None or rule not in missed.rules


def test_every_shipped_rule_is_tested(rubric):
    assert {r.id for r in rubric.suggestions} == {c[0] for c in RULES}


def test_reasons_say_why(rubric):
    s = suggest_levels(F("its", 2, 10, checks=()), rubric)
    assert "fewer than 3 time points" in s["counterfactual"].reason
    iv = suggest_levels(F("iv", checks=()), rubric)["design_checks"]
    assert "first-stage F" in iv.reason
    grade = suggest_levels(F("iv", assignment_grade=2), rubric)["origin"]
    assert grade.reason.endswith("(assignment grade 2)") and grade.max_level == 2


def test_merging_takes_the_tightest_limit(rubric):
    s = suggest_levels(F("its", 2, 5, checks=()), rubric)
    dc = s["design_checks"]
    assert (dc.level, dc.max_level) == (0, 0)
    assert dc.rules == ("its-minimum-points", "its-autocorrelation")
    assert "; also: autocorrelation not among" in dc.reason
    fal = s["falsification"]
    assert (fal.level, fal.rules) == (1, ("no-falsification", "one-kind-of-falsification"))
    assert list(s) == ["counterfactual", "design_checks", "falsification", "inference"]


def test_checks_not_recorded_fire_no_check_rule(rubric):
    s = suggest_levels(F("did", 1, 6, checks=None), rubric)
    assert list(s) == ["design_checks"] and s["design_checks"].rules == ("did-one-pre-period",)
    assert suggest_levels(F("iv"), rubric) == {}
    assert suggest_levels(F("its"), rubric) == {}  # no points recorded either


def test_a_strong_study_gets_no_suggestion(rubric):
    facts = F(
        "did", 8, 8, checks="pre-trends; placebo-date; negative-control-outcome", assignment_grade=3
    )
    s = suggest_levels(facts, rubric)
    assert list(s) == ["origin"] and s["origin"].max_level == 3


def test_rules_are_read_from_the_rubric_file(tmp_path, rubric_text):
    text = edited(
        rubric_text,
        "fewest_points_at_least = 12\nmax_level = 2",
        "fewest_points_at_least = 12\nmax_level = 1",
    )
    adapted = load_rubric(write(tmp_path, text))
    assert suggest_levels(F("its", 24, 24), adapted)["counterfactual"].max_level == 1


def test_override_needs_a_justification(rubric):
    cap = suggest_levels(F("iv", checks=()), rubric)["design_checks"]  # at most 1
    ok = apply_override(cap, 1)
    assert (ok.level, ok.overridden, ok.justification) == (1, False, "")
    assert not apply_override(cap, 0).overridden  # below a limit agrees with it
    for empty in ("", "   "):
        with pytest.raises(
            RubricError, match="departs from the suggestion .*write a justification"
        ):
            apply_override(cap, 3, empty)
    d = apply_override(cap, 3, " F = 48 reported in the supplement, table S2 ")
    assert (d.level, d.overridden, d.justification) == (
        3,
        True,
        "F = 48 reported in the supplement, table S2",
    )
    exact = suggest_levels(F("its", 2, 10), rubric)["counterfactual"]  # suggested 0
    with pytest.raises(RubricError):
        apply_override(exact, 1)
    assert apply_override(exact, 1, "a comparison series exists").overridden
    with pytest.raises(RubricError, match="level 4 for 'design_checks' is outside 0-3"):
        apply_override(cap, 4, "why not")
    free = apply_override(None, 3, domain="timing")
    assert (free.domain, free.overridden) == ("timing", False)
    with pytest.raises(RubricError, match="needs a suggestion or a domain"):
        apply_override(None, 3)
    c = confirm(cap)
    assert (c.level, c.overridden, c.suggestion) == (1, False, cap)


def test_study_facts_validation_and_defaults():
    assert not F("its").comparison and not F("rd-time").comparison
    assert F("did").comparison and F("iv").comparison
    assert F("its", has_comparison=True).comparison
    f = F(
        "did",
        np.int64(4),
        5,
        checks="Parallel trends; my own test; pre_trends",
        assignment_grade=np.int64(2),
    )
    assert f.checks == ("pre-trends", "my-own-test") and f.unknown_checks == ("my-own-test",)
    assert f.pre_points == 4 and type(f.pre_points) is int and f.assignment_grade == 2
    assert "my-own-test" in f.checks_note
    assert F("did", checks=["balance"]).checks_note is None
    with pytest.raises(VocabularyError, match="unknown design 'its2'"):
        F("its2")
    with pytest.raises(AnalysisError, match="pre_points must be a whole number"):
        F("its", -1, 3)
    with pytest.raises(AnalysisError):
        F("its", 2.5, 3)
    with pytest.raises(RubricError, match="outside 0-3"):
        F("iv", assignment_grade=5)


def test_facts_from_record_treats_blank_cells_as_missing():
    f = facts_from_record("its", 12.0, float("nan"), float("nan"), None)
    assert (f.pre_points, f.post_points, f.checks, f.assignment_grade) == (12, None, None, None)
    g = facts_from_record("iv", None, None, "first stage F; balance", 2.0)
    assert g.checks == ("first-stage-f", "balance") and g.assignment_grade == 2


# ---- check codes -----------------------------------------------------------------------------


@pytest.mark.parametrize(
    "text,code",
    [
        ("  Placebo_Date ", "placebo-date"),
        ("PLACEBO   DATE", "placebo-date"),
        ("negative_control__outcome", "negative-control-outcome"),
        ("First-stage F statistic", "first-stage-f"),
        ("Callaway & Sant'Anna", "robust-staggered-estimator"),
        ("McCrary", "density-test"),
        ("something new", "something-new"),
    ],
)
def test_normalise_check(text, code):
    assert normalise_check(text) == code


def test_vocabulary_is_consistent():
    assert all(role in ROLES for role, _ in CHECKS.values())
    assert all(code in CHECKS for code in ALIASES.values())
    assert all(normalise_check(code) == code for code in CHECKS)
    listed = parse_checks("pre-trends; ; Pre trends; Parallel trends; odd one")
    assert listed.codes == ("pre-trends", "odd-one") and listed.unknown == ("odd-one",)
    assert "pre-trends" in listed and "odd-one" in listed.note
    assert parse_checks(None).codes == () and parse_checks(None).note is None
