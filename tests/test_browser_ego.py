"""The ego network page in a real headless Chromium: the drawing, a clicked tie, the slice form."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from playwright.sync_api import Browser, expect

from app.config import database_url
from app.db import Database
from conftest import ARTIFACTS, open_page
from helpers import running_server
from tests.slice_world import import_world, key, slice_world

pytestmark = pytest.mark.browser


def test_ego_page_in_a_browser(browser: Browser, db_path: Path, database: Database, tmp_path: Path):
    import_world(database, tmp_path / "workbook", slice_world())
    ARTIFACTS.mkdir(exist_ok=True)
    with running_server(database_url(db_path)) as base_url:
        page, outside = open_page(browser, base_url, width=1400, height=1000)
        page.goto(f"{base_url}/persons/{key('E')}/ego?radius=2")
        expect(page.locator("h1")).to_have_text("Ego network of Elias Egmont")
        drawing = page.locator("#ego-panel svg.ego-svg")
        expect(drawing).to_be_visible()
        expect(drawing.locator("a.ego-node")).to_have_count(8)
        box = drawing.bounding_box()
        assert box["width"] > 700  # wide enough for labels to be read on a laptop
        page.screenshot(path=str(ARTIFACTS / "ego.png"), full_page=True)
        drawing.screenshot(path=str(ARTIFACTS / "ego-drawing.png"))

        # A click on a line shows the documents of that tie beside the drawing, without leaving the page.
        page.evaluate("() => { window.stillTheSamePage = true; }")
        chosen = page.locator(f'a.ego-edge[data-source="{key("A")}"][data-target="{key("B")}"]')
        chosen.click()
        panel = page.locator("#tie-panel")
        expect(panel.locator("#ties")).to_be_visible()
        expect(chosen).to_have_class(re.compile(r"\bis-chosen\b"))  # the clicked tie stays marked
        expect(page.locator("a.ego-edge.is-chosen")).to_have_count(1)
        expect(panel).to_contain_text("Anna Alting")
        expect(panel).to_contain_text("Bruno Brede")
        assert page.evaluate("() => window.stillTheSamePage") is True
        assert page.url.endswith("/ego?radius=2")
        page.screenshot(path=str(ARTIFACTS / "ego-tie.png"))

        # Keyboard: the persons and ties of the drawing are reached with Tab, and Enter follows them.
        page.locator("#ego-panel .radius-switch a").first.focus()
        for _ in range(30):
            page.keyboard.press("Tab")
            if page.evaluate("() => document.activeElement.closest('svg') !== null"):
                break
        assert page.evaluate("() => document.activeElement.classList[0]") in ("ego-edge", "ego-node")

        # The slice form: choosing a kind and applying it redraws with that slice.
        page.locator('details[data-group="kinds"] > summary').click()
        page.locator('input[name="kind"][value="kinship"]').check()
        page.get_by_role("button", name="Apply").click()
        expect(page.locator("#ego-panel .slice-line")).to_contain_text("kinds: kinship")
        assert "kind=kinship" in page.url and "radius=2" in page.url
        expect(page.locator("#ego-panel svg a.ego-node")).to_have_count(3)  # E, C and F
        assert outside == []


def test_ego_page_on_a_narrow_screen(browser: Browser, db_path: Path, database: Database, tmp_path: Path):
    import_world(database, tmp_path / "workbook", slice_world())
    ARTIFACTS.mkdir(exist_ok=True)
    with running_server(database_url(db_path)) as base_url:
        page, outside = open_page(browser, base_url, width=375, height=740)
        page.goto(f"{base_url}/persons/{key('E')}/ego")
        expect(page.locator("#ego-panel svg.ego-svg")).to_be_visible()
        # The page never scrolls sideways: the whole drawing fits the screen (pinch to zoom).
        assert page.evaluate("() => document.documentElement.scrollWidth") <= 375
        assert page.locator("#ego-panel svg.ego-svg").bounding_box()["width"] <= 375
        page.screenshot(path=str(ARTIFACTS / "ego-narrow.png"), full_page=True)
        assert outside == []
