"""Families of exposure change and the independent events behind one exposure × outcome.

Input: a *harmonised* analysis frame (``exposhift.synthesis.harmonise(frame, align_to=
"increase")``) reduced to independent units (``exposhift.synthesis.independence.
select_independent``): one estimate per event × population × data source × outcome × measure
group × estimate kind (METHODS.md §5, unit of replication).

Direction. Every ``y`` is the effect of an exposure *increase* (harmonise flips the sign of
estimates from decreases, shown in ``sign_flipped``), so a ban whose outcome fell and a
reversal whose outcome rose back both have the same sign. The **expected direction** of one
exposure × outcome is, by default, the sign of Stouffer's combined z, Σ yᵢ/seᵢ, over its events
at level ≥ ``min_level`` (Stouffer et al. 1949, The American Soldier, vol. 1; unweighted sum of
z statistics, which is free of the measure's scale); with the setting ``expected_direction =
"raises"`` or ``"lowers"`` it is fixed in advance (an exposure increase raises / lowers the
outcome). The two-sided sign test does not depend on which direction is called expected.

One row per event. An event studied by several units (populations, data sources, measures)
counts once: its *representative* is the unit with the highest appraisal level, then the
preferred estimate kind (``change``, ``level``, ``per-unit``, ``slope``), then the smallest
variance. Place = country (ISO 3166-1 alpha-3): the ``area`` field is free text and is shown but
not used to tell places apart.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
from scipy import stats

from exposhift.errors import AnalysisError
from exposhift.replication.settings import DEFAULTS, ReplicationSettings
from exposhift.synthesis.harmonise import harmonise
from exposhift.synthesis.independence import select_independent

DEFAULT_BY: tuple[str, ...] = ("exposure", "outcome")

#: columns the replication modules read from the harmonised, independent frame
REQUIRED: tuple[str, ...] = (
    "event_id", "exposure", "outcome", "country", "change_date", "change_direction",
    "design_family", "level", "y", "v", "study_id",
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
    frame: pd.DataFrame, settings: ReplicationSettings = DEFAULTS,
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
        out["change_year"] = pd.to_numeric(out["change_date"].astype(str).str[:4],
                                           errors="coerce")
    if "estimate_kind" not in out.columns:
        out["estimate_kind"] = "change"
    out["estimate_kind"] = out["estimate_kind"].fillna("change").replace("", "change")
    if "measure_group" not in out.columns:
        out["measure_group"] = ""
    if "increment" not in out.columns:
        out["increment"] = ""
    out["increment"] = out["increment"].fillna("")
    out["place"] = out["country"].astype(str)
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


def event_table(units: pd.DataFrame, by: Sequence[str] = DEFAULT_BY) -> pd.DataFrame:
    """One row per key × event: the event's representative unit (see the module docstring).

    Adds ``n_units`` (independent units of the event for this key).
    """
    by = list(by)
    keys = [*by, "event_id"]
    order = units.assign(
        _lvl=units["level"].fillna(-1.0), _v=units["v"].fillna(np.inf),
        _has_y=np.isfinite(units["y"].to_numpy(dtype=float)),
    ).sort_values([*keys, "_has_y", "_lvl", "kind_rank", "_v"],
                  ascending=[True] * len(keys) + [False, False, True, True], kind="stable")
    n_units = order.groupby(keys, sort=False, observed=True)["event_id"].transform("size")
    rep = order.assign(n_units=n_units.to_numpy()).drop_duplicates(keys, keep="first")
    return rep.drop(columns=["_lvl", "_v", "_has_y"]).reset_index(drop=True)


def expected_sign(
    events: pd.DataFrame, by: Sequence[str] = DEFAULT_BY, settings: ReplicationSettings = DEFAULTS,
) -> pd.DataFrame:
    """Expected direction per key: +1 (exposure increase raises the outcome), −1, or 0.

    ``pooled``: sign of Stouffer's Σz over good events (all events when none is good); 0 when
    that sum is 0 or no event has a z. ``raises``/``lowers``: +1/−1 for every key. Returns the
    key columns, ``expected`` and ``stouffer_z`` (Σz/√n).
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
    elif settings.expected_direction == "lowers":
        agg["expected"] = np.int8(-1)
    else:
        agg["expected"] = np.sign(zsum).astype(np.int8)
    return agg[[*by, "expected", "stouffer_z"]]


def mark_concordance(
    events: pd.DataFrame, expected: pd.DataFrame, by: Sequence[str] = DEFAULT_BY,
    settings: ReplicationSettings = DEFAULTS,
) -> pd.DataFrame:
    """Add ``expected`` and ``concordant`` (sign equals the expected direction, and, when the
    setting asks for it, the effect is significant) to an event (or unit) table."""
    out = events.merge(expected[[*by, "expected"]], on=list(by), how="left")
    exp = out["expected"].fillna(0).astype(np.int8).to_numpy()
    conc = (out["sign"].to_numpy() == exp) & (exp != 0)
    if settings.concordance_needs_significance:
        conc &= out["significant"].to_numpy(dtype=bool)
    out["expected"] = exp
    out["concordant"] = conc
    return out


def direction_words(expected: int) -> str:
    """The expected direction in words."""
    if expected > 0:
        return "an exposure increase raises the outcome (a decrease lowers it)"
    if expected < 0:
        return "an exposure increase lowers the outcome (a decrease raises it)"
    return "no expected direction (the events cancel out)"


def independent_units(frame: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Harmonise an analysis frame (aligned to an exposure increase) and keep one estimate per
    unit of replication; returns ``(units, excluded)`` with the reason for each exclusion."""
    if frame.empty:
        empty = frame.assign(y=np.nan, v=np.nan, measure_group="", sign_flipped=False)
        return empty, empty.assign(reason="")
    return select_independent(harmonise(frame, align_to="increase"))


def grouped_join(
    frame: pd.DataFrame, by: Sequence[str], col: str, sep: str = ", ", limit: int | None = None,
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
