"""Dual independent review in the service layer: blinding, consensus, errors, agreement."""

from __future__ import annotations

import pandas as pd
import pytest
from sklearn.metrics import cohen_kappa_score

from exposhift.errors import InputFileError, ReviewError  # noqa: F401 - ReviewError documented
from exposhift.services.appraising import agreement, import_appraisals, show_appraisals
from exposhift.store import records
from exposhift.store.queries import analysis_frame
from exposhift.store.writer import Writer

DOMAINS = [
    "origin",
    "counterfactual",
    "design_checks",
    "falsification",
    "timing",
    "concurrent_changes",
    "exposure_shift",
    "outcome_data",
    "inference",
    "transparency",
    "applicability",
]


def _studies(store, n=4):
    with store.write() as conn:
        w = Writer(conn, "t")
        exp = records.ensure_vocab(w, "exposure", "agent")
        out = records.ensure_vocab(w, "outcome", "asthma")
        ev = records.create(
            w,
            "event",
            {
                "key": "E",
                "exposure_id": exp,
                "change_kind": "ban",
                "change_direction": "decrease",
                "country": "FRA",
                "change_date": "2000",
            },
        )
        for i in range(n):
            st = records.create(
                w,
                "study",
                {
                    "key": f"S{i}",
                    "citation": f"Demo {i}",
                    "year": 2005,
                    "design": "did",
                    "comparison": "unexposed regions",
                    "checks": "pre-trends; placebo-date; negative-control-outcome",
                },
            )
            records.create(
                w,
                "estimate",
                {
                    "key": f"S{i}|E|asthma|RR|change||",
                    "study_id": st,
                    "event_id": ev,
                    "outcome_id": out,
                    "measure": "RR",
                    "point": 0.9,
                    "ci_low": 0.8,
                    "ci_high": 1.0,
                },
            )
        # an ITS with two points before the change: counterfactual suggested fatal
        records.create(
            w,
            "study",
            {
                "key": "ITS2",
                "citation": "Demo ITS",
                "year": 2006,
                "design": "its",
                "pre_points": 2,
                "post_points": 20,
            },
        )
        w.flush()


def _row(study, reviewer, stage, levels, **extra):
    row = {"study_id": study, "reviewer": reviewer, "stage": stage}
    row.update({d: str(lv) for d, lv in zip(DOMAINS, levels, strict=True)})
    row.update(extra)
    return row


def _write(tmp_path, rows, name="ap.csv"):
    path = tmp_path / name
    pd.DataFrame(rows).to_csv(path, index=False)
    return path


GOOD = [2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2]


def test_blinding_until_both_independent_appraisals(store, tmp_path):
    _studies(store)
    import_appraisals(store, _write(tmp_path, [_row("S0", "ana", "independent", GOOD)]))
    as_ben = show_appraisals(store, "S0", "ben")
    assert as_ben["appraisals"][0].blinded and as_ben["appraisals"][0].ratings is None
    as_ana = show_appraisals(store, "S0", "ana")
    assert not as_ana["appraisals"][0].blinded and as_ana["appraisals"][0].ratings["origin"] == 2
    import_appraisals(
        store, _write(tmp_path, [_row("S0", "ben", "independent", [3] * 11)], "b.csv")
    )
    both = show_appraisals(store, "S0", "someone-else")
    assert [v.blinded for v in both["appraisals"]] == [False, False]


def test_consensus_needs_two_independent_and_becomes_record(store, tmp_path):
    _studies(store)
    early = _write(
        tmp_path, [_row("S1", "ana", "independent", GOOD), _row("S1", "panel", "consensus", GOOD)]
    )
    with pytest.raises(InputFileError, match="needs two independent appraisals first"):
        import_appraisals(store, early)
    with store.read() as conn:  # nothing written, not even the valid first row
        assert analysis_frame(conn)["level"].isna().all()
    ok = _write(
        tmp_path,
        [
            _row("S1", "panel", "consensus", [1, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2]),
            _row("S1", "ana", "independent", GOOD),
            _row("S1", "ben", "independent", GOOD),
        ],
        "ok.csv",
    )
    summary = import_appraisals(store, ok)
    assert summary.added == 3 and summary.by_stage == {"independent": 2, "consensus": 1}
    with store.read() as conn:
        frame = analysis_frame(conn).set_index("study_id")
    assert frame.loc["S1", "level"] == 1.0  # consensus (weak origin) is the record
    assert import_appraisals(store, ok).unchanged == 3  # identical re-import changes nothing


def test_bad_input_is_reported_all_at_once_and_nothing_written(store, tmp_path):
    _studies(store)
    rows = [
        _row("S0", "ana", "independent", [4, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2]),  # level 4
        _row("NOPE", "ana", "independent", GOOD),  # unknown study
        _row("S1", "ana", "independent", GOOD),
        _row("S1", "ana", "independent", GOOD),  # twice
        _row("S2", "ana", "draft", GOOD),  # unknown stage
        _row("ITS2", "ana", "independent", GOOD),  # above suggestion
    ]
    with pytest.raises(InputFileError) as err:
        import_appraisals(store, _write(tmp_path, rows))
    msg = str(err.value)
    assert "row 2, column 'origin': level '4' is outside 0-3" in msg
    assert "row 3, column 'study_id': no study 'NOPE'" in msg
    assert "row 5, column 'reviewer'" in msg and "already appraises study 'S1'" in msg
    assert "row 6, column 'stage'" in msg
    assert "row 7, column 'counterfactual'" in msg and "counterfactual_why" in msg
    unknown = _write(
        tmp_path, [{**_row("S0", "ana", "independent", GOOD), "blinding": "3"}], "u.csv"
    )
    with pytest.raises(InputFileError, match="column 'blinding': unknown column"):
        import_appraisals(store, unknown)
    with store.read() as conn:
        assert analysis_frame(conn)["level"].isna().all()
    # a justification lets the reviewer override the suggestion
    justified = _write(
        tmp_path,
        [
            _row(
                "ITS2",
                "ana",
                "independent",
                GOOD,
                counterfactual_why="long control series in appendix",
                design_checks_why="monthly series in the appendix",
            )
        ],
        "j.csv",
    )
    assert import_appraisals(store, justified).added == 1


def test_changed_appraisal_is_not_overwritten(store, tmp_path):
    _studies(store)
    import_appraisals(store, _write(tmp_path, [_row("S0", "ana", "independent", GOOD)]))
    with pytest.raises(InputFileError, match="already appraised study 'S0'"):
        import_appraisals(
            store, _write(tmp_path, [_row("S0", "ana", "independent", [3] * 11)], "c.csv")
        )


def test_agreement_matches_scikit_learn(store, tmp_path):
    """Per-domain weighted kappa against scikit-learn's cohen_kappa_score (reference library)."""
    _studies(store, n=4)
    ana = {
        "S0": [3, 2, 2, 1, 2, 2, 2, 2, 2, 2, 2],
        "S1": [2, 2, 1, 1, 2, 2, 2, 2, 2, 2, 2],
        "S2": [1, 3, 2, 0, 2, 2, 2, 2, 2, 2, 2],
        "S3": [2, 1, 3, 2, 2, 2, 2, 2, 2, 2, 2],
    }
    ben = {
        "S0": [3, 2, 1, 1, 2, 2, 2, 2, 2, 2, 2],
        "S1": [1, 2, 1, 2, 2, 2, 2, 2, 2, 2, 2],
        "S2": [1, 2, 2, 0, 2, 2, 2, 2, 2, 2, 2],
        "S3": [3, 1, 3, 2, 2, 2, 2, 2, 2, 2, 2],
    }
    rows = [_row(s, "ana", "independent", v) for s, v in ana.items()]
    rows += [_row(s, "ben", "independent", v) for s, v in ben.items()]
    import_appraisals(store, _write(tmp_path, rows))
    table = agreement(store).set_index("domain")
    for i, d in enumerate(["origin", "counterfactual", "design_checks", "falsification"]):
        a = [ana[s][i] for s in sorted(ana)]
        b = [ben[s][i] for s in sorted(ben)]
        assert table.loc[d, "n"] == 4
        assert table.loc[d, "kappa_linear"] == pytest.approx(
            cohen_kappa_score(a, b, weights="linear", labels=[0, 1, 2, 3]), abs=1e-12
        )
        assert table.loc[d, "kappa_quadratic"] == pytest.approx(
            cohen_kappa_score(a, b, weights="quadratic", labels=[0, 1, 2, 3]), abs=1e-12
        )


def test_changed_rubric_gives_new_appraisals_a_new_hash_and_old_ones_keep_theirs(store, tmp_path):
    from exposhift.appraisal.rubric import load_rubric, packaged_rubric_path
    from exposhift.store.appraisals import appraisals_of_study, studies_by_key

    _studies(store)
    old = load_rubric(packaged_rubric_path())
    import_appraisals(
        store,
        _write(tmp_path, [_row("S0", "ana", "independent", GOOD)]),
        rubric_path=packaged_rubric_path(),
    )
    changed = tmp_path / "rubric.toml"
    text = packaged_rubric_path().read_text(encoding="utf-8")
    changed.write_text(text.replace('version = "', 'version = "9.', 1), encoding="utf-8")
    new = load_rubric(changed)
    assert new.content_hash != old.content_hash
    import_appraisals(
        store,
        _write(tmp_path, [_row("S0", "ben", "independent", GOOD)], "b.csv"),
        rubric_path=changed,
    )
    with store.read() as conn:
        rows = appraisals_of_study(conn, studies_by_key(conn)["S0"]["id"])
    hashes = {r["reviewer"]: r["rubric_hash"] for r in rows}
    assert hashes == {"ana": old.content_hash, "ben": new.content_hash}
