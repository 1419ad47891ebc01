"""The archive of one exposure (or one exposure and one outcome) is self-contained.

- every single-exposure export of the demo, and every exposure-outcome export, imports whole
  into an empty evidence base, and exporting that base again gives the same bytes;
- what the part holds is checked against the whole archive read with Python's own ``json``
  module (outside exposhift's reader): the series of the exposure's events, each with its outcome
  listed in ``vocabularies.outcomes``;
- a hand-broken archive whose series names an outcome the archive does not hold is refused with
  one clear problem (section, row, field, what to do) and nothing is written.

The demo data are an invented scenario (flagged demo).
"""

from __future__ import annotations

import json

import pytest
from io_helpers import table_dump

from exposhift.errors import InputFileError
from exposhift.services.demo import build_demo
from exposhift.services.exporting import export_store
from exposhift.services.importing import import_into
from exposhift.services.setup import init_database, open_current


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo base, its whole archive parsed with ``json``, and an export helper."""
    d = tmp_path_factory.mktemp("part")
    build_demo(d / "demo.db")
    store = open_current(str(d / "demo.db"))
    export_store(store, d / "whole.json")
    doc = json.loads((d / "whole.json").read_text(encoding="utf-8"))
    yield store, doc, d
    store.dispose()


def _fresh(path):
    init_database(str(path), "tester")
    return open_current(str(path), "tester")


def _round_trip(store, tmp_path, name: str, **part) -> dict:
    """Export a part, import it into an empty base, export that base; the two files are equal."""
    first, again = tmp_path / f"{name}.json", tmp_path / f"{name}-again.json"
    export_store(store, first, **part)
    fresh = _fresh(tmp_path / f"{name}.db")
    try:
        import_into(fresh, first)
        export_store(fresh, again)
    finally:
        fresh.dispose()
    assert again.read_bytes() == first.read_bytes(), name
    return json.loads(first.read_text(encoding="utf-8"))


def _exposures(doc) -> list[str]:
    return sorted(x["name"] for x in doc["vocabularies"]["exposures"])


def test_every_single_exposure_export_round_trips(demo, tmp_path):
    store, doc, _ = demo
    exposures = _exposures(doc)
    assert len(exposures) >= 3  # the demo scenario's agents
    with_other_outcome = 0
    for x in exposures:
        part = _round_trip(store, tmp_path, x, exposure=x)
        events = {e["key"] for e in doc["events"] if e["exposure"] == x}
        studies = {s["key"] for s in part["studies"]}
        want = sorted(
            s["key"] for s in doc["series"] if s["event"] in events and s["study"] in studies
        )
        assert sorted(s["key"] for s in part["series"]) == want, x
        listed = {o["name"] for o in part["vocabularies"]["outcomes"]}
        assert {s["outcome"] for s in part["series"]} <= listed, x
        estimated = {e["outcome"] for e in part["estimates"]}
        with_other_outcome += any(s["outcome"] not in estimated for s in part["series"])
    # the case the bug was about: a series following an outcome with no estimate in the part
    assert with_other_outcome >= 1


def test_every_exposure_outcome_export_round_trips(demo, tmp_path):
    store, doc, _ = demo
    events = {e["key"]: e["exposure"] for e in doc["events"]}
    pairs = sorted({(events[e["event"]], e["outcome"]) for e in doc["estimates"]})
    assert len(pairs) >= 5
    for i, (x, o) in enumerate(pairs):
        part = _round_trip(store, tmp_path, f"pair{i}", exposure=x, outcome=o)
        assert {s["outcome"] for s in part["series"]} <= {o}, (x, o)
        assert {e["outcome"] for e in part["estimates"]} == {o}, (x, o)


def test_series_naming_an_outcome_the_archive_lacks_is_refused(demo, tmp_path):
    _, doc, d = demo
    broken = json.loads(json.dumps(doc))
    # row 2 of the series section names an outcome that nothing else in the archive holds
    broken["series"][1]["outcome"] = "invented outcome nobody listed"
    path = tmp_path / "broken.json"
    path.write_text(json.dumps(broken), encoding="utf-8")
    fresh = _fresh(tmp_path / "fresh.db")
    try:
        before = table_dump(fresh)
        with pytest.raises(InputFileError) as exc:
            import_into(fresh, path)
        assert table_dump(fresh) == before  # nothing written
    finally:
        fresh.dispose()
    [problem] = exc.value.problems
    assert problem.file == "broken.json: series"
    assert (problem.row, problem.column) == (2, "outcome")
    assert "'invented outcome nobody listed'" in problem.message
    assert "vocabularies.outcomes" in problem.message  # what to do


def test_series_outcome_listed_only_in_vocabularies_is_accepted(demo, tmp_path):
    """The same series, with its outcome added to vocabularies.outcomes: imported whole."""
    _, doc, _ = demo
    fixed = json.loads(json.dumps(doc))
    fixed["series"][1]["outcome"] = "invented outcome nobody listed"
    fixed["vocabularies"]["outcomes"].append(
        {"name": "invented outcome nobody listed", "outcome_group": None}
    )
    path = tmp_path / "fixed.json"
    path.write_text(json.dumps(fixed), encoding="utf-8")
    fresh = _fresh(tmp_path / "fixed.db")
    try:
        report = import_into(fresh, path)
        assert any(n.startswith(f"series: {len(doc['series'])} added") for n in report.notes)
    finally:
        fresh.dispose()


def test_store_refuses_a_series_of_an_unknown_outcome_before_writing(demo, tmp_path):
    """The store's own guard (for a caller that skipped the readers): a clear error, no
    lookup error, and the transaction leaves the base as it was."""
    import pandas as pd

    from exposhift.errors import ExposhiftError
    from exposhift.store.series_records import SERIES_COLS, write_series
    from exposhift.store.writer import Writer

    store, doc, _ = demo
    rec = {c: doc["series"][0].get(c) for c in SERIES_COLS}
    rec.update(key="orphan-series", outcome="invented outcome nobody listed")
    before = table_dump(store)
    with pytest.raises(ExposhiftError, match="outcome 'invented outcome nobody listed'"):
        with store.write() as conn:
            write_series(Writer(conn, "tester"), pd.DataFrame([rec]), pd.DataFrame())
    assert table_dump(store) == before
