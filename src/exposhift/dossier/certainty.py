"""The certainty-of-evidence section of a dossier, one per outcome.

This is the one place the certainty rating enters the dossier. A cell with a recorded final
level (``exposhift certainty record``) shows that level, who decided it and when, and the
committee's reason; a cell without one is "not yet rated" and shows the tool's suggestion as a
suggestion only. Either way the reasons per domain are listed (the committee's rating and why
where recorded, else the tool's suggestion and its reason, marked as such), with the E-value and
the row of the summary-of-evidence table. The HTML, Word, bundle and diff pick it up unchanged.
"""

from __future__ import annotations

from typing import Any

from exposhift.dossier.content import Certainty

NOT_RATED = "not yet rated"


def certainty_of(exposure: str, outcome: str, cell: Any = None) -> Certainty:
    """The certainty of ``exposure`` × ``outcome``; ``cell``: the cell's
    :class:`~exposhift.services.certainty.CellCertainty` (None: no evidence to rate)."""
    if cell is None:
        return Certainty(
            rated=False,
            rating=NOT_RATED,
            explanation="no certainty-of-evidence rating has been made for this "
            "exposure and outcome; the pooled numbers and the replication "
            "status above are not a rating of certainty",
        )
    from exposhift.certainty.table import recorded_final, table_row

    s = cell.suggestions
    j = cell.judgements
    recorded = {} if j.empty else {r["domain"]: r for r in j.to_dict("records")}
    reasons = []
    for d in s.domains:
        r = recorded.get(d.domain)
        if r is not None:
            mark = (
                " (committee, overrides the suggestion " + d.rating + ")"
                if r["overrides"]
                else " (committee)"
            )
            reasons.append((d.domain, r["rating"] + mark, str(r["why"])))
        else:
            reasons.append((d.domain, d.rating + " (suggested)", d.reason))
    fin = recorded_final(j)
    ev = s.e_value.words()
    if fin is not None:
        rating = str(fin["rating"])
        explanation = (
            f"recorded by {fin['decided_by']} on {str(fin['decided_at'])[:10]}: {fin['why']}. "
            f"Starting level {s.start_level} ({s.start_why}). {ev}."
        )
        rated = True
    else:
        rating = NOT_RATED
        explanation = (
            f"no committee judgement recorded; the tool's suggestion is {s.level} "
            f"({s.level_reason()}), a starting point for the committee, not a rating. {ev}."
        )
        rated = False
    return Certainty(
        rated=rated,
        rating=rating,
        explanation=explanation,
        reasons=reasons,
        row=table_row(s, j),
    )
