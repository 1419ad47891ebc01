"""exposhift dashboard: entry point (``exposhift dashboard`` runs ``streamlit run`` on it).

1. page setup, the sign-in gate (``signin.py``: the form, when the session must sign in) and
navigation; 2. the sidebar every page shares (evidence base, demo notice, who is signed in,
reload); 3. run the chosen page. Pages live in ``views/``; they get
data from ``data.py`` (cached service calls) and figures from ``charts.py``. The directory is
not called ``pages/``: Streamlit treats a ``pages/`` directory beside the entry script as a
legacy multipage app, and a first request for a page URL would then run that page without
this script (no sidebar, no page setup).
"""

from __future__ import annotations

import sys
from pathlib import Path

import streamlit as st

sys.path.insert(0, str(Path(__file__).resolve().parent))

import signin  # noqa: E402
import ui  # noqa: E402

import data  # noqa: E402

# 1. page setup and navigation ---------------------------------------------------------------
st.set_page_config(page_title="exposhift", layout="wide", initial_sidebar_state="expanded")
PAGES = [
    st.Page("views/overview.py", title="Evidence at a glance", url_path="overview", default=True),
    st.Page("views/studies.py", title="Studies and appraisals", url_path="studies"),
    st.Page("views/pooling.py", title="Pooling", url_path="pooling"),
    st.Page(
        "views/replication.py", title="Replication across place and time", url_path="replication"
    ),
    st.Page("views/gaps.py", title="Gap map", url_path="gaps"),
    st.Page("views/series.py", title="Extracted series", url_path="series"),
    st.Page("views/upload.py", title="Upload a sheet", url_path="upload"),
    st.Page("views/records.py", title="Add or correct records", url_path="records"),
    st.Page("views/appraise.py", title="Appraise a study", url_path="appraise"),
    st.Page("views/downloads.py", title="Downloads", url_path="downloads"),
]
# the sign-in gate: the form when this session must sign in. The pages are registered either
# way (hidden until signed in), so the page and query asked for in the address are kept
allowed = False
with ui.guard():
    allowed = signin.gate()
page = st.navigation(PAGES, position="sidebar" if allowed else "hidden")
if not allowed:
    st.stop()

# 2. sidebar ---------------------------------------------------------------------------------
db = data.db_target()
with st.sidebar:
    st.markdown("### exposhift")
    st.caption(f"Evidence base: `{data.db_label(db)}`")
    with ui.guard():
        summary = data.summary(db)
    if summary.all_demo:
        st.markdown(":blue-background[**Invented demo data**]")
    elif summary.any_demo:
        st.markdown(":blue-background[**Contains invented demo records**]")
    signin.sidebar_box()
    if st.button(
        "Reload data",
        help="Pages follow the evidence base by themselves (every write moves its data "
        "version); this forgets every cached result and reads everything again.",
    ):
        data.clear()
        st.rerun()
    if not st.get_option("server.enableStaticServing"):
        st.caption(
            "Static file serving is off: maps may stay blank. Start the dashboard with "
            "`exposhift dashboard`."
        )

# 3. the chosen page -------------------------------------------------------------------------
page.run()
