"""The ties between two persons in a slice, and the relation page, over HTTP on a real imported database.

The evidence between Anna Vell and Jost Brenner in tests/workbooks.small_world(), on paper:

    r-1        letter Anna -> Jost   s-1 fol. 1r   original  1703-05-12          certain
    r-2        letter Jost -> Anna   s-2           original  1703-06-01 Julian   certain
    r-3        letter Jost -> Anna   s-2c          copy      (s-2c copies s-2)   certain
    sibling    Anna - Jost           s-ed          original  1704? = 1703-1705   certain (blank)
    sibling    Anna - Jost           s-1 fol. 1v   original  1703-05-12          possible

Five attestations; three documents (s-1; s-2 with its copy s-2c; the edition s-ed), one of the
attestations a copy, none known from mentions; s-1, s-2 and s-2c lie in one collection (col-vell),
s-ed is printed; the dates run from 1703 to 1705 (1704? widens by a year each way).
"""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient
from sqlalchemy import select, text

from app.config import Settings, database_url
from app.db import Database
from app.main import create_app
from app.models import Person
from app.store.ties import RelationEvidence, TiesBetween
from app.views.ties import RelationPage, TiesPage
from tests.evidence_world import XSS_NAME, XSS_QUOTE, XSS_WRITTEN, world, world_file  # noqa: F401 - fixtures



def soup_of(response) -> BeautifulSoup:  # noqa: ANN001
    return BeautifulSoup(response.text, "lxml")


@pytest.fixture(scope="module")
def client(world_file: Path):
    """One app on the evidence world for the tests that only read (an app builds its schemas once)."""
    with TestClient(create_app(Settings(database_url=database_url(world_file)))) as test_client:
        yield test_client


@pytest.fixture
def own_client(world: Database):
    """An app on a copy of the evidence world, for a test that writes to it."""
    with TestClient(create_app(Settings(database_url=world.url))) as test_client:
        yield test_client


def words(element) -> str:  # noqa: ANN001
    """The text of an element as a reader sees it: words separated by single spaces."""
    return " ".join(element.get_text().split())


def attestation_keys(page: BeautifulSoup) -> list[str]:
    return [li["data-attestation"] for li in page.select("li.attestation")]


def kept_keys(client: TestClient, query: str = "") -> list[str]:
    body = client.get(f"/api/ties/p-anna/p-jost{query}").json()
    return sorted(att["key"] for rel in body["ties"]["relations"] for att in rel["attestations"])


def sibling_keys(client: TestClient) -> dict[str, str]:
    """The generated keys of the two sibling attestations, by their source."""
    body = client.get("/api/ties/p-anna/p-jost?kind=sibling").json()
    return {att["source"]["key"]: att["key"] for rel in body["ties"]["relations"] for att in rel["attestations"]}


# --- what the page lists ----------------------------------------------------------------------


def test_ties_page_lists_every_attestation_between_the_two(client: TestClient):
    response = client.get("/ties/p-anna/p-jost")
    assert response.status_code == 200
    page = soup_of(response)
    siblings = sibling_keys(client)
    assert sorted(attestation_keys(page)) == sorted(["r-1", "r-2", "r-3", siblings["s-ed"], siblings["s-1"]])

    line = words(page.select_one("#ties .count-line"))
    assert line == "Attested by 3 documents (1 a copy) in 1 collection and 1 printed source, 1703–1705; 5 attestations."
    assert page.select_one("#ties .count-line [data-documents]")["data-documents"] == "3"
    assert page.select_one(".left-out") is None  # the default slice leaves nothing out here

    relations = page.select("section.tie-relation")
    assert [(s["data-kind"], attestation_keys(s)) for s in relations] == [
        ("letter", ["r-1"]),
        ("letter", ["r-2", "r-3"]),
        ("sibling", [siblings["s-ed"], siblings["s-1"]]),  # date order: 1703-01-01 before 1703-05-12
    ]
    headings = [s.select_one(".tie-relation-heading .tie-direction").get_text(" ", strip=True) for s in relations]
    assert headings == [
        "Anna Vell (sender) → Jost Brenner (recipient)",
        "Jost Brenner (sender) → Anna Vell (recipient)",
        "Anna Vell and Jost Brenner",
    ]


def test_each_attestation_is_a_full_citation(client: TestClient):
    page = soup_of(client.get("/ties/p-anna/p-jost"))
    first = page.select_one('li[data-attestation="r-1"]')
    link = first.select_one("a.source-link")
    assert link["href"] == "/sources/s-1"
    assert link.get_text() == "Harwick Town Archive, Vell family papers, VFP 1/1"
    assert first.select_one(".locus").get_text() == "fol. 1r"
    assert first.select_one(".evidence").get_text(strip=True) == "original"
    assert first.select_one(".date-written").get_text() == "1703-05-12"
    assert first.select_one(".certainty").get_text() == "certain"
    assert first.select_one(".identification").get_text() == "certain"
    assert first.select_one(".as-written .written-name").get_text() == "Anne Vel"
    assert words(first.select_one(".as-written")) == "“Anne Vel” for Anna Vell"
    assert first.select_one("blockquote.quote").get_text() == "my dear & honoured friend"

    julian = page.select_one('li[data-attestation="r-2"]')
    assert julian.select_one(".date-written").get_text() == "1703-06-01"
    assert "Julian" in julian.select_one(".calendar").get_text()
    assert julian.select_one(".date-interval").get_text(strip=True) == "= 1703-06-12"  # 11 days later in 1703

    printed = page.select_one(f'li[data-attestation="{sibling_keys(client)["s-ed"]}"]')
    assert printed.select_one("a.source-link").get_text() == "M. Orrin, “Letters of the Vell family”, Harwick Press, 1888, pp. 12-14"
    assert printed.select_one(".date-interval").get_text(strip=True) == "= 1703-01-01 – 1705-12-31"


def test_a_copy_links_to_its_original(client: TestClient):
    page = soup_of(client.get("/ties/p-anna/p-jost"))
    copy = page.select_one('li[data-attestation="r-3"]')
    assert copy["data-evidence"] == "copy"
    assert copy.select_one("a.source-link")["href"] == "/sources/s-2c"
    original = copy.select_one("a.original-link")
    assert original["href"] == "/sources/s-2"
    assert original.get_text() == "Harwick Town Archive, Vell family papers, VFP 1/2"
    assert page.select_one('li[data-attestation="r-2"] a.original-link') is None


def test_mentions_are_counted_in_the_count_line(client: TestClient):
    # José's two letters to Jost are known only from mentions, in s-1 (col-vell) and s-2 (col-vell);
    # dated 1702-12 and 1703-03 (Julian: 1703-03-12 to 1703-04-11).
    page = soup_of(client.get("/ties/p-jose/p-jost"))
    line = words(page.select_one("#ties .count-line"))
    assert line == "Attested by 2 documents (2 known from mentions) in 1 collection, 1702–1703; 2 attestations."


# --- the slice ----------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("query", "expected", "left_out"),
    [
        ("?certainty=certain", ["r-1", "r-2", "r-3", "sib:s-ed"], 1),  # the possible sibling goes
        ("?certainty=probable", ["r-1", "r-2", "r-3", "sib:s-ed"], 1),
        ("?kind=letter", ["r-1", "r-2", "r-3"], 2),
        ("?kind=kinship", ["sib:s-ed", "sib:s-1"], 3),  # a parent kind selects its sub-kinds
        ("?evidence=original", ["r-1", "r-2", "sib:s-ed", "sib:s-1"], 1),  # the copy goes
        ("?from=1704", ["sib:s-ed"], 4),  # only the edition's 1703-1705 reaches into 1704
        ("?omit_collection=col-vell", ["sib:s-ed"], 4),
        ("?keep_collection=col-vell&kind=letter&certainty=certain", ["r-1", "r-2", "r-3"], 2),
        ("?min_collections=2", [], 5),  # no tie is attested in two collections
    ],
)
def test_a_slice_removes_exactly_the_expected_attestations(client: TestClient, query: str, expected: list[str], left_out: int):
    siblings = sibling_keys(client)
    expected_keys = sorted(siblings[e.removeprefix("sib:")] if e.startswith("sib:") else e for e in expected)
    assert kept_keys(client, query) == expected_keys
    body = client.get(f"/api/ties/p-anna/p-jost{query}").json()
    assert (body["ties"]["total"], body["ties"]["left_out"]) == (5, left_out)
    assert body["sliced"] is True

    page = soup_of(client.get(f"/ties/p-anna/p-jost{query}"))
    assert sorted(attestation_keys(page)) == expected_keys
    assert page.select_one(".left-out")["data-left-out"] == str(left_out)
    assert page.select_one("a.unsliced-link")["href"] == "/ties/p-anna/p-jost"


def test_the_slice_is_kept_in_links_to_the_persons(client: TestClient):
    page = soup_of(client.get("/ties/p-anna/p-jost?kind=letter&certainty=probable"))
    links = [a["href"] for a in page.select(".tie-persons a.person-link")]
    assert links == ["/persons/p-anna?kind=letter&certainty=probable", "/persons/p-jost?kind=letter&certainty=probable"]
    assert "kinds: letter" in page.select_one(".slice-line").get_text()


def test_order_of_the_persons_does_not_change_the_evidence(client: TestClient):
    forward = client.get("/api/ties/p-anna/p-jost").json()["ties"]
    backward = client.get("/api/ties/p-jost/p-anna").json()["ties"]
    assert forward["counts"] == backward["counts"]
    assert sorted(r["relation_id"] for r in forward["relations"]) == sorted(r["relation_id"] for r in backward["relations"])
    # the first person's letters come first
    assert [r["person_a"]["key"] for r in backward["relations"] if r["kind_key"] == "letter"] == ["p-jost", "p-anna"]


def test_self_loops(client: TestClient):
    # The widow's only tie is a self-addressed draft: drafts are outside the default slice.
    body = client.get("/api/ties/p-widow/p-widow").json()
    assert body["self_loop"] is True
    assert (body["ties"]["relations"], body["ties"]["total"], body["ties"]["left_out"]) == ([], 1, 1)
    page = soup_of(client.get("/ties/p-widow/p-widow?evidence=draft"))
    (relation,) = page.select("section.tie-relation")
    assert relation.select_one(".tag-loop").get_text() == "self-loop"
    assert len(relation.select("li.attestation")) == 1
    assert page.select_one("#ties-heading").get_text(" ", strip=True) == "the widow of the printer and themself"
    # Between two persons, neither one's self-loop belongs: Anna and the widow share nothing.
    body = client.get("/api/ties/p-anna/p-widow?evidence=draft").json()
    assert (body["ties"]["relations"], body["ties"]["total"]) == ([], 0)


def test_deleted_attestations_never_show(client: TestClient):
    # The council's only letter to Anna is deleted.
    body = client.get("/api/ties/p-council/p-anna").json()["ties"]
    assert (body["relations"], body["total"], body["left_out"]) == ([], 0, 0)
    page = soup_of(client.get("/ties/p-council/p-anna"))
    assert "No attestation links these two persons" in page.select_one(".left-out").get_text()


def test_htmx_request_gets_the_panel_only(client: TestClient):
    response = client.get("/ties/p-anna/p-jost?kind=letter", headers={"HX-Request": "true"})
    assert response.status_code == 200
    piece = soup_of(response)
    assert piece.find("header") is None and piece.find("title") is None
    panel = piece.select_one("section#ties")
    assert panel is not None and panel.select_one("h4#ties-heading") is not None  # under the panel's h3
    assert sorted(attestation_keys(panel)) == ["r-1", "r-2", "r-3"]
    full = soup_of(client.get("/ties/p-anna/p-jost?kind=letter"))
    assert full.select_one("h1#ties-heading") is not None and full.select_one("header.site-header") is not None
    # Each relation is one level below the heading: h2 on the page, h5 in the panel.
    assert full.select("#ties section.tie-relation > h2") and not full.select("#ties h3")
    assert panel.select("section.tie-relation > h5") and not panel.select("h1, h2, h3")


def test_ties_page_and_json_show_the_same_figures(client: TestClient):
    body = client.get("/api/ties/p-anna/p-jost").json()
    counts = body["ties"]["counts"]
    assert {k: counts[k] for k in ("attestations", "documents", "copies", "mentions", "collections", "printed", "span")} == {
        "attestations": 5, "documents": 3, "copies": 1, "mentions": 0, "collections": 1, "printed": 1, "span": "1703–1705",
    }  # fmt: skip
    page = soup_of(client.get("/ties/p-anna/p-jost"))
    line = page.select_one("#ties .count-line")
    assert int(line.select_one("[data-documents]")["data-documents"]) == counts["documents"]
    assert int(line.select_one("[data-attestations]")["data-attestations"]) == counts["attestations"]
    per_relation = {int(s["data-relation"]): len(s.select("li.attestation")) for s in page.select("section.tie-relation")}
    assert per_relation == {r["relation_id"]: r["counts"]["attestations"] for r in body["ties"]["relations"]}


# --- errors ------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("path", "detail"),
    [("/ties/p-anna/p-nobody", "no person with key 'p-nobody'"), ("/ties/p-nobody/p-anna", "no person with key 'p-nobody'")],
)
def test_unknown_person_in_ties_is_a_404(client: TestClient, path: str, detail: str):
    response = client.get(path)
    assert response.status_code == 404
    assert soup_of(response).select_one("#error .error-detail").get_text(strip=True) == detail
    assert client.get("/api" + path).json() == {"error": "not found", "detail": detail}


@pytest.mark.parametrize(
    ("query", "parameter", "accepted"),
    [
        ("from=17o3", "from", "a year (1703) or an EDTF date"),
        ("kind=enmity", "kind", "business"),  # the known kinds are listed
        ("certainty=sure", "certainty", "certain, probable, possible"),
        ("evidence=rumour", "evidence", "original"),
        ("omit_collection=col-none", "omit_collection", "the key of a collection"),
    ],
)
def test_bad_slice_is_a_400_naming_the_parameter(client: TestClient, query: str, parameter: str, accepted: str):
    response = client.get(f"/api/ties/p-anna/p-jost?{query}")
    assert response.status_code == 400
    body = response.json()
    assert body["error"] == "bad parameter"
    assert body["detail"].startswith(f"{parameter}=") and accepted in body["detail"]
    page = client.get(f"/ties/p-anna/p-jost?{query}")
    assert page.status_code == 400
    assert soup_of(page).select_one("#error .error-detail").get_text(strip=True).startswith(f"{parameter}=")


def test_old_key_in_ties_redirects(own_client: TestClient, world: Database):
    with world.write() as session:
        jost = session.scalar(select(Person.id).where(Person.key == "p-jost"))
        session.execute(text("INSERT INTO person_alias (key, person_id) VALUES ('p-jobst', :id)"), {"id": jost})
    response = own_client.get("/ties/p-anna/p-jobst?kind=letter", follow_redirects=False)
    assert response.status_code == 308
    assert response.headers["location"].endswith("/ties/p-anna/p-jost?kind=letter")
    assert sorted(own_client.get("/ties/p-anna/p-jobst?kind=letter").url.path.split("/")[-2:]) == ["p-anna", "p-jost"]


# --- the relation page ---------------------------------------------------------------------------


def relation_id(client: TestClient, person: str, kind: str, other: str, direction: str | None) -> int:
    groups = client.get(f"/api/persons/{person}").json()["person"]["relations"]
    (found,) = [
        rel["relation_id"] for g in groups if g["kind_key"] == kind for rel in g["relations"]
        if rel["other"]["key"] == other and rel["direction"] == direction
    ]  # fmt: skip
    return found


def test_relation_page_lists_all_its_attestations(client: TestClient):
    rid = relation_id(client, "p-jost", "letter", "p-anna", "to")
    page = soup_of(client.get(f"/relations/{rid}?certainty=certain&kind=sibling"))  # not sliced: the slice is ignored
    assert attestation_keys(page) == ["r-2", "r-3"]
    assert page.select_one(".end-a a")["href"] == "/persons/p-jost"
    assert page.select_one(".end-b a")["href"] == "/persons/p-anna"
    assert [dt.get_text() for dt in page.select(".relation-ends dt")][:2] == ["sender", "recipient"]
    assert page.select_one('li[data-attestation="r-3"] a.original-link')["href"] == "/sources/s-2"
    line = words(page.select_one(".count-line"))
    assert line == "Attested by 1 document (1 a copy) in 1 collection, 1703; 2 attestations."
    assert page.select_one("a.ties-link")["href"] == "/ties/p-jost/p-anna"

    body = client.get(f"/api/relations/{rid}").json()
    assert [a["key"] for a in body["relation"]["attestations"]] == ["r-2", "r-3"]
    assert body["relation"]["counts"]["documents"] == 1 and body["deleted"] == 0


def test_relation_whose_attestations_are_all_deleted(own_client: TestClient, world: Database):
    with world.read() as session:
        rid = session.scalar(text(
            "SELECT r.id FROM relation r JOIN person a ON a.id = r.person_a_id WHERE a.key = 'p-council' AND r.kind_id = 1"
        ))  # fmt: skip
    page = soup_of(own_client.get(f"/relations/{rid}"))
    assert attestation_keys(page) == []
    assert page.select_one(".deleted-note")["data-deleted"] == "1"
    assert "not part of the network" in page.select_one(".notice").get_text()
    assert own_client.get(f"/api/relations/{rid}").json()["deleted"] == 1


def test_unknown_relation_is_a_404_and_a_malformed_id_a_400(client: TestClient):
    response = client.get("/relations/9999")
    assert response.status_code == 404
    assert soup_of(response).select_one("#error .error-detail").get_text(strip=True) == "no relation with id 9999"
    assert client.get("/api/relations/9999").json()["detail"] == "no relation with id 9999"
    bad = client.get("/api/relations/letter")
    assert bad.status_code == 400 and "relation_id=letter" in bad.json()["detail"]


# --- escaping and documentation ------------------------------------------------------------------


def test_markup_in_names_quotes_and_notes_is_shown_as_text(client: TestClient):
    for path in ("/ties/p-xss/p-council", "/persons/p-council"):
        page = soup_of(client.get(path))
        assert [script.get("src") for script in page.find_all("script")] == ["/static/htmx.min.js"], path
        assert page.find("b") is None and page.find("i") is None and page.find("em") is None, path
    page = soup_of(client.get("/ties/p-xss/p-council"))
    (att,) = page.select("li.attestation")
    assert att.select_one("blockquote.quote").get_text() == XSS_QUOTE
    assert att.select_one(".written-name").get_text() == XSS_WRITTEN
    assert att.select_one(".att-note").get_text() == "<em>note</em>"
    assert page.select(".tie-persons a.person-link")[0].get_text() == XSS_NAME
    assert page.title.get_text().startswith(XSS_NAME)


def test_openapi_documents_the_routes_and_every_field(client: TestClient):
    schema = client.get("/openapi.json").json()
    for path in ("/ties/{a}/{b}", "/api/ties/{a}/{b}", "/relations/{relation_id}", "/api/relations/{relation_id}"):
        operation = schema["paths"][path]["get"]
        assert operation["summary"] and operation["description"], path
    for model in (TiesPage, TiesBetween, RelationEvidence, RelationPage):
        properties = schema["components"]["schemas"][model.__name__]["properties"]
        assert set(properties) == {f.name for f in dataclasses.fields(model)}, model.__name__
        assert [name for name, spec in properties.items() if not spec.get("description")] == [], model.__name__
