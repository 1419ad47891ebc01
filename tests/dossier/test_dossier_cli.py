"""The ``dossier`` and ``dossier diff`` commands, in-process, with exact exit codes."""

from __future__ import annotations

import json

from typer.testing import CliRunner

from exposhift.cli.main import app

runner = CliRunner()


def test_help():
    for args in (["dossier", "--help"], ["dossier", "diff", "--help"]):
        r = runner.invoke(app, args)
        assert r.exit_code == 0, r.output
    assert "--since" in runner.invoke(app, ["dossier", "--help"]).output


def test_dossier_and_diff(demo_db, tmp_path):
    db = ["--db", str(demo_db)]
    out = tmp_path / "v"
    r = runner.invoke(
        app,
        [
            *db,
            "dossier",
            "--exposure",
            "vellium",
            "--outcome",
            "mean birth weight",
            "--out",
            str(out),
            "--format",
            "html,bundle",
            "--zip",
            "--as-of",
            "2026-03-01",
        ],
    )
    assert r.exit_code == 0, r.output
    assert f"dossier of vellium written to {out}/" in r.output
    assert "every page of the dossier says so" in r.output
    m = json.loads((out / "bundle" / "manifest.json").read_text())
    assert m["outcomes"] == ["mean birth weight"] and m["made_at"] == "2026-03-01T00:00:00Z"
    r = runner.invoke(app, [*db, "dossier", "diff", str(out / "bundle.zip"), "--json"])
    assert r.exit_code == 0, r.output
    assert json.loads(r.output)["changes"] == []
    r = runner.invoke(app, [*db, "dossier", "diff", str(out)])
    assert r.exit_code == 0 and "nothing changed" in r.output


def test_errors_are_one_line(demo_db, tmp_path):
    db = ["--db", str(demo_db)]
    r = runner.invoke(app, [*db, "dossier", "--exposure", "velium", "--out", str(tmp_path)])
    assert r.exit_code == 5
    assert r.output.strip().splitlines() == [
        "error: no exposure 'velium' in the evidence base; did you mean 'vellium'? "
        "('exposhift list exposures' lists them)"
    ]
    r = runner.invoke(app, [*db, "dossier"])
    assert r.exit_code == 2 and "--exposure" in r.output
    r = runner.invoke(app, [*db, "dossier", "diff", str(tmp_path / "none")])
    assert r.exit_code == 2 and r.output.startswith("error: ") and "no such bundle" in r.output
