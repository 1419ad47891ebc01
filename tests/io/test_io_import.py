"""Importing into the store, on SQLite and PostgreSQL: adds, updates with audit entries, idempotent
re-imports, dry runs, events sheets, archives with appraisals, all-or-nothing on problems.
"""

from __future__ import annotations

import json

import pytest
from io_helpers import count, row, table_dump, two_rows

from exposhift.errors import InputFileError
from exposhift.method.parts import METHOD_PARTS
from exposhift.services.importing import import_into
from exposhift.store import records
from exposhift.store.writer import Writer, audit_rows

EVENT_ROW = {
    "event_id": "E9",
    "exposure": "agent-y",
    "change_kind": "closure",
    "change_direction": "decrease",
    "change_size": "",
    "change_unit": "",
    "country": "SWE",
    "area": "Kiruna",
    "change_date": "2011",
    "family": "",
    "demo": "yes",
}


def counts(report) -> dict:
    return {k: (c.added, c.updated, c.unchanged) for k, c in report.counts.items()}


def test_import_adds_every_entity_once(store, sheet):
    report = import_into(store, sheet(two_rows() + [row(outcome="asthma")]))
    assert counts(report) == {
        "exposures": (1, 0, 0),
        "outcomes": (2, 0, 0),
        "events": (2, 0, 0),
        "studies": (2, 0, 0),
        "estimates": (3, 0, 0),
    }
    with store.read() as conn:
        est = records.get(conn, "estimate", "S1|E1|asthma|RR|change||")
        ev = records.get(conn, "event", "E1")
        st = records.get(conn, "study", "S1")
        out = records.get(conn, "outcome", "wheeze")
    assert (est["point"], est["ci_low"], est["ci_high"], est["primary"]) == (0.8, 0.7, 0.9, True)
    assert est["ci_level"] is None and est["estimate_kind"] == "change" and est["version"] == 1
    assert (ev["change_date"], ev["date_precision"], ev["demo"]) == ("2001-05", "month", True)
    assert (st["year"], st["checks"], st["pre_points"]) == (2005, "pre-trends", 24)
    assert out["outcome_group"] == "respiratory"
    # one audit entry per inserted row, naming the row by its natural key
    # (+ one per method part, recorded when the base was created)
    assert count(store, "audit_entry") == 1 + 2 + 2 + 2 + 3 + len(METHOD_PARTS)
    with store.read() as conn:
        (entry,) = audit_rows(conn, row_key="S1|E1|asthma|RR|change||")
    assert entry["action"] == "insert" and entry["user"] == "tester"
    assert entry["after"]["point"] == 0.8 and entry["after"]["version"] == 1


def test_bulk_audit_matches_the_writer(store, sheet):
    """The column-wise insert writes the audit entry Writer.insert_many would write."""
    import_into(store, sheet([row()]))
    with store.read() as conn:
        bulk = audit_rows(conn, row_key="S1")[0]
        st = records.get(conn, "study", "S1")
    values = {k: v for k, v in st.items() if k not in ("id", "created_at", "updated_at")}
    with store.write() as conn:
        w = Writer(conn, "tester")
        w.insert_many(records.TABLES["study"], [dict(values, key="S1-copy")])
        w.flush()
    with store.read() as conn:
        single = audit_rows(conn, row_key="S1-copy")[0]
    assert single["after"] == dict(bulk["after"], key="S1-copy")


def test_reimport_changes_nothing(store, sheet):
    path = sheet(two_rows())
    import_into(store, path)
    before = table_dump(store)
    report = import_into(store, path)
    assert all(c.added == 0 and c.updated == 0 for c in report.counts.values())
    assert counts(report)["estimates"] == (0, 0, 2)
    assert table_dump(store) == before  # no new rows, no versions, no audit entries


def test_changed_row_updates_with_audit(store, sheet):
    import_into(store, sheet(two_rows(), name="v1.csv"))
    rows = two_rows()
    rows[1].update(estimate="0.85", ci_high="0.95")
    rows[0].update(citation="Invented, A. et al. 2005, Demo J (corrected)")
    rows[1].update(country="SWE")  # the event in the database moves: an update, not an error
    report = import_into(store, sheet(rows, name="v2.csv"))
    assert counts(report)["estimates"] == (0, 1, 1)
    assert counts(report)["studies"] == (0, 1, 1)
    assert counts(report)["events"] == (0, 1, 1)
    assert count(store, "estimate") == 2
    with store.read() as conn:
        est = records.get(conn, "estimate", "S2|E2|asthma|RR|change||")
        (entry,) = [a for a in audit_rows(conn, row_key=est["key"]) if a["action"] == "update"]
        ev = records.get(conn, "event", "E2")
    assert (est["point"], est["ci_high"], est["version"]) == (0.85, 0.95, 2)
    assert entry["before"] == {"point": 0.8, "ci_high": 0.9, "version": 1}
    assert entry["after"] == {"point": 0.85, "ci_high": 0.95, "version": 2}
    assert (ev["country"], ev["version"]) == ("SWE", 2)


def test_event_moving_to_another_exposure(store, sheet):
    import_into(store, sheet(two_rows(), name="v1.csv"))
    rows = two_rows()
    rows[1]["exposure"] = "agent-z"
    report = import_into(store, sheet(rows, name="v2.csv"))
    assert counts(report)["exposures"] == (1, 0, 1)
    assert counts(report)["events"] == (0, 1, 1)
    with store.read() as conn:
        ev = records.get(conn, "event", "E2")
        z = records.get(conn, "exposure", "agent-z")
        x = records.get(conn, "exposure", "agent-x")
        (entry,) = [a for a in audit_rows(conn, row_key="E2") if a["action"] == "update"]
    assert ev["exposure_id"] == z["id"]
    assert entry["before"] == {"exposure_id": x["id"], "version": 1}
    assert entry["after"] == {"exposure_id": z["id"], "version": 2}


def test_update_respects_a_concurrent_edit(store, sheet):
    """The import reads versions inside its own transaction, so it never overwrites blindly."""
    import_into(store, sheet(two_rows(), name="v1.csv"))
    with store.write() as conn:
        w = Writer(conn, "other")
        records.update(w, "study", "S1", 1, {"comparison": "edited by hand"})
        w.flush()
    rows = two_rows()
    rows[0]["citation"] = "new citation"
    import_into(store, sheet(rows, name="v2.csv"))
    with store.read() as conn:
        st = records.get(conn, "study", "S1")
    assert (st["citation"], st["comparison"], st["version"]) == (
        "new citation",
        "edited by hand",
        3,
    )


def test_column_left_out_keeps_values_blank_cell_clears(store, sheet):
    import_into(store, sheet([row(doi="10.5555/x", comparison="neighbours")]))
    r = row(comparison="")  # doi column absent: kept; comparison blank: cleared
    import_into(store, sheet([r], name="v2.csv"))
    with store.read() as conn:
        st = records.get(conn, "study", "S1")
    assert (st["doi"], st["comparison"], st["version"]) == ("10.5555/x", None, 2)


def test_blank_outcome_group_does_not_clear(store, sheet):
    import_into(store, sheet([row()]))
    import_into(store, sheet([row(outcome_group="")], name="v2.csv"))
    with store.read() as conn:
        assert records.get(conn, "outcome", "wheeze")["outcome_group"] == "respiratory"


def test_dry_run_writes_nothing(store, sheet):
    import_into(store, sheet(two_rows(), name="v1.csv"))
    before = table_dump(store)
    rows = two_rows() + [row(study_id="S3", event_id="E3", outcome="eczema")]
    rows[0]["estimate"] = "0.75"
    report = import_into(store, sheet(rows, name="v2.csv"), dry_run=True)
    assert report.dry_run
    assert counts(report)["estimates"] == (1, 1, 1)
    assert counts(report)["studies"] == (1, 0, 2)
    assert counts(report)["outcomes"] == (1, 0, 2)
    assert table_dump(store) == before


def test_problems_write_nothing(store, sheet):
    import_into(store, sheet(two_rows(), name="v1.csv"))
    before = table_dump(store)
    rows = two_rows(country="XXX") + [row(study_id="S9", event_id="E9", outcome="x")]
    with pytest.raises(InputFileError):
        import_into(store, sheet(rows, name="v2.csv"))
    assert table_dump(store) == before


def test_events_import(store, sheet):
    path = sheet(
        [EVENT_ROW, dict(EVENT_ROW, event_id="E10", country="NOR", area="")], name="events.csv"
    )
    report = import_into(store, path, events_only=True)
    assert counts(report) == {"exposures": (1, 0, 0), "events": (2, 0, 0)}
    with store.read() as conn:
        ev = records.get(conn, "event", "E9")
    assert (ev["country"], ev["area"], ev["date_precision"], ev["demo"]) == (
        "SWE",
        "Kiruna",
        "year",
        True,
    )
    assert counts(import_into(store, path, events_only=True))["events"] == (0, 0, 2)
    moved = sheet([dict(EVENT_ROW, change_date="2011-09")], name="events2.csv")
    assert counts(import_into(store, moved, events_only=True))["events"] == (0, 1, 0)


def test_events_import_validates_and_ignores_study_columns(store, sheet):
    bad = sheet([dict(EVENT_ROW, country="XX", change_kind="shutdown")], name="bad.csv")
    with pytest.raises(InputFileError) as info:
        import_into(store, bad, events_only=True)
    assert {(p.row, p.column) for p in info.value.problems} == {(2, "country"), (2, "change_kind")}
    full = sheet([row()], name="full.csv")
    report = import_into(store, full, events_only=True)
    assert counts(report)["events"] == (1, 0, 0) and count(store, "study") == 0
    assert report.notes and report.notes[0].startswith("ignored columns: study_id")


def test_archive_problems(tmp_path, sqlite_store):
    doc = {
        "format": "exposhift-evidence-base",
        "format_version": 1,
        "vocabularies": {"exposures": [], "outcomes": []},
        "events": [
            {
                "key": "E1",
                "exposure": "a",
                "change_kind": "ban",
                "change_direction": "decrease",
                "change_size": "big",
                "change_unit": None,
                "country": "ZZZ",
                "area": None,
                "change_date": "2001",
                "family": None,
                "demo": True,
            }
        ],
        "studies": [],
        "estimates": [
            {
                "key": "S1|E1|o|RR|change||",
                "study": "S1",
                "event": "E1",
                "outcome": "o",
                "measure": "RR",
                "estimate_kind": "change",
                "per_unit": None,
                "point": 0.8,
                "ci_low": None,
                "ci_high": None,
                "ci_level": None,
                "se": None,
                "p_value": None,
                "baseline_risk": None,
                "subgroup": None,
                "time_window": None,
                "primary": False,
            }
        ],
        "appraisals": [
            {
                "study": "S1",
                "reviewer": "a",
                "stage": "draft",
                "rubric_id": "r",
                "rubric_hash": "h",
                "overall": 7,
                "ratings": [],
            }
        ],
    }
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(InputFileError) as info:
        import_into(sqlite_store, path)
    got = {(p.file, p.row, p.column) for p in info.value.problems}
    assert ("bad.json: events", 1, "change_size") in got
    assert ("bad.json: events", 1, "country") in got
    assert ("bad.json: estimates", 1, "ci_low") in got  # no uncertainty
    assert ("bad.json: estimates", 1, "study") in got  # no such study
    assert ("bad.json: appraisals", 1, "stage") in got
    assert ("bad.json: appraisals", 1, "overall") in got
    assert count(sqlite_store, "event") == 0


def test_not_an_archive(tmp_path, sqlite_store):
    path = tmp_path / "x.json"
    path.write_text('{"hello": 1}', encoding="utf-8")
    with pytest.raises(InputFileError, match="not an exposhift archive"):
        import_into(sqlite_store, path)
    path.write_text('{"format": ', encoding="utf-8")
    with pytest.raises(InputFileError, match="not valid JSON"):
        import_into(sqlite_store, path)
