"""INVENTED extracted series for a few demo studies (``seed_records/series.csv``).

Each series is generated from a known effect plus seasonality and over-dispersed noise, so a
user sees re-estimation and falsification working:

- ``Duarte1999-asthma`` (CRV-PRT-1996): monthly asthma emergency visits, 48 points before and 36
  after, true level change -0.085 on the log scale. The paper reported level and slope changes
  as percent changes (estimate kinds that do not pool with the other studies' policy effects);
  re-estimated over a 12-month horizon it gives a poolable rate ratio. A negative-control
  outcome series (injury emergency visits, no change) comes with it.
- ``Santos2009-mortality`` (CRV-PRT-2004): yearly all-cause deaths with an accelerating
  pre-existing decline and only a tiny true effect (-0.01). The paper compared one year before
  with one after; the placebo dates show "effects" as large as the real one.
- ``NagyFarkas2014-asthma`` (CRV-HUN-2008): monthly, 60 before and 48 after, true level change
  -0.07, with a comparison series from Slovak border regions (no change): controlled ITS and a
  placebo place.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from exposhift.demo_scenario.model import keyed_rng
from exposhift.io.series_sheet import COLUMNS

ASTHMA = "asthma emergency visits"


@dataclass(frozen=True)
class SeriesSpec:
    key: str
    study: str
    event: str
    outcome: str
    role: str
    place: str
    unit: str  # month or year
    start: int  # first year
    n: int
    cut: int  # position of the first post-change period
    population: float
    base_rate: float  # per person per period
    trend: float  # log scale per period
    curve: float  # log scale per period squared
    season: float  # amplitude of the yearly cosine (log scale)
    level: float  # true level change (log scale)
    slope: float  # true slope change (log scale per period)
    noise: float  # SD of the multiplicative (log-normal) noise
    source: str
    change_at: str | None = None


SPECS: tuple[SeriesSpec, ...] = (
    SeriesSpec(
        "Duarte1999-asthma",
        "Duarte1999",
        "CRV-PRT-1996",
        ASTHMA,
        "exposed",
        "Lisbon and Porto metropolitan areas",
        "month",
        1992,
        84,
        48,
        4.4e6,
        3.0e-4,
        -0.001,
        0.0,
        0.18,
        -0.085,
        -0.0005,
        0.03,
        "Figure 2 (digitised)",
    ),
    SeriesSpec(
        "Duarte1999-injury",
        "Duarte1999",
        "CRV-PRT-1996",
        "injury emergency visits",
        "negative-control",
        "Lisbon and Porto metropolitan areas",
        "month",
        1992,
        84,
        48,
        4.4e6,
        5.0e-4,
        -0.0005,
        0.0,
        0.05,
        0.0,
        0.0,
        0.03,
        "Figure 4 (digitised)",
    ),
    SeriesSpec(
        "Santos2009-mortality",
        "Santos2009",
        "CRV-PRT-2004",
        "all-cause mortality",
        "exposed",
        "Portugal",
        "year",
        1990,
        21,
        15,
        1.0e7,
        1.05e-2,
        -0.012,
        0.0,
        0.0,
        -0.01,
        0.0,
        0.01,
        "Table 1",
        change_at="2005",
    ),
    SeriesSpec(
        "NagyFarkas2014-asthma",
        "NagyFarkas2014",
        "CRV-HUN-2008",
        ASTHMA,
        "exposed",
        "Hungarian regions bordering Slovakia",
        "month",
        2003,
        108,
        60,
        2.1e6,
        2.5e-4,
        -0.0008,
        0.0,
        0.2,
        -0.07,
        0.0,
        0.03,
        "Figure 1, upper panel (digitised)",
    ),
    SeriesSpec(
        "NagyFarkas2014-asthma-svk",
        "NagyFarkas2014",
        "CRV-HUN-2008",
        ASTHMA,
        "comparison",
        "Slovak border regions",
        "month",
        2003,
        108,
        60,
        1.6e6,
        2.4e-4,
        -0.0008,
        0.0,
        0.2,
        0.0,
        0.0,
        0.03,
        "Figure 1, lower panel (digitised)",
    ),
)


def _periods(spec: SeriesSpec) -> list[str]:
    if spec.unit == "year":
        return [f"{spec.start + i}" for i in range(spec.n)]
    return [f"{spec.start + i // 12}-{i % 12 + 1:02d}" for i in range(spec.n)]


def series_rows(spec: SeriesSpec) -> pd.DataFrame:
    rng = keyed_rng("series", spec.key)
    t = np.arange(spec.n, dtype=float)
    post = t >= spec.cut
    since = np.where(post, t - spec.cut, 0.0)
    month = t % 12 if spec.unit == "month" else np.zeros(spec.n)
    pop = np.round(spec.population * (1.0 + 0.0002 * t), -2)
    log_rate = (
        np.log(spec.base_rate)
        + spec.trend * t
        + spec.curve * t**2
        + spec.season * np.cos(2 * np.pi * month / 12)
        + spec.level * post
        + spec.slope * since
    )
    mu = pop * np.exp(log_rate + rng.normal(0.0, spec.noise, spec.n))
    counts = rng.poisson(mu).astype(float)
    return pd.DataFrame(
        {
            "series_id": spec.key,
            "study_id": spec.study,
            "event_id": spec.event,
            "outcome": spec.outcome,
            "role": spec.role,
            "place": spec.place,
            "time_unit": spec.unit,
            "value_kind": "count",
            "change_at": spec.change_at or "",
            "extracted_by": "moreau",
            "demo": "yes",
            "period": _periods(spec),
            "value": counts,
            "denominator": pop,
            "source": spec.source,
        }
    )[list(COLUMNS)]


def series_frame() -> pd.DataFrame:
    """The demo series sheet: one row per point, in series-key order."""
    frames = [series_rows(s) for s in sorted(SPECS, key=lambda s: s.key)]
    return pd.concat(frames, ignore_index=True)
