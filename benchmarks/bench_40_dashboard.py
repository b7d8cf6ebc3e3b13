"""Dashboard speed in a real browser on the 10-million-check benchmark fleet.

For each page: the first render (a fresh browser session after the server started, each
page's caches cold) and a second render (warm caches). For the unit page: the drill-down
from the service queue into a unit, and the switch to another unit. A render is finished
when the page title is shown, Streamlit's running indicator and loading skeletons are gone
and the DOM has been still for a settle window; the time reported is when it became still.
Targets (issue 7): first render < 2 s, drill-down < 1 s.
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync", "--no-first-run"]
PAGES = {"": "Fleet overview", "queue": "Service queue", "unit": "Unit", "comparison": "Comparison",
         "lots": "Lots", "data_quality": "Data quality", "digest": "Digest"}
SETTLE_S = 0.8
BUSY_JS = """(title) => {
  const h = Array.from(document.querySelectorAll('h1')).some(e => e.innerText.trim() === title);
  const busy = document.querySelector('[data-testid="stStatusWidgetRunningIcon"], [data-testid="stSkeleton"]');
  return [h && !busy, document.querySelectorAll('.vega-embed canvas, .vega-embed svg, [data-testid]').length];
}"""


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _start(db: Path, port: int) -> subprocess.Popen:
    import urllib.request
    proc = subprocess.Popen([sys.executable, "-c", "from pipeline.cli import main; main()", "dashboard",
                             "--db", str(db), "--port", str(port)], cwd=ROOT, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL, start_new_session=True)
    for _ in range(300):
        try:
            with urllib.request.urlopen(f"http://127.0.0.1:{port}/_stcore/health", timeout=1):
                return proc
        except OSError:
            time.sleep(0.2)
    raise RuntimeError("dashboard server did not start")


def wait_rendered(page, title: str, started: float, timeout: float = 300.0) -> float:
    """Seconds from `started` until the page showed `title` and stayed still for SETTLE_S."""
    still_since, last_sig = None, None
    while time.perf_counter() - started < timeout:
        ready, sig = page.evaluate(BUSY_JS, title)
        now = time.perf_counter()
        if ready and sig == last_sig:
            still_since = still_since or now
            if now - still_since >= SETTLE_S:
                return still_since - started
        else:
            still_since = None if not ready or sig != last_sig else still_since
            if ready and still_since is None:
                still_since = now
        last_sig = sig
        time.sleep(0.05)
    raise TimeoutError(f"page {title!r} did not finish within {timeout} s")


def measure(db: Path) -> dict[str, float]:
    from playwright.sync_api import sync_playwright
    port = _free_port()
    proc = _start(db, port)
    base = f"http://127.0.0.1:{port}"
    out: dict[str, float] = {}
    try:
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS, headless=True)
            # the very first visitor after the server started: Python modules load, the snapshot's
            # fleet-wide queries run (the dashboard prewarms them in the background from here on)
            warm = browser.new_page()
            t = time.perf_counter()
            warm.goto(f"{base}/")
            out["first_visitor_fleet_cold_s"] = wait_rendered(warm, "Fleet overview", t, timeout=600)
            warm.close()
            # full loads in a fresh browser context (downloads the Streamlit frontend too)
            for path in ("queue", "unit"):
                context = browser.new_context(viewport={"width": 1400, "height": 1000})
                page = context.new_page()
                t = time.perf_counter()
                page.goto(f"{base}/{path}")
                out[f"url_load_{path or 'fleet'}_s"] = wait_rendered(page, PAGES[path], t)
                context.close()
            # navigation inside the app, as a user moves between pages: first visit, then again
            page = browser.new_page(viewport={"width": 1400, "height": 1000})
            page.goto(f"{base}/digest")
            wait_rendered(page, "Digest", time.perf_counter())
            for rnd in ("first", "second"):
                for path, title in PAGES.items():
                    t = time.perf_counter()
                    page.locator("[data-testid='stSidebarNav'] a", has_text=title).first.click()
                    out[f"{rnd}_render_{path or 'fleet'}_s"] = wait_rendered(page, title, t)
            page.close()
            page = browser.new_page(viewport={"width": 1400, "height": 1000})
            page.goto(f"{base}/queue")
            wait_rendered(page, "Service queue", time.perf_counter())
            button = page.get_by_role("button", name="Open unit page")
            if button.count():
                options = page.locator("[data-testid='stSelectbox']").last
                options.click()
                page.get_by_role("option").nth(3).click()  # a unit not opened before
                wait_rendered(page, "Service queue", time.perf_counter())
                t = time.perf_counter()
                button.click()
                out["drilldown_queue_to_unit_s"] = wait_rendered(page, "Unit", t)
            t = time.perf_counter()
            page.goto(f"{base}/unit?unit={_another_unit(db)}")
            out["unit_by_link_cold_s"] = wait_rendered(page, "Unit", t)
            browser.close()
    finally:
        os.killpg(proc.pid, 15)
        proc.wait(timeout=30)
    return out


def _another_unit(db: Path) -> str:
    import duckdb

    from pipeline.db import snapshot_path
    path = snapshot_path(db) if snapshot_path(db).exists() else db
    con = duckdb.connect(str(path), read_only=True)
    try:
        return con.execute("SELECT instrument_id FROM instruments ORDER BY instrument_id DESC LIMIT 1").fetchone()[0]
    finally:
        con.close()


def main() -> None:
    try:
        from benchmarks.fleet import benchmark_database
    except ImportError:
        print("skipped: benchmarks/fleet.py (the benchmark fleet) is not available")
        return
    if not Path(CHROMIUM).exists():
        print("skipped: /usr/bin/chromium is not installed")
        return
    db = Path(benchmark_database())
    figures = measure(db)
    for name, value in figures.items():
        target = 1.0 if name.startswith("drilldown") else 2.0 if name.startswith("first_render") else None
        flag = "" if target is None else ("  ok" if value < target else f"  over the {target:g} s target")
        print(f"{name:<36} {value:7.2f}{flag}")


if __name__ == "__main__":
    if len(sys.argv) > 1:  # python -m benchmarks.bench_40_dashboard DB: measure on any database
        for k, v in measure(Path(sys.argv[1])).items():
            print(f"{k:<36} {v:7.2f}")
    else:
        main()
