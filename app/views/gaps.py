"""Gap map: exposure × outcome group, coloured by the state of the natural-experiment evidence,
with filters; and the registered exposure changes nobody has evaluated (opportunities)."""

import charts
import method_view
import pandas as pd
import streamlit as st
import ui

import data
from exposhift.replication.gaps import GAP_STATES
from exposhift.vocab import DESIGN_FAMILIES

db = data.db_target()

# 1. data and filters ------------------------------------------------------------------------
with ui.guard():
    summary = data.summary(db)
    settings = data.replication_settings(db)

st.title("Gap map")
ui.caution()
ui.demo_notice(summary)

lo = summary.first_year or 1950
hi = summary.last_year or lo
if hi <= lo:
    hi = lo + 1
with st.expander("Filters", expanded=True):
    f1, f2, f3 = st.columns(3)
    families = f1.multiselect("Design families", list(DESIGN_FAMILIES), key="gap_families")
    regions = f2.multiselect(
        "Regions", sorted(settings.regions), key="gap_regions", format_func=ui.region_name
    )
    countries = f3.multiselect(
        "Countries",
        summary.countries,
        key="gap_countries",
        format_func=lambda c: f"{charts.country_name(c)} ({c})",
    )
    f4, f5, f6 = st.columns(3)
    years = f4.slider("Exposure changes between", lo, hi, (lo, hi), key="gap_years")
    level_opts = {"any level": None, "≥ 1": 1, "≥ 2": 2, "3": 3}
    min_level = level_opts[
        f5.selectbox("Appraisal level of record", list(level_opts), key="gap_level")
    ]
    stale_on = f6.checkbox("Mark cells stale when no change after a year", key="gap_stale_on")
    stale_after = (
        f6.number_input("Year", lo, hi + 20, hi - 5 if hi - 5 > lo else lo, key="gap_stale")
        if stale_on
        else None
    )
    studied_only = st.toggle("Only exposure × outcome groups with some study", key="gap_studied")

year_from = years[0] if years[0] > lo else None
year_to = years[1] if years[1] < hi else None
with ui.guard():
    report = data.gaps(
        db,
        tuple(families),
        tuple(regions),
        tuple(countries),
        year_from,
        year_to,
        min_level,
        None if stale_after is None else int(stale_after),
        studied_only,
    )
cells = report.cells

# 2. the map ---------------------------------------------------------------------------------
counts = cells["state"].value_counts()
cols = st.columns(len(GAP_STATES))
for col, state in zip(cols, GAP_STATES, strict=True):
    col.metric(state, int(counts.get(state, 0)), help=GAP_STATES[state])
st.plotly_chart(charts.gap_heatmap(cells), config=charts.PLOTLY_CONFIG, key="gap_heatmap")
st.caption(
    "Cells: independent events (ev) and studies (st). States: "
    + "; ".join(f"**{k}**: {v}" for k, v in GAP_STATES.items())
    + "."
)

with st.expander("Cells as a table"):
    ui.table(
        cells.assign(best_level=cells["best_level"].map(ui.level_text)),
        key="gap_cells",
        titles={
            "status_outcome": "outcome behind the status",
            "not_yet": "not yet replicated in",
            "state_rule": "why this state",
        },
    )

# 3. opportunities ---------------------------------------------------------------------------
opps = report.opportunities
st.subheader(f"Opportunities: registered exposure changes never evaluated ({len(opps)})")
if opps.empty:
    st.caption("None within these filters.")
else:
    shown = opps.assign(
        country=opps["country"].map(lambda c: f"{charts.country_name(c)} ({c})"),
        area=opps["area"].fillna(""),
        change=opps["change_kind"].astype(str) + ", " + opps["change_direction"].astype(str),
    )
    cols = [
        "event_id",
        "exposure",
        "country",
        "area",
        "change_date",
        "change",
        "family",
        "family_events_evaluated",
        "outcomes_studied_elsewhere",
        "designs_used_elsewhere",
        "needs",
    ]
    on_page = ui.table(
        pd.DataFrame(shown[cols]),
        key="gap_opps",
        titles={
            "event_id": "event",
            "change_date": "date of change",
            "family": "family of change",
            "family_events_evaluated": "events of the family evaluated",
            "needs": "an evaluation needs",
        },
        column_config={"an evaluation needs": st.column_config.TextColumn(width="large")},
    )
    with st.expander("What each evaluation would need (the rows shown)"):
        for _, o in opps[opps["event_id"].isin(on_page["event"])].iterrows():
            st.markdown(
                f"- **{o['event_id']}** ({o['exposure']}, "
                f"{charts.country_name(o['country'])}, {o['change_date']}): "
                f"{o['needs']}"
            )
st.caption(report.caution)
method_view.caption(db)
