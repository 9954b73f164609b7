"""Markup typed into any editable field is shown as text on every page where it appears, HTML and SVG."""

from __future__ import annotations

import re

import pytest
from fastapi.testclient import TestClient

from app.main import create_app
from helpers import add_tiny_dataset

MARK = '<script>alert("x")</script><img src=x onerror=alert(1)>'
ESCAPED = "&lt;script&gt;"


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    from app.config import Settings, database_url
    from app.db import Database, upgrade

    path = tmp_path_factory.mktemp("xss") / "xss.db"
    database = Database(database_url(path))
    upgrade(database)
    add_tiny_dataset(database)
    database.dispose()
    with TestClient(create_app(Settings(database_url=database_url(path)))) as test_client:
        token = re.search(r'name="csrf_token" value="([^"]+)"', test_client.get("/new/person").text).group(1)

        def post(path: str, /, **data: str) -> None:
            answer = test_client.post(path, data={"csrf_token": token, **data}, follow_redirects=False)
            assert answer.status_code == 303, answer.text

        post("/new/person", key="PX", name=f"Name {MARK}", sort_name=f"Sort {MARK}", variants=f"Variant {MARK}",
             identifiers=f"local:{MARK}", note=f"Note {MARK}")
        post("/new/source", key="SX", new_repository_key="RX", new_repository_name=f"Repository {MARK}",
             new_collection_key="RX.C", new_collection_name=f"Collection {MARK}", reference=f"Ref {MARK}",
             kind=f"Kind {MARK}", title=f"Title {MARK}", author=f"Author {MARK}", note=f"Source note {MARK}")
        post("/new/relation", person="PX", other="P1", kind="letter", source="SX", locus=f"Locus {MARK}",
             quote=f"Quote {MARK}", note=f"Att note {MARK}", person_as_written=f"Written {MARK}",
             other_as_written=f"Other written {MARK}")
        post("/new/membership", person="PX", group="G1", role=f"Role {MARK}", start="1701", source="SX",
             locus=f"Member locus {MARK}", quote=f"Member quote {MARK}")
        post("/persons/PX/links", other="P2", note=f"Link note {MARK}")
        yield test_client


PAGES = [
    "/persons/PX", "/persons/P1", "/persons/P2", "/persons?q=Name", "/persons/PX/ego", "/persons/PX/edit",
    "/ties/PX/P1", "/relations/3", "/sources/SX", "/sources", "/sources/SX/edit", "/repositories", "/repositories/RX",
    "/collections/RX.C", "/groups/G1", "/memberships/3", "/merge?kept=P2&absorbed=PX", "/persons/PX/split",
]


@pytest.mark.parametrize("path", PAGES)
def test_markup_is_text_on_every_page(client, path):
    answer = client.get(path)
    assert answer.status_code == 200, answer.text[:300]
    assert "<script>alert" not in answer.text
    assert "<img src=x" not in answer.text
    assert ESCAPED in answer.text or "&lt;img" in answer.text, f"the typed text does not appear on {path}"


def test_markup_is_text_in_the_ego_drawing_file(client):
    for path in ("/persons/PX/ego.svg", "/persons/P1/ego.svg"):
        svg = client.get(path).text
        assert "<script" not in svg and "onerror" not in svg.replace("onerror=alert(1)&gt;", "")
        assert "Name &lt;script&gt;" in svg


def test_markup_is_text_in_the_audit_entries(client):
    entries = client.get("/api/audit").json()["changes"]["rows"]
    shown = 0
    for entry in entries:
        page = client.get(f"/audit/{entry['id']}").text
        assert "<script>alert" not in page and "<img src=x" not in page
        shown += ESCAPED in page
    assert shown >= 5  # person, repository, collection, source, attestations, membership, link
