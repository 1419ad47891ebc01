"""Large, valid, invented extraction sheets for benchmarks and tests (not demo evidence).

:func:`synthetic_sheet` builds ``n`` estimate rows: 20 per study, 10 studies per event, every row
flagged demo, values drawn from a fixed seed so the same call gives the same sheet.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from exposhift import vocab
from exposhift.io.columns import COLUMN_NAMES

ROWS_PER_STUDY = 20
STUDIES_PER_EVENT = 10
COUNTRIES = ("NLD", "SWE", "GBR", "DEU", "FRA", "ESP", "ITA", "POL", "CAN", "USA", "JPN", "BRA")
OUTCOMES = (
    "wheeze",
    "asthma admissions",
    "preterm birth",
    "low birth weight",
    "cardiovascular admissions",
    "all-cause mortality",
    "lung function",
    "otitis media",
    "eczema",
    "stroke",
)


def synthetic_sheet(n: int, seed: int = 0, *, prefix: str = "SYN") -> pd.DataFrame:
    """``n`` rows of a valid extraction sheet as strings (sheet column order)."""
    rng = np.random.default_rng(seed)
    i = np.arange(n)
    study = i // ROWS_PER_STUDY
    event = study // STUDIES_PER_EVENT
    within = i % ROWS_PER_STUDY
    designs = np.array(list(vocab.DESIGNS))
    kinds = np.array(list(vocab.CHANGE_KINDS))
    countries = np.array(COUNTRIES)
    outcomes = np.array(OUTCOMES)
    log_rr = rng.normal(-0.1, 0.2, n)
    se = rng.uniform(0.03, 0.3, n)
    point = np.round(np.exp(log_rr), 3)
    low = np.round(np.exp(log_rr - 1.96 * se), 3)
    high = np.round(np.exp(log_rr + 1.96 * se), 3)
    low = np.minimum(low, point - 0.001)
    high = np.maximum(high, point + 0.001)
    only_se = within % 7 == 3
    s = lambda a: pd.Series(a).astype(str)  # noqa: E731 - local shorthand
    study_id = f"{prefix}-S" + s(study).str.zfill(6)
    event_id = f"{prefix}-E" + s(event).str.zfill(5)
    year = 1990 + (study % 30)
    frame = pd.DataFrame(
        {
            "study_id": study_id,
            "citation": "Invented, Author et al. " + s(year) + ", Synthetic J " + s(study),
            "year": s(year),
            "doi": "10.5555/exposhift.synthetic." + s(study),
            "design": designs[study % len(designs)],
            "comparison": "invented comparison regions",
            "population": "synthetic population " + s(study % 50),
            "data_source": "synthetic register",
            "same_population_as": "",
            "assignment_grade": s(study % 4),
            "pre_points": s(6 + study % 20),
            "post_points": s(6 + study % 15),
            "checks": np.where(
                study % 3 == 0, "pre-trends;placebo-date", "negative-control-outcome"
            ),
            "demo": "yes",
            "event_id": event_id,
            "exposure": "synthetic-agent-" + s(event % 7),
            "change_kind": kinds[event % len(kinds)],
            "change_direction": np.where(event % 5 == 0, "increase", "decrease"),
            "change_size": s(np.round(1 + (event % 13) * 0.7, 2)),
            "change_unit": "ug/m3",
            "country": countries[event % len(countries)],
            "area": "",
            "change_date": s(1980 + event % 40) + "-" + s(1 + event % 12).str.zfill(2),
            "family": "synthetic-family-" + s(event % 9),
            "outcome": outcomes[within % len(outcomes)],
            "outcome_group": "synthetic outcomes",
            "measure": "RR",
            "estimate_kind": "change",
            "per_unit": "",
            "estimate": s(point),
            "ci_low": np.where(only_se, "", s(low)),
            "ci_high": np.where(only_se, "", s(high)),
            "ci_level": np.where(only_se, "", "0.95"),
            "se": np.where(only_se, s(np.round(se, 4)), ""),
            "p_value": "",
            "p_bound": "",
            "baseline_risk": "",
            "subgroup": np.where(
                within >= len(OUTCOMES), "subgroup " + s(within // len(OUTCOMES)), ""
            ),
            "time_window": "",
            "primary": np.where(within == 0, "yes", "no"),
        }
    )
    return frame[list(COLUMN_NAMES)]
