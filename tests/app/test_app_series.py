"""The series page on the demo evidence base (Streamlit AppTest) and its pure chart builders.

The rate ratio shown is checked against a route outside the dashboard: the points read with
sqlite3 straight from the file and fitted with statsmodels' GLM (reference library)."""

from __future__ import annotations

import json
import sqlite3

import numpy as np
import pytest
import statsmodels.api as sm
from dashboard_helpers import ENTRY, values
from streamlit.testing.v1 import AppTest

from exposhift.series.its import design, seasonal_terms
from exposhift.series.periods import timeline


@pytest.fixture
def page(demo_db, monkeypatch) -> AppTest:
    monkeypatch.setenv("EXPOSHIFT_DB", demo_db)
    at = AppTest.from_file(str(ENTRY), default_timeout=120)
    at.run()
    at.switch_page("views/series.py")
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    assert not at.error, [e.value for e in at.error]
    return at


def _points(db: str, key: str):
    con = sqlite3.connect(db)
    try:
        rows = con.execute(
            "SELECT p.period, p.value, p.denominator FROM series_point p JOIN "
            "series s ON s.id = p.series_id WHERE s.key = ? ORDER BY p.period",
            (key,),
        ).fetchall()
    finally:
        con.close()
    return [r[0] for r in rows], np.array([r[1] for r in rows]), np.array([r[2] for r in rows])


def test_series_page_shows_fit_band_change_and_placebo_dates(page, demo_db):
    at = page
    assert at.selectbox(key="series_key").value == "Duarte1999-asthma"
    at.selectbox(key="series_model").set_value("poisson")
    at.selectbox(key="series_seasonal").set_value("fourier")
    at.number_input(key="series_h").set_value(12)
    at.run()
    assert not at.exception
    metrics = {m.label: m.value for m in at.metric}
    shown = float(metrics["Rate ratio (average over 12 periods)"])
    periods, y, d = _points(demo_db, "Duarte1999-asthma")
    tl = timeline(periods)
    x = design(tl, periods.index("1996-01"), seasonal_terms(tl, "fourier")[0])
    ref = sm.GLM(y, x, family=sm.families.Poisson(), offset=np.log(d)).fit()
    assert shown == pytest.approx(np.exp(ref.params[2] + 5.5 * ref.params[3]), abs=5e-4)
    charts = [json.loads(c.proto.spec) for c in at.get("plotly_chart")]
    names = [t.get("name") for t in charts[0]["data"]]
    assert "counterfactual 95% band" in names and "observed" in names
    observed = next(t for t in charts[0]["data"] if t.get("name") == "observed")
    assert values(observed["y"]) == pytest.approx((y / d).tolist())
    assert metrics["Placebo dates"] in ("passed", "failed", "inconclusive")
    assert len(values(charts[1]["data"][0]["y"])) > 0
    text = "\n".join(m.value for m in at.markdown) + "\n".join(w.value for w in at.warning)
    assert "support, never replace, expert judgement" in text
    assert "Negative control Duarte1999-injury" in text


def test_series_page_trend_example_fails_placebo_dates(page):
    at = page
    at.selectbox(key="series_key").set_value("Santos2009-mortality")
    at.run()
    assert not at.exception
    assert {m.label: m.value for m in at.metric}["Placebo dates"] == "failed"


def test_series_charts_are_pure_builders():
    import series_charts

    fig = {
        "series": "S",
        "periods": ["2001", "2002", "2003", "2004", "2005", "2006"],
        "observed": [5, 4, 3, 1, 0, -1],
        "fitted": [5, 4, 3, 1, 0, -1],
        "counterfactual": [5, 4, 3, 2, 1, 0],
        "counterfactual_low": [4, 3, 2, 1, 0, -1],
        "counterfactual_high": [6, 5, 4, 3, 2, 1],
        "change_at": "2004",
        "value_label": "mean",
        "placebo_labels": ["2001"],
        "placebo_effects": [0.2],
        "real_effect": -1.0,
        "effect_scale": "identity",
        "comparisons": {},
    }
    f = series_charts.series_plot(fig)
    band = f.data[0]
    assert list(band.x) == ["2004", "2005", "2006", "2006", "2005", "2004"]
    assert list(band.y) == [3, 2, 1, -1, 0, 1]  # upper limits forward, lower limits back
    assert f.layout.shapes[0].x0 == "2004"
    p = series_charts.placebo_plot(fig)
    assert list(p.data[0].y) == [0.2] and p.layout.shapes[0].y0 == -1.0
