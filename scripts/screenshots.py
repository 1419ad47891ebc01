"""Screenshots of every dashboard page, taken offline in headless Chromium.

Builds the invented demo evidence base (or uses ``--db``), starts ``exposhift dashboard`` on a
free localhost port, opens each page with every request to anything but localhost aborted, and
saves one full-page PNG per page. Prints the files written, any request that was blocked (there
should be none: the dashboard needs no internet) and any error box found on a page.

    python scripts/screenshots.py [--out /tmp/shots] [--db FILE] [--width 1400]
"""

from __future__ import annotations

import argparse
import os
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking"]
#: screenshot name -> (url path and query, heading that must be visible once it has rendered)
PAGES = {
    "overview": ("", "Evidence at a glance"),
    "studies": ("studies", "Studies and appraisals"),
    "pooling": ("pooling", "Pooling"),
    "pooling-by-family": (
        "pooling?exposure=vellium&outcome=child+respiratory+admissions",
        "Pooling",
    ),
    "replication": ("replication", "Replication across place and time"),
    "replication-reversal": (
        "replication?exposure=corvane&outcome=asthma+emergency+visits",
        "Replication across place and time",
    ),
    "replication-europe": ("replication", "Replication across place and time"),
    "gaps": ("gaps", "Gap map"),
}
#: screenshot name -> label of a control to click before the screenshot
CLICKS = {"replication-europe": "Europe"}
ERROR_SELECTORS = '[data-testid="stException"], [data-testid="stAlertContentError"]'


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def exposhift_exe() -> str:
    return str(Path(sys.executable).with_name("exposhift"))


def start_dashboard(db: str, port: int, log_path: Path) -> subprocess.Popen:
    """``exposhift dashboard`` in a subprocess; returns once the server answers."""
    log = open(log_path, "wb")  # noqa: SIM115 - closed by the caller through the process
    proc = subprocess.Popen(
        [exposhift_exe(), "dashboard", "--db", db, "--port", str(port)],
        stdout=log,
        stderr=subprocess.STDOUT,
    )
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            raise RuntimeError(f"dashboard exited with {proc.returncode}; see {log_path}")
        try:
            with urllib.request.urlopen(f"http://127.0.0.1:{port}/_stcore/health", timeout=2) as r:
                if r.status == 200:
                    return proc
        except OSError:
            time.sleep(0.3)
    proc.terminate()
    raise RuntimeError(f"dashboard did not answer on port {port} within 60 s; see {log_path}")


def stop(proc: subprocess.Popen) -> None:
    proc.terminate()
    try:
        proc.wait(timeout=15)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait()


def offline_page(browser, port: int, blocked: list[str], width: int = 1400):
    """A page whose requests to anything but the local server are aborted and recorded."""
    page = browser.new_page(viewport={"width": width, "height": 1000})
    local = (
        f"http://127.0.0.1:{port}",
        f"ws://127.0.0.1:{port}",
        f"http://localhost:{port}",
        f"ws://localhost:{port}",
    )

    def route(r):
        url = r.request.url
        if url.startswith(local) or url.startswith(("data:", "blob:")):
            r.continue_()
        else:
            blocked.append(url)
            r.abort()

    page.route("**/*", route)
    return page


def wait_rendered(page, heading: str, timeout: float = 60_000) -> None:
    """Wait for the page heading, for Streamlit to finish running, and for charts to draw."""
    page.get_by_role("heading", name=heading).first.wait_for(timeout=timeout)
    page.wait_for_function(
        "() => !document.querySelector('[data-testid=\"stStatusWidget\"]')", timeout=timeout
    )
    page.wait_for_timeout(1500)
    page.wait_for_function(
        "() => !document.querySelector('[data-testid=\"stStatusWidget\"]')", timeout=timeout
    )


def full_height(page) -> None:
    """Grow the viewport to the page's content (Streamlit scrolls inside its own container, so
    a full-page screenshot alone would stop at the window) and let charts redraw."""
    height = page.evaluate(
        '() => Math.max(...[...document.querySelectorAll(\'[data-testid="stMain"], '
        '[data-testid="stMainBlockContainer"], section.main, .main\')]'
        ".map(e => e.scrollHeight), document.body.scrollHeight)"
    )
    page.set_viewport_size({"width": page.viewport_size["width"], "height": int(height) + 40})
    page.wait_for_timeout(1200)


def shoot(db: str, out: Path, width: int = 1400) -> tuple[list[Path], list[str], list[str]]:
    from playwright.sync_api import sync_playwright

    out.mkdir(parents=True, exist_ok=True)
    port = free_port()
    proc = start_dashboard(db, port, out / "dashboard.log")
    files, blocked, errors = [], [], []
    try:
        with sync_playwright() as pw:
            browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
            try:
                page = offline_page(browser, port, blocked, width)
                for name, (path, heading) in PAGES.items():
                    page.goto(f"http://127.0.0.1:{port}/{path}")
                    wait_rendered(page, heading)
                    if name in CLICKS:
                        page.get_by_text(CLICKS[name], exact=True).first.click()
                        page.wait_for_timeout(500)
                        wait_rendered(page, heading)
                    for box in page.locator(ERROR_SELECTORS).all():
                        errors.append(f"{name}: {box.inner_text()[:300]}")
                    f = out / f"{name}.png"
                    full_height(page)
                    page.screenshot(path=str(f), full_page=True)
                    page.set_viewport_size({"width": width, "height": 1000})
                    files.append(f)
            finally:
                browser.close()
    finally:
        stop(proc)
    return files, blocked, errors


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", default="/tmp/shots")
    ap.add_argument("--db", default=None, help="evidence base (default: a fresh demo)")
    ap.add_argument("--width", type=int, default=1400)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        db = args.db
        if db is None:
            db = os.path.join(tmp, "demo.db")
            subprocess.run(
                [exposhift_exe(), "demo", "--db", db], check=True, stdout=subprocess.DEVNULL
            )
        files, blocked, errors = shoot(db, Path(args.out), args.width)
    for f in files:
        print(f)
    print(f"blocked requests: {len(blocked)}")
    for u in sorted(set(blocked)):
        print(f"  {u}")
    for e in errors:
        print(f"error box: {e}")
    return 1 if blocked or errors else 0


if __name__ == "__main__":
    sys.exit(main())
