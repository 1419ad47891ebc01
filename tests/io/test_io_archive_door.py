"""The archive door applies the appraisal rules of 'appraise import' (both backends).

The appraisals in these archives are made by ``import_appraisals`` (the rules' own door) in a
source base and exported; the tests then edit the archive by hand as an adversary would.
"""

from __future__ import annotations

import json

import pandas as pd
import pytest
from io_helpers import table_dump, two_rows, write_sheet

from exposhift.appraisal.rubric import load_rubric
from exposhift.appraisal.scoring import score_appraisal
from exposhift.errors import InputFileError
from exposhift.services.appraising import import_appraisals
from exposhift.services.exporting import export_store
from exposhift.services.importing import import_into
from exposhift.services.setup import init_database, open_current
from exposhift.store.writer import audit_rows

RUBRIC = load_rubric()
DOMAINS = RUBRIC.domain_keys


def _source_archive(tmp_path) -> tuple:
    """A SQLite base with two studies, S1 appraised by ana and ben and a consensus; its archive."""
    url = f"sqlite:///{tmp_path / 'source.db'}"
    init_database(url)
    src = open_current(url, user="source")
    try:
        import_into(src, write_sheet(tmp_path / "s.csv", two_rows()))
        rows = [
            dict(study_id="S1", reviewer=r, stage=stage, **{d: "1" for d in DOMAINS})
            for r, stage in (("ana", "independent"), ("ben", "independent"), ("panel", "consensus"))
        ]
        pd.DataFrame(rows).to_csv(tmp_path / "ap.csv", index=False)
        import_appraisals(src, tmp_path / "ap.csv")
        path = tmp_path / "a.json"
        export_store(src, path)
    finally:
        src.dispose()
    return path, json.loads(path.read_text(encoding="utf-8"))


def _write(tmp_path, doc, name="edited.json"):
    path = tmp_path / name
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path


def _problems(store, path, **kw) -> set[tuple]:
    with pytest.raises(InputFileError) as info:
        import_into(store, path, **kw)
    return {(p.row, p.column) for p in info.value.problems}, str(info.value)


def _appraisal(doc, reviewer):
    return next(a for a in doc["appraisals"] if a["reviewer"] == reviewer)


def test_restore_into_an_empty_base_is_byte_identical(store, tmp_path):
    path, doc = _source_archive(tmp_path)
    assert len(doc["appraisals"]) == 3
    import_into(store, path)
    again = tmp_path / "b.json"
    export_store(store, again)
    assert again.read_bytes() == path.read_bytes()
    # importing the same archive again changes nothing and meets no conflict
    before = table_dump(store)
    import_into(store, path)
    assert table_dump(store) == before


def test_hand_edited_archive_cannot_raise_a_reviewers_levels(store, tmp_path):
    """The defect: every level of ana's independent appraisal raised from 1 to 3 by hand."""
    path, doc = _source_archive(tmp_path)
    import_into(store, path)
    before = table_dump(store)
    for r in _appraisal(doc, "ana")["ratings"]:
        r["level"] = 3
    got, text = _problems(store, _write(tmp_path, doc))
    row = doc["appraisals"].index(_appraisal(doc, "ana")) + 1
    assert (row, "reviewer") in got  # the conflict with the stored appraisal
    assert (row, "ratings[falsification].level") in got  # a departure without justification
    assert (row, "overall") in got  # overall no longer what the rubric gives
    assert "--replace" in text
    assert table_dump(store) == before
    # with --replace the rules still apply: the unjustified departures are refused
    got, _ = _problems(store, _write(tmp_path, doc), replace=True)
    assert (row, "ratings[falsification].level") in got
    assert table_dump(store) == before


def test_conflict_needs_replace_and_is_audited(store, tmp_path):
    path, doc = _source_archive(tmp_path)
    import_into(store, path)
    before = table_dump(store)
    ana = _appraisal(doc, "ana")
    rating = next(r for r in ana["ratings"] if r["domain"] == "timing")
    rating["level"], rating["justification"] = 0, "the change date is only known to the year"
    ana["overall"] = score_appraisal(
        {r["domain"]: r["level"] for r in ana["ratings"]}, RUBRIC
    ).overall
    edited = _write(tmp_path, doc)
    got, text = _problems(store, edited)
    assert got == {(doc["appraisals"].index(ana) + 1, "reviewer")}
    assert "already holds the independent appraisal of study 'S1' by 'ana'" in text
    assert table_dump(store) == before
    got, _ = _problems(store, edited, dry_run=True)  # a dry run reports the conflict too
    assert table_dump(store) == before
    import_into(store, edited, replace=True)
    out = tmp_path / "c.json"
    export_store(store, out)
    assert _appraisal(json.loads(out.read_text(encoding="utf-8")), "ana") == ana
    with store.read() as conn:
        replaced = [e for e in audit_rows(conn) if e["action"] == "replace"]
    assert [(e["row_key"], e["user"], e["after"]["archive"]) for e in replaced] == [
        ("S1|ana|independent", "tester", "edited.json")
    ]


def test_consensus_without_independent_appraisals_is_refused(store, tmp_path):
    path, doc = _source_archive(tmp_path)
    doc["appraisals"] = [_appraisal(doc, "panel")]
    got, text = _problems(store, _write(tmp_path, doc))
    assert got == {(1, "stage")}
    assert "needs two independent appraisals first (it has 0)" in text


def test_unknown_domain_rubric_and_hash_are_refused(store, tmp_path):
    path, doc = _source_archive(tmp_path)
    ana, ben, panel = (_appraisal(doc, r) for r in ("ana", "ben", "panel"))
    ana["ratings"].append(
        {
            "domain": "vibes",
            "level": 3,
            "reporting": None,
            "justification": None,
            "suggested_level": None,
            "suggestion_reason": None,
        }
    )
    ben["rubric_id"], ben["rubric_hash"] = "invented-rubric", "0" * 64
    panel["rubric_hash"] = "f" * 64
    got, text = _problems(store, _write(tmp_path, doc))
    rows = {
        r: doc["appraisals"].index(a) + 1 for r, a in (("ana", ana), ("ben", ben), ("panel", panel))
    }
    assert got == {
        (rows["ana"], "ratings[vibes]"),
        (rows["ben"], "rubric_id"),
        (rows["panel"], "rubric_hash"),
    }
    assert "holds no rubric 'invented-rubric'" in text


def test_core_domain_missing_and_bad_reporting_are_refused(store, tmp_path):
    path, doc = _source_archive(tmp_path)
    ana = _appraisal(doc, "ana")
    ana["ratings"] = [r for r in ana["ratings"] if r["domain"] != RUBRIC.core_domains[0]]
    ana["ratings"][0]["reporting"] = "mostly"
    got, _ = _problems(store, _write(tmp_path, doc))
    row = doc["appraisals"].index(ana) + 1
    assert (row, f"ratings[{RUBRIC.core_domains[0]}].level") in got
    assert (row, f"ratings[{ana['ratings'][0]['domain']}].reporting") in got
