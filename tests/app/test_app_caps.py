"""Caps on a large evidence base: the study pickers list at most a readable number of studies
and say how many more there are; the replication timeline draws at most a readable number of
events, the heaviest, and the page says how many it does not draw.

The base is a small invented synthetic one (``exposhift.io.synthetic``, every row flagged
demo) with the caps patched below its size (``ui.PICK_LIMIT``, ``data.TIMELINE_EVENTS``).
Counts are checked against the file read with the standard library's sqlite3 (a route outside
exposhift); the heaviest events against the standard errors the replication service reports,
sorted here with plain Python.
"""

from __future__ import annotations

import json
import math
import sqlite3
import sys

import numpy as np
import pandas as pd
import pytest
from dashboard_helpers import ENTRY, app_on_path, values
from streamlit.testing.v1 import AppTest

from exposhift.io.synthetic import synthetic_sheet
from exposhift.services.importing import import_into
from exposhift.services.replicating import replication_for
from exposhift.services.setup import init_database, open_current

PICK = 5
TIMELINE = 3


@pytest.fixture(scope="module")
def big_db(tmp_path_factory) -> str:
    """30 events, 300 studies, 6,000 estimates; exposure synthetic-agent-0 has 5 events."""
    work = tmp_path_factory.mktemp("caps")
    sheet = work / "synthetic.csv"
    synthetic_sheet(6000, prefix="CAP").to_csv(sheet, index=False)
    db = work / "caps.db"
    init_database(str(db), user="tester")
    store = open_current(str(db), user="tester")
    try:
        import_into(store, sheet)
    finally:
        store.dispose()
    return str(db)


def _count(db: str, query: str, *args) -> int:
    con = sqlite3.connect(db)
    try:
        return con.execute(query, args).fetchone()[0]
    finally:
        con.close()


@pytest.fixture
def at(big_db, monkeypatch) -> AppTest:
    monkeypatch.setenv("EXPOSHIFT_DB", big_db)
    app = AppTest.from_file(str(ENTRY), default_timeout=120)
    app.run()
    assert not app.exception, [e.value for e in app.exception]
    # the modules as the pages import them (app/ on the path): patch the caps there
    ui, data = sys.modules["ui"], sys.modules["data"]
    monkeypatch.setattr(ui, "PICK_LIMIT", PICK)
    monkeypatch.setattr(data, "TIMELINE_EVENTS", TIMELINE)
    return app


def _open(at: AppTest, page: str) -> AppTest:
    at.switch_page(f"views/{page}.py")
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _captions(at: AppTest) -> str:
    return "\n".join(c.value for c in at.caption)


def _box(at: AppTest, label: str):
    return next(s for s in at.selectbox if s.label == label)


def test_study_picker_lists_the_first_matches_and_says_how_many_more(at, big_db):
    n = _count(big_db, "SELECT count(*) FROM study")
    assert n > PICK
    _open(at, "studies")
    picker = _box(at, "Study")
    assert len(picker.options) == PICK
    assert f"The first {PICK} of {n} matching studies are listed: {n - PICK} more" in _captions(at)
    # narrowing the search to one study lists it alone, and no "more" line
    key = _count(big_db, "SELECT max(key) FROM study")
    at.text_input(key="studies_search").set_value(key).run()
    assert not at.exception
    assert _box(at, "Study").options == [key]
    assert "more," not in _captions(at)


def test_appraise_picker_has_a_search_and_the_same_cap(at, big_db):
    n = _count(big_db, "SELECT count(*) FROM study")
    _open(at, "appraise")
    assert len(_box(at, "Study").options) == PICK
    assert f"{n - PICK} more" in _captions(at)
    key = _count(big_db, "SELECT max(key) FROM study")
    at.text_input(key="appraise_search").set_value(key).run()
    assert not at.exception
    assert _box(at, "Study").options == [key]
    at.text_input(key="appraise_search").set_value("no such study anywhere").run()
    assert any("No study matches" in i.value for i in at.info)


def test_records_pickers_have_a_search_and_the_same_cap(at, big_db):
    """The records page's three pickers (study form, estimate grid, record history) list at
    most the cap, say how many more, and a search narrows them."""
    n = _count(big_db, "SELECT count(*) FROM study")
    n_events = _count(big_db, "SELECT count(*) FROM event")
    _open(at, "records")
    study_form = at.selectbox(key="records_study")
    # "(a new study)" stays first and is not counted among the studies
    assert study_form.options[0] == "(a new study)"
    assert len(study_form.options) == PICK + 1
    assert len(at.selectbox(key="grid_study").options) == PICK
    assert len(at.selectbox(key="history_key").options) == PICK
    captions = _captions(at)
    assert (
        captions.count(f"The first {PICK} of {n} matching studies are listed: {n - PICK} more") == 2
    )
    records = n + n_events
    assert f"The first {PICK} of {records} matching records are listed: {records - PICK} more" in (
        captions
    )
    key = _count(big_db, "SELECT max(key) FROM study")
    at.text_input(key="records_search").set_value(key).run()
    at.text_input(key="grid_search").set_value(key).run()
    event = _count(big_db, "SELECT max(key) FROM event")
    at.text_input(key="history_search").set_value(event).run()
    assert not at.exception, [e.value for e in at.exception]
    assert at.selectbox(key="records_study").options == ["(a new study)", key]
    assert at.selectbox(key="grid_study").options == [key]
    assert at.selectbox(key="history_key").options == [event]
    assert "more," not in _captions(at)
    # a choice made stays listed when the search is cleared, even beyond the cap
    at.selectbox(key="history_key").set_value(event).run()
    at.text_input(key="history_search").set_value("").run()
    history = at.selectbox(key="history_key")
    assert history.value == event and len(history.options) == PICK + 1
    at.text_input(key="history_search").set_value("no such record anywhere").run()
    assert any("No study or event matches" in i.value for i in at.info)


def _timeline(at: AppTest) -> dict:
    charts = [json.loads(c.proto.spec) for c in at.get("plotly_chart")]
    return next(c for c in charts if c["layout"].get("xaxis", {}).get("title", {}).get("text"))


def test_timeline_draws_the_heaviest_events_and_says_how_many_are_not(at, big_db):
    _open(at, "replication")
    exposure = _box(at, "Exposure").value
    outcome = _box(at, "Outcome").value
    # the events of this pair, counted outside exposhift: synthetic events of the exposure
    # that have an estimate of the outcome
    stored = _count(
        big_db,
        "SELECT count(DISTINCT ev.id) FROM estimate es JOIN event ev ON es.event_id = ev.id "
        "JOIN exposure ex ON ev.exposure_id = ex.id JOIN outcome o ON es.outcome_id = o.id "
        "WHERE ex.name = ? AND o.name = ?",
        exposure,
        outcome,
    )
    store = open_current(big_db, user="tester")
    try:
        report = replication_for(store, exposure, outcome)
    finally:
        store.dispose()
    events = report.events[report.events["represents_event"].astype(bool)]
    total = events["event_id"].nunique()
    assert total == stored > TIMELINE

    spec = _timeline(at)
    drawn = [t for t in spec["data"] if t.get("name") == "events"]
    assert len(drawn) == 1
    drawn_ids = sorted(values(drawn[0]["text"]))
    assert len(drawn_ids) == TIMELINE
    # the heaviest: smallest standard error (ties: the most recent change)
    rows = list(zip(events["se"], events["change_date"], events["event_id"], strict=True))
    recent_first = sorted(rows, key=lambda r: r[1], reverse=True)
    by_se = sorted(recent_first, key=lambda r: math.inf if pd.isna(r[0]) else r[0])
    assert drawn_ids == sorted(e for _, _, e in by_se[:TIMELINE])
    # the figure and the page both say how many are not drawn
    note = " ".join(a.get("text", "") for a in spec["layout"].get("annotations", []))
    assert f"{TIMELINE} of {total} events drawn" in note
    assert f"{total - TIMELINE} more not drawn" in note
    assert f"**{total - TIMELINE} more are not drawn**" in _captions(at)
    # every event is still listed: the table's title counts them all
    assert any(f"Independent events ({total})" in e.label for e in at.expander)


def test_timeline_within_the_cap_draws_everything_and_says_nothing(at, monkeypatch):
    monkeypatch.setattr(sys.modules["data"], "TIMELINE_EVENTS", 1000)
    _open(at, "replication")
    spec = _timeline(at)
    assert "not drawn" not in json.dumps(spec["layout"].get("annotations", []))
    assert "not drawn" not in _captions(at)


def test_timeline_events_rule():
    app_on_path()
    import chart_caps

    ev = pd.DataFrame(
        {
            "event_id": ["A", "B", "C", "D"],
            "se": [0.3, np.nan, 0.1, 0.3],
            "change_date": ["2001", "2010", "1999-05", "2005-02"],
            "represents_event": [True, True, True, True],
        }
    )
    everything = chart_caps.timeline_events(ev, None)
    assert (everything.events, everything.left_out) == (4, 0)
    two = chart_caps.timeline_events(ev, 2)
    # C is the most precise; A and D tie on se and D's change is the more recent
    assert sorted(two.rows["event_id"]) == ["C", "D"]
    assert (two.events, two.drawn, two.left_out) == (4, 2, 2)
    # an event without a standard error comes last
    assert sorted(chart_caps.timeline_events(ev, 3).rows["event_id"]) == ["A", "C", "D"]


@pytest.mark.parametrize(
    ("page", "snapshots"),
    [("series", 0), ("upload", 0), ("appraise", 0), ("records", 0), ("downloads", 0)]
    + [("overview", 1)],  # the control: a page that analyses reads every estimate once
)
def test_pages_that_only_count_never_read_every_estimate(big_db, monkeypatch, page, snapshots):
    """These pages show the summary and the study list (counted by the database): a cold
    first view takes no snapshot (the one read of every estimate)."""
    monkeypatch.setenv("EXPOSHIFT_DB", big_db)
    app = AppTest.from_file(str(ENTRY), default_timeout=120)
    app.switch_page(f"views/{page}.py")
    app.run()  # imports the dashboard's modules
    data = sys.modules["data"]
    reads = []
    real = data.take_snapshot
    monkeypatch.setattr(data, "take_snapshot", lambda store: reads.append(1) or real(store))
    data.clear()
    app.run()
    assert not app.exception, [e.value for e in app.exception]
    assert app.title and not app.title[0].value.startswith("Sign in")
    assert len(reads) == snapshots
