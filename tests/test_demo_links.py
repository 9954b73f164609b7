"""Over the whole demo, the links a reader follows lead somewhere that holds what they promise.

Every tie drawn in an ego network links to a ties page that lists its documents; the lines of the
drawing on a person's page carry those links (with the slice); the sources cited on ties pages
open; every person of the index opens. In-process (TestClient), on the demo database built once.
"""

from __future__ import annotations

import random
from collections import defaultdict
from pathlib import Path
from urllib.parse import parse_qsl, urlsplit

import pytest
from bs4 import BeautifulSoup, SoupStrainer
from fastapi.testclient import TestClient

from app.config import Settings, database_url
from app.main import create_app
from app.network.slice import Slice
from app.views.common import Urls

URLS = Urls()
# The persons whose drawings are checked link by link on their pages: the broker, the owner of the
# family archive (the largest drawing, with self-addressed memoranda), the corporate council, the
# editor of the printed letters, and a few more drawn at random with a fixed seed.
DRAWN = ["p-jehan-marteau", "p-matthias-aldersloh", "p-council-of-ambelhaven", "p-remy-quintijn"]
A_SLICE = "kind=letter&from=1690&to=1715&certainty=probable"


def soup(response, only: SoupStrainer | None = None) -> BeautifulSoup:  # noqa: ANN001
    """The page of a 200 response; ``only`` parses just the part a test reads (person pages are long)."""
    assert response.status_code == 200, (response.request.url, response.status_code, response.text[:300])
    return BeautifulSoup(response.text, "lxml", parse_only=only)


def json_of(client: TestClient, url: str) -> dict:
    response = client.get(url)
    assert response.status_code == 200, (url, response.status_code, response.text[:300])
    return response.json()


def words(element) -> str:  # noqa: ANN001
    return " ".join(element.get_text().split())


@pytest.fixture(scope="module")
def client(tmp_path_factory: pytest.TempPathFactory, demo_sqlite):  # noqa: ANN001
    path: Path = demo_sqlite(tmp_path_factory.mktemp("links") / "demo.db")
    with TestClient(create_app(Settings(database_url=database_url(path)))) as test_client:
        yield test_client


@pytest.fixture(scope="module")
def persons(client: TestClient) -> list[dict]:
    """Every row of the persons index (JSON), all pages."""
    rows, number, pages = [], 1, 1
    while number <= pages:
        result = json_of(client, URLS.api(f"persons?page={number}"))["result"]
        rows += result["rows"]
        pages, number = result["pages"], number + 1
    assert len(rows) == result["total"] > 200
    return rows


@pytest.fixture(scope="module")
def egos(client: TestClient, persons: list[dict]) -> dict[str, dict]:
    """The ego network (JSON, radius 1, default slice) of every person, by key."""
    return {p["key"]: json_of(client, URLS.ego_api(p["key"])) for p in persons}


@pytest.fixture(scope="module")
def ties_pages(client: TestClient, egos: dict[str, dict]) -> dict[str, dict]:
    """The ties JSON behind every distinct link of every tie drawn, by link (each fetched once)."""
    links = {URLS.ties(e["source"], e["target"], Slice()) for ego in egos.values() for e in ego["edges"]}
    return {link: json_of(client, "/api" + link) for link in sorted(links)}


def test_every_person_with_a_tie_has_it_drawn(persons: list[dict], egos: dict[str, dict]):
    for person in persons:
        key = person["key"]
        others = {e["source"] if e["target"] == key else e["target"]
                  for e in egos[key]["edges"] if key in (e["source"], e["target"])} - {key}  # fmt: skip
        # "persons related" in the index and the alters drawn in the default slice agree (no hub is capped here).
        assert len(others) == person["degree"], key
    assert sum(1 for p in persons if egos[p["key"]]["edges"]) > 200


def test_every_tie_drawn_links_to_its_documents(egos: dict[str, dict], ties_pages: dict[str, dict]):
    checked = 0
    for key, ego in egos.items():
        for edge in ego["edges"]:
            link = URLS.ties(edge["source"], edge["target"], Slice())
            page = ties_pages[link]
            where = f"{key}: {edge['source']} -> {edge['target']} ({edge['kind']}) at {link}"
            assert (page["a"]["key"], page["b"]["key"]) == (edge["source"], edge["target"]), where
            relations = {r["relation_id"]: r for r in page["ties"]["relations"]}
            assert edge["relation_ids"] and set(edge["relation_ids"]) <= set(relations), where
            listed = [att for rid in edge["relation_ids"] for att in relations[rid]["attestations"]]
            assert len(listed) == edge["attestations"] >= 1, where
            assert {relations[rid]["kind_key"] for rid in edge["relation_ids"]} == {edge["kind"]}, where
            if len(edge["relation_ids"]) == 1:
                assert relations[edge["relation_ids"][0]]["counts"]["documents"] == edge["documents"], where
            checked += 1
    assert checked > 1000 and len(ties_pages) > 500  # every tie of every ego, not a few


def _drawn_links(page: BeautifulSoup) -> dict[tuple[str, str, str], str]:
    links = {}
    for a in page.select("svg.ego-svg a.ego-edge"):
        # htmx inherits the target from the edges' group
        assert a["hx-get"] == a["href"] and a.find_parent("g", class_="ego-edges")["hx-target"] == "#tie-panel"
        links[(a["data-source"], a["data-target"], a["data-kind"])] = a["href"]
    return links


@pytest.mark.parametrize("query", ["", A_SLICE], ids=["default-slice", "a-slice"])
def test_the_lines_on_person_pages_link_to_their_documents(
    client: TestClient, persons: list[dict], ties_pages: dict[str, dict], query: str
):
    others = sorted(p["key"] for p in persons if p["degree"] and p["key"] not in DRAWN)
    keys = DRAWN + random.Random(1702).sample(others, 6)
    slice_ = Slice.from_query(parse_qsl(query))
    suffix = f"?{query}" if query else ""
    lines = 0
    for key in keys:
        ego = json_of(client, f"/api/persons/{key}/ego{suffix}")
        edges = {(e["source"], e["target"], e["kind"]): e for e in ego["edges"]}
        drawn = _drawn_links(soup(client.get(f"/persons/{key}{suffix}"), SoupStrainer("svg", class_="ego-svg")))
        assert drawn == {(s, t, kind): URLS.ties(s, t, slice_) for s, t, kind in edges}, key
        for line, link in drawn.items():
            assert sorted(parse_qsl(urlsplit(link).query)) == sorted(parse_qsl(query)), link  # the slice is kept
            ties = (ties_pages[link] if not query else json_of(client, "/api" + link))["ties"]
            ids = edges[line]["relation_ids"]
            listed = [att for r in ties["relations"] if r["relation_id"] in ids for att in r["attestations"]]
            assert len(listed) == edges[line]["attestations"] >= 1, (key, link)
            lines += 1
    assert lines > 100


def test_the_sources_cited_on_ties_pages_open(client: TestClient, ties_pages: dict[str, dict]):
    sample = random.Random(1688).sample(sorted(ties_pages), 30)
    cited: dict[str, set[str]] = defaultdict(set)  # href -> the citation texts that link there
    for link in sample:
        page = soup(client.get(link))
        relations = ties_pages[link]["ties"]["relations"]
        expected = [URLS.source(att["source"]["key"]) for r in relations for att in r["attestations"]]
        assert [a["href"] for a in page.select("#ties a.source-link")] == expected, link
        for a in page.select("#ties a.source-link"):
            cited[a["href"]].add(words(a))
        for a in page.select("#ties a.original-link"):  # a copy's original: it must open too
            cited.setdefault(a["href"], set())
    assert len(cited) > 50  # documents from all 30 pages, not a handful
    for href, texts in cited.items():
        document = soup(client.get(href))
        citation = words(document.select_one("p.citation"))
        assert all(text == citation for text in texts), (href, texts, citation)
        assert document.select("#attested li.attestation"), href  # the document attests something


def test_every_person_in_the_index_opens(client: TestClient, persons: list[dict]):
    links: dict[str, str] = {}
    page_url: str | None = URLS.persons()
    while page_url:
        index = soup(client.get(page_url))
        for a in index.select("#person-rows a.person-link"):
            links[a["href"]] = words(a)
        following = index.select_one("#person-rows nav.pagination a[rel=next]")
        page_url = following["href"] if following else None
    assert sorted(links) == sorted(URLS.person(p["key"]) for p in persons)
    for href, name in links.items():
        person = soup(client.get(href, follow_redirects=False), SoupStrainer("h1"))
        assert words(person.select_one("h1#person-heading")).startswith(name), href
