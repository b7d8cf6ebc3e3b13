"""The unit page's instrument-record button in a real browser: prepare the record, download it, and
check that it is one self-contained HTML document for the unit and the dates shown.

The click happens once per session (`record` fixture); the tests read what it produced.
"""

from __future__ import annotations

from html.parser import HTMLParser

import pytest

from helpers.browser import ARTIFACTS, wait_for_page

pytestmark = pytest.mark.browser


class _Resources(HTMLParser):
    """Every URL a document would fetch: src of any element, href of <link>, CSS url(...) in <style>."""

    def __init__(self) -> None:
        super().__init__()
        self.urls: list[str] = []
        self.tags: list[str] = []
        self._style = False

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        a = dict(attrs)
        if a.get("src") is not None:
            self.urls.append(a["src"])
        if tag == "link" and a.get("href") is not None:
            self.urls.append(a["href"])
        self._style = tag == "style"

    def handle_endtag(self, tag):
        self._style = False

    def handle_data(self, data):
        if self._style and "url(" in data:
            self.urls.extend(part.split(")")[0].strip("'\" ") for part in data.split("url(")[1:])


def _iso(value: str) -> str:
    """st.date_input shows YYYY/MM/DD; the record prints ISO 8601 dates."""
    return value.replace("/", "-")


@pytest.fixture(scope="module")
def record(server, browser):
    """Open the unit page, click "Prepare the instrument record", then download what it offers."""
    context = browser.new_context(viewport={"width": 1400, "height": 2600}, accept_downloads=True)
    page = context.new_page()
    try:
        page.goto(f"{server}/unit")
        wait_for_page(page, "Unit")
        page.wait_for_url("**/unit?unit=*", timeout=30_000)   # the page writes the unit it shows into the URL
        unit = page.url.split("unit=")[1]
        # the period is chosen by name; "Chosen dates" shows the date boxes, filled with the whole record
        page.get_by_text("Chosen dates", exact=True).click()
        dates = page.locator("[data-testid='stDateInput']")
        dates.first.wait_for(timeout=30_000)
        start = _iso(dates.filter(has_text="From").locator("input").input_value())
        end = _iso(dates.filter(has_text="To").locator("input").input_value())
        page.get_by_role("button", name="Prepare the instrument record").click()
        offer = page.get_by_role("button", name="Download the instrument record")
        offer.wait_for(timeout=60_000)
        with page.expect_download(timeout=30_000) as dl:
            offer.click()
        download = dl.value
        content = download.path().read_text(encoding="utf-8")
        served = context.request.get(download.url)   # the same media URL again, for its Content-Type
        ARTIFACTS.mkdir(parents=True, exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / "unit-record.png"), full_page=True)
        yield {"unit": unit, "start": start, "end": end, "name": download.suggested_filename, "html": content,
               "content_type": served.headers.get("content-type", ""),
               "exceptions": page.locator("[data-testid='stException']").count()}
    finally:
        context.close()


def test_record_button_produces_a_self_contained_html_record(record):
    html = record["html"]
    assert record["exceptions"] == 0
    # WHATWG HTML Living Standard, 13.1.1 "The DOCTYPE": a document starts with <!DOCTYPE html>
    assert html.lstrip().lower().startswith("<!doctype html>")
    parser = _Resources()
    parser.feed(html)
    assert {"html", "head", "body", "table"} <= set(parser.tags)
    # self-contained (common practice for an archived record): nothing to fetch except data: URLs (RFC 2397)
    assert all(u.startswith("data:") for u in parser.urls), [u for u in parser.urls if not u.startswith("data:")]
    assert "<script" not in html.lower()
    # the record is for the unit and the dates shown on the page (pipeline/templates/record.html.j2 title)
    assert f"<title>Instrument record {record['unit']} {record['start']} to {record['end']}</title>" in html


def test_record_is_offered_as_an_html_file(record):
    # RFC 2854 (text/html media type) and the .html file name: the browser opens what it saves
    assert record["name"] == f"instrument-record-{record['unit']}.html"
    assert record["content_type"].startswith("text/html")
