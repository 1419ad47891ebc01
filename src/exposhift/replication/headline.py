"""The headline pooled number of each exposure × outcome, and which events count.

The headline number is the event-level random-effects pool of the *good* events (overall level
≥ ``min_level``, one number per event: :func:`exposhift.replication.families.event_table`) in
the key's main stratum — the measure group × estimate kind × increment with the most good
events (ties: first in sort order) — with the settings' ``pool_method`` and ``pool_ci``
(Hartung–Knapp floored at 1: Röver, Knapp & Friede 2015). It is the number shown beside the
status, so the two rest on the same evidence set.

An event *counts* for replication (:func:`mark_counts`) when it is good, points in the expected
direction and is significant on its own, or is in the main stratum whose pooled estimate
excludes no effect in the expected direction; ``counts_rev`` is the same against the expected
direction.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from exposhift.replication.families import DEFAULT_BY, STRATUM
from exposhift.replication.settings import DEFAULTS, ReplicationSettings
from exposhift.synthesis.grouped import pool_groups
from exposhift.synthesis.harmonise import GROUP_SCALES

HEADLINE_COLUMNS: tuple[str, ...] = (
    "pooled_k_events",
    "pooled_k_estimates",
    "pooled_estimate",
    "pooled_se",
    "pooled_ci_lower",
    "pooled_ci_upper",
    "pooled_pi_lower",
    "pooled_pi_upper",
    "pooled_pvalue",
    "pooled_tau2",
    "pooled_i2",
    "pooled_stratum",
    "pooled_scale",
    "pooled_supports",
    "pooled_against",
    "_main_mg",
    "_main_kind",
    "_main_inc",
)


def cell_pools(
    events: pd.DataFrame,
    expected: pd.DataFrame,
    by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
) -> pd.DataFrame:
    """Per key: the headline pool (columns :data:`HEADLINE_COLUMNS`); keys without a good
    event with an estimate are absent."""
    by = list(by)
    y = events["y"].to_numpy(dtype=float)
    v = events["v"].to_numpy(dtype=float)
    ok = events["good"].to_numpy(dtype=bool) & np.isfinite(y) & np.isfinite(v) & (v > 0)
    sub = events.loc[ok, [*by, *STRATUM, "event_id", "y", "v", "k_combined"]].copy()
    if sub.empty:
        return pd.DataFrame(columns=[*by, *HEADLINE_COLUMNS])
    sub["increment"] = sub["increment"].fillna("")
    size = (
        sub.groupby([*by, *STRATUM], sort=True, observed=True, dropna=False)
        .size()
        .rename("_n")
        .reset_index()
    )
    main = size.sort_values(
        [*by, "_n"], ascending=[True] * len(by) + [False], kind="stable"
    ).drop_duplicates(by, keep="first")
    sub = sub.merge(main[[*by, *STRATUM]], on=[*by, *STRATUM], how="inner")
    pooled = pool_groups(
        sub, [*by, *STRATUM], method=settings.pool_method, ci=settings.pool_ci, alpha=settings.alpha
    )
    est = (
        sub.groupby([*by, *STRATUM], sort=True, observed=True, dropna=False)["k_combined"]
        .sum()
        .rename("pooled_k_estimates")
        .reset_index()
    )
    pooled = pooled.merge(est, on=[*by, *STRATUM], how="left")
    pooled = pooled.merge(expected[[*by, "expected"]], on=by, how="left")
    exp = pooled["expected"].fillna(0).to_numpy()
    lo = pooled["ci_lower"].to_numpy(dtype=float)
    hi = pooled["ci_upper"].to_numpy(dtype=float)
    many = pooled["k"].to_numpy() >= 2  # one event is judged on its own interval
    out = pooled[by].copy()
    out["pooled_k_events"] = pooled["k"].astype(np.int64)
    out["pooled_k_estimates"] = pooled["pooled_k_estimates"].astype(np.int64)
    for f in (
        "estimate",
        "se",
        "ci_lower",
        "ci_upper",
        "pi_lower",
        "pi_upper",
        "pvalue",
        "tau2",
        "i2",
    ):
        out[f"pooled_{f}"] = pooled[f].astype("float64")
    inc = pooled["increment"].astype(str)
    out["pooled_stratum"] = (
        pooled["measure_group"].astype(str)
        + "/"
        + pooled["estimate_kind"].astype(str)
        + np.where(inc != "", " " + inc, "")
    )
    out["pooled_scale"] = pooled["measure_group"].map(GROUP_SCALES).fillna("identity")
    out["pooled_supports"] = many & (((exp > 0) & (lo > 0)) | ((exp < 0) & (hi < 0)))
    out["pooled_against"] = many & (((exp > 0) & (hi < 0)) | ((exp < 0) & (lo > 0)))
    out["_main_mg"] = pooled["measure_group"].to_numpy()
    out["_main_kind"] = pooled["estimate_kind"].to_numpy()
    out["_main_inc"] = inc.to_numpy()
    return out.reset_index(drop=True)


def mark_counts(
    events: pd.DataFrame, headline: pd.DataFrame, by: Sequence[str] = DEFAULT_BY
) -> pd.DataFrame:
    """Add ``counts``, ``counts_rev`` and ``in_headline`` (the event is in its key's main
    stratum) to an event table marked with ``expected`` and ``concordant``."""
    by = list(by)
    h = headline[[*by, "pooled_supports", "pooled_against", "_main_mg", "_main_kind", "_main_inc"]]
    out = events.merge(h, on=by, how="left")
    inc = out["increment"].fillna("").astype(str)
    in_main = (
        (out["measure_group"] == out["_main_mg"])
        & (out["estimate_kind"] == out["_main_kind"])
        & (inc == out["_main_inc"].fillna(""))
    ).to_numpy(dtype=bool)
    sup = out["pooled_supports"].fillna(False).to_numpy(dtype=bool) & in_main
    against = out["pooled_against"].fillna(False).to_numpy(dtype=bool) & in_main
    good = out["good"].to_numpy(dtype=bool)
    sig = out["significant"].to_numpy(dtype=bool)
    exp = out["expected"].to_numpy()
    sign = out["sign"].to_numpy()
    out["counts"] = good & (exp != 0) & (sign == exp) & (sig | sup)
    out["counts_rev"] = good & (exp != 0) & (sign == -exp) & (sig | against)
    out["in_headline"] = in_main & good
    return out.drop(
        columns=["pooled_supports", "pooled_against", "_main_mg", "_main_kind", "_main_inc"]
    )
