"""The document pages in a real headless Chromium, served by a real uvicorn."""

from __future__ import annotations

from urllib.parse import parse_qs, urlsplit

import pytest
from playwright.sync_api import Browser, expect

from conftest import ARTIFACTS, open_page
from helpers import running_server
from test_sources import build, with_second_archive

pytestmark = pytest.mark.browser


@pytest.fixture(scope="module")
def base_url(tmp_path_factory):
    settings = build(tmp_path_factory.mktemp("browser-sources"), with_second_archive(), deleted=("r-x2",))
    with running_server(settings.database_url) as url:
        yield url


def test_live_search_then_a_walk_from_document_to_archive(browser: Browser, base_url: str):
    ARTIFACTS.mkdir(exist_ok=True)
    page, outside = open_page(browser, base_url)
    page.goto(f"{base_url}/sources")
    rows = page.locator("table.source-table tbody tr")
    expect(rows).to_have_count(6)

    # Typing narrows the list in place (htmx), and the address bar follows the search.
    page.evaluate("() => { window.stillTheSamePage = true; }")
    page.get_by_label("Search").fill("VFP 1/2")
    expect(rows).to_have_count(1)
    expect(page.locator("#source-count")).to_have_text("1 document")
    assert page.evaluate("() => window.stillTheSamePage") is True
    assert parse_qs(urlsplit(page.url).query)["q"] == ["VFP 1/2"]
    page.get_by_label("Search").fill("")
    page.get_by_label("Kind").select_option("letterbook")
    expect(rows).to_have_count(1)
    expect(rows.first).to_have_attribute("data-source", "s-2c")
    page.screenshot(path=str(ARTIFACTS / "sources.png"), full_page=True)

    # From the copy to its original, and from there to its collection and repository.
    rows.first.get_by_role("link").click()
    expect(page.locator("h1")).to_contain_text("VFP 9/1 fol. 3")
    page.locator('dd[data-field="copy-of"] a').click()
    expect(page.locator('dd[data-field="calendar"]')).to_have_text("Julian")
    expect(page.locator('dd[data-field="days"] time')).to_have_attribute("datetime", "1703-06-12")
    page.locator('dd[data-field="collection"] a').click()
    expect(page.locator('dd[data-count="attestations"]')).to_have_text("6")
    page.locator('dd[data-field="repository"] a').click()
    expect(page.locator("h1")).to_have_text("Harwick Town Archive")

    # The document holding markup shows it as text, and nothing ran.
    page.goto(f"{base_url}/sources/s-x")
    expect(page.locator('blockquote[data-field="quote"]')).to_have_text("<script>alert('quote')</script> & more")
    expect(page.locator(".deleted-note")).to_have_text("1 deleted attestation is not shown.")
    assert page.evaluate("() => document.querySelectorAll('script').length") == 1
    assert outside == []


def test_search_by_keyboard_alone(browser: Browser, base_url: str):
    page, _ = open_page(browser, base_url)
    page.goto(f"{base_url}/sources")
    page.locator("#source-q").focus()
    page.keyboard.type("orrin")
    page.keyboard.press("Enter")
    expect(page.locator("table.source-table tbody tr")).to_have_count(1)
    assert parse_qs(urlsplit(page.url).query)["q"] == ["orrin"]
    link = page.locator('tr[data-source="s-ed"] a')
    link.focus()
    assert page.evaluate("() => getComputedStyle(document.activeElement).outlineStyle") == "solid"
    page.keyboard.press("Enter")
    expect(page.locator('dd[data-field="author"]')).to_have_text("M. Orrin")


@pytest.mark.parametrize("path", ["/sources", "/sources/s-1", "/collections/col-vell", "/places/pl-ostmere", "/repositories"])
def test_document_pages_fit_a_narrow_screen(browser: Browser, base_url: str, path: str):
    ARTIFACTS.mkdir(exist_ok=True)
    page, outside = open_page(browser, base_url, width=375, height=740)
    page.goto(base_url + path)
    assert page.evaluate("() => document.documentElement.scrollWidth") <= 375
    page.screenshot(path=str(ARTIFACTS / f"narrow{path.replace('/', '-')}.png"), full_page=True)
    assert outside == []


def test_a_refused_value_is_explained_when_the_search_is_sent(browser: Browser, base_url: str):
    page, _ = open_page(browser, base_url)
    page.goto(f"{base_url}/sources")
    page.get_by_label("From").fill("soon")
    page.get_by_role("button", name="Search").click()
    expect(page.locator("#error h1")).to_have_text("Bad parameter")
    expect(page.locator("#error .error-detail")).to_contain_text("from=soon")
