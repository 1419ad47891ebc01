"""``exposhift import`` prints the import warnings (values written as entered but probably on
the wrong scale): on standard error as ``warning: FILE, row N, column 'C': ...`` lines, and in
the ``--json`` object as ``warnings`` (file, row, column, message), dry run or not.

Outside reference for the rows that warn: an SE of 2.0 for an RR is far above any SE of
log(RR) a study reports (Cochrane Handbook ch. 6: SEs of ratio measures are on the log scale);
the warning threshold itself is common practice (docs/extraction-sheet.md).
"""

from __future__ import annotations

import json

import pytest
from io_helpers import row, write_sheet
from typer.testing import CliRunner

from exposhift.cli.main import app

runner = CliRunner()


@pytest.fixture
def db(tmp_path) -> str:
    path = str(tmp_path / "e.db")
    assert runner.invoke(app, ["--db", path, "init"]).exit_code == 0
    return path


@pytest.fixture
def warned(tmp_path):
    # row 3: the SE of the RR itself, not of log(RR)
    return write_sheet(
        tmp_path / "w.csv", [row(), row(outcome="o2", ci_low="", ci_high="", se="2.0")]
    )


@pytest.mark.parametrize("extra", [[], ["--dry-run"]])
def test_text_report_prints_each_warning_with_file_row_and_column(db, warned, extra):
    out = runner.invoke(app, ["--db", db, "import", str(warned), *extra])
    assert out.exit_code == 0, out.output
    lines = [x for x in out.stderr.splitlines() if x.startswith("warning: ")]
    assert len(lines) == 1, out.stderr
    assert lines[0].startswith("warning: w.csv, row 3, column 'se': ")
    assert "log(RR)" in lines[0]
    assert "warning" not in out.stdout  # the report itself is unchanged


def test_json_report_carries_the_warnings(db, warned):
    out = runner.invoke(app, ["--db", db, "import", str(warned), "--json"])
    assert out.exit_code == 0, out.output
    doc = json.loads(out.stdout)
    [w] = doc["warnings"]
    assert (w["file"], w["row"], w["column"]) == ("w.csv", 3, "se")
    assert "log(RR)" in w["message"]


def test_quiet_still_warns_and_a_plain_file_warns_nothing(db, warned, tmp_path):
    quiet = runner.invoke(app, ["--db", db, "import", str(warned), "--quiet"])
    assert quiet.exit_code == 0 and quiet.stdout == ""
    assert quiet.stderr.count("warning: ") == 1
    plain = write_sheet(tmp_path / "p.csv", [row()])
    out = runner.invoke(app, ["--db", db, "import", str(plain), "--json"])
    assert out.exit_code == 0 and json.loads(out.stdout)["warnings"] == []
    assert "warning" not in out.stderr
