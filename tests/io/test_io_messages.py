"""The everyday file mistakes, and what the reader of a sheet tells about them.

Signatures checked against their published definitions (named in exposhift.io.signature): ZIP
local file header ``PK\\x03\\x04`` (APPNOTE 4.3.7), OLE2 compound file header (MS-CFB §2.2),
``%PDF-`` (ISO 32000-1 §7.5.2), UTF-16 byte-order marks (Unicode Standard §23.8). The
workbooks are written with openpyxl (a general-purpose library), the CSV files with Python's
csv module.
"""

from __future__ import annotations

import csv
import zipfile

import openpyxl
import pytest
from io_helpers import BASE, row, write_sheet

from exposhift.appraisal.checks import parse_checks
from exposhift.errors import InputFileError
from exposhift.io.columns import COLUMN_NAMES
from exposhift.io.sheet import read_sheet
from exposhift.services.importing import read_input


def problems_of(path, **kw) -> list:
    with pytest.raises(InputFileError) as info:
        read_input(path, **kw)
    return info.value.problems


def _workbook(path, sheets: dict[str, list[list]]) -> None:
    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    for name, rows in sheets.items():
        ws = wb.create_sheet(name)
        for r in rows:
            ws.append(r)
    wb.save(path)


def _sheet_rows(rows: list[dict]) -> list[list]:
    cols = [c for c in COLUMN_NAMES if c in BASE]
    return [cols, *[[r.get(c, "") for c in cols] for r in rows]]


# ------------------------------------------------------------------------------ signatures
def test_workbook_saved_as_csv_is_named_for_what_it_is(tmp_path):
    _workbook(tmp_path / "book.xlsx", {"estimates": _sheet_rows([row()])})
    fake = tmp_path / "extraction.csv"
    fake.write_bytes((tmp_path / "book.xlsx").read_bytes())
    (p,) = problems_of(fake)
    assert "Excel workbook (.xlsx)" in p.message and "rename it to .xlsx" in p.message
    assert "--encoding" not in p.message


@pytest.mark.parametrize(
    ("head", "what"),
    [
        (b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\0" * 504, "old-format Excel workbook (.xls)"),
        (b"%PDF-1.7\n%\xe2\xe3\xcf\xd3\n", "a PDF document"),
    ],
)
def test_xls_and_pdf_named_csv_are_recognised(tmp_path, head, what):
    path = tmp_path / "extraction.csv"
    path.write_bytes(head)
    (p,) = problems_of(path)
    assert what in p.message and "--encoding" not in p.message


def test_ods_named_csv_is_recognised(tmp_path):
    path = tmp_path / "extraction.csv"
    with zipfile.ZipFile(path, "w") as zf:  # an ODF package: 'mimetype' first (ODF 1.2 §3.3)
        zf.writestr("mimetype", "application/vnd.oasis.opendocument.spreadsheet")
        zf.writestr("content.xml", "<office:document-content/>")
    (p,) = problems_of(path)
    assert "OpenDocument spreadsheet (.ods)" in p.message


def test_csv_text_named_xlsx_is_recognised(sheet, tmp_path):
    path = tmp_path / "extraction.xlsx"
    path.write_bytes(sheet([row()]).read_bytes())
    (p,) = problems_of(path)
    assert "not an .xlsx workbook" in p.message and "rename it to .csv" in p.message


def test_utf16_file_with_bom_is_read_and_said(tmp_path):
    path = write_sheet(tmp_path / "u16.csv", [row(citation="Ünvented, Ä. 2005")], encoding="utf-16")
    assert path.read_bytes()[:2] in (b"\xff\xfe", b"\xfe\xff")
    kind, frames = read_input(path)
    assert frames.studies["citation"].tolist() == ["Ünvented, Ä. 2005"]
    assert any("UTF-16" in n for n in frames.notes)


# ------------------------------------------------------------------------------- delimiter
@pytest.mark.parametrize(("sep", "name"), [(";", "semicolon"), ("\t", "tab")])
def test_delimiter_is_detected_and_named(tmp_path, sep, name):
    path = tmp_path / "export.csv"
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, delimiter=sep)
        for r in _sheet_rows([row(), row(study_id="S2", citation="Made, Up; Other 2006")]):
            w.writerow(r)
    kind, frames = read_input(path)
    assert sorted(frames.studies["key"]) == ["S1", "S2"]
    assert any(name in n and "--delimiter" in n for n in frames.notes)


def test_delimiter_option_chooses_and_unknown_is_refused(tmp_path):
    path = tmp_path / "bar.csv"
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, delimiter="|")
        for r in _sheet_rows([row()]):
            w.writerow(r)
    kind, frames = read_input(path, delimiter="|")
    assert frames.studies["key"].tolist() == ["S1"]
    assert any("delimiter given: bar" in n for n in frames.notes)
    (p,) = problems_of(path, delimiter="x")
    assert "unknown delimiter 'x'" in p.message


def test_comma_file_gets_no_delimiter_note(sheet):
    kind, frames = read_input(sheet([row()]))
    assert not any("delimiter" in n or "separated" in n for n in frames.notes)


# ---------------------------------------------------------------------------- worksheets
def test_workbook_with_instructions_first_reads_the_sheet_and_names_it(tmp_path):
    path = tmp_path / "book.xlsx"
    _workbook(
        path,
        {
            "Instructions": [["Fill in the Data sheet"], ["one row per estimate"]],
            "Data": _sheet_rows([row()]),
            "Lists": [["designs"], ["its"]],
        },
    )
    kind, frames = read_input(path)
    assert frames.studies["key"].tolist() == ["S1"]
    (note,) = [n for n in frames.notes if "worksheet" in n]
    assert "'Data'" in note and "'Instructions'" in note and "'Lists'" in note
    assert "--sheet NAME" in note


def test_sheet_option_picks_a_worksheet_and_names_the_others_when_missing(tmp_path):
    path = tmp_path / "book.xlsx"
    _workbook(
        path, {"Old": _sheet_rows([row(study_id="OLD")]), "New": _sheet_rows([row(study_id="NEW")])}
    )
    assert read_input(path, sheet="new")[1].studies["key"].tolist() == ["NEW"]
    (p,) = problems_of(path, sheet="Newest")
    assert "no worksheet 'Newest'" in p.message and "Old, New" in p.message


# ------------------------------------------------------------------------- no data rows
def test_header_only_file_has_no_data_rows(sheet, tmp_path):
    path = sheet([], columns=list(BASE))
    (p,) = problems_of(path)
    assert "no data rows" in p.message
    with pytest.raises(InputFileError, match="no data rows"):
        read_sheet(path)


# --------------------------------------------------------------------- follow-on errors
def test_reused_study_id_is_one_problem_listing_rows_and_fields(sheet):
    other = row(
        event_id="E2",
        outcome="asthma",
        citation="Other, B. 2011, Demo J",
        year="2011",
        design="did",
        pre_points="8",
        post_points="6",
        checks="placebo-date",
    )
    problems = problems_of(sheet([row(), other, dict(other, outcome="cough")]))
    assert len(problems) == 1  # was one per differing field and row (10 here)
    msg = problems[0].message
    assert problems[0].row == 3 and "rows 3, 4" in msg and "first row (2)" in msg
    for field in ("citation", "year", "design", "pre_points", "post_points", "checks"):
        assert field in msg.splitlines()[0]
    assert "give it its own study_id" in msg


def test_missing_citation_is_one_problem(sheet):
    problems = problems_of(sheet([row(), row(event_id="E2", outcome="asthma", citation="")]))
    assert [(p.row, p.column) for p in problems] == [(3, "citation")]
    assert "required value missing" in problems[0].message


def test_not_an_extraction_sheet_is_one_problem(sheet):
    problems = problems_of(sheet([{"name": "x", "value": "1"}]))
    assert len([p for p in problems if "required" in p.message]) == 1
    assert "required columns are missing" in problems[0].message


# ------------------------------------------------------------- no internal module names
def test_messages_name_accepted_values_not_modules(sheet):
    problems = problems_of(sheet([row()], columns=[c for c in BASE if c != "design"]))
    msg = " ".join(p.message for p in problems)
    assert "exposhift." not in msg and "synthetic-control" in msg
    note = parse_checks("pre-trends;made-up-check").note
    assert "made-up-check" in note and "exposhift." not in note and "placebo-date" in note
