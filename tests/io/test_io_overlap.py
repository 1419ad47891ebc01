"""``same_population_as``: stored normalised, checked against the file and the evidence base,
carried into the analysis frame, the archive and the sheet, on SQLite and PostgreSQL.

Outside references: the sheets are written with Python's ``csv`` module and the exported sheet
is read back with it; the archive is parsed with Python's ``json`` module.
"""

from __future__ import annotations

import csv
import json

import pytest
from io_helpers import row, table_dump

from exposhift.errors import InputFileError
from exposhift.services.exporting import export_store
from exposhift.services.importing import import_into
from exposhift.services.setup import init_database, open_current
from exposhift.store import records
from exposhift.store.queries import analysis_frame


def _nested() -> list[dict]:
    """S1 (national register) and S2 (a region nested in it) of event E1; S3 of event E2."""
    return [
        row(population="all births, national register"),
        row(study_id="S2", population="births, Region X", same_population_as=" S1 ;S1;"),
        row(study_id="S3", event_id="E2", outcome="asthma"),
    ]


def _problems(exc: pytest.ExceptionInfo) -> list[tuple]:
    return [(p.file, p.row, p.column, p.message) for p in exc.value.problems]


def test_declared_overlap_is_stored_normalised_and_reaches_the_analysis_frame(store, sheet):
    import_into(store, sheet(_nested()))
    with store.read() as conn:
        assert records.get(conn, "study", "S2")["same_population_as"] == "S1"
        assert records.get(conn, "study", "S1")["same_population_as"] is None
        frame = analysis_frame(conn).set_index("study_id")
    assert frame.loc["S2", "same_population_as"] == "S1"
    assert frame.loc["S1", "same_population_as"] is None  # blank is None, not "" or NaN


def test_several_ids_keep_their_order(store, sheet):
    rows = [row(), row(study_id="S2"), row(study_id="S3", same_population_as="S2; S1")]
    import_into(store, sheet(rows))
    with store.read() as conn:
        assert records.get(conn, "study", "S3")["same_population_as"] == "S2;S1"


def test_every_bad_id_is_reported_at_once_and_nothing_is_written(store, sheet):
    import_into(store, sheet([row(study_id="S0")]))
    before = table_dump(store)
    rows = [
        row(),  # row 2: S1, event E1
        row(study_id="S2", same_population_as="S2"),  # row 3: itself
        row(study_id="S3", same_population_as="S1;S9"),  # row 4: S9 unknown
        row(study_id="S4", event_id="E2", same_population_as="S1"),  # row 5: no shared event
        row(study_id="S5", same_population_as="S11", ci_low="x"),  # row 6: + another rule
    ]
    with pytest.raises(InputFileError) as exc:
        import_into(store, sheet(rows, name="bad.csv"))
    got = _problems(exc)
    col = "same_population_as"
    # in file order: by row, then in sheet column order; the ci_low problems of row 6 come with
    assert [(f, r, c) for f, r, c, _ in got] == [
        ("bad.csv", 3, col),
        ("bad.csv", 4, col),
        ("bad.csv", 5, col),
        ("bad.csv", 6, col),
        ("bad.csv", 6, "ci_low"),
        ("bad.csv", 6, "ci_low"),
    ]
    assert "'S2' names itself" in got[0][3]
    assert "no study 'S9' in this file or in the evidence base" in got[1][3]
    assert "shares no event" in got[2][3] and "'E1'" in got[2][3] and "'E2'" in got[2][3]
    assert "did you mean 'S1'?" in got[3][3]  # close match among the file's study ids
    assert table_dump(store) == before


def test_a_study_already_in_the_evidence_base_may_be_named(store, sheet):
    import_into(store, sheet([row(), row(study_id="S7", event_id="E7", outcome="asthma")]))
    import_into(store, sheet([row(study_id="S2", same_population_as="S1")], name="more.csv"))
    with store.read() as conn:
        assert records.get(conn, "study", "S2")["same_population_as"] == "S1"
    # a stored study of another event does not overlap
    with pytest.raises(InputFileError) as exc:
        import_into(store, sheet([row(study_id="S3", same_population_as="S7")], name="x.csv"))
    (problem,) = _problems(exc)
    assert problem[:3] == ("x.csv", 2, "same_population_as")
    assert "shares no event" in problem[3] and "'E7'" in problem[3]


def test_rows_of_one_study_must_agree(store, sheet):
    rows = [
        row(),
        row(study_id="S2", same_population_as="S1"),
        row(study_id="S2", outcome="asthma", same_population_as=""),
    ]
    with pytest.raises(InputFileError) as exc:
        import_into(store, sheet(rows))
    assert [(p[1], p[2]) for p in _problems(exc)] == [(4, "same_population_as")]


def test_sheet_without_the_column_leaves_it_as_it_is(store, sheet):
    import_into(store, sheet(_nested()))
    plain = [{k: v for k, v in r.items() if k != "same_population_as"} for r in _nested()]
    report = import_into(store, sheet(plain, name="plain.csv"))
    assert report.counts["studies"].updated == 0
    with store.read() as conn:
        assert records.get(conn, "study", "S2")["same_population_as"] == "S1"


def test_archive_and_sheet_round_trips_keep_the_field(store, sheet, tmp_path):
    import_into(store, sheet(_nested()))
    export_store(store, tmp_path / "a.json")
    export_store(store, tmp_path / "a.csv")
    doc = json.loads((tmp_path / "a.json").read_text(encoding="utf-8"))
    assert {s["key"]: s["same_population_as"] for s in doc["studies"]} == {
        "S1": None,
        "S2": "S1",
        "S3": None,
    }
    with open(tmp_path / "a.csv", encoding="utf-8", newline="") as fh:
        sheet_rows = list(csv.DictReader(fh))
    assert {r["study_id"]: r["same_population_as"] for r in sheet_rows} == {
        "S1": "",
        "S2": "S1",
        "S3": "",
    }
    for name in ("a.json", "a.csv"):
        url = f"sqlite:///{tmp_path / (name + '.db')}"
        init_database(url)
        fresh = open_current(url)
        try:
            import_into(fresh, tmp_path / name)
            export_store(fresh, tmp_path / f"again-{name}")
        finally:
            fresh.dispose()
        assert (tmp_path / f"again-{name}").read_bytes() == (tmp_path / name).read_bytes()


def test_archive_checks_the_field_like_the_sheet(store, sheet, tmp_path):
    import_into(store, sheet(_nested()))
    export_store(store, tmp_path / "a.json")
    doc = json.loads((tmp_path / "a.json").read_text(encoding="utf-8"))
    doc["studies"][0]["same_population_as"] = "S1;S3"  # S1 itself; S3 of another event
    (tmp_path / "bad.json").write_text(json.dumps(doc), encoding="utf-8")
    before = table_dump(store)
    with pytest.raises(InputFileError) as exc:
        import_into(store, tmp_path / "bad.json")
    got = _problems(exc)
    assert [(f, r, c) for f, r, c, _ in got] == [("bad.json: studies", 1, "same_population_as")] * 2
    assert "names itself" in got[0][3] and "shares no event" in got[1][3]
    assert table_dump(store) == before
