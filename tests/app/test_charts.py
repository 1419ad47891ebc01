"""The dashboard's figure builders (app/charts.py) on service output from the demo evidence base.

Each test checks that the traces carry the numbers the services returned, and where possible
against a reference outside exposhift: statsmodels' ``combine_effects`` for pooled estimates and
random-effects weights, scipy's t distribution for the prediction interval (Higgins, Thompson &
Spiegelhalter 2009, JRSS A 172:137: μ ± t(k−2)·√(τ² + SE²)), pycountry's ISO 3166-1 table for
the vendored map's country codes.
"""

from __future__ import annotations

import math

import charts
import numpy as np
import pandas as pd
import plotly.graph_objects as go
import pycountry
import pytest
from scipy import stats
from statsmodels.stats.meta_analysis import combine_effects

from exposhift import mapdata
from exposhift.replication.gaps import GAP_STATES
from exposhift.services.browse import pool_view
from exposhift.services.replicating import gap_report, replication_for


@pytest.fixture(scope="module")
def dl_view(demo_store):
    return pool_view(demo_store, "dravonil", "preterm birth", method="dl", ci="wald")


@pytest.fixture(scope="module")
def corvane(demo_store):
    return replication_for(demo_store, "corvane", "asthma emergency visits")


def _squares(fig: go.Figure) -> list:
    return [t for t in fig.data if getattr(t.marker, "symbol", None) == "square"]


# ----------------------------------------------------------------------------- forest plot
def test_forest_rows_diamond_and_prediction_interval(dl_view):
    rows, groups = dl_view.rows, dl_view.output.groups
    fig = charts.forest_plot(rows, groups)
    (sq,) = _squares(fig)
    np.testing.assert_allclose(sq.x, np.exp(rows["y"]), rtol=1e-12)
    np.testing.assert_allclose(
        sq.error_x.array, np.exp(rows["ci_upper"]) - np.exp(rows["y"]), rtol=1e-12
    )
    # the same numbers pooled by statsmodels (DerSimonian-Laird, method_re="chi2")
    ref = combine_effects(rows["y"].to_numpy(), rows["se"].to_numpy() ** 2, method_re="chi2")
    assert ref.q > len(rows) - 1  # Q above its df: statsmodels' DL tau2 is not truncated here
    diamond = next(t for t in fig.data if t.name == "pooled")
    assert diamond.x[1] == pytest.approx(math.exp(ref.mean_effect_re), rel=1e-8)
    lo, hi = ref.conf_int(use_t=False)[1]
    assert (diamond.x[0], diamond.x[2]) == pytest.approx((math.exp(lo), math.exp(hi)), rel=1e-8)
    # prediction interval, Higgins et al. 2009, from statsmodels' tau2 and SE
    k = len(rows)
    half = stats.t.ppf(0.975, k - 2) * math.sqrt(ref.tau2 + ref.sd_eff_w_re**2)
    pi = next(t for t in fig.data if t.name == "prediction interval")
    assert tuple(pi.x) == pytest.approx(
        (math.exp(ref.mean_effect_re - half), math.exp(ref.mean_effect_re + half)), rel=1e-6
    )
    # square sizes follow the random-effects weights (statsmodels weights_rel_re)
    np.testing.assert_allclose(rows["weight"], ref.weights_rel_re, rtol=1e-8)
    order = np.argsort(rows["weight"].to_numpy())
    assert np.all(np.diff(np.asarray(sq.marker.size)[order]) >= 0)
    assert fig.layout.xaxis.type == "log"


def test_forest_one_trace_per_group_with_labels(demo_store):
    view = pool_view(demo_store, "dravonil", "preterm birth", by=["design-family"])
    fig = charts.forest_plot(view.rows, view.output.groups)
    squares = _squares(fig)
    assert len(squares) == len(view.output.groups)
    assert [len(t.x) for t in squares] == [g["k_events"] for g in view.output.groups]
    headers = [a.text for a in fig.layout.annotations if a.text.startswith("<b>stratum:")]
    assert len(headers) == len(view.output.groups)
    assert all(
        str(g["design_family"]) in h for g, h in zip(view.output.groups, headers, strict=True)
    )
    ticks = list(fig.layout.yaxis.ticktext)
    assert all(any(str(s) in t for t in ticks) for s in view.rows["study_id"])


def test_forest_identity_scale_has_linear_axis(demo_store):
    view = pool_view(demo_store, "vellium", "mean birth weight")
    fig = charts.forest_plot(view.rows, view.output.groups)
    (sq,) = _squares(fig)
    np.testing.assert_allclose(sq.x, view.rows["y"], rtol=1e-12)
    assert fig.layout.xaxis.type != "log"
    assert "0 = no effect" in fig.layout.xaxis.title.text


def test_forest_nothing_pooled_is_a_message():
    fig = charts.forest_plot(pd.DataFrame(), [])
    assert fig.layout.annotations[0].text == "nothing was pooled"


# ----------------------------------------------------------------------------- map
def test_event_map_markers_colours_and_offline_layers(corvane):
    ev = corvane.events
    shown = ev[ev["represents_event"]]
    fig = charts.event_map(ev, min_level=2)
    (geo,) = [t for t in fig.data if t.type == "scattergeo" and t.name == "events"]
    assert len(geo.lon) == len(shown) == shown["event_id"].nunique()
    ids = list(geo.customdata[:, 0])
    assert sorted(ids) == sorted(shown["event_id"])
    by_id = shown.set_index("event_id")
    # one measure group: colour = aligned estimate on the analysis scale
    np.testing.assert_allclose(geo.marker.color, by_id.loc[ids, "estimate"], rtol=1e-12)
    for sym, eid in zip(geo.marker.symbol, ids, strict=True):
        row = by_id.loc[eid]
        assert sym.startswith("triangle-up" if row["direction"] == "increase" else "triangle-down")
        assert sym.endswith("-open") == (pd.isna(row["level"]) or row["level"] < 2)
    # every marker inside its own country's outline, none in the sea or a neighbour, and
    # several events of one country at distinct places (the vendored Natural Earth outlines)
    for lon, lat, eid in zip(geo.lon, geo.lat, ids, strict=True):
        code = by_id.loc[eid, "country"]
        assert mapdata.in_country(code, lon, lat), (eid, code, lon, lat)
        others = [c for c in set(shown["country"]) if c != code]
        assert not any(mapdata.in_country(c, lon, lat) for c in others)
    for code, n in shown["country"].value_counts().items():
        if n > 1:
            mine = [
                (x, y)
                for x, y, e in zip(geo.lon, geo.lat, ids, strict=True)
                if by_id.loc[e, "country"] == code
            ]
            assert len(set(mine)) == n, code
    # the frame holds every marker
    lo_x, hi_x = fig.layout.geo.lonaxis.range
    lo_y, hi_y = fig.layout.geo.lataxis.range
    assert all(lo_x <= x <= hi_x for x in geo.lon) and all(lo_y <= y <= hi_y for y in geo.lat)
    labels = next(t for t in fig.data if t.name == "country labels")
    assert min(labels.textfont.size, 99) >= 11  # readable on a printed page
    places = [t for t in fig.data if t.type == "choropleth" and t.name == "places"][0]
    assert set(places.locations) == set(shown["country"])
    for t in fig.data:
        if t.type == "choropleth":
            assert t.featureidkey == "id" and t.geojson is not None
    assert fig.layout.geo.visible is False
    # zoomed to the events (all in Europe), not the whole world
    assert fig.layout.geo.lonaxis.range[1] - fig.layout.geo.lonaxis.range[0] < 100


def test_event_map_focus_fits_named_countries(corvane):
    fig = charts.event_map(corvane.events, focus=["PRT"])
    lon = fig.layout.geo.lonaxis.range
    lon_prt = charts.country_points()["PRT"][0]
    assert lon[0] < lon_prt < lon[1] and lon[1] - lon[0] == pytest.approx(50.0)


def test_event_map_mixed_measures_colour_by_z():
    ev = pd.DataFrame(
        {
            "event_id": ["A", "B"],
            "country": ["PRT", "ESP"],
            "change_date": ["2000", "2001"],
            "direction": ["decrease", "increase"],
            "design": ["did", "its"],
            "level": [2.0, 1.0],
            "estimate": [0.2, -3.0],
            "se": [0.1, 1.5],
            "measure_group": ["ratio", "mean_difference"],
            "represents_event": [True, True],
        }
    )
    fig = charts.event_map(ev)
    (geo,) = [t for t in fig.data if t.type == "scattergeo" and t.name == "events"]
    np.testing.assert_allclose(geo.marker.color, [2.0, -2.0])
    assert geo.marker.colorbar.title.text == "z"


def test_vendored_countries_are_iso_codes_with_points_inside():
    shapes = charts.country_shapes()
    pts = charts.country_points()
    ids = [f["id"] for f in shapes["features"]]
    assert len(ids) == len(set(ids)) == 177
    # pycountry's ISO 3166-1 table; XKX (Kosovo) is user-assigned, two features have no code
    unknown = [i for i in ids if pycountry.countries.get(alpha_3=i) is None]
    assert sorted(unknown) == ["N. Cyprus", "Somaliland", "XKX"]
    for f in shapes["features"]:
        if f["id"] not in pts:
            continue
        x, y, _ = pts[f["id"]]
        assert any(_inside(x, y, poly) for poly in f["geometry"]["coordinates"]), f["id"]
    # from memory: mainland Portugal lies within 9.6-6.1 W, 36.9-42.2 N
    lon, lat, name = pts["PRT"]
    assert -9.6 < lon < -6.1 and 36.9 < lat < 42.2 and name == "Portugal"


def _inside(x: float, y: float, poly) -> bool:
    """Even-odd ray casting (common practice), longitudes unwrapped for shapes cut at the
    antimeridian."""
    rings = poly
    xs = [p[0] for r in rings for p in r]
    if max(xs) - min(xs) > 180:
        rings = [[(px + 360 if px < 0 else px, py) for px, py in r] for r in rings]
        x = x + 360 if x < 0 else x
    hits = 0
    for r in rings:
        for (x0, y0), (x1, y1) in zip(r, r[1:] + r[:1], strict=True):
            if (y0 > y) != (y1 > y) and x < (x1 - x0) * (y - y0) / (y1 - y0) + x0:
                hits += 1
    return hits % 2 == 1


def test_map_extent():
    assert charts.map_extent([], []) == ([-180.0, 180.0], [-58.0, 84.0])
    lon, lat = charts.map_extent([-8.0, 19.0], [39.0, 47.0])
    assert lon[0] < -8 and lon[1] > 19 and lon[1] - lon[0] >= 50
    assert lat[1] - lat[0] >= 30
    assert charts.map_extent([-120.0, 150.0], [0.0, 10.0])[0] == [-180.0, 180.0]


# ----------------------------------------------------------------------------- timeline
def test_timeline_directions_names_and_reversal(corvane):
    ev = corvane.events
    shown = ev[ev["represents_event"]]
    fig = charts.event_timeline(ev, corvane.reversals, min_level=2)
    pts = next(t for t in fig.data if t.name == "events")
    assert sorted(pts.text) == sorted(shown["event_id"])
    by_id = shown.set_index("event_id")
    for eid, colour, y in zip(pts.text, pts.marker.color, pts.y, strict=True):
        row = by_id.loc[eid]
        # the map's meaning: the aligned estimate's sign (outcome rises/falls with exposure)
        assert colour == (charts.ROSE if row["estimate"] > 0 else charts.FELL)
        assert y == charts.country_name(row["country"])  # names, not codes
    assert "Portugal" in list(pts.y)
    texts = [a.text for a in fig.layout.annotations if a.text]
    assert texts == ["reversal: outcome moved back"]
    assert corvane.reversals and corvane.reversals[0]["outcome_moved_back"] is True


def test_outcome_moves_and_dates():
    ev = pd.DataFrame(
        {
            "estimate": [0.1, 0.1, -0.2, 0.0],
            "direction": ["decrease", "increase", "decrease", "increase"],
        }
    )
    assert charts.outcome_moves(ev).tolist() == [-1, 1, 1, 0]
    assert charts.parse_change_date("1996") == pd.Timestamp("1996-07-01")
    assert charts.parse_change_date("2004-07") == pd.Timestamp("2004-07-15")
    assert charts.parse_change_date("2019-03-02") == pd.Timestamp("2019-03-02")
    assert charts.parse_change_date("") is None
    assert charts.parse_change_date("sometime") is None


# ----------------------------------------------------------------------------- designs
def test_design_family_chart(corvane):
    pools = corvane.by_design_family
    fig = charts.design_family_chart(pools)
    (t,) = fig.data
    np.testing.assert_allclose(t.x, np.exp(pools["estimate"].astype(float)), rtol=1e-12)
    np.testing.assert_allclose(
        np.asarray(t.x) + np.asarray(t.error_x.array),
        np.exp(pools["ci_upper"].astype(float)),
        rtol=1e-12,
    )
    assert [c == charts.MAIN for c in t.marker.color] == list(pools["main"])
    assert all(f in y for f, y in zip(pools["design_family"], t.y, strict=True))
    assert fig.layout.xaxis.type == "log"


# ----------------------------------------------------------------------------- gap map
def test_gap_heatmap_states_and_counts(demo_store):
    cells = gap_report(demo_store).cells
    fig = charts.gap_heatmap(cells)
    (h,) = fig.data
    states = list(charts.STATE_COLOURS)
    assert set(states) == set(GAP_STATES)
    for _, c in cells.iterrows():
        i, j = list(h.y).index(c["exposure"]), list(h.x).index(c["outcome_group"])
        assert states[int(h.z[i][j])] == c["state"]
        expected = f"{int(c['events'])} ev · {int(c['studies'])} st" if c["events"] else ""
        if c["state"] == "replicated-in-part":  # never reads as settled: says what is missing
            expected += f"<br>not yet: {c['not_yet']}"
            assert c["not_yet"]
        assert h.text[i][j] == expected
    assert list(h.colorbar.ticktext) == states


def test_overview_bars(demo_store):
    from exposhift.services.browse import evidence_overview

    o = evidence_overview(demo_store)
    fig = charts.pair_bars(o.pairs)
    assert list(fig.data[0].x) == list(o.pairs["studies"].iloc[::-1])
    assert "1 study · 1 event" in list(fig.data[0].text)
    assert charts.plural(2, "study", "studies") == "2 studies"
    fam = charts.count_bars(o.by_design_family, "design_family", "studies", "t")
    assert sum(fam.data[0].x) == o.counts["studies"]


def test_event_map_several_events_in_small_neighbouring_countries():
    """Four events in the Netherlands and three in Belgium: each marker inside its own
    country (Natural Earth outlines), at distinct places, and the country labelled."""
    n = {"NLD": 4, "BEL": 3, "LUX": 2}
    codes = [c for c, k in n.items() for _ in range(k)]
    ev = pd.DataFrame(
        {
            "event_id": [f"E{i}" for i in range(len(codes))],
            "country": codes,
            "change_date": ["2000"] * len(codes),
            "direction": ["decrease"] * len(codes),
            "design": ["did"] * len(codes),
            "level": [3.0] * len(codes),
            "estimate": np.linspace(-0.2, 0.2, len(codes)),
            "se": [0.1] * len(codes),
            "measure_group": ["ratio"] * len(codes),
            "represents_event": [True] * len(codes),
        }
    )
    fig = charts.event_map(ev)
    (geo,) = [t for t in fig.data if t.name == "events"]
    placed = list(zip(geo.lon, geo.lat, geo.customdata[:, 0], strict=True))
    by_id = ev.set_index("event_id")["country"]
    for x, y, eid in placed:
        if by_id[eid] != "LUX":  # too small at 1:110m for two places: stacked on its point
            assert mapdata.in_country(by_id[eid], x, y), (eid, x, y)
    for code in ("NLD", "BEL"):
        mine = {(x, y) for x, y, e in placed if by_id[e] == code}
        assert len(mine) == n[code]
    labels = next(t for t in fig.data if t.name == "country labels")
    assert any("Netherlands" in t and "4 events" in t for t in labels.text)
    assert any("2 events" in t for t in labels.text)  # the stacked pair says how many


def test_forest_draws_at_most_the_heaviest_rows_and_says_how_many_more():
    k = 100
    rows = pd.DataFrame(
        {
            "group": [0] * k,
            "group_label": ["ratio · change"] * k,
            "estimate_uid": [f"u{i}" for i in range(k)],
            "study_id": [f"S{i}" for i in range(k)],
            "event_id": [f"E{i}" for i in range(k)],
            "country": ["NLD"] * k,
            "change_date": ["2001-01"] * k,
            "change_kind": ["ban"] * k,
            "design": ["its"] * k,
            "level": [2.0] * k,
            "measure": ["RR"] * k,
            "reported": [0.8] * k,
            "reported_low": [0.7] * k,
            "reported_high": [0.9] * k,
            "subgroup": [None] * k,
            "y": np.full(k, 0.22),
            "se": np.full(k, 0.05),
            "ci_lower": np.full(k, 0.12),
            "ci_upper": np.full(k, 0.32),
            "weight": np.arange(1, k + 1) / np.arange(1, k + 1).sum(),
            "scale": ["log"] * k,
            "k_units": [1] * k,
        }
    )
    group = {"scale": "log", "estimate": 0.22, "ci_lower": 0.2, "ci_upper": 0.24, "k": k}
    fig = charts.forest_plot(rows, [group], max_rows=40)
    (squares,) = [t for t in fig.data if t.marker and t.marker.symbol == "square"]
    assert len(squares.x) == 40
    shown = set(squares.customdata[:, 1])
    assert shown == {f"E{i}" for i in range(60, 100)}  # the 40 heaviest events
    ticks = " ".join(fig.layout.yaxis.ticktext)
    assert "60 more events" in ticks
    notes = " ".join(a.text for a in fig.layout.annotations)
    assert "RR 0.80 [0.70, 0.90] after a ban" in notes  # as reported, beside the aligned value
    assert "1.25 [1.13, 1.38]" in notes  # exp(0.22), exp(0.12), exp(0.32)
