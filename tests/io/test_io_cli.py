"""The import, export, events and demo commands in process (typer's CliRunner): exact exit codes,
``error:`` as the first line of every failure, nothing written on errors.
"""

from __future__ import annotations

import json
import sqlite3

import pytest
from io_helpers import row, two_rows, write_sheet
from typer.testing import CliRunner

from exposhift.cli.main import app
from exposhift.io.synthetic import synthetic_sheet
from exposhift.method.parts import METHOD_PARTS

runner = CliRunner()


@pytest.fixture
def db(tmp_path) -> str:
    path = str(tmp_path / "e.db")
    assert runner.invoke(app, ["--db", path, "init"]).exit_code == 0
    return path


def info(db: str) -> dict:
    out = runner.invoke(app, ["--db", db, "info", "--json"])
    assert out.exit_code == 0, out.output
    return json.loads(out.stdout)


def test_import_then_reimport(db, tmp_path):
    path = write_sheet(tmp_path / "s.csv", two_rows())
    first = runner.invoke(app, ["--db", db, "import", str(path)])
    assert first.exit_code == 0, first.output
    assert first.stdout.startswith(f"imported {path} into sqlite:///{db} (2 rows)")
    assert "  estimates         2         0          0" in first.stdout
    second = runner.invoke(app, ["--db", db, "import", str(path)])
    assert second.exit_code == 0
    assert "nothing changed" in second.stdout
    assert info(db)["estimates"] == 2


def test_import_json_output(db, tmp_path):
    path = write_sheet(tmp_path / "s.csv", two_rows())
    out = runner.invoke(app, ["--db", db, "import", str(path), "--json"])
    assert out.exit_code == 0
    data = json.loads(out.stdout)
    assert data["counts"]["estimates"] == {"added": 2, "updated": 0, "unchanged": 0}
    assert data["dry_run"] is False and data["kind"] == "sheet"


def test_bad_file_reports_every_problem_and_writes_nothing(db, tmp_path):
    rows = two_rows(country="XXX") + [
        row(study_id="S3", event_id="E3", outcome="x", se="-1", ci_low="", ci_high="")
    ]
    path = write_sheet(tmp_path / "bad.csv", rows)
    out = runner.invoke(app, ["--db", db, "import", str(path)])
    assert out.exit_code == 2
    lines = out.stderr.splitlines()
    assert lines[0] == "error: 2 problems found; nothing was written:"
    assert lines[1].startswith("  bad.csv, row 3, column 'country': unknown ISO 3166-1")
    assert lines[2].startswith("  bad.csv, row 4, column 'se': standard error -1")
    assert "Traceback" not in out.output
    assert info(db)["estimates"] == 0 and info(db)["audit_entries"] == len(METHOD_PARTS)


def test_dry_run(db, tmp_path):
    path = write_sheet(tmp_path / "s.csv", two_rows())
    out = runner.invoke(app, ["--db", db, "import", str(path), "--dry-run"])
    assert out.exit_code == 0
    assert out.stdout.startswith("dry run: nothing was written.")
    assert "  studies           2         0          0" in out.stdout
    assert info(db)["studies"] == 0 and info(db)["audit_entries"] == len(METHOD_PARTS)


def test_encoding_option(db, tmp_path):
    path = write_sheet(tmp_path / "l.csv", [row(citation="Müller 2005")], encoding="latin-1")
    out = runner.invoke(app, ["--db", db, "import", str(path)])
    assert out.exit_code == 2
    assert out.stderr.startswith("error: 1 problem found; nothing was written:")
    assert "--encoding" in out.stderr
    ok = runner.invoke(app, ["--db", db, "import", str(path), "--encoding", "latin-1"])
    assert ok.exit_code == 0, ok.output


def test_extra_columns_option(db, tmp_path):
    path = write_sheet(tmp_path / "x.csv", [row(notes="free text")])
    assert runner.invoke(app, ["--db", db, "import", str(path)]).exit_code == 2
    ok = runner.invoke(app, ["--db", db, "import", str(path), "--ignore-extra-columns"])
    assert ok.exit_code == 0
    assert "note: ignored columns: notes" in ok.stdout


def test_import_needs_an_initialised_database(tmp_path):
    path = write_sheet(tmp_path / "s.csv", [row()])
    out = runner.invoke(app, ["--db", str(tmp_path / "none.db"), "import", str(path)])
    assert out.exit_code == 3
    assert out.stderr.startswith("error: no evidence base at")


def test_progress_bar_on_large_imports_only(db, tmp_path):
    big = tmp_path / "big.csv"
    synthetic_sheet(6000).to_csv(big, index=False)
    out = runner.invoke(app, ["--db", db, "import", str(big)])
    assert out.exit_code == 0
    assert "writing estimates" in out.stderr and "6000/6000" in out.stderr
    quiet = runner.invoke(app, ["--db", db, "import", str(big), "--quiet"])
    assert quiet.exit_code == 0 and quiet.stdout == "" and quiet.stderr == ""
    small = write_sheet(tmp_path / "s.csv", [row()])
    out = runner.invoke(app, ["--db", db, "import", str(small)])
    assert out.stderr == ""


def test_export_formats(db, tmp_path):
    runner.invoke(app, ["--db", db, "import", str(write_sheet(tmp_path / "s.csv", two_rows()))])
    for name in ("a.json", "a.csv", "a.xlsx"):
        out = runner.invoke(app, ["--db", db, "export", str(tmp_path / name)])
        assert out.exit_code == 0, out.output
        assert out.stdout.startswith(f"wrote {tmp_path / name} (")
        assert (tmp_path / name).stat().st_size > 0
    bad = runner.invoke(app, ["--db", db, "export", str(tmp_path / "a.txt")])
    assert bad.exit_code == 2
    assert bad.stderr.startswith("error: cannot export to 'a.txt'")
    fresh = str(tmp_path / "fresh.db")
    runner.invoke(app, ["--db", fresh, "init"])
    back = runner.invoke(app, ["--db", fresh, "import", str(tmp_path / "a.json")])
    assert back.exit_code == 0 and info(fresh)["estimates"] == 2


def test_events_import_command(db, tmp_path):
    path = write_sheet(
        tmp_path / "ev.csv",
        [
            {
                "event_id": "E9",
                "exposure": "agent-y",
                "change_kind": "closure",
                "change_direction": "decrease",
                "country": "SWE",
                "change_date": "2011-09",
                "demo": "yes",
            }
        ],
    )
    out = runner.invoke(app, ["--db", db, "events", "import", str(path)])
    assert out.exit_code == 0, out.output
    assert "  events            1         0          0" in out.stdout
    assert info(db)["events"] == 1 and info(db)["studies"] == 0
    bad = runner.invoke(app, ["--db", db, "events", "import", str(tmp_path / "a.json")])
    assert bad.exit_code == 2 and bad.stderr.startswith("error: ")


def test_demo_builds_a_fresh_file(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("EXPOSHIFT_DB", raising=False)
    out = runner.invoke(app, ["demo"])
    assert out.exit_code == 0, out.output
    assert out.stdout.startswith("demo evidence base demo/evidence-demo.db")
    assert "exposhift --db demo/evidence-demo.db info" in out.stdout
    assert not (tmp_path / "evidence").exists()  # the user's evidence base is untouched
    counts = info("demo/evidence-demo.db")
    assert counts["studies"] >= 40 and counts["estimates"] >= 60
    again = runner.invoke(app, ["demo"])  # replaces the demo file, no duplicates
    assert again.exit_code == 0
    assert info("demo/evidence-demo.db") == counts
    assert sorted(p.name for p in (tmp_path / "demo").iterdir()) == ["evidence-demo.db"]


def test_demo_refuses_other_files(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    mine = runner.invoke(app, ["demo", "--db", "evidence/evidence.db"])
    assert mine.exit_code == 2 and "is your evidence base" in mine.stderr
    junk = tmp_path / "notes.db"
    junk.write_text("my notes", encoding="utf-8")
    out = runner.invoke(app, ["demo", "--db", str(junk)])
    assert out.exit_code == 2 and "not an exposhift demo database" in out.stderr
    assert junk.read_text(encoding="utf-8") == "my notes"
    real = str(tmp_path / "real.db")
    runner.invoke(app, ["--db", real, "init"])
    runner.invoke(
        app, ["--db", real, "import", str(write_sheet(tmp_path / "s.csv", [row(demo="no")]))]
    )
    out = runner.invoke(app, ["demo", "--db", real])
    assert out.exit_code == 2 and "not demo records" in out.stderr
    con = sqlite3.connect(real)
    assert con.execute("SELECT count(*) FROM study").fetchone()[0] == 1
    con.close()
    missing = runner.invoke(app, ["demo", "--seed", str(tmp_path / "nowhere")])
    assert missing.exit_code == 2 and "looked for" in missing.stderr
