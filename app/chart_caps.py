"""How many things a chart draws at most, and which: a readable figure on a large evidence base.

A timeline of hundreds of events is a smear of overlapping labels. :func:`timeline_events`
picks the events a timeline draws and says how many it leaves out; the page says so beside the
figure and lists every event in its paginated table, so nothing is dropped silently.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd


@dataclass(frozen=True)
class Drawn:
    """The rows a chart draws, and how many events there are and are left out."""

    rows: pd.DataFrame
    events: int  # independent events in all
    left_out: int  # events not drawn

    @property
    def drawn(self) -> int:
        return self.events - self.left_out


def _change_date_key(values: pd.Series) -> np.ndarray:
    """Dates as sortable text (``YYYY``, ``YYYY-MM``, ``YYYY-MM-DD`` sort by time as text)."""
    return values.fillna("").astype(str).to_numpy(dtype=object)


def timeline_events(events: pd.DataFrame, max_events: int | None) -> Drawn:
    """The events of a replication report a timeline draws: one row per independent event
    (``represents_event``, when the column is there), at most ``max_events`` of them (``None``:
    all). Beyond the limit it keeps the heaviest events: the smallest standard error (the
    largest inverse-variance weight, 1/se², the weight a fixed-effect pool gives the event;
    Borenstein et al. 2009, ch. 11), then the most recent change, then the event key."""
    ev = events
    if "represents_event" in ev.columns:
        ev = ev[ev["represents_event"].astype(bool)]
    ids = ev["event_id"].drop_duplicates()
    total = len(ids)
    if max_events is None or total <= max_events:
        return Drawn(ev, total, 0)
    se = pd.to_numeric(ev["se"], errors="coerce") if "se" in ev.columns else np.nan
    per_event = (
        ev.assign(_se=se, _date=_change_date_key(ev["change_date"]))
        .groupby("event_id", sort=True)
        .agg(_se=("_se", "min"), _date=("_date", "max"))
        .reset_index()
    )
    per_event["_se"] = per_event["_se"].fillna(np.inf)
    # heaviest first; among equal weights the most recent change; then the key (stable)
    order = np.lexsort(
        (
            per_event["event_id"].to_numpy(dtype=object),
            _descending_rank(per_event["_date"]),
            per_event["_se"].to_numpy(dtype=float),
        )
    )
    keep = set(per_event["event_id"].to_numpy(dtype=object)[order[:max_events]])
    rows = ev[ev["event_id"].isin(keep)]
    return Drawn(rows, total, total - max_events)


def _descending_rank(values: pd.Series) -> np.ndarray:
    """Ranks that sort ``values`` from the largest to the smallest."""
    codes = pd.factorize(values, sort=True)[0]
    return -codes
