"""The independence rule with re-estimated estimates, and the series commands in process."""

from __future__ import annotations

import json

import pandas as pd
from series_helpers import demo_series, write_series
from typer.testing import CliRunner

from exposhift.cli.main import app
from exposhift.services.demo import seed_dir
from exposhift.synthesis.independence import select_independent

runner = CliRunner()


def _pair(**re_row):
    base = {
        "event_id": "E1",
        "population": "p",
        "data_source": "d",
        "outcome": "o",
        "measure_group": "ratio",
        "estimate_kind": "change",
        "study_id": "S1",
        "v": 0.01,
        "primary": False,
        "re_estimated": False,
        "estimate_uid": "published",
    }
    return pd.DataFrame(
        [base, {**base, "v": 0.001, "re_estimated": True, "estimate_uid": "re-estimate", **re_row}]
    )


def test_published_estimate_is_kept_over_a_more_precise_re_estimate():
    kept, excluded = select_independent(_pair())
    assert kept["estimate_uid"].tolist() == ["published"]
    assert "it is the published estimate" in excluded["reason"].iat[0]


def test_a_re_estimate_flagged_primary_is_kept():
    kept, excluded = select_independent(_pair(primary=True))
    assert kept["estimate_uid"].tolist() == ["re-estimate"]
    assert "flagged primary" in excluded["reason"].iat[0]


def test_without_the_column_the_rule_is_unchanged():
    kept, _ = select_independent(_pair().drop(columns="re_estimated"))
    assert kept["estimate_uid"].tolist() == ["re-estimate"]  # smaller variance, as before


def test_series_commands_import_estimate_store(tmp_path):
    db = str(tmp_path / "ev.db")
    assert runner.invoke(app, ["--db", db, "init"]).exit_code == 0
    assert (
        runner.invoke(app, ["--db", db, "import", str(seed_dir() / "evidence.csv")]).exit_code == 0
    )
    sheet = write_series(tmp_path / "series.csv", demo_series())
    out = runner.invoke(app, ["--db", db, "series", "import", str(sheet)])
    assert out.exit_code == 0, out.output
    assert "5 series" in out.output and "added 5" in out.output
    out = runner.invoke(app, ["--db", db, "series", "estimate", "Santos2009-mortality"])
    assert out.exit_code == 0, out.output
    assert "placebo dates: 10 false change dates" in out.output and "failed" in out.output
    assert "before-after comparison ignoring trends" in out.output
    out = runner.invoke(
        app, ["--db", db, "series", "estimate", "Duarte1999-asthma", "--horizon", "12", "--json"]
    )
    doc = json.loads(out.output)
    assert doc["fit"]["measure"] == "IRR" and doc["stored_estimate"] is None
    assert doc["figure"]["change_at"] == "1996-01"
    out = runner.invoke(
        app, ["--db", db, "series", "estimate", "Duarte1999-asthma", "--horizon", "12", "--store"]
    )
    assert out.exit_code == 0 and "flagged re-estimated" in out.output
    again = runner.invoke(
        app, ["--db", db, "series", "estimate", "Duarte1999-asthma", "--horizon", "12", "--store"]
    )
    assert again.exit_code == 2 and "already stored" in again.output
    out = runner.invoke(
        app, ["--db", db, "series", "estimate", "Santos2009-mortality", "--horizon", "12"]
    )
    assert out.exit_code == 2 and "never extrapolated" in out.output
    out = runner.invoke(app, ["--db", db, "series", "estimate", "nope"])
    assert out.exit_code == 5 and out.output.startswith("error: no series 'nope'")
