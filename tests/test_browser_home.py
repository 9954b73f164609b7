"""The front page in a real headless Chromium, served by a real uvicorn."""

from __future__ import annotations

from pathlib import Path

import pytest
from playwright.sync_api import Browser, expect

from app.config import database_url
from app.db import Database
from conftest import ARTIFACTS, open_page
from helpers import TINY_DATA_VERSION, add_person, add_tiny_dataset, running_server

pytestmark = pytest.mark.browser

DATASET_NAME = "Letters of a printing house, 1650-1710"


def test_home_page_in_a_browser(browser: Browser, db_path: Path, database: Database):
    add_tiny_dataset(database)
    ARTIFACTS.mkdir(exist_ok=True)
    with running_server(database_url(db_path), env={"ATTESTA_DATASET_NAME": DATASET_NAME}) as base_url:
        page, outside = open_page(browser, base_url)
        page.goto(f"{base_url}/")

        expect(page).to_have_title(f"{DATASET_NAME}: at a glance · Attesta")
        expect(page.locator("header .dataset-name")).to_have_text(DATASET_NAME)
        for field, number in {"persons": 3, "relations": 1, "attestations": 3, "sources": 2}.items():
            figure = page.locator(f'dd[data-count="{field}"]')
            expect(figure).to_be_visible()
            expect(figure).to_have_text(str(number))
        expect(page.locator("footer .data-version")).to_have_text(f"data version {TINY_DATA_VERSION}")
        assert page.evaluate("() => typeof window.htmx") == "object"
        assert page.evaluate("() => window.htmx.version").startswith("2.")
        page.screenshot(path=str(ARTIFACTS / "home.png"), full_page=True)

        # The first Tab reaches the skip link, and its focus ring is drawn.
        page.keyboard.press("Tab")
        focused = page.evaluate(
            "() => [document.activeElement.className, getComputedStyle(document.activeElement).outlineStyle]"
        )
        assert focused == ["skip-link", "solid"]

        # "Refresh the figures" swaps in the new counts through htmx, without reloading the page.
        add_person(database, "P4", "Person 4")
        page.evaluate("() => { window.stillTheSamePage = true; }")
        page.get_by_role("link", name="Refresh the figures").click()
        expect(page.locator('dd[data-count="persons"]')).to_have_text("4")
        assert page.evaluate("() => window.stillTheSamePage") is True
        expect(page.locator("#summary")).to_have_count(1)

        assert outside == []


def test_home_page_on_a_narrow_screen(browser: Browser, db_path: Path, database: Database):  # noqa: ARG001 - database migrates the file
    ARTIFACTS.mkdir(exist_ok=True)
    with running_server(database_url(db_path)) as base_url:
        page, outside = open_page(browser, base_url, width=375, height=740)
        page.goto(f"{base_url}/")
        expect(page.locator("#summary .empty-note")).to_contain_text("No evidence yet")
        expect(page.locator('dd[data-count="persons"]')).to_have_text("0")
        # Nothing is wider than the screen: no sideways scrolling on a phone.
        assert page.evaluate("() => document.documentElement.scrollWidth") <= 375
        page.screenshot(path=str(ARTIFACTS / "home-narrow.png"), full_page=True)
        assert outside == []
