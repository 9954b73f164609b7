"""A historian's walk through the demo in a real headless Chromium: from a spelling of a name to
the person, from a line of the drawing to the documents behind it, from a document to the other
person it names."""

from __future__ import annotations

import csv
from urllib.parse import parse_qs, urlsplit

import httpx
import pytest
from playwright.sync_api import Browser, Page, expect

from app.config import database_url
from conftest import ARTIFACTS, DEMO_WORKBOOK, open_page
from helpers import running_server

pytestmark = pytest.mark.browser

BROKER = "p-jehan-marteau"
PARTNER = "p-jacob-ten-brummel"  # a merchant the broker writes to, and who writes back


@pytest.fixture(scope="module")
def demo_url(tmp_path_factory: pytest.TempPathFactory, demo_sqlite):  # noqa: ANN001
    path = demo_sqlite(tmp_path_factory.mktemp("walk") / "demo.db")
    with running_server(database_url(path)) as url:
        yield url


def shoot(page: Page, number: int, step: str) -> None:
    page.screenshot(path=str(ARTIFACTS / f"walk-{number}-{step}.png"), full_page=number != 4)


def click_on_the_line(page: Page, edge_selector: str) -> None:
    """Click a point that lies on the drawn line of a tie (not merely inside its box), like a reader's mouse."""
    page.locator(edge_selector).scroll_into_view_if_needed()
    point = page.evaluate(
        """(selector) => {
            const edge = document.querySelector(selector);
            const line = edge.querySelector('path.ego-line');
            const length = line.getTotalLength();
            for (const share of [0.5, 0.4, 0.6, 0.3, 0.7, 0.25, 0.75]) {
                const local = line.getPointAtLength(length * share);
                const screen = new DOMPoint(local.x, local.y).matrixTransform(line.getScreenCTM());
                const hit = document.elementFromPoint(screen.x, screen.y);
                if (hit && hit.closest('a.ego-edge') === edge) return {x: screen.x, y: screen.y};
            }
            return null;
        }""",
        edge_selector,
    )
    assert point is not None, f"no point of the line {edge_selector} can be clicked: marks or labels cover it"
    page.mouse.click(point["x"], point["y"])


def heading_levels(page: Page, selector: str) -> list[int]:
    return page.evaluate(
        "(s) => Array.from(document.querySelector(s).querySelectorAll('h1,h2,h3,h4,h5,h6'), h => Number(h.tagName[1]))",
        selector,
    )


def test_from_a_spelling_to_the_documents_and_on_to_the_other_person(browser: Browser, demo_url: str):
    ARTIFACTS.mkdir(exist_ok=True)
    page, outside = open_page(browser, demo_url, width=1400, height=1000)

    # 1. The front page of the demo.
    page.goto(f"{demo_url}/")
    expect(page.locator("h1")).to_have_text("The dataset at a glance")
    with (DEMO_WORKBOOK / "persons.csv").open(encoding="utf-8") as persons:
        expect(page.locator('dd[data-count="persons"]')).to_have_text(str(len(list(csv.DictReader(persons)))))
    shoot(page, 1, "home")

    # 2. A spelling found in a letter, not the name the person is filed under.
    page.get_by_label("Find a person").fill("Johann Martell")
    page.get_by_role("button", name="Search").click()
    page.wait_for_url("**/persons?*")
    assert parse_qs(urlsplit(page.url).query)["q"] == ["Johann Martell"]
    found = page.locator(f'#person-rows tbody tr[data-key="{BROKER}"]')
    expect(found.locator("a.person-link")).to_have_text("Jehan Marteau")
    expect(found.locator(".matched-variant .variant")).to_have_text("Johann Martell")
    expect(page.locator("#person-rows tbody tr").first).to_have_attribute("data-key", BROKER)
    shoot(page, 2, "search")

    # 3. The person, with the network drawn around him.
    found.locator("a.person-link").click()
    page.wait_for_url(f"**/persons/{BROKER}")
    expect(page.locator("h1")).to_contain_text("Jehan Marteau")
    expect(page.locator(".variants")).to_contain_text("Johann Martell")
    drawing = page.locator("#ego-panel svg.ego-svg")
    expect(drawing).to_be_visible()
    expect(drawing.locator(f'a.ego-node[data-key="{PARTNER}"]')).to_have_count(1)
    expect(page.locator("#tie-panel")).to_contain_text("Choose a line in the drawing")
    shoot(page, 3, "person")

    # 4. A click on the line to his partner shows the citations beside the drawing, without a page load.
    person_url = page.url
    page.evaluate("() => { window.stillTheSamePage = true; }")
    edge = f'#ego-panel a.ego-edge[data-source="{BROKER}"][data-target="{PARTNER}"][data-kind="letter"]'
    ties_link = page.locator(edge).get_attribute("href")
    expected = httpx.get(f"{demo_url}/api{ties_link}", timeout=60).json()  # a busy shared machine
    expected_keys = [att["key"] for rel in expected["ties"]["relations"] for att in rel["attestations"]]
    assert len(expected_keys) > 1
    click_on_the_line(page, edge)
    panel = page.locator("#tie-panel")
    expect(panel.locator("#ties-heading")).to_have_text("Jehan Marteau and Jacob ten Brummel")
    expect(page.locator("section#ties")).to_have_count(1)  # swapped into the panel, once
    citations = panel.locator("li.attestation")
    expect(citations).to_have_count(len(expected_keys))
    assert citations.evaluate_all("(items) => items.map(i => i.dataset.attestation)") == expected_keys
    documents = expected["ties"]["counts"]["documents"]
    expect(panel.locator(".count-line [data-documents]")).to_have_text(f"{documents} documents")
    assert page.evaluate("() => window.stillTheSamePage") is True
    assert page.url == person_url
    # the clicked line stays marked as the one whose evidence the panel shows
    expect(page.locator("a.ego-edge.is-chosen")).to_have_count(1)
    # The panel's headings sit under "Evidence of a tie" (h3), and the panel's outline skips no level.
    levels = heading_levels(page, "#ego-panel")
    assert all(after <= before + 1 for before, after in zip(levels, levels[1:])), levels
    assert heading_levels(page, "#tie-panel")[0] == 4
    # A citation with a locus and a digital copy reads "…, fol. 1r digital copy", not "fol. 1rdigital copy".
    with_copy = panel.locator("li.attestation:has(a.source-url):has(.locus)").first
    text = with_copy.locator("p.citation").inner_text()
    locus = with_copy.locator(".locus").inner_text()
    assert text.endswith(f", {locus} · digital copy"), text
    page.evaluate("() => document.querySelector('#ego-panel .ego-layout').scrollIntoView({block: 'start'})")
    shoot(page, 4, "tie")

    # 5. The first citation leads to its document.
    first = citations.first
    attestation = first.get_attribute("data-attestation")
    cited = first.locator("a.source-link").inner_text()
    relation = expected["ties"]["relations"][0]
    source_key = relation["attestations"][0]["source"]["key"]
    first.locator("a.source-link").click()
    page.wait_for_url(f"**/sources/{source_key}")
    expect(page.locator("p.citation")).to_have_text(cited)
    attested = page.locator(f'#attested li.attestation[data-attestation="{attestation}"]')
    expect(attested).to_have_count(1)
    expect(attested.locator('a.person[data-end="a"]')).to_have_text(relation["person_a"]["name"])
    expect(attested.locator('a.person[data-end="b"]')).to_have_text(relation["person_b"]["name"])
    assert {relation["person_a"]["key"], relation["person_b"]["key"]} == {BROKER, PARTNER}
    shoot(page, 5, "source")

    # 6. From the document to the other person it names.
    attested.locator(f'a.person[href$="/persons/{PARTNER}"]').click()
    page.wait_for_url(f"**/persons/{PARTNER}")
    expect(page.locator("h1")).to_contain_text("Jacob ten Brummel")
    back = page.locator(f'table.relations-table[data-kind="letter"] tr[data-other="{BROKER}"]')
    expect(back.first.locator("a.person-link")).to_have_text("Jehan Marteau")
    shoot(page, 6, "other-person")
    assert outside == []
