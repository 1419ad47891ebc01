"""Temporal replication: independent events of one exposure × outcome in one place, in order.

Rules (thresholds in :mod:`exposhift.replication.settings`):

- **Periods.** In one place, events are sorted by the first possible month of their change
  date (a date known to the year only spans its twelve months); an event whose first possible
  month is less than ``min_months_apart`` months after the last possible month of any earlier
  event of the period falls into that period (single linkage on the date intervals), otherwise
  it opens a new period. So 2000-12 and 2001-01 are one period, as are 2001-01 and 2001-12, and
  "1997" and "1998-03" are one period (they may be 3 months apart). The follow-up windows of
  the studies are free text and are not compared here; a study whose window runs into the next
  change is judged on concurrent changes in appraisal.
- **Replicated in time**: one place has at least ``min_periods`` periods holding an event that
  *counts* (good, in the expected direction, and significant or backed by a pooled estimate
  that excludes no effect: :mod:`exposhift.replication.status`) (METHODS.md §5).
- **Reversal**: an exposure *increase* in a place after an earlier *decrease* in the same place,
  with the outcome moving back. Because estimates are aligned to an increase, "moving back"
  means the two aligned estimates have the same sign. It is the strongest form of Bradford
  Hill's "experiment" viewpoint (Hill 1965, Proc R Soc Med 58:295). A reversal *counts* when
  both events count for replication; it then also counts as temporal replication (two
  counting periods, when the dates are at least ``min_months_apart`` apart).

Everything is computed for all keys at once with grouped operations; :func:`reversals` and
:func:`place_sequences` describe one exposure × outcome for the report.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from exposhift.replication.entries import PlaceSequence, Reversal, SequenceEvent
from exposhift.replication.families import DEFAULT_BY
from exposhift.replication.settings import DEFAULTS, ReplicationSettings


def _period_starts(frame: pd.DataFrame, group: list[str], min_months_apart: int) -> np.ndarray:
    """For rows sorted by ``group`` then ``month_first``: True where a new period starts (the
    first possible month is at least ``min_months_apart`` after the latest possible month of
    the earlier rows of the group)."""
    grouped = frame.groupby(group, sort=False, observed=True, dropna=False)
    codes = grouped.ngroup().to_numpy()
    first_m = frame["month_first"].to_numpy(dtype=float)
    last_seen = grouped["month_last"].cummax().to_numpy(dtype=float)
    first = np.r_[True, codes[1:] != codes[:-1]]
    gap = first_m - np.r_[-np.inf, last_seen[:-1]]
    return first | (gap >= min_months_apart)


def temporal_summary(
    events: pd.DataFrame,
    by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
    counts: str = "counts",
) -> pd.DataFrame:
    """Per key: ``time_periods`` (most periods with an event that counts, in one place),
    ``time_place`` (that place), ``replicated_time``, ``reversal`` and ``reversal_place``.

    ``events`` is an event table with the boolean column ``counts`` (events that count for
    replication). Keys without qualifying events are absent; callers fill them with 0 / False.
    """
    by = list(by)
    ok = events[counts].to_numpy(dtype=bool) & np.isfinite(
        events["month_first"].to_numpy(dtype=float)
    )
    ce = events.loc[
        ok, [*by, "place", "change_year", "month_first", "month_last", "change_direction"]
    ]
    cols = [*by, "time_periods", "time_place", "replicated_time", "reversal", "reversal_place"]
    if ce.empty:
        return pd.DataFrame(columns=cols)
    grp = [*by, "place"]
    ce = ce.sort_values([*grp, "month_first"], kind="stable")
    ce = ce.assign(_new=_period_starts(ce, grp, settings.min_months_apart))
    dec = (ce["change_direction"] == "decrease").to_numpy()
    inc = (ce["change_direction"] == "increase").to_numpy()
    # a reversal: an increase whose first possible month follows the last possible month of an
    # earlier decrease in the same place
    ce = ce.assign(
        _dec_first=np.where(dec, ce["month_last"].to_numpy(float), np.inf),
        _inc_last=np.where(inc, ce["month_first"].to_numpy(float), -np.inf),
    )
    per_place = (
        ce.groupby(grp, sort=True, observed=True, dropna=False)
        .agg(
            periods=("_new", "sum"),
            dec_first=("_dec_first", "min"),
            inc_last=("_inc_last", "max"),
        )
        .reset_index()
    )
    per_place["rev"] = per_place["inc_last"] > per_place["dec_first"]
    # the place with most periods (ties: first place in sort order)
    best = per_place.sort_values(
        [*by, "periods"], ascending=[True] * len(by) + [False], kind="stable"
    ).drop_duplicates(by, keep="first")
    rev = per_place[per_place["rev"]].drop_duplicates(by, keep="first")[[*by, "place"]]
    out = best[[*by, "periods", "place"]].rename(
        columns={"periods": "time_periods", "place": "time_place"}
    )
    out["time_periods"] = out["time_periods"].astype(np.int64)
    out["replicated_time"] = out["time_periods"] >= settings.min_periods
    out = out.merge(rev.rename(columns={"place": "reversal_place"}), on=by, how="left")
    out["reversal"] = out["reversal_place"].notna()
    return out[cols].reset_index(drop=True)


def place_sequences(
    events: pd.DataFrame,
    settings: ReplicationSettings = DEFAULTS,
) -> list[PlaceSequence]:
    """For one exposure × outcome: each place with two or more events, its events in order,
    whether each counts (see :func:`temporal_summary`) and, for those that count, their period
    number (periods are formed by the counting events, as in :func:`temporal_summary`)."""
    out = []
    ev = events.sort_values(["place", "month_first", "change_date"], kind="stable")
    for place, grp in ev.groupby("place", sort=True):
        if len(grp) < 2:
            continue
        counts = grp["counts"].to_numpy(bool) & np.isfinite(grp["month_first"].to_numpy(float))
        # periods are formed by the counting events only, as in temporal_summary
        period: list[int | None] = [None] * len(grp)
        if counts.any():
            new = _period_starts(grp[counts].assign(_k=0), ["_k"], settings.min_months_apart)
            for pos, p in zip(np.flatnonzero(counts), np.cumsum(new), strict=True):
                period[pos] = int(p)
        counted_periods = len({p for p in period if p is not None})
        out.append(
            PlaceSequence(
                place=place,
                periods_with_counting_event=counted_periods,
                replicated=counted_periods >= settings.min_periods,
                events=[
                    SequenceEvent(
                        event_id=r.event_id,
                        change_date=str(r.change_date),
                        direction=r.change_direction,
                        period=p,
                        level=_lvl(r.level),
                        sign=int(r.sign),
                        concordant=bool(r.concordant),
                        counts=bool(c),
                    )
                    for r, p, c in zip(grp.itertuples(index=False), period, counts, strict=True)
                ],
            )
        )
    return out


def reversals(events: pd.DataFrame, settings: ReplicationSettings = DEFAULTS) -> list[Reversal]:
    """For one exposure × outcome: every increase that follows a decrease in the same place,
    paired with the latest earlier decrease (preferring one that counts); ``outcome_moved_back``
    when the aligned estimates share a sign (the raw effects are opposite), ``counts`` when both
    events also count for replication (:func:`temporal_summary`)."""
    out = []
    ev = events.sort_values(["place", "month_first", "change_date"], kind="stable")
    for place, grp in ev.groupby("place", sort=True):
        rows = list(grp.itertuples(index=False))
        for j, up in enumerate(rows):
            if up.change_direction != "increase":
                continue
            before = [
                r
                for r in rows[:j]
                if r.change_direction == "decrease" and r.month_last < up.month_first
            ]
            if not before:
                continue
            strong = [r for r in before if r.counts]
            down = (strong or before)[-1]
            moved_back = bool(up.sign != 0 and up.sign == down.sign)
            counts = bool(moved_back and up.counts and down.counts)
            out.append(
                Reversal(
                    place=place,
                    decrease_event=down.event_id,
                    decrease_date=str(down.change_date),
                    increase_event=up.event_id,
                    increase_date=str(up.change_date),
                    outcome_moved_back=moved_back,
                    counts=counts,
                )
            )
    return out


def _lvl(value: float) -> int | None:
    return None if pd.isna(value) else int(value)
