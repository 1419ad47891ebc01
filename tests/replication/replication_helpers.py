"""Small crafted evidence bases for the replication tests.

``unit`` builds one row of a harmonised, independent frame (``y`` already aligned to an
exposure increase, ``v`` its variance) for the pure-level tests. ``Base`` writes the same kind of
evidence into a real store (studies, events, estimates reported as risk ratios with a 95% CI,
consensus appraisals) for the service and CLI tests.
"""

from __future__ import annotations

import math
from typing import Any

import pandas as pd

from exposhift.store import records
from exposhift.store.writer import Writer
from exposhift.vocab import DESIGNS

FAMILY_DESIGN = {fam: code for code, (fam, _) in reversed(list(DESIGNS.items()))}


def unit(
    event: str,
    country: str,
    year: int,
    direction: str,
    y: float,
    se: float,
    level: float | None,
    family: str = "common-trend",
    outcome: str = "o1",
    exposure: str = "agent",
    **extra: Any,
) -> dict[str, Any]:
    """One independent unit. ``y`` is on the analysis scale, aligned to an increase."""
    row = {
        "event_id": event,
        "exposure": exposure,
        "outcome": outcome,
        "outcome_group": extra.pop("outcome_group", "group-a"),
        "country": country,
        "change_date": str(year),
        "change_year": year,
        "change_direction": direction,
        "change_kind": "ban" if direction == "decrease" else "policy-removal",
        "design_family": family,
        "design": FAMILY_DESIGN[family],
        "level": math.nan if level is None else float(level),
        "y": y,
        "v": se * se,
        "study_id": extra.pop("study_id", f"S-{event}-{family}-{outcome}"),
        "measure_group": "ratio",
        "estimate_kind": "change",
        "increment": "",
        "population": extra.pop("population", ""),
        "data_source": "",
    }
    row.update(extra)
    return row


def frame(*rows: dict[str, Any]) -> pd.DataFrame:
    return pd.DataFrame(list(rows))


class Base:
    """Writes crafted evidence into a store: ``add`` one estimate (RR with a 95% CI)."""

    def __init__(self, w: Writer):
        self.w = w
        self.levels: dict[str, int | None] = {}

    def event(
        self,
        key: str,
        exposure: str,
        country: str,
        date: str,
        direction: str = "decrease",
        kind: str = "ban",
        size: float | None = None,
        unit_: str | None = None,
    ) -> int:
        row = records.find(self.w.conn, "event", key)
        if row is not None:
            return int(row["id"])
        exp = records.ensure_vocab(self.w, "exposure", exposure)
        return records.create(
            self.w,
            "event",
            {
                "key": key,
                "exposure_id": exp,
                "change_kind": kind,
                "change_direction": direction,
                "country": country,
                "change_date": date,
                "change_size": size,
                "change_unit": unit_,
            },
        )

    def study(
        self,
        key: str,
        design: str,
        level: int | None,
        year: int = 2020,
        population: str | None = None,
    ) -> int:
        row = records.find(self.w.conn, "study", key)
        if row is not None:
            return int(row["id"])
        sid = records.create(
            self.w,
            "study",
            {
                "key": key,
                "citation": f"{key} (crafted)",
                "year": year,
                "design": design,
                "population": population,
            },
        )
        if level is not None:
            records.create(
                self.w,
                "appraisal",
                {
                    "study_id": sid,
                    "reviewer": "panel",
                    "stage": "consensus",
                    "rubric_id": "r",
                    "rubric_hash": "h",
                    "overall": level,
                },
            )
        return sid

    def add(
        self,
        study: str,
        design: str,
        level: int | None,
        event: str,
        exposure: str,
        country: str,
        date: str,
        outcome: str,
        rr: float,
        half_width: float = 0.05,
        direction: str = "decrease",
        group: str = "respiratory",
        size: float | None = None,
    ) -> None:
        """One RR with a symmetric 95% CI on the log scale: exp(log rr ± half_width)."""
        ev = self.event(
            event,
            exposure,
            country,
            date,
            direction,
            "ban" if direction == "decrease" else "policy-removal",
            size,
            "ug/m3" if size is not None else None,
        )
        st = self.study(study, design, level)
        out = records.ensure_vocab(self.w, "outcome", outcome, {"outcome_group": group})
        lo, hi = math.log(rr) - half_width, math.log(rr) + half_width
        records.create(
            self.w,
            "estimate",
            {
                "key": f"{study}|{event}|{outcome}|RR|change||",
                "study_id": st,
                "event_id": ev,
                "outcome_id": out,
                "measure": "RR",
                "point": rr,
                "ci_low": math.exp(lo),
                "ci_high": math.exp(hi),
            },
        )
