"""Controlled vocabularies, stored as plain strings and validated here.

Names are our own. Each design belongs to a *design family*: the kind of identifying assumption
it rests on (see docs/methods.md). Triangulation means agreement across families.
"""

from __future__ import annotations

from collections.abc import Iterable

from exposhift.errors import VocabularyError

#: design code -> (design family, short description)
DESIGNS: dict[str, tuple[str, str]] = {
    "before-after": ("uncontrolled", "uncontrolled before-after comparison"),
    "its": ("trend-extrapolation", "interrupted time series"),
    "rd-time": ("trend-extrapolation", "regression discontinuity in time"),
    "controlled-its": ("common-trend", "controlled interrupted time series"),
    "did": ("common-trend", "difference-in-differences"),
    "staggered-did": ("common-trend", "staggered adoption / event study"),
    "synthetic-control": ("weighted-fit", "synthetic control"),
    "rd": ("local-continuity", "regression discontinuity on a score"),
    "rd-geo": ("local-continuity", "geographic boundary discontinuity"),
    "iv": ("instrument", "instrumental variable"),
    "as-if-random": ("as-if-random", "as-if random assignment (lottery, random timing)"),
    "exposed-cohort": ("observables", "exposed vs unexposed cohorts around an event"),
}

#: design family -> identifying assumption in words
DESIGN_FAMILIES: dict[str, str] = {
    "uncontrolled": "nothing else changed at the same time (supporting evidence only)",
    "trend-extrapolation": "the pre-change trend would have continued",
    "common-trend": "exposed and comparison units would have moved in parallel",
    "weighted-fit": "weighted donors reproduce the untreated path",
    "local-continuity": "no sorting or other jump at the cutoff",
    "instrument": "the instrument is relevant, as-if random and affects the outcome only "
    "through the exposure",
    "as-if-random": "assignment independent of potential outcomes",
    "observables": "exchangeability conditional on measured covariates",
}

CHANGE_KINDS: dict[str, str] = {
    "ban": "an agent or activity prohibited",
    "restriction": "use or emission limited but not prohibited",
    "standard": "a limit value introduced or tightened",
    "closure": "a source (plant, mine, road) closed",
    "opening": "a source opened",
    "accident": "an accidental release",
    "disaster": "a natural disaster changing exposure",
    "infrastructure": "new infrastructure changing exposure (bypass, treatment works)",
    "policy-removal": "a protective policy removed (exposure restored)",
    "temporary": "a temporary change (event, strike, lockdown)",
}

DIRECTIONS: tuple[str, ...] = ("decrease", "increase")

#: measure -> analysis scale ("log" for ratio measures and percent change, else "identity")
MEASURES: dict[str, str] = {
    "RR": "log",
    "OR": "log",
    "HR": "log",
    "IRR": "log",
    "pct_change": "log",
    "RD": "identity",
    "MD": "identity",
    "SMD": "identity",
}

#: what a number estimates; estimates of different kinds are never pooled together
ESTIMATE_KINDS: dict[str, str] = {
    "change": "effect of the exposure change as a whole (policy effect)",
    "level": "immediate level change at the change (interrupted time series)",
    "slope": "change in trend after the change (interrupted time series)",
    "per-unit": "effect per stated increment of exposure (per_unit, change_unit)",
}

REVIEW_STAGES: tuple[str, ...] = ("independent", "consensus")

DATE_PRECISIONS: tuple[str, ...] = ("year", "month", "day")


def _check(kind: str, value: str, accepted: Iterable[str]) -> str:
    accepted = list(accepted)
    if value not in accepted:
        raise VocabularyError(f"unknown {kind} '{value}'; accepted: {', '.join(accepted)}")
    return value


def check_design(value: str) -> str:
    return _check("design", value, DESIGNS)


def check_change_kind(value: str) -> str:
    return _check("change kind", value, CHANGE_KINDS)


def check_direction(value: str) -> str:
    return _check("change direction", value, DIRECTIONS)


def check_measure(value: str) -> str:
    return _check("measure", value, MEASURES)


def check_estimate_kind(value: str) -> str:
    return _check("estimate kind", value, ESTIMATE_KINDS)


def design_family(design: str) -> str:
    return DESIGNS[check_design(design)][0]
