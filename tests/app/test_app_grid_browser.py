"""The estimate grid in a real browser, offline: a bad cell typed into the grid is listed with
its grid row and field and nothing is written; reloaded and corrected, the check says what
would change and the save writes it (read back with the standard library's sqlite3).

Debian's Chromium through Playwright, every request to anything but the local dashboard aborted
and counted (none may be made). Screenshots of the grid, the problem list, the check and the
saved grid go to a temporary directory (printed), or to ``EXPOSHIFT_GRID_SHOTS``. Without
Chromium at /usr/bin/chromium this test FAILS; it never skips.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from test_app_browser import shots
from writing_helpers import copy_db, sql

STUDY = "Gallagher2010"
#: its second row (rows ordered by key): RR 0.83 (0.77 to 0.9)
ROW2 = "Gallagher2010|DRV-AUS-2003|preterm birth|RR|change||0-2 years after ban"
ESTIMATE_COLUMN = 7  # columns right of "Event key": outcome ... per unit, then Estimate


@pytest.fixture(scope="module")
def db(demo_db, tmp_path_factory) -> str:
    """A copy of the demo without accounts: a local session writes as the OS user."""
    return copy_db(demo_db, tmp_path_factory.mktemp("grid") / "evidence.db")


@pytest.fixture(scope="module")
def server(db, tmp_path_factory):
    port = shots.free_port()
    proc = shots.start_dashboard(db, port, tmp_path_factory.mktemp("grid-log") / "dashboard.log")
    yield port
    shots.stop(proc)


def _wait_for(page, text: str, timeout: float = 90_000) -> None:
    page.get_by_text(text, exact=False).filter(visible=True).first.wait_for(timeout=timeout)


def _open_grid(page, server):
    """The records page's grid tab with the study chosen: (its panel, the grid)."""
    page.goto(f"http://127.0.0.1:{server}/records")
    shots.wait_rendered(page, "Add or correct records")
    page.get_by_role("tab", name="Estimates in a grid").click()
    panel = page.locator('[role="tabpanel"]:visible').first
    panel.locator('[data-testid="stSelectbox"]').first.click()
    page.keyboard.type(STUDY)
    page.keyboard.press("Enter")
    _wait_for(page, f"estimates of study {STUDY}")
    _idle(page)
    return panel, panel.locator('[data-testid="stDataFrame"]').first


def _idle(page, timeout: float = 90_000) -> None:
    """Wait until Streamlit has finished the rerun an edit or a click started (its status
    widget gone, twice, a second apart: a rerun can start a moment after the event)."""
    for _ in range(2):
        page.wait_for_timeout(1000)
        page.wait_for_function(
            "() => !document.querySelector('[data-testid=\"stStatusWidget\"]')", timeout=timeout
        )


def _type_estimate(page, grid, value: str) -> None:
    """Select row 1's first cell, move to row 2's Estimate cell with the keyboard, type."""
    box = grid.bounding_box()
    page.mouse.click(box["x"] + 60, box["y"] + 35 + 17)  # below the header: row 1, Event key
    page.wait_for_timeout(300)
    page.keyboard.press("ArrowDown")
    for _ in range(ESTIMATE_COLUMN - 1):
        page.keyboard.press("ArrowRight")
    page.keyboard.press("Enter")
    page.wait_for_timeout(800)  # the cell editor opens (slowly on a loaded machine)
    page.keyboard.press("Control+a")
    page.keyboard.type(value)
    page.wait_for_timeout(300)
    page.keyboard.press("Enter")
    _idle(page)  # the edit reaches the server before the next click (slow on a loaded machine)


def test_grid_bad_cell_listed_then_fixed_and_saved(browser, server, db, tmp_path_factory):
    keep = os.environ.get("EXPOSHIFT_GRID_SHOTS")
    out = Path(keep) if keep else tmp_path_factory.mktemp("grid-shots")
    out.mkdir(parents=True, exist_ok=True)
    print(f"screenshots: {out}")
    blocked: list[str] = []
    page = shots.offline_page(browser, server, blocked, width=1500)
    panel, grid = _open_grid(page, server)
    page.screenshot(path=str(out / "01-grid.png"), full_page=True)
    audit = sql(db, "select count(*) from audit_entry", read_only=True)[0][0]

    _type_estimate(page, grid, "abc")
    panel.get_by_role("button", name="Check").click()
    _wait_for(page, "problem found; nothing was written")
    table = page.locator('[data-testid="stTable"]').filter(visible=True).first.inner_text()
    assert "grid row 2" in table and "Estimate" in table and "not a number" in table, table
    page.screenshot(path=str(out / "02-problems.png"), full_page=True)
    assert sql(db, "select count(*) from audit_entry", read_only=True)[0][0] == audit

    panel.get_by_role("button", name="Reload").click()  # a fresh grid: the stored values
    _wait_for(page, "Check the grid to see what saving would do")
    _idle(page)
    # the grid keeps its cell cursor across the reload; open the page afresh so the keyboard
    # walk to row 2 starts from the same place as the first time
    panel, grid = _open_grid(page, server)
    _type_estimate(page, grid, "0.84")
    page.screenshot(path=str(out / "03-typed.png"), full_page=True)
    panel.get_by_role("button", name="Check").click()
    try:
        _wait_for(page, "Checked: no problems", timeout=30_000)
    except Exception:
        page.screenshot(path=str(out / "03-failed.png"), full_page=True)
        raise
    assert page.get_by_text("change 1 and leave 2").filter(visible=True).count() == 1
    page.screenshot(path=str(out / "03-checked.png"), full_page=True)
    page.get_by_role("button", name="Save the estimates").click()
    _wait_for(page, "Estimates saved")
    page.screenshot(path=str(out / "04-saved.png"), full_page=True)
    assert sql(db, "select point, version from estimate where key = ?", ROW2, read_only=True) == [
        (0.84, 2)
    ]
    assert page.locator('[data-testid="stException"]').count() == 0
    assert blocked == []
