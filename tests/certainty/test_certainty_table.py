"""The summary-of-evidence table and the certainty commands on the demo evidence base: the
table's numbers are the ``pool`` and ``replication`` commands' numbers for the same cell (read
back from their JSON output), the demo judgements show both directions, and bad input to the
commands gives one clear line.

Outside references: the JSON is parsed with ``json``, the CSV with ``csv``; E-values are
recomputed with the formula of VanderWeele & Ding 2017 written out in the test.
"""

from __future__ import annotations

import csv
import io
import json
import math

import pytest
from typer.testing import CliRunner

from exposhift.cli.main import app

runner = CliRunner()


def run(db, *args):
    res = runner.invoke(app, ["--db", str(db), *args])
    return res


def test_table_numbers_are_the_pool_and_replication_numbers(demo_db):
    tab = json.loads(run(demo_db, "evidence-table", "--exposure", "dravonil", "--json").stdout)
    rows = {r["outcome"]: r for r in tab["rows"]}
    for outcome in ("preterm birth", "low birth weight"):
        pool = json.loads(
            run(demo_db, "pool", "--exposure", "dravonil", "--outcome", outcome, "--json").stdout
        )
        main = max(pool["groups"], key=lambda g: (g["k_events"], g["k"]))
        rep = json.loads(
            run(
                demo_db, "replication", "--exposure", "dravonil", "--outcome", outcome, "--json"
            ).stdout
        )
        r = rows[outcome]
        assert r["events"] == main["k_events"] and r["estimates"] == main["k_estimates"]
        for f, g in (
            ("effect", "estimate"),
            ("ci_lower", "ci_lower"),
            ("ci_upper", "ci_upper"),
            ("pi_lower", "pi_lower"),
            ("pi_upper", "pi_upper"),
        ):
            assert r[f] == pytest.approx(main["natural"][g], rel=1e-12)
        assert r["status"] == rep["status"] + (" (provisional)" if rep["provisional"] else "")
        rr = r["effect"] if r["effect"] >= 1 else 1 / r["effect"]
        assert r["e_value"] == pytest.approx(rr + math.sqrt(rr * (rr - 1)))


def test_demo_judgements_show_both_directions(demo_db):
    tab = json.loads(run(demo_db, "evidence-table", "--exposure", "dravonil", "--json").stdout)
    preterm = next(r for r in tab["rows"] if r["outcome"] == "preterm birth")
    assert preterm["certainty"] == "limited"  # fair, two steps down, one up (committee)
    assert "inconsistency down-one" in preterm["reasons"]
    assert "imprecision down-one" in preterm["reasons"]
    assert preterm["certainty_basis"].startswith("recorded by demo committee (invented)")
    res = run(demo_db, "evidence-table", "--exposure", "corvane", "--csv")
    assert res.exit_code == 0
    rows = {r["outcome"]: r for r in csv.DictReader(io.StringIO(res.stdout))}
    asthma = rows["asthma emergency visits"]
    assert asthma["certainty"] == "firm" and "reversal up-one" in asthma["reasons"]
    assert rows["cardiovascular admissions"]["certainty"].endswith("(suggested)")


def test_certainty_command_text_and_json(demo_db):
    res = run(demo_db, "certainty", "--exposure", "dravonil", "--outcome", "preterm birth")
    assert res.exit_code == 0, res.output
    out = res.stdout
    assert "inconsistency  down-one" in out and "recorded certainty: limited" in out
    assert "E-value 1.60" in out and "without event DRV-SWE-1988" in out
    assert "support, never replace, expert judgement" in out
    d = json.loads(
        run(
            demo_db, "certainty", "--exposure", "dravonil", "--outcome", "preterm birth", "--json"
        ).stdout
    )
    cell = d["outcomes"][0]
    assert cell["recorded"]["certainty"]["overrides"] is True
    assert cell["recorded"]["certainty"]["suggested"] == "fair"
    assert cell["recorded"]["inconsistency"]["settings_hash"] == d["settings_fingerprint"]
    assert [s["analysis"] for s in cell["sensitivity"]][:2] == [
        "main result (reml, hksj)",
        "good evidence only (level ≥ 2)",
    ]
    main = cell["sensitivity"][0]
    assert main["estimate"] == pytest.approx(cell["pooled"]["natural"]["estimate"], rel=1e-12)
    fe = next(r for r in cell["sensitivity"] if r["analysis"].startswith("fixed effect"))
    assert fe["change"] == pytest.approx(fe["estimate"] / main["estimate"], rel=1e-9)


@pytest.mark.parametrize(
    "args,words",
    [
        (["certainty"], "name the exposure with --exposure"),
        (["certainty", "--exposure", "nope"], "no exposure"),
        (["evidence-table", "--exposure", "dravonil", "--json", "--csv"], "choose one of"),
        (["certainty", "--exposure", "dravonil", "--certainty", "missing.toml"], "missing.toml"),
    ],
)
def test_command_errors_are_one_line(demo_db, args, words):
    res = run(demo_db, *args)
    assert res.exit_code != 0
    assert words in res.output and "Traceback" not in res.output


def test_record_command_refuses_bad_sheet_and_writes_nothing(demo_copy, tmp_path):
    p = tmp_path / "bad.csv"
    p.write_text(
        "exposure,outcome,domain,rating,why,decided_by\n"
        "dravonil,preterm birth,imprecision,down-three,x,p\n",
        encoding="utf-8",
    )
    from exposhift.services.certainty import recorded_judgements

    before = recorded_judgements(demo_copy, "dravonil", "preterm birth")
    res = runner.invoke(app, ["--db", str(tmp_path / "copy.db"), "certainty", "record", str(p)])
    assert res.exit_code != 0 and "bad.csv" in res.output and "row 2" in res.output
    after = recorded_judgements(demo_copy, "dravonil", "preterm birth")
    assert after.equals(before)
