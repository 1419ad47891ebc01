"""Families of exposure change and the independent events behind one exposure × outcome.

Input: a *harmonised* analysis frame (``exposhift.synthesis.harmonise(frame, align_to=
"increase")``) reduced to independent units (``exposhift.synthesis.independence.
select_independent``): one estimate per event × population × data source × outcome × measure
group × estimate kind (METHODS.md §5, unit of replication).

Direction. Every ``y`` is the effect of an exposure *increase* (harmonise flips the sign of
estimates from decreases, shown in ``sign_flipped``), so a ban whose outcome fell and a
reversal whose outcome rose back both have the same sign. The **expected direction** of one
exposure × outcome is pre-specified by the committee (``exposhift direction set``, stored and
audited in the evidence base) or fixed for all pairs by the setting ``expected_direction =
"raises"`` / ``"lowers"``. Otherwise it is *inferred from the same data*: the sign of
Stouffer's combined z, Σ zᵢ/√n, over the good events (Stouffer et al. 1949, The American
Soldier, vol. 1; free of the measure's scale), and every status built on it is marked
provisional (``expected_source = "inferred"``). The two-sided sign test does not depend on which
direction is called expected.

One row per event. An event studied by several units (populations, data sources, measures)
counts once. Its *stratum* (measure group × estimate kind × increment) is that of its preferred
unit — the highest appraisal level, then the preferred estimate kind (``change``, ``level``,
``per-unit``, ``slope``), then the smallest variance — and its estimate combines the event's good
units of that stratum (all its units of that stratum when none is good) with the within-event
correlation ``within_event_rho`` (:func:`exposhift.synthesis.events.aggregate_within_event`).
Place = country (ISO 3166-1 alpha-3): the ``area`` field is free text and is shown but not used
to tell places apart. Dates: each change date becomes an interval of months from its precision
(``1997`` = 1997-01 … 1997-12), so that comparisons of dates never claim more than is known.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
from scipy import stats

from exposhift.errors import AnalysisError
from exposhift.replication.settings import DEFAULTS, ReplicationSettings
from exposhift.synthesis.events import aggregate_within_event
from exposhift.synthesis.harmonise import harmonise
from exposhift.synthesis.independence import keep_independent, select_independent

DEFAULT_BY: tuple[str, ...] = ("exposure", "outcome")

#: columns the replication modules read from the harmonised, independent frame
REQUIRED: tuple[str, ...] = (
    "event_id",
    "exposure",
    "outcome",
    "country",
    "change_date",
    "change_direction",
    "design_family",
    "level",
    "y",
    "v",
    "study_id",
)
#: order in which an event's units are preferred as its representative
KIND_ORDER: dict[str, int] = {"change": 0, "level": 1, "per-unit": 2, "slope": 3}


def check_columns(frame: pd.DataFrame, by: Sequence[str] = DEFAULT_BY) -> None:
    """Raise :class:`AnalysisError` naming the columns the replication modules need."""
    missing = [c for c in (*REQUIRED, *by) if c not in frame.columns]
    if missing:
        raise AnalysisError(
            f"column(s) {', '.join(dict.fromkeys(missing))} missing from the frame; pass the "
            "analysis frame through exposhift.synthesis.harmonise (adds y, v) first"
        )


def prepare_units(
    frame: pd.DataFrame,
    settings: ReplicationSettings = DEFAULTS,
    by: Sequence[str] = DEFAULT_BY,
) -> pd.DataFrame:
    """The independent units with the columns the replication rules use.

    Adds ``place`` (country), ``change_year`` (when absent), ``good`` (level ≥ ``min_level``),
    ``se``, ``z`` = y/se, ``sign`` (−1, 0, +1; 0 when y is 0 or missing), ``significant``
    (|z| ≥ z₁₋α/₂, the unit's Wald interval excludes no effect), ``kind_rank`` and
    ``unit_row`` (position, to find an event's representative among the units). Rows with a
    missing ``y`` are kept (they count as studied) but have no sign.
    """
    check_columns(frame, by)
    out = frame.copy()
    if "change_year" not in out.columns:
        out["change_year"] = pd.to_numeric(out["change_date"].astype(str).str[:4], errors="coerce")
    if "estimate_kind" not in out.columns:
        out["estimate_kind"] = "change"
    out["estimate_kind"] = out["estimate_kind"].fillna("change").replace("", "change")
    if "measure_group" not in out.columns:
        out["measure_group"] = ""
    if "increment" not in out.columns:
        out["increment"] = ""
    out["increment"] = out["increment"].fillna("")
    out["place"] = out["country"].astype(str)
    out["month_first"], out["month_last"] = month_interval(out["change_date"])
    level = pd.to_numeric(out["level"], errors="coerce").astype("float64")
    out["level"] = level
    out["good"] = (level >= settings.min_level).to_numpy()
    y = pd.to_numeric(out["y"], errors="coerce").to_numpy(dtype=float)
    v = pd.to_numeric(out["v"], errors="coerce").to_numpy(dtype=float)
    with np.errstate(invalid="ignore"):
        se = np.where(v > 0, np.sqrt(np.where(v > 0, v, 1.0)), np.nan)
        z = y / se
    crit = stats.norm.isf(settings.alpha / 2)
    out["y"], out["v"], out["se"], out["z"] = y, v, se, z
    out["sign"] = np.where(np.isfinite(y), np.sign(np.nan_to_num(y)), 0).astype(np.int8)
    out["significant"] = np.isfinite(z) & (np.abs(np.nan_to_num(z)) >= crit)
    out["kind_rank"] = out["estimate_kind"].map(KIND_ORDER).fillna(9).astype(np.int8)
    out["unit_row"] = np.arange(len(out))
    return out


def month_interval(dates: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """First and last possible month (months since year 0) of each change date, from its
    precision: ``YYYY`` spans January to December, ``YYYY-MM`` and ``YYYY-MM-DD`` one month."""
    text = dates.astype(str).str.strip()
    year = pd.to_numeric(text.str[:4], errors="coerce").to_numpy(dtype=float)
    month = pd.to_numeric(text.str[5:7].where(text.str.len() >= 7), errors="coerce").to_numpy(
        dtype=float
    )
    first = year * 12 + np.where(np.isnan(month), 0.0, month - 1)
    last = year * 12 + np.where(np.isnan(month), 11.0, month - 1)
    return first, last


STRATUM: tuple[str, ...] = ("measure_group", "estimate_kind", "increment")


def event_table(
    units: pd.DataFrame, by: Sequence[str] = DEFAULT_BY, settings: ReplicationSettings = DEFAULTS
) -> pd.DataFrame:
    """One row per key × event: the event-level estimate (see the module docstring).

    Adds ``n_units`` (independent units of the event for this key), ``k_combined`` (units
    combined into the event's estimate) and recomputes ``y``, ``v``, ``se``, ``z``, ``sign`` and
    ``significant`` from the combined estimate.
    """
    rep = _representatives(units, by)
    keys = [*list(by), "event_id"]
    pick = rep[[*keys, *STRATUM, "good"]].rename(columns={"good": "_rep_good"})
    cand = units.merge(pick, on=[*keys, *STRATUM], how="inner")
    cand = cand[
        (cand["good"] | ~cand["_rep_good"])
        & np.isfinite(cand["y"])
        & np.isfinite(cand["v"])
        & (cand["v"] > 0)
    ]
    if cand.empty:
        return rep.assign(k_combined=np.where(np.isfinite(rep["y"]), 1, 0))
    comb = aggregate_within_event(cand, [*list(by), *STRATUM], rho=settings.within_event_rho)
    comb = comb[[*keys, "y", "v", "k_units"]].rename(
        columns={"y": "_y", "v": "_v", "k_units": "k_combined"}
    )
    out = rep.merge(comb, on=keys, how="left")
    has = out["_y"].notna().to_numpy()
    y = np.where(has, out["_y"].to_numpy(dtype=float), out["y"].to_numpy(dtype=float))
    v = np.where(has, out["_v"].to_numpy(dtype=float), out["v"].to_numpy(dtype=float))
    out = out.drop(columns=["_y", "_v"])
    out["k_combined"] = out["k_combined"].fillna(0).astype(np.int64)
    return _with_z(out, y, v, settings)


def _with_z(
    out: pd.DataFrame, y: np.ndarray, v: np.ndarray, settings: ReplicationSettings
) -> pd.DataFrame:
    with np.errstate(invalid="ignore"):
        se = np.where(v > 0, np.sqrt(np.where(v > 0, v, 1.0)), np.nan)
        z = y / se
    crit = stats.norm.isf(settings.alpha / 2)
    out["y"], out["v"], out["se"], out["z"] = y, v, se, z
    out["sign"] = np.where(np.isfinite(y), np.sign(np.nan_to_num(y)), 0).astype(np.int8)
    out["significant"] = np.isfinite(z) & (np.abs(np.nan_to_num(z)) >= crit)
    return out


def _representatives(units: pd.DataFrame, by: Sequence[str]) -> pd.DataFrame:
    """One row per key × event: the event's preferred unit (module docstring)."""
    by = list(by)
    keys = [*by, "event_id"]
    order = units.assign(
        _lvl=units["level"].fillna(-1.0),
        _v=units["v"].fillna(np.inf),
        _has_y=np.isfinite(units["y"].to_numpy(dtype=float)),
    ).sort_values(
        [*keys, "_has_y", "_lvl", "kind_rank", "_v"],
        ascending=[True] * len(keys) + [False, False, True, True],
        kind="stable",
    )
    n_units = order.groupby(keys, sort=False, observed=True)["event_id"].transform("size")
    rep = order.assign(n_units=n_units.to_numpy()).drop_duplicates(keys, keep="first")
    return rep.drop(columns=["_lvl", "_v", "_has_y"]).reset_index(drop=True)


def expected_sign(
    events: pd.DataFrame,
    by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
    directions: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """Expected direction per key: +1 (exposure increase raises the outcome), −1, or 0.

    ``directions`` (columns ``exposure``, ``outcome``, ``direction`` = raises/lowers): the
    committee's pre-specified directions, which win. Otherwise the setting: ``raises``/``lowers``
    for every key, or ``pooled``: the sign of Stouffer's Σz over good events (all events when
    none is good); 0 when that sum is 0 or no event has a z. Returns the key columns,
    ``expected``, ``expected_source`` (``pre-specified``, ``settings`` or ``inferred``) and
    ``stouffer_z`` (Σz/√n).
    """
    by = list(by)
    z = events["z"].to_numpy(dtype=float)
    ok = np.isfinite(z)
    good = events["good"].to_numpy(dtype=bool)
    tmp = events[by].copy()
    tmp["_zg"] = np.where(ok & good, z, 0.0)
    tmp["_ng"] = (ok & good).astype(np.int64)
    tmp["_za"] = np.where(ok, z, 0.0)
    tmp["_na"] = ok.astype(np.int64)
    agg = tmp.groupby(by, sort=True, observed=True, dropna=False).sum().reset_index()
    use_good = agg["_ng"].to_numpy() > 0
    zsum = np.where(use_good, agg["_zg"], agg["_za"])
    n = np.where(use_good, agg["_ng"], agg["_na"])
    with np.errstate(invalid="ignore", divide="ignore"):
        agg["stouffer_z"] = np.where(n > 0, zsum / np.sqrt(np.maximum(n, 1)), np.nan)
    if settings.expected_direction == "raises":
        agg["expected"] = np.int8(1)
        agg["expected_source"] = "settings"
    elif settings.expected_direction == "lowers":
        agg["expected"] = np.int8(-1)
        agg["expected_source"] = "settings"
    else:
        agg["expected"] = np.sign(zsum).astype(np.int8)
        agg["expected_source"] = "inferred"
    if directions is not None and len(directions) and {"exposure", "outcome"} <= set(by):
        d = directions[["exposure", "outcome", "direction"]].drop_duplicates(
            ["exposure", "outcome"]
        )
        m = agg[["exposure", "outcome"]].merge(d, on=["exposure", "outcome"], how="left")
        pre = m["direction"].isin(["raises", "lowers"]).to_numpy()
        agg.loc[pre, "expected"] = np.where(m["direction"][pre] == "raises", 1, -1).astype(np.int8)
        agg.loc[pre, "expected_source"] = "pre-specified"
    agg["expected"] = agg["expected"].astype(np.int8)
    return agg[[*by, "expected", "expected_source", "stouffer_z"]]


def mark_concordance(
    events: pd.DataFrame,
    expected: pd.DataFrame,
    by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
) -> pd.DataFrame:
    """Add ``expected`` and ``concordant`` (the estimate points in the expected direction) to an
    event (or unit) table. Whether a concordant event *counts* for replication is decided with
    the pooled estimate (:mod:`exposhift.replication.status`)."""
    out = events.merge(expected[[*by, "expected"]], on=list(by), how="left")
    exp = out["expected"].fillna(0).astype(np.int8).to_numpy()
    conc = (out["sign"].to_numpy() == exp) & (exp != 0)
    out["expected"] = exp
    out["concordant"] = conc
    return out


def direction_words(expected: int) -> str:
    """The expected direction in words."""
    if expected > 0:
        return "an exposure increase raises the outcome (a decrease lowers it)"
    if expected < 0:
        return "an exposure increase lowers the outcome (a decrease raises it)"
    return "no expected direction (no event with an estimate, or their z statistics cancel out)"


def independent_units(frame: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Harmonise an analysis frame (aligned to an exposure increase) and keep one estimate per
    unit of replication; returns ``(units, excluded)`` with the reason for each exclusion."""
    if frame.empty:
        empty = frame.assign(y=np.nan, v=np.nan, measure_group="", sign_flipped=False)
        return empty, empty.assign(reason="")
    return select_independent(harmonise(frame, align_to="increase"))


def independent_kept(frame: pd.DataFrame) -> pd.DataFrame:
    """The ``units`` of :func:`independent_units` alone (the same rows), without writing a
    reason for every estimate set aside."""
    if frame.empty:
        return independent_units(frame)[0]
    return keep_independent(harmonise(frame, align_to="increase"))


def grouped_join(
    frame: pd.DataFrame,
    by: Sequence[str],
    col: str,
    sep: str = ", ",
    limit: int | None = None,
) -> pd.DataFrame:
    """Per group of ``by``, the values of ``col`` in row order joined with ``sep`` (the first
    ``limit`` only), without a Python call per group. Returns ``by`` + ``col``, one row per
    group, sorted by ``by``."""
    by = list(by)
    if frame.empty:
        return pd.DataFrame(columns=[*by, col])
    grouped = frame.groupby(by, sort=True, observed=True, dropna=False)
    codes = grouped.ngroup().to_numpy()
    rank = grouped.cumcount().to_numpy()
    width = int(rank.max()) + 1 if limit is None else min(limit, int(rank.max()) + 1)
    keep = rank < width
    table = np.full((grouped.ngroups, width), "", dtype=object)
    table[codes[keep], rank[keep]] = frame[col].astype(str).to_numpy(dtype=object)[keep]
    joined = table[:, 0]
    for j in range(1, width):
        nxt = table[:, j]
        joined = np.where(nxt != "", joined + sep + nxt, joined)
    keys = frame[by].iloc[np.unique(codes, return_index=True)[1]].reset_index(drop=True)
    return keys.assign(**{col: joined})
