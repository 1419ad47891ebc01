"""The certainty-of-evidence section of a dossier, one per outcome.

This is the one place the certainty rating enters the dossier. Until the certainty-of-evidence
work lands, every outcome is "not yet rated"; when it does, :func:`certainty_of` returns its
rating and explanation, and the HTML, Word, bundle and diff pick it up unchanged.
"""

from __future__ import annotations

from exposhift.dossier.content import Certainty

NOT_RATED = "not yet rated"


def certainty_of(exposure: str, outcome: str) -> Certainty:
    """The certainty rating of ``exposure`` × ``outcome`` (not yet rated: no rating exists)."""
    return Certainty(
        rated=False,
        rating=NOT_RATED,
        explanation="no certainty-of-evidence rating has been made for this "
        "exposure and outcome; the pooled numbers and the replication "
        "status above are not a rating of certainty",
    )
