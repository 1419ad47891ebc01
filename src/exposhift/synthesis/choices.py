"""The pooling options a user chooses from, with their names in words: one declaration for the
dashboard's choices, checked against the engine's own lists (``METHODS``, ``CI_METHODS``,
``WITHIN_EVENT``), so a new estimator or interval appears wherever options are offered.

The methods are those of :mod:`exposhift.synthesis.pooling` (sources in its docstrings):
REML (Viechtbauer 2005), DerSimonian-Laird (1986), Paule-Mandel (1982), the inverse-variance
fixed effect; Hartung-Knapp-Sidik-Jonkman (Hartung & Knapp 2001) and Wald intervals.
"""

from __future__ import annotations

from exposhift.synthesis.event_pooling import WITHIN_EVENT
from exposhift.synthesis.pooling import CI_METHODS, METHODS

#: tau^2 estimators, the default first, with the name shown to users
ESTIMATORS: dict[str, str] = {
    "reml": "REML",
    "dl": "DerSimonian–Laird",
    "pm": "Paule–Mandel",
    "fe": "fixed effect (inverse variance)",
}
#: interval methods, the default first
INTERVALS: dict[str, str] = {
    "hksj": "Hartung–Knapp–Sidik–Jonkman (t, events − 1 df, scale floored at 1)",
    "wald": "Wald (z)",
}
#: how several estimates of one event enter the pooling, the default first
WITHIN_EVENT_ROUTES: dict[str, str] = dict(WITHIN_EVENT)
#: the direction of exposure change every effect is expressed for, the default first
ALIGNMENTS: tuple[str, ...] = ("increase", "decrease")

if set(ESTIMATORS) != set(METHODS) or set(INTERVALS) != set(CI_METHODS):
    raise RuntimeError("synthesis.choices is out of step with synthesis.pooling's method lists")
