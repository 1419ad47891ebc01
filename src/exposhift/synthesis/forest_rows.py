"""The rows of a forest plot: one pooled number per event, with its own interval.

The engine (:mod:`exposhift.synthesis.event_pooling`, through the pooling service) gives each
pooled event its value ``y``, variance ``v`` and share of the group's random-effects weight;
this module adds what a display needs and nothing else.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats


def wald_interval(y: np.ndarray, v: np.ndarray, alpha: float = 0.05):
    """The normal-theory (Wald) interval of each estimate: ``y ± z_{1-α/2} · √v``.

    Source: Borenstein, Hedges, Higgins & Rothstein (2009), *Introduction to Meta-Analysis*,
    Wiley, ch. 4 (the confidence interval of a single study's effect; cited from memory).
    Returns ``(se, lower, upper)`` as float arrays.
    """
    z = float(stats.norm.isf(alpha / 2))
    se = np.sqrt(np.asarray(v, dtype=float))
    y = np.asarray(y, dtype=float)
    return se, y - z * se, y + z * se


def event_rows(pooled_rows: pd.DataFrame, alpha: float = 0.05) -> pd.DataFrame:
    """The pooled events of every group, each with ``se`` and its Wald interval
    (:func:`wald_interval`), the studies and estimates it combines, in group and date order.

    ``pooled_rows`` is :attr:`exposhift.services.pooling.PoolOutput.pooled_rows` (one row per
    event and group: ``group``, ``y``, ``v``, ``weight``, ``estimate_uids``...).
    """
    rows = pooled_rows.copy()
    rows["se"], rows["ci_lower"], rows["ci_upper"] = wald_interval(rows["y"], rows["v"], alpha)
    if "study_ids" in rows.columns:
        rows["study_id"] = rows["study_ids"].where(rows["study_ids"].notna(), rows["study_id"])
    rows["estimate_uid"] = rows["estimate_uids"].map(lambda u: "; ".join(map(str, u)))
    rows["change_date"] = rows["change_date"].astype(str)
    # the estimate as reported (before alignment), for an event with one estimate
    single = rows["k_units"].fillna(1).to_numpy() <= 1 if "k_units" in rows else True
    for col, src in (
        ("reported", "estimate"),
        ("reported_low", "ci_low"),
        ("reported_high", "ci_high"),
    ):
        rows[col] = rows[src].where(single) if src in rows else np.nan
    return rows.sort_values(["group", "change_date", "event_id"], kind="stable")
