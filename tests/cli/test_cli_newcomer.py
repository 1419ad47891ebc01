"""The command line as a newcomer meets it, on the demo evidence base: the names to type, one
study in full, filtered exports, names in any case, agreement in percent, a demo that never
replaces a reviewer's own work, and an init that says where the method files are.

Outside references: scikit-learn ``cohen_kappa_score`` (weighted kappa, Cohen 1968) and the
proportion of exact agreement (Altman 1991, §14.3.1) computed here by hand from the pairs; the
invented scenario's own tables (``exposhift.demo_scenario.build_scenario``) for the counts.
"""

from __future__ import annotations

import csv
import json
import re
import sqlite3
from pathlib import Path

import pandas as pd
import pytest
from sklearn.metrics import cohen_kappa_score
from typer.testing import CliRunner

from exposhift.cli.main import app
from exposhift.demo_scenario import build_scenario

runner = CliRunner()


def ok(*args: str):
    result = runner.invoke(app, list(args))
    assert result.exit_code == 0, result.output
    return result


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory) -> str:
    path = tmp_path_factory.mktemp("demo") / "demo.db"
    ok("demo", "--db", str(path))
    return str(path)


@pytest.fixture(scope="module")
def scenario():
    """The scenario's tables, plus every event (studied or only registered) and the studies."""
    s = dict(build_scenario())
    est = s["estimates"]
    cols = list(s["events"].columns)
    s["all_events"] = pd.concat([est[cols], s["events"]], ignore_index=True).drop_duplicates(
        "event_id"
    )
    s["studies"] = est.drop_duplicates("study_id")
    return s


# ------------------------------------------------------------------------------ agreement
def _independent_pairs(db: str) -> dict[str, tuple[list, list]]:
    """Per domain (and 'overall level'), the first two reviewers' levels, read with sqlite3."""
    con = sqlite3.connect(db)
    try:
        ratings = con.execute(
            "SELECT s.key, a.reviewer, r.domain, r.level FROM rating r JOIN appraisal a ON "
            "a.id = r.appraisal_id JOIN study s ON s.id = a.study_id WHERE a.stage = "
            "'independent' AND r.level IS NOT NULL"
        ).fetchall()
        overall = con.execute(
            "SELECT s.key, a.reviewer, 'overall level', a.overall FROM appraisal a JOIN study s "
            "ON s.id = a.study_id WHERE a.stage = 'independent' AND a.overall IS NOT NULL"
        ).fetchall()
    finally:
        con.close()
    by: dict = {}
    for study, reviewer, domain, level in ratings + overall:
        by.setdefault(domain, {}).setdefault(study, {})[reviewer] = level
    out = {}
    for domain, studies in by.items():
        a, b = [], []
        for study in sorted(studies):
            revs = sorted(studies[study])
            if len(revs) >= 2:
                a.append(studies[study][revs[0]])
                b.append(studies[study][revs[1]])
        out[domain] = (a, b)
    return out


def test_agreement_prints_percent_on_a_0_100_scale_and_overall_level_over_studies(demo_db):
    text = ok("--db", demo_db, "agreement").stdout
    rows = {
        m[0]: (int(m[1]), float(m[2]), float(m[3]))
        for m in re.findall(r"^(\w[\w ]*?)\s+(\d+)\s+([\d.]+)%\s+([\d.]+)", text, re.M)
    }
    pairs = _independent_pairs(demo_db)
    for domain in ("origin", "timing", "overall level"):
        a, b = pairs[domain]
        percent = 100 * sum(x == y for x, y in zip(a, b, strict=True)) / len(a)  # Altman 1991
        n, shown, kappa = rows[domain]
        assert n == len(a) and shown == pytest.approx(percent, abs=0.05)
        assert kappa == pytest.approx(
            cohen_kappa_score(a, b, weights="linear", labels=[0, 1, 2, 3]), abs=0.005
        )
    studies = len(pairs["overall level"][0])
    assert rows["overall level"][0] == studies  # n = studies, not studies x domains
    assert rows["all domains"][0] == sum(
        len(a) for d, (a, _) in pairs.items() if d != "overall level"
    )
    assert all(v[1] <= 100 for v in rows.values())
    data = {r["domain"]: r for r in json.loads(ok("--db", demo_db, "agreement", "--json").stdout)}
    assert data["overall level"]["n"] == studies
    assert data["overall level"]["kappa_quadratic"] == pytest.approx(
        cohen_kappa_score(*pairs["overall level"], weights="quadratic", labels=[0, 1, 2, 3]),
        abs=1e-12,
    )


# ---------------------------------------------------------------------------- list, show
def test_list_gives_the_names_with_counts(demo_db, scenario):
    events = scenario["all_events"]
    exposures = json.loads(ok("--db", demo_db, "list", "exposures", "--json").stdout)
    assert [e["exposure"] for e in exposures] == sorted(events["exposure"].unique())
    per = events.groupby("exposure").size()
    assert {e["exposure"]: e["events"] for e in exposures} == per.to_dict()
    text = ok("--db", demo_db, "list", "outcomes", "--exposure", "vellium").stdout
    assert "mean birth weight" in text and "preterm birth" not in text
    studies = json.loads(ok("--db", demo_db, "list", "studies", "--json").stdout)
    assert len(studies) == len(scenario["studies"])
    ev = json.loads(ok("--db", demo_db, "list", "events", "--exposure", "Vellium", "--json").stdout)
    assert {e["event_id"] for e in ev} == set(
        events.loc[events["exposure"] == "vellium", "event_id"]
    )
    bad = runner.invoke(app, ["--db", demo_db, "list", "agents"])
    assert bad.exit_code == 2 and "exposures, outcomes, studies, events" in bad.stderr


def test_show_prints_the_study_with_events_estimates_and_appraisal_of_record(demo_db, scenario):
    ap = scenario["appraisals"]
    study = ap.loc[ap["stage"] == "consensus", "study_id"].iloc[0]
    text = ok("--db", demo_db, "show", study).stdout
    assert text.startswith(study) and "events (" in text and "estimates (" in text
    assert "consensus by" in text and "overall" in text
    data = json.loads(ok("--db", demo_db, "show", study.lower(), "--json").stdout)
    assert data["study"]["study_id"] == study
    assert data["appraisal_of_record"]["stage"] == "consensus"
    assert len(data["estimates"]) == int((scenario["estimates"]["study_id"] == study).sum())
    missing = runner.invoke(app, ["--db", demo_db, "show", "NoSuchStudy"])
    assert missing.exit_code == 5 and "no study 'NoSuchStudy'" in missing.stderr


# ------------------------------------------------------------------------------ names
def test_exposure_and_outcome_names_match_in_any_case(demo_db):
    lower = json.loads(
        ok(
            "--db",
            demo_db,
            "pool",
            "--exposure",
            "vellium",
            "--outcome",
            "mean birth weight",
            "--json",
        ).stdout
    )
    upper = json.loads(
        ok(
            "--db",
            demo_db,
            "pool",
            "--exposure",
            "VELLIUM",
            "--outcome",
            "Mean Birth Weight",
            "--json",
        ).stdout
    )
    assert upper == lower
    rep = json.loads(
        ok(
            "--db",
            demo_db,
            "replication",
            "--exposure",
            "Dravonil",
            "--outcome",
            "PRETERM BIRTH",
            "--json",
        ).stdout
    )
    assert rep["exposure"] == "dravonil" and rep["outcome"] == "preterm birth"


# ------------------------------------------------------------------------------ export
def test_export_of_one_exposure_and_outcome_with_consensus_levels(demo_db, scenario, tmp_path):
    out = tmp_path / "part.csv"
    ok(
        "--db",
        demo_db,
        "export",
        str(out),
        "--exposure",
        "Vellium",
        "--outcome",
        "mean birth weight",
        "--with-appraisals",
    )
    with open(out, newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    est = scenario["estimates"]
    want = est[(est["exposure"] == "vellium") & (est["outcome"] == "mean birth weight")]
    assert len(rows) == len(want) and {r["exposure"] for r in rows} == {"vellium"}
    con = sqlite3.connect(demo_db)
    try:
        levels = dict(
            con.execute(
                "SELECT s.key, a.overall FROM appraisal a JOIN study s ON "
                "s.id = a.study_id WHERE a.stage = 'consensus'"
            ).fetchall()
        )
    finally:
        con.close()
    for r in rows:
        expected = levels.get(r["study_id"])
        assert r["consensus_overall"] == ("" if expected is None else str(expected))
        assert "consensus_origin" in r


def test_filtered_archive_imports_cleanly_into_a_new_base(demo_db, scenario, tmp_path):
    archive = tmp_path / "vellium.json"
    ok("--db", demo_db, "export", str(archive), "--exposure", "vellium")
    target = str(tmp_path / "new.db")
    ok("--db", target, "init")
    ok("--db", target, "import", str(archive))
    counts = json.loads(ok("--db", target, "info", "--json").stdout)
    events = scenario["all_events"]
    assert counts["exposures"] == 1
    assert counts["events"] == int((events["exposure"] == "vellium").sum())


# -------------------------------------------------------------------------------- demo
def test_global_db_is_honoured_by_demo(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    ok("--db", "mine-demo.db", "demo")
    assert (tmp_path / "mine-demo.db").is_file()
    assert not (tmp_path / "demo").exists()


def test_demo_refuses_a_base_with_a_reviewers_own_appraisal_unless_forced(tmp_path, scenario):
    db = tmp_path / "demo.db"
    ok("demo", "--db", str(db))
    ok("demo", "--db", str(db))  # a demo file holding only demo records is replaced
    ap = scenario["appraisals"]
    first = ap[ap["stage"] == "independent"].iloc[0].to_dict()
    mine = tmp_path / "mine.csv"
    cols = [c for c in ap.columns if str(first.get(c)) not in ("nan", "None")]
    with open(mine, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=cols)
        w.writeheader()
        w.writerow({**{c: first[c] for c in cols}, "reviewer": "my-own-reviewer"})
    ok("--db", str(db), "appraise", "import", str(mine))
    refused = runner.invoke(app, ["demo", "--db", str(db)])
    assert refused.exit_code == 2 and "refusing to replace it" in refused.stderr
    assert "appraisal" in refused.stderr and "--force" in refused.stderr
    con = sqlite3.connect(db)
    try:
        assert (
            con.execute(
                "SELECT count(*) FROM appraisal WHERE reviewer = 'my-own-reviewer'"
            ).fetchone()[0]
            == 1
        )
    finally:
        con.close()
    forced = ok("demo", "--db", str(db), "--force")
    (backup,) = tmp_path.glob("demo.db.backup-*")
    assert str(backup) in forced.stdout
    con = sqlite3.connect(backup)
    try:
        assert (
            con.execute(
                "SELECT count(*) FROM appraisal WHERE reviewer = 'my-own-reviewer'"
            ).fetchone()[0]
            == 1
        )
    finally:
        con.close()


# -------------------------------------------------------------------------------- init
def test_init_says_which_method_it_records_and_how_to_change_it(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    text = ok("init").stdout
    assert "method recorded in this evidence base" in text
    assert "rubric    version 1 exposhift-natural-experiments" in text
    assert "settings  version 1" in text and "packaged default" in text
    assert "to change it: exposhift method set rubric FILE.toml" in text


def test_demo_refuses_a_base_with_an_edited_demo_record_or_an_extra_table(tmp_path):
    db = tmp_path / "demo.db"
    ok("demo", "--db", str(db))
    sheet = tmp_path / "sheet.csv"
    ok("--db", str(db), "export", str(sheet))
    with open(sheet, newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    first = rows[0]["study_id"]
    for r in rows:
        if r["study_id"] == first:
            r["population"] = "edited by a reviewer"
    with open(sheet, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    ok("--db", str(db), "import", str(sheet))  # every record still flagged demo
    refused = runner.invoke(app, ["demo", "--db", str(db)])
    assert refused.exit_code == 2 and "study record(s) changed" in refused.stderr
    other = tmp_path / "other.db"
    ok("demo", "--db", str(other))
    con = sqlite3.connect(other)  # a table of the user's own (e.g. method records)
    con.execute("CREATE TABLE committee_notes (note TEXT)")
    con.execute("INSERT INTO committee_notes VALUES ('keep me')")
    con.commit()
    con.close()
    refused = runner.invoke(app, ["demo", "--db", str(other)])
    assert refused.exit_code == 2 and "committee_notes" in refused.stderr


def test_a_level_that_is_no_number_is_not_called_out_of_range(demo_db, scenario, tmp_path):
    ap = scenario["appraisals"]
    first = ap[ap["stage"] == "independent"].iloc[0].to_dict()
    cols = [c for c in ap.columns if str(first.get(c)) not in ("nan", "None")]
    bad = tmp_path / "bad.csv"
    with open(bad, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=cols)
        w.writeheader()
        w.writerow({**{c: first[c] for c in cols}, "reviewer": "someone-new", "origin": "x"})
    result = runner.invoke(app, ["--db", demo_db, "appraise", "import", str(bad), "--dry-run"])
    assert result.exit_code == 2
    assert "level 'x' is not one of the levels" in result.stderr
    assert "outside 0-3" not in result.stderr and "exposhift." not in result.stderr
    assert "0 (fatal), 1 (weak), 2 (adequate), 3 (strong)" in result.stderr


def test_list_works_on_an_empty_base_and_one_with_events_only(tmp_path, scenario):
    db = str(tmp_path / "new.db")
    ok("--db", db, "init")
    for what in ("exposures", "outcomes", "studies", "events"):
        assert f"no {what} in the evidence base" in ok("--db", db, "list", what).stdout
    registered = Path(__file__).resolve().parents[2] / "seed_records" / "registered_events.csv"
    ok("--db", db, "events", "import", str(registered))
    rows = json.loads(ok("--db", db, "list", "exposures", "--json").stdout)
    per = scenario["events"].groupby("exposure").size().to_dict()
    assert {r["exposure"]: r["events"] for r in rows} == per
    assert all(r["studies"] == 0 and r["estimates"] == 0 for r in rows)
