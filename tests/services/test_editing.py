"""The browser's entry services on SQLite and PostgreSQL: a study form goes through the sheet's
validation and the import's writing, a stale edit is refused with the other person's change, an
event is registered alone, an upload is previewed then imported, and a record's history hides
blinded ratings.

Outside routes: the example sheet is read with the standard library's ``csv`` module to count
what an import must add; stored values are read back with SQLAlchemy Core (not exposhift's
readers) where it matters.
"""

from __future__ import annotations

import csv
from pathlib import Path

import pytest
from sqlalchemy import text

from exposhift.errors import InputFileError, ReviewError
from exposhift.services import editing, history, uploads
from exposhift.services.appraisal_form import submit_appraisal
from exposhift.services.setup import init_database

EXAMPLE = Path(__file__).resolve().parents[2] / "docs" / "example-sheet.csv"


def _one(store, sql: str, **args):
    with store.engine.connect() as conn:
        return conn.execute(text(sql), args).scalar_one()


@pytest.fixture
def base(store):
    """An evidence base holding the example sheet (invented demo records), imported as 'seed'."""
    init_database(store.url)
    uploads.import_upload(store, EXAMPLE.name, EXAMPLE.read_bytes(), user="seed")
    return store


def _example_rows() -> list[dict]:
    with open(EXAMPLE, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_upload_preview_writes_nothing_and_import_adds_what_the_file_holds(store):
    init_database(store.url)
    rows = _example_rows()
    before = _one(store, "select count(*) from audit_entry")
    preview = uploads.preview_upload(store, EXAMPLE.name, EXAMPLE.read_bytes())
    assert _one(store, "select count(*) from study") == 0
    assert _one(store, "select count(*) from audit_entry") == before
    counts = {k: (c.added, c.updated, c.unchanged) for k, c in preview.report.counts.items()}
    assert counts["studies"] == (len({r["study_id"] for r in rows}), 0, 0)
    assert counts["estimates"] == (len(rows), 0, 0)
    assert set(preview.records["status"]) == {"added"}
    done = uploads.import_upload(store, EXAMPLE.name, EXAMPLE.read_bytes(), user="carol")
    assert done.counts["estimates"].added == len(rows)
    assert _one(store, "select count(*) from estimate") == len(rows)
    users = _one(store, 'select count(distinct "user") from audit_entry where "user" = \'carol\'')
    assert users == 1


def test_upload_refuses_a_nameless_user_and_a_too_large_file(store, monkeypatch):
    init_database(store.url)
    before = _one(store, "select count(*) from audit_entry")  # the method stored by init
    with pytest.raises(ReviewError, match="say who you are"):
        uploads.import_upload(store, EXAMPLE.name, EXAMPLE.read_bytes(), user="  ")
    monkeypatch.setenv("EXPOSHIFT_MAX_FILE_MB", "1")
    with pytest.raises(InputFileError, match="limited to 1 MB") as exc:
        uploads.preview_upload(store, "big.csv", b"x" * ((1 << 20) + 1))
    assert exc.value.problems[0].file == "big.csv"
    assert _one(store, "select count(*) from audit_entry") == before


def test_study_form_edit_is_validated_versioned_and_audited(base):
    draft = editing.load_draft(base, "Example2009")
    assert draft.versions["study"] == {"Example2009": 1}
    study = dict(draft.study, population="singleton births, Region X only")
    result = editing.save_study(base, draft, study, draft.events, draft.estimates, user="ann")
    assert result.counts["study"].updated == 1 and result.counts["estimate"].updated == 0
    assert _one(base, "select population from study where key = 'Example2009'") == (
        "singleton births, Region X only"
    )
    assert _one(base, "select version from study where key = 'Example2009'") == 2
    who = _one(
        base,
        "select \"user\" from audit_entry where row_key = 'Example2009' and action = 'update'",
    )
    assert who == "ann"


def test_study_form_problems_are_every_problem_with_row_and_column(base):
    draft = editing.load_draft(base, "Example2009")
    estimates = draft.estimates.copy()
    estimates.loc[0, "estimate"] = "abc"
    estimates.loc[1, "measure"] = "XX"
    study = dict(draft.study, year="20x", design="itz")
    audit = _one(base, "select count(*) from audit_entry")
    with pytest.raises(InputFileError) as exc:
        editing.save_study(base, draft, study, draft.events, estimates, user="ann")
    where = {(p.row, p.column) for p in exc.value.problems}
    assert {(1, "estimate"), (2, "measure"), (1, "year"), (1, "design")} <= where
    assert _one(base, "select count(*) from audit_entry") == audit


def test_renamed_or_removed_estimate_is_refused(base):
    draft = editing.load_draft(base, "Example2009")
    estimates = draft.estimates.copy()
    estimates.loc[1, "subgroup"] = "mothers under 30"
    with pytest.raises(InputFileError, match="never deletes an estimate"):
        editing.save_study(base, draft, draft.study, draft.events, estimates, user="ann")


def test_stale_edit_is_refused_with_the_other_change(base):
    mine = editing.load_draft(base, "Example2009")
    theirs = editing.load_draft(base, "Example2009")
    editing.save_study(
        base,
        theirs,
        dict(theirs.study, comparison="bob's comparison"),
        theirs.events,
        theirs.estimates,
        user="bob",
    )
    with pytest.raises(editing.StaleEditError) as exc:
        editing.save_study(
            base,
            mine,
            dict(mine.study, comparison="ann's comparison"),
            mine.events,
            mine.estimates,
            user="ann",
        )
    (c,) = exc.value.conflicts
    assert (c.entity, c.key, c.your_version, c.now_version) == ("study", "Example2009", 1, 2)
    assert c.changes[0]["user"] == "bob"
    assert c.changes[0]["after"]["comparison"] == "bob's comparison"
    assert _one(base, "select comparison from study where key = 'Example2009'") == (
        "bob's comparison"
    )


def test_new_study_with_a_taken_key_is_refused(base):
    draft = editing.blank_draft()
    shown = editing.load_draft(base, "Example2004")
    study = dict(shown.study)
    with pytest.raises(editing.StaleEditError, match="Example2004"):
        editing.save_study(base, draft, study, draft.events, shown.estimates, user="ann")


def test_new_study_of_a_registered_event(base):
    editing.register_event(
        base,
        {
            "event_id": "EXA-BEL-2010",
            "exposure": "exampline",
            "change_kind": "ban",
            "change_direction": "decrease",
            "country": "BEL",
            "change_date": "2010-03",
        },
        user="ann",
    )
    assert _one(base, "select demo from event where key = 'EXA-BEL-2010'") in (0, False)
    draft = editing.blank_draft()
    study = dict(
        draft.study,
        study_id="New2012",
        citation="Invented, Z. 2012",
        year="2012",
        design="its",
        demo="yes",
    )
    est = draft.estimates.copy()
    est.loc[0, ["event_id", "outcome", "measure", "estimate", "ci_low", "ci_high"]] = [
        "EXA-BEL-2010",
        "preterm birth",
        "RR",
        "0.9",
        "0.8",
        "1.01",
    ]
    result = editing.save_study(base, draft, study, draft.events, est, user="ann")
    assert result.counts["study"].added == 1
    # the import's rule: an event is demo when any of its rows is (io/validate.py)
    assert result.counts["event"].updated == 1
    assert _one(base, "select demo from event where key = 'EXA-BEL-2010'") in (1, True)
    with pytest.raises(InputFileError, match="already in the evidence base"):
        editing.register_event(
            base,
            {
                "event_id": "EXA-BEL-2010",
                "exposure": "exampline",
                "change_kind": "ban",
                "change_direction": "decrease",
                "country": "BEL",
                "change_date": "2010",
            },
            user="ann",
        )


def test_history_hides_another_reviewers_blinded_ratings(base):
    ratings = {"origin": 1, "counterfactual": 2, "design_checks": 1, "concurrent_changes": 2}
    reasons = {"origin": "invented reason", "falsification": ""}
    submit_appraisal(base, "Example2004", ratings, reasons, reviewer="ann")
    trail = history.record_history(base, "Example2004", viewer="bob")
    rows = trail[trail["record"].str.startswith("Example2004|ann|independent")]
    assert len(rows) and set(rows["change"]) == {history.HIDDEN}
    own = history.record_history(base, "Example2004", viewer="ann")
    assert history.HIDDEN not in set(own["change"])
    n = _one(
        base,
        "select count(*) from audit_entry where row_key = 'Example2004' "
        "or row_key like 'Example2004|%'",
    )
    assert len(trail) == n
