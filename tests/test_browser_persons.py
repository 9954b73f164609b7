"""The persons index, a person and the ties between two, in a real headless Chromium served by a real uvicorn."""

from __future__ import annotations

from pathlib import Path
from urllib.parse import parse_qs, urlsplit

import pytest
from playwright.sync_api import Browser, expect

from app.config import database_url
from conftest import ARTIFACTS, open_page
from helpers import running_server
from tests.evidence_world import XSS_NAME, world_file  # noqa: F401 - fixture

pytestmark = pytest.mark.browser


@pytest.fixture(scope="module")
def base_url(world_file: Path):  # noqa: F811 - the fixture imported above
    with running_server(database_url(world_file)) as url:
        yield url


def test_live_search_then_a_walk_to_the_evidence(browser: Browser, base_url: str):
    ARTIFACTS.mkdir(exist_ok=True)
    page, outside = open_page(browser, base_url)
    page.goto(f"{base_url}/persons")
    rows = page.locator("#person-rows tbody tr")
    expect(rows).to_have_count(7)

    # Typing narrows the list in place (htmx), and the address bar follows the search.
    page.evaluate("() => { window.stillTheSamePage = true; }")
    box = page.get_by_label("Find a person by any spelling of the name")
    box.fill("Ana Vel")
    expect(rows).to_have_count(1)
    expect(rows.first).to_have_attribute("data-match", "fuzzy")
    expect(rows.first.locator(".tag-fuzzy")).to_have_text("near spelling")
    assert page.evaluate("() => window.stillTheSamePage") is True
    assert parse_qs(urlsplit(page.url).query)["q"] == ["Ana Vel"]
    box.fill("Anne Vel")
    expect(rows.first.locator(".matched-variant .variant")).to_have_text("Anne Vel")
    expect(page.locator("#person-rows")).to_have_count(1)  # swapped, not nested
    page.screenshot(path=str(ARTIFACTS / "persons-search.png"), full_page=True)

    # From the person to everything between her and Jost Brenner, then to a copy's original.
    rows.first.locator("a.person-link").click()
    expect(page.locator("h1")).to_have_text("Anna Vell")
    page.screenshot(path=str(ARTIFACTS / "person.png"), full_page=True)
    page.locator('table.relations-table[data-kind="sibling"] a.ties-link').click()
    expect(page.locator("#ties li.attestation")).to_have_count(5)
    expect(page.locator("#ties .count-line [data-documents]")).to_have_text("3 documents")
    page.screenshot(path=str(ARTIFACTS / "ties.png"), full_page=True)
    page.locator('li[data-attestation="r-3"] a.original-link').click()
    assert urlsplit(page.url).path == "/sources/s-2"
    assert outside == []


def test_search_and_open_a_person_by_keyboard_alone(browser: Browser, base_url: str):
    page, _ = open_page(browser, base_url)
    page.goto(f"{base_url}/persons")
    page.locator("#person-q").focus()
    page.keyboard.type("jose")
    page.keyboard.press("Enter")
    expect(page.locator("#person-rows tbody tr")).to_have_count(1)
    # Tab from the search box and its button to the first link of the results: the name
    page.locator("#person-q").focus()
    for _ in range(8):
        page.keyboard.press("Tab")
        if page.evaluate("() => document.activeElement.classList.contains('person-link')"):
            break
    assert page.evaluate("() => document.activeElement.textContent") == "José Marteau"
    assert page.evaluate("() => getComputedStyle(document.activeElement).outlineStyle") == "solid"
    page.keyboard.press("Enter")
    expect(page.locator("h1")).to_have_text("José Marteau")


@pytest.mark.parametrize("path", ["/persons", "/persons/p-jost", "/ties/p-anna/p-jost", "/persons/p-xss"])
def test_pages_fit_a_narrow_screen_and_show_markup_as_text(browser: Browser, base_url: str, path: str):
    page, outside = open_page(browser, base_url, width=375, height=740)
    page.goto(f"{base_url}{path}")
    assert page.evaluate("() => document.documentElement.scrollWidth") <= 375, path
    assert page.evaluate("() => document.querySelectorAll('script').length") == 1  # htmx only
    if path == "/persons/p-xss":
        expect(page.locator("h1")).to_contain_text(XSS_NAME)
    page.screenshot(path=str(ARTIFACTS / f"narrow-{path.strip('/').replace('/', '-')}.png"), full_page=True)
    assert outside == []
