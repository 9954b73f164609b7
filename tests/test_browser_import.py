"""Importing in a real headless Chromium served by a real uvicorn: problems, fix, preview, confirm, find."""

from __future__ import annotations

from pathlib import Path

import pytest
from playwright.sync_api import Browser, expect

from app.config import database_url
from conftest import ARTIFACTS, open_page
from helpers import running_server
from tests.workbooks import small_world, write_workbook

pytestmark = pytest.mark.browser


def test_upload_with_two_errors_fix_preview_confirm_and_find(browser: Browser, db_path: Path, database, tmp_path: Path):
    ARTIFACTS.mkdir(exist_ok=True)
    world = small_world()
    world["persons.csv"].append({"key": "p-greet", "name": "Greet Tessel", "born": "about 1690"})  # line 6
    world["relations.csv"][1]["kind"] = "lettre"  # line 3
    broken = write_workbook(tmp_path / "broken", world)
    with running_server(database_url(db_path)) as base_url:
        page, outside = open_page(browser, base_url)
        page.goto(f"{base_url}/")
        page.locator(".site-nav").get_by_role("link", name="Import").click()
        expect(page).to_have_url(f"{base_url}/import")
        page.get_by_label("Files").set_input_files(sorted(str(p) for p in broken.iterdir()))
        page.get_by_role("button", name="Upload and preview").click()

        problems = page.locator("table.problems tr.problem")
        expect(problems).to_have_count(2, timeout=20_000)
        expect(page.locator("#problems-heading")).to_contain_text("2 problems")
        seen = {(row.locator(".file").inner_text(), row.locator(".line").inner_text(), row.locator(".column").inner_text())
                for row in problems.all()}
        assert seen == {("persons.csv", "6", "born"), ("relations.csv", "3", "kind")}
        page.screenshot(path=str(ARTIFACTS / "import-problems.png"), full_page=True)

        world["persons.csv"][-1]["born"] = "1690~"
        world["relations.csv"][1]["kind"] = "letter"
        fixed = write_workbook(tmp_path / "fixed", world)
        page.get_by_role("link", name="Upload another workbook").click()
        page.get_by_label("Files").set_input_files(sorted(str(p) for p in fixed.iterdir()))
        page.get_by_role("button", name="Upload and preview").click()

        expect(page.locator("#preview-heading")).to_be_visible(timeout=20_000)
        expect(page.locator('tr[data-kind="persons"] .added')).to_have_text("5")
        page.screenshot(path=str(ARTIFACTS / "import-preview.png"), full_page=True)
        page.get_by_role("button", name="Confirm the import").click()
        expect(page.locator(".import-status .done")).to_contain_text("Imported", timeout=30_000)

        page.goto(f"{base_url}/persons?q=Greet")
        expect(page.locator("#person-rows tbody tr").first).to_contain_text("Greet Tessel")
        assert outside == []


def test_upload_tei_letters_and_a_graphml_graph_preview_confirm_and_find(browser: Browser, db_path: Path, database,
                                                                      tmp_path: Path):
    import networkx as nx

    ARTIFACTS.mkdir(exist_ok=True)
    letter = Path(__file__).resolve().parent / "tei" / "letter_single.xml"  # TEI P5 2.4.6 correspDesc shape
    G = nx.DiGraph()
    G.add_node("p-jost", name="Jost Brenner")  # the addressee of the letter, by its persName/@key
    G.add_node("p-ida", name="Ida Marrow", born="1690")
    G.add_edge("p-ida", "p-jost", weight=2.0)
    graph = tmp_path / "colleague.graphml"
    nx.write_graphml(G, graph)  # networkx's writer, the reference
    title = "graph received from a colleague, file colleague.graphml"
    with running_server(database_url(db_path)) as base_url:
        page, outside = open_page(browser, base_url)
        page.goto(f"{base_url}/import")
        page.get_by_label("Files").set_input_files(str(letter))
        page.get_by_role("button", name="Upload and preview").click()
        expect(page.locator("#preview-heading")).to_be_visible(timeout=20_000)
        expect(page.locator('tr[data-kind="persons"] .added')).to_have_text("2")
        expect(page.locator('tr[data-kind="sources"] .added')).to_have_text("1")
        expect(page.locator('tr[data-kind="relations"] .added')).to_have_text("1")
        page.screenshot(path=str(ARTIFACTS / "import-tei-preview.png"), full_page=True)
        page.get_by_role("button", name="Confirm the import").click()
        expect(page.locator(".import-status .done")).to_contain_text("Imported", timeout=30_000)
        page.goto(f"{base_url}/persons?q=Anne")
        expect(page.locator("#person-rows tbody tr").first).to_contain_text("Anne Vel")

        page.goto(f"{base_url}/import")
        page.get_by_label("Files").set_input_files(str(graph))
        page.get_by_role("button", name="Upload and preview").click()
        expect(page.locator("#source-heading")).to_contain_text("colleague.graphml", timeout=20_000)
        page.screenshot(path=str(ARTIFACTS / "import-graphml-source.png"), full_page=True)
        page.get_by_label("Source of the graph").fill(title)
        page.get_by_role("button", name="Name the source and preview").click()
        expect(page.locator("#preview-heading")).to_be_visible(timeout=20_000)
        # Ida is new; Jost is the person the letter brought in, matched by key
        expect(page.locator('tr[data-kind="persons"] .added')).to_have_text("1")
        expect(page.locator('tr[data-kind="persons"] .unchanged')).to_have_text("1")
        expect(page.locator("q.graph-source")).to_have_text(title)
        page.screenshot(path=str(ARTIFACTS / "import-graphml-preview.png"), full_page=True)
        page.get_by_role("button", name="Confirm the import").click()
        expect(page.locator(".import-status .done")).to_contain_text("Imported", timeout=30_000)

        page.goto(f"{base_url}/persons?q=Ida")
        expect(page.locator("#person-rows tbody tr").first).to_contain_text("Ida Marrow")
        page.locator("#person-rows tbody tr").first.get_by_role("link").first.click()
        expect(page.locator("main")).to_contain_text("Jost Brenner")  # the graph's tie, on Ida's page
        assert outside == []
