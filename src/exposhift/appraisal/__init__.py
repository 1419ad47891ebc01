"""Appraisal of natural-experiment studies: the rubric, the summary rule, suggestions from
recorded facts, and agreement between independent reviewers. Pure computation: no database.

Modules: :mod:`~exposhift.appraisal.rubric` (load the committee's rubric file),
:mod:`~exposhift.appraisal.scoring` (overall level), :mod:`~exposhift.appraisal.suggestions`
(suggested levels and overrides), :mod:`~exposhift.appraisal.checks` (check codes),
:mod:`~exposhift.appraisal.agreement` (percent agreement, weighted kappa).
"""

from __future__ import annotations

from importlib import import_module
from typing import Any

_LAZY = {
    "load_rubric": "exposhift.appraisal.rubric",
    "Rubric": "exposhift.appraisal.rubric",
    "score_appraisal": "exposhift.appraisal.scoring",
    "ScoreResult": "exposhift.appraisal.scoring",
    "StudyFacts": "exposhift.appraisal.suggestions",
    "Suggestion": "exposhift.appraisal.suggestions",
    "Decision": "exposhift.appraisal.suggestions",
    "suggest_levels": "exposhift.appraisal.suggestions",
    "apply_override": "exposhift.appraisal.suggestions",
    "confirm": "exposhift.appraisal.suggestions",
    "weighted_kappa": "exposhift.appraisal.agreement",
    "kappa_details": "exposhift.appraisal.agreement",
    "percent_agreement": "exposhift.appraisal.agreement",
    "agreement_table": "exposhift.appraisal.agreement",
}

__all__ = list(_LAZY)


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        return getattr(import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'exposhift.appraisal' has no attribute {name!r}")
