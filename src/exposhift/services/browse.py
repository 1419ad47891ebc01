"""Read-only listings for browsing the evidence base (the dashboard's overview and study list),
and the study rows behind a pooled result (its forest plot).

Nothing here writes. Each function opens one read transaction and returns DataFrames or
dataclasses; the dashboard and any other front end only display them.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from exposhift.services.pooling import STRATA, PoolOutput, pool_evidence
from exposhift.services.setup import database_info
from exposhift.services.snapshot import EvidenceSnapshot
from exposhift.store.appraisals import studies_by_key
from exposhift.store.database import Store
from exposhift.store.overview_reads import (
    STUDY_LINKS,
    estimates_per_study,
    pair_counts,
    studies_with_estimates,
    study_links,
)
from exposhift.store.queries import events_frame
from exposhift.synthesis.forest_rows import event_rows
from exposhift.synthesis.independence import pooling_keys
from exposhift.vocab import DESIGNS

DEMO_NOTE = (
    "Every record flagged demo is invented: invented agents, studies and authors. "
    "It shows how exposhift works and is no evidence about any real agent."
)


@dataclass(frozen=True)
class EvidenceOverview:
    """What the evidence base holds, for an overview page."""

    url: str
    backend: str
    counts: dict[str, int]
    demo_studies: int
    demo_events: int
    events_without_study: int
    countries: list[str]
    first_year: int | None
    last_year: int | None
    pairs: pd.DataFrame  # exposure, outcome, outcome_group, studies, events, estimates
    by_design_family: pd.DataFrame  # design_family, studies
    by_level: pd.DataFrame  # level (text), studies

    @property
    def all_demo(self) -> bool:
        """True when every study and event is a demo record (and there is at least one)."""
        n = self.counts.get("studies", 0) + self.counts.get("events", 0)
        return n > 0 and self.demo_studies + self.demo_events == n

    @property
    def any_demo(self) -> bool:
        return self.demo_studies + self.demo_events > 0


def _level_text(level: float) -> str:
    return "not appraised" if pd.isna(level) else f"level {int(level)}"


def evidence_overview(store: Store, snapshot: EvidenceSnapshot | None = None) -> EvidenceOverview:
    """Counts, demo flags, exposure × outcome pairs with evidence, studies per design family
    and per level of record. Counted by the database (:mod:`exposhift.store.overview_reads`):
    no estimate is read, so every page can show it on a large evidence base. ``snapshot``
    gives the registered events when the caller holds one."""
    info = database_info(store.url)
    with store.read() as conn:
        pairs = pair_counts(conn)
        studies = studies_with_estimates(conn)
        events = events_frame(conn) if snapshot is None else snapshot.events
    pairs = pairs.sort_values(
        ["studies", "events", "exposure", "outcome"],
        ascending=[False, False, True, True],
        kind="stable",
    ).reset_index(drop=True)
    pairs["outcome_group"] = pairs["outcome_group"].fillna("")
    family = studies["design"].map(lambda d: DESIGNS[d][0] if d in DESIGNS else None)
    fam = (
        studies.assign(design_family=family.fillna("unknown"))
        .groupby("design_family")
        .size()
        .rename("studies")
        .reset_index()
        .sort_values(["studies", "design_family"], ascending=[False, True])
        .reset_index(drop=True)
    )
    lv = (
        studies.assign(level=studies["level"].map(_level_text))
        .groupby("level")
        .size()
        .rename("studies")
        .reset_index()
        .sort_values("level")
        .reset_index(drop=True)
    )
    years = events["change_year"].dropna()
    demo_studies = int(studies["demo"].fillna(False).astype(bool).sum())
    return EvidenceOverview(
        url=info.url,
        backend=info.backend,
        counts=dict(info.counts),
        demo_studies=demo_studies,
        demo_events=int(events["demo"].fillna(False).astype(bool).sum()),
        events_without_study=int((events["studies"] == 0).sum()),
        countries=sorted(events["country"].dropna().unique().tolist()),
        first_year=int(years.min()) if len(years) else None,
        last_year=int(years.max()) if len(years) else None,
        pairs=pairs,
        by_design_family=fam,
        by_level=lv,
    )


def list_studies(store: Store, snapshot: EvidenceSnapshot | None = None) -> pd.DataFrame:
    """One row per study: design, design family, appraisal level of record, exposures,
    outcomes, events and countries it analyses, number of estimates, demo flag. Studies without
    an estimate are listed too (with empty exposures). Without ``snapshot`` the database
    joins and counts (:mod:`exposhift.store.overview_reads`: no estimate is read); with one,
    the same from its analysis frame."""
    with store.read() as conn:
        studies = studies_by_key(conn)
        if snapshot is None:
            links = study_links(conn)
            agg = estimates_per_study(conn)
    if snapshot is not None:
        frame = snapshot.analysis
        links = {
            name: frame.loc[frame[col].notna(), ["study_id", col]].drop_duplicates()
            for name, (col, _) in STUDY_LINKS.items()
        }
        agg = frame.groupby("study_id", sort=True).agg(
            estimates=("estimate_uid", "size"), level=("level", "first")
        )
        agg = agg.reset_index()
    base = pd.DataFrame(
        [
            {
                "study_id": k,
                "citation": r["citation"],
                "year": r["year"],
                "design": r["design"],
                "demo": r["demo"],
            }
            for k, r in studies.items()
        ],
        columns=["study_id", "citation", "year", "design", "demo"],
    )

    def joined(sub: pd.DataFrame) -> pd.Series:
        """Per study: its distinct values, sorted, joined by ", " (each study joins a handful
        of strings, not one per estimate)."""
        col = sub.columns[1]
        sub = sub.assign(**{col: sub[col].astype(str)}).drop_duplicates()
        sub = sub.sort_values(["study_id", col], kind="stable")
        return sub.groupby("study_id", sort=True)[col].agg(", ".join)

    agg = agg.set_index("study_id").sort_index()
    for name in STUDY_LINKS:
        agg[name] = joined(links[name])
    agg = agg.reset_index()[
        ["study_id", "level", "exposures", "outcomes", "events", "countries", "estimates"]
    ]
    out = base.merge(agg, on="study_id", how="left")
    out["design_family"] = out["design"].map(lambda d: DESIGNS[d][0] if d in DESIGNS else None)
    out["estimates"] = out["estimates"].fillna(0).astype(np.int64)
    for c in ("exposures", "outcomes", "events", "countries"):
        out[c] = out[c].fillna("")
    out["level"] = out["level"].astype("float64")
    out["demo"] = out["demo"].fillna(False).astype(bool)
    cols = [
        "study_id",
        "citation",
        "year",
        "design",
        "design_family",
        "level",
        "exposures",
        "outcomes",
        "events",
        "countries",
        "estimates",
        "demo",
    ]
    return out[cols].sort_values(["year", "study_id"], kind="stable").reset_index(drop=True)


def list_events(store: Store, snapshot: EvidenceSnapshot | None = None) -> pd.DataFrame:
    """Every registered exposure-change event with the number of studies analysing it."""
    if snapshot is not None:
        return snapshot.events.copy()
    with store.read() as conn:
        return events_frame(conn)


# ----------------------------------------------------------------------------- pooling rows
@dataclass(frozen=True)
class PoolView:
    """A pooled result and the study rows it was computed from (one row per estimate kept)."""

    output: PoolOutput
    rows: pd.DataFrame
    options: dict[str, Any] = field(default_factory=dict)

    @property
    def caution(self) -> str:
        return self.output.caution


def group_label(group: Mapping[str, Any], keys: list[str]) -> str:
    """A readable name of one pooled group: its key values, blanks left out."""
    parts = []
    for k in keys:
        v = group.get(k)
        if v is None or v == "" or (isinstance(v, float) and np.isnan(v)):
            continue
        if k == "level" and isinstance(v, int | float):
            v = f"level {int(v)}"
        parts.append(str(v))
    return " · ".join(parts) or "all estimates"


def pool_view(
    store: Store,
    exposure: str,
    outcome: str,
    *,
    method: str = "reml",
    ci: str = "hksj",
    by: list[str] | None = None,
    include_fatal: bool = False,
    align_to: str = "increase",
    alpha: float = 0.05,
    hksj_floor: bool = True,
    within_event: str = "aggregate",
    rubric=None,
    min_level: int | None = None,
    snapshot: EvidenceSnapshot | None = None,
    prepared: PoolOutput | None = None,
    light: bool = False,
) -> PoolView:
    """:func:`~exposhift.services.pooling.pool_evidence` plus one row per pooled *event*.

    The rows are exactly the rows the pooling service pooled
    (:attr:`~exposhift.services.pooling.PoolOutput.pooled_rows`: one number per event and
    group, with its share of the group's random-effects weight computed by the engine), with
    the event's Wald interval ``y ± z·se`` for display (z for ``alpha``), the studies, the
    number of estimates combined (``k_units``) and, for an event with one estimate, that
    estimate as reported (``reported``, ``reported_low``, ``reported_high``: before alignment).
    """
    by = list(by or [])
    out = pool_evidence(
        store,
        exposure,
        outcome,
        method=method,
        ci=ci,
        by=by,
        include_fatal=include_fatal,
        align_to=align_to,
        alpha=alpha,
        hksj_floor=hksj_floor,
        within_event=within_event,
        rubric=rubric,
        min_level=min_level,
        snapshot=snapshot,
        prepared=prepared,
        light=light,
    )
    options = {
        "method": method,
        "ci": ci,
        "by": by,
        "include_fatal": include_fatal,
        "align_to": align_to,
        "alpha": alpha,
        "hksj_floor": hksj_floor,
        "within_event": within_event,
        "min_level": min_level,
    }
    columns = [
        "group",
        "group_label",
        "estimate_uid",
        "study_id",
        "citation",
        "year",
        "event_id",
        "country",
        "change_date",
        "change_direction",
        "change_kind",
        "design",
        "design_family",
        "level",
        "measure",
        "reported",
        "reported_low",
        "reported_high",
        "estimate_kind",
        "subgroup",
        "y",
        "se",
        "ci_lower",
        "ci_upper",
        "weight",
        "scale",
        "sign_flipped",
        "k_units",
    ]
    if not out.groups:
        return PoolView(out, pd.DataFrame(columns=columns), options)
    keys = pooling_keys([STRATA[b] for b in by])
    rows = event_rows(out.pooled_rows, alpha)
    labels = {i: group_label(g, keys) for i, g in enumerate(out.groups)}
    rows["group_label"] = rows["group"].map(labels)
    for c in columns:
        if c not in rows.columns:
            rows[c] = None
    return PoolView(out, rows[columns].reset_index(drop=True), options)
