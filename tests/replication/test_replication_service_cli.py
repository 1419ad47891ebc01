"""The replication and gaps actions on a real store (SQLite and PostgreSQL), and their commands."""

from __future__ import annotations

import json

import pytest
from replication_helpers import Base
from scipy import stats
from typer.testing import CliRunner

from exposhift.cli.main import app
from exposhift.errors import NotFoundError
from exposhift.services.replicating import GapFilters, gap_report, replication_for
from exposhift.store import records
from exposhift.store.writer import Writer

runner = CliRunner()
EVENT_KEYS = {
    "event_id",
    "country",
    "change_date",
    "direction",
    "design",
    "level",
    "estimate",
    "se",
}
CELL_KEYS = {"exposure", "outcome_group", "events", "studies", "best_level", "status", "state"}


def fill(store) -> None:
    with store.write() as conn:
        w = Writer(conn, "tester")
        b = Base(w)
        # smogex x asthma visits: two places, three periods in FRA with a reversal, two design
        # families (common-trend, weighted-fit) -> convergent
        b.add("S1", "did", 2, "E-FRA-2000", "smogex", "FRA", "2000", "asthma visits", 0.80)
        b.add(
            "S2",
            "synthetic-control",
            3,
            "E-ESP-2004",
            "smogex",
            "ESP",
            "2004-06",
            "asthma visits",
            0.85,
        )
        b.add("S3", "did", 2, "E-FRA-2010", "smogex", "FRA", "2010", "asthma visits", 0.90)
        b.add(
            "S4",
            "did",
            2,
            "E-FRA-2015",
            "smogex",
            "FRA",
            "2015",
            "asthma visits",
            1.12,
            direction="increase",
        )
        # a second, weaker paper on the first event: the same unit, counted once
        b.add("S5", "did", 1, "E-FRA-2000", "smogex", "FRA", "2000", "asthma visits", 0.70)
        # smogex x wheeze: weak evidence only (same respiratory group)
        b.add("S6", "before-after", 1, "E-FRA-2000", "smogex", "FRA", "2000", "wheeze", 0.8)
        # fumex: one study of one event (single-event), and a registered event never evaluated
        b.add(
            "S7",
            "its",
            2,
            "F-DEU-2011",
            "fumex",
            "DEU",
            "2011",
            "birth weight",
            0.9,
            group="birth outcomes",
        )
        b.event("F-ITA-2018", "fumex", "ITA", "2018-03", kind="ban")
        # an exposure known only from the register
        b.event("G-KEN-2016", "glorane", "KEN", "2016", kind="ban", size=3.0, unit_="ppb")
        records.ensure_vocab(w, "outcome", "liver enzymes", {"outcome_group": "hepatic"})
        w.flush()


def test_replication_service_on_each_backend(store):
    fill(store)
    rep = replication_for(store, "smogex", "asthma visits")
    assert rep.status == "convergent"
    d = rep.to_dict()
    assert {e["event_id"] for e in d["events"]} == {
        "E-FRA-2000",
        "E-ESP-2004",
        "E-FRA-2010",
        "E-FRA-2015",
    }
    assert len(d["events"]) == 4  # the second paper on E-FRA-2000 was set aside
    assert [x["study_id"] for x in d["excluded"]] == ["S5"]
    assert "better appraised" in d["excluded"][0]["reason"]
    for e in d["events"]:
        assert EVENT_KEYS <= set(e)
    # every estimate points the expected way once aligned (the removal's RR > 1 too)
    assert d["sign_test_p"] == pytest.approx(stats.binomtest(4, 4, 0.5).pvalue)  # scipy
    assert {f["design_family"] for f in d["by_design_family"]} == {"common-trend", "weighted-fit"}
    assert d["reversals"][0]["outcome_moved_back"] is True
    assert d["dose_response"]["run"] is False
    assert "never replace" in d["caution"]
    # the removal was aligned as is; the bans had their sign flipped
    flips = {e["event_id"]: e["sign_flipped"] for e in d["events"]}
    assert flips["E-FRA-2015"] is False and flips["E-FRA-2000"] is True
    assert replication_for(store, "fumex", "birth weight").status == "single-event"
    assert replication_for(store, "smogex", "wheeze").status == "weak-only"
    assert replication_for(store, "smogex", "liver enzymes").status == "none"


def test_unknown_names_name_close_matches(sqlite_store):
    fill(sqlite_store)
    with pytest.raises(NotFoundError, match="no exposure 'smogx'.*did you mean 'smogex'"):
        replication_for(sqlite_store, "smogx", "asthma visits")
    with pytest.raises(NotFoundError, match="no outcome 'asthma visit'.*'asthma visits'"):
        replication_for(sqlite_store, "smogex", "asthma visit")


def test_gap_report_service(store):
    fill(store)
    rep = gap_report(store)
    c = rep.cells.set_index(["exposure", "outcome_group"])
    assert c.loc[("smogex", "respiratory"), "state"] == "replicated"
    assert c.loc[("smogex", "respiratory"), "ready_for_synthesis"]
    assert c.loc[("smogex", "respiratory"), "status"] == "convergent"
    assert c.loc[("smogex", "respiratory"), "studies"] == 6  # S1-S6 (S5 set aside, S6 wheeze)
    assert c.loc[("smogex", "respiratory"), "events"] == 4
    assert c.loc[("fumex", "birth outcomes"), "state"] == "single-event"
    assert c.loc[("glorane", "respiratory"), "state"] == "no-study"
    assert set(rep.opportunities["event_id"]) == {"F-ITA-2018", "G-KEN-2016"}
    assert rep.cells["state"].isin(["no-study", "single-event", "replicated"]).all()
    stale = gap_report(store, GapFilters(stale_after=2015)).cells.set_index(
        ["exposure", "outcome_group"]
    )
    assert stale.loc[("smogex", "respiratory"), "state"] == "stale"
    level3 = gap_report(store, GapFilters(min_level=3)).cells.set_index(
        ["exposure", "outcome_group"]
    )
    assert level3.loc[("smogex", "respiratory"), "events"] == 1
    europe = gap_report(store, GapFilters(regions=("africa",)))
    assert europe.cells["events"].sum() == 0
    assert europe.opportunities["event_id"].tolist() == ["G-KEN-2016"]


def test_replication_command_json_and_text(store, db_url):
    fill(store)
    res = runner.invoke(
        app,
        [
            "--db",
            db_url,
            "replication",
            "--exposure",
            "smogex",
            "--outcome",
            "asthma visits",
            "--json",
        ],
    )
    assert res.exit_code == 0, res.output
    d = json.loads(res.stdout)
    assert {"status", "rule", "events", "sign_test_p", "by_design_family", "dose_response"} <= set(
        d
    )
    assert d["status"] == "convergent" and d["rule"].startswith("convergent: ")
    res = runner.invoke(
        app, ["--db", db_url, "replication", "--exposure", "smogex", "--outcome", "asthma visits"]
    )
    assert res.exit_code == 0, res.output
    assert "status    convergent" in res.stdout
    assert "sign test: 4 of 4 events at level >= 2" in res.stdout
    assert "support, never replace, expert judgement" in res.stdout
    lowers = runner.invoke(
        app,
        [
            "--db",
            db_url,
            "replication",
            "--exposure",
            "smogex",
            "--outcome",
            "asthma visits",
            "--expected",
            "lowers",
            "--json",
        ],
    )
    assert json.loads(lowers.stdout)["expected_direction"]["sign"] == -1


def test_replication_command_errors(sqlite_store, sqlite_url):
    fill(sqlite_store)
    res = runner.invoke(
        app,
        ["--db", sqlite_url, "replication", "--exposure", "smogx", "--outcome", "asthma visits"],
    )
    assert res.exit_code == NotFoundError.exit_code
    assert res.stderr.startswith(
        "error: no exposure 'smogx' in the evidence base; did you mean 'smogex'?"
    )
    res = runner.invoke(
        app,
        [
            "--db",
            sqlite_url,
            "replication",
            "--exposure",
            "smogex",
            "--outcome",
            "asthma visits",
            "--expected",
            "up",
        ],
    )
    assert res.exit_code == 2 and "--expected must be one of pooled, raises, lowers" in res.stderr


def test_gaps_command(store, db_url):
    fill(store)
    res = runner.invoke(app, ["--db", db_url, "gaps", "--json"])
    assert res.exit_code == 0, res.output
    d = json.loads(res.stdout)
    assert all(CELL_KEYS <= set(c) for c in d["cells"])
    assert {o["event_id"] for o in d["opportunities"]} == {"F-ITA-2018", "G-KEN-2016"}
    for o in d["opportunities"]:
        assert {"event_id", "exposure", "country", "change_date", "needs"} <= set(o)
    res = runner.invoke(
        app,
        [
            "--db",
            db_url,
            "gaps",
            "--country",
            "DEU,ITA",
            "--design-family",
            "trend-extrapolation",
            "--from",
            "2000",
            "--to",
            "2020",
            "--min-level",
            "2",
            "--stale-after",
            "2000",
        ],
    )
    assert res.exit_code == 0, res.output
    assert "fumex     birth outcomes" in res.stdout
    assert "opportunities: 1 registered exposure change(s) never evaluated" in res.stdout
    assert "never replace" in res.stdout
    full = json.loads(runner.invoke(app, ["--db", db_url, "gaps", "--json"]).stdout)["cells"]
    res = runner.invoke(app, ["--db", db_url, "gaps", "--json", "--studied-only"])
    studied = json.loads(res.stdout)["cells"]
    assert 0 < len(studied) < len(full)
    assert {c["state"] for c in studied} == {"replicated", "single-event"}


def test_gaps_command_errors(sqlite_store, sqlite_url):
    res = runner.invoke(app, ["--db", sqlite_url, "gaps", "--region", "atlantis"])
    assert res.exit_code == 2 and res.stderr.startswith("error: unknown region 'atlantis'")
    res = runner.invoke(app, ["--db", sqlite_url, "gaps", "--design-family", "magic"])
    assert res.exit_code == 2 and "unknown design family 'magic'" in res.stderr
    res = runner.invoke(app, ["--db", sqlite_url, "gaps", "--from", "2010", "--to", "2000"])
    assert res.exit_code == 2 and "--from 2010 is after --to 2000" in res.stderr


def test_gaps_on_an_empty_evidence_base(sqlite_store, sqlite_url):
    res = runner.invoke(app, ["--db", sqlite_url, "gaps", "--json"])
    assert res.exit_code == 0, res.output
    d = json.loads(res.stdout)
    assert d["cells"] == [] and d["opportunities"] == []
    assert "never replace" in d["caution"]


@pytest.mark.parametrize("command", ["replication", "gaps"])
def test_help(command):
    res = runner.invoke(app, [command, "--help"])
    assert res.exit_code == 0 and "--json" in res.stdout
