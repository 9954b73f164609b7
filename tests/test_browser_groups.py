"""The groups index and a group's page in a real headless Chromium served by a real uvicorn."""

from __future__ import annotations

from pathlib import Path
from urllib.parse import parse_qs, urlsplit

import pytest
from playwright.sync_api import Browser, expect

from app.config import database_url
from app.db import Database, upgrade
from app.exchange.workbook import import_workbook
from conftest import ARTIFACTS, open_page
from helpers import running_server
from tests.test_groups import world
from tests.twomode_world import MARKUP_GROUP
from tests.workbooks import write_workbook

pytestmark = pytest.mark.browser


@pytest.fixture(scope="module")
def base_url(tmp_path_factory):
    folder: Path = tmp_path_factory.mktemp("browser-groups")
    database = Database(database_url(folder / "attesta.db"))
    upgrade(database)
    import_workbook(database, write_workbook(folder / "wb", world()), size_limit=10**9)
    database.dispose()
    with running_server(database_url(folder / "attesta.db")) as url:
        yield url


def test_find_a_group_open_it_and_walk_from_the_drawing(browser: Browser, base_url: str):
    ARTIFACTS.mkdir(exist_ok=True)
    page, outside = open_page(browser, base_url)
    page.goto(f"{base_url}/")
    page.get_by_role("link", name="Groups", exact=True).click()
    rows = page.locator("#group-rows tbody tr")
    expect(rows).to_have_count(17)

    # The search and the kind narrow the list in place (htmx); the address follows.
    page.evaluate("() => { window.stillTheSamePage = true; }")
    page.get_by_label("Find a group by a word of its name").fill("OSTMERE")
    expect(rows).to_have_count(2)
    page.get_by_label("Kind").select_option("parish")
    expect(rows).to_have_count(1)
    assert page.evaluate("() => window.stillTheSamePage") is True
    assert parse_qs(urlsplit(page.url).query) == {"q": ["OSTMERE"], "kind": ["parish"]}
    expect(page.locator("#group-rows")).to_have_count(1)  # swapped, not nested

    rows.first.locator("a.group-link").click()
    expect(page.locator("h1")).to_contain_text("St. Ælfric, Østmere")
    svg = page.locator("svg.group-svg")
    expect(svg).to_be_visible()
    expect(svg.locator("a.gn-node")).to_have_count(6)
    expect(svg.locator('a[data-key="g-guild"] text')).to_contain_text("<b>Guild</b>")  # shown as text
    page.screenshot(path=str(ARTIFACTS / "group.png"), full_page=True)

    # The citations of a membership open from the keyboard, without a script of ours.
    summary = page.locator('li.membership[data-person="p-cas"] details summary')
    summary.focus()
    page.keyboard.press("Enter")
    expect(page.locator('li.membership[data-person="p-cas"] li.attestation')).to_be_visible()

    # A group mark in the drawing is a link reached and followed from the keyboard.
    page.locator('svg.group-svg a[data-key="g-guild"]').focus()
    page.keyboard.press("Enter")
    expect(page.locator("h1")).to_contain_text(MARKUP_GROUP)
    page.locator('svg.group-svg a[data-key="p-bette"] circle').click()
    expect(page.locator("h1")).to_contain_text("Bette Brink")

    # Narrow screens: nothing wider than the window.
    narrow, _ = open_page(browser, base_url, width=380, height=800)
    narrow.goto(f"{base_url}/groups/g-parish")
    assert narrow.evaluate("() => document.documentElement.scrollWidth") <= 380
    narrow.screenshot(path=str(ARTIFACTS / "group-narrow.png"), full_page=True)
    narrow.goto(f"{base_url}/groups")
    assert narrow.evaluate("() => document.documentElement.scrollWidth") <= 380
    assert outside == []


def test_group_member_two_mode_page_and_shared_groups(browser: Browser, base_url: str):
    ARTIFACTS.mkdir(exist_ok=True)
    page, outside = open_page(browser, base_url)
    page.goto(f"{base_url}/groups/g-guild")
    page.locator('li.membership[data-person="p-aart"] a').first.click()
    expect(page.locator("h1")).to_contain_text("Aart Velde")

    page.get_by_role("link", name="Network", exact=True).click()
    page.get_by_role("link", name="Persons and groups (two-mode network)").click()
    expect(page.locator("h1")).to_contain_text("two-mode network")
    # the slice form of every network page, with the weights of the projections under "Shared groups"
    expect(page.locator(".breadcrumbs a")).to_have_text("Network measures")
    page.locator("#slice-form summary", has_text="Shared groups").click()
    page.get_by_label("overlap (Jaccard)").check()
    page.get_by_role("button", name="Apply").click()
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


def test_switch_a_person_to_co_membership_and_open_a_projected_tie(browser: Browser, base_url: str):
    # The walk of the two-mode issue: a group, a member, the slice switched to ties by shared
    # groups, a projected tie clicked in the ego drawing, the shared groups with their documents.
    ARTIFACTS.mkdir(exist_ok=True)
    page, outside = open_page(browser, base_url)
    page.goto(f"{base_url}/groups/g-parish")
    page.locator('li.membership[data-person="p-aart"] a').first.click()
    expect(page.locator("h1")).to_contain_text("Aart Velde")
    page.locator('details[data-group="groups"] > summary').click()
    page.get_by_label("shared groups only (co-membership)").check()
    page.get_by_role("button", name="Apply").click()
    assert parse_qs(urlsplit(page.url).query)["mode"] == ["co-membership"]
    lines = page.locator("svg.ego-svg a.ego-edge-groups")
    expect(lines).to_have_count(6)  # Aart, Bette, Cas and Dirk all share the parish
    expect(page.locator('.ego-legend li[data-kind="co-membership"]')).to_contain_text("shared groups")
    page.locator('svg.ego-svg a.ego-edge-groups[data-source="p-aart"][data-target="p-bette"] path.ego-hit').dispatch_event("click")
    panel = page.locator("#tie-panel")
    expect(panel.locator("section.shared-group")).to_have_count(2)
    expect(panel.locator('section.shared-group[data-group="g-parish"]')).to_contain_text("Parish register")
    expect(panel.locator('section.shared-group[data-group="g-guild"]')).to_contain_text("Guild roll")
    page.screenshot(path=str(ARTIFACTS / "ego-co-membership.png"), full_page=True)
    assert outside == []


def test_two_mode_drawing_mark_opens_the_person(browser: Browser, base_url: str):
    ARTIFACTS.mkdir(exist_ok=True)
    page, outside = open_page(browser, base_url)
    page.goto(f"{base_url}/network/two-mode")
    svg = page.locator("svg.two-mode-svg")
    expect(svg).to_be_visible()
    expect(svg.locator('a.tm-node[data-mode="group"] polygon')).to_have_count(16)
    page.screenshot(path=str(ARTIFACTS / "two-mode-drawing.png"), full_page=True)
    bette = svg.locator('a.tm-node[data-key="p-bette"]')
    expect(bette.locator("title")).to_have_text("Bette Brink: in 2 groups")
    bette.locator("circle").click()
    expect(page.locator("h1")).to_contain_text("Bette Brink")
    page.go_back()
    page.locator('svg.two-mode-svg a.tm-node[data-key="g-guild"] polygon').click()
    expect(page.locator("h1")).to_contain_text(MARKUP_GROUP)
    assert outside == []
