"""Opportunity lists say what they leave out: beyond the three most used outcomes (or designs)
of a family, "and N more (...)" names the rest, so nothing is cut without saying so."""

from __future__ import annotations

import pandas as pd

from exposhift.replication.gaps import opportunities


def _units(outcomes: list[str]) -> pd.DataFrame:
    """Evaluated events of family 'a / ban': event i studied for outcomes[: i + 1]."""
    rows = []
    for i in range(len(outcomes)):
        for o in outcomes[: len(outcomes) - i]:
            rows.append(
                {
                    "event_id": f"E{i}",
                    "exposure": "a",
                    "change_kind": "ban",
                    "family": "a / ban",
                    "outcome": o,
                    "design": "its",
                }
            )
    return pd.DataFrame(rows)


def _registry() -> pd.DataFrame:
    return pd.DataFrame(
        [
            {
                "event_id": "NEW",
                "exposure": "a",
                "change_kind": "ban",
                "change_direction": "decrease",
                "change_size": 1.0,
                "country": "FRA",
                "area": None,
                "change_date": "2020",
                "family": "a / ban",
                "studies": 0,
                "change_year": 2020,
            }
        ]
    )


def test_more_than_three_outcomes_are_all_named():
    # o1 in 5 events, o2 in 4, o3 in 3, o4 in 2, o5 in 1 (counted by hand from _units)
    opp = opportunities(_registry(), _units(["o1", "o2", "o3", "o4", "o5"]))
    text = opp.loc[0, "outcomes_studied_elsewhere"]
    assert text == "o1 (5 events); o2 (4 events); o3 (3 events); and 2 more (o4, o5)"
    assert "and 2 more (o4, o5)" in opp.loc[0, "needs"]


def test_three_or_fewer_outcomes_have_no_tail():
    opp = opportunities(_registry(), _units(["o1", "o2", "o3"]))
    assert opp.loc[0, "outcomes_studied_elsewhere"] == "o1 (3 events); o2 (2 events); o3 (1 event)"
