"""Every dashboard page run with Streamlit's AppTest on the demo evidence base.

Each page: runs without an exception, shows its key elements and the caution, and re-runs when a
widget changes. Numbers shown are checked against a route outside the dashboard: counts read with
the standard library's sqlite3 straight from the file, pooled estimates recomputed with
statsmodels' ``combine_effects`` (reference library), the sign test with scipy's ``binomtest``.
"""

from __future__ import annotations

import json
import sqlite3

import numpy as np
import pytest
from dashboard_helpers import ENTRY, values
from scipy import stats
from statsmodels.stats.meta_analysis import combine_effects
from streamlit.testing.v1 import AppTest

from exposhift.replication.settings import DEFAULTS
from exposhift.services.browse import pool_view
from exposhift.services.replicating import replication_for

CAUTION_WORDS = "support, never replace, expert judgement"
GOOD = DEFAULTS.min_level  # the pooling page's default evidence set: good events only


def _sql(db: str, query: str, *args) -> list[tuple]:
    con = sqlite3.connect(db)
    try:
        return con.execute(query, args).fetchall()
    finally:
        con.close()


@pytest.fixture
def app(demo_db, monkeypatch) -> AppTest:
    monkeypatch.setenv("EXPOSHIFT_DB", demo_db)
    at = AppTest.from_file(str(ENTRY), default_timeout=120)
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _open(at: AppTest, page: str) -> AppTest:
    at.switch_page(f"views/{page}.py")
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    assert not at.error, [e.value for e in at.error]
    return at


def _texts(at: AppTest) -> str:
    parts = [m.value for m in at.markdown] + [c.value for c in at.caption]
    for kind in (at.info, at.warning, at.success, at.error):
        parts += [e.value for e in kind]
    return "\n".join(parts)


def _charts(at: AppTest) -> list[dict]:
    return [json.loads(c.proto.spec) for c in at.get("plotly_chart")]


def _frame(at: AppTest, column: str):
    """The first dataframe on the page that has ``column``."""
    for d in at.dataframe:
        if column in d.value.columns:
            return d.value
    raise AssertionError(f"no table with column {column!r}")


# ----------------------------------------------------------------------------- overview
def test_overview_counts_demo_notice_and_caution(app, demo_db):
    at = app
    assert at.title[0].value == "Evidence at a glance"
    metrics = {m.label: m.value for m in at.metric}
    # counts read straight from the file with sqlite3, not through exposhift
    for label, table in (
        ("Studies", "study"),
        ("Events", "event"),
        ("Estimates", "estimate"),
        ("Appraisals", "appraisal"),
    ):
        assert metrics[label] == str(_sql(demo_db, f"SELECT count(*) FROM {table}")[0][0])
    assert metrics["Countries"] == str(
        _sql(demo_db, "SELECT count(DISTINCT country) FROM event")[0][0]
    )
    text = _texts(at)
    assert "Invented demo data" in text
    assert CAUTION_WORDS in text
    assert len(at.get("plotly_chart")) == 3
    findings = _frame(at, "status")
    pairs = _sql(
        demo_db,
        "SELECT count(DISTINCT e.exposure_id || '/' || s.outcome_id) "
        "FROM estimate s JOIN event e ON e.id = s.event_id",
    )[0][0]
    assert len(findings) == pairs
    # every chart asks plotly.js for local topojson only
    for c in at.get("plotly_chart"):
        assert json.loads(c.proto.config)["topojsonURL"] == "app/static/"


def test_sidebar_marks_demo_and_reload_reruns(app):
    at = app
    assert any("Invented demo data" in m.value for m in at.sidebar.markdown)
    at.sidebar.button[0].click().run()
    assert not at.exception
    assert at.title[0].value == "Evidence at a glance"


def test_unusable_database_is_one_error_line(tmp_path, monkeypatch):
    monkeypatch.setenv("EXPOSHIFT_DB", str(tmp_path / "missing" / "none.db"))
    at = AppTest.from_file(str(ENTRY), default_timeout=60)
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    assert len(at.error) == 1
    assert "none.db" in at.error[0].value


def test_empty_evidence_base_every_page_runs_without_demo_mark(tmp_path, monkeypatch):
    from exposhift.services.setup import init_database

    db = str(tmp_path / "empty.db")
    init_database(db, user="tester")
    monkeypatch.setenv("EXPOSHIFT_DB", db)
    at = AppTest.from_file(str(ENTRY), default_timeout=60)
    at.run()
    assert not at.exception
    assert {m.label: m.value for m in at.metric}["Studies"] == "0"
    for page in ("studies", "pooling", "replication", "gaps", "series"):
        _open(at, page)
        assert "demo" not in _texts(at).lower()
    assert not any("demo" in m.value.lower() for m in at.sidebar.markdown)


# ----------------------------------------------------------------------------- studies
def test_studies_table_and_blinded_appraisal(app, demo_db):
    at = _open(app, "studies")
    table = _frame(at, "citation")
    assert len(table) == _sql(demo_db, "SELECT count(*) FROM study")[0][0]
    # a study with a single independent appraisal: hidden from the local session (no accounts:
    # the OS user, who is not its reviewer)
    ((study, reviewer),) = _sql(
        demo_db,
        "SELECT s.key, a.reviewer FROM appraisal a JOIN study s ON s.id = a.study_id "
        "WHERE s.key IN (SELECT s2.key FROM appraisal a2 JOIN study s2 ON s2.id = a2.study_id "
        "WHERE a2.stage = 'independent' GROUP BY s2.key HAVING count(*) = 1) ORDER BY s.key "
        "LIMIT 1",
    )
    at.selectbox(key="studies_pick").set_value(study).run()
    assert not at.exception
    shown = _frame(at, "domain")
    col = f"{reviewer} (independent)"
    assert set(shown[col]) == {"hidden"}
    assert "Not shown to you" in _texts(at)
    assert "hidden until both independent appraisals are in" in _texts(at)
    # (a signed-in reviewer sees her own ratings: tests/app/test_app_signin.py)
    assert reviewer


def test_studies_filter_reruns(app, demo_db):
    at = _open(app, "studies")
    at.multiselect(key="studies_family").set_value(["weighted-fit"]).run()
    assert not at.exception
    table = _frame(at, "citation")
    expected = _sql(demo_db, "SELECT count(*) FROM study WHERE design = 'synthetic-control'")
    assert len(table) == expected[0][0]
    assert set(table["design family"]) == {"weighted-fit"}  # human column titles


# ----------------------------------------------------------------------------- pooling
def test_pooling_forest_table_excluded_and_caution(app, demo_store):
    at = _open(app, "pooling")
    assert at.title[0].value == "Pooling"
    assert CAUTION_WORDS in at.warning[0].value
    exposure = at.selectbox(key="pool_exposure").value
    outcome = at.selectbox(key="pool_outcome").value
    view = pool_view(demo_store, exposure, outcome, min_level=GOOD)
    table = _frame(at, "pooled")
    assert list(table["events"]) == [g["k_events"] for g in view.output.groups]
    excluded = _frame(at, "reason")
    assert len(excluded) == len(view.output.excluded) > 0
    forest = _charts(at)[0]
    squares = [t for t in forest["data"] if t.get("marker", {}).get("symbol") == "square"]
    assert sum(len(values(t["x"])) for t in squares) == len(view.rows)
    # each row: as reported, then aligned; the study's appraisal level on its label
    notes = " ".join(a.get("text", "") for a in forest["layout"]["annotations"])
    one = view.rows[view.rows["k_units"] == 1].iloc[0]
    assert f"{one['measure']} " in notes and f"after a {one['change_kind']}" in notes
    ticks = " ".join(forest["layout"]["yaxis"]["ticktext"])
    assert f"level {int(one['level'])}" in ticks
    assert "Evidence set:" in _texts(at)


def test_pooling_default_evidence_set_is_the_replication_pages(app, demo_store):
    """Both pages pool the same events: the pooling page's main stratum has the k of the
    replication page's headline (the issue's case: k = 9 on one page, 8 on the next)."""
    at = _open(app, "pooling")
    exposure = at.selectbox(key="pool_exposure").value
    outcome = at.selectbox(key="pool_outcome").value
    headline = replication_for(demo_store, exposure, outcome).headline
    table = _frame(at, "pooled")
    assert headline["k_events"] in list(table["events"])
    assert table["pooled"].iloc[list(table["events"]).index(headline["k_events"])] == (
        pytest.approx(headline["estimate"], rel=1e-9)
    )
    at.selectbox(key="pool_evidence").set_value("not-fatal").run()
    view = pool_view(demo_store, exposure, outcome)  # the CLI's default set
    assert list(_frame(at, "pooled")["events"]) == [g["k_events"] for g in view.output.groups]


def test_pooling_within_event_route_choice(app, demo_store):
    at = _open(app, "pooling")
    at.selectbox(key="pool_within").set_value("independent").run()
    assert not at.exception
    exposure = at.selectbox(key="pool_exposure").value
    outcome = at.selectbox(key="pool_outcome").value
    view = pool_view(demo_store, exposure, outcome, min_level=GOOD, within_event="independent")
    table = _frame(at, "pooled")
    assert list(table["estimates"]) == [g["k_estimates"] for g in view.output.groups]
    assert table["pooled"].iloc[0] == pytest.approx(
        view.output.groups[0]["back_transformed"]["estimate"], rel=1e-9
    )
    assert "independent route" in _texts(at)


@pytest.mark.parametrize("method, method_re", [("dl", "dl"), ("pm", "pm")])
def test_pooling_method_change_matches_statsmodels(app, demo_store, method, method_re):
    at = _open(app, "pooling")
    at.selectbox(key="pool_method").set_value(method).run()
    at.selectbox(key="pool_ci").set_value("wald").run()
    assert not at.exception
    exposure = at.selectbox(key="pool_exposure").value
    outcome = at.selectbox(key="pool_outcome").value
    rows = pool_view(demo_store, exposure, outcome, method=method, ci="wald", min_level=GOOD).rows
    first = rows[rows["group"] == 0]
    # statsmodels combine_effects: "dl" is DerSimonian-Laird (method_re="chi2"), "pm" is
    # Paule-Mandel (method_re="iterated"); reference library, not exposhift code
    ref = combine_effects(
        first["y"].to_numpy(),
        first["se"].to_numpy() ** 2,
        method_re={"dl": "chi2", "pm": "iterated"}[method_re],
    )
    assert ref.q > len(first) - 1  # heterogeneous: statsmodels' untruncated DL tau2 is valid
    table = _frame(at, "pooled")
    assert table["pooled"].iloc[0] == pytest.approx(np.exp(ref.mean_effect_re), rel=1e-6)
    lo, hi = ref.conf_int(use_t=False)[1]  # (fixed, random, ...): random effects, Wald
    assert table["CI low"].iloc[0] == pytest.approx(np.exp(lo), rel=1e-6)
    assert table["CI high"].iloc[0] == pytest.approx(np.exp(hi), rel=1e-6)


def test_pooling_strata_rerun_adds_groups(app, demo_store):
    at = _open(app, "pooling")
    before = len(_frame(at, "pooled"))
    at.multiselect(key="pool_by").set_value(["design-family"]).run()
    assert not at.exception
    exposure = at.selectbox(key="pool_exposure").value
    outcome = at.selectbox(key="pool_outcome").value
    view = pool_view(demo_store, exposure, outcome, by=["design-family"], min_level=GOOD)
    table = _frame(at, "pooled")
    assert len(table) == len(view.output.groups) > before
    assert all("·" in s for s in table["stratum"])


def test_pooling_link_selects_pair(demo_db, monkeypatch):
    monkeypatch.setenv("EXPOSHIFT_DB", demo_db)
    at = AppTest.from_file(str(ENTRY), default_timeout=120)
    at.query_params["exposure"] = "vellium"
    at.query_params["outcome"] = "mean birth weight"
    at.run()
    _open(at, "pooling")
    assert at.selectbox(key="pool_exposure").value == "vellium"
    assert at.selectbox(key="pool_outcome").value == "mean birth weight"


# ----------------------------------------------------------------------------- replication
def test_replication_status_rule_charts_and_sign_test(app, demo_db):
    at = _open(app, "replication")
    at.selectbox(key="rep_exposure").set_value("corvane").run()
    at.selectbox(key="rep_outcome").set_value("asthma emergency visits").run()
    assert not at.exception
    status = at.success[0].value
    assert status.startswith("**Replication status: ")
    assert "rule:" in status  # the rule in words
    assert any(CAUTION_WORDS in w.value for w in at.warning)
    text = _texts(at)
    assert "Reversal in Portugal" in text
    charts = _charts(at)
    assert len(charts) == 3
    geo = charts[0]
    assert geo["layout"]["geo"]["visible"] is False
    events = [t for t in geo["data"] if t["type"] == "scattergeo"][0]
    n_events = _sql(
        demo_db,
        "SELECT count(DISTINCT e.key) FROM estimate s JOIN event e ON "
        "e.id = s.event_id JOIN exposure x ON x.id = e.exposure_id JOIN "
        "outcome o ON o.id = s.outcome_id WHERE x.name = 'corvane' AND "
        "o.name = 'asthma emergency visits'",
    )[0][0]
    assert len(values(events["lon"])) == n_events
    # sign test: "k of n events ... p = x" against scipy's exact binomial test
    line = next(m.value for m in at.markdown if m.value.startswith("**Sign test:**"))
    words = line.split()
    k, n = int(words[2]), int(words[4])
    p = float(line.split("p = ", 1)[1].split(" ", 1)[0])
    assert p == pytest.approx(stats.binomtest(k, n, 0.5).pvalue, rel=1e-2)
    # the minimum attainable p at n events: 2 * 0.5**n (exact binomial arithmetic)
    p_min = float(line.rsplit("is ", 1)[1].rstrip(")."))
    assert p_min == pytest.approx(min(1.0, 2 * 0.5**n), rel=1e-2)


def test_replication_map_view_zooms_to_a_region(app, demo_db):
    at = _open(app, "replication")
    assert at.selectbox(key="rep_exposure").value == "dravonil"  # busiest pair: worldwide
    world = _charts(at)[0]["layout"]["geo"]["lonaxis"]["range"]
    at.radio(key="rep_map_view").set_value("Europe").run()
    assert not at.exception
    europe = _charts(at)[0]["layout"]["geo"]["lonaxis"]["range"]
    assert europe[1] - europe[0] < world[1] - world[0]
    # switching to an exposure without European events drops the stale choice
    at.selectbox(key="rep_exposure").set_value("vellium").run()
    assert not at.exception


def test_replication_family_filter(app, demo_store):
    at = _open(app, "replication")
    at.selectbox(key="rep_exposure").set_value("vellium").run()
    at.selectbox(key="rep_outcome").set_value("child respiratory admissions").run()
    options = at.selectbox(key="rep_family").options
    assert options[0] == "all families" and len(options) == 3
    all_events = values([t for t in _charts(at)[0]["data"] if t["type"] == "scattergeo"][0]["lon"])
    at.selectbox(key="rep_family").set_value(options[1]).run()
    assert not at.exception
    report = replication_for(
        demo_store, "vellium", "child respiratory admissions", family=options[1]
    )
    geo = [t for t in _charts(at)[0]["data"] if t["type"] == "scattergeo"][0]
    assert len(values(geo["lon"])) == int(report.events["represents_event"].sum())
    assert len(values(geo["lon"])) < len(all_events)
    boxes = [
        e.value
        for kind in (at.success, at.warning, at.info, at.error)
        for e in kind
        if e.value.startswith("**Replication status:")
    ]
    label = report.status + (" (provisional)" if report.provisional else "")
    assert boxes == [f"**Replication status: {label}**\n\n{report.rule}"]


def test_replication_expected_direction_reruns(app):
    at = _open(app, "replication")
    at.selectbox(key="rep_exposure").set_value("corvane").run()
    at.selectbox(key="rep_outcome").set_value("asthma emergency visits").run()
    at.selectbox(key="rep_expected").set_value("lowers").run()
    assert not at.exception
    text = _texts(at)
    assert "an exposure increase lowers the outcome" in text
    # against the evidence: no event points the "expected" way; the effect replicates
    # against the expected direction, and the label says so
    boxes = [
        e.value
        for kind in (at.success, at.warning, at.info, at.error)
        for e in kind
        if e.value.startswith("**Replication status:")
    ]
    assert len(boxes) == 1
    assert "replicated-against" in boxes[0].split("\n")[0] and "convergent" not in boxes[0]
    line = next(m.value for m in at.markdown if m.value.startswith("**Sign test:**"))
    n = int(line.split()[4])
    p = float(line.split("p = ", 1)[1].split(" ", 1)[0])
    assert line.split()[2] == "0"
    assert p == pytest.approx(stats.binomtest(0, n, 0.5).pvalue, rel=1e-2)


# ----------------------------------------------------------------------------- gaps
def test_gap_map_cells_opportunities_and_filter(app, demo_db):
    at = _open(app, "gaps")
    assert CAUTION_WORDS in at.warning[0].value
    n_exposures = _sql(demo_db, "SELECT count(*) FROM exposure")[0][0]
    n_groups = _sql(demo_db, "SELECT count(DISTINCT outcome_group) FROM outcome")[0][0]
    metrics = {m.label: int(m.value) for m in at.metric}
    assert sum(metrics.values()) == n_exposures * n_groups
    heat = _charts(at)[0]["data"][0]
    assert heat["type"] == "heatmap"
    assert len(heat["y"]) == n_exposures and len(heat["x"]) == n_groups
    never = _sql(
        demo_db, "SELECT count(*) FROM event WHERE id NOT IN (SELECT event_id FROM estimate)"
    )[0][0]
    assert len(_frame(at, "an evaluation needs")) == never
    # filter: only studied cells
    at.toggle(key="gap_studied").set_value(True).run()
    assert not at.exception
    studied = _sql(
        demo_db,
        "SELECT count(DISTINCT e.exposure_id || '/' || o.outcome_group) "
        "FROM estimate s JOIN event e ON e.id = s.event_id JOIN outcome o "
        "ON o.id = s.outcome_id",
    )[0][0]
    metrics = {m.label: int(m.value) for m in at.metric}
    assert metrics["no-study"] == 0
    assert sum(metrics.values()) == studied


def test_gap_map_level_filter_reruns(app):
    at = _open(app, "gaps")
    before = {m.label: int(m.value) for m in at.metric}
    at.selectbox(key="gap_level").set_value("≥ 2").run()
    assert not at.exception
    after = {m.label: int(m.value) for m in at.metric}
    # keeping only studies at level >= 2 leaves no weak-only cell
    assert before["weak-only"] > 0 and after["weak-only"] == 0


# ----------------------------------------------------------------------------- the method
@pytest.mark.parametrize("page", ["pooling", "replication", "gaps"])
def test_results_pages_name_the_method_they_were_made_with(app, demo_db, page):
    import hashlib

    at = _open(app, page)
    captions = [c.value for c in at.caption if c.value.startswith("Method parts:")]
    assert len(captions) == 1
    # each part's newest stored version and its hash, recomputed with hashlib from the text
    # read straight from the file with sqlite3
    for part, number, body in _sql(
        demo_db,
        "SELECT part, number, text FROM method_version m WHERE number = "
        "(SELECT max(number) FROM method_version WHERE part = m.part)",
    ):
        digest = hashlib.sha256(body.encode("utf-8")).hexdigest()[:12]
        assert f"{part} version {number} ({digest})" in captions[0]
