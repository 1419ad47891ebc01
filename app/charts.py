"""Plotly figure builders for the dashboard.

Pure: each function takes DataFrames, dicts or dataclasses returned by the services and returns
a ``plotly.graph_objects.Figure``. Nothing here reads the database or imports streamlit. The
only transformations are for display: analysis-scale values of ratio measures are shown
back-transformed (exp) on a log axis, and dates are placed on a time axis.

Maps never use plotly's own base layers (plotly.js would fetch them from a CDN and draw a blank
map offline): countries are drawn from the vendored Natural Earth shapes in ``static/`` with
``go.Choropleth(geojson=..., featureidkey="id")`` and the geo layers are switched off. Display
the figures with :data:`PLOTLY_CONFIG`, which points plotly.js at the app's own static files.
"""

from __future__ import annotations

import functools
import math
from pathlib import Path
from typing import Any

import chart_caps
import numpy as np
import pandas as pd
import plotly.graph_objects as go
import pycountry

from exposhift import mapdata
from exposhift.synthesis.harmonise import GROUP_SCALES

STATIC = Path(__file__).resolve().parent / "static"
#: passed to every plotly chart: no logo, and a local topojsonURL (Streamlit serves app/static
#: at app/static/ when static serving is on), so plotly.js never contacts its CDN
PLOTLY_CONFIG: dict[str, Any] = {
    "displaylogo": False,
    "topojsonURL": "app/static/",
    "modeBarButtonsToRemove": ["select2d", "lasso2d"],
}
#: measure groups analysed on the log scale (shown back-transformed)
LOG_GROUPS = frozenset(g for g, scale in GROUP_SCALES.items() if scale == "log")

UP, DOWN = "triangle-up", "triangle-down"
ROSE, FELL, FLAT = "#b2182b", "#2166ac", "#7f7f7f"
MAIN, OTHER = "#1f3b57", "#a6b4c2"
FONT = dict(family="sans-serif", size=13)

#: gap state -> colour: warm and light for thin evidence, red for conflicting evidence, blues
#: for replication in part, and the one dark green only for replication in every dimension
STATE_COLOURS: dict[str, str] = {
    "no-study": "#eeeeee",
    "stale": "#c7b9d6",
    "weak-only": "#f4c48a",
    "single-event": "#fbe49a",
    "conflicting": "#e08c8c",
    "not-replicated": "#cfe0ee",
    "replicated-in-part": "#7fb0d6",
    "replicated": "#3f8f5a",
}


# ----------------------------------------------------------------------------- helpers
def country_shapes() -> dict:
    """Natural Earth 1:110m countries as GeoJSON, ``id`` = ISO 3166-1 alpha-3 (package data,
    :mod:`exposhift.mapdata`)."""
    return mapdata.country_shapes()


def country_points() -> dict[str, list]:
    """alpha-3 -> [lon, lat, name]: a point inside each country (Natural Earth 1:50m)."""
    return mapdata.country_points()


@functools.lru_cache(maxsize=512)
def country_name(code: str) -> str:
    """A readable country name for an ISO 3166-1 alpha-3 code (the code if unknown)."""
    c = pycountry.countries.get(alpha_3=str(code).upper()) if code else None
    if c is None:
        return str(code)
    return getattr(c, "common_name", None) or c.name


def parse_change_date(value: Any) -> pd.Timestamp | None:
    """YYYY, YYYY-MM or YYYY-MM-DD -> a timestamp in the middle of the stated period."""
    text = str(value or "").strip()
    if not text or text.lower() in ("nan", "none"):
        return None
    try:
        if len(text) == 4:
            stamp = pd.Timestamp(f"{text}-07-01")
        elif len(text) == 7:
            stamp = pd.Timestamp(f"{text}-15")
        else:
            stamp = pd.Timestamp(text[:10])
    except ValueError:
        return None
    return None if pd.isna(stamp) else stamp


def _fmt(x: Any, digits: int = 3) -> str:
    """Three significant digits; two decimals for values between 0.1 and 100 (ratios)."""
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-"
    x = float(x)
    if 0.1 <= abs(x) < 100:
        return f"{x:.2f}"
    return f"{x:.{digits}g}"


def plural(n: int, word: str, words: str | None = None) -> str:
    """``1 study``, ``2 studies``."""
    return f"{n} {word if int(n) == 1 else (words or word + 's')}"


def _is_log(groups: pd.Series | list) -> bool:
    values = {str(g) for g in groups}
    return bool(values) and values <= LOG_GROUPS


def _null_line(fig: go.Figure, log: bool) -> None:
    fig.add_vline(x=1.0 if log else 0.0, line=dict(color="#555555", width=1, dash="dot"))


def _log_ticks(lo: float, hi: float) -> tuple[list[float], list[str]]:
    candidates = [0.1, 0.2, 0.25, 0.5, 0.67, 0.8, 0.9, 1.0, 1.1, 1.25, 1.5, 2, 3, 4, 5, 10]
    inside = [c for c in candidates if lo * 0.98 <= c <= hi * 1.02]
    if len(inside) < 3:
        inside = sorted({*inside, round(lo, 2), 1.0, round(hi, 2)})
    return inside, [f"{c:g}" for c in inside]


def empty_figure(message: str, height: int = 220) -> go.Figure:
    """A figure with one centred message (used when there is nothing to draw)."""
    fig = go.Figure()
    fig.add_annotation(
        text=message,
        showarrow=False,
        x=0.5,
        y=0.5,
        xref="paper",
        yref="paper",
        font=dict(size=15, color="#555555"),
    )
    fig.update_layout(
        height=height,
        xaxis_visible=False,
        yaxis_visible=False,
        plot_bgcolor="white",
        margin=dict(l=10, r=10, t=10, b=10),
    )
    return fig


# ----------------------------------------------------------------------------- overview
def pair_bars(pairs: pd.DataFrame, top: int = 20) -> go.Figure:
    """Studies per exposure × outcome (the evidence base at a glance), one bar per pair."""
    if pairs.empty:
        return empty_figure("no estimates in the evidence base yet")
    p = pairs.head(top).iloc[::-1]
    labels = p["exposure"].astype(str) + " → " + p["outcome"].astype(str)
    fig = go.Figure(
        go.Bar(
            x=p["studies"],
            y=labels,
            orientation="h",
            marker_color=MAIN,
            text=[
                f"{plural(s, 'study', 'studies')} · {plural(e, 'event')}"
                for s, e in zip(p["studies"], p["events"], strict=True)
            ],
            textposition="outside",
            cliponaxis=False,
            hovertemplate="%{y}<br>%{x} studies<extra></extra>",
        )
    )
    fig.update_layout(
        height=80 + 30 * len(p),
        margin=dict(l=10, r=120, t=10, b=30),
        xaxis_title="studies",
        plot_bgcolor="white",
        font=FONT,
    )
    fig.update_xaxes(gridcolor="#e5e5e5")
    return fig


def count_bars(frame: pd.DataFrame, category: str, value: str, title: str) -> go.Figure:
    """A horizontal bar per category (e.g. studies per design family)."""
    if frame.empty:
        return empty_figure("nothing to count yet")
    f = frame.iloc[::-1]
    fig = go.Figure(
        go.Bar(
            x=f[value],
            y=f[category].astype(str),
            orientation="h",
            marker_color=MAIN,
            text=f[value],
            textposition="outside",
            cliponaxis=False,
            hovertemplate="%{y}: %{x}<extra></extra>",
        )
    )
    fig.update_layout(
        title=dict(text=title, font=dict(size=14)),
        height=90 + 28 * len(f),
        margin=dict(l=10, r=40, t=40, b=30),
        plot_bgcolor="white",
        font=FONT,
    )
    fig.update_xaxes(gridcolor="#e5e5e5")
    return fig


# ----------------------------------------------------------------------------- forest plot
def reported_text(row: Any) -> str:
    """An estimate as the study reported it, e.g. ``RR 0.78 [0.70, 0.87] after a ban``
    (several estimates of one event combined: says so instead)."""
    k = row.get("k_units") if hasattr(row, "get") else None
    if k is not None and pd.notna(k) and k > 1:
        return f"{int(k)} estimates combined"
    value = row.get("reported")
    if value is None or pd.isna(value):
        return "as reported: -"
    lo, hi = row.get("reported_low"), row.get("reported_high")
    ci = (
        ""
        if lo is None or pd.isna(lo) or hi is None or pd.isna(hi)
        else f" [{_fmt(lo)}, {_fmt(hi)}]"
    )
    kind = row.get("change_kind")
    after = f" after a {kind}" if isinstance(kind, str) and kind else ""
    return f"{row.get('measure')} {_fmt(value)}{ci}{after}"


def aligned_values(rows: pd.DataFrame) -> pd.Series:
    """Each pooled row's aligned value and Wald interval on the natural scale, as text."""
    out = []
    for r in rows.itertuples(index=False):
        f = math.exp if r.scale == "log" else float
        out.append(f"{_fmt(f(r.y))} [{_fmt(f(r.ci_lower))}, {_fmt(f(r.ci_upper))}]")
    return pd.Series(out, index=rows.index, dtype=object)


def forest_budget(n_groups: int, max_rows: int | None) -> int | None:
    """Rows drawn per stratum: ``max_rows`` shared between the strata, at least 5 each."""
    if max_rows is None or n_groups == 0:
        return None
    return max(5, max_rows // n_groups)


def forest_plot(
    rows: pd.DataFrame, groups: list[dict], *, title: str = "", max_rows: int | None = 40
) -> go.Figure:
    """Forest plot: one row per pooled estimate (square sized by weight, line = its CI), then
    the group's pooled estimate as a diamond (CI) with its prediction interval as a dashed
    line, for every group of ``groups`` (``PoolOutput.groups``). ``rows`` is
    ``PoolView.rows``. Ratio measures are drawn back-transformed on a log axis.

    A readable number of rows: at most ``max_rows`` event rows in all (shared between the
    strata by :func:`forest_budget`); a stratum with more draws its heaviest events and one
    line "N more events" (the pooled diamond still uses every event; the page's table lists
    them all)."""
    if rows.empty or not groups:
        return empty_figure("nothing was pooled")
    budget = forest_budget(len(groups), max_rows)
    log = all(g.get("scale") == "log" for g in groups)
    f = np.exp if log else (lambda a: np.asarray(a, dtype=float))
    ticks: list[tuple[float, str]] = []
    headers: list[tuple[float, str]] = []
    right: list[tuple[float, str]] = []
    pos = 0.0
    fig = go.Figure()
    xs_all: list[float] = []
    for gi, g in enumerate(groups):
        sub = rows[rows["group"] == gi]
        label = str(sub["group_label"].iloc[0]) if len(sub) else f"group {gi + 1}"
        headers.append((pos, f"<b>stratum: {label}</b>"))
        right.append((pos, "<i>as reported  →  aligned [95% CI]   weight</i>"))
        pos -= 1
        hidden = sub.iloc[0:0]
        if budget is not None and len(sub) > budget:
            top = sub["weight"].fillna(0).sort_values(ascending=False, kind="stable").index
            shown = sub.index.isin(top[:budget])
            sub, hidden = sub[shown], sub[~shown]
        ys = []
        for _, r in sub.iterrows():
            ys.append(pos)
            where = " ".join(str(v) for v in (r["country"], r["change_date"][:4]) if v)
            sub_txt = (
                f" [{r['subgroup']}]" if isinstance(r["subgroup"], str) and r["subgroup"] else ""
            )
            lvl = "not appraised" if pd.isna(r["level"]) else f"level {int(r['level'])}"
            ticks.append((pos, f"{r['event_id']}: {r['study_id']} ({where}){sub_txt} · {lvl}"))
            right.append(
                (
                    pos,
                    f"{reported_text(r)}  →  {_fmt(f(r['y']))} [{_fmt(f(r['ci_lower']))}, "
                    f"{_fmt(f(r['ci_upper']))}]   {100 * r['weight']:.0f}%",
                )
            )
            pos -= 1
        if len(hidden):
            ticks.append(
                (pos, f"<i>… {plural(len(hidden), 'more event')} (the table lists every event)</i>")
            )
            right.append((pos, f"<i>{100 * hidden['weight'].sum():.0f}% of the weight</i>"))
            pos -= 1
        est, lo, hi = (
            f(sub["y"].to_numpy()),
            f(sub["ci_lower"].to_numpy()),
            f(sub["ci_upper"].to_numpy()),
        )
        xs_all += [*lo, *hi]
        level = sub["level"].map(lambda v: "not appraised" if pd.isna(v) else f"{int(v)}")
        fig.add_trace(
            go.Scatter(
                x=est,
                y=ys,
                mode="markers",
                name=label,
                showlegend=False,
                marker=dict(symbol="square", color=MAIN, size=8 + 18 * np.sqrt(sub["weight"])),
                error_x=dict(
                    type="data",
                    symmetric=False,
                    array=hi - est,
                    arrayminus=est - lo,
                    color=MAIN,
                    thickness=1.5,
                    width=0,
                ),
                customdata=np.stack(
                    [sub["study_id"], sub["event_id"], sub["design"], level, 100 * sub["weight"]],
                    axis=-1,
                ),
                hovertemplate=(
                    "%{customdata[0]} · event %{customdata[1]}<br>design "
                    "%{customdata[2]}, level %{customdata[3]}<br>%{x:.3f} "
                    "(weight %{customdata[4]:.1f}%)<extra></extra>"
                ),
            )
        )
        if g.get("estimate") is not None:
            e, lo_g, hi_g = (float(f(g[k])) for k in ("estimate", "ci_lower", "ci_upper"))
            xs_all += [lo_g, hi_g]
            if g.get("pi_lower") is not None and g.get("pi_upper") is not None:
                pl, pu = float(f(g["pi_lower"])), float(f(g["pi_upper"]))
                xs_all += [pl, pu]
                fig.add_trace(
                    go.Scatter(
                        x=[pl, pu],
                        y=[pos, pos],
                        mode="lines",
                        showlegend=False,
                        name="prediction interval",
                        line=dict(color="#b35806", width=2, dash="dash"),
                        hovertemplate=f"prediction interval {_fmt(pl)} to {_fmt(pu)}"
                        "<extra></extra>",
                    )
                )
            fig.add_trace(
                go.Scatter(
                    x=[lo_g, e, hi_g, e, lo_g],
                    y=[pos, pos + 0.32, pos, pos - 0.32, pos],
                    mode="lines",
                    fill="toself",
                    fillcolor="#b35806",
                    showlegend=False,
                    line=dict(color="#7f3b08", width=1),
                    name="pooled",
                    hovertemplate=(
                        f"pooled {_fmt(e)} ({_fmt(lo_g)} to {_fmt(hi_g)}), "
                        f"k = {g.get('k')}<extra></extra>"
                    ),
                )
            )
            ticks.append((pos, f"<b>pooled, k = {g.get('k')}</b>"))
            pi = (
                ""
                if g.get("pi_lower") is None
                else f"  PI {_fmt(f(g['pi_lower']))} to {_fmt(f(g['pi_upper']))}"
            )
            right.append((pos, f"<b>{_fmt(e)} [{_fmt(lo_g)}, {_fmt(hi_g)}]</b>{pi}"))
        pos -= 1.6
    _null_line(fig, log)
    n_rows = -pos
    fig.update_yaxes(
        tickvals=[t[0] for t in ticks],
        ticktext=[t[1] for t in ticks],
        range=[pos + 0.6, 0.8],
        showgrid=False,
        zeroline=False,
    )
    for y, text in right:
        fig.add_annotation(
            x=1.01,
            xref="paper",
            y=y,
            yref="y",
            text=text,
            showarrow=False,
            xanchor="left",
            font=dict(size=12),
        )
    for y, text in headers:
        fig.add_annotation(
            x=0,
            xref="paper",
            y=y,
            yref="y",
            text=text,
            showarrow=False,
            xanchor="left",
            font=dict(size=13),
            bgcolor="white",
        )
    xs = [x for x in xs_all if x is not None and math.isfinite(x) and (not log or x > 0)]
    if log and xs:
        lo_x, hi_x = min(min(xs), 1.0), max(max(xs), 1.0)
        tv, tt = _log_ticks(lo_x, hi_x)
        fig.update_xaxes(
            type="log",
            tickvals=tv,
            ticktext=tt,
            range=[math.log10(lo_x) - 0.02, math.log10(hi_x) + 0.02],
        )
    measure = "/".join(sorted({str(g.get("measure", "")) for g in groups}))
    fig.update_xaxes(
        title=(f"{measure} (log axis; 1 = no effect)" if log else f"{measure} (0 = no effect)"),
        gridcolor="#e5e5e5",
    )
    fig.update_layout(
        height=int(120 + 26 * n_rows),
        plot_bgcolor="white",
        font=FONT,
        margin=dict(l=10, r=330, t=40 if title else 10, b=50),
        title=dict(text=title, font=dict(size=14)) if title else None,
    )
    return fig


# ----------------------------------------------------------------------------- map
def map_extent(
    lon: list[float],
    lat: list[float],
    pad: float = 8.0,
    min_lon: float = 50.0,
    min_lat: float = 30.0,
) -> tuple[list[float], list[float]]:
    """Longitude and latitude ranges around the markers (padded, never narrower than
    ``min_lon`` × ``min_lat`` degrees, never beyond the world without Antarctica)."""
    world = ([-180.0, 180.0], [-58.0, 84.0])
    if not lon:
        return world
    lo_x, hi_x = min(lon) - pad, max(lon) + pad
    lo_y, hi_y = min(lat) - pad, max(lat) + pad
    if hi_x - lo_x < min_lon:
        mid = (lo_x + hi_x) / 2
        lo_x, hi_x = mid - min_lon / 2, mid + min_lon / 2
    if hi_y - lo_y < min_lat:
        mid = (lo_y + hi_y) / 2
        lo_y, hi_y = mid - min_lat / 2, mid + min_lat / 2
    if hi_x - lo_x > 200:
        return world
    return ([max(lo_x, -180.0), min(hi_x, 180.0)], [max(lo_y, -58.0), min(hi_y, 84.0)])


def event_map(
    events: pd.DataFrame, *, min_level: int = 2, title: str = "", focus: list[str] | None = None
) -> go.Figure:
    """World map of independent events (``ReplicationReport.events`` rows that represent their
    event): countries with events shaded, one triangle per event (▲ exposure increased, ▼
    decreased) placed inside its country (:func:`exposhift.mapdata.marker_places`; the
    country is labelled, with its number of events when it has several) and coloured by its
    estimate aligned to an exposure increase (red: the outcome rises with exposure, blue: it
    falls; back-transformed for ratio measures; the timeline uses the same colours). When the events
    mix measure groups, the colour is z = estimate / SE instead. Open markers: level below
    ``min_level`` or not appraised. The view fits the markers, or the countries in ``focus``
    (alpha-3 codes) when given."""
    shapes = country_shapes()
    base_ids = [f["id"] for f in shapes["features"] if f["id"] != "ATA"]
    fig = go.Figure(
        go.Choropleth(
            geojson=shapes,
            featureidkey="id",
            locations=base_ids,
            z=[0] * len(base_ids),
            colorscale=[[0, "#e8e8e8"], [1, "#e8e8e8"]],
            showscale=False,
            hoverinfo="skip",
            marker_line=dict(color="white", width=0.5),
            name="countries",
        )
    )
    ev = events
    if "represents_event" in ev.columns:
        ev = ev[ev["represents_event"].astype(bool)]
    ev = ev.reset_index(drop=True)
    lon: list[float | None] = []
    lat: list[float | None] = []
    if not ev.empty:
        counts = ev.groupby("country").size()
        names = [country_name(c) for c in counts.index]
        wanted = set(counts.index)
        subset = {
            "type": "FeatureCollection",
            "features": [f for f in shapes["features"] if f["id"] in wanted],
        }
        fig.add_trace(
            go.Choropleth(
                geojson=subset,
                featureidkey="id",
                locations=list(counts.index),
                z=[1] * len(counts),
                colorscale=[[0, "#c9d6e3"], [1, "#c9d6e3"]],
                showscale=False,
                marker_line=dict(color="#6b7f94", width=0.8),
                name="places",
                text=[f"{n}: {k} event(s)" for n, k in zip(names, counts, strict=True)],
                hovertemplate="%{text}<extra></extra>",
            )
        )
        label_lon, label_lat, label_text = [], [], []
        for code, grp in ev.groupby("country", sort=False):
            places = mapdata.marker_places(str(code), len(grp))
            if not places:
                places = ((None, None),) * len(grp)
            for x, y in places:
                lon.append(x)
                lat.append(y)
            if places[0][0] is not None and (focus or len(grp) > 1):
                # labelled: every country of a zoomed view; in the world view the countries
                # with several events (their count), so small neighbours do not overprint
                stacked = len(set(places)) < len(places)
                label_lon.append(places[0][0])
                label_lat.append(places[0][1])
                label_text.append(
                    f"{country_name(str(code))}"
                    + (f" · {plural(len(grp), 'event')}" if stacked or len(grp) > 1 else "")
                )
        order = [i for _, grp in ev.groupby("country", sort=False) for i in grp.index]
        ev = ev.loc[order].reset_index(drop=True)
        y = ev["estimate"].astype(float).to_numpy()
        se = ev["se"].astype(float).to_numpy()
        single = ev["measure_group"].nunique() == 1
        log = single and _is_log(ev["measure_group"].unique())
        colour = y if single else y / se
        lim = float(np.nanmax(np.abs(colour))) if np.isfinite(colour).any() else 1.0
        lim = lim or 1.0
        cbar: dict[str, Any] = dict(
            title=dict(text="estimate" if single else "z", side="right"), len=0.7, thickness=14
        )
        if log:
            tv = np.linspace(-lim, lim, 5)
            cbar.update(
                tickvals=tv.tolist(),
                ticktext=[f"{math.exp(t):.3g}" for t in tv],
                title=dict(text="ratio per exposure increase", side="right"),
            )
        good = ev["level"].astype(float).ge(min_level).fillna(False).to_numpy()
        symbols = [
            (UP if d == "increase" else DOWN) + ("" if g else "-open")
            for d, g in zip(ev["direction"], good, strict=True)
        ]
        shown = np.exp(y) if log else y
        fig.add_trace(
            go.Scattergeo(
                lon=lon,
                lat=lat,
                mode="markers",
                name="events",
                marker=dict(
                    size=15,
                    symbol=symbols,
                    color=colour,
                    colorscale="RdBu_r",
                    cmin=-lim,
                    cmax=lim,
                    colorbar=cbar,
                    line=dict(color="#333333", width=1),
                ),
                customdata=np.stack(
                    [
                        ev["event_id"],
                        [country_name(c) for c in ev["country"]],
                        ev["change_date"],
                        ev["direction"],
                        ev["design"].fillna(""),
                        ev["level"].map(lambda v: "-" if pd.isna(v) else int(v)),
                        [_fmt(s) for s in shown],
                    ],
                    axis=-1,
                ),
                hovertemplate=(
                    "<b>%{customdata[0]}</b> · %{customdata[1]}<br>%{customdata[2]}: "
                    "exposure %{customdata[3]}d<br>design %{customdata[4]}, level "
                    "%{customdata[5]}<br>estimate %{customdata[6]}<extra></extra>"
                ),
            )
        )
        if label_text:
            fig.add_trace(
                go.Scattergeo(
                    lon=label_lon,
                    lat=label_lat,
                    mode="text",
                    text=label_text,
                    textposition="top center",
                    textfont=dict(size=12, color="#222222"),
                    hoverinfo="skip",
                    name="country labels",
                )
            )
    if focus:
        pts = country_points()
        keep = [pts[c] for c in focus if c in pts]
        lon_range, lat_range = map_extent([p[0] for p in keep], [p[1] for p in keep])
    else:
        lon_range, lat_range = map_extent(
            [x for x in lon if x is not None], [y for y in lat if y is not None]
        )
    fig.update_geos(
        visible=False,
        showframe=False,
        projection_type="natural earth",
        projection_rotation=dict(lon=(lon_range[0] + lon_range[1]) / 2, lat=0),
        lonaxis_range=lon_range,
        lataxis_range=lat_range,
        bgcolor="white",
    )
    fig.update_layout(
        height=520,
        margin=dict(l=0, r=0, t=40 if title else 0, b=0),
        title=dict(text=title, font=dict(size=14)) if title else None,
        showlegend=False,
        font=FONT,
    )
    return fig


# ----------------------------------------------------------------------------- timeline
def outcome_moves(events: pd.DataFrame) -> np.ndarray:
    """+1 when the outcome rose after the change, -1 when it fell, 0 for no change: the sign
    of the estimate aligned to an exposure increase, flipped for a decrease."""
    y = np.sign(events["estimate"].astype(float).to_numpy())
    flip = np.where(events["direction"].to_numpy() == "increase", 1.0, -1.0)
    return np.nan_to_num(y * flip).astype(int)


def event_timeline(
    events: pd.DataFrame,
    reversals: list[dict] | None = None,
    *,
    min_level: int = 2,
    max_events: int | None = None,
) -> go.Figure:
    """Events by change date per country: ▲/▼ = the exposure rose/fell, red/blue = the
    estimate aligned to an exposure increase says the outcome rises/falls with exposure (the
    map's colours; whether the outcome rose or fell after the change is in the hover), open =
    level below ``min_level``; events of one country joined in order, reversals
    (``ReplicationReport.reversals``) marked with an arrow. At most ``max_events`` events
    (the heaviest: :func:`chart_caps.timeline_events`); the title says how many are not
    drawn."""
    drawn = chart_caps.timeline_events(events, max_events)
    ev = drawn.rows
    if ev.empty:
        return empty_figure("no independent events")
    ev = ev.assign(
        _date=ev["change_date"].map(parse_change_date), _name=ev["country"].map(country_name)
    ).sort_values("_date")
    order = list(dict.fromkeys(ev["_name"]))
    fig = go.Figure()
    for name in order:
        grp = ev[ev["_name"] == name]
        if len(grp) > 1:
            fig.add_trace(
                go.Scatter(
                    x=grp["_date"],
                    y=grp["_name"],
                    mode="lines",
                    line=dict(color="#bbbbbb", width=2),
                    hoverinfo="skip",
                    showlegend=False,
                )
            )
    moves = outcome_moves(ev)
    good = ev["level"].astype(float).ge(min_level).fillna(False).to_numpy()
    # one colour meaning per page: the sign of the estimate aligned to an exposure increase,
    # as on the map (red: the outcome rises with exposure, blue: it falls)
    effect = np.sign(ev["estimate"].astype(float).to_numpy())
    colours = [ROSE if e > 0 else FELL if e < 0 else FLAT for e in np.nan_to_num(effect)]
    symbols = [
        (UP if d == "increase" else DOWN) + ("" if g else "-open")
        for d, g in zip(ev["direction"], good, strict=True)
    ]
    fig.add_trace(
        go.Scatter(
            x=ev["_date"],
            y=ev["_name"],
            mode="markers+text",
            name="events",
            showlegend=False,
            text=ev["event_id"],
            textposition="top center",
            textfont=dict(size=10),
            marker=dict(size=16, symbol=symbols, color=colours, line=dict(color=colours, width=2)),
            customdata=np.stack(
                [
                    ev["event_id"],
                    ev["change_date"],
                    ev["direction"],
                    ev["design"].fillna(""),
                    ev["level"].map(lambda v: "-" if pd.isna(v) else int(v)),
                    ["rose" if m > 0 else "fell" if m < 0 else "did not move" for m in moves],
                ],
                axis=-1,
            ),
            hovertemplate=(
                "<b>%{customdata[0]}</b> %{customdata[1]}<br>exposure "
                "%{customdata[2]}d; outcome %{customdata[5]}<br>design "
                "%{customdata[3]}, level %{customdata[4]}<extra></extra>"
            ),
        )
    )
    by_id = ev.drop_duplicates("event_id").set_index("event_id")
    for r in reversals or []:
        a, b = r.get("decrease_event"), r.get("increase_event")
        if a in by_id.index and b in by_id.index:
            back = r.get("outcome_moved_back")
            fig.add_annotation(
                x=by_id.at[b, "_date"],
                y=by_id.at[b, "_name"],
                ax=by_id.at[a, "_date"],
                ay=by_id.at[a, "_name"],
                xref="x",
                yref="y",
                axref="x",
                ayref="y",
                showarrow=True,
                arrowhead=2,
                arrowwidth=2,
                arrowcolor="#b35806",
                standoff=10,
                startstandoff=10,
            )
            fig.add_annotation(
                x=by_id.at[b, "_date"],
                y=by_id.at[b, "_name"],
                yshift=-24,
                showarrow=False,
                text="reversal: outcome moved back"
                if back
                else "reversal: outcome did not move back",
                font=dict(color="#b35806", size=11),
            )
    for label, sym, col in (
        ("exposure rose", UP, "#555555"),
        ("exposure fell", DOWN, "#555555"),
        ("outcome rises with exposure", "circle", ROSE),
        ("outcome falls with exposure", "circle", FELL),
        (f"open: level below {min_level}", "circle-open", "#555555"),
    ):
        fig.add_trace(
            go.Scatter(
                x=[None],
                y=[None],
                mode="markers",
                name=label,
                marker=dict(symbol=sym, color=col, size=11),
            )
        )
    fig.update_yaxes(
        categoryorder="array", categoryarray=order[::-1], showgrid=True, gridcolor="#eeeeee"
    )
    fig.update_xaxes(title="date of the exposure change", gridcolor="#eeeeee")
    if drawn.left_out:
        fig.add_annotation(
            text=f"{drawn.drawn} of {drawn.events} events drawn (the heaviest: smallest "
            f"standard error); {drawn.left_out} more not drawn: see the table of independent "
            "events",
            xref="paper",
            yref="paper",
            x=0,
            y=0,
            xanchor="left",
            yanchor="top",
            yshift=-48,
            showarrow=False,
            font=dict(size=12, color="#444444"),
        )
    fig.update_layout(
        height=max(260, 150 + 55 * len(order)) + (30 if drawn.left_out else 0),
        plot_bgcolor="white",
        margin=dict(l=10, r=10, t=30, b=70 if drawn.left_out else 40),
        font=FONT,
        legend=dict(orientation="h", y=1.02, yanchor="bottom", x=0),
    )
    return fig


# ----------------------------------------------------------------------------- triangulation
def design_family_chart(pools: pd.DataFrame) -> go.Figure:
    """Pooled estimate per design family (``ReplicationReport.by_design_family``): the strata
    compared for triangulation (``main``) dark, other strata grey, supporting-only families
    marked. Ratio measures back-transformed on a log axis."""
    if pools.empty:
        return empty_figure("no design family has an estimate at the counted level")
    p = pools.reset_index(drop=True)
    log = _is_log(p["measure_group"])
    f = np.exp if log else (lambda a: np.asarray(a, dtype=float))
    inc = p["increment"].fillna("").astype(str)
    labels = [
        f"<b>{fam}</b> (k={k})<br><span style='font-size:11px'>{mg} · {kind}"
        f"{' ' + i if i else ''}{' · supporting only' if sup else ''}</span>"
        for fam, k, mg, kind, i, sup in zip(
            p["design_family"],
            p["k"],
            p["measure_group"],
            p["estimate_kind"],
            inc,
            p["supporting"],
            strict=True,
        )
    ]
    est, lo, hi = (f(p[c].astype(float).to_numpy()) for c in ("estimate", "ci_lower", "ci_upper"))
    colours = [MAIN if m else OTHER for m in p["main"]]
    fig = go.Figure(
        go.Scatter(
            x=est,
            y=labels,
            mode="markers",
            marker=dict(symbol="diamond", size=14, color=colours),
            error_x=dict(
                type="data",
                symmetric=False,
                array=hi - est,
                arrayminus=est - lo,
                color="#555555",
                thickness=1.5,
                width=6,
            ),
            hovertemplate="%{y}<br>%{x:.3f}<extra></extra>",
            showlegend=False,
        )
    )
    _null_line(fig, log)
    if log:
        xs = [x for x in (*lo, *hi, 1.0) if math.isfinite(x) and x > 0]
        tv, tt = _log_ticks(min(xs), max(xs))
        fig.update_xaxes(
            type="log",
            tickvals=tv,
            ticktext=tt,
            title="pooled ratio per exposure increase (log axis)",
        )
    else:
        fig.update_xaxes(title="pooled estimate per exposure increase (analysis scale)")
    fig.update_yaxes(categoryorder="array", categoryarray=labels[::-1])
    fig.update_xaxes(gridcolor="#e5e5e5")
    fig.update_layout(
        height=120 + 52 * len(p),
        plot_bgcolor="white",
        font=FONT,
        margin=dict(l=10, r=20, t=20, b=50),
    )
    return fig


# ----------------------------------------------------------------------------- gap map
def gap_heatmap(cells: pd.DataFrame) -> go.Figure:
    """Exposure × outcome-group matrix coloured by gap state, each cell labelled with its
    independent events and studies (``GapReport.cells``)."""
    if cells.empty:
        return empty_figure("no exposure × outcome group within these filters")
    states = list(STATE_COLOURS)
    exposures = sorted(cells["exposure"].astype(str).unique())
    groups = sorted(cells["outcome_group"].astype(str).unique())
    idx = {s: i for i, s in enumerate(states)}
    z = np.full((len(exposures), len(groups)), np.nan)
    text = np.full(z.shape, "", dtype=object)
    hover = np.full(z.shape, "", dtype=object)
    for _, c in cells.iterrows():
        i, j = exposures.index(str(c["exposure"])), groups.index(str(c["outcome_group"]))
        z[i, j] = idx.get(str(c["state"]), np.nan)
        if int(c["events"]):
            text[i, j] = f"{int(c['events'])} ev · {int(c['studies'])} st"
            if str(c["state"]) == "replicated-in-part" and c.get("not_yet"):
                text[i, j] += f"<br>not yet: {c['not_yet']}"  # in part, never "settled"
        level = "-" if pd.isna(c["best_level"]) else int(c["best_level"])
        hover[i, j] = (
            f"<b>{c['exposure']} × {c['outcome_group']}</b><br>state {c['state']}"
            f"<br>status {c['status']}<br>{int(c['events'])} events, "
            f"{int(c['studies'])} studies, best level {level}<br>"
            f"{c.get('state_rule', '')}"
        )
    n = len(states)
    scale = []
    for i, s in enumerate(states):
        scale += [[i / n, STATE_COLOURS[s]], [(i + 1) / n, STATE_COLOURS[s]]]
    fig = go.Figure(
        go.Heatmap(
            z=z,
            x=groups,
            y=exposures,
            zmin=-0.5,
            zmax=n - 0.5,
            colorscale=scale,
            text=text,
            texttemplate="%{text}",
            textfont=dict(size=12),
            customdata=hover,
            hovertemplate="%{customdata}<extra></extra>",
            xgap=3,
            ygap=3,
            colorbar=dict(
                tickvals=list(range(n)), ticktext=states, title="state", thickness=14, len=0.9
            ),
        )
    )
    fig.update_xaxes(side="top", tickangle=-30 if len(groups) > 6 else 0, automargin=True)
    fig.update_yaxes(autorange="reversed", automargin=True)
    fig.update_layout(
        height=140 + 52 * len(exposures),
        plot_bgcolor="white",
        font=FONT,
        margin=dict(l=10, r=10, t=60, b=10),
    )
    return fig
