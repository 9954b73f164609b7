"""The measure pages in a real headless Chromium, served by a real uvicorn on the evidence world."""

from __future__ import annotations

from pathlib import Path

import pytest
from playwright.sync_api import Browser, expect

from app.config import database_url
from conftest import ARTIFACTS, open_page
from helpers import running_server
from tests.evidence_world import XSS_NAME, world_file  # noqa: F401 - fixture

pytestmark = pytest.mark.browser


def test_the_measure_pages_in_a_browser(browser: Browser, world_file: Path):
    ARTIFACTS.mkdir(exist_ok=True)
    with running_server(database_url(world_file)) as base_url:
        page, outside = open_page(browser, base_url)
        page.goto(f"{base_url}/")
        page.get_by_role("link", name="Network", exact=True).click()
        expect(page).to_have_url(f"{base_url}/network")
        expect(page.get_by_role("heading", level=1)).to_have_text("Network measures")
        page.screenshot(path=str(ARTIFACTS / "network.png"), full_page=True)

        # from the landing page to a ranking, then sorted by name with the keyboard
        page.get_by_role("link", name="Betweenness", exact=True).click()
        expect(page).to_have_url(f"{base_url}/network/centrality?measure=betweenness")
        expect(page.locator(".ranking-table tbody tr")).to_have_count(5)  # drafts and persons without evidence are out
        expect(page.locator('.ranking-table tr[data-key="p-xss"] a.person-link')).to_have_text(XSS_NAME)
        page.screenshot(path=str(ARTIFACTS / "network-centrality.png"), full_page=True)
        page.locator(".ranking-table thead a", has_text="person").focus()
        page.keyboard.press("Enter")
        expect(page).to_have_url(f"{base_url}/network/centrality?measure=betweenness&sort=name")
        expect(page.locator('.ranking-table th[aria-sort="ascending"]')).to_have_text("person")

        # the chooser is a plain form
        page.select_option("#measure-choice", "pagerank")
        page.get_by_role("button", name="Show").click()
        expect(page.locator("h1")).to_have_text("Who is central: PageRank")

        # the summary draws its chart from the site itself
        page.goto(f"{base_url}/network/summary")
        chart = page.locator("figure.chart img")
        expect(chart).to_be_visible()
        assert page.evaluate("() => document.querySelector('figure.chart img').naturalWidth") > 0
        expect(page.locator(".warnings li").first).to_contain_text("Only")
        page.screenshot(path=str(ARTIFACTS / "network-summary.png"), full_page=True)

        # the person page fetches its measures after it has shown itself
        page.goto(f"{base_url}/persons/p-jost")
        expect(page.locator("#person-measures table.person-measures-table")).to_be_visible()
        expect(page.locator('#person-measures tr[data-measure="betweenness"] td.rank')).to_contain_text("of")
        page.locator("#person-measures").screenshot(path=str(ARTIFACTS / "person-measures.png"))

        assert outside == []

        # on a narrow screen the pages do not scroll sideways
        narrow, outside = open_page(browser, base_url, width=390, height=844)
        for path in ("/network/summary", "/network/centrality?measure=degree", "/network/cut-points", "/network/communities"):
            narrow.goto(base_url + path)
            overflow = narrow.evaluate("() => document.documentElement.scrollWidth - document.documentElement.clientWidth")
            assert overflow <= 0, (path, overflow)
        narrow.screenshot(path=str(ARTIFACTS / "network-communities-narrow.png"), full_page=True)
        assert outside == []
