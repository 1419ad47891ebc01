"""Pooling: random-effects meta-analysis of one exposure and one outcome, per stratum, with a
forest plot, the prediction interval, and every estimate left out with its reason."""

import certainty_panel
import charts
import pandas as pd
import streamlit as st
import ui

import data
from exposhift.services.pooling import STRATA as STRATA_COLUMNS
from exposhift.synthesis.choices import (
    ALIGNMENTS,
    ESTIMATORS,
    INTERVALS,
    WITHIN_EVENT_ROUTES,
)

# the option lists come from the library: a new estimator or stratum appears here by itself
METHODS = ESTIMATORS
CIS = INTERVALS
STRATA = list(STRATA_COLUMNS)

db = data.db_target()

# 1. data and choices ------------------------------------------------------------------------
with ui.guard():
    summary = data.summary(db)
pairs = summary.pairs

st.title("Pooling")
ui.caution()
ui.demo_notice(summary)
if pairs.empty:
    st.info("No estimates yet: import an extraction sheet first.")
    st.stop()

c1, c2 = st.columns(2)
with c1:
    exposure = ui.pick(
        "Exposure",
        sorted(pairs["exposure"].unique()),
        key="pool_exposure",
        param="exposure",
        default=str(pairs["exposure"].iloc[0]),
    )
with c2:
    outcomes = pairs.loc[pairs["exposure"] == exposure, "outcome"].tolist()
    outcome = ui.pick("Outcome", outcomes, key="pool_outcome", param="outcome")
c3, c4, c5, c6 = st.columns([1, 1.3, 1.5, 1])
method = c3.selectbox("τ² estimator", list(METHODS), format_func=METHODS.get, key="pool_method")
ci = c4.selectbox("Interval", list(CIS), format_func=CIS.get, key="pool_ci")
by = c5.multiselect(
    "Stratify by",
    STRATA,
    key="pool_by",
    help="Estimates are always kept apart by measure group, estimate kind and "
    "exposure increment; add strata here. Pooling within design family "
    "is the primary analysis; across families it is secondary.",
)
align = c6.selectbox("Express effects for an exposure", list(ALIGNMENTS), key="pool_align")
within_event = st.selectbox(
    "Several estimates of one event",
    list(WITHIN_EVENT_ROUTES),
    format_func=lambda k: f"{k}: {WITHIN_EVENT_ROUTES[k]}",
    key="pool_within_event",
)
include_fatal = st.checkbox(
    "Keep studies appraised fatal overall (left out by default)", key="pool_fatal"
)

with ui.guard():
    view = data.pool(
        db, exposure, outcome, method, ci, tuple(by), include_fatal, align, within_event
    )
out = view.output

# 2. forest plot -----------------------------------------------------------------------------
st.subheader(f"{exposure} → {outcome}")
st.caption(
    f"Effects of an exposure {align}; {METHODS[method]} τ², {CIS[ci]} interval; several "
    f"estimates of one event: {WITHIN_EVENT_ROUTES[within_event]}. "
    "Squares: one pooled unit each (size = weight); diamond: pooled estimate and its interval; "
    "dashed line: 95% prediction interval (3 or more events)."
)
if not out.groups:
    st.info("Nothing left to pool after leaving out the estimates below.")
else:
    st.plotly_chart(
        charts.forest_plot(view.rows, out.groups), config=charts.PLOTLY_CONFIG, key="pool_forest"
    )

    # 3. pooled results table --------------------------------------------------------------------
    def back(g, f):
        bt = g.get("back_transformed")
        return g[f] if bt is None else bt[f]

    table = pd.DataFrame(
        [
            {
                "stratum": label,
                "events": g["k_events"],
                "estimates": g["k_estimates"],
                "measure": g["measure"],
                "pooled": back(g, "estimate"),
                "CI low": back(g, "ci_lower"),
                "CI high": back(g, "ci_upper"),
                "PI low": back(g, "pi_lower"),
                "PI high": back(g, "pi_upper"),
                "τ²": g["tau2"],
                "I²": g["i2"],
                "Q": g["q"],
                "Q p": g["q_pvalue"],
                "signs flipped": g["sign_flipped"],
            }
            for label, g in zip(
                view.rows.groupby("group")["group_label"].first(), out.groups, strict=True
            )
        ]
    )
    st.dataframe(
        table,
        hide_index=True,
        width="stretch",
        key="pool_table",
        column_config={
            c: st.column_config.NumberColumn(format="%.3f")
            for c in ("pooled", "CI low", "CI high", "PI low", "PI high", "τ²", "Q", "Q p")
        }
        | {"I²": st.column_config.NumberColumn(format="percent")},
    )
    st.caption(
        f"Evidence set: {out.evidence_set}. Ratio measures are shown as ratios "
        "(back-transformed from the log scale). τ², I² and Q are on the analysis scale "
        "and count events. A prediction interval needs 3 or more events; with 2 events "
        "the t interval has 1 degree of freedom and is very wide."
    )

    certainty_panel.show(db, exposure, outcome)

# 4. estimates left out ----------------------------------------------------------------------
st.subheader(f"Estimates left out ({len(out.excluded)})")
if out.excluded:
    left_out = pd.DataFrame(out.excluded)[["study_id", "event_id", "reason", "estimate_uid"]]
    st.dataframe(
        left_out,
        hide_index=True,
        width="stretch",
        key="pool_excluded",
        column_config={
            "estimate_uid": "estimate",
            "study_id": "study",
            "event_id": "event",
            "reason": st.column_config.TextColumn("reason", width="large"),
        },
    )
    with st.expander("Reasons in full"):
        for r in out.excluded:
            st.markdown(f"- **{r['study_id']}**, event {r['event_id']}: {r['reason']}")
else:
    st.caption("None: every estimate of this exposure and outcome was pooled.")

st.caption(out.caution)
