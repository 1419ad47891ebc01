"""Pooling: random-effects meta-analysis of one exposure and one outcome, per stratum, with a
forest plot, the prediction interval, and every estimate left out with its reason."""

import certainty_panel
import charts
import method_view
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

# the option lists come from the library: a new estimator, route or stratum appears by itself
METHODS = ESTIMATORS
CIS = INTERVALS
STRATA = list(STRATA_COLUMNS)
WITHIN = WITHIN_EVENT_ROUTES

db = data.db_target()

# 1. data and choices ------------------------------------------------------------------------
with ui.guard():
    summary = data.summary(db)
    settings = data.replication_settings(db)
pairs = summary.pairs
good = settings.min_level
EVIDENCE = {
    "good": f"good events only (appraisal level ≥ {good}): the set the replication page uses",
    "not-fatal": "every appraisal level but fatal (and studies not yet appraised)",
    "all": "every estimate, fatal studies included",
}
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
c7, c8 = st.columns(2)
evidence = c7.selectbox(
    "Evidence set",
    list(EVIDENCE),
    format_func=EVIDENCE.get,
    key="pool_evidence",
    help="Which appraised studies are pooled. The first choice is the one the replication "
    "status and its pooled number rest on, so both pages show the same events.",
)
within = c8.selectbox(
    "Several estimates of one event",
    list(WITHIN),
    format_func=lambda k: f"{k}: {WITHIN[k]}",
    key="pool_within",
)
include_fatal = evidence == "all"
min_level = good if evidence == "good" else None

with ui.guard():
    args = (db, exposure, outcome, method, ci, tuple(by), include_fatal, align, within, min_level)
    view = data.pool(*args)
out = view.output

# 2. forest plot -----------------------------------------------------------------------------
st.subheader(f"{exposure} → {outcome}")
unit = (
    "one exposure-change event each (several estimates of one event combined into one number)"
    if within == "aggregate"
    else "one estimate each"
)
st.markdown(f"**Evidence set:** {out.evidence_set}.")
st.caption(
    f"Effects of an exposure {align}; {METHODS[method]} τ², {CIS[ci]} interval. "
    f"Squares: {unit}; size = weight; each row gives the estimate as reported, then "
    "aligned to the exposure change shown, and the study's appraisal level. Diamond: pooled "
    "estimate and its interval; dashed line: 95% prediction interval (3 or more events)."
)
if not out.groups:
    st.info("Nothing left to pool after leaving out the estimates below.")
else:
    st.plotly_chart(data.forest(*args), config=charts.PLOTLY_CONFIG, key="pool_forest")
    drawn = charts.forest_budget(len(out.groups), data.FOREST_ROWS)
    if drawn is not None and (view.rows.groupby("group").size() > drawn).any():
        st.caption(
            f"The plot draws the {drawn} heaviest events of each stratum; every event is in "
            "the table below and in the pooled diamond."
        )
    with st.expander(f"Every pooled event ({len(view.rows):,})"):
        rows = view.rows.assign(
            reported_text=view.rows.apply(charts.reported_text, axis=1),
            aligned=charts.aligned_values(view.rows),
            weight_pct=100 * view.rows["weight"],
            level=view.rows["level"].map(ui.level_text),
        )
        ui.table(
            rows[
                [
                    "group_label",
                    "event_id",
                    "study_id",
                    "country",
                    "change_date",
                    "design",
                    "level",
                    "reported_text",
                    "aligned",
                    "weight_pct",
                ]
            ].sort_values(["group_label", "weight_pct"], ascending=[True, False]),
            key="pool_rows",
            titles={
                "group_label": "stratum",
                "event_id": "event",
                "study_id": "studies",
                "change_date": "date of change",
                "level": "appraisal level",
                "reported_text": "as reported",
                "aligned": f"for an exposure {align} [95% CI]",
                "weight_pct": "weight %",
            },
            column_config={"weight %": st.column_config.NumberColumn(format="%.1f")},
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
    ui.table(
        table,
        key="pool_table",
        titles={c: c for c in table.columns},
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
st.subheader(f"Estimates left out ({len(out.excluded):,})")
if out.excluded:
    left_out = pd.DataFrame(out.excluded)[["study_id", "event_id", "reason", "estimate_uid"]]
    shown = ui.table(
        left_out,
        key="pool_excluded",
        titles={"estimate_uid": "estimate", "study_id": "study", "event_id": "event"},
        column_config={"reason": st.column_config.TextColumn("reason", width="large")},
    )
    with st.expander("Reasons in full (the rows shown)"):
        for r in shown.itertuples(index=False):
            st.markdown(f"- **{r.study}**, event {r.event}: {r.reason}")
else:
    st.caption("No estimate left out: every estimate of this exposure and outcome was pooled.")

st.caption(out.caution)
method_view.caption(db)
