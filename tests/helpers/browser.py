"""The real dashboard server and headless Debian Chromium for the browser tests (tests/browser/)."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync", "--no-first-run"]
ROOT = Path(__file__).resolve().parents[2]
ARTIFACTS = ROOT / "test-artifacts" / "dashboard"


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def start_server(db: Path, port: int) -> subprocess.Popen:
    """`breathfleet dashboard --db DB --port P`, waiting until Streamlit answers its health check."""
    proc = subprocess.Popen([sys.executable, "-c", "from pipeline.cli import main; main()", "dashboard", "--db", str(db), "--port", str(port)],
                            cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        try:
            with urllib.request.urlopen(f"http://127.0.0.1:{port}/_stcore/health", timeout=1) as r:
                if r.status == 200:
                    return proc
        except OSError:
            time.sleep(0.3)
    stop_server(proc)
    raise RuntimeError("the dashboard server did not start within 60 s")


def stop_server(proc: subprocess.Popen) -> None:
    os.killpg(proc.pid, 15)  # the CLI and its streamlit child share a session we created
    try:
        proc.wait(timeout=15)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, 9)


def launch_browser(playwright):
    return playwright.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS, headless=True)


def wait_for_page(page, title: str, timeout: float = 30_000) -> None:
    """Wait for the page's title, for Streamlit to finish running the script and for its lazily
    loaded elements to replace their loading skeletons."""
    page.get_by_role("heading", name=title, exact=True).first.wait_for(timeout=timeout)
    page.wait_for_function(
        "() => !document.querySelector('[data-testid=\"stStatusWidget\"], [data-testid=\"stSkeleton\"]')",
        timeout=timeout)


def wait_for_charts(page, timeout: float = 30_000, at_least: int = 1) -> int:
    """Wait until at least `at_least` charts are drawn (Vega canvas or svg); return how many are."""
    page.wait_for_function(
        "n => document.querySelectorAll('.vega-embed canvas, .vega-embed svg').length >= n", arg=at_least,
        timeout=timeout)
    return page.locator(".vega-embed canvas, .vega-embed svg").count()
