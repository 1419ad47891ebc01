"""Inputs that crashed the importer or exhausted memory are refused with one clear problem.

Each test reproduces a defect: a 1,000,000-column header (ran to 8 GB), a 10 MB cell (stored as
is), NUL bytes (stored, then the XLSX export refused), a deeply nested archive (RecursionError),
a list where the archive holds a table of vocabularies (AttributeError), a formula cell
(reported as "required value missing"). The figures (time, memory) are in
benchmarks/bench_limits.py; here only the refusal is checked.
"""

from __future__ import annotations

import json

import pytest
from io_helpers import row, table_dump, write_sheet
from openpyxl import Workbook

from exposhift.errors import ConfigError, InputFileError
from exposhift.io.limits import current_limits, header_columns, json_depth
from exposhift.services.exporting import export_store
from exposhift.services.importing import import_into


def _problems(store, path) -> list:
    before = table_dump(store)
    with pytest.raises(InputFileError) as info:
        import_into(store, path)
    assert table_dump(store) == before  # nothing written
    return info.value.problems


def test_million_column_header_is_refused_before_parsing(tmp_path, sqlite_store):
    path = tmp_path / "wide.csv"
    path.write_bytes(b",".join(b"c%d" % i for i in range(1_000_000)) + b"\n1\n")
    (p,) = _problems(sqlite_store, path)
    assert (p.row, p.column) == (1, None)
    assert "1,000,000 columns, over the limit of 500" in p.message


def test_long_cell_is_refused_with_row_and_column(tmp_path, sqlite_store):
    path = write_sheet(
        tmp_path / "long.csv",
        [row(), row(study_id="S2", event_id="E2", comparison="x" * 10_000_001)],
    )
    (p,) = _problems(sqlite_store, path)
    assert (p.row, p.column) == (3, "comparison")
    assert "10,000,001 characters, over the limit of 100,000" in p.message


def test_limits_are_configurable(tmp_path, sqlite_store, monkeypatch):
    path = write_sheet(tmp_path / "s.csv", [row(comparison="twelve chars")])
    monkeypatch.setenv("EXPOSHIFT_MAX_CELL_CHARS", "5")
    assert "over the limit of 5;" in _problems(sqlite_store, path)[0].message
    monkeypatch.setenv("EXPOSHIFT_MAX_CELL_CHARS", "")
    monkeypatch.setenv("EXPOSHIFT_MAX_COLUMNS", "3")
    assert "over the limit of 3;" in _problems(sqlite_store, path)[0].message
    monkeypatch.setenv("EXPOSHIFT_MAX_COLUMNS", "500")
    monkeypatch.setenv("EXPOSHIFT_MAX_CELLS", "10")
    assert "cells, over the limit of 10;" in _problems(sqlite_store, path)[0].message
    monkeypatch.delenv("EXPOSHIFT_MAX_CELLS")
    monkeypatch.setenv("EXPOSHIFT_MAX_FILE_MB", "1")
    big = write_sheet(tmp_path / "big.csv", [row(comparison="y" * 50_000) for _ in range(30)])
    assert "over the limit of 1 MB" in _problems(sqlite_store, big)[0].message
    monkeypatch.setenv("EXPOSHIFT_MAX_FILE_MB", "lots")
    with pytest.raises(ConfigError, match="EXPOSHIFT_MAX_FILE_MB='lots' is not a positive"):
        current_limits()


@pytest.mark.parametrize("char", ["\x00", "\x1b", "\x7f"])
def test_control_characters_are_refused_at_import(tmp_path, sqlite_store, char):
    path = write_sheet(
        tmp_path / "c.csv",
        [row(), row(study_id="S2", event_id="E2", population=f"adults{char}only")],
    )
    (p,) = _problems(sqlite_store, path)
    assert (p.row, p.column) == (3, "population")
    assert f"control character U+{ord(char):04X} at position 7" in p.message


def test_tab_and_newline_in_text_still_import_and_export_to_xlsx(tmp_path, sqlite_store):
    import_into(
        sqlite_store,
        write_sheet(tmp_path / "ok.csv", [row(population="adults\tover 65\nboth sexes")]),
    )
    export_store(sqlite_store, tmp_path / "out.xlsx")


def _archive(tmp_path, sqlite_store) -> dict:
    import_into(sqlite_store, write_sheet(tmp_path / "s.csv", [row()]))
    export_store(sqlite_store, tmp_path / "a.json")
    return json.loads((tmp_path / "a.json").read_text(encoding="utf-8"))


def test_deeply_nested_archive_is_refused(tmp_path, sqlite_store):
    path = tmp_path / "deep.json"
    path.write_text(
        '{"format": "exposhift-evidence-base", "format_version": 1, "events": '
        + "[" * 100_000
        + "]" * 100_000
        + "}",
        encoding="utf-8",
    )
    (p,) = _problems(sqlite_store, path)
    assert "nested 100,001 levels deep, over the limit of 32" in p.message


def test_archive_sections_of_the_wrong_type(tmp_path, sqlite_store):
    doc = _archive(tmp_path, sqlite_store)
    doc["vocabularies"] = [{"name": "agent-x"}]
    doc["studies"] = {"S1": {}}
    path = tmp_path / "wrong.json"
    path.write_text(json.dumps(doc), encoding="utf-8")
    got = {(p.file, p.column): p.message for p in _problems(sqlite_store, path)}
    assert got[("wrong.json", "vocabularies")].startswith(
        "'vocabularies' must be an object ({...}), not a list"
    )
    assert got[("wrong.json: studies", "studies")] == "'studies' must be a list of records"
    doc = _archive(tmp_path, sqlite_store)
    doc["vocabularies"]["designs"] = "all of them"
    path.write_text(json.dumps(doc), encoding="utf-8")
    (p,) = _problems(sqlite_store, path)
    assert p.column == "vocabularies.designs" and "not text" in p.message


@pytest.mark.parametrize("bad", ["a\x00b", "a\ud800b"])
def test_archive_text_with_nul_or_lone_surrogate_is_refused(tmp_path, sqlite_store, bad):
    doc = _archive(tmp_path, sqlite_store)
    doc["studies"][0]["population"] = bad
    path = tmp_path / "nul.json"
    path.write_text(json.dumps(doc), encoding="utf-8")  # JSON escapes: \u0000, \ud800
    (p,) = _problems(sqlite_store, path)
    assert (p.file, p.row, p.column) == ("nul.json: studies", 1, "population")
    assert f"U+{ord(bad[1]):04X}" in p.message


def test_formula_cell_is_reported_as_a_formula(tmp_path, sqlite_store):
    wb = Workbook()
    ws = wb.active
    cols = list(row())
    ws.append(cols)
    values = list(row().values())
    values[cols.index("ci_high")] = "=0.8*1.1"
    ws.append(values)
    wb.save(tmp_path / "f.xlsx")
    (p,) = _problems(sqlite_store, tmp_path / "f.xlsx")
    assert (p.row, p.column) == (2, "ci_high")
    assert p.message.startswith("the cell holds a formula; paste its value")


def test_wide_workbook_is_refused(tmp_path, sqlite_store):
    wb = Workbook()
    wb.active.append([f"c{i}" for i in range(600)])
    wb.save(tmp_path / "wide.xlsx")
    (p,) = _problems(sqlite_store, tmp_path / "wide.xlsx")
    assert "600 cells, over the limit of 500 columns" in p.message


def test_header_and_depth_counters():
    # reference values counted by hand
    assert header_columns(b'a,"b,c",d') == 3  # the comma inside quotes does not count
    assert header_columns(b"a;b;c\td") == 3  # the most frequent separator counts
    assert json_depth(b'{"a": [1, {"b": "[[[["}]}') == 3
    assert json_depth(b"[]" * 10) == 1
