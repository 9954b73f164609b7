"""The export page in a real headless Chromium served by a real uvicorn: every file of a slice, downloaded and read.

What arrives is read by tools outside Attesta: the GraphML by networkx (``nx.read_graphml``) and
checked against the published GraphML 1.0 schema (tests/graphml/), the CSV tables by Python's
csv module, the CSL-JSON against the published CSL data schema (tests/csl/), the SVG by lxml as
SVG 1.1 (namespace http://www.w3.org/2000/svg) and the PNG by its signature and IHDR chunk
(PNG specification, W3C / RFC 2083).
"""

from __future__ import annotations

import csv
import io
import json
import struct
from pathlib import Path

import networkx as nx
import pytest
from lxml import etree
from playwright.sync_api import Browser, Page, expect

from app.config import database_url
from app.exchange.workbook import import_workbook
from app.network.results import get_or_compute
from app.network.slice import Slice
from conftest import ARTIFACTS, open_page
from helpers import running_server
from tests.test_graphml import graphml_schema
from tests.test_snapshot import csl_schema
from tests.workbooks import small_world, write_workbook

pytestmark = pytest.mark.browser
SVG = "{http://www.w3.org/2000/svg}"


def download(page: Page, click, folder: Path) -> tuple[str, bytes]:  # noqa: ANN001
    """Click, wait for the download Chromium makes of it, return its file name and bytes."""
    with page.expect_download() as info:
        click()
    got = info.value
    assert got.failure() is None, got.failure()
    target = folder / got.suggested_filename
    got.save_as(target)
    return got.suggested_filename, target.read_bytes()


def test_every_file_of_a_slice_downloads_from_the_export_page_and_reads_in_other_tools(
        browser: Browser, db_path: Path, database, tmp_path: Path):
    ARTIFACTS.mkdir(exist_ok=True)
    import_workbook(database, write_workbook(tmp_path / "wb", small_world()), size_limit=200 * 1024 * 1024)
    letters = Slice.from_query([("kind", "letter")])
    get_or_compute(database, measure="degree", slice=letters)  # a computed measure travels with the persons
    got = tmp_path / "downloads"
    got.mkdir()
    with running_server(database_url(db_path)) as base_url:
        page, outside = open_page(browser, base_url)
        page.goto(f"{base_url}/network/summary?kind=letter")
        page.locator('.exports a[data-export="page"]').click()
        expect(page).to_have_url(f"{base_url}/export?kind=letter")
        expect(page.locator(".slice-line")).to_contain_text("letter")
        page.screenshot(path=str(ARTIFACTS / "export-page.png"), full_page=True)
        files = page.locator(".export-files")
        version = page.locator(".dataset-hash").inner_text()  # the dataset version the page asks a paper to cite
        assert len(version) == 64

        name, data = download(page, lambda: files.get_by_role("link", name="GraphML").click(), got)
        assert name == "slice.graphml"
        schema = graphml_schema()  # the published GraphML 1.0 schema
        assert schema.validate(etree.fromstring(data)), schema.error_log
        G = nx.read_graphml(io.BytesIO(data))  # networkx is the reference reader
        assert G.is_directed() and set(G) == {"p-anna", "p-jost", "p-council"}
        assert {d["kind"] for _, _, d in G.edges(data=True)} == {"letter"}  # the slice: letters only
        assert G.nodes["p-anna"]["name"] == "Anna Vell" and G.nodes["p-anna"]["born"] == "1680~"
        # the stored degree is networkx's degree of the same graph, undirected view (ties counted once)
        undirected = G.to_undirected()
        assert {n: G.nodes[n]["degree"] for n in G} == pytest.approx(nx.degree_centrality(undirected))

        _, persons = download(page, lambda: files.get_by_role("link", name="Persons (CSV)").click(), got)
        rows = list(csv.DictReader(io.StringIO(persons.decode("utf-8"))))
        assert {r["key"] for r in rows} == set(G) and {r["key"]: r["name"] for r in rows}["p-jost"] == G.nodes["p-jost"]["name"]
        _, ties = download(page, lambda: files.get_by_role("link", name="Ties (CSV)").click(), got)
        edges = list(csv.reader(io.StringIO(ties.decode("utf-8"))))
        header, body = edges[0], edges[1:]
        assert len(body) == G.number_of_edges()
        for row in body:
            tie = dict(zip(header, row))
            assert float(tie["weight"]) == G.edges[row[0], row[1]]["weight"]
            assert tie["source_keys"] == G.edges[row[0], row[1]]["source_keys"]
        _, matrix = download(page, lambda: files.get_by_role("link", name="Adjacency matrix (CSV)").click(), got)
        cells = list(csv.reader(io.StringIO(matrix.decode("utf-8"))))
        keys = cells[0][1:]
        expected = nx.to_numpy_array(G, nodelist=keys, weight="weight")  # networkx's adjacency matrix
        assert [[float(v) for v in row[1:]] for row in cells[1:]] == expected.tolist()

        _, sources = download(page, lambda: files.get_by_role("link", name="Sources (CSL-JSON)").click(), got)
        items = json.loads(sources)
        validator = csl_schema()  # the published CSL data schema
        assert not list(validator.iter_errors(items)), [e.message for e in validator.iter_errors(items)]
        cited = {k for _, _, d in G.edges(data=True) for k in d["source_keys"].split("|")}
        assert {item["id"] for item in items} == cited
        assert {item["type"] for item in items} <= {"manuscript", "book"}

        page.get_by_label("Person (key)").fill("p-anna")
        name, svg = download(page, lambda: page.get_by_role("button", name="Drawing as SVG").click(), got)
        drawing = etree.fromstring(svg)
        assert drawing.tag == f"{SVG}svg" and name.startswith("ego-p-anna")
        caption = " ".join(t for t in drawing.itertext())
        assert "Anna Vell" in caption and "Slice:" in caption and "letter" in caption
        assert f"dataset version {version[:16]}" in caption  # the drawing names the version the page cites
        assert len(drawing.findall(f".//{SVG}circle")) + len(drawing.findall(f".//{SVG}rect")) >= 3
        name, png = download(page, lambda: page.get_by_role("button", name="Drawing as PNG").click(), got)
        assert png[:8] == b"\x89PNG\r\n\x1a\n" and png[12:16] == b"IHDR"  # PNG signature, then the IHDR chunk
        width, height = struct.unpack(">II", png[16:24])
        assert width > 100 and height > 100 and name.endswith(".png")
        (ARTIFACTS / "export-ego.png").write_bytes(png)
        assert outside == []
