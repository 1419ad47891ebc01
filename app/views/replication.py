"""Replication across place and time: where and when the same kind of exposure change was
evaluated, whether its effect pointed the same way, and whether designs agree."""

import certainty_panel
import chart_caps
import charts
import method_view
import pandas as pd
import streamlit as st
import ui

import data

EXPECTED = {
    "recorded": "as the evidence base records it",
    "pooled": "inferred from the events",
    "raises": "more exposure raises the outcome",
    "lowers": "more exposure lowers the outcome",
}

db = data.db_target()

# 1. data and choices ------------------------------------------------------------------------
with ui.guard():
    summary = data.summary(db)
pairs = summary.pairs

st.title("Replication across place and time")
ui.demo_notice(summary)
if pairs.empty:
    st.info("No estimates yet: import an extraction sheet first.")
    st.stop()

c1, c2, c3 = st.columns([1, 1.3, 1.3])
with c1:
    exposure = ui.pick(
        "Exposure",
        sorted(pairs["exposure"].unique()),
        key="rep_exposure",
        param="exposure",
        default=str(pairs["exposure"].iloc[0]),
    )
with c2:
    outcome = ui.pick(
        "Outcome",
        pairs.loc[pairs["exposure"] == exposure, "outcome"].tolist(),
        key="rep_outcome",
        param="outcome",
    )
expected = c3.selectbox(
    "Expected direction",
    list(EXPECTED),
    format_func=EXPECTED.get,
    key="rep_expected",
    help="'as recorded': the committee's pre-specified direction (else inferred, and the status "
    "is provisional); 'inferred': the sign of the combined z of the good events (Stouffer); "
    "or try a direction for this view only.",
)
expected = None if expected == "recorded" else expected

with ui.guard():
    report = data.replication(db, exposure, outcome, expected, None)
    settings = report.settings
families = [f["family"] for f in report.families]
if len(families) > 1:
    family = ui.pick(
        "Family of change",
        ["all families", *families],
        key="rep_family",
        help="Events of one kind of change (same agent and kind of change, or "
        "the family key recorded on the event)",
    )
    if family != "all families":
        with ui.guard():
            report = data.replication(db, exposure, outcome, expected, family)

# 2. status with its rule, and the caution ---------------------------------------------------
ui.status_box(report.status, report.rule, report.provisional, report.imprecise)
ui.caution()
basis = {
    "pre-specified": "pre-specified by the committee",
    "settings": "fixed for this run or in the replication settings",
    "inferred": "inferred from these same events, so the status is provisional",
}
st.caption(
    f"Expected direction: {report.expected_words} "
    f"({basis.get(report.expected_source, report.expected_source)}). Estimates are "
    "aligned to an exposure increase (a decrease's estimate has its sign flipped)."
)
h = report.headline
if h.get("k_events"):
    word = "ratio" if h["scale"] == "log" else "difference"
    pi = (
        ""
        if h.get("pi_lower") is None
        else f"; prediction interval {h['pi_lower']:.3g} to {h['pi_upper']:.3g}"
    )
    st.markdown(
        f"**Pooled {word}** {h['estimate']:.3g} (95% CI {h['ci_lower']:.3g} to "
        f"{h['ci_upper']:.3g}{pi}) from **{h['k_events']} event(s)**, "
        f"{h['k_estimates']} estimate(s): {h['evidence_set']} ({h['stratum']})."
    )
for fam in report.families:
    st.caption(
        f"Family of change **{fam['family']}**: {fam['events']} event(s) in "
        f"{len(fam['places'])} place(s), {fam['first_year']}–{fam['last_year']}."
    )

certainty_panel.show(db, exposure, outcome)

ev = report.events
if ev.empty:
    st.info("No independent natural-experiment estimate for this exposure and outcome.")
    st.stop()

# 3. place: world map ------------------------------------------------------------------------
st.subheader("Where: independent events")
places = set(ev["country"])
areas = {
    ui.region_name(name): sorted(places & set(codes))
    for name, codes in sorted(settings.regions.items())
    if places & set(codes)
}
view = "all events"
if st.session_state.get("rep_map_view") not in ("all events", *areas):
    st.session_state.pop("rep_map_view", None)
if len(areas) > 1:
    view = st.radio("Map view", ["all events", *areas], horizontal=True, key="rep_map_view")
chosen = None if len(families) <= 1 or family == "all families" else family
event_map, timeline = data.replication_figures(
    db, exposure, outcome, expected, chosen, settings.min_level, areas.get(view)
)
st.plotly_chart(event_map, config=charts.PLOTLY_CONFIG, key="rep_map")
st.caption(
    "▲ exposure rose, ▼ exposure fell; open marker: appraisal level below "
    f"{settings.min_level}. Colour, on this map and on the timeline below alike: the estimate "
    "aligned to an exposure increase (red: the outcome rises with exposure; blue: it falls)."
)
sign = report.sign_test
if sign.get("n"):
    st.markdown(
        f"**Sign test:** {sign['k_expected']} of {sign['n']} events at level ≥ "
        f"{settings.min_level} point in the expected direction; exact two-sided "
        f"p = {sign['p']:.3g} (the smallest p possible with {sign['n']} events is "
        f"{sign['min_attainable_p']:.3g})."
    )

# 4. time: timeline --------------------------------------------------------------------------
st.subheader("When: events by date, per country")
st.plotly_chart(timeline, config=charts.PLOTLY_CONFIG, key="rep_timeline")
drawn = chart_caps.timeline_events(ev, data.TIMELINE_EVENTS)
if drawn.left_out:
    st.caption(
        f"The timeline draws the {drawn.drawn} heaviest of the {drawn.events} independent "
        f"events (smallest standard error, then the most recent); **{drawn.left_out} more are "
        "not drawn**. Every event is in the table of independent events below."
    )
for seq in report.temporal:
    mark = "replicated in time" if seq["replicated"] else "not replicated in time"
    st.markdown(
        f"- **{charts.country_name(seq['place'])}**: "
        f"{seq['periods_with_counting_event']} period(s) with an event that counts "
        f"(good, in the expected direction, significant or backed by the pooled "
        f"estimate) ({mark})."
    )
for r in report.reversals:
    moved = "moved back" if r["outcome_moved_back"] else "did not move back"
    st.markdown(
        f"- **Reversal in {charts.country_name(r['place'])}**: {r['decrease_event']} "
        f"({r['decrease_date']}) then {r['increase_event']} ({r['increase_date']}); "
        f"the outcome {moved}."
    )

# 5. designs: triangulation ------------------------------------------------------------------
st.subheader("Across designs: pooled estimate per design family")
st.plotly_chart(
    charts.design_family_chart(report.by_design_family),
    config=charts.PLOTLY_CONFIG,
    key="rep_families",
)
st.markdown(f"**Triangulation:** {report.triangulation.get('statement', '')}")
st.caption(
    "Dark: the strata compared for triangulation; grey: other strata (other estimate "
    "kinds or increments). Supporting-only families have no comparison group."
)

# 6. dose-response, events, left out ---------------------------------------------------------
dose = report.dose_response
st.markdown(f"**Dose-response:** {dose.interpretation if dose.run else dose.reason}")
with st.expander(f"Independent events ({ev['event_id'].nunique()}) and their estimates"):
    ui.table(
        ev.assign(level=ev["level"].map(ui.level_text)),
        key="rep_events",
        titles={"event_id": "event", "study_id": "study", "estimate_uid": "estimate key"},
    )
if not report.excluded.empty:
    with st.expander(f"Estimates set aside as not independent ({len(report.excluded)})"):
        cols = [
            c
            for c in ("estimate_uid", "study_id", "event_id", "reason")
            if c in report.excluded.columns
        ]
        ui.table(
            pd.DataFrame(report.excluded[cols]),
            key="rep_excluded",
            titles={"estimate_uid": "estimate", "study_id": "study", "event_id": "event"},
        )
st.caption(report.caution)
method_view.caption(db)
