"""The typed results at the service seam: attributes, ``to_dict()`` and the read-only mapping
view agree (the byte-for-byte JSON is pinned by tests/cli/test_cli_json_golden.py)."""

from __future__ import annotations

import json
import pickle

import pytest

from exposhift.replication.entries import PlaceSequence, Reversal, SequenceEvent
from exposhift.services.pool_results import POOLED_NUMBERS, Exclusion, PooledGroup
from exposhift.services.setup import DatabaseInfo


def _group(**extra) -> PooledGroup:
    rec = {
        "measure_group": "ratio",
        "k": 3,
        "k_events": 3,
        "k_estimates": 4,
        "method": "reml",
        "ci_method": "hksj",
        "within_event": "aggregate",
        "rho": 0.8,
        "measure": "RR",
        "scale": "log",
        **{f: 0.1 for f in POOLED_NUMBERS},
        "notes": [],
        "sign_flipped": 0,
        "estimates": ["a", "b"],
        "events": ["E1", "E2", "E3"],
        "provenance": [],
        "natural": {"estimate": 1.105},
        "headline": "pooled",
        "event_estimates": [],
        **extra,
    }
    return PooledGroup.from_record(rec, ["measure_group"], [Exclusion("u", "S", "E", "why")])


def test_pooled_group_reads_as_its_dict():
    g = _group(tau2_ci={"lower": 0.0, "upper": 0.2})
    d = g.to_dict()
    assert list(d)[:2] == ["measure_group", "k"]
    assert list(d)[-2:] == ["tau2_ci", "excluded"]
    assert "fixed_effect" not in d and "back_transformed" not in d  # absent parts stay absent
    assert g["estimate"] == g.estimate == 0.1
    assert dict(g) == d
    assert g.excluded[0].reason == g["excluded"][0]["reason"] == "why"
    json.dumps(d)  # plain JSON
    assert pickle.loads(pickle.dumps(g)).to_dict() == d  # the dashboard caches results


def test_a_missing_key_raises_like_a_dict():
    with pytest.raises(KeyError):
        _group()["sensitivity"]
    assert _group().get("sensitivity") is None


def test_replication_entries_and_database_info():
    seq = PlaceSequence(
        "SWE", 2, True, [SequenceEvent("E1", "1990", "decrease", 1, 3, 1, True, True)]
    )
    assert seq["events"][0]["period"] == 1 and seq.events[0].period == 1
    rev = Reversal("SWE", "E1", "1990", "E2", "2001", True, True)
    assert rev == rev.to_dict()  # compares as a mapping
    info = DatabaseInfo("sqlite:///x.db", "sqlite", "r1", "r1", {"studies": 2})
    assert info.to_dict() == {"studies": 2, "url": "sqlite:///x.db", "revision": "r1"}
