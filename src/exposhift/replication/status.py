"""One replication status per exposure × outcome, with the rule that produced it in words.

Statuses (ours), checked in this order; the first that applies is the status:

1. ``none`` — no independent estimate.
2. ``weak-only`` — no independent event at level ≥ ``min_level`` (all evidence at level ≤ 1
   or not yet appraised).
3. ``discordant`` — at level ≥ ``min_level``, at least one event with a significant effect in
   each direction (so ≥ 2 events), or design families whose pooled estimates point in opposite
   directions with Q-between p < ``alpha_between``.
4. ``convergent`` — replicated in place *and* in time *and* triangulated across
   ≥ ``min_design_families`` design families.
5. ``replicated-place`` — ≥ ``min_places`` places with a concordant event at level ≥
   ``min_level``.
6. ``replicated-time`` — ≥ ``min_periods`` separate periods with a concordant event at level ≥
   ``min_level`` in one place (a reversal counts).
7. ``single-event`` — evidence at level ≥ ``min_level`` exists but no replication rule is met:
   it rests on one event, or on events in one place and one period.

The rules of each ingredient are in :mod:`~exposhift.replication.families` (expected
direction, concordance), :mod:`~exposhift.replication.spatial`,
:mod:`~exposhift.replication.temporal` and :mod:`~exposhift.replication.triangulation`. The whole
computation is grouped (one pass over the evidence base, no loop over exposure × outcome pairs);
only the rule sentences are formatted row by row.

Status labels support, never replace, expert judgement, local regulation and licensed practice.
"""

from __future__ import annotations

from collections import namedtuple
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from exposhift.replication.families import (
    DEFAULT_BY,
    event_table,
    expected_sign,
    mark_concordance,
    prepare_units,
)
from exposhift.replication.settings import DEFAULTS, ReplicationSettings
from exposhift.replication.spatial import spatial_summary
from exposhift.replication.temporal import temporal_summary
from exposhift.replication.triangulation import family_pools, triangulation_summary
from exposhift.synthesis.pooling import CAUTION as POOLING_CAUTION

#: statuses from strongest to weakest (the order used when a gap-map cell shows the best one)
STATUSES: dict[str, str] = {
    "convergent": "replicated in place and in time, and design families agree",
    "replicated-place": "the same kind of change had a concordant effect in two or more places",
    "replicated-time": "the same kind of change had a concordant effect again later in one place",
    "discordant": "good events or design families point in opposite directions",
    "single-event": "good evidence rests on one event (or one place and period)",
    "weak-only": "all evidence is weak or not yet appraised",
    "none": "no natural-experiment estimate",
}
STATUS_RANK: dict[str, int] = {s: i for i, s in enumerate(STATUSES)}

#: the caution shown beside statuses: the same text as beside pooled numbers
CAUTION = POOLING_CAUTION


@dataclass(frozen=True)
class Analysis:
    """Everything computed for a set of keys: units, events, expected sign, pools, statuses."""

    units: pd.DataFrame
    events: pd.DataFrame
    expected: pd.DataFrame
    pools: pd.DataFrame
    statuses: pd.DataFrame


_FILL = {
    "n_events": 0, "n_good": 0, "n_weak": 0, "n_unappraised": 0, "n_good_concordant": 0,
    "places_count": 0, "places_list": "", "sign_n": 0, "sign_k": 0, "sig_pos": False,
    "sig_neg": False, "time_periods": 0, "time_place": "", "replicated_time": False,
    "reversal": False, "reversal_place": "", "n_families": 0, "families_concordant": 0,
    "q_between_df": 0, "families_disagree": False, "triangulated": False, "families_list": "",
}


def analyse(
    frame: pd.DataFrame, by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
) -> Analysis:
    """Replication analysis of every key of a harmonised, independent frame at once."""
    by = list(by)
    units = prepare_units(frame, settings, by)
    events = event_table(units, by)
    expected = expected_sign(events, by, settings)
    events = mark_concordance(events, expected, by, settings)
    units = mark_concordance(units, expected, by, settings)
    pools = family_pools(units, by, settings)
    out = spatial_summary(events, by, settings).merge(expected, on=by, how="left")
    out = out.merge(temporal_summary(events, by, settings), on=by, how="left")
    out = out.merge(triangulation_summary(pools, expected, by, settings), on=by, how="left")
    for col, value in _FILL.items():
        if col in out.columns:
            out[col] = out[col].where(out[col].notna(), value).astype(type(value))
    for col in ("q_between", "q_between_p", "sign_test_p", "sign_share", "stouffer_z"):
        out[col] = out[col].astype("float64")
    out["replicated_place"] = out["places_count"] >= settings.min_places
    out["status"] = _status(out)
    out["rule"] = rule_texts(out, settings)
    return Analysis(units=units, events=events, expected=expected, pools=pools, statuses=out)


def replication_statuses(
    frame: pd.DataFrame, by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
) -> pd.DataFrame:
    """One row per key with ``status``, ``rule`` and the counts behind them."""
    return analyse(frame, by, settings).statuses


def _status(t: pd.DataFrame) -> np.ndarray:
    discordant = (t["sig_pos"] & t["sig_neg"]) | t["families_disagree"]
    conditions = [
        t["n_events"].to_numpy() == 0,
        t["n_good"].to_numpy() == 0,
        discordant.to_numpy(dtype=bool),
        (t["replicated_place"] & t["replicated_time"] & t["triangulated"]).to_numpy(dtype=bool),
        t["replicated_place"].to_numpy(dtype=bool),
        t["replicated_time"].to_numpy(dtype=bool),
    ]
    choices = ["none", "weak-only", "discordant", "convergent", "replicated-place",
               "replicated-time"]
    return np.select(conditions, choices, default="single-event").astype(object)


def _n(x: int, word: str) -> str:
    return f"{x} {word}{'' if x == 1 else 's'}"


def rule_texts(t: pd.DataFrame, s: ReplicationSettings) -> list[str]:
    """The rule that produced each row's status, in words (thresholds from the settings)."""
    lv = f"level ≥ {s.min_level}"
    out = []
    cols = ["status", "n_events", "n_good", "n_weak", "n_unappraised", "n_good_concordant",
            "places_count", "places_list", "time_periods", "time_place", "reversal",
            "reversal_place", "families_concordant", "families_list", "q_between",
            "q_between_df", "q_between_p", "sig_pos", "sig_neg", "families_disagree",
            "replicated_place", "replicated_time", "triangulated"]
    Row = namedtuple("Row", cols)
    data = [t[c].tolist() for c in cols]  # plain Python values: fast to format
    for r in map(Row._make, zip(*data, strict=True)):
        rev = f", including a reversal in {r.reversal_place}" if r.reversal else ""
        place = f"{_n(r.places_count, 'place')} ({r.places_list})" if r.places_count else \
            "no place"
        time = f"{_n(r.time_periods, 'separate period')} in {r.time_place}{rev}" \
            if r.time_periods else "no period"
        if r.status == "none":
            text = "no independent natural-experiment estimate for this exposure and outcome"
        elif r.status == "weak-only":
            text = (f"none of the {_n(r.n_events, 'independent event')} has evidence at {lv} "
                    f"({r.n_weak} weaker, {r.n_unappraised} not appraised)")
        elif r.status == "discordant":
            parts = []
            if r.sig_pos and r.sig_neg:
                parts.append(f"events at {lv} have significant effects in opposite "
                             f"directions (alpha {s.alpha:g})")
            if r.families_disagree:
                parts.append(f"design families ({r.families_list}) point in opposite "
                             f"directions with Q-between = {r.q_between:.2f} on "
                             f"{r.q_between_df} df, p = {r.q_between_p:.3g} < "
                             f"{s.alpha_between:g}")
            text = "; ".join(parts)
        elif r.status == "convergent":
            text = (f"replicated in place ({place}), in time ({time}) and across "
                    f"{r.families_concordant} design families agreeing in direction "
                    f"({r.families_list}); rule: ≥ {s.min_places} places, ≥ {s.min_periods} "
                    f"periods in one place, ≥ {s.min_design_families} design families, "
                    f"all at {lv}")
        elif r.status == "replicated-place":
            also = f"; also replicated in time ({time})" if r.replicated_time else ""
            text = (f"{place} have an event at {lv} in the expected direction "
                    f"(rule: ≥ {s.min_places} places){also}")
        elif r.status == "replicated-time":
            text = (f"in {r.time_place}, {r.time_periods} separate periods have an event at {lv} "
                    f"in the expected direction{rev}; other places: "
                    f"{r.places_count - 1} (rule: ≥ {s.min_periods} periods in one place, "
                    f"≥ {s.min_years_apart} year(s) apart)")
        else:
            text = (f"{_n(r.n_good_concordant, 'event')} at {lv} in the expected direction, "
                    f"in {place}, at most {_n(r.time_periods, 'period')} in one place; no "
                    "replication rule is met (needs "
                    f"≥ {s.min_places} places or ≥ {s.min_periods} periods in one place)")
        if r.status not in ("none", "weak-only", "discordant", "convergent"):
            if r.triangulated:
                text += f"; design families agree ({r.families_list})"
            elif r.families_concordant:
                text += (f"; {_n(r.families_concordant, 'design family')} in the expected "
                         f"direction (triangulation needs ≥ {s.min_design_families})")
        out.append(f"{r.status}: {text}")
    return out
