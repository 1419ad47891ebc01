"""Weighted kappa and the agreement table, checked against outside references.

References:
- scikit-learn ``sklearn.metrics.cohen_kappa_score`` (a general-purpose reference library),
  with ``labels=(0, 1, 2, 3)`` so both use the full scale for the weights;
- statsmodels ``statsmodels.stats.inter_rater.cohens_kappa`` as a second library;
- published worked examples in ``kappa_checks.json`` (Altman 1991, Practical Statistics for
  Medical Research §14.3, read in the book's text; a SAS printout stored with statsmodels'
  test suite), each with its source and tolerance.
"""

from __future__ import annotations

import json
import math
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.metrics import cohen_kappa_score
from statsmodels.stats.inter_rater import cohens_kappa

from exposhift import weighted_kappa as top_level_kappa
from exposhift.appraisal.agreement import (
    agreement_table,
    kappa_details,
    percent_agreement,
    weighted_kappa,
)
from exposhift.errors import AnalysisError, ReviewError, RubricError

SCALE = (0, 1, 2, 3)
CHECKS = json.loads((Path(__file__).parent / "kappa_checks.json").read_text())["examples"]
BY_NAME = {e["name"]: e for e in CHECKS}


def sklearn_kappa(a, b, weights, labels=SCALE):
    """The reference, with its undefined-case warning silenced (it returns NaN then)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return cohen_kappa_score(a, b, labels=list(labels), weights=weights)


def expand(table):
    """Rating vectors (a, b) from a contingency table (rows a, columns b)."""
    a, b = [], []
    for i, row in enumerate(table):
        for j, count in enumerate(row):
            a += [i] * count
            b += [j] * count
    return a, b


def example_table(example):
    if "collapse_of" not in example:
        return example["table"]
    base = np.array(BY_NAME[example["collapse_of"]]["table"])
    groups = example["groups"]
    return [[int(base[np.ix_(gi, gj)].sum()) for gj in groups] for gi in groups]


# ---- published worked examples -----------------------------------------------------------------


@pytest.mark.parametrize("example", CHECKS, ids=[e["name"] for e in CHECKS])
def test_published_worked_examples(example):
    table = example_table(example)
    a, b = expand(table)
    k = len(table)
    got = {
        "percent_agreement": percent_agreement(a, b),
        "kappa_unweighted": weighted_kappa(a, b, None, categories=range(k)),
        "kappa_linear": weighted_kappa(a, b, "linear", categories=range(k)),
    }
    for quantity, expected in example["expected"].items():
        assert got[quantity] == pytest.approx(expected, abs=example["abs_tol"][quantity]), (
            quantity,
            example["source"],
        )


def test_altman_observed_and_expected_agreement():
    # Altman (1991) §14.3.1: p_o = 54/85 = 0.64, chance agreement 26.2/85 = 0.31
    a, b = expand(BY_NAME["altman_radiologists"]["table"])
    d = kappa_details(a, b, None)
    assert d.observed == pytest.approx(54 / 85, abs=1e-12)
    assert d.expected == pytest.approx(0.31, abs=0.005)
    assert d.n == 85 and d.reason is None


# ---- scikit-learn and statsmodels as reference libraries ---------------------------------------

pairs = st.integers(min_value=1, max_value=60).flatmap(
    lambda n: st.tuples(
        st.lists(st.sampled_from(SCALE), min_size=n, max_size=n),
        st.lists(st.sampled_from(SCALE), min_size=n, max_size=n),
    )
)


@settings(max_examples=300, deadline=None)
@given(pairs, st.sampled_from([None, "linear", "quadratic"]))
def test_matches_sklearn_cohen_kappa_score(pair, weights):
    a, b = pair
    ours = weighted_kappa(a, b, weights)
    ref = sklearn_kappa(a, b, weights)
    if math.isnan(ref):
        assert math.isnan(ours)
        assert "same level" in kappa_details(a, b, weights).reason
    else:
        assert ours == pytest.approx(ref, abs=1e-12)


@settings(max_examples=100, deadline=None)
@given(
    st.lists(
        st.tuples(st.sampled_from("abcde"), st.sampled_from("abcde")), min_size=2, max_size=40
    ),
    st.sampled_from([None, "linear", "quadratic"]),
)
def test_matches_sklearn_on_another_scale(items, weights):
    scale = ("a", "b", "c", "d", "e")
    a = [x for x, _ in items]
    b = [y for _, y in items]
    ours = weighted_kappa(a, b, weights, categories=scale)
    ref = sklearn_kappa(a, b, weights, labels=scale)
    assert (math.isnan(ours) and math.isnan(ref)) or ours == pytest.approx(ref, abs=1e-12)


def test_matches_statsmodels_on_the_altman_table():
    table = np.array(BY_NAME["altman_radiologists"]["table"])
    a, b = expand(table)
    assert weighted_kappa(a, b, "linear") == pytest.approx(
        cohens_kappa(table, wt="linear", return_results=False), abs=1e-12
    )
    assert weighted_kappa(a, b, "quadratic") == pytest.approx(
        cohens_kappa(table, wt="quadratic", return_results=False), abs=1e-12
    )
    assert weighted_kappa(a, b, None) == pytest.approx(
        cohens_kappa(table, return_results=False), abs=1e-12
    )


def test_full_scale_weights_differ_from_sklearn_without_labels():
    # level 2 unused: sklearn without labels spaces 0, 1, 3 as 0, 1, 2 (documented difference)
    a = [0, 0, 3, 3, 1, 1, 0]
    b = [0, 1, 3, 1, 1, 3, 3]
    ours = weighted_kappa(a, b, "linear")
    assert ours == pytest.approx(sklearn_kappa(a, b, "linear"), abs=1e-12)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        unlabelled = cohen_kappa_score(a, b, weights="linear")
    assert ours == pytest.approx(3 / 17, abs=1e-12)  # 1 - 14/17 by hand on the 0-3 scale
    assert unlabelled == pytest.approx(2 / 9, abs=1e-12)
    assert weighted_kappa(a, b, None) == pytest.approx(cohen_kappa_score(a, b), abs=1e-12)


def test_undefined_kappa_is_nan_with_a_reason():
    d = kappa_details([2, 2, 2], [2, 2, 2], "quadratic")
    assert math.isnan(d.kappa) and d.observed == 1.0 and d.expected == 1.0
    assert d.reason.startswith("undefined: both reviewers gave all 3 ratings the same level (2)")
    assert math.isnan(sklearn_kappa([2, 2, 2], [2, 2, 2], "quadratic"))  # sklearn agrees: NaN
    empty = kappa_details([], [])
    assert math.isnan(empty.kappa) and empty.reason == "no paired ratings"
    assert math.isnan(percent_agreement([], []))
    # one category each but different ones: defined, and no better than chance
    assert weighted_kappa([1, 1], [3, 3]) == pytest.approx(0.0, abs=1e-12)
    assert top_level_kappa([0, 1, 2, 3], [0, 1, 2, 3], "quadratic") == pytest.approx(1.0)


def test_bad_input_is_reported():
    with pytest.raises(AnalysisError, match="have 2 and 3 ratings"):
        weighted_kappa([1, 2], [1, 2, 3])
    with pytest.raises(AnalysisError, match=r"rating 4 of reviewer b \(position 2\)"):
        weighted_kappa([1, 2], [1, 4])
    with pytest.raises(AnalysisError, match="rating nan of reviewer a"):
        weighted_kappa([float("nan"), 2], [1, 2])
    with pytest.raises(AnalysisError, match="unknown weights 'cubic'"):
        weighted_kappa([1, 2], [1, 2], "cubic")
    with pytest.raises(AnalysisError, match="two or more distinct levels"):
        weighted_kappa([1], [1], categories=(1, 1))
    with pytest.raises(AnalysisError, match="percent agreement needs"):
        percent_agreement([1], [1, 2])


# ---- the agreement table -----------------------------------------------------------------------


def long_frame(rows):
    return pd.DataFrame(rows, columns=["study_id", "reviewer", "domain", "level", "stage"])


ANA = {"s1": (3, 2), "s2": (2, 2), "s3": (1, 0), "s4": (0, 0), "s5": (2, 3)}
BEN = {"s1": (3, 1), "s2": (1, 2), "s3": (1, 1), "s4": (0, 1), "s5": (3, 3)}


@pytest.fixture()
def frame():
    rows = []
    for who, table in (("ana", ANA), ("ben", BEN)):
        for study, (origin, counterfactual) in table.items():
            rows.append((study, who, "origin", origin, "independent"))
            rows.append((study, who, "counterfactual", counterfactual, "independent"))
    # a third reviewer on s1 (ignored: first two by name), a consensus (ignored), a study with
    # one reviewer (unpaired), and a domain rated by only one of the two on s2
    rows += [
        ("s1", "cem", "origin", 0, "independent"),
        ("s1", "ana", "origin", 1, "consensus"),
        ("s6", "ana", "origin", 3, "independent"),
        ("s2", "ana", "timing", 2, "independent"),
        ("s3", "ben", "timing", None, "independent"),
    ]
    return long_frame(rows)


def test_agreement_table_per_domain_against_sklearn(frame, rubric):
    table = agreement_table(frame, rubric)
    assert list(table.columns) == [
        "domain",
        "n",
        "percent_agreement",
        "kappa_linear",
        "kappa_quadratic",
        "note",
    ]
    assert list(table["domain"]) == ["origin", "counterfactual", "timing", "all domains"]
    row = table.set_index("domain")
    # origin pairs by hand: (3,3) (2,1) (1,1) (0,0) (2,3) -> 3 of 5 agree
    oa, ob = [3, 2, 1, 0, 2], [3, 1, 1, 0, 3]
    ca, cb = [2, 2, 0, 0, 3], [1, 2, 1, 1, 3]
    assert row.loc["origin", "n"] == 5 and row.loc["origin", "percent_agreement"] == 60.0
    assert row.loc["counterfactual", "percent_agreement"] == 40.0
    for dom, (a, b) in {"origin": (oa, ob), "counterfactual": (ca, cb)}.items():
        for w in ("linear", "quadratic"):
            assert row.loc[dom, f"kappa_{w}"] == pytest.approx(sklearn_kappa(a, b, w), abs=1e-12)
    assert row.loc["timing", "n"] == 0 and math.isnan(row.loc["timing", "kappa_linear"])
    assert row.loc["timing", "note"] == "no paired ratings"
    # "all domains" pools every study x domain pair (n = pairs)
    assert row.loc["all domains", "n"] == 10
    assert row.loc["all domains", "kappa_quadratic"] == pytest.approx(
        sklearn_kappa(oa + ca, ob + cb, "quadratic"), abs=1e-12
    )
    assert row.loc["all domains", "percent_agreement"] == 50.0
    assert "Kappa depends on how ratings spread" in table.attrs["caution"]
    assert table.attrs["notes"] == [
        "study 's1' has 3 reviewers; the first two by name (ana, ben) are compared"
    ]


def test_agreement_table_notes_an_undefined_kappa(rubric):
    rows = [(s, r, "origin", 3, "independent") for s in ("a", "b") for r in ("x", "y")]
    table = agreement_table(long_frame(rows), rubric).set_index("domain")
    assert table.loc["origin", "percent_agreement"] == 100.0
    assert math.isnan(table.loc["origin", "kappa_linear"])
    assert (
        "undefined: both reviewers gave all 2 ratings the same level (3)"
        in table.loc["origin", "note"]
    )


def test_agreement_table_rejects_bad_frames(frame, rubric):
    dup = pd.concat([frame, frame.iloc[[0]]])
    with pytest.raises(
        ReviewError, match="reviewer 'ana' rated domain 'origin' of study 's1' more than once"
    ):
        agreement_table(dup, rubric)
    odd = frame.copy()
    odd.loc[0, "domain"] = "blinding"
    with pytest.raises(RubricError, match="unknown domain 'blinding'; accepted domains: origin"):
        agreement_table(odd, rubric)
    high = frame.copy()
    high.loc[1, "level"] = 5
    with pytest.raises(
        RubricError,
        match="level 5 for study 's1', reviewer 'ana', domain "
        "'counterfactual' is outside 0, 1, 2, 3",
    ):
        agreement_table(high, rubric)
    with pytest.raises(AnalysisError, match="no column reviewer"):
        agreement_table(frame.drop(columns="reviewer"), rubric)


def test_agreement_table_without_stage_column_uses_every_row(frame, rubric):
    independent = frame[frame["stage"] == "independent"].drop(columns="stage")
    a = agreement_table(independent, rubric)
    b = agreement_table(frame, rubric)
    pd.testing.assert_frame_equal(a, b)
