"""The dashboard in a real browser: the real server (`breathfleet dashboard`) driven by headless
Debian Chromium through Playwright. Opens every page, clicks from the queue into a unit, checks
that the charts render (vega-embed canvas or svg) and saves screenshots under test-artifacts/.
The server and browser fixtures are in conftest.py."""

from __future__ import annotations

import pytest

from helpers.browser import ARTIFACTS, wait_for_charts, wait_for_page

pytestmark = pytest.mark.browser
PAGES = {"fleet": "Fleet overview", "queue": "Service queue", "unit": "Unit", "comparison": "Comparison",
         "lots": "Lots", "data_quality": "Data quality", "digest": "Digest"}
CHART_PAGES = {"fleet", "unit", "comparison", "lots", "data_quality"}


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
    assert wait_for_charts(page, at_least=2) >= 2  # individuals and moving range
    page.get_by_text("CUSUM", exact=True).click()
    # charts are drawn on a canvas; Vega names it by the chart's description (its title)
    page.locator(".vega-embed[aria-label^='CUSUM']").first.wait_for(timeout=30_000)
    page.screenshot(path=str(ARTIFACTS / "queue-to-unit.png"), full_page=True)


def test_static_tables_carry_the_page_style(server, page):
    # frame.header writes the tables' style once per page; every static table must still get it
    # (the header cells stick to the top of a scrolling table: CSS position sticky).
    page.goto(f"{server}/lots")
    wait_for_page(page, "Lots")
    header = page.locator("table.bf-table th").first
    header.wait_for(timeout=30_000)
    assert header.evaluate("th => getComputedStyle(th).position") == "sticky"
    assert page.locator("div.bf-scroll").count() >= 1


def test_a_table_alternative_opens_with_its_table(server, page):
    # Table alternatives are drawn when opened (frame.table_alternative): the click reruns the page.
    page.goto(f"{server}/")  # the default page lives at /
    wait_for_page(page, "Fleet overview")
    box = page.locator("[data-testid='stExpander']", has_text="Fleet relative error by week (table)")
    assert box.locator("table.bf-table").count() == 0
    box.locator("summary").click()
    box.locator("table.bf-table").first.wait_for(timeout=30_000)
    assert box.locator("table.bf-table tr").count() > 1
