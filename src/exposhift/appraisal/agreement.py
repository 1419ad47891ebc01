"""Agreement between two independent reviewers: percent agreement and weighted kappa.

Weighted kappa (Cohen 1968, Psychol Bull 70:213) for two raters on an ordered scale with
categories c_1 < ... < c_k, cell proportions p_ij (reviewer a in row i, reviewer b in column j)
and marginals p_i. and p_.j::

    kappa_w = 1 - sum_ij v_ij p_ij / sum_ij v_ij p_i. p_.j

with disagreement weights v_ij = |i - j| ("linear"), (i - j)^2 ("quadratic") or 1 for i != j
(``weights=None``: Cohen's 1960 unweighted kappa). The weights use the *positions* of the
categories on the full scale ``categories`` (0-3 by default), whether or not every level was
used. This is the same statistic as ``sklearn.metrics.cohen_kappa_score(a, b,
labels=categories, weights=...)``; note that scikit-learn without ``labels`` spaces the weights
by the levels that happen to occur, which changes linear and quadratic kappa when a level in
the middle is unused. Equivalently, with agreement weights w_ij = 1 - v_ij / v_max,
kappa_w = (p_o(w) - p_e(w)) / (1 - p_e(w)) (Altman 1991, Practical Statistics for Medical
Research, §14.3.4); :class:`KappaResult` reports p_o(w) and p_e(w) in that form.

Undefined kappa: when the chance-expected disagreement is zero, which happens exactly when both
reviewers put every item in one and the same category, kappa is 0/0. We return NaN and say why
in :attr:`KappaResult.reason` (no warning is raised). scikit-learn also returns NaN here (its
default ``replace_undefined_by=np.nan``) but emits an ``UndefinedMetricWarning``. With no
paired ratings at all kappa is NaN as well.

Kappa depends on how ratings spread over the levels (prevalence): compare values across
domains or studies with care (Altman 1991, §14.3.5), and always look at the table itself.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from exposhift import cautions
from exposhift.appraisal.rubric import Rubric, load_rubric
from exposhift.errors import AnalysisError, ReviewError, RubricError

WEIGHTS = ("linear", "quadratic", None)
LONG_COLUMNS = ("study_id", "reviewer", "domain", "level")
CAUTION = cautions.AGREEMENT
#: the row that pools every study x domain pair, and the row of the overall level
ALL_DOMAINS = "all domains"
OVERALL_LEVEL = "overall level"
TABLE_COLUMNS = ("domain", "n", "percent_agreement", "kappa_linear", "kappa_quadratic", "note")


@dataclass(frozen=True)
class KappaResult:
    kappa: float  # NaN when undefined (see ``reason``)
    weights: str | None
    n: int  # number of paired ratings
    observed: float  # weighted observed agreement p_o(w)
    expected: float  # weighted chance-expected agreement p_e(w)
    reason: str | None  # why kappa is NaN; None when it is defined


def _indices(values: object, categories: Sequence, name: str) -> np.ndarray:
    position = {c: i for i, c in enumerate(categories)}
    arr = np.asarray(values, dtype=object).ravel()
    out = np.empty(arr.size, dtype=int)
    for n, v in enumerate(arr):
        try:
            out[n] = position[v]
        except (KeyError, TypeError):
            raise AnalysisError(
                f"rating {v!r} of reviewer {name} (position {n + 1}) is not one of the "
                f"categories {', '.join(map(str, categories))}; remove blank or out-of-range "
                "ratings first"
            ) from None
    return out


def _check_pair(a: object, b: object, categories: Sequence) -> tuple[np.ndarray, np.ndarray]:
    if len(categories) < 2 or len(set(categories)) != len(categories):
        raise AnalysisError(f"categories must be two or more distinct levels, got {categories!r}")
    ia = _indices(a, categories, "a")
    ib = _indices(b, categories, "b")
    if ia.size != ib.size:
        raise AnalysisError(
            f"the two reviewers have {ia.size} and {ib.size} ratings; kappa needs one rating "
            "from each reviewer per item, in the same order"
        )
    return ia, ib


def kappa_details(
    a: object, b: object, weights: str | None = "linear", categories: Sequence = (0, 1, 2, 3)
) -> KappaResult:
    """Weighted kappa with its observed and expected agreement, and why it is NaN if it is.

    Source: Cohen (1968), weighted kappa; Cohen (1960) for ``weights=None``.
    """
    if weights not in WEIGHTS:
        raise AnalysisError(
            f"unknown weights {weights!r}; accepted: 'linear', 'quadratic' or None (unweighted)"
        )
    ia, ib = _check_pair(a, b, categories)
    n, k = ia.size, len(categories)
    if n == 0:
        return KappaResult(
            float("nan"), weights, 0, float("nan"), float("nan"), "no paired ratings"
        )
    table = np.zeros((k, k))
    np.add.at(table, (ia, ib), 1.0)
    p = table / n
    expected = np.outer(p.sum(axis=1), p.sum(axis=0))
    d = np.abs(np.subtract.outer(np.arange(k), np.arange(k))).astype(float)
    v = {"linear": d, "quadratic": d**2, None: (d > 0).astype(float)}[weights]
    w = 1.0 - v / v.max()
    p_o = float((w * p).sum())
    p_e = float((w * expected).sum())
    disagree_e = float((v * expected).sum())
    if disagree_e == 0.0:
        level = categories[int(ia[0])]
        return KappaResult(
            float("nan"),
            weights,
            n,
            p_o,
            p_e,
            f"undefined: both reviewers gave all {n} ratings the same level "
            f"({level}); agreement is complete but so is chance agreement",
        )
    kappa = 1.0 - float((v * p).sum()) / disagree_e
    return KappaResult(kappa, weights, n, p_o, p_e, None)


def weighted_kappa(
    a: object, b: object, weights: str | None = "linear", categories: Sequence = (0, 1, 2, 3)
) -> float:
    """Cohen's (1968) weighted kappa of two reviewers' ratings of the same items.

    ``weights``: "linear", "quadratic" or None (unweighted, Cohen 1960). Returns NaN when kappa
    is undefined; :func:`kappa_details` says why. See the module docstring for the formula.
    """
    return kappa_details(a, b, weights, categories).kappa


def percent_agreement(a: object, b: object) -> float:
    """Percentage (0-100) of items on which the two reviewers gave the same level; NaN if none.

    Source: the proportion of exact agreement, Altman (1991), §14.3.1.
    """
    va = np.asarray(a, dtype=object).ravel()
    vb = np.asarray(b, dtype=object).ravel()
    if va.size != vb.size:
        raise AnalysisError(
            f"the two reviewers have {va.size} and {vb.size} ratings; percent "
            "agreement needs one rating from each reviewer per item"
        )
    if va.size == 0:
        return float("nan")
    return 100.0 * float(np.mean([x == y for x, y in zip(va, vb, strict=True)]))


def _show(value: object) -> str:
    """A level as a reviewer typed it: 5 rather than np.float64(5.0)."""
    if isinstance(value, (int, float, np.integer, np.floating)) and float(value).is_integer():
        return str(int(value))
    return repr(value.item() if isinstance(value, np.generic) else value)


def _pairs(
    frame: pd.DataFrame, rubric: Rubric, categories: Sequence
) -> tuple[dict[str, tuple[list, list]], list[str]]:
    missing = [c for c in LONG_COLUMNS if c not in frame.columns]
    if missing:
        raise AnalysisError(
            f"the appraisal table has no column {', '.join(missing)}; it needs "
            f"{', '.join(LONG_COLUMNS)} (one row per study, reviewer and domain)"
        )
    data = frame
    if "stage" in data.columns:
        data = data[data["stage"] == "independent"]
    data = data[data["level"].notna()]
    unknown = sorted(set(data["domain"]) - set(rubric.domain_keys), key=str)
    if unknown:
        raise RubricError(
            f"unknown domain{'s' if len(unknown) > 1 else ''} "
            f"{', '.join(map(repr, unknown))}; accepted domains: "
            f"{', '.join(rubric.domain_keys)}"
        )
    bad = data[~data["level"].isin(list(categories))]
    if len(bad):
        row = bad.iloc[0]
        raise RubricError(
            f"level {_show(row['level'])} for study {row['study_id']!r}, reviewer "
            f"{row['reviewer']!r}, domain {row['domain']!r} is outside "
            f"{', '.join(map(str, categories))}"
        )
    dup = data.duplicated(["study_id", "reviewer", "domain"], keep=False)
    if dup.any():
        row = data[dup].iloc[0]
        raise ReviewError(
            f"reviewer {row['reviewer']!r} rated domain {row['domain']!r} of study "
            f"{row['study_id']!r} more than once at the independent stage; keep "
            "one independent appraisal per reviewer and study"
        )
    notes: list[str] = []
    pairs: dict[str, tuple[list, list]] = {k: ([], []) for k in rubric.domain_keys}
    for study, rows in data.groupby("study_id", sort=True):
        reviewers = sorted(rows["reviewer"].unique(), key=str)
        if len(reviewers) < 2:
            continue
        first, second = reviewers[:2]
        if len(reviewers) > 2:
            notes.append(
                f"study {study!r} has {len(reviewers)} reviewers; the first two by "
                f"name ({first}, {second}) are compared"
            )
        a = rows[rows["reviewer"] == first].set_index("domain")["level"]
        b = rows[rows["reviewer"] == second].set_index("domain")["level"]
        for key in rubric.domain_keys:
            if key in a.index and key in b.index:
                pairs[key][0].append(a[key])
                pairs[key][1].append(b[key])
    present = set(data["domain"])
    return {k: v for k, v in pairs.items() if k in present}, notes


def _row(domain: str, a: list, b: list, categories: Sequence, note: str = "") -> dict:
    lin = kappa_details(a, b, "linear", categories)
    quad = kappa_details(a, b, "quadratic", categories)
    reason = lin.reason or quad.reason
    return {
        "domain": domain,
        "n": len(a),
        "percent_agreement": percent_agreement(a, b),
        "kappa_linear": lin.kappa,
        "kappa_quadratic": quad.kappa,
        "note": "; ".join(x for x in (note, reason) if x),
    }


def agreement_table(
    frame: pd.DataFrame, rubric: Rubric | None = None, categories: Sequence = (0, 1, 2, 3)
) -> pd.DataFrame:
    """Per-domain agreement of independent appraisals, plus an ``overall`` row.

    ``frame`` is long: one row per study, reviewer and domain, columns ``study_id``,
    ``reviewer``, ``domain``, ``level`` (and optionally ``stage``: only ``independent`` rows are
    used). Blank levels are skipped. Pairing: per study, the first two reviewers by name
    (sorted as text) are compared; further reviewers are ignored and mentioned in
    ``DataFrame.attrs["notes"]``. A domain counts a study only when both reviewers rated it.

    Columns: ``domain``, ``n`` (studies with two ratings of the domain), ``percent_agreement``
    (0-100), ``kappa_linear``, ``kappa_quadratic`` (Cohen 1968), ``note`` (why a kappa is
    NaN). Domains follow rubric order. The ``all domains`` row pools every study x domain pair
    of the rows above into one table (``n`` is then the number of pairs, not of studies) and
    computes the same statistics on it; it is not the mean of the domain kappas. Agreement on
    the overall level (``n`` = studies) is :func:`overall_level_row`. ``attrs["caution"]`` holds a
    caution to show beside the table.
    """
    rubric = rubric if rubric is not None else load_rubric()
    pairs, notes = _pairs(frame, rubric, categories)
    rows = [_row(key, a, b, categories) for key, (a, b) in pairs.items()]
    all_a = [x for a, _ in pairs.values() for x in a]
    all_b = [x for _, b in pairs.values() for x in b]
    rows.append(
        _row(
            ALL_DOMAINS,
            all_a,
            all_b,
            categories,
            note=f"pooled over {sum(1 for a, _ in pairs.values() if a)} domains "
            "(each study x domain pair once; n = pairs)",
        )
    )
    table = pd.DataFrame(rows, columns=list(TABLE_COLUMNS))
    table.attrs["notes"] = notes
    table.attrs["caution"] = CAUTION
    return table


def overall_level_row(frame: pd.DataFrame, categories: Sequence = (0, 1, 2, 3)) -> dict:
    """Agreement on the overall level of each study (``n`` = studies with two independent
    overall levels): one row in the columns of :func:`agreement_table`.

    ``frame``: one row per independent appraisal, columns ``study_id``, ``reviewer``,
    ``overall`` (blank overall levels are skipped). Pairing as in :func:`agreement_table`: the
    first two reviewers by name. Percent agreement (Altman 1991, §14.3.1) and Cohen's weighted
    kappa (Cohen 1968) on the pairs.
    """
    data = frame[frame["overall"].notna()]
    a: list = []
    b: list = []
    for _, rows in data.groupby("study_id", sort=True):
        reviewers = sorted(rows["reviewer"].unique(), key=str)
        if len(reviewers) < 2:
            continue
        by = rows.set_index("reviewer")["overall"]
        a.append(int(by[reviewers[0]]))
        b.append(int(by[reviewers[1]]))
    return _row(
        OVERALL_LEVEL, a, b, categories, note="the overall level of each study (n = studies)"
    )
