"""Pooling with the event as the unit of analysis, for many groups at once.

Three routes, chosen with ``within_event`` (see ``docs/methods.md`` for why the default):

* ``"aggregate"`` (default): the independent units of each event are combined into one
  event-level estimate with a stated within-event correlation ρ
  (:func:`exposhift.synthesis.events.aggregate_within_event`; Borenstein et al. 2009, ch. 24),
  then the events are pooled by the random-effects engine
  (:func:`exposhift.synthesis.grouped.pool_groups`): k, the t degrees of freedom, τ², Q and I²
  all count events.
* ``"multilevel"``: estimates within events in a three-level random-effects model fitted by
  REML, with cluster-robust (event) CR2 variance and Satterthwaite degrees of freedom
  (:mod:`exposhift.synthesis.multilevel`; Hedges, Tipton & Johnson 2010; Tipton 2015;
  Pustejovsky & Tipton 2018).
* ``"independent"``: every independent unit pooled as if it were its own event — the route
  that counts an event more than once; only when the user asks for it, and said so.

Every result carries ``k_events`` and ``k_estimates``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from exposhift.errors import AnalysisError
from exposhift.synthesis.events import DEFAULT_RHO, aggregate_within_event
from exposhift.synthesis.grouped import pool_groups

WITHIN_EVENT: dict[str, str] = {
    "aggregate": "estimates of one event combined into one (within-event correlation rho), "
    "then events pooled",
    "multilevel": "estimates within events in a three-level REML model, cluster-robust CR2 "
    "variance by event",
    "independent": "every independent estimate pooled as its own unit (an event with several "
    "estimates counts more than once)",
}


@dataclass(frozen=True)
class EventPooling:
    """``table``: one row per group (keys, the pooled fields, ``k_events``, ``k_estimates``,
    ``within_event``, ``rho``); ``rows``: the rows that were pooled (one per event for the
    aggregate route, one per estimate otherwise) with ``group`` (row number in ``table``),
    ``weight`` (share of the group's random-effects weight; NaN for multilevel), ``k_units``
    and ``estimate_uids``."""

    table: pd.DataFrame
    rows: pd.DataFrame


def _event_counts(units: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    g = units.groupby(keys, sort=True, dropna=False, observed=True)
    return pd.DataFrame(
        {"k_events": g["event_id"].nunique(), "k_estimates": g.size()}
    ).reset_index()


def _attach_groups(rows: pd.DataFrame, table: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    """Add ``group`` (table row) and the random-effects ``weight`` share to pooled rows."""
    if not keys:
        out = rows.assign(group=0)
    else:
        index = table[keys].assign(group=np.arange(len(table)))
        out = rows.merge(index, on=keys, how="left", sort=False)
    tau2 = table["tau2"].to_numpy(dtype=float)
    t = np.nan_to_num(tau2[out["group"].to_numpy()], nan=0.0)
    w = 1.0 / (out["v"].to_numpy(dtype=float) + t)
    total = np.bincount(out["group"].to_numpy(), weights=w, minlength=len(table))
    out["weight"] = w / total[out["group"].to_numpy()]
    return out


def pool_event_level(
    units: pd.DataFrame,
    keys: Sequence[str],
    *,
    method: str = "reml",
    ci: str = "hksj",
    alpha: float = 0.05,
    hksj_floor: bool = True,
    within_event: str = "aggregate",
    rho: float = DEFAULT_RHO,
) -> EventPooling:
    """Pool every group of ``keys`` of independent, harmonised units with the event as unit.

    ``units`` needs ``event_id``, ``y``, ``v`` (finite, positive) and the ``keys`` columns
    (include :func:`exposhift.synthesis.independence.pooling_keys` so incompatible quantities
    never mix).
    """
    keys = list(keys)
    if within_event not in WITHIN_EVENT:
        raise AnalysisError(
            f"unknown within-event route '{within_event}'; use one of: {', '.join(WITHIN_EVENT)}"
        )
    if units.empty:
        empty = pd.DataFrame(columns=[*keys, "k", "k_events", "k_estimates"])
        return EventPooling(empty, units.assign(group=[], weight=[]))
    counts = _event_counts(units, keys)
    if within_event == "aggregate":
        rows = aggregate_within_event(units, keys, rho=rho)
        table = pool_groups(rows, keys, method=method, ci=ci, alpha=alpha, hksj_floor=hksj_floor)
    elif within_event == "independent":
        rows = units.assign(k_units=1, estimate_uids=_singletons(units))
        table = pool_groups(rows, keys, method=method, ci=ci, alpha=alpha, hksj_floor=hksj_floor)
    else:
        rows = units.assign(k_units=1, estimate_uids=_singletons(units))
        table = _pool_multilevel_groups(rows, keys, alpha=alpha)
    table = (
        table.merge(counts, on=keys, how="left", sort=False)
        if keys
        else table.assign(
            k_events=counts["k_events"].iloc[0], k_estimates=counts["k_estimates"].iloc[0]
        )
    )
    table["within_event"] = within_event
    table["rho"] = float(rho) if within_event == "aggregate" else np.nan
    rows = _attach_groups(rows, table, keys)
    if within_event == "multilevel":
        rows["weight"] = np.nan
    return EventPooling(table.reset_index(drop=True), rows)


def _singletons(units: pd.DataFrame) -> list[list[str]]:
    ids = (
        (units["estimate_uid"] if "estimate_uid" in units.columns else pd.Series(units.index))
        .astype(str)
        .tolist()
    )
    return [[u] for u in ids]


def _pool_multilevel_groups(rows: pd.DataFrame, keys: list[str], alpha: float) -> pd.DataFrame:
    """The multilevel route, one fit per group (groups with one event fall back to a pool of
    the single event's estimates, which the model cannot separate from the event effect)."""
    from exposhift.synthesis.multilevel import pool_multilevel

    out = []
    groups = rows.groupby(keys, sort=True, dropna=False, observed=True) if keys else [((), rows)]
    for key, g in groups:
        key = key if isinstance(key, tuple) else (key,)
        rec = dict(zip(keys, key, strict=True))
        y, v = g["y"].to_numpy(float), g["v"].to_numpy(float)
        if g["event_id"].nunique() < 2:
            single = pool_groups(g.assign(_g=0), ["_g"], alpha=alpha).iloc[0].to_dict()
            single.pop("_g", None)
            single["notes"] = (
                "one event: the multilevel model needs at least two events; "
                "its estimates pooled as one event. " + str(single["notes"])
            )
            rec.update(single)
            rec["k"] = 1
        else:
            res = pool_multilevel(y, v, g["event_id"].astype(str).to_numpy(), alpha=alpha)
            rec.update(
                {
                    "k": int(g["event_id"].nunique()),
                    "method": "reml-3level",
                    "ci_method": "cr2",
                    "estimate": res.estimate,
                    "se": res.se,
                    "ci_lower": res.ci_lower,
                    "ci_upper": res.ci_upper,
                    "pvalue": res.pvalue,
                    "df": res.df,
                    "tau2": res.sigma2_event + res.sigma2_within,
                    "sigma2_event": res.sigma2_event,
                    "sigma2_within": res.sigma2_within,
                    "q": np.nan,
                    "q_pvalue": np.nan,
                    "i2": np.nan,
                    "pi_lower": np.nan,
                    "pi_upper": np.nan,
                    "notes": "; ".join(res.notes),
                }
            )
        out.append(rec)
    return pd.DataFrame(out)
