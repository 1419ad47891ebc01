"""The HTML dossier in headless Chromium: user text shown as text and never run; the page opens
offline with zero requests to any other host. Needs Chromium at /usr/bin/chromium (these tests
fail, never skip, without it)."""

from __future__ import annotations

import pytest
from dossier_helpers import CHROMIUM, CHROMIUM_ARGS, require_chromium
from markupsafe import escape

from exposhift.io.synthetic import synthetic_sheet
from exposhift.services.dossier import build_dossier
from exposhift.services.importing import import_into

PAYLOAD = '<script>alert(1)</script><b onmouseover="alert(2)">bold</b>&amp;'
#: every free-text column of the extraction sheet, keys and names included
TEXT_FIELDS = (
    "study_id",
    "event_id",
    "citation",
    "doi",
    "comparison",
    "population",
    "data_source",
    "exposure",
    "outcome",
    "outcome_group",
    "area",
    "family",
    "change_unit",
    "subgroup",
    "time_window",
)


def _open(path, routes: list[str]):
    """Open a file in headless Chromium; every request that is not the file is blocked and
    counted in ``routes``; returns (playwright, browser, page, alerts, errors)."""
    from playwright.sync_api import sync_playwright

    require_chromium()
    pw = sync_playwright().start()
    browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
    page = browser.new_page(viewport={"width": 1100, "height": 900})
    alerts: list[str] = []
    errors: list[str] = []

    def route(r):
        if r.request.url == path.as_uri():
            r.continue_()
        else:
            routes.append(r.request.url)
            r.abort()

    page.route("**/*", route)
    page.on("dialog", lambda d: (alerts.append(d.message), d.dismiss()))
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.goto(path.as_uri())
    page.wait_for_function("document.querySelectorAll('.js-plotly-plot').length > 0", timeout=30000)
    page.wait_for_timeout(500)
    return pw, browser, page, alerts, errors


@pytest.fixture(scope="module")
def hostile_html(tmp_path_factory):
    """A dossier of an evidence base whose every user-text field holds script and HTML."""
    from exposhift.services.setup import init_database, open_current

    tmp = tmp_path_factory.mktemp("hostile")
    sheet = synthetic_sheet(60, prefix="ESC")
    for f in TEXT_FIELDS:
        sheet[f] = sheet[f].where(sheet[f] == "", sheet[f] + PAYLOAD)
    sheet.to_csv(tmp / "sheet.csv", index=False)
    url = f"sqlite:///{tmp / 'e.db'}"
    init_database(url, user="t")
    store = open_current(url, user="t")
    try:
        import_into(store, tmp / "sheet.csv")
        exposure = str(sheet["exposure"].iloc[0])
        build_dossier(store, exposure, out=tmp / "d", formats="html")
    finally:
        store.dispose()
    return tmp / "d" / "dossier.html"


def test_user_text_is_escaped_in_the_source(hostile_html):
    text = hostile_html.read_text(encoding="utf-8")
    assert PAYLOAD not in text
    assert "<script>alert" not in text and 'onmouseover="alert' not in text
    # shown as text: escaped the way jinja2's autoescape (markupsafe) escapes, once per place
    # the page shows a user field (citation, population, comparison, keys, names, ...)
    assert text.count(str(escape(PAYLOAD))) > 100
    # one script element of ours for plotly.js and one for the figures, nothing else
    assert text.count("<script>") == 2


def test_user_text_shows_as_text_and_runs_nothing(hostile_html):
    outside: list[str] = []
    pw, browser, page, alerts, errors = _open(hostile_html, outside)
    try:
        assert alerts == [] and errors == []
        assert page.locator("b[onmouseover]").count() == 0
        body = page.inner_text("body")
        assert "<script>alert(1)</script>" in body  # the citation etc. as plain text
        # figure labels too: plotly shows the entity-escaped text as the characters
        svg_text = page.evaluate(
            "Array.from(document.querySelectorAll('.js-plotly-plot text'))"
            ".map(t => t.textContent).join('\\n')"
        )
        assert "<script>alert(1)</script>" in svg_text
        page.hover("#study-table")
        assert alerts == []
    finally:
        browser.close()
        pw.stop()
    assert outside == []


def test_demo_dossier_opens_offline(demo_store, tmp_path):
    r = build_dossier(demo_store, "dravonil", out=tmp_path / "d", formats="html")
    path = tmp_path / "d" / "dossier.html"
    outside: list[str] = []
    pw, browser, page, alerts, errors = _open(path, outside)
    try:
        n_divs = page.locator("div.figure").count()
        n_plots = page.locator(".js-plotly-plot").count()
        map_paths = page.locator("#fig-map path").count()
        assert page.locator("section.page").count() >= 6
        # printable: a print stylesheet with page breaks between sections
        breaks = page.evaluate("""() => { const out = [];
            for (const sheet of document.styleSheets) for (const rule of sheet.cssRules)
              if (rule.media && rule.media.mediaText.includes('print'))
                for (const r of rule.cssRules) out.push(r.cssText);
            return out.join(' '); }""")
    finally:
        browser.close()
        pw.stop()
    assert outside == [], f"requests to other hosts: {outside}"
    assert errors == [] and alerts == []
    assert n_divs == n_plots >= 10  # every figure drawn by the inline plotly.js
    assert map_paths > 50  # the vendored country shapes, inline
    assert "break-before: page" in breaks
    assert r.demo
