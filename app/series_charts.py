"""Plotly figure builders for the series page (pure; same conventions as ``charts.py``).

Both take the ``to_dict()`` of :class:`exposhift.series.SeriesFigure`: the observed points,
the fitted line, the counterfactual (the pre-change segment continued) with its 95 % band after
the change, the change period, and the placebo-date effects with the real one.
"""

from __future__ import annotations

import math

import numpy as np
import plotly.graph_objects as go

MAIN, BAND, OTHER, FIT = "#1f3b57", "rgba(166,180,194,0.45)", "#a6b4c2", "#b2182b"
FONT = dict(family="sans-serif", size=13)


def series_plot(fig: dict, *, title: str = "") -> go.Figure:
    """Observed points, fitted values, counterfactual with its band, change period."""
    x = list(fig["periods"])
    cut = x.index(fig["change_at"])
    post = x[cut:]
    out = go.Figure()
    out.add_trace(
        go.Scatter(
            x=post + post[::-1],
            y=list(fig["counterfactual_high"][cut:]) + list(fig["counterfactual_low"][cut:])[::-1],
            fill="toself",
            fillcolor=BAND,
            line=dict(width=0),
            hoverinfo="skip",
            name="counterfactual 95% band",
        )
    )
    out.add_trace(
        go.Scatter(
            x=x,
            y=fig["counterfactual"],
            mode="lines",
            line=dict(color=MAIN, dash="dash", width=1.5),
            name="counterfactual (pre-change trend continued)",
        )
    )
    for key, comp in fig.get("comparisons", {}).items():
        out.add_trace(
            go.Scatter(
                x=comp["periods"],
                y=comp["observed"],
                mode="markers",
                marker=dict(color=OTHER, size=5, symbol="circle-open"),
                name=f"comparison {key}",
            )
        )
    out.add_trace(
        go.Scatter(
            x=x, y=fig["observed"], mode="markers", marker=dict(color=MAIN, size=6), name="observed"
        )
    )
    out.add_trace(
        go.Scatter(x=x, y=fig["fitted"], mode="lines", line=dict(color=FIT, width=2), name="fitted")
    )
    out.add_shape(
        type="line",
        x0=fig["change_at"],
        x1=fig["change_at"],
        y0=0,
        y1=1,
        yref="paper",
        line=dict(color="#555555", dash="dot"),
    )
    out.add_annotation(
        x=fig["change_at"],
        y=1,
        yref="paper",
        text=f"change {fig['change_at']}",
        showarrow=False,
        yanchor="bottom",
        font=dict(size=11),
    )
    out.update_layout(
        title=title or f"Series {fig['series']}",
        font=FONT,
        height=420,
        xaxis=dict(
            type="category", categoryorder="array", categoryarray=x, nticks=12, title="period"
        ),
        yaxis=dict(title=fig["value_label"]),
        legend=dict(orientation="h", y=-0.25),
        margin=dict(t=60, b=40),
    )
    return out


def placebo_plot(fig: dict) -> go.Figure:
    """The placebo-date effects by false change date, with the real effect as a line; on the
    rate-ratio scale for count models."""
    log = fig["effect_scale"] == "log"
    effects = np.asarray(fig["placebo_effects"], dtype=float)
    real = float(fig["real_effect"])
    shown = np.exp(effects) if log else effects
    real_shown = math.exp(real) if log else real
    out = go.Figure()
    larger = np.abs(effects) >= abs(real)
    out.add_trace(
        go.Bar(
            x=list(fig["placebo_labels"]),
            y=(shown - 1 if log else shown),
            base=1 if log else 0,
            marker=dict(color=[FIT if b else OTHER for b in larger]),
            name="placebo dates",
            hovertemplate="%{x}: %{customdata:.3f}<extra></extra>",
            customdata=shown,
        )
    )
    out.add_hline(
        y=real_shown,
        line=dict(color=MAIN, width=2),
        annotation_text=f"real effect {real_shown:.3f}",
    )
    out.add_hline(y=1 if log else 0, line=dict(color="#999999", width=1))
    out.update_layout(
        title="Placebo dates: the effect estimated at false change dates "
        "(red: at least as large as the real effect)",
        font=FONT,
        height=320,
        showlegend=False,
        xaxis=dict(type="category", title="false change date"),
        yaxis=dict(title="rate ratio" if log else "effect"),
        margin=dict(t=60, b=40),
    )
    return out
