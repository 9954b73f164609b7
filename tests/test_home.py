"""The front page and its JSON twin, over HTTP against the real app on a real database file."""

from __future__ import annotations

import dataclasses
from typing import Literal

import pytest
from bs4 import BeautifulSoup
from fastapi import HTTPException
from fastapi.testclient import TestClient
from sqlalchemy import text

from app.config import Settings
from app.db import Database, SchemaError
from app.main import create_app
from app.store.summary import DatasetSummary
from app.views.common import BadParameter, Urls
from app.views.home import HomePage
from helpers import TINY_DATA_VERSION, add_tiny_dataset

COUNT_FIELDS = (
    "persons", "relations", "attestations", "sources", "repositories", "collections", "groups", "memberships",
)  # fmt: skip


def client_for(settings: Settings) -> TestClient:
    return TestClient(create_app(settings))


@pytest.fixture
def client(settings: Settings):
    with client_for(settings) as test_client:
        yield test_client


@pytest.fixture
def tiny_client(settings: Settings, database: Database):
    add_tiny_dataset(database)
    with client_for(settings) as test_client:
        yield test_client


def soup_of(response) -> BeautifulSoup:  # noqa: ANN001
    return BeautifulSoup(response.text, "lxml")


# --- the figures --------------------------------------------------------------------------


def test_summary_counts_only_live_evidence(tiny_client: TestClient):
    response = tiny_client.get("/api/summary")
    assert response.status_code == 200
    assert response.headers["content-type"].startswith("application/json")
    body = response.json()
    assert body["empty"] is False
    assert body["summary"] == {
        "persons": 3,
        "relations": 1,  # P2 -> P3 has only a deleted attestation
        "attestations": 3,  # A3 and A5 are deleted
        "sources": 2,
        "repositories": 1,
        "collections": 1,
        "groups": 1,
        "memberships": 1,  # P3's membership has only a deleted attestation
        "earliest": "1650-03-02",  # the deleted A3 (1600-1800) does not widen the period
        "latest": "1702-11-30",
        "data_version": TINY_DATA_VERSION,
        "attestations_by_certainty": {"certain": 2, "probable": 1, "possible": 0},
    }


def test_restoring_an_attestation_brings_its_relation_back(settings: Settings, database: Database):
    add_tiny_dataset(database)
    with database.write() as session:
        session.execute(text("UPDATE attestation SET deleted_at = NULL, deleted_reason = NULL WHERE key = 'A3'"))
    with client_for(settings) as client:
        summary = client.get("/api/summary").json()["summary"]
    assert summary["relations"] == 2
    assert summary["attestations"] == 4
    assert summary["attestations_by_certainty"] == {"certain": 2, "probable": 1, "possible": 1}
    assert (summary["earliest"], summary["latest"]) == ("1600-01-01", "1800-12-31")


def test_empty_dataset_says_so(client: TestClient):
    body = client.get("/api/summary").json()
    assert body["empty"] is True
    assert all(body["summary"][field] == 0 for field in COUNT_FIELDS)
    assert body["summary"]["earliest"] is None and body["summary"]["latest"] is None

    page = soup_of(client.get("/"))
    note = page.select_one("#summary .empty-note")
    assert note is not None
    assert "No evidence yet" in note.get_text()
    assert note.code.get_text() == "attesta import"
    assert page.select_one(".period-none") is not None


def test_page_shows_the_figures_in_their_places(tiny_client: TestClient):
    response = tiny_client.get("/")
    assert response.status_code == 200
    assert response.headers["content-type"].startswith("text/html")
    page = soup_of(response)

    assert page.select_one("#summary .empty-note") is None
    expected = {"persons": 3, "relations": 1, "attestations": 3, "sources": 2, "repositories": 1,
                "collections": 1, "groups": 1, "memberships": 1}  # fmt: skip
    for field, number in expected.items():
        figure = page.select_one(f'dl.counts dd[data-count="{field}"]')
        assert figure is not None, field
        assert figure.get_text(strip=True) == str(number)
        assert figure.find_previous_sibling("dt").get_text(strip=True) == field

    assert page.select_one('time[data-bound="earliest"]')["datetime"] == "1650-03-02"
    assert page.select_one('time[data-bound="latest"]')["datetime"] == "1702-11-30"

    rows = {row["data-certainty"]: row for row in page.select("table.certainty-table tbody tr")}
    assert list(rows) == ["certain", "probable", "possible"]
    assert [rows[grade].select_one("td").get_text(strip=True) for grade in rows] == ["2", "1", "0"]
    assert rows["certain"].select_one("td.share").get_text(strip=True) == "67\u2009%"

    assert page.select_one("footer .data-version").get_text(strip=True) == f"data version {TINY_DATA_VERSION}"
    assert page.select_one("header .product").get_text(strip=True) == "Attesta"


def test_page_and_json_show_the_same_figures(tiny_client: TestClient):
    summary = tiny_client.get("/api/summary").json()["summary"]
    page = soup_of(tiny_client.get("/"))
    shown = {dd["data-count"]: int(dd["data-value"]) for dd in page.select("dl.counts dd[data-count]")}
    assert shown == {field: summary[field] for field in COUNT_FIELDS}


def test_large_counts_are_grouped_by_thousands(settings: Settings, database: Database):
    with database.write() as session:
        session.execute(text(
            "WITH RECURSIVE n(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM n WHERE i < 1234) "
            "INSERT INTO person (key, name, kind, unidentified, living, calendar) "
            "SELECT 'P' || i, 'Person ' || i, 'individual', 0, 0, 'gregorian' FROM n"
        ))  # fmt: skip
    with client_for(settings) as client:
        figure = soup_of(client.get("/")).select_one('dd[data-count="persons"]')
    assert figure["data-value"] == "1234"
    assert figure.get_text(strip=True) == "1\u2009234"


def test_search_box_asks_the_persons_index(client: TestClient):
    form = soup_of(client.get("/")).select_one("form.search")
    assert form["method"].lower() == "get"
    assert form["action"] == "/persons"
    field = form.select_one('input[name="q"]')
    assert field is not None
    assert form.select_one(f'label[for="{field["id"]}"]') is not None


# --- pages and partials ---------------------------------------------------------------------


def test_htmx_request_gets_only_the_figures(tiny_client: TestClient):
    full = tiny_client.get("/")
    partial = tiny_client.get("/", headers={"HX-Request": "true"})
    assert partial.status_code == 200
    assert "HX-Request" in partial.headers["vary"] and "HX-Request" in full.headers["vary"]

    piece = soup_of(partial)
    assert piece.find("header") is None and piece.find("title") is None and piece.find("form") is None
    assert piece.select_one('dd[data-count="persons"]').get_text(strip=True) == "3"
    assert piece.find("body").find().get("id") == "summary"  # lxml wraps a fragment in html/body

    whole = soup_of(full)
    assert whole.select_one("html > head > title") is not None
    assert whole.select_one("main #summary") is not None


def test_boosted_and_history_requests_get_the_whole_page(client: TestClient):
    for extra in ({"HX-Boosted": "true"}, {"HX-History-Restore-Request": "true"}):
        page = soup_of(client.get("/", headers={"HX-Request": "true", **extra}))
        assert page.select_one("header .product") is not None, extra


def test_refresh_link_fetches_the_figures_with_htmx(client: TestClient):
    link = soup_of(client.get("/")).select_one("#summary .as-of a")
    assert link["href"] == "/"  # works without JavaScript too
    assert link["hx-get"] == "/"
    assert link["hx-target"] == "#summary"


# --- errors ---------------------------------------------------------------------------------


def test_unknown_page_is_a_404_page_in_the_site_style(client: TestClient):
    response = client.get("/no/such/page")
    assert response.status_code == 404
    assert response.headers["content-type"].startswith("text/html")
    page = soup_of(response)
    assert page.select_one("main #error h1").get_text(strip=True) == "Not found"
    assert "/no/such/page" in page.select_one("#error .error-detail").get_text()
    assert page.select_one('link[rel="stylesheet"]')["href"] == "/static/attesta.css"
    assert page.select_one("footer .data-version") is not None


def test_unknown_api_route_is_a_json_404(client: TestClient):
    response = client.get("/api/no-such-thing")
    assert response.status_code == 404
    assert response.headers["content-type"].startswith("application/json")
    body = response.json()
    assert set(body) == {"error", "detail"}
    assert body["error"] == "not found"
    assert "/api/no-such-thing" in body["detail"]


def test_wrong_method_says_which_one_is_answered(client: TestClient):
    response = client.post("/api/summary")
    assert response.status_code == 405
    assert response.headers["allow"] == "GET"
    assert response.json()["error"] == "method not allowed"


@pytest.fixture
def probe_client(settings: Settings):
    """An app with routes that fail the way later pages will: a bad parameter, a missing key."""
    app = create_app(settings)

    def sorted_list(sort: Literal["name", "date"] = "name") -> dict:
        return {"sort": sort}

    def ranked(measure: str = "degree") -> dict:
        if measure not in ("degree", "strength"):
            raise BadParameter("measure", measure, ["degree", "strength"])
        return {"measure": measure}

    def person(key: str) -> dict:
        raise HTTPException(status_code=404, detail=f"no person has the key {key}")

    for path, endpoint in (("/probe", sorted_list), ("/api/probe", sorted_list), ("/probe/ranked", ranked),
                           ("/api/probe/ranked", ranked), ("/probe/person/{key}", person)):  # fmt: skip
        app.add_api_route(path, endpoint)
    with TestClient(app) as test_client:
        yield test_client


def test_invalid_parameter_is_a_400_naming_it_and_the_accepted_values(probe_client: TestClient):
    response = probe_client.get("/probe?sort=size")
    assert response.status_code == 400
    detail = soup_of(response).select_one("#error .error-detail").get_text()
    assert "sort=size" in detail and "'name'" in detail and "'date'" in detail
    assert soup_of(response).select_one("#error h1").get_text(strip=True) == "Bad parameter"

    body = probe_client.get("/api/probe?sort=size").json()
    assert body["error"] == "bad parameter"
    assert "sort=size" in body["detail"] and "'name' or 'date'" in body["detail"]


def test_bad_parameter_raised_by_a_view_lists_the_accepted_values(probe_client: TestClient):
    response = probe_client.get("/api/probe/ranked?measure=fame")
    assert response.status_code == 400
    assert response.json() == {
        "error": "bad parameter",
        "detail": "measure=fame is not accepted; accepted: one of degree, strength",
    }
    assert probe_client.get("/probe/ranked?measure=strength").json() == {"measure": "strength"}


def test_not_found_raised_by_a_view_keeps_its_words(probe_client: TestClient):
    response = probe_client.get("/probe/person/X9")
    assert response.status_code == 404
    assert soup_of(response).select_one("#error .error-detail").get_text(strip=True) == "no person has the key X9"


def test_app_refuses_a_database_without_tables(tmp_path):
    settings = Settings(database_url=f"sqlite:///{tmp_path / 'blank.db'}")
    with pytest.raises(SchemaError, match="attesta init"):
        create_app(settings)


def test_app_refuses_a_database_from_a_newer_attesta(settings: Settings, database: Database):
    with database.write() as session:
        session.execute(text("UPDATE alembic_version SET version_num = '2999_01_01_9999'"))
    with pytest.raises(SchemaError, match="newer Attesta"):
        create_app(settings)


# --- escaping, assets, documentation ---------------------------------------------------------


def test_dataset_name_with_markup_is_escaped(settings: Settings):
    name = '<script>alert("x")</script> & Co'
    with client_for(dataclasses.replace(settings, dataset_name=name)) as client:
        response = client.get("/")
        assert client.get("/api/summary").json()["dataset_name"] == name
    assert "<script>alert" not in response.text
    page = soup_of(response)
    assert page.select_one("header .dataset-name").get_text() == name
    assert [script.get("src") for script in page.find_all("script")] == ["/static/htmx.min.js"]


def test_page_uses_only_local_assets(client: TestClient):
    page = soup_of(client.get("/"))
    assets = [tag["src"] for tag in page.find_all("script", src=True)]
    assets += [tag["href"] for tag in page.find_all("link", href=True)]
    assert any(asset.endswith("htmx.min.js") for asset in assets)
    assert any(asset.endswith("attesta.css") for asset in assets)
    for asset in assets:
        assert not asset.startswith(("http://", "https://", "//")), asset
        assert client.get(asset).status_code == 200, asset
    assert not page.find_all("script", src=False)  # no inline script either


def test_vendored_htmx_is_version_2(client: TestClient):
    script = client.get("/static/htmx.min.js").text
    assert 'version:"2.' in script


def test_openapi_documents_the_routes_and_every_field(client: TestClient):
    schema = client.get("/openapi.json").json()
    for path in ("/", "/api/summary"):
        operation = schema["paths"][path]["get"]
        assert operation["summary"] and operation["description"], path
    json_response = schema["paths"]["/api/summary"]["get"]["responses"]["200"]["content"]["application/json"]
    assert json_response["schema"]["$ref"].endswith("/HomePage")

    for model in (HomePage, DatasetSummary):
        properties = schema["components"]["schemas"][model.__name__]["properties"]
        assert set(properties) == {field.name for field in dataclasses.fields(model)}
        undocumented = [name for name, spec in properties.items() if not spec.get("description")]
        assert undocumented == [], model.__name__
    assert "/docs" not in schema["paths"]


def test_interactive_docs_are_not_served(client: TestClient):
    # they would load their scripts from a CDN
    assert client.get("/docs").status_code == 404


def test_urls_builds_paths_under_the_mount_point():
    assert Urls().person("viaf:12 3") == "/persons/viaf:12%203"
    assert Urls().persons(q="Anna Maria") == "/persons?q=Anna+Maria"
    assert Urls("/attesta/").home() == "/attesta/"
    assert Urls("/attesta").static("/htmx.min.js") == "/attesta/static/htmx.min.js"
    assert Urls().api("summary") == "/api/summary"
