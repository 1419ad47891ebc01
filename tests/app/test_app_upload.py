"""The "Upload a sheet" page with Streamlit's AppTest, on a private copy of the demo base.

A preview writes nothing and counts what the file holds; confirming imports it as the person
named in the sidebar; a file with errors lists every problem with its row and column and offers
no import; a file that is not a sheet, or larger than the stated limit, gets one clear message;
a reader gets no upload control. Outside routes: the expected counts come from reading the
uploaded CSV with the standard library's ``csv`` module, the stored rows from ``sqlite3``.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

import pytest
from writing_helpers import button, copy_db, count, frame_with, open_page, sql, texts

EXAMPLE = Path(__file__).resolve().parents[2] / "docs" / "example-sheet.csv"
TABLES = ("study", "event", "estimate", "audit_entry")


@pytest.fixture
def db(demo_db, tmp_path, monkeypatch) -> str:
    path = copy_db(demo_db, tmp_path / "evidence.db")
    monkeypatch.setenv("EXPOSHIFT_DB", path)
    return path


def _counts(db: str) -> dict[str, int]:
    return {t: count(db, t) for t in TABLES}


def _upload(at, name: str, content: bytes):
    at.file_uploader(key="upload_file").upload(name, content, "text/csv")
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _problem_table(at):
    return frame_with(at, "problem")


def test_preview_then_confirm_imports_as_the_named_person(db):
    rows = list(csv.DictReader(io.StringIO(EXAMPLE.read_text(encoding="utf-8"))))
    before = _counts(db)
    at = _upload(open_page("upload", "carol"), EXAMPLE.name, EXAMPLE.read_bytes())
    assert "Preview: nothing written yet" in [s.value for s in at.subheader]
    counts = next(d.value for d in at.dataframe if "added" in d.value.columns)
    by = counts.set_index("records")
    assert by.loc["studies", "added"] == len({r["study_id"] for r in rows})
    assert by.loc["estimates", "added"] == len(rows)
    assert _counts(db) == before  # the preview wrote nothing
    button(at, "Import these records").click()
    at.run()
    assert not at.exception
    assert any("Imported example-sheet.csv" in s.value for s in at.success)
    after = _counts(db)
    assert after["estimate"] == before["estimate"] + len(rows)
    assert sql(db, "select distinct user from audit_entry where id > ?", before["audit_entry"]) == [
        ("carol",)
    ]


def test_a_sheet_with_errors_lists_every_problem_and_writes_nothing(db):
    text = EXAMPLE.read_text(encoding="utf-8").splitlines()
    bad = list(csv.reader(text))
    header = bad[0]
    bad[1][header.index("year")] = "20x4"  # row 2
    bad[2][header.index("design")] = "itz"  # row 3
    bad[3][header.index("measure")] = "XX"  # row 4
    bad[4][header.index("estimate")] = ""  # row 5: a required cell left blank
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerows(bad)
    before = _counts(db)
    at = _upload(open_page("upload", "carol"), "bad-sheet.csv", buf.getvalue().encode())
    problems = _problem_table(at)
    found = set(zip(problems["where"], problems["sheet column"], strict=True))
    assert {
        ("row 2", "year"),
        ("row 3", "design"),
        ("row 4", "measure"),
        ("row 5", "estimate"),
    } <= found
    assert "nothing was written" in texts(at)
    assert not [b for b in at.button if b.label == "Import these records"]
    assert _counts(db) == before


@pytest.mark.parametrize(
    ("name", "content", "words"),
    [
        ("notes.csv", b"%PDF-1.4\n%binary", "PDF document"),
        ("sheet.xlsx", b"study_id,citation\nA,B\n", "not an .xlsx workbook"),
        ("empty.csv", b"study_id,citation,year\n", "no data rows"),
    ],
)
def test_a_file_that_is_not_a_sheet_gets_one_clear_message(db, name, content, words):
    before = _counts(db)
    at = _upload(open_page("upload", "carol"), name, content)
    problems = _problem_table(at)
    assert len(problems) == 1 and words in problems["problem"].iloc[0]
    assert problems["file"].iloc[0] == name
    assert _counts(db) == before


def test_an_upload_above_the_stated_limit_is_refused(db, monkeypatch):
    monkeypatch.setenv("EXPOSHIFT_MAX_FILE_MB", "1")
    at = open_page("upload", "carol")
    assert "at most 1 MB" in at.file_uploader(key="upload_file").label
    big = EXAMPLE.read_bytes() + b"\n" * (1 << 20)
    before = _counts(db)
    at = _upload(at, "big.csv", big)
    problems = _problem_table(at)
    assert "limited to 1 MB" in problems["problem"].iloc[0]
    assert _counts(db) == before


def test_an_unchanged_file_offers_nothing_to_import(db, demo_store):
    from exposhift.services.downloads import sheet_download

    made = sheet_download(demo_store, "csv", "vellium")
    at = _upload(open_page("upload", "carol"), made.name, made.data)
    assert "would change nothing" in texts(at)
    assert not [b for b in at.button if b.label == "Import these records"]


def test_a_changed_record_is_listed_with_its_fields(db, demo_store):
    from exposhift.services.downloads import sheet_download

    made = sheet_download(demo_store, "csv", "vellium")
    rows = list(csv.DictReader(io.StringIO(made.data.decode())))
    first = rows[0]["study_id"]
    rows = [r for r in rows if r["study_id"] == first]
    for r in rows:  # study fields repeat on every row of the study
        r["population"] = "an invented correction"
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=list(rows[0]), lineterminator="\n")
    w.writeheader()
    w.writerows(rows)
    at = _upload(open_page("upload", "carol"), "correction.csv", buf.getvalue().encode())
    listed = next(d.value for d in at.dataframe if "status" in d.value.columns)
    changed = listed[listed["status"] == "changed"]
    assert changed["record"].tolist() == [first]
    assert "an invented correction" in changed["fields"].iloc[0]
    assert changed["fields"].iloc[0].startswith("Population: ")  # the field by its label


def test_a_reader_gets_no_upload_control(db, monkeypatch):
    at = open_page("upload", "rita", "reader")
    assert not at.get("file_uploader")
    assert "needs the editor role" in texts(at)
