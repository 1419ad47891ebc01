"""Triangulation: pooled estimates per design family side by side, and whether they agree.

Designs in different families rest on different identifying assumptions, so their biases
differ; agreement across them is triangulation (Lawlor, Tilling & Davey Smith 2016, Int J
Epidemiol 45:1866). Rules:

- Pooling uses independent units at level ≥ ``min_level`` with a finite estimate and positive
  variance, within design family × measure group × estimate kind × increment (estimates of
  different kinds are never pooled together, METHODS.md §3), by
  :func:`exposhift.synthesis.grouped.pool_groups` (``pool_method``/``pool_ci`` settings).
- The **main stratum** of an exposure × outcome is the measure group × estimate kind ×
  increment with the most pooled units (ties: first in sort order). Triangulation compares the
  design families of the main stratum, leaving out ``supporting_families`` (uncontrolled
  before-after: no comparison, supporting evidence only).
- **Q-between**: Q_b = Σ_f w_f (μ_f − μ̄)², w_f = 1/SE_f², μ̄ = Σ w_f μ_f / Σ w_f, referred to
  χ² with F − 1 df, where μ_f is each family's pooled estimate and SE_f its Wald SE (subgroup
  differences test with a separate τ² per subgroup, as in
  :func:`exposhift.synthesis.sensitivity.subgroup_test`: Borenstein et al. 2009, Introduction
  to Meta-Analysis, ch. 19; Cochrane Handbook §10.11.3.1).
- **Families disagree** when their pooled estimates point in opposite directions and
  Q_b's p < ``alpha_between``.
- Only families with at least 2 events or a significant pooled estimate are compared (a
  single imprecise estimate says nothing about its family).
- **Triangulated** when at least ``min_design_families`` families have a pooled estimate in the
  expected direction and the families do not disagree.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
from scipy import stats

from exposhift.replication.families import DEFAULT_BY, grouped_join
from exposhift.replication.settings import DEFAULTS, ReplicationSettings
from exposhift.synthesis.grouped import pool_groups

STRATA: tuple[str, ...] = ("measure_group", "estimate_kind", "increment")
POOL_COLUMNS: tuple[str, ...] = (
    "k", "estimate", "se", "ci_lower", "ci_upper", "pvalue", "tau2", "q", "q_pvalue", "i2",
    "pi_lower", "pi_upper", "notes",
)


def family_pools(
    units: pd.DataFrame, by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
) -> pd.DataFrame:
    """Pooled result per key × stratum × design family over good units, with ``main`` marking
    the key's main stratum and ``supporting`` the supporting-only families."""
    by = list(by)
    keys = [*by, *STRATA, "design_family"]
    y = units["y"].to_numpy(dtype=float)
    v = units["v"].to_numpy(dtype=float)
    ok = units["good"].to_numpy(dtype=bool) & np.isfinite(y) & np.isfinite(v) & (v > 0)
    sub = units.loc[ok, [*keys, "y", "v"]]
    if sub.empty:
        return pd.DataFrame(columns=[*keys, *POOL_COLUMNS, "se_wald", "main", "supporting"])
    pooled = pool_groups(sub, keys, y="y", v="v", method=settings.pool_method,
                         ci=settings.pool_ci)
    pooled = pooled[[*keys, *POOL_COLUMNS]].copy()
    pooled["se_wald"] = _wald_se(sub, pooled, keys)
    strat = [*by, *STRATA]
    size = pooled.groupby(strat, sort=True, observed=True, dropna=False)["k"].sum().reset_index()
    main = size.sort_values([*by, "k"], ascending=[True] * len(by) + [False],
                            kind="stable").drop_duplicates(by, keep="first")[strat]
    main = main.assign(main=True)
    pooled = pooled.merge(main, on=strat, how="left")
    pooled["main"] = pooled["main"].fillna(False).astype(bool)
    pooled["supporting"] = pooled["design_family"].isin(settings.supporting_families)
    return pooled


def _wald_se(sub: pd.DataFrame, pooled: pd.DataFrame, keys: list[str]) -> np.ndarray:
    """Wald SE 1/√Σ 1/(vᵢ + τ²) of each pooled group (τ² = 0 for a single estimate), the SE that
    the Q-between test uses (as in :func:`exposhift.synthesis.sensitivity.subgroup_test`)."""
    tau2 = pooled[[*keys, "tau2"]].assign(tau2=pooled["tau2"].fillna(0.0))
    rows = sub.merge(tau2, on=keys, how="left", sort=False)
    g = rows.groupby(keys, sort=True, observed=True, dropna=False).ngroup().to_numpy()
    sw = np.bincount(g, weights=1.0 / (rows["v"].to_numpy() + rows["tau2"].to_numpy()))
    # pool_groups returns groups sorted by the keys, as ngroup(sort=True) numbers them
    return 1.0 / np.sqrt(sw)


def triangulation_summary(
    pools: pd.DataFrame, expected: pd.DataFrame, by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
) -> pd.DataFrame:
    """Per key: ``n_families`` (non-supporting families in the main stratum),
    ``families_concordant``, ``q_between``, ``q_between_df``, ``q_between_p``,
    ``families_disagree`` and ``triangulated``."""
    by = list(by)
    cols = [*by, "n_families", "families_concordant", "q_between", "q_between_df",
            "q_between_p", "families_disagree", "triangulated", "families_list"]
    # a family counts with at least 2 events, or one significant estimate
    counted = (pools["k"] >= 2) | (pools["pvalue"] < settings.alpha)
    fam = pools[pools["main"] & ~pools["supporting"] & counted]
    if fam.empty:
        return pd.DataFrame(columns=cols)
    fam = fam.merge(expected[[*by, "expected"]], on=by, how="left")
    mu = fam["estimate"].to_numpy(dtype=float)
    se = fam["se_wald"].to_numpy(dtype=float)
    w = np.where(np.isfinite(se) & (se > 0), 1.0 / np.where(se > 0, se, 1.0) ** 2, 0.0)
    s = np.sign(mu)
    exp = fam["expected"].fillna(0).to_numpy()
    tmp = fam[by].copy()
    tmp["n_families"] = 1
    tmp["families_concordant"] = ((s == exp) & (exp != 0)).astype(np.int64)
    tmp["_pos"] = (s > 0).astype(np.int64)
    tmp["_neg"] = (s < 0).astype(np.int64)
    g = fam.groupby(by, sort=False, observed=True, dropna=False).ngroup().to_numpy()
    sw_row = np.bincount(g, weights=w)
    with np.errstate(invalid="ignore", divide="ignore"):
        mbar = np.bincount(g, weights=w * mu) / sw_row
    tmp["_w"] = w
    tmp["_qb"] = w * (mu - mbar[g]) ** 2
    agg = tmp.groupby(by, sort=True, observed=True, dropna=False).sum().reset_index()
    sw = agg["_w"].to_numpy()
    qb = agg["_qb"].to_numpy()
    df = agg["n_families"].to_numpy() - 1
    many = (df >= 1) & (sw > 0)
    agg["q_between"] = np.where(many, qb, np.nan)
    agg["q_between_df"] = df
    agg["q_between_p"] = np.where(many, stats.chi2.sf(qb, np.maximum(df, 1)), np.nan)
    opposite = (agg["_pos"] > 0) & (agg["_neg"] > 0)
    agg["families_disagree"] = opposite & (agg["q_between_p"] < settings.alpha_between)
    agg["triangulated"] = ((agg["families_concordant"] >= settings.min_design_families)
                           & ~agg["families_disagree"])
    names = grouped_join(fam.sort_values([*by, "design_family"]), by, "design_family")
    agg = agg.merge(names.rename(columns={"design_family": "families_list"}), on=by,
                    how="left")
    return agg[cols]
