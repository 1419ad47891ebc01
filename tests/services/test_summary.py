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
        if not row["k"]:
            continue
        groups = pool_evidence(demo, row["exposure"], row["outcome"]).groups
        best = max(groups, key=lambda g: g["k"])
        assert best["k"] == row["k"]
        expected = math.exp(best["estimate"]) if best["scale"] == "log" else best["estimate"]
        assert row["estimate"] == pytest.approx(expected, rel=1e-12)
