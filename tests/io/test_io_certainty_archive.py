"""The archive's ``certainty_judgements`` section: lossless, audited, refused when wrong.

The reference for what the demo holds is seed_records/judgements.csv read with Python's own
``csv`` module (independent of exposhift's sheet reader); the archive is read back with Python's
``json`` module. The demo data are invented (flagged DEMO in every ``why``).
"""

from __future__ import annotations

import csv
import json

import pytest
from io_helpers import table_dump

from exposhift.errors import InputFileError
from exposhift.services.demo import build_demo, seed_dir
from exposhift.services.exporting import export_store
from exposhift.services.importing import import_into
from exposhift.services.setup import database_info, init_database, open_current
from exposhift.store.certainty_records import judgements_frame
from exposhift.store.writer import audit_rows

SECTION = "certainty_judgements"


def _seed_judgements() -> list[dict]:
    with open(seed_dir() / "judgements.csv", encoding="utf-8-sig", newline="") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def demo_archive(tmp_path_factory):
    """The demo base and its archive (text and parsed)."""
    d = tmp_path_factory.mktemp("cj")
    build_demo(d / "demo.db")
    store = open_current(str(d / "demo.db"))
    try:
        export_store(store, d / "a.json")
    finally:
        store.dispose()
    text = (d / "a.json").read_text(encoding="utf-8")
    return d / "demo.db", d / "a.json", json.loads(text)


def _fresh(tmp_path, name="fresh.db"):
    url = str(tmp_path / name)
    init_database(url, "tester")
    return open_current(url, "tester")


def _audit(store) -> list[dict]:
    with store.read() as conn:
        return audit_rows(conn, table_name="certainty_judgement")


def _write(tmp_path, doc, name="edited.json"):
    path = tmp_path / name
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path


def test_archive_carries_every_seed_judgement(demo_archive):
    _, _, doc = demo_archive
    seeds = _seed_judgements()
    got = doc[SECTION]
    assert len(got) == len(seeds) > 0
    archived = {(r["exposure"], r["outcome"], r["domain"]): r for r in got}
    for s in seeds:  # who decided, when and why are the sheet's, verbatim
        r = archived[(s["exposure"], s["outcome"], s["domain"])]
        assert (r["rating"], r["why"], r["decided_by"], r["decided_at"]) == (
            s["rating"],
            s["why"],
            s["decided_by"],
            s["decided_at"],
        )
        assert r["why"].startswith("DEMO")
        assert len(r["settings_hash"]) == 64
        assert isinstance(json.loads(r["numbers"]), dict)
        assert r["suggested"] and r["suggestion_reason"]
    keys = [(r["exposure"], r["outcome"], r["domain"]) for r in got]
    assert keys == sorted(keys)  # code-point order, one record per line


def test_round_trip_keeps_judgements_and_bytes(demo_archive, tmp_path):
    db, path, _ = demo_archive
    fresh = _fresh(tmp_path)
    src = open_current(str(db))
    try:
        report = import_into(fresh, path)
        c = report.counts["certainty judgements"]
        assert (c.added, c.updated, c.unchanged) == (len(_seed_judgements()), 0, 0)
        export_store(fresh, tmp_path / "b.json")
        assert path.read_bytes() == (tmp_path / "b.json").read_bytes()
        with src.read() as a, fresh.read() as b:
            cols = ["exposure", "outcome", "domain", "rating", "why", "suggested"]
            cols += ["suggestion_reason", "overrides", "numbers", "settings_hash"]
            cols += ["decided_by", "decided_at"]
            assert judgements_frame(a)[cols].equals(judgements_frame(b)[cols])
        inserts = _audit(fresh)
        assert len(inserts) == len(_seed_judgements())
        assert {r["action"] for r in inserts} == {"insert"}
        assert database_info(str(tmp_path / "fresh.db")).counts["certainty_judgements"] == len(
            _seed_judgements()
        )
        # the same archive again changes nothing: no write, no audit entry
        before = table_dump(fresh)
        again = import_into(fresh, path)
        c = again.counts["certainty judgements"]
        assert (c.added, c.updated, c.unchanged) == (0, 0, len(_seed_judgements()))
        assert table_dump(fresh) == before
    finally:
        src.dispose()
        fresh.dispose()


def test_changed_judgement_is_updated_and_audited(demo_archive, tmp_path):
    _, path, doc = demo_archive
    fresh = _fresh(tmp_path)
    try:
        import_into(fresh, path)
        edited = json.loads(json.dumps(doc))
        rec = edited[SECTION][0]
        rec["why"] = "DEMO, invented: the committee looked again"
        dry = import_into(fresh, _write(tmp_path, edited), dry_run=True)
        assert dry.counts["certainty judgements"].updated == 1
        report = import_into(fresh, _write(tmp_path, edited))
        assert report.counts["certainty judgements"].updated == 1
        with fresh.read() as conn:
            frame = judgements_frame(conn, rec["exposure"], rec["outcome"])
        row = frame[frame["domain"] == rec["domain"]].iloc[0]
        assert row["why"] == rec["why"] and int(row["version"]) == 2
        updates = [r for r in _audit(fresh) if r["action"] == "update"]
        assert len(updates) == 1
    finally:
        fresh.dispose()


def _judgements_only(doc: dict) -> dict:
    """The archive with nothing but its judgements (no exposures, outcomes or records)."""
    out = json.loads(json.dumps(doc))
    for name in ("events", "studies", "estimates", "appraisals", "series", "series_fits"):
        out[name] = []
    out["vocabularies"]["exposures"] = out["vocabularies"]["outcomes"] = []
    out["expected_directions"] = []
    return out


def test_names_known_to_the_base_are_accepted(demo_archive, tmp_path):
    _, path, doc = demo_archive
    fresh = _fresh(tmp_path)
    empty = _fresh(tmp_path, "empty.db")
    try:
        import_into(fresh, path)
        only = _write(tmp_path, _judgements_only(doc), "only.json")
        c = import_into(fresh, only).counts["certainty judgements"]
        assert (c.added, c.updated, c.unchanged) == (0, 0, len(doc[SECTION]))
        # a base without those names refuses every judgement, naming section, row and column
        before = table_dump(empty)
        with pytest.raises(InputFileError) as info:
            import_into(empty, only)
        rows = {(p.file, p.row, p.column) for p in info.value.problems}
        assert ("only.json: certainty_judgements", 1, "exposure") in rows
        assert ("only.json: certainty_judgements", 1, "outcome") in rows
        assert "nothing was written" in str(info.value)
        assert table_dump(empty) == before
    finally:
        fresh.dispose()
        empty.dispose()


@pytest.mark.parametrize(
    ("field", "value", "column"),
    [
        ("exposure", "no-such-agent", "exposure"),
        ("outcome", "no-such-outcome", "outcome"),
        ("domain", "no-such-domain", "domain"),
        ("rating", "excellent", "rating"),
        ("numbers", "{not json", "numbers"),
        ("overrides", "no", "overrides"),
        ("why", "", "why"),
    ],
)
def test_bad_judgement_is_refused_and_nothing_written(demo_archive, tmp_path, field, value, column):
    _, _, doc = demo_archive
    edited = json.loads(json.dumps(doc))
    edited[SECTION][2][field] = value
    fresh = _fresh(tmp_path)
    try:
        before = table_dump(fresh)
        with pytest.raises(InputFileError) as info:
            import_into(fresh, _write(tmp_path, edited))
        where = {(p.file, p.row, p.column) for p in info.value.problems}
        assert ("edited.json: certainty_judgements", 3, column) in where
        assert table_dump(fresh) == before  # not even the events or studies
    finally:
        fresh.dispose()


def test_duplicate_judgement_is_refused(demo_archive, tmp_path):
    _, _, doc = demo_archive
    edited = json.loads(json.dumps(doc))
    edited[SECTION].append(dict(edited[SECTION][0]))
    fresh = _fresh(tmp_path)
    try:
        with pytest.raises(InputFileError) as info:
            import_into(fresh, _write(tmp_path, edited))
        n = len(edited[SECTION])
        assert any(p.row == n and "twice" in p.message for p in info.value.problems)
    finally:
        fresh.dispose()


def test_archive_without_the_section_still_imports(demo_archive, tmp_path):
    _, path, doc = demo_archive
    fresh = _fresh(tmp_path)
    try:
        import_into(fresh, path)
        older = {k: v for k, v in doc.items() if k != SECTION}
        before = table_dump(fresh)["certainty_judgement"]
        report = import_into(fresh, _write(tmp_path, older, "older.json"))
        assert "certainty judgements" not in report.counts
        assert table_dump(fresh)["certainty_judgement"] == before  # left as they are
        other = _fresh(tmp_path, "other.db")
        try:
            import_into(other, _write(tmp_path, older, "older.json"))
            assert table_dump(other)["certainty_judgement"] == []
        finally:
            other.dispose()
    finally:
        fresh.dispose()


def test_export_of_one_exposure_keeps_its_judgements(demo_archive, tmp_path):
    db, _, doc = demo_archive
    exposure = doc[SECTION][0]["exposure"]
    store = open_current(str(db))
    fresh = _fresh(tmp_path)
    try:
        export_store(store, tmp_path / "one.json", exposure=exposure)
        part = json.loads((tmp_path / "one.json").read_text(encoding="utf-8"))
        want = [r for r in doc[SECTION] if r["exposure"] == exposure]
        assert part[SECTION] == want
        # the part imports whole into an empty base, its series too (a series may follow an
        # outcome of which its study reports no estimate: the part carries that outcome)
        report = import_into(fresh, _write(tmp_path, part, "one_only.json"))
        assert report.counts["certainty judgements"].added == len(want)
        kept_series = [s for s in doc["series"] if s["key"] in {x["key"] for x in part["series"]}]
        assert part["series"] and len(part["series"]) == len(kept_series)
        outcomes = {o["name"] for o in part["vocabularies"]["outcomes"]}
        assert {s["outcome"] for s in part["series"]} <= outcomes
    finally:
        store.dispose()
        fresh.dispose()
