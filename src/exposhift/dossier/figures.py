"""The dossier's figures as plotly figures from a :class:`~exposhift.dossier.content.Dossier`.

Pure display: values arrive on the natural scale (ratios back-transformed by the adapter) and
are only placed on axes. Ratio measures use a log axis (1 = no effect).

The map never uses plotly's geo base layers (plotly.js would fetch a topology from its CDN):
countries are drawn as filled polygons in longitude/latitude (plate carrée) from the vendored
Natural Earth shapes of the package data (:mod:`exposhift.mapdata`; public domain), so the same
figure works inline in the offline HTML and in the image renderer.
"""

from __future__ import annotations

import html
import math
from typing import Any

import plotly.graph_objects as go
from plotly.subplots import make_subplots

from exposhift import mapdata
from exposhift.dossier.content import Dossier, EstimateRow, OutcomeSection, Pooled

INK, SOFT, POOL, PI = "#1f3b57", "#a6b4c2", "#b35806", "#7f3b08"
FONT = dict(family="DejaVu Sans, Arial, sans-serif", size=12)
PALETTE = (
    "#1f77b4",
    "#d62728",
    "#2ca02c",
    "#9467bd",
    "#8c564b",
    "#e377c2",
    "#17becf",
    "#bcbd22",
    "#ff7f0e",
    "#7f7f7f",
)


def _t(text: object) -> str:
    """User text for a plotly label: plotly.js reads a subset of HTML tags in labels, so '<',
    '>' and '&' are written as entities (it shows them as the characters)."""
    return html.escape(str(text), quote=False)


def _base(fig: go.Figure, height: int) -> go.Figure:
    fig.update_layout(
        template="plotly_white",
        height=height,
        width=900,
        font=FONT,
        margin=dict(l=10, r=10, t=40, b=40),
        showlegend=False,
    )
    return fig


def _fmt(x: float | None) -> str:
    if x is None or not math.isfinite(x):
        return "-"
    return f"{x:.2f}" if 0.1 <= abs(x) < 100 else f"{x:.3g}"


def _xaxis(fig: go.Figure, log: bool, measure: str, **kw: Any) -> None:
    fig.add_vline(x=1.0 if log else 0.0, line=dict(color="#555555", width=1, dash="dot"), **kw)
    fig.update_xaxes(
        type="log" if log else "linear",
        title=f"{measure} ({'log axis; 1' if log else '0'} = no effect)",
        **kw,
    )


def _diamond(fig: go.Figure, g: Pooled, y: float, name: str, colour: str = POOL) -> None:
    if g.estimate is None or g.ci_lower is None or g.ci_upper is None:
        return
    if g.pi_lower is not None and g.pi_upper is not None:
        fig.add_trace(
            go.Scatter(
                x=[g.pi_lower, g.pi_upper],
                y=[y, y],
                mode="lines",
                line=dict(color=PI, width=2, dash="dash"),
                name="prediction interval",
                hoverinfo="skip",
            )
        )
    fig.add_trace(
        go.Scatter(
            x=[g.ci_lower, g.estimate, g.ci_upper, g.estimate, g.ci_lower],
            y=[y, y + 0.3, y, y - 0.3, y],
            mode="lines",
            fill="toself",
            fillcolor=colour,
            line=dict(color=PI, width=1),
            name=name,
            hoverinfo="skip",
        )
    )


def forest(section: OutcomeSection, overall: Pooled) -> go.Figure:
    """Forest plot of one pooled stratum: estimates by design family, each family's pooled
    diamond, then the overall diamond with its prediction interval (dashed)."""
    uids = set(overall.estimates)
    rows = [r for r in section.forest if r.estimate_uid in uids]
    families = [g for g in section.by_design_family if set(g.estimates) <= uids]
    fig = go.Figure()
    ticks: list[tuple[float, str]] = []
    pos = 0.0
    for fam in families:
        members = [r for r in rows if r.estimate_uid in set(fam.estimates)]
        ticks.append((pos, f"<b>{_t(fam.label.split(' · ')[0])}</b>"))
        pos -= 1
        ys = []
        for r in members:
            ys.append(pos)
            ticks.append((pos, _t(f"{r.study_id} ({r.country} {r.change_date[:4]})")))
            pos -= 1
        _squares(fig, members, ys)
        _diamond(fig, fam, pos, "pooled design family", colour=SOFT)
        ticks.append(
            (
                pos,
                f"pooled, k = {fam.k}: {_fmt(fam.estimate)} "
                f"[{_fmt(fam.ci_lower)}, {_fmt(fam.ci_upper)}]",
            )
        )
        pos -= 1.5
    _diamond(fig, overall, pos, "pooled")
    pi = (
        ""
        if overall.pi_lower is None
        else f"; PI {_fmt(overall.pi_lower)} to {_fmt(overall.pi_upper)}"
    )
    ticks.append(
        (
            pos,
            f"<b>all designs, k = {overall.k}: {_fmt(overall.estimate)} "
            f"[{_fmt(overall.ci_lower)}, {_fmt(overall.ci_upper)}]{pi}</b>",
        )
    )
    fig.update_yaxes(
        tickvals=[t[0] for t in ticks],
        ticktext=[t[1] for t in ticks],
        range=[pos - 0.8, 0.8],
        showgrid=False,
        zeroline=False,
    )
    log = overall.scale == "log"
    _xaxis(fig, log, overall.measure)
    values = [v for r in rows for v in (r.ci_lower, r.ci_upper)]
    values += [
        v for g in (*families, overall) for v in (g.ci_lower, g.ci_upper, g.pi_lower, g.pi_upper)
    ]
    values = [v for v in values if v is not None and math.isfinite(v) and (v > 0 or not log)]
    values.append(1.0 if log else 0.0)
    lo, hi = min(values), max(values)
    if log:
        pad = 0.04 * (math.log10(hi) - math.log10(lo) or 1.0)
        fig.update_xaxes(range=[math.log10(lo) - pad, math.log10(hi) + pad])
    else:
        pad = 0.04 * ((hi - lo) or 1.0)
        fig.update_xaxes(range=[lo - pad, hi + pad])
    fig.update_layout(
        title=dict(text=_t(f"{section.outcome}: {overall.label}"), font=dict(size=14))
    )
    return _base(fig, int(110 + 24 * (1 - pos)))


def _squares(fig: go.Figure, rows: list[EstimateRow], ys: list[float]) -> None:
    if not rows:
        return
    est = [r.estimate for r in rows]
    fig.add_trace(
        go.Scatter(
            x=est,
            y=ys,
            mode="markers",
            name="estimate",
            marker=dict(
                symbol="square", color=INK, size=[6 + 16 * math.sqrt(r.weight or 0.0) for r in rows]
            ),
            error_x=dict(
                type="data",
                symmetric=False,
                array=[r.ci_upper - r.estimate for r in rows],
                arrayminus=[r.estimate - r.ci_lower for r in rows],
                color=INK,
                thickness=1.2,
                width=0,
            ),
            text=[_t(f"{r.study_id} · {r.event_id} · {r.level}") for r in rows],
            hovertemplate="%{text}<br>%{x:.3f}<extra></extra>",
        )
    )


def _date_number(text: str) -> float | None:
    """YYYY, YYYY-MM or YYYY-MM-DD as a decimal year, for the timeline axis."""
    parts = str(text).split("-")
    try:
        year = int(parts[0])
    except ValueError:
        return None
    month = int(parts[1]) if len(parts) > 1 and parts[1].isdigit() else 7
    day = int(parts[2][:2]) if len(parts) > 2 and parts[2][:2].isdigit() else 15
    return year + (month - 1) / 12 + (day - 1) / 365


def timeline(section: OutcomeSection) -> go.Figure | None:
    """Replication timeline: date of change × effect of each independent event, by place."""
    pts = section.timeline
    if not pts:
        return None
    scales = [p.scale for p in pts]
    scale = max(set(scales), key=scales.count)
    pts = [p for p in pts if p.scale == scale and _date_number(p.change_date) is not None]
    fig = go.Figure()
    for i, country in enumerate(sorted({p.country for p in pts})):
        sub = [p for p in pts if p.country == country]
        fig.add_trace(
            go.Scatter(
                x=[_date_number(p.change_date) for p in sub],
                y=[p.estimate for p in sub],
                mode="markers",
                name=_t(country),
                marker=dict(
                    size=10,
                    color=PALETTE[i % len(PALETTE)],
                    symbol=["circle" if p.concordant else "circle-open" for p in sub],
                ),
                error_y=dict(
                    type="data",
                    symmetric=False,
                    array=[p.ci_upper - p.estimate for p in sub],
                    arrayminus=[p.estimate - p.ci_lower for p in sub],
                    width=3,
                ),
                text=[_t(f"{p.event_id} ({p.study_id}, {p.design_family})") for p in sub],
                hovertemplate="%{text}<br>%{y:.3f}<extra></extra>",
            )
        )
    log = scale == "log"
    fig.add_hline(y=1.0 if log else 0.0, line=dict(color="#555555", width=1, dash="dot"))
    fig.update_yaxes(
        type="log" if log else "linear",
        title="effect of an exposure increase" + (" (ratio)" if log else ""),
    )
    xs = [_date_number(p.change_date) for p in pts]
    lo, hi = math.floor(min(xs)) - 1, math.ceil(max(xs)) + 1
    step = max(1, round((hi - lo) / 10))
    fig.update_xaxes(title="date of change", range=[lo, hi], tick0=lo, dtick=step, tickformat="d")
    fig.update_layout(
        title=dict(
            text=_t(section.outcome) + ": replication over time and place "
            "(open marker = not concordant)",
            font=dict(size=14),
        ),
        showlegend=True,
    )
    _base(fig, 420)
    fig.update_layout(showlegend=True, legend=dict(title="place"))
    return fig


def sensitivity(section: OutcomeSection) -> go.Figure | None:
    """Leave-one-out, cumulative by date of change, and pooled by appraisal level (one panel
    each, stacked)."""
    s = section.sensitivity
    if s is None or not (s.leave_one_out or s.cumulative or s.by_level):
        return None
    panels = [
        ("leave one out (estimate omitted)", s.leave_one_out),
        ("cumulative by date of change (estimate added)", s.cumulative),
        ("pooled by appraisal level", s.by_level),
    ]
    panels = [(t, [x for x in steps if x.estimate is not None]) for t, steps in panels]
    panels = [p for p in panels if p[1]]
    sizes = [len(p[1]) + 2 for p in panels]
    fig = make_subplots(
        rows=len(panels),
        cols=1,
        subplot_titles=[p[0] for p in panels],
        row_heights=[n / sum(sizes) for n in sizes],
        vertical_spacing=0.08,
    )
    for r, (_, steps) in enumerate(panels, start=1):
        ys = list(range(len(steps), 0, -1))
        fig.add_trace(
            go.Scatter(
                x=[x.estimate for x in steps],
                y=ys,
                mode="markers",
                marker=dict(color=INK, size=7),
                error_x=dict(
                    type="data",
                    symmetric=False,
                    array=[(x.ci_upper or x.estimate) - x.estimate for x in steps],
                    arrayminus=[x.estimate - (x.ci_lower or x.estimate) for x in steps],
                    width=0,
                    color=INK,
                ),
                text=[_t(f"{x.label} (k = {x.k})") for x in steps],
                hovertemplate="%{text}<br>%{x:.3f}<extra></extra>",
            ),
            row=r,
            col=1,
        )
        fig.update_yaxes(
            tickvals=ys,
            ticktext=[_t(f"{x.label} (k = {x.k})") for x in steps],
            row=r,
            col=1,
            showgrid=False,
            range=[0.3, len(steps) + 0.7],
        )
        _xaxis(fig, s.scale == "log", "pooled" if r == len(panels) else "", row=r, col=1)
    fig.update_layout(
        title=dict(
            text=_t(f"{section.outcome}: what moves the pooled estimate ({s.group})"),
            font=dict(size=14),
        )
    )
    fig.update_annotations(font_size=12)
    return _base(fig, int(160 + 20 * sum(sizes)))


def country_shapes() -> dict | None:
    """The vendored Natural Earth 1:110m countries (GeoJSON, package data read by
    :mod:`exposhift.mapdata`), or None when the installed package lacks them."""
    try:
        return mapdata.country_shapes()
    except (OSError, ValueError):
        return None


def _rings(geometry: dict) -> list[list[list[float]]]:
    if geometry["type"] == "Polygon":
        return [geometry["coordinates"][0]]
    if geometry["type"] == "MultiPolygon":
        return [poly[0] for poly in geometry["coordinates"]]
    return []


def _polygon_xy(features: list[dict]) -> tuple[list, list]:
    """Rings as one None-separated path; a ring that wraps across the antimeridian (a jump of
    more than 180° longitude between two points) is left out rather than drawn across the map."""
    xs: list = []
    ys: list = []
    for f in features:
        for ring in _rings(f["geometry"]):
            lon = [p[0] for p in ring]
            if any(abs(a - b) > 180 for a, b in zip(lon, lon[1:], strict=False)):
                continue
            xs += [round(p[0], 2) for p in ring] + [None]
            ys += [round(p[1], 2) for p in ring] + [None]
    return xs, ys


def place_map(d: Dossier) -> go.Figure | None:
    """Countries with an evaluated event (dark) and with an unevaluated event only (light)."""
    shapes = country_shapes()
    if shapes is None:
        return None
    studied = {r.country for s in d.sections for r in s.timeline} | {
        p.strip() for st in d.studies for p in st.places.split(",") if p.strip()
    }
    waiting = {o.country.split(" ")[0] for o in d.opportunities} - studied
    feats = [f for f in shapes["features"] if f.get("geometry")]
    fig = go.Figure()
    for codes, colour, name in (
        (None, "#e4e4e4", "other"),
        (studied, INK, "studied"),
        (waiting, "#f4a259", "registered, not yet evaluated"),
    ):
        sel = feats if codes is None else [f for f in feats if f.get("id") in codes]
        if not sel:
            continue
        xs, ys = _polygon_xy(sel)
        fig.add_trace(
            go.Scatter(
                x=xs,
                y=ys,
                mode="lines",
                fill="toself",
                fillcolor=colour,
                line=dict(color="#ffffff", width=0.5),
                name=name,
                hoverinfo="skip",
                showlegend=codes is not None,
            )
        )
    fig.update_xaxes(range=[-180, 180], visible=False)
    fig.update_yaxes(range=[-58, 84], visible=False, scaleanchor="x", scaleratio=1)
    fig.update_layout(
        title=dict(text=_t(f"{d.exposure}: places of the exposure changes"), font=dict(size=14))
    )
    _base(fig, 470)
    fig.update_layout(
        showlegend=True, legend=dict(orientation="h", y=-0.02), margin=dict(l=0, r=0, t=40, b=10)
    )
    return fig


def dossier_figures(d: Dossier) -> dict[str, go.Figure]:
    """Every figure of a dossier by a stable name, in the order the sections show them."""
    out: dict[str, go.Figure] = {}
    m = place_map(d)
    if m is not None:
        out["map"] = m
    for i, s in enumerate(d.sections):
        for j, g in enumerate(s.pooled):
            out[f"forest-{i}-{j}"] = forest(s, g)
        t = timeline(s)
        if t is not None:
            out[f"timeline-{i}"] = t
        sens = sensitivity(s)
        if sens is not None:
            out[f"sensitivity-{i}"] = sens
    return out
