"""Expected directions the invented demo committee pre-specified (INVENTED, flagged demo).

Only some exposure x outcome cells get one; the others are left without, so that the demo shows
both a pre-specified direction and one inferred from the data (a provisional status). A
direction says what an exposure *increase* does to the outcome.
"""

from __future__ import annotations

import pandas as pd

from exposhift.io.directions import FIELDS

DECIDED_BY = "demo committee (invented)"
DECIDED_AT = "2026-01-15T00:00:00Z"

#: (exposure, outcome, direction, rationale)
DIRECTIONS: tuple[tuple[str, str, str, str], ...] = (
    (
        "corvane",
        "asthma emergency visits",
        "raises",
        "DEMO, invented: corvane is an invented airway irritant; more of it is expected to bring "
        "more asthma emergency visits",
    ),
    (
        "dravonil",
        "preterm birth",
        "raises",
        "DEMO, invented: dravonil is an invented insecticide assumed to cross the placenta; more "
        "exposure in pregnancy is expected to raise the risk of preterm birth",
    ),
    (
        "vellium",
        "child respiratory admissions",
        "raises",
        "DEMO, invented: vellium is an invented smelter metal carried on fine particles; more of "
        "it is expected to raise children's respiratory admissions",
    ),
)


def directions_frame() -> pd.DataFrame:
    """The demo's directions sheet (columns :data:`exposhift.io.directions.FIELDS`)."""
    rows = [dict(zip(FIELDS, (*d, DECIDED_BY, DECIDED_AT), strict=True)) for d in DIRECTIONS]
    return pd.DataFrame(rows, columns=list(FIELDS))
