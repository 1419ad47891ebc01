"""No blinded rating learnt through an import: the check made before any comparison.

An import compares each appraisal of the file with the one the evidence base holds under the
same study, reviewer and stage: the same ratings are reported "unchanged", other ratings are
refused as a conflict. Were that comparison made against an independent appraisal the importer
may not see yet (:func:`exposhift.access.may_see_independent`), importing a guessed appraisal
would tell her the blinded rating. So, before anything is compared:

- anyone may import her own appraisals, and a consensus (which is never blinded) as her role
  allows;
- an administrator (who sees every appraisal) may import any;
- anyone else may import another reviewer's independent appraisal only when the evidence base
  already holds it **and shows it to her** (then the comparison tells her nothing she cannot
  read on the study's page). Every other such row is refused, with the same message whether
  the base holds nothing under that name, an appraisal with the same ratings, or one with
  other ratings: the answer does not depend on the stored ratings.

Which reviewers have submitted an independent appraisal of a study is not blinded (the study's
page lists them with "hidden"), so deciding on it leaks nothing. The rule is the same for
``exposhift appraise import``, the dashboard's appraisal form (which records under the signed-in
name) and the appraisals section of a JSON archive (``exposhift import``); it is described in
``docs/accounts.md``.
"""

from __future__ import annotations

from collections.abc import Iterable

from exposhift.access import Identity, may_see_independent
from exposhift.errors import Problem
from exposhift.store.appraisals import review_states

#: (row shown to the user, study, reviewer, stage)
Row = tuple[int | None, str, str, str]


def refusal(viewer: Identity, study: str, reviewer: str) -> str:
    """The one message of a refused row (it names nothing the stored appraisal holds)."""
    who = f"'{viewer.name}'" if viewer.name else "this session"
    return (
        f"{who} ({viewer.role}) may not import '{reviewer}''s independent appraisal of study "
        f"'{study}': an import compares it with the appraisal stored under that name, which "
        "you may not see yet. Ask the reviewer to import her own appraisal, or an "
        "administrator to import this file"
    )


def blinded_rows(conn, viewer: Identity, rows: Iterable[Row]) -> list[Row]:
    """The rows of ``rows`` that ``viewer`` may not import (the rule of the module docstring)."""
    if viewer.may("admin"):
        return []
    states = None
    out = []
    for row, study, reviewer, stage in rows:
        if stage != "independent" or (viewer.name is not None and reviewer == viewer.name):
            continue
        if states is None:
            states = review_states(conn)
        reviewers, consensus = states.get(study, (set(), False))
        if reviewer in reviewers and may_see_independent(viewer, reviewer, reviewers, consensus):
            continue
        out.append((row, study, reviewer, stage))
    return out


def blinded_problems(conn, viewer: Identity, rows: Iterable[Row], file: str) -> list[Problem]:
    """One problem (file, row, column ``reviewer``) per row ``viewer`` may not import."""
    return [
        Problem(file, row, "reviewer", refusal(viewer, study, reviewer))
        for row, study, reviewer, _ in blinded_rows(conn, viewer, rows)
    ]
