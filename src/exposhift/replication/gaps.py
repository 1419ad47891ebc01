"""The evidence-gap map (exposure × outcome group) and the list of unevaluated events.

Cells. For every exposure × outcome group (all exposures in the evidence base or the event
register, all outcome groups in the evidence base): ``events`` (distinct independent events),
``studies`` (distinct studies), ``best_level`` (highest overall appraisal level), ``status``
(the strongest replication status among the cell's outcomes, in the order of
:data:`~exposhift.replication.status.STATUSES`; ``status_outcome`` names the outcome),
``not_yet`` (for that outcome, which of place / time / designs is not yet replicated),
``imprecise`` (the status's pooled interval does not exclude no effect),
``ready_for_synthesis`` (some outcome has ≥ ``ready_min_events`` independent good events) and a
``state`` (ours) that *explains the status* of the best-covered outcome in the words of the gap
map, the first that applies of:

1. ``no-study`` — no natural-experiment estimate in the cell (status ``none``);
2. ``stale`` — only when a year is chosen: no evaluated exposure change after that year (the
   newest change year of an evaluated event is ≤ the year);
3. ``weak-only`` — no outcome of the cell has an event at level ≥ ``min_level`` (status
   ``weak-only``);
4. ``single-event`` — good evidence from one event only (status ``single-event``);
5. ``conflicting`` — good events or design families disagree, or the effect replicates against
   the expected direction (status ``discordant`` or ``replicated-against``);
6. ``not-replicated`` — two or more good events, no replication rule met;
7. ``replicated-in-part`` — replicated in place or in time, not yet in every dimension
   (``not_yet`` says which), or ``convergent`` but imprecise (the pooled interval of its good
   events does not exclude no effect);
8. ``replicated`` — replicated in place, in time and across design families, and the pooled
   interval excludes no effect (``convergent``, not imprecise).

A state can therefore never contradict the status beside it.
Event counts for states are per outcome (a synthesis pools one outcome). Everything is grouped
over the whole evidence base at once; there is no loop over cells. Gap-map practice: Snilstveit
et al. 2016 (J Clin Epidemiol 79:120); systematic evidence maps: Wolffe et al. 2019 (Environ Int
130:104871).

Opportunities: registered events with no study, with what an evaluation would need.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

import numpy as np
import pandas as pd

from exposhift.errors import ConfigError
from exposhift.replication.families import grouped_join
from exposhift.replication.settings import DEFAULTS, ReplicationSettings
from exposhift.replication.status import STATUS_RANK, STATUSES, Analysis, analyse

GAP_STATES: dict[str, str] = {
    "no-study": "no natural-experiment study of this exposure and outcome group",
    "stale": "no evaluated exposure change after the chosen year",
    "weak-only": "all evidence weak or not yet appraised",
    "single-event": "good evidence from one event only",
    "conflicting": "good events or design families disagree, or the effect replicates "
    "against the expected direction",
    "not-replicated": "two or more good events, but no replication rule is met",
    "replicated-in-part": "replicated in place or in time, not yet in every dimension (or "
    "the pooled interval does not yet exclude no effect)",
    "replicated": "replicated in place, in time and across design families, with a pooled "
    "interval that excludes no effect",
}
#: the gap state that explains each status
STATE_OF_STATUS: dict[str, str] = {
    "none": "no-study",
    "weak-only": "weak-only",
    "single-event": "single-event",
    "discordant": "conflicting",
    "replicated-against": "conflicting",
    "not-replicated": "not-replicated",
    "replicated-place": "replicated-in-part",
    "replicated-time": "replicated-in-part",
    "convergent": "replicated",
}
UNSPECIFIED_GROUP = "(no outcome group)"
CELL_COLUMNS: tuple[str, ...] = (
    "exposure",
    "outcome_group",
    "events",
    "studies",
    "best_level",
    "status",
    "state",
    "status_outcome",
    "outcomes",
    "good_events",
    "newest_year",
    "not_yet",
    "ready_for_synthesis",
    "provisional",
    "imprecise",
    "unevaluated_events",
    "state_rule",
)


# --------------------------------------------------------------------------------------------
# filters


def region_countries(names: Iterable[str], settings: ReplicationSettings = DEFAULTS) -> set[str]:
    """Countries of the named regions (``settings.regions``); ConfigError names the known ones."""
    out: set[str] = set()
    for name in names:
        key = name.strip().lower()
        if key not in settings.regions:
            raise ConfigError(
                f"unknown region '{name}'; known regions: {', '.join(sorted(settings.regions))} "
                "(add one under [regions] in evidence/replication.toml)"
            )
        out.update(settings.regions[key])
    return out


def filter_frame(
    frame: pd.DataFrame,
    *,
    design_families: Sequence[str] | None = None,
    countries: Iterable[str] | None = None,
    year_from: int | None = None,
    year_to: int | None = None,
    min_level: int | None = None,
) -> pd.DataFrame:
    """Rows of an analysis frame within the filters (design family, country, change-year range,
    minimum appraisal level; unappraised rows fail a level filter)."""
    keep = np.ones(len(frame), dtype=bool)
    if design_families:
        keep &= frame["design_family"].isin(list(design_families)).to_numpy()
    if countries is not None:
        keep &= frame["country"].isin({c.upper() for c in countries}).to_numpy()
    year = _change_year(frame)
    if year_from is not None:
        keep &= year >= year_from
    if year_to is not None:
        keep &= year <= year_to
    if min_level is not None:
        keep &= (pd.to_numeric(frame["level"], errors="coerce") >= min_level).to_numpy()
    return frame.loc[keep]


def _change_year(frame: pd.DataFrame) -> np.ndarray:
    if "change_year" in frame.columns:
        return pd.to_numeric(frame["change_year"], errors="coerce").to_numpy(dtype=float)
    return pd.to_numeric(frame["change_date"].astype(str).str[:4], errors="coerce").to_numpy(
        dtype=float
    )


# --------------------------------------------------------------------------------------------
# the map


def _nunique(frame: pd.DataFrame, keys: list[str], col: str, name: str) -> pd.DataFrame:
    d = frame[[*keys, col]].dropna().drop_duplicates()
    return d.groupby(keys, sort=False, observed=True).size().rename(name).reset_index()


def gap_map(
    units: pd.DataFrame,
    *,
    settings: ReplicationSettings = DEFAULTS,
    stale_after: int | None = None,
    all_estimates: pd.DataFrame | None = None,
    registry: pd.DataFrame | None = None,
    analysis: Analysis | None = None,
    directions: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """The gap map: one row per exposure × outcome group (columns :data:`CELL_COLUMNS`).

    ``units``: harmonised independent units (see :mod:`exposhift.replication.families`).
    ``all_estimates``: the frame before the independence selection, to count studies whose
    estimates were all set aside as duplicates (default: ``units``). ``registry``: the event
    register (``events_frame``), whose exposures get rows too and whose unevaluated events are
    counted per exposure. ``analysis``: a ready :func:`analyse` result of ``units``.
    """
    units = _with_group(units)
    a = (
        analysis
        if analysis is not None
        else analyse(units, ("exposure", "outcome"), settings, directions)
    )
    st = a.statuses.merge(
        units[["exposure", "outcome", "outcome_group"]].drop_duplicates(["exposure", "outcome"]),
        on=["exposure", "outcome"],
        how="left",
    )
    cell = ["exposure", "outcome_group"]
    st = st.assign(_rank=st["status"].map(STATUS_RANK))
    best = st.sort_values(
        [*cell, "_rank", "n_good", "outcome"],
        ascending=[True, True, True, False, True],
        kind="stable",
    )
    best = best.drop_duplicates(cell, keep="first")
    not_yet = np.where(~best["replicated_place"], "place", "")
    for flag, word in (("replicated_time", "time"), ("triangulated", "designs")):
        not_yet = np.where(
            ~best[flag], np.where(not_yet == "", word, not_yet + ", " + word), not_yet
        )
    best = best.assign(not_yet=np.where(best["n_good"] > 0, not_yet, ""))
    best = best[[*cell, "status", "outcome", "not_yet", "provisional", "imprecise"]].rename(
        columns={"outcome": "status_outcome"}
    )
    per_outcome = st.groupby(cell, sort=False, observed=True).agg(
        outcomes=("outcome", "size"), good_events=("n_good", "max")
    )

    studies_src = _with_group(all_estimates) if all_estimates is not None else units
    cells = _nunique(units, cell, "event_id", "events").merge(
        _nunique(studies_src, cell, "study_id", "studies"), on=cell, how="outer"
    )
    lv = units.assign(_lvl=pd.to_numeric(units["level"], errors="coerce"), _yr=_change_year(units))
    extra = lv.groupby(cell, sort=False, observed=True).agg(
        best_level=("_lvl", "max"), newest_year=("_yr", "max")
    )
    cells = cells.merge(extra.reset_index(), on=cell, how="left")
    cells = cells.merge(per_outcome.reset_index(), on=cell, how="left").merge(
        best, on=cell, how="left"
    )

    grid = _grid(units, registry)
    out = grid.merge(cells, on=cell, how="left")
    for col in ("events", "studies", "outcomes", "good_events"):
        out[col] = out[col].fillna(0).astype(np.int64)
    out["status"] = out["status"].fillna("none")
    out["status_outcome"] = out["status_outcome"].fillna("")
    out["not_yet"] = out["not_yet"].fillna("")
    out["provisional"] = out["provisional"].fillna(False).astype(bool)
    out["imprecise"] = out["imprecise"].fillna(False).astype(bool)
    out["ready_for_synthesis"] = out["good_events"] >= settings.ready_min_events
    out["unevaluated_events"] = (
        out["exposure"].map(_unevaluated_counts(registry)).fillna(0).astype(np.int64)
    )
    out["state"], out["state_rule"] = _states(out, settings, stale_after)
    return out[list(CELL_COLUMNS)].sort_values(cell, kind="stable").reset_index(drop=True)


def _with_group(frame: pd.DataFrame) -> pd.DataFrame:
    if "outcome_group" in frame.columns:
        grp = frame["outcome_group"]
        if not (grp.isna() | (grp == "")).any():
            return frame
        return frame.assign(outcome_group=grp.where(grp.notna() & (grp != ""), UNSPECIFIED_GROUP))
    return frame.assign(outcome_group=UNSPECIFIED_GROUP)


def _grid(units: pd.DataFrame, registry: pd.DataFrame | None) -> pd.DataFrame:
    exposures = set(units["exposure"].dropna().unique().tolist())
    if registry is not None and len(registry):
        exposures |= set(registry["exposure"].dropna().unique().tolist())
    groups = sorted(set(units["outcome_group"].dropna().unique().tolist()))
    if not groups:
        groups = [UNSPECIFIED_GROUP]
    idx = pd.MultiIndex.from_product(
        [sorted(exposures), groups], names=["exposure", "outcome_group"]
    )
    return idx.to_frame(index=False)


def _unevaluated_counts(registry: pd.DataFrame | None) -> pd.Series:
    if registry is None or registry.empty:
        return pd.Series(dtype="int64")
    return registry.loc[registry["studies"] == 0].groupby("exposure").size()


def _states(
    out: pd.DataFrame, s: ReplicationSettings, stale_after: int | None
) -> tuple[np.ndarray, list[str]]:
    events = out["events"].to_numpy()
    newest = out["newest_year"].to_numpy(dtype=float)
    stale = (
        np.zeros(len(out), dtype=bool)
        if stale_after is None
        else np.nan_to_num(newest, nan=-np.inf) <= stale_after
    )
    state = out["status"].map(STATE_OF_STATUS).fillna("no-study").to_numpy(dtype=object)
    # a convergent cell whose pooled interval includes no effect is not shown as settled
    state = np.where(
        (state == "replicated") & out["imprecise"].to_numpy(dtype=bool),
        "replicated-in-part",
        state,
    ).astype(object)
    state = np.where((events > 0) & stale, "stale", state).astype(object)
    rules = []
    for st, status, outcome, good, ready, yr, not_yet, imprecise in zip(
        state.tolist(),
        out["status"].tolist(),
        out["status_outcome"].tolist(),
        out["good_events"].tolist(),
        out["ready_for_synthesis"].tolist(),
        newest.tolist(),
        out["not_yet"].tolist(),
        out["imprecise"].tolist(),
        strict=True,
    ):
        if st == "stale":
            rules.append(f"newest evaluated change in {int(yr)}, not after {stale_after}")
            continue
        if st == "no-study":
            rules.append("no estimate in this cell")
            continue
        text = f"status of {outcome}: {status} ({STATUSES[status]})"
        if imprecise:
            text += "; imprecise: the pooled interval of its good events does not exclude no effect"
        if not_yet and st != "replicated":
            text += f"; not yet replicated in: {not_yet}"
        text += (
            f"; {int(good)} independent event(s) at level ≥ {s.min_level} on the "
            f"best-covered outcome"
            + (f", enough to pool (≥ {s.ready_min_events})" if ready else "")
        )
        rules.append(text)
    return state, rules


# --------------------------------------------------------------------------------------------
# opportunities

OPPORTUNITY_COLUMNS: tuple[str, ...] = (
    "event_id",
    "exposure",
    "country",
    "change_date",
    "change_kind",
    "change_direction",
    "area",
    "family",
    "family_events_evaluated",
    "outcomes_studied_elsewhere",
    "designs_used_elsewhere",
    "needs",
)


def opportunities(
    registry: pd.DataFrame,
    units: pd.DataFrame | None = None,
    *,
    countries: Iterable[str] | None = None,
    year_from: int | None = None,
    year_to: int | None = None,
) -> pd.DataFrame:
    """Registered events that no study evaluated, with what an evaluation would need.

    ``registry`` is the event register (``events_frame``: one row per event with a ``studies``
    count); ``units`` (the evidence, optional) supplies, per family of change, how many of its
    events were evaluated, which outcomes and which designs were used.
    """
    if registry is None or registry.empty:
        return pd.DataFrame(columns=list(OPPORTUNITY_COLUMNS))
    reg = registry.loc[registry["studies"] == 0].copy()
    reg = filter_frame(
        reg.assign(design_family=None, level=np.nan),
        countries=countries,
        year_from=year_from,
        year_to=year_to,
    )
    reg = reg.assign(family=_family(reg))
    fam = _family_summary(units)
    reg = reg.merge(fam, on="family", how="left")
    reg["family_events_evaluated"] = reg["family_events_evaluated"].fillna(0).astype(np.int64)
    for col in ("outcomes_studied_elsewhere", "designs_used_elsewhere"):
        reg[col] = reg[col].fillna("")
    reg["needs"] = _needs(reg)
    for col in ("area", "change_kind", "change_direction"):
        if col not in reg.columns:
            reg[col] = None
    reg = reg.sort_values(["exposure", "change_date", "event_id"], kind="stable")
    return reg[list(OPPORTUNITY_COLUMNS)].reset_index(drop=True)


def _family(frame: pd.DataFrame) -> pd.Series:
    default = frame["exposure"].astype(str)
    if "change_kind" in frame.columns:
        default = default + " / " + frame["change_kind"].astype(str)
    if "family" not in frame.columns:
        return default
    fam = frame["family"]
    return fam.where(fam.notna() & (fam != ""), default)


def _top(frame: pd.DataFrame, col: str, n: int = 3) -> pd.Series:
    """Per family, the ``n`` values of ``col`` covering most events with their event counts,
    joined with '; ', then "and K more (a, b)" naming the other values: nothing is left out
    unsaid."""
    d = frame[["family", col, "event_id"]].dropna().drop_duplicates()
    c = d.groupby(["family", col], sort=False).size().rename("_n").reset_index()
    c = c.sort_values(["family", "_n", col], ascending=[True, False, True], kind="stable")
    top = c.groupby("family", sort=False).cumcount().to_numpy() < n
    rest = c[~top]
    c = c[top]
    c = c.assign(
        _label=c[col].astype(str)
        + " ("
        + c["_n"].astype(str)
        + np.where(c["_n"] == 1, " event)", " events)")
    )
    out = grouped_join(c, ["family"], "_label", sep="; ").set_index("family")["_label"]
    if len(rest):
        more = grouped_join(rest.assign(_label=rest[col].astype(str)), ["family"], "_label")
        counts = rest.groupby("family", sort=True).size()
        more = more.set_index("family")["_label"]
        tail = "; and " + counts.astype(str) + " more (" + more + ")"
        out = out.add(tail.reindex(out.index).fillna(""))
    return out


def _family_summary(units: pd.DataFrame | None) -> pd.DataFrame:
    cols = [
        "family",
        "family_events_evaluated",
        "outcomes_studied_elsewhere",
        "designs_used_elsewhere",
    ]
    if units is None or units.empty:
        return pd.DataFrame(columns=cols)
    u = units.assign(family=_family(units))
    n = u[["family", "event_id"]].drop_duplicates().groupby("family").size()
    out = pd.DataFrame({"family_events_evaluated": n})
    out["outcomes_studied_elsewhere"] = _top(u, "outcome")
    if "design" in u.columns:
        out["designs_used_elsewhere"] = _top(u, "design")
    else:
        out["designs_used_elsewhere"] = ""
    return out.reset_index(names="family")[cols]


def _needs(reg: pd.DataFrame) -> list[str]:
    """What an evaluation of each event would need, in words."""
    out = []
    for r in reg.itertuples(index=False):
        where = r.country + (f" ({r.area})" if isinstance(r.area, str) and r.area else "")
        outcomes = (
            f" for the outcomes studied for other events of this family: "
            f"{r.outcomes_studied_elsewhere}"
            if r.outcomes_studied_elsewhere
            else ""
        )
        parts = [
            f"outcome data for {where} before and after {r.change_date}{outcomes}, with at "
            "least 3 time points on each side and 12 preferred for an interrupted time series "
            "(Wagner et al. 2002)",
            "a comparison that did not have the change over the same period (another area or "
            "group, for difference-in-differences or a synthetic control) or a boundary for a "
            "geographic discontinuity",
            "exposure measurements before and after the change, to show that exposure shifted",
        ]
        size = getattr(r, "change_size", None)
        if size is None or pd.isna(size):
            parts.append(
                "the size of the exposure change (not recorded), for a dose-response analysis"
            )
        out.append("; ".join(parts))
    return out
