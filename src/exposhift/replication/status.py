"""One replication status per exposure × outcome, with the rule that produced it in words.

The evidence set: independent *good* events (overall appraisal level ≥ ``min_level``), one
number per event (:func:`exposhift.replication.families.event_table`). The headline pooled
number shown with the status is the event-level random-effects pool of exactly these events in
the cell's main stratum (the measure group × estimate kind × increment with the most good
events; REML, Hartung–Knapp floored at 1 by default), so the status and the number beside it
rest on the same evidence.

An event **counts** for replication when it is good, points in the expected direction, and
either its own Wald interval excludes no effect (significant at ``alpha``) or the pooled
estimate of *all* the good events of the main stratum excludes no effect in that direction.
(Pooling only the events that agree would select on the outcome, so the pooled route uses them
all.) An event counts *against* the expected direction by the same rule with the direction
reversed.

Statuses (ours), checked in this order; the first that applies is the status:

1. ``none`` — no independent estimate.
2. ``weak-only`` — no good event (all evidence at level below ``min_level`` or not appraised).
3. ``single-event`` — exactly one good event.
4. ``discordant`` — good events with significant effects in both directions, a significant good
   event against the majority direction of the good events, or design families that disagree
   (opposite directions and a significant test of equal family effects).
5. ``convergent`` — replicated in place *and* in time *and* triangulated across
   ≥ ``min_design_families`` design families, in the expected direction.
6. ``replicated-place`` — ≥ ``min_places`` places with an event that counts.
7. ``replicated-time`` — ≥ ``min_periods`` separate periods with an event that counts in one
   place (a reversal counts).
8. ``replicated-against`` — the place or time rule is met *against* the expected direction.
9. ``not-replicated`` — two or more good events, but no rule above is met.

When the expected direction was inferred from the same data (no committee direction, setting
``expected_direction = "pooled"``) the status is **provisional** (``provisional`` column, and the
rule says so). A replication status (``convergent``, ``replicated-place``, ``replicated-time``,
``replicated-against``) whose headline pooled interval does not exclude no effect in the
direction it claims is **imprecise** (``imprecise`` column, and the rule says so): the events
each found the effect, but their average is not pinned down — with two events a Hartung–Knapp
interval rests on a t with 1 df and is wide. The status stays (each event's own interval is the
replication rule, METHODS §5) and the qualifier keeps the label from saying more than the
pooled number beside it. :func:`status_label` writes both qualifiers one way everywhere.
Every rule states the number of good events, the sign test with its minimum
attainable p at that number, and the headline pooled number.

The whole computation is grouped (one pass over the evidence base, no loop over exposure ×
outcome pairs); only the rule sentences are formatted row by row.

Status labels support, never replace, expert judgement, local regulation and licensed practice.
"""

from __future__ import annotations

import math
from collections import namedtuple
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from exposhift import cautions
from exposhift.replication.families import (
    DEFAULT_BY,
    event_table,
    expected_sign,
    mark_concordance,
    prepare_units,
)
from exposhift.replication.headline import cell_pools, mark_counts
from exposhift.replication.settings import DEFAULTS, ReplicationSettings
from exposhift.replication.spatial import spatial_summary
from exposhift.replication.temporal import temporal_summary
from exposhift.replication.triangulation import family_pools, triangulation_summary

#: statuses from strongest to weakest (the order used when a gap-map cell shows the best one)
STATUSES: dict[str, str] = {
    "convergent": "replicated in place and in time, and design families agree",
    "replicated-place": "the effect was found, in the expected direction, in two or more places",
    "replicated-time": "the effect was found again, in the expected direction, later in one place",
    "replicated-against": "the effect replicates, but against the expected direction",
    "discordant": "good events or design families point in opposite directions",
    "not-replicated": "two or more good events, but no replication rule is met",
    "single-event": "good evidence rests on one event",
    "weak-only": "all evidence is weak or not yet appraised",
    "none": "no natural-experiment estimate",
}
STATUS_RANK: dict[str, int] = {s: i for i, s in enumerate(STATUSES)}
#: the replication statuses and the headline flag that must hold for the pooled number beside
#: them to back them (else the status is marked imprecise)
BACKED_BY: dict[str, str] = {
    "convergent": "pooled_supports",
    "replicated-place": "pooled_supports",
    "replicated-time": "pooled_supports",
    "replicated-against": "pooled_against",
}


def status_label(status: str, provisional: bool = False, imprecise: bool = False) -> str:
    """A status with its qualifiers, written one way wherever a status is shown:
    ``replicated-place (provisional, imprecise)``."""
    quals = [w for w, on in (("provisional", provisional), ("imprecise", imprecise)) if on]
    return f"{status} ({', '.join(quals)})" if quals else status


#: the caution shown beside statuses (exposhift.cautions)
CAUTION = cautions.REPLICATION


@dataclass(frozen=True)
class Analysis:
    """Everything computed for a set of keys: units, events, expected sign, pools, statuses."""

    units: pd.DataFrame
    events: pd.DataFrame
    expected: pd.DataFrame
    pools: pd.DataFrame
    statuses: pd.DataFrame


_FILL = {
    "n_events": 0,
    "n_good": 0,
    "n_weak": 0,
    "n_unappraised": 0,
    "n_good_concordant": 0,
    "n_counting": 0,
    "places_count": 0,
    "places_list": "",
    "places_rev_count": 0,
    "places_rev_list": "",
    "sign_n": 0,
    "sign_k": 0,
    "sig_pos": False,
    "sig_neg": False,
    "sig_against_majority": False,
    "time_periods": 0,
    "time_place": "",
    "replicated_time": False,
    "reversal": False,
    "reversal_place": "",
    "time_rev_periods": 0,
    "time_rev_place": "",
    "replicated_time_rev": False,
    "n_families": 0,
    "families_concordant": 0,
    "q_between_df": 0,
    "families_disagree": False,
    "triangulated": False,
    "families_list": "",
    "families_test_note": "",
    "pooled_k_events": 0,
    "pooled_k_estimates": 0,
    "pooled_supports": False,
    "pooled_against": False,
    "pooled_stratum": "",
    "pooled_scale": "",
    "expected_source": "inferred",
}


def analyse(
    frame: pd.DataFrame,
    by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
    directions: pd.DataFrame | None = None,
) -> Analysis:
    """Replication analysis of every key of a harmonised, independent frame at once.

    ``directions``: the committee's pre-specified expected directions (``exposure``,
    ``outcome``, ``direction``), see :func:`exposhift.replication.families.expected_sign`.
    """
    by = list(by)
    units = prepare_units(frame, settings, by)
    events = event_table(units, by, settings)
    expected = expected_sign(events, by, settings, directions)
    events = mark_concordance(events, expected, by, settings)
    units = mark_concordance(units, expected, by, settings)
    headline = cell_pools(events, expected, by, settings)
    events = mark_counts(events, headline, by)
    pools = family_pools(units, by, settings)
    out = spatial_summary(events, by, settings).merge(expected, on=by, how="left")
    out = out.merge(temporal_summary(events, by, settings), on=by, how="left")
    rev = temporal_summary(events, by, settings, counts="counts_rev").rename(
        columns={
            "time_periods": "time_rev_periods",
            "time_place": "time_rev_place",
            "replicated_time": "replicated_time_rev",
        }
    )
    out = out.merge(
        rev[[*by, "time_rev_periods", "time_rev_place", "replicated_time_rev"]], on=by, how="left"
    )
    out = out.merge(triangulation_summary(pools, expected, by, settings, units), on=by, how="left")
    out = out.merge(
        headline.drop(columns=["_main_mg", "_main_kind", "_main_inc"]), on=by, how="left"
    )
    for col, value in _FILL.items():
        if col in out.columns:
            out[col] = out[col].where(out[col].notna(), value).astype(type(value))
    for col in (
        "q_between",
        "q_between_p",
        "sign_test_p",
        "sign_min_p",
        "sign_share",
        "stouffer_z",
    ):
        out[col] = out[col].astype("float64")
    out["replicated_place"] = out["places_count"] >= settings.min_places
    out["replicated_against"] = (out["places_rev_count"] >= settings.min_places) | out[
        "replicated_time_rev"
    ]
    out["provisional"] = False  # set below, once the status is known
    out["status"] = _status(out)
    # a direction inferred from the same data makes every label that uses it provisional
    out["provisional"] = (out["expected_source"] == "inferred") & ~out["status"].isin(
        ["none", "weak-only", "single-event"]
    )
    # a replication status whose pooled number does not back it says so
    imprecise = np.zeros(len(out), dtype=bool)
    for status, flag in BACKED_BY.items():
        imprecise |= ((out["status"] == status) & ~out[flag].astype(bool)).to_numpy(dtype=bool)
    out["imprecise"] = imprecise
    out["rule"] = rule_texts(out, settings)
    return Analysis(units=units, events=events, expected=expected, pools=pools, statuses=out)


def replication_statuses(
    frame: pd.DataFrame,
    by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
    directions: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """One row per key with ``status``, ``rule`` and the counts behind them."""
    return analyse(frame, by, settings, directions).statuses


def _status(t: pd.DataFrame) -> np.ndarray:
    discordant = (t["sig_pos"] & t["sig_neg"]) | t["sig_against_majority"] | t["families_disagree"]
    conditions = [
        t["n_events"].to_numpy() == 0,
        t["n_good"].to_numpy() == 0,
        t["n_good"].to_numpy() == 1,
        discordant.to_numpy(dtype=bool),
        (t["replicated_place"] & t["replicated_time"] & t["triangulated"]).to_numpy(dtype=bool),
        t["replicated_place"].to_numpy(dtype=bool),
        t["replicated_time"].to_numpy(dtype=bool),
        t["replicated_against"].to_numpy(dtype=bool),
    ]
    choices = [
        "none",
        "weak-only",
        "single-event",
        "discordant",
        "convergent",
        "replicated-place",
        "replicated-time",
        "replicated-against",
    ]
    return np.select(conditions, choices, default="not-replicated").astype(object)


def _n(x: int, word: str) -> str:
    return f"{x} {word}{'' if x == 1 else 's'}"


def rule_texts(t: pd.DataFrame, s: ReplicationSettings) -> list[str]:
    """The rule that produced each row's status, in words, with the numbers behind it."""
    lv = f"level ≥ {s.min_level}"
    out = []
    cols = [
        "status",
        "n_events",
        "n_good",
        "n_weak",
        "n_unappraised",
        "n_good_concordant",
        "n_counting",
        "places_count",
        "places_list",
        "places_rev_count",
        "places_rev_list",
        "time_periods",
        "time_place",
        "reversal",
        "reversal_place",
        "time_rev_periods",
        "time_rev_place",
        "families_concordant",
        "families_list",
        "q_between",
        "q_between_df",
        "q_between_p",
        "sig_pos",
        "sig_neg",
        "sig_against_majority",
        "families_disagree",
        "replicated_place",
        "replicated_time",
        "triangulated",
        "sign_n",
        "sign_k",
        "sign_test_p",
        "sign_min_p",
        "expected",
        "provisional",
        "imprecise",
        "pooled_k_events",
        "pooled_k_estimates",
        "pooled_estimate",
        "pooled_ci_lower",
        "pooled_ci_upper",
        "pooled_scale",
        "pooled_stratum",
        "pooled_supports",
        "pooled_against",
    ]
    Row = namedtuple("Row", cols)
    data = [t[c].tolist() for c in cols]  # plain Python values: fast to format
    for r in map(Row._make, zip(*data, strict=True)):
        out.append(f"{r.status}: {_rule(r, s, lv)}{_imprecise(r)}{_numbers(r, lv)}")
    return out


def _imprecise(r: tuple) -> str:
    if not r.imprecise:
        return ""
    if not r.pooled_k_events:
        return "; imprecise: no pooled estimate of the good events backs it"
    return (
        f"; imprecise: the pooled estimate of the {_n(r.pooled_k_events, 'good event')} does "
        "not exclude no effect, so the size of the average effect (even its sign) is not "
        "settled"
    )


def _route(r: tuple, against: bool = False) -> str:
    backed = r.pooled_against if against else r.pooled_supports
    if backed:
        return (
            "an event pointing that way, significant or backed by the pooled estimate of "
            "the good events (which excludes no effect)"
        )
    return (
        "an event significant in that direction (the pooled estimate alone does not "
        "exclude no effect)"
    )


def _rule(r: tuple, s: ReplicationSettings, lv: str) -> str:
    rev = f", including a reversal in {r.reversal_place}" if r.reversal else ""
    place = f"{_n(r.places_count, 'place')} ({r.places_list})" if r.places_count else "no place"
    time = (
        f"{_n(r.time_periods, 'separate period')} in {r.time_place}{rev}"
        if r.time_periods
        else "no period"
    )
    prov = (
        "provisional, the expected direction was inferred from these same events (set it "
        "in advance with 'exposhift direction set'); "
        if r.provisional
        else ""
    )
    if r.status == "none":
        return "no independent natural-experiment estimate for this exposure and outcome"
    if r.status == "weak-only":
        return (
            f"none of the {_n(r.n_events, 'independent event')} has evidence at {lv} "
            f"({r.n_weak} weaker, {r.n_unappraised} not appraised)"
        )
    if r.status == "single-event":
        return (
            f"one independent event at {lv} ({r.n_events - 1} more below it or not "
            "appraised): nothing to replicate it"
        )
    if r.status == "discordant":
        parts = []
        if r.sig_pos and r.sig_neg:
            parts.append(
                f"events at {lv} have significant effects in opposite directions "
                f"(alpha {s.alpha:g})"
            )
        elif r.sig_against_majority:
            parts.append(
                f"an event at {lv} has a significant effect against the direction "
                f"most good events point in (alpha {s.alpha:g})"
            )
        if r.families_disagree:
            parts.append(
                f"design families ({r.families_list}) point in opposite directions "
                f"and their effects differ: test of equal family effects "
                f"{r.q_between:.2f} on {r.q_between_df} df, p = {r.q_between_p:.3g} "
                f"< {s.alpha_between:g}"
            )
        return "; ".join(parts)
    if r.status == "convergent":
        return (
            f"{prov}replicated in place ({place}), in time ({time}) and across "
            f"{r.families_concordant} design families agreeing in direction "
            f"({r.families_list}); each place and period has {_route(r)}; rule: "
            f"≥ {s.min_places} places, ≥ {s.min_periods} periods in one place, "
            f"≥ {s.min_design_families} design families"
        )
    if r.status == "replicated-place":
        also = f"; also replicated in time ({time})" if r.replicated_time else ""
        return f"{prov}{place} each have {_route(r)} (rule: ≥ {s.min_places} places){also}" + _tri(
            r, s
        )
    if r.status == "replicated-time":
        return (
            f"{prov}in {r.time_place}, {r.time_periods} separate periods each have "
            f"{_route(r)}{rev} (rule: ≥ {s.min_periods} periods in one place, change "
            f"dates ≥ {s.min_months_apart} months apart); places with an event that "
            f"counts: {r.places_count}" + _tri(r, s)
        )
    if r.status == "replicated-against":
        where = (
            f"{_n(r.places_rev_count, 'place')} ({r.places_rev_list})"
            if r.places_rev_count >= s.min_places
            else f"{_n(r.time_rev_periods, 'period')} in {r.time_rev_place}"
        )
        exp = "raise" if r.expected > 0 else "lower"
        return (
            f"{prov}an exposure increase was expected to {exp} the outcome, but {where} "
            f"each have {_route(r, against=True).replace('that way', 'the other way')}"
        )
    if r.expected == 0:
        return (
            f"{_n(r.n_good, 'event')} at {lv}, but no expected direction: the events' "
            "z statistics cancel out"
        )
    return (
        f"{prov}{_n(r.n_good, 'event')} at {lv}, {r.n_good_concordant} pointing in the "
        f"expected direction, {r.n_counting} of them significant or backed by a pooled "
        "estimate that excludes no effect; no replication rule is met (needs "
        f"≥ {s.min_places} places or ≥ {s.min_periods} periods in one place with such "
        "an event)" + _tri(r, s)
    )


def _tri(r: tuple, s: ReplicationSettings) -> str:
    if r.triangulated:
        return f"; design families agree ({r.families_list})"
    if r.families_concordant:
        return (
            f"; {_n(r.families_concordant, 'design family')} in the expected direction "
            f"(triangulation needs ≥ {s.min_design_families})"
        )
    return ""


def _numbers(r: tuple, lv: str) -> str:
    if r.n_events == 0:
        return ""
    sign = (
        f"sign test {r.sign_k} of {r.sign_n} in the expected direction, p = "
        f"{r.sign_test_p:.3g} (smallest possible with {r.sign_n}: {r.sign_min_p:.3g})"
        if r.sign_n
        else "no sign test (no good event with an estimate)"
    )
    pooled = ""
    if r.pooled_k_events:
        word = "ratio" if r.pooled_scale == "log" else "difference"
        f = (lambda x: math.exp(x)) if r.pooled_scale == "log" else (lambda x: x)
        pooled = (
            f"; pooled {word} of the good events (one per event, {r.pooled_stratum}) "
            f"{f(r.pooled_estimate):.3g} (95% CI {f(r.pooled_ci_lower):.3g} to "
            f"{f(r.pooled_ci_upper):.3g}), {_n(r.pooled_k_events, 'event')}, "
            f"{_n(r.pooled_k_estimates, 'estimate')}"
        )
    return f" [good events (at {lv}): {r.n_good}; {sign}{pooled}]"
