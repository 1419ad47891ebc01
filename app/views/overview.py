"""Evidence at a glance: what the evidence base holds, and the caution."""

import charts
import streamlit as st
import ui

import data

db = data.db_target()

# 1. data ------------------------------------------------------------------------------------
with ui.guard():
    summary = data.summary(db)

# 2. heading, demo notice, caution -----------------------------------------------------------
st.title("Evidence at a glance")
st.caption(
    "Natural-experiment studies of environmental exposures: bans, closures, accidents, "
    "new standards, and what followed."
)
ui.demo_notice(summary)

# 3. counts ----------------------------------------------------------------------------------
c = summary.counts
cols = st.columns(5)
cols[0].metric("Studies", c.get("studies", 0))
cols[1].metric(
    "Events",
    c.get("events", 0),
    help="Registered exposure changes (bans, closures, standards...); "
    f"{summary.events_without_study} have no study yet",
)
cols[2].metric("Estimates", c.get("estimates", 0))
cols[3].metric("Appraisals", c.get("appraisals", 0))
cols[4].metric("Countries", len(summary.countries))
if summary.first_year is not None:
    st.markdown(f"Exposure changes dated **{summary.first_year}** to **{summary.last_year}**.")
if summary.events_without_study:
    st.markdown(
        f"**{summary.events_without_study}** registered exposure changes have never "
        "been evaluated: see the **Gap map** for these opportunities."
    )

# 4. what has been studied -------------------------------------------------------------------
left, right = st.columns([3, 2])
with left:
    st.subheader("Studies per exposure and outcome")
    st.plotly_chart(
        charts.pair_bars(summary.pairs), config=charts.PLOTLY_CONFIG, key="overview_pairs"
    )
with right:
    st.subheader("Designs and appraisals")
    st.plotly_chart(
        charts.count_bars(
            summary.by_design_family, "design_family", "studies", "studies per design family"
        ),
        config=charts.PLOTLY_CONFIG,
        key="overview_families",
    )
    st.plotly_chart(
        charts.count_bars(
            summary.by_level, "level", "studies", "studies per appraisal level of record"
        ),
        config=charts.PLOTLY_CONFIG,
        key="overview_levels",
    )

# 5. what the evidence says, with the caution ------------------------------------------------
st.subheader("Replication status and pooled effect per exposure and outcome")
ui.caution()
with ui.guard():
    findings = data.findings(db)
st.dataframe(
    ui.readable(ui.paged(findings, "overview_findings"), titles={c: c for c in findings.columns}),
    hide_index=True,
    width="stretch",
    key="overview_findings",
    placeholder=ui.EMPTY,
    column_config={
        "events": st.column_config.NumberColumn("independent events"),
        "stratum": st.column_config.TextColumn(
            "largest stratum pooled",
            help="measure group / estimate kind (and increment) "
            "with the most independent estimates; see Pooling for every stratum",
        ),
        "k": st.column_config.NumberColumn("k"),
        "estimate": st.column_config.NumberColumn("pooled", format="%.3f"),
        "ci_lower": st.column_config.NumberColumn("CI low", format="%.3f"),
        "ci_upper": st.column_config.NumberColumn("CI high", format="%.3f"),
        "tau2": st.column_config.NumberColumn("τ²", format="%.4f"),
        "i2": st.column_config.NumberColumn("I²", format="percent"),
        "k_events": st.column_config.NumberColumn("events pooled"),
        "k_estimates": st.column_config.NumberColumn("estimates pooled"),
        "provisional": st.column_config.CheckboxColumn(
            "provisional", help="the expected direction was inferred from these same events"
        ),
        "imprecise": st.column_config.CheckboxColumn(
            "imprecise",
            help="a replication status whose pooled interval does not exclude no effect",
        ),
    },
)
st.caption(
    "Ratios are shown back-transformed (scale 'log'); effects of an exposure increase; "
    "REML τ² with the HKSJ interval. Open Pooling and Replication for the details."
)
st.caption(f"Evidence base `{summary.url}` ({summary.backend}).")
