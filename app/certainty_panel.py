"""The certainty of the evidence and the E-value beside a pooled result (pooling and
replication pages): one cached service call, then plain Streamlit elements.

The numbers come from :func:`exposhift.services.certainty.cell_certainty` — the pooling
service's default evidence set and options (REML, Hartung-Knapp) — which may differ from the
options chosen on the pooling page; the panel says so.
"""

from __future__ import annotations

import pandas as pd
import streamlit as st

import data
from exposhift.errors import ExposhiftError
from exposhift.replication.status import status_label
from exposhift.services.certainty import cell_certainty


@st.cache_data(**data.CACHE)
def _cell(db: str | None, key: tuple, exposure: str, outcome: str) -> dict | None:
    cell = cell_certainty(data.store(db), exposure, outcome)
    return None if cell is None else cell.to_dict()


def show(db: str | None, exposure: str, outcome: str) -> None:
    """The panel: certainty (recorded, or suggested and marked so), the E-value in words, and
    each domain's suggestion and recorded rating in an expander."""
    try:
        c = _cell(db, data.stamp(db), exposure, outcome)
    except ExposhiftError as exc:
        st.error(str(exc))
        return
    if c is None:
        return
    st.subheader("Certainty of the evidence and E-value")
    fin = c["recorded"].get("certainty")
    if fin:
        st.markdown(
            f"**Certainty: {fin['rating']}** — recorded by {fin['decided_by']} on "
            f"{fin['decided_at'][:10]} (version {fin['version']}): {fin['why']}"
        )
    else:
        st.markdown(
            f"**Certainty: not yet rated.** The tool suggests **{c['suggested_level']}** "
            f"({c['suggested_level_reason']}); a suggestion is a starting point for the "
            "committee, not a rating."
        )
    st.markdown(c["e_value"]["words"] + ".")
    st.caption(
        f"Rests on the pooled result with the default evidence set and options "
        f"({c['pooled']['evidence_set']}; REML, Hartung-Knapp): {c['pooled']['k_events']} "
        f"events, status {status_label(c['status'], c['provisional'], c['imprecise'])}. "
        f"Settings fingerprint {c['settings_fingerprint'][:12]}. An E-value speaks to "
        "unmeasured confounding only."
    )
    with st.expander("Reasons per domain"):
        rows = [
            {
                "domain": d["domain"],
                "suggested": d["rating"],
                "recorded": (c["recorded"].get(d["domain"]) or {}).get("rating", "-"),
                "because": d["reason"],
            }
            for d in c["domains"]
        ]
        st.dataframe(pd.DataFrame(rows), hide_index=True, width="stretch")
