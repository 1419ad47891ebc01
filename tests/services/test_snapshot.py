"""One shared evidence snapshot gives every service the same answer as its own reads, and no
service writes into it (the dashboard and the dossier share one copy).

The second route is each service reading the store itself (the code path the CLI uses); the
frames are compared with pandas' own equality check.
"""

from __future__ import annotations

import pandas as pd
import pytest

from exposhift.services import browse, replicating, summary
from exposhift.services.demo import build_demo
from exposhift.services.pooling import pool_evidence
from exposhift.services.setup import open_current
from exposhift.services.snapshot import take_snapshot
from exposhift.store import records
from exposhift.store.writer import Writer


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    path = tmp_path_factory.mktemp("snapshot") / "demo.db"
    build_demo(path, user="tester")
    store = open_current(str(path), user="tester")
    yield store
    store.dispose()


def _same(a: pd.DataFrame, b: pd.DataFrame) -> None:
    pd.testing.assert_frame_equal(a.reset_index(drop=True), b.reset_index(drop=True))


def test_every_service_answers_the_same_from_the_snapshot(demo):
    snap = take_snapshot(demo)
    assert snap.data_version == demo.data_version()
    ov, ov_s = browse.evidence_overview(demo), browse.evidence_overview(demo, snap)
    _same(ov.pairs, ov_s.pairs)
    assert ov.counts == ov_s.counts and ov.countries == ov_s.countries
    _same(browse.list_studies(demo), browse.list_studies(demo, snap))
    _same(browse.list_events(demo), browse.list_events(demo, snap))
    _same(summary.evidence_summary(demo), summary.evidence_summary(demo, snapshot=snap))
    gaps, gaps_s = replicating.gap_report(demo), replicating.gap_report(demo, snapshot=snap)
    _same(gaps.cells, gaps_s.cells)
    _same(gaps.opportunities, gaps_s.opportunities)
    filtered = replicating.GapFilters(min_level=2, year_from=1990)
    _same(
        replicating.gap_report(demo, filtered).cells,
        replicating.gap_report(demo, filtered, snapshot=snap).cells,
    )
    for exposure, outcome in ov.pairs[["exposure", "outcome"]].head(4).itertuples(index=False):
        a = pool_evidence(demo, exposure, outcome, details=True)
        b = pool_evidence(demo, exposure, outcome, details=True, snapshot=snap)
        assert a.groups == b.groups and a.excluded == b.excluded
        r, r_s = (
            replicating.replication_for(demo, exposure, outcome),
            replicating.replication_for(demo, exposure, outcome, snapshot=snap),
        )
        assert r.status == r_s.status and r.headline == r_s.headline
        _same(r.events, r_s.events)
    # nothing above wrote into the shared frames
    fresh = take_snapshot(demo)
    _same(snap.analysis, fresh.analysis)
    _same(snap.events, fresh.events)
    _same(snap.directions, fresh.directions)


def test_prepared_reuse_pools_the_same_as_preparing_again(demo):
    exposure, outcome = "dravonil", "preterm birth"
    first = pool_evidence(demo, exposure, outcome, details=True)
    for by in (["design-family"], ["level"]):
        again = pool_evidence(demo, exposure, outcome, by=by)
        reused = pool_evidence(demo, exposure, outcome, by=by, prepared=first, light=True)
        drop = ("rho_sensitivity",)
        assert [{k: v for k, v in g.items() if k not in drop} for g in again.groups] == [
            {k: v for k, v in g.items() if k not in drop} for g in reused.groups
        ]
        assert reused.overall == []  # light: the across-strata test is left out
    with pytest.raises(ValueError, match="another evidence set"):
        pool_evidence(demo, exposure, outcome, min_level=2, prepared=first)


def test_a_write_gives_a_new_snapshot_version(demo):
    before = take_snapshot(demo)
    with demo.write() as conn:
        w = Writer(conn, demo.user)
        records.ensure_vocab(w, "exposure", "snapshot-test-agent")
        w.flush()
    after = take_snapshot(demo)
    assert after.data_version == before.data_version + 1
