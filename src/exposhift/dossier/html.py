"""The dossier as one self-contained HTML file: jinja2 templates with autoescape on.

Offline by construction: the stylesheet, plotly.js (from the installed plotly package) and the
figures (with the map shapes as polygons) are inline; the page references no other file or
host. Every piece of user text reaches the page through autoescaped template variables, and the
figures' JSON is embedded with ``<``, ``>`` and ``&`` written as JSON unicode escapes so that no
text inside it can close the script element.
"""

from __future__ import annotations

import functools
import math
from typing import Any

import jinja2
import plotly.graph_objects as go
import plotly.io as pio

from exposhift.dossier.content import Dossier

_ENV = jinja2.Environment(
    loader=jinja2.PackageLoader("exposhift.dossier", "templates"),
    autoescape=jinja2.select_autoescape(default=True, default_for_string=True),
    undefined=jinja2.StrictUndefined,
    trim_blocks=True,
    lstrip_blocks=True,
    keep_trailing_newline=True,
)


def number(x: Any, digits: int = 3) -> str:
    """Two decimals between 0.1 and 100, else three significant digits; '-' when missing."""
    if x is None or isinstance(x, bool):
        return "-" if x is None else str(x)
    if isinstance(x, int):
        return str(x)
    try:
        v = float(x)
    except (TypeError, ValueError):
        return str(x)
    if not math.isfinite(v):
        return "-"
    if v == 0:
        return "0"
    return f"{v:.2f}" if 0.1 <= abs(v) < 100 else f"{v:.{digits}g}"


def percent(x: Any) -> str:
    return "-" if x is None else f"{100 * float(x):.0f}%"


_ENV.filters["num"] = number
_ENV.filters["pct"] = percent


@functools.lru_cache(maxsize=1)
def plotly_js() -> str:
    """plotly.min.js of the installed plotly package (inlined, never fetched)."""
    from plotly.offline import get_plotlyjs

    return get_plotlyjs()


def _script_json(fig: go.Figure) -> str:
    text = pio.to_json(fig, validate=False, pretty=False, engine="json")
    return text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")


def figure_json(figures: dict[str, go.Figure]) -> dict[str, str]:
    """name -> JSON of the figure for the page (width left to the page: responsive)."""
    out = {}
    for name, fig in figures.items():
        f = go.Figure(fig)
        f.layout.width = None
        out[name] = _script_json(f)
    return out


def render_html(d: Dossier, figures: dict[str, go.Figure]) -> str:
    """The whole HTML page of a dossier."""
    template = _ENV.get_template("dossier.html.j2")
    return template.render(
        d=d,
        figs=figure_json(figures),
        plotly_js=plotly_js(),
        css=_ENV.loader.get_source(_ENV, "dossier.css")[0],
    )
