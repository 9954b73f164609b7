"""Data from workbooks never runs in a browser or a spreadsheet, and odd requests get 4xx, not 500."""

from __future__ import annotations

import csv
import io

import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient

from app.config import Settings, database_url
from app.exchange.workbook import import_workbook
from app.main import create_app
from tests.workbooks import small_world, write_workbook


@pytest.fixture
def client(database, db_path, tmp_path):
    world = small_world()
    world["sources.csv"][0]["url"] = "javascript:alert(document.domain)"
    world["sources.csv"][1]["url"] = "https://example.org/vfp/1-2"
    world["persons.csv"][1]["name"] = '=HYPERLINK("https://example.org","click")'
    import_workbook(database, write_workbook(tmp_path / "wb", world), size_limit=10**9)
    return TestClient(create_app(Settings(database_url=database_url(db_path), allowed_hosts=("archive.example",))))


def test_only_web_addresses_become_links(client):
    page = BeautifulSoup(client.get("/ties/p-anna/p-jost").text, "html.parser")
    links = [a["href"] for a in page.select("a.source-url")]
    assert links and all(href.startswith("https://") for href in links)
    assert not page.select('a[href^="javascript:"]')


def test_table_downloads_do_not_start_with_a_formula(client):
    text = client.get("/network/centrality?measure=degree&format=csv").text
    names = [row["name"] for row in csv.DictReader(io.StringIO(text))]
    assert "'" + '=HYPERLINK("https://example.org","click")' in names
    assert not any(name.startswith("=") for name in names)


def test_redirect_of_an_old_key_stays_on_this_site(client, database):
    from app.models import Person, PersonAlias
    from sqlalchemy import select

    with database.write() as session:
        jost = session.scalar(select(Person).where(Person.key == "p-jost"))
        session.add(PersonAlias(key="p-jost-old", person_id=jost.id))
    response = client.get("/persons/p-jost-old?kind=letter", headers={"Host": "archive.example"}, follow_redirects=False)
    assert response.status_code == 308
    assert response.headers["location"] == "/persons/p-jost?kind=letter"


@pytest.mark.parametrize("path", [
    "/relations/99999999999999999999",
    "/sources?page=999999999999999999",
    "/persons?page=999999999999999999",
])
def test_huge_numbers_are_refused_not_crashed_on(client, path):
    response = client.get(path)
    assert response.status_code in (400, 404), response.text
