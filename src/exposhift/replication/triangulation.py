"""Triangulation: design families side by side, and whether they agree.

Designs in different families rest on different identifying assumptions, so their biases
differ; agreement across them is triangulation (Lawlor, Tilling & Davey Smith 2016, Int J
Epidemiol 45:1866). Rules:

- **Family pools** (shown): within design family × measure group × estimate kind × increment,
  the good units of each event are combined into one number per event
  (:func:`exposhift.synthesis.events.aggregate_within_event`) and the events pooled by
  :func:`exposhift.synthesis.grouped.pool_groups` (``pool_method``/``pool_ci`` settings), so
  ``k`` counts events.
- The **main stratum** of an exposure × outcome is the measure group × estimate kind ×
  increment with the most events (ties: first in sort order). Triangulation compares the
  design families of the main stratum, leaving out ``supporting_families`` (uncontrolled
  before-after: no comparison, supporting evidence only), and counts only families with at
  least 2 events or a significant pooled estimate (a single imprecise estimate says nothing
  about its family).
- **Agreement test**: one event-level meta-regression of the main stratum's good estimates on
  family indicators — the three-level random-effects model of
  :func:`exposhift.synthesis.multilevel.fit_multilevel` (estimates within events, REML), so
  that an event studied by designs of two families is modelled as one event, not counted
  twice — and the model-based Wald χ² test that all family effects are equal, on F − 1 df
  (reported as ``q_between``, ``q_between_df``, ``q_between_p``). Family directions are the
  signs of the family coefficients of the same model.
- **Families disagree** when family coefficients point in opposite directions and the test's
  p < ``alpha_between``.
- **Triangulated** when at least ``min_design_families`` counted families point in the
  expected direction and the families do not disagree.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from exposhift.errors import AnalysisError
from exposhift.replication.families import DEFAULT_BY
from exposhift.replication.settings import DEFAULTS, ReplicationSettings
from exposhift.synthesis.events import aggregate_within_event
from exposhift.synthesis.grouped import pool_groups
from exposhift.synthesis.multilevel import fit_multilevel, wald_test

STRATA: tuple[str, ...] = ("measure_group", "estimate_kind", "increment")
POOL_COLUMNS: tuple[str, ...] = (
    "k",
    "estimate",
    "se",
    "ci_lower",
    "ci_upper",
    "pvalue",
    "tau2",
    "q",
    "q_pvalue",
    "i2",
    "pi_lower",
    "pi_upper",
    "notes",
)


def family_pools(
    units: pd.DataFrame,
    by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
) -> pd.DataFrame:
    """Pooled result per key × stratum × design family over good events (one number per
    event), with ``main`` marking the key's main stratum and ``supporting`` the
    supporting-only families."""
    by = list(by)
    keys = [*by, *STRATA, "design_family"]
    y = units["y"].to_numpy(dtype=float)
    v = units["v"].to_numpy(dtype=float)
    ok = units["good"].to_numpy(dtype=bool) & np.isfinite(y) & np.isfinite(v) & (v > 0)
    sub = units.loc[ok, [*keys, "event_id", "y", "v"]]
    if not sub.empty:
        sub = aggregate_within_event(sub, keys, rho=settings.within_event_rho)[
            [*keys, "event_id", "y", "v"]
        ]
    if sub.empty:
        return pd.DataFrame(columns=[*keys, *POOL_COLUMNS, "se_wald", "main", "supporting"])
    pooled = pool_groups(sub, keys, y="y", v="v", method=settings.pool_method, ci=settings.pool_ci)
    pooled = pooled[[*keys, *POOL_COLUMNS]].copy()
    pooled["se_wald"] = _wald_se(sub, pooled, keys)
    strat = [*by, *STRATA]
    size = pooled.groupby(strat, sort=True, observed=True, dropna=False)["k"].sum().reset_index()
    main = size.sort_values(
        [*by, "k"], ascending=[True] * len(by) + [False], kind="stable"
    ).drop_duplicates(by, keep="first")[strat]
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
    pools: pd.DataFrame,
    expected: pd.DataFrame,
    by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
    units: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """Per key: ``n_families`` (counted non-supporting families of the main stratum),
    ``families_concordant``, ``q_between`` / ``q_between_df`` / ``q_between_p`` (the test of
    equal family effects in the event-level meta-regression), ``families_disagree``,
    ``triangulated``, ``families_list`` and ``families_test_note``. ``units`` (the good units,
    for the meta-regression) defaults to none: then no test is run."""
    by = list(by)
    cols = [
        *by,
        "n_families",
        "families_concordant",
        "q_between",
        "q_between_df",
        "q_between_p",
        "families_disagree",
        "triangulated",
        "families_list",
        "families_test_note",
    ]
    counted = (pools["k"] >= 2) | (pools["pvalue"] < settings.alpha)
    fam = pools[pools["main"] & ~pools["supporting"] & counted]
    if fam.empty:
        return pd.DataFrame(columns=cols)
    fam = fam.merge(expected[[*by, "expected"]], on=by, how="left")
    rows = []
    for key, g in fam.groupby(by, sort=True, observed=True, dropna=False):
        key = key if isinstance(key, tuple) else (key,)
        rec = dict(zip(by, key, strict=True))
        exp = int(g["expected"].fillna(0).iloc[0])
        names = sorted(g["design_family"].astype(str))
        sign = dict(zip(g["design_family"].astype(str), np.sign(g["estimate"]), strict=True))
        qb, df, qp, note = np.nan, len(names) - 1, np.nan, ""
        if len(names) >= 2 and units is not None:
            try:
                coef, qb, qp = _family_test(units, g, by, rec, names)
                sign = dict(zip(names, np.sign(coef), strict=True))
                note = (
                    "three-level REML meta-regression on family indicators (estimates "
                    "within events), model-based Wald test of equal family effects"
                )
            except AnalysisError as exc:
                note = f"test of equal family effects not possible: {exc}"
        s_ = np.array([sign[n] for n in names])
        opposite = bool((s_ > 0).any() and (s_ < 0).any())
        disagree = bool(opposite and np.isfinite(qp) and qp < settings.alpha_between)
        concordant = int(((s_ == exp) & (exp != 0)).sum())
        rec.update(
            {
                "n_families": len(names),
                "families_concordant": concordant,
                "q_between": qb,
                "q_between_df": df,
                "q_between_p": qp,
                "families_disagree": disagree,
                "triangulated": concordant >= settings.min_design_families and not disagree,
                "families_list": ", ".join(names),
                "families_test_note": note,
            }
        )
        rows.append(rec)
    return pd.DataFrame(rows, columns=cols)


def _family_test(
    units: pd.DataFrame, fam: pd.DataFrame, by: list[str], key: dict, names: list[str]
) -> tuple[np.ndarray, float, float]:
    """Family coefficients and the Wald test of their equality for one key."""
    m = np.ones(len(units), dtype=bool)
    for k, val in key.items():
        m &= (units[k] == val).to_numpy()
    first = fam.iloc[0]
    for k in STRATA:
        m &= (
            units[k].fillna("").astype(str) == str(first[k] if pd.notna(first[k]) else "")
        ).to_numpy()
    m &= units["design_family"].isin(names).to_numpy() & units["good"].to_numpy(dtype=bool)
    u = units.loc[m]
    y, v = u["y"].to_numpy(float), u["v"].to_numpy(float)
    ok = np.isfinite(y) & np.isfinite(v) & (v > 0)
    u, y, v = u[ok], y[ok], v[ok]
    X = u["design_family"].astype(str).to_numpy()[:, None] == np.array(names)[None, :]
    fit = fit_multilevel(y, v, u["event_id"].astype(str).to_numpy(), X=X.astype(float), names=names)
    R = np.zeros((len(names) - 1, len(names)))
    R[:, 0] = 1.0
    R[np.arange(len(names) - 1), np.arange(1, len(names))] = -1.0
    test = wald_test(fit, R, vcov="model")
    return fit.coef, float(test.statistic), float(test.pvalue)
