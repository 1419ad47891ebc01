"""The invented demo scenario: valid for import, rich enough for every later feature, stable.

Outside references used here:
- pycountry (ISO 3166-1 alpha-3 codes) for every country code;
- the extraction-sheet columns and vocabularies of exposhift.io.columns and exposhift.vocab;
- SE from a confidence interval, (ln U - ln L) / (2 z), and from a p value, |ln est| / z
  (Altman & Bland 2011, BMJ 343:d2090) to show the reported forms agree with each other;
- scipy.stats.kstest against the standard normal to show the noise matches the reported SEs;
- statsmodels combine_effects (Paule-Mandel tau^2, I^2) for "real but moderate" heterogeneity;
- scikit-learn cohen_kappa_score for "realistic" reviewer disagreement;
- the summary rule of the rubric notes (design docs RUBRIC.md) for overall levels.
Thresholds such as "agreement between 60% and 95%" describe the intended scenario (common
practice for a plausible demo, no published source).
"""

from __future__ import annotations

import math
import re
from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd
import pycountry
import pytest
from pandas.testing import assert_frame_equal
from scipy import stats
from sklearn.metrics import cohen_kappa_score
from statsmodels.stats.meta_analysis import combine_effects

from exposhift import demo_scenario
from exposhift.demo_scenario.catalogue import STUDIES
from exposhift.demo_scenario.estimates import true_effect
from exposhift.io.columns import (
    COLUMN_NAMES,
    EVENT_COLUMNS,
    REQUIRED,
    STUDY_COLUMNS,
)
from exposhift.vocab import (
    CHANGE_KINDS,
    DESIGNS,
    DIRECTIONS,
    ESTIMATE_KINDS,
    MEASURES,
    REVIEW_STAGES,
)

SEED_DIR = Path(__file__).resolve().parents[1] / "seed_records"

# the rubric domain keys as the appraisal issue names them (not read from the demo module)
DOMAINS = (
    "origin",
    "counterfactual",
    "design_checks",
    "falsification",
    "timing",
    "concurrent_changes",
    "exposure_shift",
    "outcome_data",
    "inference",
    "transparency",
    "applicability",
)
CORE = ("origin", "counterfactual", "design_checks", "concurrent_changes")
RATIO = ("RR", "OR", "HR", "IRR")
FALSIFICATION = {
    "placebo-date",
    "placebo-place",
    "negative-control-outcome",
    "negative-control-exposure",
    "in-space-placebo",
}


@pytest.fixture(scope="module")
def scenario() -> dict[str, pd.DataFrame]:
    return demo_scenario.build_scenario()


@pytest.fixture(scope="module")
def est(scenario) -> pd.DataFrame:
    return scenario["estimates"]


@pytest.fixture(scope="module")
def appr(scenario) -> pd.DataFrame:
    return scenario["appraisals"]


def overall(ratings: dict[str, int]) -> int:
    """Summary rule of the rubric notes (RUBRIC.md): lowest core domain; a 0 in another domain
    except applicability caps the overall level at 1."""
    level = min(ratings[d] for d in CORE)
    if any(ratings[d] == 0 for d in DOMAINS if d not in CORE and d != "applicability"):
        level = min(level, 1)
    return level


@pytest.fixture(scope="module")
def levels(appr) -> dict[str, int]:
    cons = appr[appr["stage"] == "consensus"]
    return {r["study_id"]: overall({d: int(r[d]) for d in DOMAINS}) for _, r in cons.iterrows()}


def analysis_value(measure: str, value: float) -> float:
    if measure == "pct_change":
        return math.log1p(value / 100.0)
    return math.log(value) if MEASURES[measure] == "log" else value


def blank(value) -> bool:
    return value is None or (isinstance(value, float) and math.isnan(value)) or value is pd.NA


# ---------------------------------------------------------------- shape and import validation


def test_frames_have_the_sheet_columns_in_order(scenario):
    # every sheet column except the optional same_population_as (no demo study declares one)
    assert list(scenario["estimates"].columns) == [
        c for c in COLUMN_NAMES if c != "same_population_as"
    ]
    assert list(scenario["events"].columns) == [*EVENT_COLUMNS, "demo"]
    cols = list(scenario["appraisals"].columns)
    assert cols[:3] == ["study_id", "reviewer", "stage"]
    assert cols[3 : 3 + len(DOMAINS)] == list(DOMAINS)
    assert set(cols[3 + len(DOMAINS) :]) <= {f"{d}_why" for d in DOMAINS}


def test_every_row_is_flagged_demo(scenario):
    assert (scenario["estimates"]["demo"] == "yes").all()
    assert (scenario["events"]["demo"] == "yes").all()


def test_required_columns_filled(est):
    for col in REQUIRED:
        assert not est[col].map(blank).any(), col


def test_countries_are_iso_alpha3_known_to_pycountry(scenario):
    codes = set(scenario["estimates"]["country"]) | set(scenario["events"]["country"])
    for code in codes:
        assert re.fullmatch(r"[A-Z]{3}", code), code
        assert pycountry.countries.get(alpha_3=code) is not None, code


def _valid_date(text: str) -> bool:
    m = re.fullmatch(r"(\d{4})(?:-(\d{2})(?:-(\d{2}))?)?", text)
    if not m:
        return False
    y, mo, d = (int(g) if g else 1 for g in m.groups())
    try:
        date(y, mo, d)
    except ValueError:
        return False
    return True


def test_dates_are_valid_with_their_precision(scenario):
    dates = list(scenario["estimates"]["change_date"]) + list(scenario["events"]["change_date"])
    assert all(_valid_date(d) for d in dates)
    assert {len(d) for d in dates} == {4, 7, 10}  # year, month and day precision all present
    assert not _valid_date("2005-02-30") and not _valid_date("2005-13")


def test_vocabulary_codes_valid(scenario):
    est, ev, appr = scenario["estimates"], scenario["events"], scenario["appraisals"]
    assert set(est["design"]) <= set(DESIGNS)
    assert set(est["change_kind"]) | set(ev["change_kind"]) <= set(CHANGE_KINDS)
    assert set(est["change_direction"]) | set(ev["change_direction"]) <= set(DIRECTIONS)
    assert set(est["measure"]) <= set(MEASURES)
    assert set(est["estimate_kind"]) <= set(ESTIMATE_KINDS)
    assert set(appr["stage"]) <= set(REVIEW_STAGES)
    assert set(est["primary"]) <= {"yes", "no"}


def test_reported_checks_use_the_canonical_codes(est):
    from exposhift.appraisal.checks import CHECKS

    codes = {c for cell in est["checks"].dropna() for c in cell.split(";")}
    assert codes and codes <= set(CHECKS), codes - set(CHECKS)


def test_numbers_pass_the_import_rules(est):
    for r in est.itertuples():
        has_ci = not blank(r.ci_low) and not blank(r.ci_high)
        assert has_ci or not blank(r.se) or not blank(r.p_value), r.study_id
        if has_ci:
            assert r.ci_low <= r.estimate <= r.ci_high and r.ci_low < r.ci_high, r.study_id
        if r.measure in RATIO:
            assert r.estimate > 0 and (not has_ci or r.ci_low > 0), r.study_id
        if r.measure == "pct_change":
            assert r.estimate > -100 and (not has_ci or r.ci_low > -100)
        if not blank(r.se):
            assert r.se > 0
        if not blank(r.ci_level):
            assert 0 < r.ci_level < 1
        if not blank(r.p_value):
            assert 0 < r.p_value <= 1
        if not blank(r.baseline_risk):
            assert 0 < r.baseline_risk < 1
        if r.estimate_kind == "per-unit":
            assert r.per_unit > 0 and not blank(r.change_unit), r.study_id
        else:
            assert blank(r.per_unit), r.study_id


def test_study_and_event_fields_agree_on_every_row(scenario):
    est, ev = scenario["estimates"], scenario["events"]
    for col in (c for c in STUDY_COLUMNS if c in est.columns):
        assert est.groupby("study_id")[col].nunique(dropna=False).max() == 1, col
    both = pd.concat([est[list(EVENT_COLUMNS)], ev[list(EVENT_COLUMNS)]])
    for col in EVENT_COLUMNS:
        assert both.groupby("event_id")[col].nunique(dropna=False).max() == 1, col


def test_estimate_keys_unique(est):
    key = ["study_id", "event_id", "outcome", "measure", "estimate_kind", "subgroup", "time_window"]
    assert not est[key].fillna("").duplicated().any()


def test_citations_name_obviously_invented_journals(est):
    for citation, year in est[["citation", "year"]].drop_duplicates().itertuples(index=False):
        assert ", Demo " in citation and str(year) in citation, citation


# ---------------------------------------------------------------- richness


def test_counts(scenario, est):
    assert est["study_id"].nunique() >= 40
    assert len(est) >= 60
    families = est["family"].fillna(est["exposure"] + " " + est["change_kind"])
    assert families.nunique() >= 3
    assert set(est["design"]) == set(DESIGNS)
    unstudied = set(scenario["events"]["event_id"]) - set(est["event_id"])
    assert len(unstudied) >= 3 and unstudied == set(scenario["events"]["event_id"])


def test_uncertainty_and_estimate_forms_are_mixed(est):
    ci = est["ci_low"].notna()
    assert (~ci & est["se"].notna()).sum() >= 2  # SE only
    assert (~ci & est["se"].isna() & est["p_value"].notna()).sum() >= 2  # p only
    assert (est["ci_level"] == 0.9).sum() >= 2
    assert ci.mean() > 0.7  # mostly confidence intervals
    assert set(est["measure"]) >= {"RR", "OR", "HR", "IRR", "pct_change", "MD", "RD"}
    assert est["subgroup"].notna().sum() >= 3 and (est["primary"] == "no").sum() >= 5
    assert (est["estimate_kind"] == "per-unit").sum() >= 2
    its = est[est["design"] == "its"]
    paired = its.groupby("study_id")["estimate_kind"].apply(set)
    assert any({"level", "slope"} <= kinds for kinds in paired)


def test_events_analysed_by_two_studies_including_a_same_unit_pair(est):
    per_event = est.groupby("event_id")["study_id"].nunique()
    assert (per_event >= 2).sum() >= 3
    units = (
        est.drop_duplicates(["study_id", "event_id"])
        .groupby(["event_id", "population", "data_source"])["study_id"]
        .nunique()
    )
    assert (units >= 2).any()  # the second study must be counted once later


def test_ban_family_spans_six_countries_and_25_years(est):
    bans = est[est["change_kind"] == "ban"].drop_duplicates("event_id")
    best = bans.groupby("exposure").agg(
        n=("country", "nunique"), span=("change_date", lambda d: int(max(d)[:4]) - int(min(d)[:4]))
    )
    assert ((best["n"] >= 6) & (best["span"] >= 25)).any()


def test_one_place_has_repeated_events_and_a_reversal(est):
    ev = est.drop_duplicates("event_id")
    found = False
    for (_, _), g in ev.groupby(["family", "country"]):
        dec = g[g["change_direction"] == "decrease"]["change_date"].sort_values()
        inc = g[g["change_direction"] == "increase"]["change_date"]
        if len(dec) >= 2 and len(inc) and inc.min() > dec.iloc[0]:
            found = True
    assert found


def test_design_facts_for_appraisal_suggestions(est):
    studies = est.drop_duplicates("study_id")
    its = studies[studies["design"] == "its"]
    assert (its["pre_points"] < 3).any()
    iv_checks = studies.loc[studies["design"] == "iv", "checks"].fillna("")
    assert iv_checks.str.contains("first-stage-f").any()
    assert (~iv_checks.str.contains("first-stage-f")).any()
    stag = studies.loc[studies["design"] == "staggered-did", "checks"].fillna("")
    assert stag.str.contains("robust-staggered-estimator").any()


# ---------------------------------------------------------------- numbers behave as claimed


def test_noise_matches_the_reported_standard_errors(est):
    """Standardised residuals (reported - true) / SE should look standard normal
    (Kolmogorov-Smirnov test from scipy)."""
    z = []
    rows = iter(est.itertuples())
    for study in STUDIES:
        for e in study.estimates:
            r = next(rows)
            z.append((analysis_value(r.measure, r.estimate) - true_effect(study, e)) / e.se)
    z = np.array(z)
    assert abs(z.mean()) < 3 / math.sqrt(len(z))
    assert 0.7 < z.std(ddof=1) < 1.3
    assert stats.kstest(z, "norm").pvalue > 0.01


def test_reported_forms_agree_with_the_se(est):
    """SE from the CI and SE from the p value (Altman & Bland 2011) recover the SE used to
    draw the estimate, within rounding."""
    rows = iter(est.itertuples())
    for study in STUDIES:
        for e in study.estimates:
            r = next(rows)
            b = analysis_value(r.measure, r.estimate)
            if not blank(r.ci_low):
                level = 0.95 if blank(r.ci_level) else r.ci_level
                zc = stats.norm.ppf(1 - (1 - level) / 2)
                se = (
                    analysis_value(r.measure, r.ci_high) - analysis_value(r.measure, r.ci_low)
                ) / (2 * zc)
                assert se == pytest.approx(e.se, rel=0.25), study.study_id
            if not blank(r.p_value) and blank(r.ci_low):
                se = abs(b) / stats.norm.isf(r.p_value / 2)
                assert se == pytest.approx(e.se, rel=0.15), study.study_id
            if not blank(r.se):
                assert r.se == pytest.approx(e.se)


def _one_per_event(frame: pd.DataFrame, levels: dict[str, int]) -> pd.DataFrame:
    f = frame[(frame["primary"] == "yes") & (frame["estimate_kind"] == "change")].copy()
    f["level"] = f["study_id"].map(levels)
    f = f.sort_values(["event_id", "level"], ascending=[True, False], na_position="last")
    return f.drop_duplicates("event_id")


def test_ban_heterogeneity_is_real_but_moderate(est, levels):
    """Paule-Mandel tau^2 and I^2 from statsmodels on one estimate per dravonil ban."""
    f = _one_per_event(
        est[(est["exposure"] == "dravonil") & (est["outcome"] == "preterm birth")], levels
    )
    assert len(f) >= 6
    y, v = [], []
    for r in f.itertuples():
        b = analysis_value(r.measure, r.estimate)
        if not blank(r.ci_low):
            level = 0.95 if blank(r.ci_level) else r.ci_level
            se = (math.log(r.ci_high) - math.log(r.ci_low)) / (
                2 * stats.norm.ppf(1 - (1 - level) / 2)
            )
        elif not blank(r.se):
            se = r.se
        else:
            se = abs(b) / stats.norm.isf(r.p_value / 2)
        y.append(b)
        v.append(se**2)
    res = combine_effects(np.array(y), np.array(v), method_re="pm")
    assert -0.25 < res.mean_effect_re < -0.08
    assert 0 < math.sqrt(res.tau2) < 0.15
    assert 0.1 < res.i2 < 0.9


# ---------------------------------------------------------------- appraisals


def test_appraisal_levels_and_keys(scenario, appr):
    for d in DOMAINS:
        assert appr[d].between(0, 3).all() and appr[d].dtype.kind == "i"
    assert set(appr["study_id"]) <= set(scenario["estimates"]["study_id"])
    assert not appr.duplicated(["study_id", "reviewer", "stage"]).any()


def test_dual_review_coverage_and_consensus(est, appr):
    ind = appr[appr["stage"] == "independent"]
    n_ind = ind.groupby("study_id")["reviewer"].nunique()
    two = set(n_ind[n_ind >= 2].index)
    assert len(two) / est["study_id"].nunique() >= 0.8
    assert set(appr.loc[appr["stage"] == "consensus", "study_id"]) == two
    for sid in two:
        a, b = (ind[ind["study_id"] == sid].iloc[i] for i in (0, 1))
        c = appr[(appr["study_id"] == sid) & (appr["stage"] == "consensus")].iloc[0]
        for d in DOMAINS:
            assert min(a[d], b[d]) <= c[d] <= max(a[d], b[d]), (sid, d)


def test_reviewers_disagree_realistically(appr):
    """Mostly agreeing, sometimes by one level, rarely by two; weighted kappa from
    scikit-learn in a plausible range."""
    ind = appr[appr["stage"] == "independent"]
    wide = ind.pivot(index="study_id", columns="reviewer", values=list(DOMAINS)).dropna()
    r1, r2 = sorted(ind["reviewer"].unique())
    a = np.concatenate([wide[(d, r1)].to_numpy(int) for d in DOMAINS])
    b = np.concatenate([wide[(d, r2)].to_numpy(int) for d in DOMAINS])
    diff = np.abs(a - b)
    assert 0.6 < (diff == 0).mean() < 0.95
    assert (diff == 1).mean() > 0.05
    assert 0 < (diff >= 2).mean() < 0.06
    kappa = cohen_kappa_score(a, b, weights="linear")
    assert 0.3 < kappa < 0.9


def test_overall_levels_mostly_adequate_with_weak_and_fatal_studies(est, levels):
    vals = np.array(list(levels.values()))
    assert (vals >= 2).mean() > 0.7
    assert (vals == 1).sum() >= 2 and (vals == 0).sum() >= 2
    studies = est.drop_duplicates("study_id").set_index("study_id")
    short_its = studies[(studies["design"] == "its") & (studies["pre_points"] < 3)].index
    assert all(levels[s] == 0 for s in short_its if s in levels)
    before_after = studies[studies["design"] == "before-after"].index
    assert all(levels[s] <= 1 for s in before_after if s in levels)


def test_departures_from_the_rubric_suggestions_are_justified(est, appr):
    """The rubric file's suggestions from recorded facts (exposhift.appraisal.suggestions):
    a rating the suggestion does not allow needs a written reason, as a reviewer would give."""
    from exposhift.appraisal.suggestions import facts_from_record, suggest_levels

    studies = est.drop_duplicates("study_id").set_index("study_id")
    n_suggested = 0
    for _, row in appr.iterrows():
        s = studies.loc[row["study_id"]]
        facts = facts_from_record(
            s["design"],
            s["pre_points"],
            s["post_points"],
            checks=s["checks"] if s["checks"] is not None else "",
            assignment_grade=s["assignment_grade"],
        )
        for domain, suggestion in suggest_levels(facts).items():
            n_suggested += 1
            if not suggestion.allows(int(row[domain])):
                assert row[f"{domain}_why"], (row["study_id"], row["reviewer"], domain)
    assert n_suggested > len(appr)  # the rules fire: the check is not empty


def test_fixed_ratings_carry_their_reason(appr):
    for study in STUDIES:
        rows = appr[appr["study_id"] == study.study_id]
        for domain, (level, why) in study.firm.items():
            assert (rows[domain] == level).all()
            assert (rows[f"{domain}_why"] == why).all()


# ---------------------------------------------------------------- what the demo should show


def _aligned(r) -> float:
    """Effect on the analysis scale, positive when it points the expected way for a harmful
    exposure (outcome down when exposure falls, up when it rises)."""
    b = analysis_value(r.measure, r.estimate)
    return -b if r.change_direction == "decrease" else b


def _places_and_times(cell: pd.DataFrame, levels: dict[str, int]):
    good = _one_per_event(cell, levels)
    good = good[good["level"] >= 2]
    concordant = all(_aligned(r) > 0 for r in good.itertuples())
    places = good["country"].nunique()
    times = max(
        (g["change_date"].nunique() for _, g in good.groupby(["family", "country"])), default=0
    )
    families = {DESIGNS[d][0] for d in good["design"]}
    return concordant, places, times, families


@pytest.mark.parametrize("exp", demo_scenario.EXPECTED, ids=lambda e: f"{e.exposure}-{e.status}")
def test_cells_support_their_intended_status(est, levels, exp):
    cell = est[(est["exposure"] == exp.exposure) & (est["outcome"] == exp.outcome)]
    assert len(cell)
    concordant, places, times, families = _places_and_times(cell, levels)
    if exp.status == "convergent":
        assert concordant and places >= 2 and times >= 2 and len(families) >= 2
    elif exp.status == "replicated-place":
        assert concordant and places >= 2 and times < 2
    elif exp.status == "replicated-time":
        assert concordant and times >= 2 and places == 1
    elif exp.status == "single-event":
        assert cell["event_id"].nunique() == 1
    elif exp.status == "weak-only":
        lv = [levels.get(s) for s in cell["study_id"].unique()]
        assert all(v is not None and v <= 1 for v in lv)
    else:  # pragma: no cover - a new status needs a check here
        pytest.fail(f"no check for status {exp.status}")


def test_demo_has_every_status_the_replication_issue_asks_for():
    statuses = {e.status for e in demo_scenario.EXPECTED}
    assert {"replicated-place", "weak-only", "single-event"} <= statuses
    assert statuses & {"replicated-time", "convergent"}


# ---------------------------------------------------------------- stability


def test_deterministic(scenario):
    again = demo_scenario.build_scenario()
    for key, frame in scenario.items():
        assert_frame_equal(frame, again[key])


def test_committed_seed_records_equal_fresh_output(scenario):
    for key, name in demo_scenario.FILES.items():
        committed = (SEED_DIR / name).read_bytes()
        assert b"\r" not in committed
        assert committed == demo_scenario.csv_text(scenario[key]).encode("utf-8"), name
    readme = (SEED_DIR / demo_scenario.README).read_bytes()
    assert readme == demo_scenario.readme_text(scenario).encode("utf-8")
    assert b"INVENTED" in readme and b"not evidence" in readme


def test_committed_csv_reads_back_to_the_same_numbers(scenario):
    """The stable float format loses nothing: pandas reads the committed file back exactly."""
    back = pd.read_csv(SEED_DIR / demo_scenario.FILES["estimates"], encoding="utf-8")
    frame = scenario["estimates"]
    for col in (
        "estimate",
        "ci_low",
        "ci_high",
        "ci_level",
        "se",
        "p_value",
        "per_unit",
        "baseline_risk",
        "change_size",
    ):
        np.testing.assert_array_equal(back[col].to_numpy(float), frame[col].to_numpy(float))
    assert list(back["study_id"]) == list(frame["study_id"])


def test_main_writes_the_same_files(tmp_path, capsys):
    assert demo_scenario.main([str(tmp_path)]) == 0
    for name in [*demo_scenario.FILES.values(), demo_scenario.README]:
        assert (tmp_path / name).read_bytes() == (SEED_DIR / name).read_bytes(), name
    assert "wrote" in capsys.readouterr().out
    assert demo_scenario.main(["--help"]) == 0
    assert demo_scenario.main(["a", "b"]) == 2
