"""The page of one place over HTTP, on small_world() imported for real, with a few more rows."""

from __future__ import annotations

import dataclasses

import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient

from app.main import create_app
from app.store import places as store
from app.views.places import PlacePage
from test_sources import build
from workbooks import small_world


def with_more_places() -> dict[str, list[dict[str, str]]]:
    """small_world() with a place named with markup, a fact located there and a letter received there."""
    world = small_world()
    world["places.csv"] += [
        {"key": "pl-kell", "name": "Kell <b>&</b> Mark", "variants": "Kel|<i>Kell</i>", "latitude": "-33.25",
         "longitude": "151.0", "identifier": "local:<k1>"},
    ]  # fmt: skip
    world["sources.csv"].append(
        {"key": "s-k", "kind": "letter", "title": "To Kell", "date": "1705", "place_from": "pl-ostmere", "place_to": "pl-kell"}
    )
    world["facts.csv"] += [
        {"key": "f-k1", "person": "p-anna", "fact": "residence", "value": "by the mill", "place": "pl-kell",
         "date": "1705", "source": "s-k"},
        {"key": "f-k2", "person": "p-anna", "fact": "residence", "value": "by the mill", "place": "pl-kell",
         "date": "1705", "source": "s-ed"},
        {"key": "f-k3", "person": "p-jost", "fact": "death", "value": "", "place": "pl-kell", "source": "s-k"},
    ]  # fmt: skip
    world["relations.csv"].append(
        {"key": "r-k", "person": "p-anna", "other": "p-council", "kind": "letter", "source": "s-k", "place": "pl-kell"}
    )
    return world


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    settings = build(tmp_path_factory.mktemp("places"), with_more_places(), deleted=("f-k3",))
    with TestClient(create_app(settings)) as test_client:
        yield test_client


def soup_of(response) -> BeautifulSoup:  # noqa: ANN001
    assert response.status_code == 200, response.text
    return BeautifulSoup(response.text, "lxml")


def sources_in(page: BeautifulSoup, section: str) -> list[str]:
    return [row["data-source"] for row in page.select(f"section#{section} table.source-table tbody tr")]


def test_place_lists_documents_written_and_received_there(client: TestClient):
    # small_world(): s-1 was written at Harwick and received at Ostmere; s-k (added) was written
    # at Ostmere and received at Kell.
    harwick = soup_of(client.get("/places/pl-harwick"))
    assert sources_in(harwick, "written") == ["s-1"]
    assert sources_in(harwick, "received") == []
    ostmere = soup_of(client.get("/places/pl-ostmere"))
    assert sources_in(ostmere, "written") == ["s-k"]
    assert sources_in(ostmere, "received") == ["s-1"]
    assert ostmere.select_one('section#received tr[data-source="s-1"] a')["href"] == "/sources/s-1"

    api = client.get("/api/places/pl-ostmere").json()
    assert [r["key"] for r in api["written"]["rows"]] == ["s-k"]
    assert [r["key"] for r in api["received"]["rows"]] == ["s-1"]
    assert api["received"]["total"] == 1


def test_place_shows_name_variants_coordinates_and_identifier(client: TestClient):
    harwick = soup_of(client.get("/places/pl-harwick"))
    assert harwick.select_one("h1").get_text() == "Harwick"
    assert [li.get_text() for li in harwick.select('dd[data-field="variants"] li')] == ["Harwyck", "Harwic"]
    assert float(harwick.select_one("data.latitude")["value"]) == 51.5
    assert float(harwick.select_one("data.longitude")["value"]) == 7.25
    assert harwick.select_one('dd[data-field="identifier"]') is None  # none recorded

    kell = soup_of(client.get("/places/pl-kell"))
    assert float(kell.select_one("data.latitude")["value"]) == -33.25
    assert kell.select_one('dd[data-field="identifier"]').get_text() == "local:<k1>"
    # No map, no picture, nothing fetched from elsewhere.
    assert kell.find("img") is None and kell.find("iframe") is None
    for tag in kell.find_all(src=True) + kell.find_all("link", href=True):
        assert tag.get("src", tag.get("href")).startswith("/static/")


def test_place_shows_facts_groups_and_repositories_located_there(client: TestClient):
    harwick = soup_of(client.get("/places/pl-harwick"))
    assert [li["data-group"] for li in harwick.select("section#groups li")] == ["g-society"]
    assert harwick.select_one('section#groups a')["href"] == "/groups/g-society"
    assert [li["data-repository"] for li in harwick.select("section#repositories li")] == ["rep-harwick"]

    ostmere = soup_of(client.get("/places/pl-ostmere"))
    facts = ostmere.select("section#facts tbody tr")
    assert len(facts) == 1  # f-1: Jost was a printer in Ostmere, says s-1
    cells = [td.get_text(strip=True) for td in facts[0].find_all("td")]
    assert cells == ["Jost Brenner", "occupation", "printer", "1703", "s-1"]
    assert facts[0].select_one("a")["href"] == "/persons/p-jost"


def test_one_fact_attested_twice_is_listed_once_and_a_deleted_one_not_at_all(client: TestClient):
    kell = soup_of(client.get("/places/pl-kell"))
    facts = kell.select("section#facts tbody tr")
    # f-k1 and f-k2 attest the same residence in two documents; f-k3 (a death) is deleted.
    assert len(facts) == 1
    assert [a.get_text() for a in facts[0].select("td:last-child a")] == ["s-ed", "s-k"]
    api = client.get("/api/places/pl-kell").json()["place"]
    assert [(f["person"]["key"], f["fact"], f["sources"]) for f in api["facts"]] == [("p-anna", "residence", ["s-ed", "s-k"])]
    assert api["attestations"] == 1  # r-k names Kell as its place


def test_markup_in_a_place_is_shown_as_text(client: TestClient):
    response = client.get("/places/pl-kell")
    assert "<b>&</b>" not in response.text and "<i>Kell</i>" not in response.text
    page = soup_of(response)
    assert page.select_one("h1").get_text() == "Kell <b>&</b> Mark"
    assert [li.get_text() for li in page.select('dd[data-field="variants"] li')] == ["Kel", "<i>Kell</i>"]
    assert client.get("/api/places/pl-kell").json()["place"]["name"] == "Kell <b>&</b> Mark"


def test_links_from_a_place_keep_the_slice(client: TestClient):
    page = soup_of(client.get("/places/pl-ostmere", params={"kind": "letter"}))
    assert page.select_one("section#facts a")["href"] == "/persons/p-jost?kind=letter"
    assert client.get("/places/pl-ostmere", params={"loops": "sometimes"}).status_code == 400


def test_many_documents_link_to_the_full_list(tmp_path):
    world = small_world()
    world["sources.csv"] += [
        {"key": f"s-h{n:02}", "kind": "letter", "title": f"Letter {n}", "date": "1710", "place_from": "pl-harwick"}
        for n in range(60)
    ]
    with TestClient(create_app(build(tmp_path, world))) as client:
        page = soup_of(client.get("/places/pl-harwick"))
        assert len(sources_in(page, "written")) == 50
        more = page.select_one("section#written p.more a")
        assert more["href"] == "/sources?place_from=pl-harwick"
        assert "61" in more.get_text()
        assert client.get("/api/sources", params={"place_from": "pl-harwick"}).json()["results"]["total"] == 61
        assert page.select_one("section#received p.more") is None


def test_unknown_place_is_a_404_page(client: TestClient):
    response = client.get("/places/pl-atlantis")
    assert response.status_code == 404
    page = BeautifulSoup(response.text, "lxml")
    assert "pl-atlantis" in page.select_one("#error .error-detail").get_text()
    assert page.select_one("header .product") is not None
    assert client.get("/api/places/pl-atlantis").json()["error"] == "not found"


def test_place_route_and_fields_are_documented(client: TestClient):
    schema = client.get("/openapi.json").json()
    for route in ("/places/{key}", "/api/places/{key}"):
        operation = schema["paths"][route]["get"]
        assert operation["summary"] and operation["description"], route
    for model in (PlacePage, store.PlaceDetail, store.LocatedFact, store.GroupAtPlace, store.RepositoryAtPlace):
        properties = schema["components"]["schemas"][model.__name__]["properties"]
        assert set(properties) == {f.name for f in dataclasses.fields(model)}, model.__name__
        assert [n for n, spec in properties.items() if not spec.get("description")] == [], model.__name__
