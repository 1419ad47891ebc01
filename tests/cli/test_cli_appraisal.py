"""appraise import / show and agreement through the command line, on the demo evidence base."""

from __future__ import annotations

import json

import pytest
from sklearn.metrics import cohen_kappa_score
from typer.testing import CliRunner

from exposhift.cli.main import app

runner = CliRunner()


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    path = tmp_path_factory.mktemp("demo") / "demo.db"
    result = runner.invoke(app, ["demo", "--db", str(path)])
    assert result.exit_code == 0, result.output
    return str(path)


def test_agreement_json_matches_scikit_learn_on_demo(demo_db):
    """Reference: scikit-learn cohen_kappa_score on the same pairs read from seed_records."""

    from exposhift.demo_scenario import build_scenario

    result = runner.invoke(app, ["--db", demo_db, "agreement", "--json"])
    assert result.exit_code == 0, result.output
    rows = {r["domain"]: r for r in json.loads(result.stdout)}
    ap = build_scenario()["appraisals"]
    ind = ap[ap["stage"] == "independent"]
    pairs = ind.groupby("study_id").filter(lambda g: len(g) >= 2)
    for domain in ("origin", "counterfactual", "falsification"):
        wide = pairs.pivot(index="study_id", columns="reviewer", values=domain)
        first, second = sorted(wide.columns)[:2]
        both = wide[[first, second]].dropna()
        a, b = both[first].astype(int), both[second].astype(int)
        assert rows[domain]["n"] == len(both)
        assert rows[domain]["kappa_quadratic"] == pytest.approx(
            cohen_kappa_score(a, b, weights="quadratic", labels=[0, 1, 2, 3]), abs=1e-12
        )
        assert rows[domain]["kappa_linear"] == pytest.approx(
            cohen_kappa_score(a, b, weights="linear", labels=[0, 1, 2, 3]), abs=1e-12
        )


def test_show_hides_other_reviewer_until_both_in(demo_db, tmp_path):
    from exposhift.demo_scenario import build_scenario

    ap = build_scenario()["appraisals"]
    counts = ap[ap["stage"] == "independent"].groupby("study_id").size()
    single = counts[counts == 1].index[0]
    reviewer = ap[(ap["study_id"] == single) & (ap["stage"] == "independent")]["reviewer"].iloc[0]
    hidden = runner.invoke(app, ["--db", demo_db, "--user", "nobody", "appraise", "show", single])
    assert hidden.exit_code == 0 and "hidden until both independent appraisals are in" in (
        hidden.stdout
    )
    own = runner.invoke(app, ["--db", demo_db, "--user", reviewer, "appraise", "show", single])
    assert own.exit_code == 0 and "hidden" not in own.stdout and "origin" in own.stdout


def test_appraise_import_errors_are_one_block_and_write_nothing(demo_db, tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text(
        "study_id,reviewer,stage,origin,counterfactual,design_checks,"
        "concurrent_changes\nNO-SUCH,ana,independent,2,2,2,9\n",
        encoding="utf-8",
    )
    before = json.loads(runner.invoke(app, ["--db", demo_db, "info", "--json"]).stdout)
    result = runner.invoke(app, ["--db", demo_db, "appraise", "import", str(bad)])
    assert result.exit_code == 2
    err = result.stderr
    assert err.startswith("error: 2 problems found; nothing was written")
    assert "row 2, column 'study_id': no study 'NO-SUCH'" in err
    assert "row 2, column 'concurrent_changes': level '9' is outside 0-3" in err
    after = json.loads(runner.invoke(app, ["--db", demo_db, "info", "--json"]).stdout)
    assert after == before


def test_unknown_study_in_show(demo_db):
    result = runner.invoke(app, ["--db", demo_db, "appraise", "show", "Nobody2099"])
    assert result.exit_code == 5 and result.stderr.startswith("error: no study 'Nobody2099'")
