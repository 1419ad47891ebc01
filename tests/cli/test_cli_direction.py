"""``exposhift direction set/clear/list/import`` in process (typer's CliRunner), on SQLite and
PostgreSQL: exit codes, output, JSON, and the demo's pre-specified directions.

Outside reference: the demo's directions are read from seed_records/directions.csv with Python's
``csv`` module, independently of exposhift's reader.
"""

from __future__ import annotations

import csv
import json
import sys
from pathlib import Path

import pytest
from typer.testing import CliRunner

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "io"))
from io_helpers import row, write_sheet  # noqa: E402

from exposhift.cli.main import app  # noqa: E402
from exposhift.services.demo import seed_dir  # noqa: E402
from exposhift.services.importing import import_into  # noqa: E402

runner = CliRunner()


@pytest.fixture
def db(store, tmp_path) -> str:
    import_into(store, write_sheet(tmp_path / "s.csv", [row(), row(outcome="asthma")]))
    return store.url


def run(db: str, *args: str):
    return runner.invoke(app, ["--db", db, "--user", "alice", "direction", *args])


def test_set_list_clear(db):
    r = run(
        db,
        "set",
        "--exposure",
        "agent-x",
        "--outcome",
        "wheeze",
        "--expect",
        "raises",
        "--why",
        "invented test rationale",
        "--at",
        "2026-01-15",
    )
    assert r.exit_code == 0, r.output
    assert r.stdout.strip() == "added: agent-x x wheeze expected to raise (version 1)"
    r = run(db, "list", "--json")
    assert r.exit_code == 0
    assert json.loads(r.stdout) == [
        {
            "exposure": "agent-x",
            "outcome": "wheeze",
            "direction": "raises",
            "rationale": "invented test rationale",
            "decided_by": "alice",
            "decided_at": "2026-01-15T00:00:00Z",
            "version": 1,
        }
    ]
    table = run(db, "list").stdout
    assert "agent-x" in table and "raises" in table and "invented test rationale" in table
    r = run(
        db,
        "set",
        "--exposure",
        "agent-x",
        "--outcome",
        "wheeze",
        "--expect",
        "lowers",
        "--why",
        "second thoughts",
        "--if-version",
        "1",
        "--json",
    )
    assert r.exit_code == 0 and json.loads(r.stdout)["version"] == 2
    r = run(
        db,
        "set",
        "--exposure",
        "agent-x",
        "--outcome",
        "wheeze",
        "--expect",
        "raises",
        "--why",
        "stale",
        "--if-version",
        "1",
    )
    assert r.exit_code == 4 and "changed by someone else" in r.stderr
    r = run(db, "clear", "--exposure", "agent-x", "--outcome", "wheeze")
    assert r.exit_code == 0 and r.stdout.startswith("cleared: agent-x x wheeze (was version 2)")
    assert "no expected directions" in run(db, "list").stdout
    assert json.loads(run(db, "list", "--json").stdout) == []


@pytest.mark.parametrize(
    ("args", "code", "message"),
    [
        (
            ["--exposure", "agent-y", "--expect", "raises", "--why", "w"],
            5,
            "error: no exposure 'agent-y' in the evidence base; did you mean 'agent-x'?",
        ),
        (
            ["--exposure", "agent-x", "--expect", "higher", "--why", "w"],
            2,
            "error: expected direction 'higher' is not one of raises, lowers",
        ),
        (
            ["--exposure", "agent-x", "--expect", "raises", "--why", ""],
            2,
            "error: a pre-specified direction needs a rationale",
        ),
    ],
)
def test_set_errors(db, args, code, message):
    r = run(db, "set", "--outcome", "wheeze", *args)
    assert r.exit_code == code
    assert r.stderr.startswith(message)
    assert json.loads(run(db, "list", "--json").stdout) == []


def test_import_and_its_problems(db, tmp_path):
    good = tmp_path / "d.csv"
    good.write_text(
        "exposure,outcome,direction,rationale\nagent-x,wheeze,raises,why\n", encoding="utf-8"
    )
    r = run(db, "import", str(good), "--dry-run")
    assert r.exit_code == 0 and r.stdout.startswith("would add 1 expected directions")
    r = run(db, "import", str(good))
    assert r.exit_code == 0 and r.stdout.startswith("added 1 expected directions, updated 0")
    bad = tmp_path / "bad.csv"
    bad.write_text(
        "exposure,outcome,direction,rationale\nagent-x,asthma,raise,\n", encoding="utf-8"
    )
    r = run(db, "import", str(bad))
    assert r.exit_code == 2
    assert "bad.csv, row 2, column 'direction'" in r.stderr
    assert "bad.csv, row 2, column 'rationale'" in r.stderr
    assert len(json.loads(run(db, "list", "--json").stdout)) == 1


def test_demo_loads_the_seed_directions(tmp_path):
    with open(seed_dir() / "directions.csv", encoding="utf-8", newline="") as fh:
        seeded = list(csv.DictReader(fh))
    assert seeded and all("DEMO" in d["rationale"] for d in seeded)  # flagged as invented
    path = tmp_path / "demo.db"
    r = runner.invoke(app, ["demo", "--db", str(path)])
    assert r.exit_code == 0, r.output
    assert f"{len(seeded)} expected directions loaded from directions.csv" in r.stdout
    listed = json.loads(run(f"sqlite:///{path}", "list", "--json").stdout)
    assert [{k: d[k] for k in seeded[0]} for d in listed] == seeded
    cells = {(d["exposure"], d["outcome"]) for d in listed}
    assert ("corvane", "asthma emergency visits") in cells
    assert ("dravonil", "preterm birth") in cells
    assert ("vellium", "child respiratory admissions") in cells
    assert ("corvane", "cardiovascular admissions") not in cells  # left to be inferred
