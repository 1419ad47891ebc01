"""Time of each dashboard page on a large evidence base against its time on the demo.

Two evidence bases (SQLite): the invented demo (65 estimates) and an invented synthetic base
(exposhift.io.synthetic, every row flagged demo) of --estimates estimates. Each page runs in
Streamlit's AppTest (the page script as the browser would run it, without the browser):

- cold: every Streamlit cache emptied (results, the shared evidence snapshot, the store
  connection), then the page's first view in a new session;
- warm: the same session run again with nothing changed (the data version is the same, so every
  result comes from the caches).

Ratios are against the same page on the demo (the named baseline). Targets (issue 13): warm
rerun of every page <= 1.5x its demo time; cold first view <= 5x the demo. Best of --repeat,
in wall-clock and in CPU seconds (the machine may be shared: CPU time varies less). The
reading pages and the writing pages' first view (upload, records, appraise, downloads: their
forms before anything is submitted) are timed; the dashboard is served on loopback, as
``exposhift dashboard`` serves it, so no page stops at the sign-in form.

Usage: python benchmarks/bench_dashboard.py [--estimates 100000] [--repeat 2] [--big PATH]
[--pages overview pooling ...]
(--big: an existing synthetic evidence base to reuse instead of building one, ~1 min.)
One discarded run of every page on the demo first pays the one-off imports (and Streamlit's
own start-up), so no page's cold view includes them on either base.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
ENTRY = ROOT / "app" / "exposhift_app.py"
PAGES = ("overview", "studies", "pooling", "replication", "gaps", "series")
#: the writing pages' first view (their forms, before anything is submitted)
WRITE_PAGES = ("upload", "records", "appraise", "downloads")


def _clear() -> None:
    import streamlit as st

    st.cache_data.clear()
    st.cache_resource.clear()


def _view(page: str):
    from streamlit.testing.v1 import AppTest

    at = AppTest.from_file(str(ENTRY), default_timeout=600)
    at.switch_page(f"views/{page}.py")
    # the synthetic base has no appraisal: pool every level but fatal on both bases, so the
    # pooling page pools and draws its forest plot (good events only would leave nothing)
    at.session_state["pool_evidence"] = "not-fatal"
    return at


def _serve_on_loopback() -> None:
    """Serve as ``exposhift dashboard`` does, on 127.0.0.1: Streamlit's default address (every
    interface) would put every page behind the sign-in form, and the benchmark would time the
    form instead of the page."""
    from streamlit import config

    config.set_option("server.address", "127.0.0.1")


def _run(at) -> tuple[float, float]:
    """Wall-clock and CPU seconds of one run (CPU of the whole process: AppTest runs the page
    in a thread of its own; on a shared machine CPU time varies less than wall time)."""
    t, c = time.perf_counter(), time.process_time()
    at.run()
    took = (time.perf_counter() - t, time.process_time() - c)
    if at.exception:
        raise SystemExit(f"page failed: {[e.value for e in at.exception]}")
    if any(t.value.startswith("Sign in") for t in at.title):
        raise SystemExit("the page asked to sign in: the benchmark would time the form")
    return took


def measure(db: str, repeat: int, pages=PAGES) -> dict[str, tuple[float, float, float, float]]:
    """Page -> (cold, warm wall seconds, cold, warm CPU seconds), each best of ``repeat``."""
    os.environ["EXPOSHIFT_DB"] = db
    out = {}
    for page in pages:
        cold, warm = [], []
        for _ in range(repeat):
            _clear()
            at = _view(page)
            cold.append(_run(at))
            warm.extend(_run(at) for _ in range(2))
        out[page] = (
            min(w for w, _ in cold),
            min(w for w, _ in warm),
            min(c for _, c in cold),
            min(c for _, c in warm),
        )
    return out


def build_synthetic(n: int, work: Path) -> str:
    from exposhift.io.synthetic import synthetic_sheet
    from exposhift.services.importing import import_into
    from exposhift.services.setup import init_database, open_current

    sheet = work / "synthetic.csv"
    synthetic_sheet(n, prefix="BENCH").to_csv(sheet, index=False)
    url = f"sqlite:///{work / 'synthetic.db'}"
    init_database(url, user="bench")
    store = open_current(url, user="bench")
    try:
        import_into(store, sheet)
    finally:
        store.dispose()
    return str(work / "synthetic.db")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--estimates", type=int, default=100_000)
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--big", help="reuse this synthetic evidence base (SQLite file)")
    ap.add_argument(
        "--pages", nargs="+", choices=PAGES + WRITE_PAGES, default=list(PAGES + WRITE_PAGES)
    )
    args = ap.parse_args()
    sys.path.insert(0, str(ROOT / "app"))
    _serve_on_loopback()
    from exposhift.services.demo import build_demo

    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp)
        demo = work / "demo.db"
        build_demo(demo, user="bench")
        big = args.big or build_synthetic(args.estimates, work)
        measure(str(demo), 1, args.pages)  # warm-up: imports, discarded
        small = measure(str(demo), args.repeat, args.pages)
        large = measure(big, args.repeat, args.pages)
    print(f"dashboard pages, AppTest, best of {args.repeat}; baseline: the same page on the demo")
    for clock, first in (("wall-clock", 0), ("CPU", 2)):
        print(f"\n{clock} seconds")
        print(
            f"{'page':<12} {'demo cold':>10} {'demo warm':>10} {'big cold':>10} {'big warm':>10}"
            f" {'cold x':>7} {'warm x':>7}"
        )
        for page in args.pages:
            dc, dw = small[page][first : first + 2]
            bc, bw = large[page][first : first + 2]
            print(
                f"{page:<12} {dc:10.2f} {dw:10.2f} {bc:10.2f} {bw:10.2f}"
                f" {bc / dc:7.2f} {bw / dw:7.2f}"
            )
    print("targets: cold x <= 5, warm x <= 1.5")


if __name__ == "__main__":
    main()
