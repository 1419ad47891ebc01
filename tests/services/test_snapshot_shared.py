"""The summary's findings and the unfiltered gap map share one replication analysis per
snapshot and thresholds, and show what each computes from the store on its own (the code path
the CLI uses), compared with pandas' own equality check."""

from __future__ import annotations

import pandas as pd
import pytest

from exposhift.services import replicating, summary
from exposhift.services.demo import build_demo
from exposhift.services.setup import open_current
from exposhift.services.snapshot import take_snapshot
from exposhift.services.workspace import stored_settings


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    path = tmp_path_factory.mktemp("shared") / "demo.db"
    build_demo(path, user="tester")
    store = open_current(str(path), user="tester")
    yield store
    store.dispose()


def _counting(snap, monkeypatch) -> list:
    import exposhift.services.snapshot as module

    calls = []
    real = module.analyse
    monkeypatch.setattr(module, "analyse", lambda *a, **k: calls.append(1) or real(*a, **k))
    return calls


@pytest.mark.parametrize("gaps_first", [False, True])
def test_one_analysis_for_the_summary_and_the_gap_map(demo, monkeypatch, gaps_first):
    snap = take_snapshot(demo)
    calls = _counting(snap, monkeypatch)
    if gaps_first:
        gaps = replicating.gap_report(demo, snapshot=snap)
        found = summary.evidence_summary(demo, snapshot=snap)
    else:
        found = summary.evidence_summary(demo, snapshot=snap)
        gaps = replicating.gap_report(demo, snapshot=snap)
    assert len(calls) == 1
    pd.testing.assert_frame_equal(found, summary.evidence_summary(demo))
    pd.testing.assert_frame_equal(gaps.cells, replicating.gap_report(demo).cells)
    # the gap map's best status of a cell is one of the summary's statuses of its outcomes
    assert set(gaps.cells["status"].dropna()) <= set(found["status"]) | {"none"}


def test_other_thresholds_or_filters_compute_their_own(demo, monkeypatch):
    snap = take_snapshot(demo)
    calls = _counting(snap, monkeypatch)
    summary.evidence_summary(demo, snapshot=snap)
    stricter = stored_settings(demo).with_(min_places=3)
    strict = summary.evidence_summary(demo, settings=stricter, snapshot=snap)
    assert len(calls) == 2
    pd.testing.assert_frame_equal(strict, summary.evidence_summary(demo, settings=stricter))
    # a filtered gap map analyses its own subset, never the shared whole-base analysis
    filtered = replicating.GapFilters(min_level=2)
    cells = replicating.gap_report(demo, filtered, snapshot=snap).cells
    assert len(calls) == 2
    pd.testing.assert_frame_equal(cells, replicating.gap_report(demo, filtered).cells)
