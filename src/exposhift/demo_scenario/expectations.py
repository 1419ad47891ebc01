"""What the invented demo scenario is built to show, in words and as data.

The replication statuses are the ones the scenario was designed for under the rules of the
replication issue (convergent, replicated-place, replicated-time, single-event, weak-only);
the replication engine decides them. Exposure x outcome pairs not listed are left to it.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Expectation:
    exposure: str
    outcome: str
    status: str
    why: str


EXPECTED: tuple[Expectation, ...] = (
    Expectation(
        "corvane",
        "asthma emergency visits",
        "convergent",
        "Portugal: tightenings in 1996, 2004 and 2012 and the 2019 suspension "
        "(a reversal) all move the outcome the expected way (time); Hungary, Czechia "
        "and Poland agree (place); trend-extrapolation, common-trend, weighted-fit and "
        "local-continuity designs agree",
    ),
    Expectation(
        "corvane",
        "cardiovascular admissions",
        "replicated-time",
        "Portugal only: 2004, 2012 and the 2019 reversal, concordant, non-overlapping periods",
    ),
    Expectation(
        "dravonil",
        "preterm birth",
        "replicated-place",
        "bans in 9 countries (1988-2015), one event each, all pointing the same way; "
        "moderate between-country heterogeneity",
    ),
    Expectation(
        "vellium",
        "child respiratory admissions",
        "replicated-place",
        "closures in 5 countries, an opening in India (outcome up), strike shutdowns "
        "in Namibia; one event per place",
    ),
    Expectation(
        "dravonil",
        "childhood acute leukaemia",
        "single-event",
        "one cohort study of the Swedish ban",
    ),
    Expectation(
        "vellium", "wheeze prevalence", "single-event", "one boundary study of the Peruvian closure"
    ),
    Expectation(
        "quorinate",
        "persistent respiratory symptoms",
        "single-event",
        "one accident, two studies of the same residents and survey (counted once)",
    ),
    Expectation(
        "dravonil",
        "neurodevelopmental score at age 2",
        "weak-only",
        "one instrumental-variable study reporting no first-stage F",
    ),
    Expectation(
        "trelomene",
        "elevated liver enzymes",
        "weak-only",
        "two before-after studies and a time series with 2 points before the change",
    ),
    Expectation("trelomene", "chronic kidney disease", "weak-only", "one before-after study"),
    Expectation(
        "corvane",
        "all-cause mortality",
        "weak-only",
        "one before-after study with one year on each side",
    ),
)
