"""The evidence summary agrees with the pool and replication actions (second route through the
code) on the demo evidence base, and the demo command prints it with the caution."""

from __future__ import annotations

import math

import pytest
from typer.testing import CliRunner

from exposhift.cli.main import app
from exposhift.services.pooling import pool_evidence
from exposhift.services.replicating import replication_for
from exposhift.services.setup import open_current
from exposhift.services.summary import evidence_summary


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    path = tmp_path_factory.mktemp("demo") / "demo.db"
    result = CliRunner().invoke(app, ["demo", "--db", str(path)])
    assert result.exit_code == 0, result.output
    assert "what the evidence says" in result.stdout and "never replace" in result.stdout
    store = open_current(str(path))
    yield store
    store.dispose()


def test_summary_matches_pool_and_replication(demo):
    summary = evidence_summary(demo)
    assert len(summary) > 0
    for row in summary.to_dict(orient="records"):
        report = replication_for(demo, row["exposure"], row["outcome"])
        assert report.to_dict()["status"] == row["status"]
        if not row["k_events"]:
            continue
        # the headline number is the pool of the good events (level >= 2), one per event: the
        # pool action restricted to the same evidence set gives the same number
        groups = pool_evidence(demo, row["exposure"], row["outcome"], min_level=2).groups

        def stratum(g):
            inc = f" {g['increment']}" if g["increment"] else ""
            return f"{g['measure_group']}/{g['estimate_kind']}{inc}"

        (best,) = [g for g in groups if stratum(g) == row["stratum"]]
        assert best["k_events"] == row["k_events"]
        assert best["k_estimates"] == row["k_estimates"]
        expected = math.exp(best["estimate"]) if best["scale"] == "log" else best["estimate"]
        assert row["estimate"] == pytest.approx(expected, rel=1e-9)
