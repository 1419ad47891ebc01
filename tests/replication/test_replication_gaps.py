"""Gap-map states, cell contents, filters and opportunities (pure level)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from replication_helpers import frame, unit

from exposhift.errors import ConfigError
from exposhift.replication.gaps import (
    CELL_COLUMNS,
    GAP_STATES,
    STATE_OF_STATUS,
    filter_frame,
    gap_map,
    opportunities,
    region_countries,
)
from exposhift.replication.settings import DEFAULTS


def crafted():
    """Exposures a, b, c over outcome groups g1, g2 (each cell built for one state)."""
    return frame(
        # a x g1: three good significant events in three places on one outcome ->
        # replicated in place (replicated-in-part: not in time or across designs), ready to pool;
        # a second outcome of the group is weak only
        unit(
            "A1",
            "FRA",
            2000,
            "decrease",
            0.2,
            0.05,
            2,
            exposure="a",
            outcome="o1",
            outcome_group="g1",
        ),
        unit(
            "A2",
            "ESP",
            2005,
            "decrease",
            0.1,
            0.05,
            3,
            exposure="a",
            outcome="o1",
            outcome_group="g1",
        ),
        unit(
            "A3",
            "ITA",
            2012,
            "decrease",
            0.15,
            0.05,
            2,
            exposure="a",
            outcome="o1",
            outcome_group="g1",
            study_id="S-shared",
        ),
        unit(
            "A1",
            "FRA",
            2000,
            "decrease",
            0.2,
            0.05,
            1,
            exposure="a",
            outcome="o2",
            outcome_group="g1",
            study_id="S-shared",
        ),
        # b x g1: one good event -> single-event; b x g2: weak only
        unit(
            "B1",
            "DEU",
            2007,
            "decrease",
            0.2,
            0.05,
            2,
            exposure="b",
            outcome="o1",
            outcome_group="g1",
        ),
        unit(
            "B2",
            "AUT",
            2008,
            "decrease",
            0.2,
            0.05,
            1,
            exposure="b",
            outcome="o3",
            outcome_group="g2",
        ),
        # c x g1: two good significant events in two places -> replicated-in-part
        unit(
            "C1",
            "NLD",
            2009,
            "decrease",
            0.2,
            0.05,
            2,
            exposure="c",
            outcome="o1",
            outcome_group="g1",
        ),
        unit(
            "C2",
            "BEL",
            2011,
            "decrease",
            0.2,
            0.05,
            2,
            exposure="c",
            outcome="o1",
            outcome_group="g1",
        ),
        # c x g2: good events, but nothing after 2005 -> stale when --stale-after 2005
        unit(
            "C3",
            "SWE",
            1995,
            "decrease",
            0.2,
            0.05,
            3,
            exposure="c",
            outcome="o3",
            outcome_group="g2",
        ),
        unit(
            "C4",
            "NOR",
            2005,
            "decrease",
            0.2,
            0.05,
            3,
            exposure="c",
            outcome="o3",
            outcome_group="g2",
        ),
        unit(
            "C5",
            "DNK",
            2004,
            "decrease",
            0.2,
            0.05,
            3,
            exposure="c",
            outcome="o3",
            outcome_group="g2",
        ),
    )


def cells(**kw):
    return gap_map(crafted(), **kw).set_index(["exposure", "outcome_group"])


def test_every_state_from_a_crafted_base():
    c = cells(stale_after=2005)
    assert list(gap_map(crafted()).columns) == list(CELL_COLUMNS)
    assert c.loc[("a", "g1"), "state"] == "replicated-in-part"
    assert c.loc[("a", "g1"), "ready_for_synthesis"]
    assert c.loc[("a", "g2"), "state"] == "no-study"
    assert c.loc[("b", "g1"), "state"] == "single-event"
    assert c.loc[("b", "g2"), "state"] == "weak-only"
    assert c.loc[("c", "g1"), "state"] == "replicated-in-part"
    assert not c.loc[("c", "g1"), "ready_for_synthesis"]
    assert c.loc[("c", "g2"), "state"] == "stale"
    assert set(c["state"]) <= set(GAP_STATES)
    # the state explains the status beside it: never a contradiction in words
    for status, state in zip(c["status"], c["state"], strict=True):
        assert state == "stale" or state == STATE_OF_STATUS[status]
    # without a stale year the same cell is judged on its events
    assert cells().loc[("c", "g2"), "state"] == "replicated-in-part"
    # a stale year before every change leaves no cell stale
    assert "stale" not in set(cells(stale_after=1990)["state"])


def test_cell_contents():
    c = cells()
    a = c.loc[("a", "g1")]
    assert (a["events"], a["studies"], a["best_level"]) == (3, 3, 3.0)
    assert a["outcomes"] == 2 and a["good_events"] == 3
    assert a["status"] == "replicated-place" and a["status_outcome"] == "o1"
    assert a["not_yet"] == "time, designs" and a["newest_year"] == 2012
    assert c.loc[("a", "g2"), "status"] == "none" and c.loc[("a", "g2"), "events"] == 0
    assert np.isnan(c.loc[("a", "g2"), "best_level"])
    assert c.loc[("c", "g1"), "status"] == "replicated-place"
    assert c.loc[("b", "g2"), "status"] == "weak-only"
    assert "enough to pool (≥ 3)" in a["state_rule"]


def test_threshold_settings_change_states():
    c = gap_map(crafted(), settings=DEFAULTS.with_(ready_min_events=4)).set_index(
        ["exposure", "outcome_group"]
    )
    assert not c.loc[("a", "g1"), "ready_for_synthesis"]
    # the rule names the cell's own count (3 good events)
    assert (
        "3 independent event(s) at level ≥ 2 on the best-covered outcome"
        in c.loc[("a", "g1"), "state_rule"]
    )
    assert "enough to pool" not in c.loc[("a", "g1"), "state_rule"]
    c = gap_map(crafted(), settings=DEFAULTS.with_(min_level=3)).set_index(
        ["exposure", "outcome_group"]
    )
    assert c.loc[("a", "g1"), "state"] == "single-event"
    assert c.loc[("c", "g1"), "state"] == "weak-only"


def test_studies_count_includes_studies_set_aside_as_duplicates():
    units = crafted()
    dup = units.iloc[[0]].assign(study_id="S-duplicate")
    all_estimates = pd.concat([units, dup], ignore_index=True)
    c = gap_map(units, all_estimates=all_estimates).set_index(["exposure", "outcome_group"])
    assert c.loc[("a", "g1"), "studies"] == 4 and c.loc[("a", "g1"), "events"] == 3


def registry():
    return pd.DataFrame(
        [
            {
                "event_id": "A1",
                "exposure": "a",
                "change_kind": "ban",
                "change_direction": "decrease",
                "change_size": 2.0,
                "country": "FRA",
                "area": None,
                "change_date": "2000",
                "family": "a / ban",
                "studies": 2,
                "change_year": 2000,
            },
            {
                "event_id": "A9",
                "exposure": "a",
                "change_kind": "ban",
                "change_direction": "decrease",
                "change_size": None,
                "country": "POL",
                "area": "two regions",
                "change_date": "2019-05",
                "family": "a / ban",
                "studies": 0,
                "change_year": 2019,
            },
            {
                "event_id": "D1",
                "exposure": "d",
                "change_kind": "closure",
                "change_direction": "decrease",
                "change_size": 4.0,
                "country": "KEN",
                "area": None,
                "change_date": "2015",
                "family": "d / closure",
                "studies": 0,
                "change_year": 2015,
            },
        ]
    )


def test_registered_exposures_get_rows_and_unevaluated_counts():
    c = gap_map(crafted(), registry=registry()).set_index(["exposure", "outcome_group"])
    assert c.loc[("d", "g1"), "state"] == "no-study"
    assert c.loc[("d", "g1"), "unevaluated_events"] == 1
    assert c.loc[("a", "g1"), "unevaluated_events"] == 1
    assert c.loc[("b", "g1"), "unevaluated_events"] == 0


def test_opportunities_list_unevaluated_events_with_what_is_needed():
    units = crafted().assign(change_kind="ban", family=lambda d: d["exposure"] + " / ban")
    opp = opportunities(registry(), units)
    assert opp["event_id"].tolist() == ["A9", "D1"]
    a9 = opp.iloc[0]
    assert a9["family_events_evaluated"] == 3
    assert a9["outcomes_studied_elsewhere"] == "o1 (3 events); o2 (1 event)"
    assert "outcome data for POL (two regions) before and after 2019-05" in a9["needs"]
    assert "a comparison that did not have the change" in a9["needs"]
    assert "the size of the exposure change (not recorded)" in a9["needs"]
    assert "size of the exposure change" not in opp.iloc[1]["needs"]
    assert opp.iloc[1]["family_events_evaluated"] == 0
    # filters by country and year
    assert opportunities(registry(), units, countries={"KEN"})["event_id"].tolist() == ["D1"]
    assert opportunities(registry(), units, year_to=2016)["event_id"].tolist() == ["D1"]


def test_filters():
    df = crafted()
    assert set(filter_frame(df, countries={"fra", "ESP"})["event_id"]) == {"A1", "A2"}
    assert set(filter_frame(df, year_from=2009, year_to=2011)["event_id"]) == {"C1", "C2"}
    assert (filter_frame(df, min_level=3)["level"] >= 3).all()
    assert filter_frame(df, design_families=["weighted-fit"]).empty
    assert region_countries(["Europe"]) >= {"FRA", "PRT", "SWE"}
    assert "KEN" in region_countries(["africa", "europe"])
    with pytest.raises(ConfigError, match="unknown region 'atlantis'; known regions: africa"):
        region_countries(["atlantis"])
