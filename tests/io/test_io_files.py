"""File handling: encodings and byte-order marks, Excel workbooks, formula-neutralising export,
deterministic archives.

Outside references: the spreadsheet formula characters (=, +, -, @, tab, carriage return) are the
ones listed by the OWASP "CSV Injection" guidance; exported files are read back with Python's
``csv`` module and openpyxl; encodings are produced with Python's codecs.
"""

from __future__ import annotations

import csv
import datetime as dt

import pandas as pd
import pytest
from io_helpers import row, two_rows, write_sheet

from exposhift.errors import InputFileError
from exposhift.io.exporter import neutralise
from exposhift.services.exporting import export_store
from exposhift.services.importing import import_into, read_input


def test_utf8_with_and_without_bom(sheet, tmp_path):
    rows = [row(citation="Łukasiewicz, Ø. et al. 2005, Démo J")]
    plain = sheet(rows, name="plain.csv")
    bom = tmp_path / "bom.csv"
    bom.write_bytes(b"\xef\xbb\xbf" + plain.read_bytes())
    for path in (plain, bom):
        _, frames = read_input(path)
        assert frames.studies["citation"].tolist() == ["Łukasiewicz, Ø. et al. 2005, Démo J"]
        assert frames.studies["key"].tolist() == ["S1"]  # the BOM is not part of 'study_id'
    _, frames = read_input(bom, encoding="utf-8")
    assert frames.studies["key"].tolist() == ["S1"]


def test_other_encodings_name_the_option(sheet):
    path = sheet(two_rows(citation="Müller, B. 2005, Démo J"), name="latin.csv", encoding="latin-1")
    with pytest.raises(InputFileError) as info:
        read_input(path)
    (p,) = info.value.problems
    assert p.file == "latin.csv" and p.row == 3  # the first row with a non-UTF-8 byte
    assert "--encoding" in p.message and "latin-1" in p.message
    _, frames = read_input(path, encoding="latin-1")
    assert "Müller, B. 2005, Démo J" in frames.studies["citation"].tolist()
    _, frames = read_input(
        sheet(two_rows(citation="Müller"), name="cp.csv", encoding="cp1252"), encoding="cp1252"
    )
    assert "Müller" in frames.studies["citation"].tolist()


def test_unknown_encoding_name(sheet):
    with pytest.raises(InputFileError, match="unknown encoding 'klingon'"):
        read_input(sheet([row()]), encoding="klingon")


def test_utf16_with_the_option(sheet):
    path = sheet([row(citation="Ōtsuka 2005")], name="u16.csv", encoding="utf-16")
    _, frames = read_input(path)  # the byte-order mark says UTF-16 (Unicode Standard §23.8)
    assert frames.studies["citation"].tolist() == ["Ōtsuka 2005"]
    _, frames = read_input(path, encoding="utf-16")
    assert frames.studies["citation"].tolist() == ["Ōtsuka 2005"]


def test_empty_and_unsupported_files(tmp_path):
    empty = tmp_path / "empty.csv"
    empty.write_text("", encoding="utf-8")
    with pytest.raises(InputFileError, match="the file is empty"):
        read_input(empty)
    other = tmp_path / "sheet.ods"
    other.write_text("x", encoding="utf-8")
    with pytest.raises(InputFileError, match="use .csv, .xlsx"):
        read_input(other)
    with pytest.raises(InputFileError, match="no such file"):
        read_input(tmp_path / "missing.csv")


def _workbook(path, header, rows):
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.append(header)
    for r in rows:
        ws.append(r)
    wb.save(path)
    return path


def test_excel_import_with_typed_cells(tmp_path, sqlite_store):
    r = row()
    header = list(r)
    values = dict(
        r,
        year=2005,
        pre_points=24,
        post_points=24,
        change_size=4.5,
        estimate=0.8,
        ci_low=0.7,
        ci_high=0.9,
        demo=True,
        primary=True,
        change_date="2001-05",
    )
    second = dict(
        values,
        study_id="S2",
        event_id="E2",
        outcome="asthma",
        change_date=dt.datetime(2003, 7, 1),
        year=2006.0,
    )
    path = _workbook(
        tmp_path / "sheet.xlsx",
        header,
        [[values[h] for h in header], [second[h] for h in header], [None] * 3],
    )
    report = import_into(sqlite_store, path)
    assert report.counts["estimates"].added == 2
    _, frames = read_input(path)
    ev = frames.events.set_index("key")
    assert ev.loc["E2", "change_date"] == "2003-07-01" and ev.loc["E2", "date_precision"] == "day"
    assert frames.studies.set_index("key").loc["S2", "year"] == 2006
    assert frames.estimates["point"].tolist() == [0.8, 0.8]


def test_excel_problems_use_sheet_rows(tmp_path):
    r = row()
    header = list(r)
    bad = dict(r, study_id="S2", event_id="E2", outcome="asthma", country="XXX")
    path = _workbook(
        tmp_path / "bad.xlsx",
        header,
        [[r[h] for h in header], [None] * len(header), [bad[h] for h in header]],
    )
    with pytest.raises(InputFileError) as info:
        read_input(path)
    (p,) = info.value.problems
    assert (p.file, p.row, p.column) == ("bad.xlsx", 4, "country")


def test_not_a_workbook(tmp_path):
    path = tmp_path / "fake.xlsx"
    path.write_text("not a zip", encoding="utf-8")
    with pytest.raises(InputFileError, match="cannot read the file as an Excel workbook"):
        read_input(path)


# OWASP CSV Injection: cells beginning with = + - @ tab or carriage return are run as formulas
FORMULAS = ["=1+1", "+1+1", "-1+1", "@SUM(A1)", '=HYPERLINK("http://x")', "'=already quoted"]


def test_neutralise_rule():
    s = pd.Series([*FORMULAS, "-5", "+0.5", "1e3", "-", "safe", "a=b", ""], dtype="str")
    assert neutralise(s).tolist() == [
        "'=1+1",
        "'+1+1",
        "'-1+1",
        "'@SUM(A1)",
        '\'=HYPERLINK("http://x")',
        "''=already quoted",
        "-5",
        "+0.5",
        "1e3",
        "'-",
        "safe",
        "a=b",
        "",
    ]
    tab = pd.Series(["\tx", "\rx"], dtype="str")
    assert neutralise(tab).tolist() == ["'\tx", "'\rx"]


def test_csv_export_neutralises_formulas_and_keeps_numbers(tmp_path, sqlite_store):
    rows = [
        row(
            citation=FORMULAS[0],
            comparison="@cmd",
            area="-SUM(A1)",
            estimate="-0.25",
            measure="MD",
            ci_low="-0.5",
            ci_high="0.1",
            subgroup="-5",
        ),
        row(
            outcome="asthma",
            citation=FORMULAS[0],
            comparison="@cmd",
            area="-SUM(A1)",
            measure="MD",
            estimate="0.2",
            ci_low="-0.1",
            ci_high="0.5",
            subgroup="-5",
        ),
    ]
    import_into(sqlite_store, write_sheet(tmp_path / "in.csv", rows))
    out = tmp_path / "out.csv"
    export_store(sqlite_store, out)
    with open(out, encoding="utf-8", newline="") as fh:
        recs = list(csv.DictReader(fh))
    first = next(r for r in recs if r["outcome"] == "wheeze")
    assert first["citation"] == "'=1+1"
    assert first["comparison"] == "'@cmd"
    assert first["area"] == "'-SUM(A1)"
    assert first["subgroup"] == "-5"  # a number in a text column is no formula
    assert (first["estimate"], first["ci_low"], first["ci_high"]) == ("-0.25", "-0.5", "0.1")
    # importing the export gives back the original text
    _, frames = read_input(out)
    assert frames.studies["citation"].tolist() == ["=1+1"]
    assert frames.events["area"].tolist() == ["-SUM(A1)"]


def test_xlsx_export_types(tmp_path, sqlite_store):
    from openpyxl import load_workbook

    import_into(
        sqlite_store,
        write_sheet(
            tmp_path / "in.csv",
            [row(citation="=1+1", measure="MD", estimate="-0.25", ci_low="-0.5", ci_high="0.1")],
        ),
    )
    out = tmp_path / "out.xlsx"
    export_store(sqlite_store, out)
    ws = load_workbook(out).worksheets[0]
    header = [c.value for c in ws[1]]
    cells = {h: c for h, c in zip(header, ws[2], strict=True)}
    assert cells["citation"].value == "'=1+1" and cells["citation"].data_type == "s"
    assert cells["estimate"].value == -0.25 and cells["estimate"].data_type == "n"
    assert cells["year"].value == 2005 and cells["year"].data_type == "n"


def test_xlsx_export_refuses_control_characters(tmp_path, sqlite_store):
    """Import refuses them now; a value stored before that rule still cannot reach a workbook."""
    from exposhift.errors import ExposhiftError, InputFileError
    from exposhift.store import records
    from exposhift.store.writer import Writer

    with pytest.raises(
        InputFileError,
        match="row 2, column 'comparison': the cell holds the control character U\\+0001",
    ):
        import_into(sqlite_store, write_sheet(tmp_path / "bad.csv", [row(comparison="a\x01b")]))
    import_into(sqlite_store, write_sheet(tmp_path / "in.csv", [row()]))
    with sqlite_store.write() as conn:
        w = Writer(conn, "legacy")
        records.update(w, "study", "S1", 1, {"comparison": "a\x01b"})
        w.flush()
    with pytest.raises(ExposhiftError, match="row 2, column 'comparison' holds a control"):
        export_store(sqlite_store, tmp_path / "out.xlsx")
    assert not (tmp_path / "out.xlsx").exists()
    export_store(sqlite_store, tmp_path / "out.csv")  # CSV keeps it


def test_events_sheet_export_and_reimport(tmp_path, sqlite_store, sheet):
    events = [
        {
            "event_id": "E9",
            "exposure": "agent-y",
            "change_kind": "closure",
            "change_direction": "decrease",
            "country": "SWE",
            "change_date": "2011",
            "demo": "yes",
        }
    ]
    import_into(sqlite_store, sheet(events, name="events.csv"), events_only=True)
    import_into(sqlite_store, sheet([row()], name="sheet.csv"))
    out = tmp_path / "events_out.csv"
    export_store(sqlite_store, out, events_only=True)
    with open(out, encoding="utf-8", newline="") as fh:
        recs = list(csv.DictReader(fh))
    assert [r["event_id"] for r in recs] == ["E1", "E9"]
    report = import_into(sqlite_store, out, events_only=True)
    assert (report.counts["events"].added, report.counts["events"].unchanged) == (0, 2)


def test_archive_is_deterministic_and_has_no_ids(tmp_path, sqlite_store, sheet):
    import_into(sqlite_store, sheet([row(outcome="b"), row(outcome="a")]))
    a, b = tmp_path / "a.json", tmp_path / "b.json"
    export_store(sqlite_store, a)
    export_store(sqlite_store, b)
    assert a.read_bytes() == b.read_bytes()
    text = a.read_text(encoding="utf-8")
    for volatile in ('"id"', '"version"', '"created_at"', '"updated_at"', '"study_id"'):
        assert volatile not in text
    keys = [
        line.split('"key": "')[1].split('"')[0]
        for line in text.splitlines()
        if line.strip().startswith('{"key": "S1|')
    ]
    assert keys == sorted(keys) == ["S1|E1|a|RR|change||", "S1|E1|b|RR|change||"]
