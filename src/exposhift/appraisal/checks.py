"""The vocabulary of diagnostic checks a study can report, and how free text is normalised.

A study record lists the checks its authors report (the ``checks`` column of the extraction
sheet, ';'-separated). Suggestions from recorded facts (:mod:`exposhift.appraisal.suggestions`)
and the rubric's design-specific criteria refer to checks by the codes defined here, so this is
the one place that defines them.

Normalisation (:func:`normalise_check`): lower case, apostrophes dropped, every run of other
characters that are not letters or digits (spaces, underscores, hyphens, '&', '/') turned into
one hyphen, then known aliases mapped to their code.
Unknown checks are kept (a reviewer may record something we have no code for) but reported as
unknown, so that they can be noticed and either added here or corrected.

Sources of the diagnostics: the design table in METHODS.md §1 (Wagner et al. 2002; Roth 2022;
Rambachan & Roth 2023; Callaway & Sant'Anna 2021; Goodman-Bacon 2021; Abadie et al. 2010;
McCrary 2008; Staiger & Stock 1997; Lee et al. 2022; Lipsitch et al. 2010).
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from dataclasses import dataclass

#: check code -> (role, description). Roles: "falsification" (a test for an effect where none
#: should be), "similarity" (shows the comparison was similar before the change),
#: "diagnostic" (a design-specific check of the identifying assumption), "inference"
#: (the model and its uncertainty), "reporting" (pre-specification and sensitivity).
CHECKS: dict[str, tuple[str, str]] = {
    # falsification
    "placebo-date": ("falsification", "effect estimated at a false change date, expected null"),
    "placebo-place": ("falsification", "effect estimated in units that were not exposed"),
    "negative-control-outcome": (
        "falsification",
        "an outcome the exposure cannot plausibly affect (Lipsitch et al. 2010)",
    ),
    "negative-control-exposure": (
        "falsification",
        "an exposure that cannot plausibly affect the outcome (Lipsitch et al. 2010)",
    ),
    "in-space-placebo": (
        "falsification",
        "synthetic control refitted with each donor as if treated (Abadie et al. 2010)",
    ),
    # similarity of the comparison before the change
    "pre-trends": ("similarity", "exposed and comparison trends shown before the change"),
    "pre-period-fit": ("similarity", "synthetic control fit over the pre-change periods"),
    "covariate-continuity": ("similarity", "covariates continuous at the cutoff"),
    "balance": ("similarity", "balance on prognostic covariates or pre-change outcomes"),
    # design-specific diagnostics
    "first-stage-f": ("diagnostic", "first-stage F statistic of the instrument reported"),
    "weak-iv-robust": ("diagnostic", "weak-instrument-robust inference (e.g. Anderson-Rubin, tF)"),
    "density-test": ("diagnostic", "density of the running variable at the cutoff (McCrary 2008)"),
    "bandwidth-sensitivity": ("diagnostic", "estimate repeated over several bandwidths"),
    "narrow-window": (
        "diagnostic",
        "regression discontinuity in time re-estimated in a narrow window",
    ),
    "robust-staggered-estimator": (
        "diagnostic",
        "heterogeneity-robust estimator for staggered adoption "
        "(Callaway & Sant'Anna 2021 or similar)",
    ),
    "bacon-decomposition": (
        "diagnostic",
        "decomposition of the two-way fixed-effects estimate (Goodman-Bacon 2021)",
    ),
    "pre-trend-sensitivity": (
        "diagnostic",
        "power of the pre-trend test or bounded-violation sensitivity "
        "(Roth 2022; Rambachan & Roth 2023)",
    ),
    "leave-one-out": ("diagnostic", "synthetic control refitted leaving out each donor"),
    "exclusion-argued": ("diagnostic", "exclusion restriction argued with evidence"),
    # inference
    "autocorrelation": ("inference", "serial correlation modelled or tested"),
    "seasonality": ("inference", "seasonal pattern modelled"),
    "clustered-se": ("inference", "standard errors clustered at the level of assignment"),
    "few-treated-inference": (
        "inference",
        "permutation, randomisation inference or small-cluster correction",
    ),
    "overdispersion": ("inference", "count model allowing over-dispersion"),
    # reporting
    "pre-specified": ("reporting", "analysis plan or impact model specified beforehand"),
    "sensitivity-analyses": ("reporting", "two or more sensitivity analyses reported"),
}

#: normalised free text -> check code (common spellings seen in papers and extraction sheets)
ALIASES: dict[str, str] = {
    "parallel-trends": "pre-trends",
    "pre-trend": "pre-trends",
    "pretrends": "pre-trends",
    "pre-trend-test": "pre-trends",
    "event-study-leads": "pre-trends",
    "placebo-time": "placebo-date",
    "placebo-dates": "placebo-date",
    "placebo-in-time": "placebo-date",
    "placebo-places": "placebo-place",
    "placebo-in-space": "in-space-placebo",
    "placebo-permutation": "in-space-placebo",
    "negative-control": "negative-control-outcome",
    "negative-control-outcomes": "negative-control-outcome",
    "negative-control-exposures": "negative-control-exposure",
    "first-stage-f-statistic": "first-stage-f",
    "first-stage": "first-stage-f",
    "f-statistic": "first-stage-f",
    "mccrary": "density-test",
    "mccrary-test": "density-test",
    "manipulation-test": "density-test",
    "covariate-balance": "balance",
    "bandwidths": "bandwidth-sensitivity",
    "callaway-santanna": "robust-staggered-estimator",
    "goodman-bacon": "bacon-decomposition",
    "pre-period-rmspe": "pre-period-fit",
    "serial-correlation": "autocorrelation",
    "seasonal-adjustment": "seasonality",
    "protocol": "pre-specified",
    "pre-registration": "pre-specified",
}

ROLES: tuple[str, ...] = ("falsification", "similarity", "diagnostic", "inference", "reporting")

_SEPARATORS = re.compile(r"[^a-z0-9]+")


def normalise_check(text: str) -> str:
    """Return the check code for free text; unknown text comes back normalised but unchanged.

    >>> normalise_check("  Placebo_Date ")
    'placebo-date'
    >>> normalise_check("Parallel trends")
    'pre-trends'
    """
    text = text.strip().lower().replace("'", "").replace("\u2019", "")
    code = _SEPARATORS.sub("-", text).strip("-")
    return ALIASES.get(code, code)


@dataclass(frozen=True)
class CheckList:
    """Normalised checks: ``codes`` keeps every entry (known and unknown, in order, no
    duplicates); ``unknown`` names those without a code in :data:`CHECKS`."""

    codes: tuple[str, ...]
    unknown: tuple[str, ...]

    def __contains__(self, code: object) -> bool:
        return code in self.codes

    @property
    def note(self) -> str | None:
        if not self.unknown:
            return None
        return (
            f"unknown check{'s' if len(self.unknown) > 1 else ''} kept as written: "
            f"{', '.join(self.unknown)} (known codes: {', '.join(CHECKS)})"
        )


def parse_checks(value: str | Iterable[str] | None, sep: str = ";") -> CheckList:
    """Normalise a ';'-separated string (the extraction-sheet column) or an iterable of names."""
    if value is None:
        return CheckList((), ())
    items = value.split(sep) if isinstance(value, str) else list(value)
    codes: list[str] = []
    for item in items:
        if not isinstance(item, str):
            item = str(item)
        if not item.strip():
            continue
        code = normalise_check(item)
        if code not in codes:
            codes.append(code)
    unknown = tuple(c for c in codes if c not in CHECKS)
    return CheckList(tuple(codes), unknown)
