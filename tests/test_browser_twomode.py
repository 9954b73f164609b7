"""From a group to a member, to the two-mode page and the evidence of a co-membership tie, in a real
headless Chromium served by a real uvicorn."""

from __future__ import annotations

from pathlib import Path
from urllib.parse import parse_qs, urlsplit

import pytest
from playwright.sync_api import Browser, expect, sync_playwright

from app.config import database_url
from app.db import Database, upgrade
from app.exchange.workbook import import_workbook
from conftest import ARTIFACTS, chromium_path
from helpers import running_server
from test_browser_home import CHROMIUM_ARGS, open_page
from tests.test_groups import world
from tests.workbooks import write_workbook

pytestmark = pytest.mark.browser


@pytest.fixture(scope="module")
def browser():
    with sync_playwright() as playwright:
        chromium = playwright.chromium.launch(executable_path=chromium_path(), args=CHROMIUM_ARGS)
        yield chromium
        chromium.close()


@pytest.fixture(scope="module")
def base_url(tmp_path_factory):
    folder: Path = tmp_path_factory.mktemp("browser-twomode")
    database = Database(database_url(folder / "attesta.db"))
    upgrade(database)
    import_workbook(database, write_workbook(folder / "wb", world()), size_limit=10**9)
    database.dispose()
    with running_server(database_url(folder / "attesta.db")) as url:
        yield url


def test_group_member_two_mode_page_and_shared_groups(browser: Browser, base_url: str):
    ARTIFACTS.mkdir(exist_ok=True)
    page, outside = open_page(browser, base_url)
    page.goto(f"{base_url}/groups/g-guild")
    page.locator('li.membership[data-person="p-aart"] a').first.click()
    expect(page.locator("h1")).to_contain_text("Aart Velde")

    page.get_by_role("link", name="Network", exact=True).click()
    page.get_by_role("link", name="Persons and groups (two-mode network)").click()
    expect(page.locator("h1")).to_contain_text("two-mode network")
    page.get_by_label("overlap (Jaccard)").check()
    page.get_by_role("button", name="Show").click()
    assert parse_qs(urlsplit(page.url).query)["weighting"] == ["jaccard"]
    page.screenshot(path=str(ARTIFACTS / "two-mode.png"), full_page=True)

    page.get_by_role("link", name="Aart Velde and Bette Brink").click()
    assert parse_qs(urlsplit(page.url).query)["mode"] == ["co-membership"]
    groups = page.locator("section.shared-group")
    expect(groups).to_have_count(2)
    parish = page.locator('section.shared-group[data-group="g-parish"]')
    expect(parish).to_contain_text("do not overlap")
    expect(parish).to_contain_text("Parish register")
    expect(page.locator('section.shared-group[data-group="g-guild"]')).to_contain_text("Guild roll")
    expect(page.locator('section.shared-group[data-group="g-guild"]')).to_contain_text("overlap in time")
    page.screenshot(path=str(ARTIFACTS / "ties-co-membership.png"), full_page=True)
    assert outside == []
