"""The reason written for each estimate select_independent() sets aside, every preference in
one call (the reasons are written for all rows at once, so one frame mixes them all).

The preferences and their order are METHODS.md section 4 and our own documented tie-breakers
(see test_synthesis_independence.py); the sentences are the wording the function documents.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from exposhift.synthesis.independence import select_independent


def est(uid, study, event, **kw):
    base = {
        "estimate_uid": uid,
        "study_id": study,
        "event_id": event,
        "population": "adults",
        "data_source": "registry",
        "outcome": "asthma",
        "measure_group": "ratio",
        "estimate_kind": "change",
        "primary": False,
        "re_estimated": False,
        "level": 2.0,
        "subgroup": "",
        "v": 0.02,
        "same_population_as": "",
    }
    base.update(kw)
    return base


SAME = "same event {e}, population, data source and outcome as study {s}'s estimate {u}"


def test_every_preference_in_one_call():
    rows = [
        est("a1", "S1", "E1"),
        est("a2", "S2", "E1", primary=True),  # primary wins
        est("b1", "S1", "E2", re_estimated=True, v=0.001),
        est("b2", "S2", "E2"),  # published wins over re-estimated
        est("c1", "S1", "E3", level=np.nan),
        est("c2", "S2", "E3", level=1.0),  # appraised wins
        est("d1", "S1", "E4", level=3.0),
        est("d2", "S2", "E4", level=1.0),  # better level wins
        est("f1", "S1", "E5", subgroup="women", v=0.001),
        est("f2", "S2", "E5"),  # whole population wins
        est("g1", "S1", "E6", v=0.05),
        est("g2", "S2", "E6", v=0.01),  # more precise wins
        est("h2", "S1", "E7"),
        est("h1", "S2", "E7"),  # identifier
        # wording that normalises to the same population and data source
        est("k1", "S1", "E8", population="Adults.", data_source="Registries", v=0.03),
        est("k2", "S2", "E8"),
        # different populations linked by same_population_as
        est("m1", "S1", "E9", population="children", same_population_as="S2", v=0.03),
        est("m2", "S2", "E9", population="pupils"),
    ]
    kept, ex = select_independent(pd.DataFrame(rows))
    assert sorted(kept["estimate_uid"]) == ["a2", "b2", "c2", "d1", "f2", "g2", "h1", "k2", "m2"]
    reasons = dict(zip(ex["estimate_uid"], ex["reason"], strict=True))
    names = dict(zip(ex["estimate_uid"], ex["kept_estimate"], strict=True))
    why = {
        "a1": ("E1", "S2", "a2", "", "it is flagged primary"),
        "b1": (
            "E2",
            "S2",
            "b2",
            "",
            "it is the published estimate (this one is re-estimated from an extracted series; "
            "flag it primary to use it instead)",
        ),
        "c1": ("E3", "S2", "c2", "", "it is better appraised (level 1 vs not appraised)"),
        "d2": ("E4", "S1", "d1", "", "it is better appraised (level 3 vs 1)"),
        "f1": (
            "E5",
            "S2",
            "f2",
            "",
            "it covers the whole population (this one is subgroup 'women')",
        ),
        "g1": ("E6", "S2", "g2", "", "it is more precise (variance 0.01 vs 0.05)"),
        "h2": ("E7", "S2", "h1", "", "it comes first by identifier (tie on every other criterion)"),
        "k1": (
            "E8",
            "S2",
            "k2",
            " (data_source 'Registries' and 'registry'; population 'Adults.' and 'adults' read "
            "as the same after ignoring case, plural, punctuation and spacing)",
            "it is more precise (variance 0.02 vs 0.03)",
        ),
        "m1": (
            "E9",
            "S2",
            "m2",
            " (populations overlap: overlap group S1, marked with same_population_as)",
            "it is more precise (variance 0.02 vs 0.03)",
        ),
    }
    assert set(reasons) == set(why)
    for uid, (event, study, kept_uid, how, because) in why.items():
        expected = SAME.format(e=event, s=study, u=kept_uid) + how + ", kept because " + because
        assert reasons[uid] == expected, uid
        assert names[uid] == kept_uid


def test_rows_without_identifiers_are_named_by_row():
    frame = pd.DataFrame([est("", "", "E1", v=0.05), est("", "", "E1", v=0.01)], index=[10, 11])
    kept, ex = select_independent(frame)
    assert list(kept.index) == [11]
    assert ex["kept_estimate"].tolist() == ["11"]
    assert ex["reason"].tolist() == [
        "same event E1, population, data source and outcome as row 11, kept because it is "
        "more precise (variance 0.01 vs 0.05)"
    ]


def test_nothing_set_aside():
    kept, ex = select_independent(pd.DataFrame([est("a", "S1", "E1"), est("b", "S1", "E2")]))
    assert len(kept) == 2 and ex.empty
    assert list(ex.columns[-2:]) == ["kept_estimate", "reason"]
