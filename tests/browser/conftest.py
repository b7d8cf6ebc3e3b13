"""Fixtures of the browser layer: one dashboard server and one Chromium per test session, shared by
every browser test module (starting them is most of the layer's time)."""

from __future__ import annotations

from pathlib import Path

import pytest

from dashboard_fixture import build_fleet_db
from helpers.browser import CHROMIUM, free_port, launch_browser, start_server, stop_server


@pytest.fixture(scope="session")
def server(tmp_path_factory):
    if not Path(CHROMIUM).exists():
        pytest.skip("Debian chromium is not installed (.ci/run installs it)")
    db = build_fleet_db(tmp_path_factory.mktemp("browser") / "fleet.duckdb")
    port = free_port()
    proc = start_server(db, port)
    yield f"http://127.0.0.1:{port}"
    stop_server(proc)


@pytest.fixture(scope="session")
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
