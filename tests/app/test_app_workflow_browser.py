"""The committee's workflow in a real browser, offline: upload a sheet with errors, see every
problem, fix it, upload again and import; two reviewers appraise the new study independently;
the chair records the consensus; the pooling page shows the pooled result of the new exposure.

Debian's Chromium through Playwright, every request to anything but the local dashboard aborted
and counted (none may be made). Screenshots of each step go to a temporary directory (their
path is printed). Without Chromium at /usr/bin/chromium this test FAILS; it never skips.

Outside route: the pooled estimate shown is checked against statsmodels' ``combine_effects``
(reference library) on the two estimates of the uploaded sheet (log RR, SE from the 95% CI:
(ln hi - ln lo) / (2 × 1.959964), Cochrane Handbook §6.3.2).
"""

from __future__ import annotations

import csv
import io
import math
import os
import re
from pathlib import Path

import numpy as np
import pytest
from statsmodels.stats.meta_analysis import combine_effects
from test_app_browser import shots
from writing_helpers import copy_db, sql

#: an invented exposure and two invented studies of it (demo records)
HEADER = (
    "study_id,citation,year,design,comparison,assignment_grade,pre_points,post_points,checks,"
    "demo,event_id,exposure,change_kind,change_direction,country,change_date,outcome,measure,"
    "estimate,ci_low,ci_high,primary"
)
ROWS = [
    'Ostrel2015,"Invented, Q. 2015, Demo J",2015,did,unexposed provinces,3,8,6,'
    "pre-trends;placebo-date;negative-control-outcome,yes,OST-CHL-2010,ostrelin,ban,decrease,"
    "CHL,2010-04,preterm birth,RR,0.84,0.74,0.95,yes",
    'Ostrel2018,"Madeup, R. 2018, Demo Epi",2018,did,unexposed regions,3,8,6,'
    "pre-trends;placebo-date,yes,OST-ARG-2012,ostrelin,ban,decrease,ARG,2012-09,"
    "preterm birth,RR,0.90,0.80,1.01,yes",
]
STUDY = "Ostrel2015"
CORE_AND_CHECKS = [
    "origin",
    "counterfactual",
    "design_checks",
    "falsification",
    "concurrent_changes",
]
DOMAIN_ORDER = [
    "origin",
    "counterfactual",
    "design_checks",
    "falsification",
    "timing",
    "concurrent_changes",
    "exposure_shift",
    "outcome_data",
    "inference",
    "transparency",
    "applicability",
]


def _sheet(year: str = "2015") -> bytes:
    rows = [ROWS[0].replace(",2015,did", f",{year},did"), ROWS[1]]
    return ("\n".join([HEADER, *rows]) + "\n").encode()


#: the committee of this walk-through: name -> role (invented people; one password each)
PEOPLE = {"admin": "admin", "ann": "editor", "bob": "reviewer", "chair": "editor"}
PASSWORD = "walk-through-1"


@pytest.fixture(scope="module")
def db(demo_db, tmp_path_factory) -> str:
    """A copy of the demo with accounts: the dashboard then asks everyone to sign in."""
    from exposhift.services.accounts import add_account
    from exposhift.services.setup import open_current

    path = copy_db(demo_db, tmp_path_factory.mktemp("workflow") / "evidence.db")
    for name, role in PEOPLE.items():
        store = open_current(path, user="admin")
        try:
            add_account(store, name, role, PASSWORD)
        finally:
            store.dispose()
    return path


@pytest.fixture(scope="module")
def server(db, tmp_path_factory):
    port = shots.free_port()
    proc = shots.start_dashboard(db, port, tmp_path_factory.mktemp("wf-log") / "dashboard.log")
    yield port
    shots.stop(proc)


class Steps:
    def __init__(self, page, port: int, out: Path):
        self.page, self.port, self.out, self.n = page, port, out, 0

    def go(self, path: str, heading: str, name: str = "admin") -> None:
        """Open ``path`` and sign in as ``name`` (a session lives in the browser tab, so every
        new page load asks again)."""
        self.page.goto(f"http://127.0.0.1:{self.port}/{path}")
        shots.wait_rendered(self.page, "Sign in")
        self.page.get_by_role("textbox", name="Name").fill(name)
        self.page.get_by_role("textbox", name="Password").fill(PASSWORD)
        self.page.get_by_role("button", name="Sign in").click()
        try:
            shots.wait_rendered(self.page, heading)
        except Exception:
            self.page.screenshot(path=str(self.out / "signin-failed.png"), full_page=True)
            raise
        assert self.wait_for(f"Signed in as {name}"), self.page.inner_text("body")[:1500]

    def settle(self, heading: str) -> None:
        shots.wait_rendered(self.page, heading)

    def shot(self, name: str) -> Path:
        self.n += 1
        f = self.out / f"{self.n:02d}-{name}.png"
        shots.full_height(self.page)
        self.page.screenshot(path=str(f), full_page=True)
        self.page.set_viewport_size({"width": 1400, "height": 1000})
        return f

    def wait_for(self, text: str, timeout: float = 90_000) -> bool:
        """True once ``text`` is visible (a write and the rerun after it take a while)."""
        try:
            self.page.get_by_text(text, exact=False).filter(visible=True).first.wait_for(
                timeout=timeout
            )
        except Exception:  # noqa: BLE001 - reported by the caller's assert
            return False
        return True

    def visible(self, text: str) -> bool:
        return self.page.get_by_text(text, exact=False).filter(visible=True).count() > 0

    def no_exception(self) -> None:
        assert self.page.locator('[data-testid="stException"]').count() == 0
        assert "Traceback" not in self.page.inner_text("body")


def _rate(steps: Steps, ratings: dict[str, int], heading: str) -> None:
    groups = steps.page.get_by_role("radiogroup").filter(visible=True)
    names = {3: "3 (strong)", 2: "2 (adequate)", 1: "1 (weak)", 0: "0 (fatal)"}
    for d, level in ratings.items():
        group = groups.nth(DOMAIN_ORDER.index(d))
        group.get_by_text(names[level], exact=True).click()
        steps.settle(heading)


def _upload(steps: Steps, name: str, content: bytes) -> None:
    steps.page.locator('input[type="file"]').set_input_files(
        files=[{"name": name, "mimeType": "text/csv", "buffer": content}]
    )
    steps.page.wait_for_timeout(1000)
    steps.settle("Upload a sheet")


def test_upload_fix_appraise_consensus_pool(browser, server, db, tmp_path_factory):
    keep = os.environ.get("EXPOSHIFT_WORKFLOW_SHOTS")  # a folder to keep them in, if given
    out = Path(keep) if keep else tmp_path_factory.mktemp("workflow-shots")
    out.mkdir(parents=True, exist_ok=True)
    print(f"screenshots: {out}")
    blocked: list[str] = []
    page = shots.offline_page(browser, server, blocked)
    steps = Steps(page, server, out)
    try:
        # 1. a sheet with an error: every problem listed, nothing written
        steps.go("upload", "Upload a sheet", "ann")
        _upload(steps, "ostrelin.csv", _sheet(year="20x5"))
        assert steps.wait_for("problem found; nothing was written")
        assert steps.visible("is not a whole number")  # the problem table is plain HTML
        steps.shot("upload-with-errors")
        assert (
            sql(db, "select count(*) from study where key like 'Ostrel%'", read_only=True)[0][0]
            == 0
        )
        # 2. fixed: the preview, then the import
        _upload(steps, "ostrelin.csv", _sheet())
        assert steps.wait_for("Preview: nothing written yet")
        steps.shot("upload-preview")
        page.get_by_role("button", name="Import these records").click()
        steps.settle("Upload a sheet")
        steps.shot("upload-imported")
        assert steps.wait_for("Imported ostrelin.csv")
        assert (
            sql(db, "select count(*) from study where key like 'Ostrel%'", read_only=True)[0][0]
            == 2
        )
        # 3. two independent appraisals
        for name, counterfactual in (("ann", 2), ("bob", 3)):
            steps.go(f"appraise?study={STUDY}", "Appraise a study", name)
            if name == "bob":
                assert steps.wait_for("1 of 2 independent appraisals in")
            ratings = dict.fromkeys(CORE_AND_CHECKS, 2) | {"counterfactual": counterfactual}
            _rate(steps, ratings, "Appraise a study")
            steps.shot(f"appraisal-form-{name}")
            page.get_by_role("button", name="Submit my independent appraisal").click()
            steps.settle("Appraise a study")
            assert steps.wait_for(f"recorded as {name}"), page.inner_text("body")[:2000]
            steps.no_exception()
        # 4. the chair: comparison, then consensus
        steps.go(f"appraise?study={STUDY}", "Appraise a study", "chair")
        page.get_by_role("tab", name="Comparison and consensus").click()
        steps.settle("Appraise a study")
        assert steps.wait_for("rows differ")
        steps.shot("comparison")
        _rate(steps, {"counterfactual": 2}, "Appraise a study")
        page.get_by_role("button", name="Record the consensus").click()
        steps.settle("Appraise a study")
        page.get_by_role("tab", name="Comparison and consensus").click()
        steps.settle("Appraise a study")
        assert steps.wait_for("Consensus recorded by chair")
        steps.shot("consensus")
        assert sql(
            db,
            "select a.overall from appraisal a join study s on s.id = a.study_id "
            "where s.key = ? and a.stage = 'consensus'",
            STUDY,
            read_only=True,
        ) == [(2,)]
        # 5. the pooled result of the new exposure
        steps.go("pooling?exposure=ostrelin&outcome=preterm%20birth", "Pooling")
        assert steps.wait_for("ostrelin → preterm birth")
        # the default evidence set is good events only (Ostrel2018 is not appraised yet): it
        # pools Ostrel2015 alone and says it left Ostrel2018 out; pool both with the next set
        assert steps.wait_for("pooled, k = 1")
        assert steps.visible("Estimates left out (1)")
        box = page.locator('[data-testid="stSelectbox"]').filter(has_text="Evidence set")
        box.locator("[role=combobox], input").first.click()
        page.get_by_role("option", name=re.compile("every appraisal level but fatal")).click()
        steps.settle("Pooling")
        assert steps.wait_for("pooled, k = 2")
        steps.shot("pooled")
        steps.no_exception()
        body = page.inner_text("body")
        rows = list(csv.DictReader(io.StringIO(_sheet().decode())))
        y = np.log([float(r["estimate"]) for r in rows])
        se = np.array(
            [
                (math.log(float(r["ci_high"])) - math.log(float(r["ci_low"]))) / (2 * 1.959964)
                for r in rows
            ]
        )
        ref = combine_effects(y, se**2, method_re="dl")
        # Q < df here, so tau^2 = 0 and the random-effects estimate equals the fixed-effect one;
        # the page aligns effects to an exposure increase by default, which inverts a ban's RR
        log_rr = ref.summary_frame().loc["fixed effect", "eff"]
        shown = [f"{math.exp(v):.2f}" for v in (log_rr, -log_rr)]
        assert any(re.search(rf"\b{v}\b", body) for v in shown), (shown, body[:3000])
    finally:
        page.close()
    assert blocked == []
