"""The numbers one exposure × outcome's certainty suggestions rest on, taken from the outputs of
the pooling and replication services (nothing here recomputes a pooled number).

* The pooled result is the *main group* of ``pool_evidence`` (the stratum — measure group ×
  estimate kind × increment — with the most events), the event as the unit, with the pooling
  service's default evidence set (every study except fatal-overall ones). Its natural-scale
  estimate, CI and PI, τ² with its Q-profile interval (Viechtbauer 2007) and Q are those of the
  ``pool`` command for the same cell.
* Per pooled event: its random-effects weight share (``pooled_rows.weight``), the lowest
  consensus overall level among the studies combined into it, and the lowest consensus rating
  on the applicability domain.
* From the replication report: status, whether it is provisional, the expected direction and
  where it came from, dose-response, reversals and triangulation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd


@dataclass(frozen=True)
class CellFacts:
    """Everything the suggestions of one cell use (pure data)."""

    exposure: str
    outcome: str
    #: the main pooled group as the pooling service returns it (empty when nothing pooled)
    pooled: dict[str, Any] = field(default_factory=dict)
    #: one row per pooled event: event_id, y, v, weight, level, applicability
    events: pd.DataFrame = field(default_factory=pd.DataFrame)
    status: str = "none"
    status_rule: str = ""
    provisional: bool = False
    #: the pooled number of the replication status does not back it (see status_label)
    imprecise: bool = False
    #: +1 (an increase raises the outcome), -1 (lowers) or 0 (no direction)
    expected: int = 0
    expected_source: str = "inferred"
    dose_response: dict[str, Any] = field(default_factory=dict)
    reversals: list[dict[str, Any]] = field(default_factory=list)
    triangulation: dict[str, Any] = field(default_factory=dict)
    #: the number of groups the pooling service returned (other strata are not rated here)
    n_groups: int = 0
    evidence_set: str = ""

    @property
    def k_events(self) -> int:
        return int(self.pooled.get("k_events") or 0)

    @property
    def scale(self) -> str:
        return str(self.pooled.get("scale") or "")

    @property
    def natural(self) -> dict[str, Any]:
        return dict(self.pooled.get("natural") or {})


def _event_levels(pooled_rows: pd.DataFrame, unit_rows: pd.DataFrame, column: str) -> pd.Series:
    """Per pooled row: the lowest ``column`` value among the units combined into it."""
    lv = dict(zip(unit_rows["estimate_uid"], unit_rows[column], strict=True))
    out = []
    for uids in pooled_rows["estimate_uids"]:
        vals = [lv.get(u) for u in uids]
        vals = [float(x) for x in vals if x is not None and not pd.isna(x)]
        out.append(min(vals) if vals else math.nan)
    return pd.Series(out, index=pooled_rows.index, dtype="float64")


def main_group(groups: list[dict[str, Any]]) -> int | None:
    """Index of the group with the most events (then estimates; the first on ties)."""
    if not groups:
        return None
    best = max(range(len(groups)), key=lambda i: (groups[i]["k_events"], groups[i]["k"], -i))
    return int(best)


def cell_facts(
    pool: Any,
    report: Any,
    applicability: dict[str, float] | None = None,
) -> CellFacts:
    """Facts of one cell from ``pool_evidence`` output (``pool``; None when there is no
    estimate) and ``replication_for`` output (``report``). ``applicability``: consensus rating
    of the applicability domain per study key."""
    rep = {
        "status": str(report.status),
        "status_rule": str(report.rule),
        "provisional": bool(report.provisional),
        "imprecise": bool(getattr(report, "imprecise", False)),
        "expected": int(report.expected),
        "expected_source": str(report.expected_source),
        "dose_response": report.dose_response.to_dict(),
        "reversals": list(report.reversals),
        "triangulation": dict(report.triangulation),
    }
    if pool is None or not pool.groups:
        return CellFacts(
            report.exposure, report.outcome, evidence_set=getattr(pool, "evidence_set", ""), **rep
        )
    gi = main_group(pool.groups)
    group = pool.groups[gi]
    rows = pool.pooled_rows[pool.pooled_rows["group"] == gi].sort_values("event_id")
    units = pool.unit_rows.copy()
    app = applicability or {}
    units["applicability"] = units["study_id"].map(lambda s: app.get(str(s), math.nan))
    events = pd.DataFrame(
        {
            "event_id": rows["event_id"].astype(str).to_numpy(),
            "y": rows["y"].to_numpy(float),
            "v": rows["v"].to_numpy(float),
            "weight": rows["weight"].to_numpy(float),
            "level": _event_levels(rows, units, "level").to_numpy(),
            "applicability": _event_levels(rows, units, "applicability").to_numpy(),
        }
    )
    if events["weight"].isna().all() and len(events):  # multilevel: inverse-variance shares
        w = 1.0 / events["v"].to_numpy(float)
        events["weight"] = w / w.sum()
    return CellFacts(
        pool.exposure,
        pool.outcome,
        pooled=group,
        events=events.reset_index(drop=True),
        n_groups=len(pool.groups),
        evidence_set=pool.evidence_set,
        **rep,
    )


def share_at_or_below(events: pd.DataFrame, column: str, level: int, missing_counts: bool):
    """Weight share of events whose ``column`` is at or below ``level`` (missing values count
    when ``missing_counts``) and the events concerned."""
    if events.empty:
        return 0.0, []
    vals = events[column].to_numpy(float)
    low = np.where(np.isnan(vals), bool(missing_counts), vals <= level)
    share = float(events["weight"].to_numpy(float)[low].sum())
    return share, events.loc[low, "event_id"].tolist()
