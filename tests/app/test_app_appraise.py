"""The "Appraise a study" and "Downloads" pages with AppTest, on a private copy of the demo base.

Appraise: the form shows each domain's question and the suggestion with its reason (read from
the rubric file with ``tomllib``, outside exposhift's loader); a form with unrated core domains
or a departing rating without a reason lists every problem beside its domain and writes nothing;
two reviewers appraise independently (neither sees the other's ratings before both are in),
the comparison marks the domain they disagree on, and the consensus becomes the level of record;
the agreement table's kappa is recomputed with scikit-learn's ``cohen_kappa_score`` (reference
library) from ratings read with ``sqlite3``, and its overall-level row counts studies.
Downloads: each file holds what ``sqlite3`` counts.
"""

from __future__ import annotations

import csv
import io
import json
import tomllib
from pathlib import Path

import pytest
from sklearn.metrics import cohen_kappa_score
from writing_helpers import copy_db, count, frame_with, open_page, sql, texts

STUDY = "Iyer2015"  # no appraisal yet in the demo
RUBRIC = Path(__file__).resolve().parents[2] / "evidence" / "rubric.toml"
#: within the suggestions the demo's facts give for Iyer2015 (origin at most 1, falsification 1)
ANN = {
    "origin": 1,
    "counterfactual": 2,
    "design_checks": 2,
    "concurrent_changes": 2,
    "falsification": 1,
}
BOB = dict(ANN, counterfactual=3)


@pytest.fixture
def db(demo_db, tmp_path, monkeypatch) -> str:
    path = copy_db(demo_db, tmp_path / "evidence.db")
    monkeypatch.setenv("EXPOSHIFT_DB", path)
    return path


def _page(name: str | None, role: str | None = None):
    at = open_page("appraise", name, role)
    at.selectbox(key="appraise_study").set_value(STUDY)
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _fill(at, prefix: str, ratings: dict, reasons: dict | None = None):
    for d, level in ratings.items():
        at.radio(key=f"{prefix}_{d}").set_value(level)
    for d, why in (reasons or {}).items():
        at.text_area(key=f"{prefix}_{d}_why").set_value(why)
    at.run()
    return at


def _submit(at, key: str):
    at.button(key=key).click()
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _appraise(name: str, ratings: dict):
    at = _fill(_page(name), "indep", ratings)
    return _submit(at, "indep_submit")


def test_the_form_shows_questions_and_suggestions(db):
    rubric = tomllib.loads(RUBRIC.read_text(encoding="utf-8"))
    at = _page("ann")
    shown = texts(at)
    for d in rubric["domain"]:
        assert d["title"] in shown and d["question"] in shown
    assert "Suggested from the recorded facts: **at most 1**" in shown  # origin (assignment 1)


def test_unrated_core_domains_are_each_shown_and_nothing_written(db):
    core = [d["key"] for d in tomllib.loads(RUBRIC.read_text())["domain"] if d.get("core")]
    before = count(db, "appraisal")
    at = _submit(_page("ann"), "indep_submit")
    problems = frame_with(at, "problem")
    assert sorted(problems["field"]) == sorted(core)
    assert sum("core domain not rated" in e.value for e in at.error) == len(core)
    assert count(db, "appraisal") == before


def test_a_departing_rating_needs_a_reason(db):
    at = _fill(_page("ann"), "indep", dict(ANN, origin=3))
    assert any("departs from the suggestion" in w.value for w in at.warning)
    before = count(db, "rating")
    at = _submit(at, "indep_submit")
    problems = frame_with(at, "problem")
    assert problems["field"].tolist() == ["origin"]
    assert "departs from the suggested at most 1" in problems["problem"].iloc[0]
    assert count(db, "rating") == before
    at = _fill(at, "indep", {}, {"origin": "an invented reason: the lottery is documented"})
    at = _submit(at, "indep_submit")
    assert any("Independent appraisal of Iyer2015 recorded" in s.value for s in at.success)
    assert sql(
        db,
        "select r.justification from rating r join appraisal a on a.id = r.appraisal_id "
        "join study s on s.id = a.study_id where s.key = ? and r.domain = 'origin'",
        STUDY,
    ) == [("an invented reason: the lottery is documented",)]


def test_two_reviewers_then_consensus_and_agreement(db):
    at = _appraise("ann", ANN)
    assert any("recorded** as ann" in s.value for s in at.success)
    # bob cannot see ann's ratings before his own is in: no comparison yet
    at = _page("bob")
    assert "1 of 2 independent appraisals in" in texts(at)
    assert "appears once both independent appraisals are in" in texts(at)
    at = _appraise("bob", BOB)
    compare = next(d.value for d in at.dataframe if "differs" in d.value.columns)
    differ = compare[compare["differs"]]["key"].tolist()
    assert "counterfactual" in differ and "origin" not in differ
    # the chair records the consensus, prefilled where both agree
    at = _page("chair", "editor")  # a consensus needs an editor (the chair)
    assert at.radio(key="cons_origin").value == 1
    assert at.radio(key="cons_counterfactual").value is None
    at = _fill(at, "cons", {"counterfactual": 2})
    at = _submit(at, "cons_submit")
    assert any("Consensus appraisal of Iyer2015 recorded" in s.value for s in at.success)
    # overall = lowest core rating (evidence/rubric.toml [summary]): origin 1
    assert sql(
        db,
        "select a.reviewer, a.overall from appraisal a join study s on s.id = a.study_id "
        "where s.key = ? and a.stage = 'consensus'",
        STUDY,
    ) == [("chair", 1)]
    # agreement: kappa per domain against scikit-learn, overall-level row on n = studies
    agree = next(d.value for d in at.dataframe if "kappa linear" in d.value.columns)
    rows = sql(
        db,
        "select s.key, a.reviewer, r.level from rating r join appraisal a on a.id = "
        "r.appraisal_id join study s on s.id = a.study_id where a.stage = 'independent' "
        "and r.domain = 'counterfactual' order by s.key, a.reviewer",
    )
    pairs: dict[str, list[int]] = {}
    for key, _, level in rows:
        pairs.setdefault(key, []).append(level)
    both = [v for v in pairs.values() if len(v) == 2]
    expected = cohen_kappa_score(
        [a for a, _ in both], [b for _, b in both], labels=[0, 1, 2, 3], weights="linear"
    )
    row = agree[agree["domain"] == "counterfactual"].iloc[0]
    assert row["n"] == len(both)
    assert row["kappa linear"] == pytest.approx(expected, abs=1e-9)
    studies_with_two = sql(
        db,
        "select count(*) from (select study_id from appraisal where stage = 'independent' "
        "group by study_id having count(*) >= 2)",
    )[0][0]
    overall = agree[agree["domain"] == "overall level"].iloc[0]
    assert overall["n"] == studies_with_two


def test_no_name_or_reader_gets_no_appraisal_form(db, monkeypatch):
    at = _page(None)
    assert not [b for b in at.button if b.label == "Submit my independent appraisal"]
    assert "sign in" in texts(at).lower()  # nobody is signed in: the page says so
    at = _page("rita", "reader")
    assert not [b for b in at.button if b.label == "Submit my independent appraisal"]
    assert "needs the reviewer role" in texts(at)


def test_downloads_hold_what_the_evidence_base_holds(db):
    at = open_page("downloads", "ann")
    at = _submit(at, "dl_archive_make")
    archive = at.session_state["dl_archive"]
    assert at.get("download_button")
    data = json.loads(archive.data)
    assert len(data["studies"]) == count(db, "study")
    assert any("still blinded" in w.value for w in at.warning)
    at.selectbox(key="dl_sheet_exposure").set_value("vellium")
    at = _submit(at, "dl_sheet_make")
    sheet = at.session_state["dl_sheet"]
    assert sheet.name == "estimates-vellium.csv"
    rows = list(csv.DictReader(io.StringIO(sheet.data.decode())))
    assert (
        len(rows)
        == sql(
            db,
            "select count(*) from estimate e join event v on v.id = e.event_id join exposure x "
            "on x.id = v.exposure_id where x.name = 'vellium'",
        )[0][0]
    )
    at.selectbox(key="dl_dossier_exposure").set_value("vellium")
    at = _submit(at, "dl_dossier_make")
    dossier = at.session_state["dl_dossier"]
    assert dossier.name == "dossier-vellium.html"
    assert dossier.data.lstrip().lower().startswith(b"<!doctype html")
    assert b"vellium" in dossier.data and dossier.fingerprint


def test_a_reader_cannot_download_the_archive(db, monkeypatch):
    at = open_page("downloads", "rita", "reader")
    assert not [b for b in at.button if b.label == "Prepare the archive"]
    assert "administrator's export" in texts(at)
    assert [b for b in at.button if b.label == "Prepare the sheet"]
