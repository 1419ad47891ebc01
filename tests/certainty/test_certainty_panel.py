"""The dashboard's certainty panel on the pooling and replication pages (Streamlit AppTest on
the demo): the recorded certainty and the E-value beside the pooled result. The E-value shown
is checked against the formula of VanderWeele & Ding 2017 written out in the test."""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from streamlit.testing.v1 import AppTest

ENTRY = Path(__file__).resolve().parents[2] / "app" / "exposhift_app.py"


def _texts(at: AppTest) -> str:
    return "\n".join([m.value for m in at.markdown] + [c.value for c in at.caption])


@pytest.mark.parametrize("page,prefix", [("pooling", "pool"), ("replication", "rep")])
def test_panel_shows_recorded_certainty_and_e_value(demo_db, demo_store, monkeypatch, page, prefix):
    monkeypatch.setenv("EXPOSHIFT_DB", str(demo_db))
    at = AppTest.from_file(str(ENTRY), default_timeout=180)
    at.run()
    at.switch_page(f"views/{page}.py")
    at.run()
    boxes = {s.key: s for s in at.selectbox}
    ex_key = next(k for k in boxes if k and k.endswith("exposure"))
    at.selectbox(key=ex_key).set_value("dravonil").run()
    out_key = next(k for k in {s.key for s in at.selectbox} if k and k.endswith("outcome"))
    at.selectbox(key=out_key).set_value("preterm birth").run()
    assert not at.exception, [e.value for e in at.exception]
    text = _texts(at)
    assert "**Certainty: limited**" in text and "demo committee (invented)" in text
    from exposhift.services.pooling import pool_evidence

    groups = pool_evidence(demo_store, "dravonil", "preterm birth").groups
    rr = max(groups, key=lambda g: g["k_events"])["natural"]["estimate"]
    e = rr + math.sqrt(rr * (rr - 1))
    assert f"E-value {e:.2f}" in text
    assert "unmeasured confounding only" in text
