"""The persons index (search, sort, pages) and the person page, over HTTP on a real imported database."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient
from sqlalchemy import select, text

from app.config import Settings, database_url
from app.db import Database
from app.exchange.workbook import import_workbook
from app.main import create_app
from app.models import Person
from app.store.attestations import CitedAttestation, EvidenceCounts
from app.store.persons import PersonDetail, PersonList, PersonListRow, PersonRelation
from app.views.persons import PersonPage, PersonsPage
from tests.evidence_world import XSS_NAME, world, world_file  # noqa: F401 - fixtures
from tests.workbooks import write_workbook


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


def found(client: TestClient, query: str, **params: str) -> list[dict]:
    response = client.get("/api/persons", params={"q": query, **params})
    assert response.status_code == 200, response.text
    return response.json()["result"]["rows"]


# --- search ------------------------------------------------------------------------------------


def test_search_by_a_variant_says_which_variant_matched(client: TestClient):
    rows = found(client, "Anne Vel")
    assert [row["key"] for row in rows] == ["p-anna"]
    assert rows[0]["match"] == "exact"
    assert rows[0]["matched_variant"] == "Anne Vel"

    page = soup_of(client.get("/persons", params={"q": "Anne Vel"}))
    row = page.select_one('#person-rows tbody tr[data-key="p-anna"]')
    assert row.select_one("a.person-link").get_text(strip=True) == "Anna Vell"
    assert row.select_one(".matched-variant .variant").get_text() == "Anne Vel"


def test_a_match_on_the_display_name_names_no_variant(client: TestClient):
    rows = found(client, "anna vell")  # the display name, and "Änna Vell" folded: both "anna vell"
    assert [(row["key"], row["match"], row["matched_variant"]) for row in rows] == [("p-anna", "exact", None)]


def test_search_ignores_case_and_accents(client: TestClient):
    assert [row["key"] for row in found(client, "jose")] == ["p-jose"]
    assert [row["key"] for row in found(client, "JOSÉ MARTEAU")] == ["p-jose"]
    assert [row["key"] for row in found(client, "änna")] == ["p-anna"]
    assert [row["key"] for row in found(client, "ANNA")] == ["p-anna"]
    # "Iosephus Martellus" is only a variant: found, and named
    rows = found(client, "martellus")
    assert [(row["key"], row["match"], row["matched_variant"]) for row in rows] == [("p-jose", "word", "Iosephus Martellus")]


def test_typos_find_near_spellings_marked_as_such(client: TestClient):
    for query, key in (("Ana Vel", "p-anna"), ("Jost Brener", "p-jost"), ("Marteu", "p-jose")):
        rows = found(client, query)
        assert [row["key"] for row in rows] == [key], query
        assert rows[0]["match"] == "fuzzy" and rows[0]["score"] >= 80, query
    page = soup_of(client.get("/persons", params={"q": "Jost Brener"}))
    row = page.select_one('tbody tr[data-key="p-jost"]')
    assert row["data-match"] == "fuzzy"
    assert row.select_one(".tag-fuzzy").get_text(strip=True) == "near spelling"
    assert "1 of them near spellings" in page.select_one(".result-line").get_text(" ", strip=True)


def test_close_matches_come_before_near_spellings(client: TestClient):
    # "brenner" is a word of "Jost Brenner"; "Hans Brenne" is only near (Indel similarity 92)
    rows = found(client, "brenner")
    assert [(row["key"], row["match"]) for row in rows] == [("p-jost", "word"), ("p-hans", "fuzzy")]
    # whatever the sort: Hans has fewer attestations but would come first by name
    assert [row["key"] for row in found(client, "brenner", sort="name")] == ["p-jost", "p-hans"]


def test_a_search_that_finds_nothing_says_so(client: TestClient):
    body = client.get("/api/persons", params={"q": "Zzyzx"}).json()["result"]
    assert body["total"] == 0 and body["rows"] == []
    page = soup_of(client.get("/persons", params={"q": "Zzyzx"}))
    assert "No name or spelling of a name is close to “Zzyzx”" in page.select_one("#person-rows .notice").get_text()


# --- sorting and pages ---------------------------------------------------------------------------


def test_sort_by_attestations_most_first(client: TestClient):
    # On paper (tests/evidence_world.py): jost 9, anna 7, jose 2, then 1 each for p-xss, council
    # and widow, in name order ("<script..." folds before "council"), then hans 0.
    rows = found(client, "", sort="attestations")
    assert [(row["key"], row["attestations"]) for row in rows] == [
        ("p-jost", 9), ("p-anna", 7), ("p-jose", 2), ("p-xss", 1), ("p-council", 1), ("p-widow", 1), ("p-hans", 0),
    ]  # fmt: skip


def test_sort_by_degree_most_first(client: TestClient):
    # On paper: jost 2 (Anna, José); then 1 each, by name: p-xss, Anna (the council's letter is
    # deleted), the council (p-xss), José; then 0: Hans, the widow (a self-loop is no neighbour).
    rows = found(client, "", sort="degree")
    assert [(row["key"], row["degree"]) for row in rows] == [
        ("p-jost", 2), ("p-xss", 1), ("p-anna", 1), ("p-council", 1), ("p-jose", 1), ("p-hans", 0), ("p-widow", 0),
    ]  # fmt: skip


def test_sort_by_name_uses_the_sort_name_folded(own_client: TestClient, world: Database):
    with world.write() as session:
        session.execute(text("UPDATE person SET sort_name = 'Marteau, José' WHERE key = 'p-jose'"))
        session.execute(text("UPDATE person SET sort_name = 'Brenner, Jost' WHERE key = 'p-jost'"))
    rows = found(own_client, "")
    # "<script..." < "anna vell" < "brenner, jost" < "council" < "hans" < "marteau, jose" < "the widow"
    assert [row["key"] for row in rows] == ["p-xss", "p-anna", "p-jost", "p-council", "p-hans", "p-jose", "p-widow"]
    assert rows[2]["sort_name"] == "Brenner, Jost"


def test_sort_headers_are_links_and_the_current_one_is_marked(client: TestClient):
    page = soup_of(client.get("/persons", params={"sort": "degree"}))
    links = {a["data-sort"]: a["href"] for a in page.select("thead a.sort-link")}
    assert links == {"name": "/persons", "attestations": "/persons?sort=attestations", "degree": "/persons?sort=degree"}
    current = page.select_one("thead th[aria-sort]")
    assert current["aria-sort"] == "descending" and current.a["data-sort"] == "degree"
    shown = [(tr["data-key"], int(tr.select("td.num")[1]["data-value"])) for tr in page.select("tbody tr")]
    assert shown[0] == ("p-jost", 2)
    # a search keeps its words in the sort links, and the sort is kept by the form
    page = soup_of(client.get("/persons", params={"q": "brenner", "sort": "attestations"}))
    assert page.select_one('a.sort-link[data-sort="name"]')["href"] == "/persons?q=brenner&sort=name"
    assert page.select_one('form.search input[type="hidden"][name="sort"]')["value"] == "attestations"


def test_the_list_marks_unidentified_persons_and_corporate_bodies(client: TestClient):
    page = soup_of(client.get("/persons"))
    tags = {tr["data-key"]: {t.get_text(strip=True) for t in tr.select(".tag")} for tr in page.select("tbody tr")}
    assert tags["p-widow"] == {"unidentified"}
    assert tags["p-council"] == {"corporate"} and tags["p-xss"] == {"corporate"}
    assert tags["p-anna"] == set()


def test_pages_of_fifty(settings: Settings, database: Database, tmp_path: Path):
    persons = [{"key": f"p-{n:03d}", "name": f"Person {n:03d}"} for n in range(1, 121)]
    import_workbook(database, write_workbook(tmp_path / "many", {"persons.csv": persons}), size_limit=10**9)
    with TestClient(create_app(settings)) as client:
        first = client.get("/api/persons").json()["result"]
        assert (first["total"], first["pages"], first["per_page"]) == (120, 3, 50)
        assert [row["key"] for row in first["rows"]] == [f"p-{n:03d}" for n in range(1, 51)]
        last = client.get("/api/persons?page=3").json()["result"]
        assert [row["key"] for row in last["rows"]] == [f"p-{n:03d}" for n in range(101, 121)]

        page = soup_of(client.get("/persons?page=2"))
        assert [tr["data-key"] for tr in page.select("tbody tr")][:2] == ["p-051", "p-052"]
        nav = page.select_one("nav.pagination")
        assert nav.select_one('a[rel="prev"]')["href"] == "/persons"
        assert nav.select_one('a[rel="next"]')["href"] == "/persons?page=3"
        assert soup_of(client.get("/persons?page=3")).select_one('nav.pagination a[rel="next"]') is None

        response = client.get("/api/persons?page=4")
        assert response.status_code == 400
        assert response.json()["detail"] == "page=4 is not accepted; accepted: a whole number from 1 to 3"


@pytest.mark.parametrize(
    ("query", "detail"),
    [
        ("sort=colour", "sort=colour is not accepted; accepted: one of match, name, attestations, degree"),
        ("page=0", "page=0 is not accepted; accepted: a whole number of 1 or more"),
        ("page=two", "page=two is not accepted; accepted: a whole number of 1 or more"),
    ],
)
def test_bad_sort_or_page_is_a_400_naming_it(client: TestClient, query: str, detail: str):
    response = client.get(f"/api/persons?{query}")
    assert response.status_code == 400
    assert response.json() == {"error": "bad parameter", "detail": detail}
    page = client.get(f"/persons?{query}")
    assert page.status_code == 400
    assert soup_of(page).select_one("#error .error-detail").get_text(strip=True) == detail


def test_htmx_search_gets_only_the_rows(client: TestClient):
    response = client.get("/persons", params={"q": "anna"}, headers={"HX-Request": "true"})
    assert response.status_code == 200
    piece = soup_of(response)
    assert piece.find("header") is None and piece.find("form") is None and piece.find("title") is None
    section = piece.select_one("section#person-rows")
    assert section is not None
    assert [tr["data-key"] for tr in section.select("tbody tr")] == ["p-anna"]
    # the full page holds the same section, and the search box asks for it as the user types
    page = soup_of(client.get("/persons", params={"q": "anna"}))
    box = page.select_one('form.search input[name="q"]')
    assert box["value"] == "anna"
    assert box["hx-get"] == "/persons" and box["hx-target"] == "#person-rows"
    assert "input changed delay:250ms" in box["hx-trigger"] and "search" in box["hx-trigger"]
    assert box["hx-push-url"] == "true"
    form = box.find_parent("form")
    assert form["method"] == "get" and form["action"] == "/persons"


def test_index_page_and_json_show_the_same_figures(client: TestClient):
    rows = client.get("/api/persons?sort=attestations").json()["result"]["rows"]
    page = soup_of(client.get("/persons?sort=attestations"))
    shown = [
        (tr["data-key"], *(int(td["data-value"]) for td in tr.select("td.num")))
        for tr in page.select("tbody tr")
    ]  # fmt: skip
    assert shown == [(row["key"], row["attestations"], row["degree"]) for row in rows]


def test_the_index_is_in_the_navigation(client: TestClient):
    page = soup_of(client.get("/persons"))
    current = page.select_one('nav.site-nav a[aria-current="page"]')
    assert current["href"] == "/persons" and current.get_text(strip=True) == "Persons"


# --- one person ----------------------------------------------------------------------------------


def test_person_page_shows_names_dates_and_identifiers(client: TestClient):
    page = soup_of(client.get("/persons/p-anna"))
    assert page.select_one("h1").get_text(" ", strip=True) == "Anna Vell"
    assert [li.get_text() for li in page.select("ul.variants li")] == ["Anne Vel", "Änna Vell"]
    born = page.select_one('dd[data-life="born"]')
    assert born.select_one(".date-written").get_text() == "1680~"
    assert born.select_one(".date-interval").get_text(strip=True) == "= 1679-01-01 – 1681-12-31"  # ~ widens a year by 1
    assert page.select_one('dd[data-life="died"] .date-interval').get_text(strip=True) == "= 1731-01-01 – 1731-12-31"

    identifiers = {li["data-scheme"]: li for li in page.select("ul.identifiers li")}
    links = {scheme: li.a["href"] for scheme, li in identifiers.items() if li.a}
    assert links == {
        "wikidata": "https://www.wikidata.org/wiki/Q4115189",
        "viaf": "https://viaf.org/viaf/12345",
        "gnd": "https://d-nb.info/gnd/118-5",
        "isni": "https://isni.org/isni/0000000123456789",
    }
    assert identifiers["local"].a is None
    assert identifiers["local"].get_text(strip=True) == "local: AV7"
    # identifiers are links to follow, never something the page loads
    assert not [tag for tag in page.find_all(src=True) if "//" in tag["src"]]


def test_person_page_lists_relations_by_kind_with_counts_and_years(client: TestClient):
    page = soup_of(client.get("/persons/p-jost"))
    tables = {table["data-kind"]: table for table in page.select("table.relations-table")}
    assert list(tables) == ["letter", "sibling"]  # by label: "letter", "siblings"
    assert tables["letter"].caption.get_text(" ", strip=True) == "letter (sender → recipient)"

    def rows(kind: str) -> list[tuple]:
        return [
            (tr["data-other"], tr.get("data-direction"), int(tr.select_one("td.attestations")["data-value"]),
             tr.select_one("td.years").get_text(strip=True), tr.select_one("td.certainty").get_text(strip=True))
            for tr in tables[kind].select("tbody tr")
        ]  # fmt: skip

    # Anna -> Jost: r-1 (1703-05-12, certain); Jost -> Anna: r-2 and its copy r-3 (1703-06-01 Julian);
    # José -> Jost: two mentions, 1702-12 (probable) and 1703-03 Julian (possible).
    # By the other person's name; for one person, letters written before letters received.
    assert rows("letter") == [
        ("p-anna", "to", 2, "1703", "certain"),
        ("p-anna", "from", 1, "1703", "certain"),
        ("p-jose", "from", 2, "1702–1703", "probable"),
    ]
    # siblings: the edition (1704? = 1703-1705, certain) and s-1 fol. 1v (possible)
    assert rows("sibling") == [("p-anna", None, 2, "1703–1705", "certain")]
    direction = tables["letter"].select_one('tr[data-direction="to"] td.direction').get_text(" ", strip=True)
    assert direction == "to (sender → recipient)"
    from_jose = tables["letter"].select_one('tr[data-other="p-jose"] td.direction').get_text(" ", strip=True)
    assert from_jose == "from (recipient ← sender)"

    relation_link = tables["sibling"].select_one("a.relation-link")["href"]
    assert relation_link.startswith("/relations/")
    assert tables["sibling"].select_one("a.ties-link")["href"] == "/ties/p-jost/p-anna"
    counts = page.select_one(".person-counts")
    assert counts.select_one("[data-attestations]")["data-attestations"] == "9"
    assert counts.select_one("[data-degree]")["data-degree"] == "2"


def test_deleted_attestations_hide_a_relation_and_never_count(client: TestClient):
    person = client.get("/api/persons/p-anna").json()["person"]
    others = {(group["kind_key"], rel["other"]["key"]) for group in person["relations"] for rel in group["relations"]}
    assert ("letter", "p-council") not in others  # its only attestation is deleted
    assert others == {("letter", "p-jost"), ("sibling", "p-jost")}
    assert (person["attestations"], person["degree"]) == (7, 1)


def test_self_loop_is_marked(client: TestClient):
    page = soup_of(client.get("/persons/p-widow"))
    row = page.select_one('table.relations-table[data-kind="letter"] tbody tr')
    assert row["data-direction"] == "self" and row["data-other"] == "p-widow"
    assert row.select_one(".tag-loop").get_text(strip=True) == "self-loop"
    assert row.select_one("a.ties-link")["href"] == "/ties/p-widow/p-widow"
    assert page.select_one("h1 .tag-unidentified") is not None


def test_memberships_and_cited_facts(client: TestClient):
    page = soup_of(client.get("/persons/p-jost"))
    membership = page.select_one('table.memberships-table tr[data-group="g-committee"]')
    assert membership.select_one("a.group-link")["href"] == "/groups/g-committee"
    assert membership.select_one(".role").get_text(strip=True) == "secretary"
    assert membership.select_one("td.num")["data-value"] == "1"

    facts = page.select("section.fact")
    assert [f["data-fact"] for f in facts] == ["occupation"]
    fact = facts[0]
    assert fact.select_one(".fact-value").get_text() == "printer"
    assert fact.select_one(".fact-place a").get_text() == "Ostmere"
    assert fact.select_one(".fact-date").get_text() == "(1703)"
    (cited,) = fact.select("li.attestation")
    assert cited["data-attestation"] == "f-1"
    assert cited.select_one("a.source-link")["href"] == "/sources/s-1"
    assert cited.select_one("a.source-link").get_text() == "Harwick Town Archive, Vell family papers, VFP 1/1"
    assert cited.select_one(".locus").get_text() == "fol. 1r"
    assert cited.select_one(".certainty").get_text() == "certain"

    anna = soup_of(client.get("/persons/p-anna")).select_one('section.fact[data-fact="occupation"]')
    assert anna.select_one(".fact-value").get_text() == "bookseller"
    assert anna.select_one(".certainty").get_text() == "probable"
    assert "“Letters of the Vell family”" in anna.select_one("a.source-link").get_text()


def test_the_slice_is_kept_in_links_and_counted_per_relation(client: TestClient):
    page = soup_of(client.get("/persons/p-jost?kind=letter&certainty=probable"))
    letters = page.select_one('table.relations-table[data-kind="letter"]')
    kept = {(tr["data-other"], tr["data-direction"]): int(tr.select_one("td.in-slice")["data-value"]) for tr in letters.select("tbody tr")}
    # José's second mention is only "possible"; the siblings are not letters
    assert kept == {("p-anna", "from"): 1, ("p-anna", "to"): 2, ("p-jose", "from"): 1}
    sibling = page.select_one('table.relations-table[data-kind="sibling"] td.in-slice')
    assert sibling["data-value"] == "0"
    assert letters.select_one("a.ties-link")["href"] == "/ties/p-jost/p-anna?kind=letter&certainty=probable"
    assert letters.select_one("a.person-link")["href"] == "/persons/p-anna?kind=letter&certainty=probable"
    # without a slice, no column for it
    assert soup_of(client.get("/persons/p-jost")).select_one("td.in-slice") is None


def test_person_page_and_json_show_the_same_figures(client: TestClient):
    body = client.get("/api/persons/p-jost").json()
    page = soup_of(client.get("/persons/p-jost"))
    # the ego network drawn on the page is the one in the JSON
    assert body["ego"]["key"] == "p-jost"
    drawn = {a["href"].split("?")[0] for a in page.select("#ego-panel svg a[href^='/persons/']")}
    assert drawn == {f"/persons/{node['key']}" for node in body["ego"]["nodes"]}
    from_json = {(rel["relation_id"], rel["attestations"], rel["span"]) for g in body["person"]["relations"] for rel in g["relations"]}
    from_page = {
        (int(tr["data-relation"]), int(tr.select_one("td.attestations")["data-value"]), tr.select_one("td.years").get_text(strip=True))
        for tr in page.select("table.relations-table tbody tr")
    }  # fmt: skip
    assert from_page == from_json
    assert body["person"]["facts"][0]["attestations"][0]["source"]["key"] == "s-1"


def test_old_key_of_a_merged_person_redirects_keeping_the_query(own_client: TestClient, world: Database):
    with world.write() as session:
        anna = session.scalar(select(Person.id).where(Person.key == "p-anna"))
        session.execute(text("INSERT INTO person_alias (key, person_id) VALUES ('p-anne-old', :id)"), {"id": anna})
    for path in ("/persons/p-anne-old?kind=letter", "/api/persons/p-anne-old?kind=letter"):
        response = own_client.get(path, follow_redirects=False)
        assert response.status_code == 308, path
        assert response.headers["location"].endswith(path.replace("p-anne-old", "p-anna")), path
    assert own_client.get("/api/persons/p-anne-old").json()["person"]["key"] == "p-anna"


def test_unknown_person_is_a_404_in_the_site_style(client: TestClient):
    response = client.get("/persons/p-nobody")
    assert response.status_code == 404
    page = soup_of(response)
    assert page.select_one("#error .error-detail").get_text(strip=True) == "no person with key 'p-nobody'"
    assert page.select_one("header .product") is not None
    assert client.get("/api/persons/p-nobody").json() == {"error": "not found", "detail": "no person with key 'p-nobody'"}


@pytest.mark.parametrize(("query", "parameter"), [("from=17o3", "from"), ("kind=enmity", "kind"), ("certainty=maybe", "certainty")])
def test_bad_slice_on_the_person_page_is_a_400(client: TestClient, query: str, parameter: str):
    response = client.get(f"/api/persons/p-anna?{query}")
    assert response.status_code == 400
    detail = response.json()["detail"]
    assert detail.startswith(f"{parameter}=") and "accepted" in detail
    assert client.get(f"/persons/p-anna?{query}").status_code == 400


# --- escaping ----------------------------------------------------------------------------------


def test_a_name_with_markup_is_shown_as_text(client: TestClient):
    for response in (client.get("/persons"), client.get("/persons/p-xss"), client.get("/persons/p-council")):
        assert response.status_code == 200
        page = soup_of(response)
        assert [script.get("src") for script in page.find_all("script")] == ["/static/htmx.min.js"]
        assert page.find("b") is None and page.find("i") is None
    names = [a.get_text() for a in soup_of(client.get("/persons")).select("a.person-link")]
    assert XSS_NAME in names
    assert soup_of(client.get("/persons/p-xss")).select_one("h1").contents[0].strip() == XSS_NAME
    assert client.get("/api/persons/p-xss").json()["person"]["name"] == XSS_NAME


# --- documentation -----------------------------------------------------------------------


def test_openapi_documents_the_routes_and_every_field(client: TestClient):
    schema = client.get("/openapi.json").json()
    for path in ("/persons", "/api/persons", "/persons/{key}", "/api/persons/{key}"):
        operation = schema["paths"][path]["get"]
        assert operation["summary"] and operation["description"], path
    for model in (PersonsPage, PersonList, PersonListRow, PersonPage, PersonDetail, PersonRelation, CitedAttestation, EvidenceCounts):
        properties = schema["components"]["schemas"][model.__name__]["properties"]
        assert set(properties) == {f.name for f in dataclasses.fields(model)}, model.__name__
        undocumented = [name for name, spec in properties.items() if not spec.get("description")]
        assert undocumented == [], model.__name__


def test_a_hub_lists_its_strongest_relations_first_and_offers_all(client: TestClient, monkeypatch):
    """With the limit lowered to 1, the letters table keeps the relation with most attestations."""
    import app.views.persons as persons_views

    monkeypatch.setattr(persons_views, "RELATION_LIMIT", 1)
    body = client.get("/api/persons/p-jost").json()
    letters = next(g for g in body["person"]["relations"] if g["kind_key"] == "letter")["relations"]
    page = soup_of(client.get("/persons/p-jost"))
    rows = page.select('table.relations-table[data-kind="letter"] tbody tr')
    assert len(letters) == 3  # to Anna, from Anna, from José (tests/evidence_world.py)
    strongest = max(letters, key=lambda r: r["attestations"])
    assert len(rows) == 1 and int(rows[0]["data-relation"]) == strongest["relation_id"]
    link = page.select_one('p.relations-cut[data-kind="letter"] a')["href"]
    assert link == "/persons/p-jost?relations=all"
    assert len(soup_of(client.get(link)).select('table.relations-table[data-kind="letter"] tbody tr')) == len(letters)
    assert client.get("/persons/p-jost?relations=some").status_code == 400
