"""The pool action on a small evidence base: fatal studies out, duplicates out, strata apart.

Expected pooled values are computed with statsmodels' combine_effects (reference library) on
the same harmonised numbers; SE-from-CI follows Altman & Bland 2011 (BMJ 343:d2090).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from statsmodels.stats.meta_analysis import combine_effects
from typer.testing import CliRunner

from exposhift.cli.main import app
from exposhift.errors import NotFoundError
from exposhift.services.pooling import pool_evidence
from exposhift.store import records
from exposhift.store.writer import Writer

# (study, event, country, design, RR, lo, hi, level of record)
ROWS = [
    ("A", "E1", "FRA", "did", 0.80, 0.70, 0.914, 2),
    ("B", "E2", "ESP", "did", 0.90, 0.80, 1.0125, 3),
    ("C", "E3", "ITA", "synthetic-control", 0.70, 0.55, 0.891, 2),
    ("D", "E4", "DEU", "its", 0.95, 0.85, 1.062, 2),
    ("F", "E5", "AUT", "before-after", 0.50, 0.40, 0.625, 0),  # fatal: left out
    ("G", "E1", "FRA", "did", 0.85, 0.75, 0.963, 1),  # same event as A: left out
]


def _fill(store):
    with store.write() as conn:
        w = Writer(conn, "t")
        exp = records.ensure_vocab(w, "exposure", "agent")
        out = records.ensure_vocab(w, "outcome", "asthma")
        made = set()
        for sid, ev, iso, design, rr, lo, hi, lvl in ROWS:
            if ev not in made:
                records.create(
                    w,
                    "event",
                    {
                        "key": ev,
                        "exposure_id": exp,
                        "change_kind": "ban",
                        "change_direction": "decrease",
                        "country": iso,
                        "change_date": "2001",
                    },
                )
                made.add(ev)
            st = records.create(
                w, "study", {"key": sid, "citation": sid, "year": 2005, "design": design}
            )
            ev_id = records.get(conn, "event", ev)["id"]
            records.create(
                w,
                "estimate",
                {
                    "key": f"{sid}|{ev}|asthma|RR|change||",
                    "study_id": st,
                    "event_id": ev_id,
                    "outcome_id": out,
                    "measure": "RR",
                    "point": rr,
                    "ci_low": lo,
                    "ci_high": hi,
                    "primary": True,
                },
            )
            records.create(
                w,
                "appraisal",
                {
                    "study_id": st,
                    "reviewer": "panel",
                    "stage": "consensus",
                    "rubric_id": "r",
                    "rubric_hash": "h",
                    "overall": lvl,
                },
            )
        w.flush()


def _expected(rows):
    y = np.array([-math.log(r[4]) for r in rows])  # aligned to an exposure increase
    se = np.array([(math.log(r[6]) - math.log(r[5])) / (2 * 1.959963984540054) for r in rows])
    return y, se**2


def test_pool_leaves_out_fatal_and_duplicate_and_matches_statsmodels(store):
    _fill(store)
    out = pool_evidence(store, "agent", "asthma", method="dl", ci="wald")
    assert len(out.groups) == 1
    g = out.groups[0]
    assert g["k"] == 4 and g["scale"] == "log" and g["sign_flipped"] == 4
    reasons = {e["estimate_uid"].split("|")[0]: e["reason"] for e in out.excluded}
    assert set(reasons) == {"F", "G"} and "fatal" in reasons["F"]
    y, v = _expected(ROWS[:4])
    ref = combine_effects(y, v, method_re="dl")  # Q >= k-1 here, so statsmodels is valid
    assert ref.tau2 >= 0
    assert g["estimate"] == pytest.approx(ref.mean_effect_re, abs=1e-9)
    assert g["tau2"] == pytest.approx(ref.tau2, abs=1e-9)
    assert g["back_transformed"]["estimate"] == pytest.approx(math.exp(ref.mean_effect_re))


def test_include_fatal_and_strata(store):
    _fill(store)
    out = pool_evidence(store, "agent", "asthma", include_fatal=True, by=["design-family"])
    fams = {g["design_family"]: g["k"] for g in out.groups}
    # A and B (G is a duplicate of A's event), C, D, and the fatal F kept on request
    assert fams == {
        "common-trend": 2,
        "weighted-fit": 1,
        "trend-extrapolation": 1,
        "uncontrolled": 1,
    }


def test_unknown_exposure_names_close_matches(store):
    _fill(store)
    with pytest.raises(NotFoundError, match="did you mean 'agent'"):
        pool_evidence(store, "agnet", "asthma")


def test_pool_cli_json_shape(store):
    _fill(store)
    result = CliRunner().invoke(
        app, ["--db", store.url, "pool", "--exposure", "agent", "--outcome", "asthma", "--json"]
    )
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    assert {
        "exposure",
        "outcome",
        "evidence_set",
        "options",
        "groups",
        "overall",
        "caution",
    } <= set(data)
    assert data["options"]["within_event"] == "aggregate" and data["options"]["hksj_floor"]
    for key in (
        "k",
        "k_events",
        "k_estimates",
        "method",
        "ci_method",
        "measure",
        "scale",
        "estimate",
        "se",
        "ci_lower",
        "ci_upper",
        "pi_lower",
        "pi_upper",
        "tau2",
        "tau2_ci",
        "i2",
        "q",
        "q_pvalue",
        "excluded",
        "natural",
        "back_transformed",
        "provenance",
        "headline",
    ):
        assert key in data["groups"][0], key
    text = CliRunner().invoke(
        app, ["--db", store.url, "pool", "--exposure", "agent", "--outcome", "asthma"]
    )
    assert text.exit_code == 0 and "never replace" in text.stdout


def test_details_leave_one_out_matches_statsmodels_and_egger_says_why(store):
    """Leave-one-out pooled DL estimates against statsmodels combine_effects on each subset
    (reference library; valid here because every subset has Q >= k-1, asserted below)."""
    _fill(store)
    out = pool_evidence(store, "agent", "asthma", method="dl", ci="wald", details=True)
    sens = out.groups[0]["sensitivity"]
    y, v = _expected(ROWS[:4])
    loo = []
    for i in range(4):
        keep = [j for j in range(4) if j != i]
        ref = combine_effects(y[keep], v[keep], method_re="dl")
        assert ref.tau2 >= 0  # statsmodels is valid on this subset
        loo.append(ref.mean_effect_re)
    assert sens["leave_one_out"]["lowest"] == pytest.approx(min(loo), abs=1e-9)
    assert sens["leave_one_out"]["highest"] == pytest.approx(max(loo), abs=1e-9)
    assert sens["small_study"]["run"] is False and "10" in sens["small_study"]["reason"]
    t2 = out.groups[0]["tau2_ci"]
    assert 0 <= t2["lower"] <= t2["upper"]
