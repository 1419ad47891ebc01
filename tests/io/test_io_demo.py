"""The demo evidence base (seed_records/) loads cleanly, completely, and archives losslessly.

The expected counts are read from the seed files with Python's ``csv`` module, independently of
exposhift's reader.
"""

from __future__ import annotations

import csv

import pytest
from sqlalchemy import text

from exposhift.services.demo import build_demo, seed_dir
from exposhift.services.exporting import export_store
from exposhift.services.importing import import_into
from exposhift.services.setup import init_database, open_current

SEED = seed_dir()


def _rows(name: str) -> list[dict]:
    with open(SEED / name, encoding="utf-8-sig", newline="") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    path = tmp_path_factory.mktemp("demo") / "demo.db"
    result = build_demo(path)
    return path, result


def test_demo_loads_every_seed_record(demo):
    _, result = demo
    evidence = _rows("evidence.csv")
    registered = _rows("registered_events.csv")
    assert result.counts["estimates"] == len(evidence)
    assert result.counts["studies"] == len({r["study_id"] for r in evidence})
    events = {r["event_id"] for r in evidence} | {r["event_id"] for r in registered}
    assert result.counts["events"] == len(events)
    assert result.counts["events_without_study"] == len(
        {r["event_id"] for r in registered} - {r["event_id"] for r in evidence}
    )
    assert result.counts["appraisals"] == len(_rows("appraisals.csv"))
    assert all(r["demo"] == "yes" for r in evidence + registered)
    assert [r.counts["estimates"].added for r in result.imports[:1]] == [len(evidence)]


def test_demo_records_are_all_flagged_demo(demo):
    path, _ = demo
    store = open_current(str(path))
    try:
        with store.read() as conn:
            real = conn.execute(
                text(
                    "SELECT (SELECT count(*) FROM study WHERE NOT demo) + "
                    "(SELECT count(*) FROM event WHERE NOT demo)"
                )
            ).scalar()
    finally:
        store.dispose()
    assert real == 0


def test_demo_archive_round_trip(demo, tmp_path):
    path, _ = demo
    store = open_current(str(path))
    fresh_url = str(tmp_path / "fresh.db")
    init_database(fresh_url, "tester")
    fresh = open_current(fresh_url, "tester")
    try:
        export_store(store, tmp_path / "a.json")
        import_into(fresh, tmp_path / "a.json")
        export_store(fresh, tmp_path / "b.json")
        assert (tmp_path / "a.json").read_bytes() == (tmp_path / "b.json").read_bytes()
        # the demo sheet re-imports onto the rebuilt base without a change
        report = import_into(fresh, SEED / "evidence.csv")
        assert not report.changed
    finally:
        store.dispose()
        fresh.dispose()
