"""An editor's walk in a real headless Chromium: create a person, record a letter with its
attestation, see it on the person's page; a refused form keeps what was typed. The forms are
boosted by htmx, so this also checks that a refused save (answered 200 to htmx) is shown."""

from __future__ import annotations

import pytest
from playwright.sync_api import Browser, expect

from app.config import database_url
from conftest import ARTIFACTS, open_page
from helpers import add_tiny_dataset, running_server

pytestmark = pytest.mark.browser


def test_create_a_person_and_a_relation_with_its_evidence(browser: Browser, db_path, database):
    add_tiny_dataset(database)
    ARTIFACTS.mkdir(exist_ok=True)
    with running_server(database_url(db_path), timeout=120) as base_url:
        page, outside = open_page(browser, base_url)
        page.goto(f"{base_url}/persons")
        page.get_by_role("link", name="New person").click()
        page.locator("#field-key").fill("P7")
        page.locator("#field-name").fill("Griet Molenaar")
        page.locator("#field-born").fill("1688?")
        page.get_by_role("button", name="Create the person").click()
        expect(page.locator("#person-heading")).to_contain_text("Griet Molenaar")
        assert page.url.endswith("/persons/P7")

        page.get_by_role("link", name="Add a relation").click()
        expect(page.locator("#field-person")).to_have_value("P7")
        page.locator("#field-kind").select_option("letter")
        page.locator("#field-other").fill("P1")
        # with a source that does not exist the tie is refused and the form keeps what was typed
        page.locator("#field-source").fill("S99")
        page.get_by_role("button", name="Save the relation and its evidence").click()
        expect(page.locator('[data-field="source"] .field-error')).to_contain_text("no source with key 'S99'")
        expect(page.locator("#field-other")).to_have_value("P1")
        page.screenshot(path=str(ARTIFACTS / "editing-1-refused.png"), full_page=True)
        page.locator("#field-source").fill("S1")
        page.locator("#field-locus").fill("fol. 44v")
        page.locator("#field-certainty").select_option("probable")
        page.locator("#field-quote").fill("Dear cousin, the press is ready.")
        page.get_by_role("button", name="Save the relation and its evidence").click()
        expect(page.locator(".relation .attestation .locus")).to_have_text("fol. 44v")
        expect(page.locator(".relation .quote")).to_contain_text("the press is ready")

        page.locator(".end-a .person-link").click()
        expect(page.locator("#person-heading")).to_contain_text("Griet Molenaar")
        row = page.locator('.relations-table tr[data-other="P1"]')
        expect(row).to_have_count(1)
        expect(row.locator(".certainty")).to_have_text("probable")
        page.screenshot(path=str(ARTIFACTS / "editing-2-person.png"), full_page=True)
        assert outside == []


def test_the_key_follows_the_name_until_it_is_typed_by_hand(browser: Browser, db_path, database):
    add_tiny_dataset(database)
    with running_server(database_url(db_path), timeout=120) as base_url:
        page, outside = open_page(browser, base_url)
        page.goto(f"{base_url}/new/person")
        key = page.locator("#field-key")
        page.locator("#field-name").press_sequentially("Griet Molenaar", delay=20)
        expect(key).to_have_value("p-griet-molenaar")
        page.locator("#field-name").press_sequentially(" de Jonge", delay=20)
        expect(key).to_have_value("p-griet-molenaar-de-jonge")
        key.fill("GMJ")  # a key of one's own is kept while the name changes
        page.locator("#field-name").fill("Griet Molenaar de Jonger")
        page.wait_for_load_state("networkidle")
        expect(key).to_have_value("GMJ")
        page.screenshot(path=str(ARTIFACTS / "new-person-key.png"), full_page=True)
        page.get_by_role("button", name="Create the person").click()
        expect(page.locator("#person-heading")).to_contain_text("Griet Molenaar de Jonger")
        assert page.url.endswith("/persons/GMJ")
        assert outside == []
