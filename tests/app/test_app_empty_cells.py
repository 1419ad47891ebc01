"""No page shows ``None``, ``nan`` or a snake_case column title, on the demo evidence base.

Every page of the dashboard is run with AppTest as a signed-in administrator (who sees every
form), also with a choice that has empty number cells (the pooling page on an exposure and
outcome with fewer than 3 events, where the prediction interval does not exist). Each rendered
dataframe and table is scanned: a text cell may not read ``None``/``nan``/``NaN``/``<NA>``; a
missing number is allowed only when the table is drawn with an empty placeholder (Streamlit
draws a missing value as "None" unless told otherwise: the ``placeholder`` argument of
``st.dataframe``); no column title is snake_case. Markdown and captions may not contain the
words ``None`` or ``nan``.
"""

from __future__ import annotations

import json
import re

import pandas as pd
import pytest
from writing_helpers import open_page

from exposhift.replication.settings import DEFAULTS
from exposhift.services.browse import evidence_overview, pool_view

PAGES = (
    "overview",
    "studies",
    "pooling",
    "replication",
    "gaps",
    "series",
    "upload",
    "records",
    "appraise",
    "downloads",
)
SNAKE = re.compile(r"^[a-z0-9]+(_[a-z0-9]+)+$")
EMPTY_WORDS = re.compile(r"\b(None|nan|NaN)\b")
BAD_TEXT = {"None", "nan", "NaN", "<NA>", "NaT"}


def _frames(at):
    """(where, frame, placeholder, titles) of every dataframe and table the page drew; titles:
    the column titles a column configuration gives (what the browser shows instead)."""
    for d in at.dataframe:
        proto = d.proto
        shown = proto.placeholder if proto.HasField("placeholder") else None
        config = json.loads(proto.columns) if proto.columns else {}
        titles = {k: v["label"] for k, v in config.items() if v.get("label")}
        yield f"dataframe with columns {list(d.value.columns)[:3]}", d.value, shown, titles
    for t in at.table:
        yield "table", t.value, None, {}


def _bad_cells(where: str, frame: pd.DataFrame, placeholder, titles: dict) -> list[str]:
    out = []
    value = frame.reset_index() if frame.index.name else frame
    for c in value.columns:
        title = titles.get(str(c), str(c))
        if SNAKE.match(title):
            out.append(f"{where}: snake_case column title {title!r}")
        col = value[c]
        missing = col.isna()
        if missing.any() and placeholder in (None, "None"):
            out.append(f"{where}: column {title!r} has a missing value drawn as 'None'")
        text = col[~missing].astype(str).str.strip()
        bad = text[text.isin(BAD_TEXT)]
        if len(bad):
            out.append(f"{where}: column {title!r} shows {bad.iloc[0]!r}")
    return out


def _scan(at) -> list[str]:
    problems: list[str] = []
    for where, frame, placeholder, titles in _frames(at):
        problems += _bad_cells(where, frame, placeholder, titles)
    for kind in ("markdown", "caption", "info", "warning", "success", "error"):
        for el in getattr(at, kind):
            found = EMPTY_WORDS.search(str(el.value))
            if found:
                problems.append(f"{kind}: {found.group(0)!r} in {str(el.value)[:120]!r}")
    return problems


@pytest.fixture
def on_demo(demo_db, monkeypatch) -> str:
    monkeypatch.setenv("EXPOSHIFT_DB", demo_db)
    return demo_db


@pytest.mark.parametrize("page", PAGES)
def test_no_page_shows_none_nan_or_snake_case(on_demo, page):
    at = open_page(page, "ann", "admin")
    assert _scan(at) == []


def test_pooling_with_fewer_than_three_events_shows_empty_cells(on_demo, demo_store):
    """A pair whose pooled group has no prediction interval (fewer than 3 events)."""
    pairs = evidence_overview(demo_store).pairs
    small = None
    for exposure, outcome in pairs[["exposure", "outcome"]].itertuples(index=False):
        view = pool_view(demo_store, exposure, outcome, min_level=DEFAULTS.min_level)
        groups = view.output.groups
        if groups and any(g["pi_lower"] is None for g in groups):
            small = (exposure, outcome)
            break
    assert small is not None, "the demo should have a pooled pair with fewer than 3 events"
    at = open_page("pooling", "ann", "admin")
    at.selectbox(key="pool_exposure").set_value(small[0])
    at.run()
    at.selectbox(key="pool_outcome").set_value(small[1])
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    table = next(d for d in at.dataframe if "PI low" in d.value.columns)
    assert table.value["PI low"].isna().any()  # the empty cell is there...
    assert _scan(at) == []  # ...and drawn empty
