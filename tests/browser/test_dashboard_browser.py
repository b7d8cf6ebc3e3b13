"""The dashboard in a real browser: the real server (`breathfleet dashboard`) driven by headless
Debian Chromium through Playwright. Opens every page, clicks from the queue into a unit, checks
that the charts render (vega-embed canvas or svg) and saves screenshots under test-artifacts/."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

from dashboard_fixture import build_fleet_db

pytestmark = pytest.mark.browser
CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync", "--no-first-run"]
ROOT = Path(__file__).resolve().parents[2]
ARTIFACTS = ROOT / "test-artifacts" / "dashboard"
PAGES = {"fleet": "Fleet overview", "queue": "Service queue", "unit": "Unit", "comparison": "Comparison",
         "lots": "Lots", "data_quality": "Data quality", "digest": "Digest"}
CHART_PAGES = {"fleet", "unit", "comparison", "lots", "data_quality"}


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
    """Wait for the page's title and for Streamlit to finish running the script."""
    page.get_by_role("heading", name=title, exact=True).first.wait_for(timeout=timeout)
    page.wait_for_function(
        "() => !document.querySelector('[data-testid=\"stStatusWidget\"]')", timeout=timeout)


def wait_for_charts(page, timeout: float = 30_000) -> int:
    page.wait_for_selector(".vega-embed canvas, .vega-embed svg", timeout=timeout)
    return page.locator(".vega-embed canvas, .vega-embed svg").count()


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    if not Path(CHROMIUM).exists():
        pytest.skip("Debian chromium is not installed (.ci/run installs it)")
    db = build_fleet_db(tmp_path_factory.mktemp("browser") / "fleet.duckdb")
    port = free_port()
    proc = start_server(db, port)
    yield f"http://127.0.0.1:{port}"
    stop_server(proc)


@pytest.fixture(scope="module")
def browser(server):
    from playwright.sync_api import sync_playwright
    with sync_playwright() as p:
        b = launch_browser(p)
        yield b
        b.close()


@pytest.fixture
def page(browser):
    context = browser.new_context(viewport={"width": 1400, "height": 2600})
    pg = context.new_page()
    yield pg
    context.close()


@pytest.mark.parametrize("name", list(PAGES))
def test_every_page_opens_and_draws(server, page, name):
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    page.goto(f"{server}/{'' if name == 'fleet' else name}")  # the default page lives at /
    wait_for_page(page, PAGES[name])
    if name in CHART_PAGES:
        assert wait_for_charts(page) >= 1
    from playwright.sync_api import expect
    expect(page.get_by_text("Cautions:").first).to_be_visible(timeout=30_000)
    expect(page.get_by_text("Data range: 2026-01-05").first).to_be_visible(timeout=30_000)
    assert page.locator("[data-testid='stException']").count() == 0
    page.screenshot(path=str(ARTIFACTS / f"{name}.png"), full_page=True)


def test_queue_click_opens_the_unit_page(server, page):
    page.goto(f"{server}/queue")
    wait_for_page(page, "Service queue")
    page.get_by_role("button", name="Open unit page").click()
    page.wait_for_url("**/unit?unit=TX*", timeout=30_000)
    wait_for_page(page, "Unit")
    unit = page.url.split("unit=")[1]
    page.locator("strong", has_text=unit).first.wait_for(timeout=30_000)
    assert wait_for_charts(page) >= 2
    page.get_by_text("CUSUM", exact=True).click()
    page.locator(".vega-embed").filter(has_text="CUSUM").first.wait_for(timeout=30_000)
    page.screenshot(path=str(ARTIFACTS / "queue-to-unit.png"), full_page=True)
