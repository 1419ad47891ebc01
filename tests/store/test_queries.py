"""The analysis frame: one row per estimate with sheet column names and derived columns."""

from __future__ import annotations

import math

from exposhift.io.columns import ANALYSIS_EXTRA, COLUMN_NAMES
from exposhift.store import records
from exposhift.store.queries import analysis_frame, events_frame
from exposhift.store.writer import Writer


def _fill(store):
    with store.write() as conn:
        w = Writer(conn, "t")
        exp = records.ensure_vocab(w, "exposure", "agent-x")
        out = records.ensure_vocab(w, "outcome", "asthma", {"outcome_group": "respiratory"})
        ev1 = records.create(
            w,
            "event",
            {
                "key": "E1",
                "exposure_id": exp,
                "change_kind": "ban",
                "change_direction": "decrease",
                "country": "FRA",
                "change_date": "1999-03-01",
            },
        )
        records.create(
            w,
            "event",
            {
                "key": "E2",
                "exposure_id": exp,
                "change_kind": "ban",
                "change_direction": "decrease",
                "country": "ESP",
                "change_date": "2004",
                "family": "agent-x bans",
            },
        )
        st = records.create(
            w, "study", {"key": "S1", "citation": "c", "year": 2003, "design": "did"}
        )
        records.create(
            w,
            "estimate",
            {
                "key": "S1|E1|asthma|RR|change||",
                "study_id": st,
                "event_id": ev1,
                "outcome_id": out,
                "measure": "RR",
                "point": 0.9,
                "ci_low": 0.8,
                "ci_high": 1.01,
            },
        )
        ap = records.create(
            w,
            "appraisal",
            {
                "study_id": st,
                "reviewer": "panel",
                "stage": "consensus",
                "rubric_id": "r",
                "rubric_hash": "h",
                "overall": 2,
            },
        )
        assert ap
        w.flush()


def test_analysis_frame_columns_and_derived_values(store):
    _fill(store)
    with store.read() as conn:
        frame = analysis_frame(conn)
        empty = analysis_frame(conn, exposure="nothing")
    assert len(frame) == 1 and empty.empty
    for col in (*COLUMN_NAMES, *ANALYSIS_EXTRA):
        assert col in frame.columns, col
    row = frame.iloc[0]
    assert row["design_family"] == "common-trend"
    assert row["change_year"] == 1999 and row["level"] == 2.0
    assert row["family"] == "agent-x / ban"
    assert math.isclose(row["estimate"], 0.9)


def test_events_frame_counts_studies_and_keeps_unstudied_events(store):
    _fill(store)
    with store.read() as conn:
        events = events_frame(conn).set_index("event_id")
    assert events.loc["E1", "studies"] == 1 and events.loc["E2", "studies"] == 0
    assert events.loc["E2", "family"] == "agent-x bans"
