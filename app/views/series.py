"""Extracted series: the observed points, the fitted counterfactual with its band, the change,
and the placebo dates, places and negative controls that test the effect."""

import pandas as pd
import series_charts
import streamlit as st
import ui
from charts import PLOTLY_CONFIG

import data

db = data.db_target()
with ui.guard():
    summary = data.summary(db)
    listing = data.series_list(db)

st.title("Extracted series")
ui.demo_notice(summary)
exposed = listing[listing["role"] == "exposed"] if not listing.empty else listing
if exposed.empty:
    st.info(
        "No extracted series yet: import a series sheet with `exposhift series import "
        "FILE` (docs/series-sheet.md)."
    )
    st.stop()

c1, c2, c3, c4 = st.columns([1.6, 0.8, 1, 1])
labels = {r.key: f"{r.key} ({r.study}, {r.outcome})" for r in exposed.itertuples()}
with c1:
    key = ui.pick(
        "Series",
        list(labels),
        key="series_key",
        param="series",
        help="Exposed series; its comparison and negative-control series are used with it.",
    )
horizon = c2.number_input(
    "Horizon (periods)",
    min_value=0,
    value=0,
    step=1,
    key="series_h",
    help="0: the level change; h: the average effect over the first h periods after the change.",
)
model = c3.selectbox("Model", ["auto", "gaussian", "poisson", "negbin"], key="series_model")
seasonal = c4.selectbox("Seasonality", ["auto", "fourier", "month", "none"], key="series_seasonal")

with ui.guard():
    out = data.series_estimate(db, key, int(horizon) or None, model, seasonal)
a, its = out.analysis, out.analysis.its
p = a.placebo_dates

m1, m2, m3 = st.columns(3)
what = "level change" if its.horizon is None else f"average over {its.horizon} periods"
if its.ratio is not None:
    r = its.ratio
    m1.metric(f"Rate ratio ({what})", f"{r[0]:.3f}", help=f"95% CI {r[1]:.3f} to {r[2]:.3f}")
    m1.caption(f"95% CI {r[1]:.3f} to {r[2]:.3f}")
else:
    lo, hi = its.effect_ci
    m1.metric(f"Mean difference ({what})", f"{its.effect:.4g}")
    m1.caption(f"95% CI {lo:.4g} to {hi:.4g}")
m2.metric(
    "Placebo dates",
    p.status,
    help="passed: the real effect stands out from the effects at false change dates (p <= 0.10)",
)
m2.caption(f"rank {p.rank} of {len(p.effects) + 1}, p = {p.p_value:.3f}")
m3.metric("Points", f"{its.n_pre} before / {its.n_post} after")
m3.caption(f"model {a.model}, seasonal {a.seasonal or 'none'}")

st.plotly_chart(
    series_charts.series_plot(a.figure.to_dict()), config=PLOTLY_CONFIG, key="series_plot"
)
if len(p.effects):
    st.plotly_chart(
        series_charts.placebo_plot(a.figure.to_dict()), config=PLOTLY_CONFIG, key="placebo_plot"
    )
for note in (*p.notes, *its.notes):
    st.caption(note)

d = its.diagnostics
st.markdown(
    f"**Model.** {a.model_reason}. Standard errors: {d['se_method']}; "
    f"{d['interval']} intervals. Durbin-Watson {d['durbin_watson']:.2f}, Ljung-Box Q "
    f"{d['ljung_box_q']:.2f} ({d['ljung_box_lags']} lags, p {d['ljung_box_p']:.3f})."
)
if p.naive_effects is not None and len(p.naive_effects):
    st.markdown(
        f"**Before-after ignoring trends:** {p.naive_real:.4g} at the real date, up to "
        f"{float(abs(p.naive_effects).max()):.4g} (absolute) at the placebo dates."
    )
rows = []
for k, c in a.controlled.items():
    rows.append(
        {
            "comparison": k,
            "controlled effect": c.effect,
            "SE": c.effect_se,
            "two-period DiD": c.did,
            "pre-slope difference": c.pre_slope_diff,
            "parallel before": "yes" if c.parallel_pre_trends else "no",
        }
    )
if rows:
    st.markdown("**Comparison series**")
    st.dataframe(pd.DataFrame(rows), hide_index=True)
if a.placebo_places is not None:
    q = a.placebo_places
    st.markdown(
        f"**Placebo places:** rank {q.rank} of {len(q.effects) + 1} (p "
        f"{q.p_value:.3f}): {q.status}."
    )
for k, r in a.negative_controls.items():
    st.markdown(
        f"**Negative control {k}:** effect {r.effect:.4g} (95% CI "
        f"{r.effect_ci[0]:.4g} to {r.effect_ci[1]:.4g})."
    )
st.caption(
    "Nothing is stored from this page. To add the effect to the evidence, run "
    f"`exposhift series estimate {key}"
    + (f" --horizon {int(horizon)}" if horizon else "")
    + " --store`."
)
ui.caution(out.caution)
