"""The summary-of-evidence table of one exposure: one row per outcome (our own layout).

Columns (:data:`COLUMNS`): the outcome; independent events and estimates behind the main
pooled result; the measure; the pooled effect of an exposure increase on the natural scale
with its CI and PI (the ``pool`` command's numbers for the same cell); the replication status
(``replication``'s); the certainty — the committee's recorded level when there is one, else the
tool's suggestion, marked as such —; the reasons in a few words; the E-value of the estimate and
of the CI limit nearest no effect (VanderWeele & Ding 2017).
"""

from __future__ import annotations

from typing import Any

import pandas as pd

from exposhift.certainty.domains import FINAL
from exposhift.certainty.suggestions import CellSuggestions
from exposhift.replication.status import status_label

COLUMNS: tuple[str, ...] = (
    "outcome",
    "events",
    "estimates",
    "measure",
    "effect",
    "ci_lower",
    "ci_upper",
    "pi_lower",
    "pi_upper",
    "status",
    "certainty",
    "certainty_basis",
    "reasons",
    "e_value",
    "e_value_ci",
)


def recorded_final(judgements: pd.DataFrame) -> dict[str, Any] | None:
    """The recorded final level of one cell (``judgements``: that cell's rows), or None."""
    if judgements is None or judgements.empty:
        return None
    fin = judgements[judgements["domain"] == FINAL]
    return None if fin.empty else fin.iloc[0].to_dict()


def reasons_in_words(cell: CellSuggestions, judgements: pd.DataFrame | None) -> str:
    """The domains that move the level, with the committee's ratings where recorded."""
    recorded = {}
    if judgements is not None and not judgements.empty:
        recorded = dict(zip(judgements["domain"], judgements["rating"], strict=True))
    parts = []
    for s in cell.domains:
        rating = recorded.get(s.domain, s.rating)
        if rating not in ("none", "not-assessable"):
            mark = "" if s.domain in recorded else " (suggested)"
            parts.append(f"{s.domain} {rating}{mark}")
    if not cell.facts.k_events:
        return "nothing pooled: every estimate was left out of pooling (see 'exposhift pool')"
    start = f"starts {cell.start_level}"
    out = f"{start}; " + ", ".join(parts) if parts else f"{start}; no domain moves it"
    fin = recorded_final(judgements)
    if fin is not None and bool(fin.get("overrides")):
        out += (
            f"; final level {fin['rating']} set by the committee against the sum "
            f"({fin['suggested']})"
        )
    return out


def table_row(cell: CellSuggestions, judgements: pd.DataFrame | None) -> dict[str, Any]:
    """One row of the table for one cell."""
    f = cell.facts
    nat = f.natural
    fin = recorded_final(judgements)
    if fin is not None:
        certainty = str(fin["rating"])
        basis = f"recorded by {fin['decided_by']} on {str(fin['decided_at'])[:10]}"
    else:
        certainty = f"{cell.level} (suggested)"
        basis = "not recorded: the tool's suggestion, not a committee judgement"
    ev = cell.e_value
    return {
        "outcome": cell.outcome,
        "events": f.k_events,
        "estimates": int(f.pooled.get("k_estimates") or 0),
        "measure": str(f.pooled.get("measure") or ""),
        "effect": nat.get("estimate"),
        "ci_lower": nat.get("ci_lower"),
        "ci_upper": nat.get("ci_upper"),
        "pi_lower": nat.get("pi_lower"),
        "pi_upper": nat.get("pi_upper"),
        "status": status_label(f.status, f.provisional, f.imprecise),
        "certainty": certainty,
        "certainty_basis": basis,
        "reasons": reasons_in_words(cell, judgements),
        "e_value": ev.point if ev.defined else None,
        "e_value_ci": ev.ci if ev.defined else None,
    }
