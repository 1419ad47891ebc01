"""Spatial replication: independent places, direction concordance and the exact sign test.

- **Replicated in place**: at least ``min_places`` distinct places (countries) each with an
  independent event that *counts*: at level ≥ ``min_level``, pointing in the expected
  direction, and either significant on its own or backed by the event-level pooled estimate of
  the good events excluding no effect in that direction (:mod:`exposhift.replication.status`).
- **Minimum attainable p**: with n events the exact two-sided sign test cannot give a p value
  below min(1, 2·½ⁿ) (all n in one direction): with 3 events that is 0.25, so a sign test on
  few events can never be significant, whatever the events say.
- **Sign test**: among independent events at level ≥ ``min_level`` with a non-zero estimate,
  the number k of n pointing in the expected direction, tested against k ~ Binomial(n, ½) with
  the exact two-sided p value. For p = ½ the distribution is symmetric, so the two-sided
  p value of the "minimum likelihood" definition (sum of the probabilities of all outcomes no
  more likely than the one observed; Hollander, Wolfe & Chicken 2014, Nonparametric
  Statistical Methods, §2.2) equals min(1, 2·P(X ≤ min(k, n − k))). It does not depend on which
  direction is called expected. ``scipy.stats.binomtest`` is the reference in the tests.
- **Discordant events**: at least one event at level ≥ ``min_level`` with a significant effect
  in each direction, or a significant good event against the majority direction of the good
  events (more events pointing one way than the other).

All per-key quantities are computed for every key at once with grouped sums.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
from scipy import stats

from exposhift.replication.families import DEFAULT_BY, grouped_join
from exposhift.replication.settings import DEFAULTS, ReplicationSettings

#: how many place names the rule text lists before "and N more"
PLACES_SHOWN = 6


def sign_test_p(k: np.ndarray | int, n: np.ndarray | int) -> np.ndarray:
    """Exact two-sided sign-test p value for k of n (Binomial(n, ½)); NaN when n = 0."""
    k = np.asarray(k, dtype=float)
    n = np.asarray(n, dtype=float)
    m = np.minimum(k, n - k)
    with np.errstate(invalid="ignore"):
        p = np.minimum(1.0, 2.0 * stats.binom.cdf(m, np.maximum(n, 1), 0.5))
    return np.where(n > 0, p, np.nan)


def min_attainable_p(n: np.ndarray | int) -> np.ndarray:
    """Smallest two-sided sign-test p value possible with n events: min(1, 2·½ⁿ); NaN at 0."""
    n = np.asarray(n, dtype=float)
    return np.where(n > 0, np.minimum(1.0, 2.0 * 0.5 ** np.maximum(n, 0)), np.nan)


def _place_lists(events: pd.DataFrame, mask: np.ndarray, by: list[str]) -> pd.DataFrame:
    """Per key, the number of distinct places among ``events[mask]`` and their names."""
    pl = events.loc[mask, [*by, "place"]].drop_duplicates().sort_values([*by, "place"])
    if pl.empty:
        return pd.DataFrame(columns=[*by, "places_count", "places_list"])
    n = pl.groupby(by, sort=False, observed=True, dropna=False)["place"].transform("size")
    out = grouped_join(pl, by, "place", limit=PLACES_SHOWN).rename(columns={"place": "places_list"})
    counts = pl.assign(_n=n.to_numpy()).drop_duplicates(by)[[*by, "_n"]]
    out = out.merge(counts, on=by, how="left").rename(columns={"_n": "places_count"})
    extra = out["places_count"] - PLACES_SHOWN
    out["places_list"] = np.where(
        extra > 0, out["places_list"] + " and " + extra.astype(str) + " more", out["places_list"]
    )
    return out


def spatial_summary(
    events: pd.DataFrame,
    by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
) -> pd.DataFrame:
    """Per key: event counts, concordant places, sign test and significant-direction flags.

    Columns: ``n_events``, ``n_good``, ``n_weak`` (level below ``min_level``),
    ``n_unappraised``, ``n_good_concordant``, ``n_counting``, ``places_count``,
    ``places_list`` (places with an event that counts), ``places_rev_count`` and
    ``places_rev_list`` (the same against the expected direction), ``sign_n``, ``sign_k``,
    ``sign_share``, ``sign_test_p``, ``sign_min_p``, ``sig_pos``, ``sig_neg``,
    ``sig_against_majority``, ``newest_year``. ``events`` needs ``counts`` and ``counts_rev``.
    """
    by = list(by)
    good = events["good"].to_numpy(dtype=bool)
    conc = events["concordant"].to_numpy(dtype=bool)
    counts = events["counts"].to_numpy(dtype=bool)
    sign = events["sign"].to_numpy()
    sig = events["significant"].to_numpy(dtype=bool)
    exp = events["expected"].to_numpy()
    lvl = events["level"].to_numpy(dtype=float)
    counted = good & (sign != 0)
    toward = np.where(exp != 0, sign == exp, sign > 0)
    tmp = events[by].copy()
    tmp["n_events"] = 1
    tmp["n_good"] = good.astype(np.int64)
    tmp["n_weak"] = (np.isfinite(lvl) & ~good).astype(np.int64)
    tmp["n_unappraised"] = np.isnan(lvl).astype(np.int64)
    tmp["n_good_concordant"] = (good & conc).astype(np.int64)
    tmp["n_counting"] = counts.astype(np.int64)
    tmp["_pos"] = (counted & (sign > 0)).astype(np.int64)
    tmp["_neg"] = (counted & (sign < 0)).astype(np.int64)
    tmp["sign_n"] = counted.astype(np.int64)
    tmp["sign_k"] = (counted & toward).astype(np.int64)
    tmp["sig_pos"] = (good & sig & (sign > 0)).astype(np.int64)
    tmp["sig_neg"] = (good & sig & (sign < 0)).astype(np.int64)
    tmp["newest_year"] = events["change_year"].to_numpy(dtype=float)
    agg = (
        tmp.groupby(by, sort=True, observed=True, dropna=False)
        .agg({c: ("max" if c == "newest_year" else "sum") for c in tmp.columns if c not in by})
        .reset_index()
    )
    agg["sig_pos"] = agg["sig_pos"] > 0
    agg["sig_neg"] = agg["sig_neg"] > 0
    majority = np.sign(agg["_pos"] - agg["_neg"]).to_numpy()
    agg["sig_against_majority"] = (
        ((majority > 0) & agg["sig_neg"]) | ((majority < 0) & agg["sig_pos"])
    ).to_numpy(dtype=bool)
    agg = agg.drop(columns=["_pos", "_neg"])
    with np.errstate(invalid="ignore", divide="ignore"):
        agg["sign_share"] = np.where(agg["sign_n"] > 0, agg["sign_k"] / agg["sign_n"], np.nan)
    agg["sign_test_p"] = sign_test_p(agg["sign_k"].to_numpy(), agg["sign_n"].to_numpy())
    agg["sign_min_p"] = min_attainable_p(agg["sign_n"].to_numpy())
    places = _place_lists(events, counts, by)
    agg = agg.merge(places, on=by, how="left")
    agg["places_count"] = agg["places_count"].fillna(0).astype(np.int64)
    agg["places_list"] = agg["places_list"].fillna("")
    rev = _place_lists(events, events["counts_rev"].to_numpy(dtype=bool), by).rename(
        columns={"places_count": "places_rev_count", "places_list": "places_rev_list"}
    )
    agg = agg.merge(rev, on=by, how="left")
    agg["places_rev_count"] = agg["places_rev_count"].fillna(0).astype(np.int64)
    agg["places_rev_list"] = agg["places_rev_list"].fillna("")
    return agg
