"""The document pages (sources, repositories, collections) over HTTP, on a workbook imported for real.

The dataset is ``small_world()`` plus a second archive with two letters: one whose title and
quote carry markup, with a second attestation that is soft-deleted, and one with a web link.
"""

from __future__ import annotations

import dataclasses
from datetime import datetime
from pathlib import Path

import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient
from sqlalchemy import update

from app.config import Settings, database_url
from app.db import Database, upgrade
from app.exchange.workbook import import_workbook
from app.main import create_app
from app.models import Attestation
from app.store import sources as store
from app.views import sources as views
from workbooks import small_world, write_workbook

MARKUP_TITLE = '<script>alert("title")</script> & Sons'
MARKUP_QUOTE = "<script>alert('quote')</script> & more"


def with_second_archive() -> dict[str, list[dict[str, str]]]:
    """small_world() and an Ostmere archive whose two letters of 1690 sort as OC 9 before OC 10."""
    world = small_world()
    world["repositories.csv"].append({"key": "rep-ostmere", "name": "Ostmere Council Archive", "place": "pl-ostmere"})
    world["collections.csv"].append(
        {"key": "col-council", "repository": "rep-ostmere", "name": "Council letters", "reference_code": "OC"}
    )
    world["sources.csv"] += [
        {"key": "s-x", "repository": "rep-ostmere", "collection": "col-council", "reference": "OC 10", "kind": "letter",
         "title": MARKUP_TITLE, "date": "1690", "place_to": "pl-harwick", "url": "javascript:alert(1)"},
        {"key": "s-y", "repository": "rep-ostmere", "collection": "col-council", "reference": "OC 9", "kind": "letter",
         "date": "1690-03", "received": "1690-04-02", "url": "https://example.org/oc/9"},
    ]  # fmt: skip
    world["relations.csv"] += [
        {"key": "r-x1", "person": "p-council", "other": "p-jost", "kind": "letter", "source": "s-x", "quote": MARKUP_QUOTE},
        {"key": "r-x2", "person": "p-council", "other": "p-anna", "kind": "letter", "source": "s-x"},
        {"key": "r-y2", "person": "p-council", "other": "p-widow", "kind": "letter", "source": "s-y", "locus": "fol. 10"},
        {"key": "r-y1", "person": "p-council", "other": "p-jost", "kind": "letter", "source": "s-y", "locus": "fol. 2"},
    ]  # fmt: skip
    return world


def build(folder: Path, tables: dict[str, list[dict[str, str]]], *, deleted: tuple[str, ...] = ()) -> Settings:
    """Import ``tables`` into a fresh database in ``folder``; soft-delete the attestations ``deleted``."""
    database = Database(database_url(folder / "attesta.db"))
    upgrade(database)
    import_workbook(database, write_workbook(folder / "workbook", tables), size_limit=10**9)
    if deleted:
        with database.write() as session:
            session.execute(
                update(Attestation).where(Attestation.key.in_(deleted))
                .values(deleted_at=datetime(2026, 1, 5), deleted_reason="misread")
            )  # fmt: skip
    database.dispose()
    return Settings(database_url=database_url(folder / "attesta.db"))


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    settings = build(tmp_path_factory.mktemp("sources"), with_second_archive(), deleted=("r-x2",))
    with TestClient(create_app(settings)) as test_client:
        yield test_client


def soup_of(response) -> BeautifulSoup:  # noqa: ANN001
    assert response.status_code == 200, response.text
    return BeautifulSoup(response.text, "lxml")


def field(page: BeautifulSoup, name: str) -> str:
    return page.select_one(f'dl.record dd[data-field="{name}"]').get_text(" ", strip=True)


def listed_keys(page: BeautifulSoup, scope: str = "") -> list[str]:
    return [row["data-source"] for row in page.select(f"{scope} table.source-table tbody tr")]


# --- one source ---------------------------------------------------------------------------------


def test_source_lists_exactly_what_it_attests(client: TestClient):
    # s-1 in small_world(): the letter r-1 from Anna to Jost (fol. 1r), the sibling tie of the two
    # (fol. 1v, possible), Jost's membership m-2 of the committee, and the fact f-1 (printer).
    page = soup_of(client.get("/sources/s-1"))
    relations = page.select("ol.attestations > li.attestation")
    assert len(relations) == 2

    letter, sibling = relations
    assert letter["data-attestation"] == "r-1" and letter["data-kind"] == "letter"
    ends = letter.select("p.tie a.person")
    assert [(a["data-end"], a.get_text(), a["href"]) for a in ends] == [
        ("a", "Anna Vell", "/persons/p-anna"), ("b", "Jost Brenner", "/persons/p-jost"),
    ]  # fmt: skip
    assert letter.select_one(".direction")["data-direction"] == "a-to-b"
    assert [r.get_text() for r in letter.select(".role")] == ["(sender)", "(recipient)"]
    assert letter.select_one('[data-field="locus"]').get_text() == "fol. 1r"
    assert letter.select_one('[data-field="evidence"]').get_text() == "original"
    assert letter.select_one('[data-field="certainty"]').get_text() == "certain"
    assert "Anne Vel" in letter.select_one('[data-field="name-a-as-written"]').get_text()
    assert letter.select_one('[data-field="quote"]').get_text() == "my dear & honoured friend"
    assert letter.select_one("a.relation-link")["href"] == f"/relations/{letter['data-relation']}"
    assert letter.select_one("a.ties-link")["href"] == "/ties/p-anna/p-jost"

    assert sibling["data-kind"] == "sibling"
    assert sibling.select_one(".direction")["data-direction"] == "mutual"
    assert sibling.select_one('[data-field="locus"]').get_text() == "fol. 1v"
    assert sibling.select_one('[data-field="certainty"]').get_text() == "possible"
    assert {a.get_text() for a in sibling.select("a.person")} == {"Anna Vell", "Jost Brenner"}

    memberships = page.select("table.membership-table tbody tr[data-attestation]")
    assert [m["data-attestation"] for m in memberships] == ["m-2"]
    cells = [td.get_text(strip=True) for td in memberships[0].find_all("td")]
    assert cells[:3] == ["Jost Brenner", "Committee of the Society", "secretary"]
    assert memberships[0].select_one('[data-field="evidence"]').get_text() == "register"
    assert memberships[0].select_one('a[href="/groups/g-committee"]') is not None

    facts = page.select("table.fact-table tbody tr[data-attestation]")
    assert [f["data-attestation"] for f in facts] == ["f-1"]
    assert [td.get_text(strip=True) for td in facts[0].find_all("td")][:5] == [
        "Jost Brenner", "occupation", "printer", "1703", "Ostmere",
    ]  # fmt: skip
    assert page.select_one(".deleted-note") is None  # nothing of s-1 is deleted


def test_source_shows_its_archive_places_and_date(client: TestClient):
    page = soup_of(client.get("/sources/s-1"))
    assert page.select_one("p.citation").get_text() == "Harwick Town Archive, Vell family papers, VFP 1/1"
    assert page.select_one('dd[data-field="repository"] a')["href"] == "/repositories/rep-harwick"
    assert page.select_one('dd[data-field="collection"] a')["href"] == "/collections/col-vell"
    assert field(page, "reference") == "VFP 1/1"
    assert page.select_one('dd[data-field="place-from"] a')["href"] == "/places/pl-harwick"
    assert page.select_one('dd[data-field="place-to"] a')["href"] == "/places/pl-ostmere"
    assert page.select_one('dd[data-field="days"] time')["datetime"] == "1703-05-12"


def test_copy_links_to_its_original_and_the_original_lists_its_copy(client: TestClient):
    copy = soup_of(client.get("/sources/s-2c"))
    assert copy.select_one('dd[data-field="copy-of"] a')["href"] == "/sources/s-2"
    assert copy.select_one('dd[data-field="copies"]') is None

    original = soup_of(client.get("/sources/s-2"))
    assert [a["href"] for a in original.select('dd[data-field="copies"] a')] == ["/sources/s-2c"]
    assert original.select_one('dd[data-field="copy-of"]') is None

    api = client.get("/api/sources/s-2").json()["source"]
    assert [c["key"] for c in api["copies"]] == ["s-2c"] and api["copy_of"] is None
    assert client.get("/api/sources/s-2c").json()["source"]["copy_of"]["key"] == "s-2"


def test_printed_edition_shows_its_bibliographic_citation_and_no_archive(client: TestClient):
    page = soup_of(client.get("/sources/s-ed"))
    assert field(page, "author") == "M. Orrin"
    assert field(page, "title") == "Letters of the Vell family"
    assert field(page, "publisher") == "Harwick Press"
    assert field(page, "year") == "1888"
    assert field(page, "pages") == "12-14"
    for archival in ("repository", "collection", "reference"):
        assert page.select_one(f'dd[data-field="{archival}"]') is None, archival
    assert page.select_one("p.citation").get_text() == "M. Orrin, “Letters of the Vell family”, Harwick Press, 1888, pp. 12-14"
    # "1704?" is uncertain by one year on each side (the date settings' default).
    assert [t["datetime"] for t in page.select('dd[data-field="days"] time')] == ["1703-01-01", "1705-12-31"]


def test_julian_date_shows_as_written_its_calendar_and_gregorian_day(client: TestClient):
    page = soup_of(client.get("/sources/s-2"))
    assert field(page, "date") == "1703-06-01"
    assert page.select_one('dd[data-field="calendar"]')["data-value"] == "julian"
    assert field(page, "calendar") == "Julian"
    # In the 18th century the Gregorian calendar runs 11 days ahead of the Julian one
    # (Calendar (New Style) Act 1750): 1 June 1703 Julian is 12 June 1703 Gregorian.
    assert [t["datetime"] for t in page.select('dd[data-field="days"] time')] == ["1703-06-12"]
    api = client.get("/api/sources/s-2").json()["source"]
    assert (api["date_text"], api["calendar"], api["earliest"], api["latest"]) == ("1703-06-01", "julian", "1703-06-12", "1703-06-12")


def test_attestations_follow_the_loci_with_numbers_in_numeric_order(client: TestClient):
    page = soup_of(client.get("/sources/s-y"))
    items = page.select("li.attestation")
    assert [li["data-attestation"] for li in items] == ["r-y1", "r-y2"]
    assert [li.select_one('[data-field="locus"]').get_text() for li in items] == ["fol. 2", "fol. 10"]


def test_deleted_attestation_is_counted_not_listed(client: TestClient):
    page = soup_of(client.get("/sources/s-x"))
    assert [li["data-attestation"] for li in page.select("li.attestation")] == ["r-x1"]
    assert page.select_one(".deleted-note").get_text(strip=True) == "1 deleted attestation is not shown."
    api = client.get("/api/sources/s-x").json()["source"]
    assert [r["attestation_key"] for r in api["relations"]] == ["r-x1"]
    assert api["deleted_attestations"] == 1
    rows = client.get("/api/sources", params={"q": "OC"}).json()["results"]["rows"]
    assert {r["key"]: r["attestations"] for r in rows} == {"s-x": 1, "s-y": 2}


def test_markup_in_a_title_and_a_quote_is_shown_as_text(client: TestClient):
    response = client.get("/sources/s-x")
    assert "<script>alert" not in response.text
    page = soup_of(response)
    assert page.select_one("h1").contents[0].strip() == MARKUP_TITLE
    assert field(page, "title") == MARKUP_TITLE
    assert page.select_one('[data-field="quote"]').get_text() == MARKUP_QUOTE
    assert [s.get("src") for s in page.find_all("script")] == ["/static/htmx.min.js"]

    index = client.get("/sources", params={"q": "Sons"})
    assert "<script>alert" not in index.text
    assert MARKUP_TITLE in soup_of(index).select_one('tr[data-source="s-x"] a').get_text()


def test_web_link_is_offered_and_other_urls_are_only_text(client: TestClient):
    page = soup_of(client.get("/sources/s-y"))
    link = page.select_one('dd[data-field="url"] a')
    assert link["href"] == "https://example.org/oc/9"
    assert set(link["rel"]) == {"noopener", "noreferrer", "external"}
    assert page.select_one('dd[data-field="received"]').get_text(" ", strip=True).startswith("1690-04-02")

    unsafe = soup_of(client.get("/sources/s-x"))
    assert unsafe.select_one('dd[data-field="url"] a') is None
    assert field(unsafe, "url") == "javascript:alert(1)"
    assert client.get("/api/sources/s-x").json()["link_out"] is None


def test_source_links_to_persons_keep_the_slice(client: TestClient):
    page = soup_of(client.get("/sources/s-1", params={"certainty": "probable"}))
    person = page.select_one('li[data-attestation="r-1"] a.person')
    assert person["href"] == "/persons/p-anna?certainty=probable"
    assert page.select_one("a.ties-link")["href"] == "/ties/p-anna/p-jost?certainty=probable"
    assert page.select_one('dd[data-field="place-from"] a')["href"] == "/places/pl-harwick?certainty=probable"
    bad = client.get("/api/sources/s-1", params={"certainty": "maybe"})
    assert bad.status_code == 400 and "certainty=maybe" in bad.json()["detail"]


def test_source_page_and_json_agree(client: TestClient):
    api = client.get("/api/sources/s-1").json()["source"]
    page = soup_of(client.get("/sources/s-1"))
    assert [r["attestation_key"] for r in api["relations"]] == [li["data-attestation"] for li in page.select("li.attestation")]
    assert [m["attestation_key"] for m in api["memberships"]] == ["m-2"]
    assert [f["attestation_key"] for f in api["facts"]] == ["f-1"]
    assert api["citation"]["text"] == page.select_one("p.citation").get_text()
    assert api["deleted_attestations"] == 0


# --- the index of sources -------------------------------------------------------------------------


def search(client: TestClient, **params: str) -> list[str]:
    """Return the keys the index page lists for ``params``, after checking the JSON twin lists the same."""
    page = soup_of(client.get("/sources", params=params))
    keys = listed_keys(page)
    body = client.get("/api/sources", params=params).json()
    assert [row["key"] for row in body["results"]["rows"]] == keys
    assert int(page.select_one("#source-count")["data-total"]) == body["results"]["total"]
    return keys


def test_search_by_shelfmark_title_author_and_year(client: TestClient):
    assert search(client, q="VFP 1/2") == ["s-2"]
    assert search(client, q="vfp 9/1") == ["s-2c"]
    assert search(client, q="Letters of the Vell") == ["s-ed"]
    assert search(client, q="orrin") == ["s-ed"]
    assert search(client, q="Council letters") == ["s-x", "s-y"]
    assert search(client, q="1690") == ["s-x", "s-y"]
    assert search(client, q="1704") == ["s-ed"]  # 1704? spans 1703-1705
    assert search(client, q="1703") == ["s-ed", "s-1", "s-2", "s-2c"]
    assert search(client, q="1703-06") == ["s-ed", "s-2", "s-2c"]  # the Julian letter falls on 12 June
    assert search(client, q="1703-05") == ["s-ed", "s-1"]
    assert search(client, q="nothing-like-this") == []
    assert search(client, q="100%") == []  # the LIKE wildcard is a plain character


def test_filters_by_kind_period_and_place(client: TestClient):
    assert search(client, kind="letterbook") == ["s-2c"]
    assert search(client, **{"from": "1700", "to": "1703"}) == ["s-ed", "s-1", "s-2", "s-2c"]
    assert search(client, **{"from": "1704"}) == ["s-ed"]
    assert search(client, **{"to": "1690-02"}) == ["s-x"]
    assert search(client, place_from="pl-harwick") == ["s-1"]
    assert search(client, place_to="pl-harwick") == ["s-x"]
    assert search(client, q="VFP", kind="letter") == ["s-1", "s-2"]


def test_sorted_by_date_or_by_reference(client: TestClient):
    assert search(client) == ["s-x", "s-y", "s-ed", "s-1", "s-2", "s-2c"]
    # Repositories by name, then shelfmarks with numbers in numeric order (OC 9 before OC 10),
    # printed sources last.
    assert search(client, sort="reference") == ["s-1", "s-2", "s-2c", "s-y", "s-x", "s-ed"]


def test_rows_show_date_citation_kind_and_attestations(client: TestClient):
    page = soup_of(client.get("/sources"))
    row = page.select_one('tr[data-source="s-2c"]')
    cells = row.find_all("td")
    assert cells[0].get_text(" ", strip=True) == "1703-06-01 (Julian)"
    assert cells[1].select_one("a")["href"] == "/sources/s-2c"
    assert cells[1].select_one("a").get_text() == "Harwick Town Archive, Vell family papers, VFP 9/1 fol. 3"
    assert cells[1].select_one(".copy-mark") is not None
    assert cells[2].get_text() == "letterbook"
    assert cells[3]["data-value"] == "1"
    assert page.select_one('tr[data-source="s-1"] td.num')["data-value"] == "4"


def test_search_form_works_without_javascript_and_live_with_htmx(client: TestClient):
    page = soup_of(client.get("/sources", params={"q": "VFP", "kind": "letter", "sort": "reference"}))
    form = page.select_one("form#source-search")
    assert form["method"] == "get" and form["action"] == "/sources"
    assert form.select_one('input[name="q"]')["value"] == "VFP"
    assert form.select_one('select[name="kind"] option[selected]')["value"] == "letter"
    assert form.select_one('select[name="sort"] option[selected]')["value"] == "reference"
    for name in ("q", "kind", "from", "to", "sort"):
        control = form.select_one(f'[name="{name}"]')
        assert form.select_one(f'label[for="{control["id"]}"]') is not None, name
    assert form["hx-get"] == "/sources" and form["hx-target"] == "#source-results"

    partial = client.get("/sources", params={"q": "VFP"}, headers={"HX-Request": "true"})
    piece = soup_of(partial)
    assert piece.find("header") is None and piece.find("form") is None
    assert piece.find("body").find()["id"] == "source-results"
    assert listed_keys(piece) == ["s-1", "s-2", "s-2c"]
    assert "HX-Request" in partial.headers["vary"]


def test_nav_links_to_sources_and_repositories(client: TestClient):
    nav = soup_of(client.get("/sources")).select_one("nav.site-nav")
    current = nav.select_one('a[aria-current="page"]')
    assert current["href"] == "/sources" and current.get_text() == "Sources"
    assert nav.select_one('a[href="/repositories"]').get_text() == "Repositories"


@pytest.mark.parametrize(
    ("params", "name"),
    [
        ({"page": "0"}, "page"), ({"page": "two"}, "page"), ({"page": "2"}, "page"), ({"sort": "size"}, "sort"),
        ({"from": "soon"}, "from"), ({"to": "1703-13"}, "to"), ({"from": "1705", "to": "1700"}, "from"),
        ({"kind": "diary"}, "kind"), ({"place_from": "pl-nowhere"}, "place_from"),
    ],
)  # fmt: skip
def test_bad_index_parameters_are_400s_naming_them(client: TestClient, params: dict, name: str):
    body = client.get("/api/sources", params=params)
    assert body.status_code == 400
    assert body.json()["error"] == "bad parameter"
    assert body.json()["detail"].startswith(f"{name}=")
    page = client.get("/sources", params=params)
    assert page.status_code == 400
    assert BeautifulSoup(page.text, "lxml").select_one("#error .error-detail").get_text().startswith(f"{name}=")


def test_accepted_values_are_named(client: TestClient):
    assert "one of date, reference" in client.get("/api/sources?sort=size").json()["detail"]
    assert "edition, letter, letterbook" in client.get("/api/sources?kind=diary").json()["detail"]
    assert "from 1 to 1" in client.get("/api/sources?page=2").json()["detail"]


def test_pages_of_fifty(tmp_path: Path):
    world = small_world()
    world["sources.csv"] += [
        {"key": f"s-many-{n:03}", "repository": "rep-harwick", "collection": "col-vell", "reference": f"VFP 20/{n}",
         "kind": "letter", "date": f"1720-01-{1 + n % 28:02}"}
        for n in range(1, 56)
    ]  # fmt: skip
    with TestClient(create_app(build(tmp_path, world))) as client:
        first = client.get("/api/sources", params={"q": "VFP 20/", "sort": "reference"}).json()["results"]
        assert (first["total"], first["pages"], first["page"], len(first["rows"])) == (55, 2, 1, 50)
        assert [r["key"] for r in first["rows"][:3]] == ["s-many-001", "s-many-002", "s-many-003"]
        second = soup_of(client.get("/sources", params={"q": "VFP 20/", "sort": "reference", "page": "2"}))
        assert listed_keys(second) == [f"s-many-{n:03}" for n in range(51, 56)]
        previous = second.select_one('nav.pager a[rel="prev"]')
        assert previous["href"] == "/sources?q=VFP+20%2F&sort=reference"
        assert previous["hx-target"] == "#source-results"
        assert second.select_one('nav.pager a[rel="next"]') is None
        assert client.get("/api/sources", params={"q": "VFP 20/", "page": "3"}).status_code == 400

        collection = soup_of(client.get("/collections/col-vell", params={"page": "2"}))
        assert len(listed_keys(collection)) == 58 - 50  # 55 more and the 3 of small_world()
        assert collection.select_one('nav.pager a[rel="prev"]')["href"] == "/collections/col-vell"
        assert client.get("/collections/col-vell", params={"page": "3"}).status_code == 400


# --- repositories and collections -----------------------------------------------------------------


def test_repositories_count_collections_and_documents(client: TestClient):
    page = soup_of(client.get("/repositories"))
    rows = {tr["data-repository"]: tr for tr in page.select("table.repositories tbody tr")}
    assert list(rows) == ["rep-harwick", "rep-ostmere"]  # by name
    counts = {key: (int(tr.select_one('[data-count="collections"]')["data-value"]),
                    int(tr.select_one('[data-count="sources"]')["data-value"])) for key, tr in rows.items()}  # fmt: skip
    assert counts == {"rep-harwick": (1, 3), "rep-ostmere": (1, 2)}
    assert rows["rep-harwick"].select_one('a[href="/places/pl-harwick"]') is not None
    assert page.select_one(".printed-note")["data-value"] == "1"  # s-ed

    api = client.get("/api/repositories").json()
    assert {r["key"]: (r["collections"], r["sources"]) for r in api["repositories"]} == counts
    assert api["printed_sources"] == 1


def test_repository_lists_its_collections_with_counts_and_years(client: TestClient):
    page = soup_of(client.get("/repositories/rep-ostmere"))
    assert page.select_one("h1").get_text() == "Ostmere Council Archive"
    assert page.select_one('dd[data-field="place"] a')["href"] == "/places/pl-ostmere"
    row = page.select_one('tr[data-collection="col-council"]')
    assert row.select_one("a")["href"] == "/collections/col-council"
    assert row.select_one('[data-count="sources"]')["data-value"] == "2"
    assert row.select_one('[data-count="attestations"]')["data-value"] == "3"  # r-x1, r-y1, r-y2; r-x2 is deleted
    assert row.select_one(".years").get_text(strip=True) == "1690"

    vell = soup_of(client.get("/repositories/rep-harwick")).select_one('tr[data-collection="col-vell"]')
    # s-1: r-1, the sibling tie, m-2, f-1; s-2: r-2; s-2c: r-3
    assert vell.select_one('[data-count="attestations"]')["data-value"] == "6"
    api = client.get("/api/repositories/rep-harwick").json()["repository"]
    assert api["collections"][0] == {
        "key": "col-vell", "name": "Vell family papers", "reference_code": "VFP", "sources": 3, "attestations": 6,
        "earliest": "1703-05-12", "latest": "1703-06-12",
    }  # fmt: skip


def collection_counts(page: BeautifulSoup) -> dict[str, int]:
    return {dd["data-count"]: int(dd["data-value"]) for dd in page.select("dl.counts dd[data-count]")}


def test_collection_counts_what_its_documents_attest(client: TestClient):
    page = soup_of(client.get("/collections/col-vell"))
    # Live attestations of s-1, s-2 and s-2c: r-1, the sibling tie, m-2, f-1, r-2 and r-3 (6);
    # relations Anna->Jost letter, Jost->Anna letter (r-2 and its copy r-3) and the sibling tie (3);
    # persons Anna and Jost (2).
    expected = {"sources": 3, "attestations": 6, "relations": 3, "memberships": 1, "facts": 1, "persons": 2}
    assert collection_counts(page) == expected
    assert listed_keys(page, "#collection-sources") == ["s-1", "s-2", "s-2c"]
    assert field(page, "reference-code") == "VFP"
    assert page.select_one('dd[data-field="repository"] a')["href"] == "/repositories/rep-harwick"

    api = client.get("/api/collections/col-vell").json()
    assert {"sources": api["collection"]["sources"], **api["collection"]["attested"]} == expected
    assert [r["key"] for r in api["sources"]["rows"]] == ["s-1", "s-2", "s-2c"]

    # Council -> Jost (r-x1, r-y1) and Council -> the widow (r-y2); the deleted r-x2 (Council -> Anna)
    # counts neither as a relation nor brings Anna in.
    council = collection_counts(soup_of(client.get("/collections/col-council")))
    assert council == {"sources": 2, "attestations": 3, "relations": 2, "memberships": 0, "facts": 0, "persons": 3}


def test_collection_sorts_its_documents_and_pages_by_htmx(client: TestClient):
    page = soup_of(client.get("/collections/col-council", params={"sort": "reference"}))
    assert listed_keys(page) == ["s-y", "s-x"]
    assert listed_keys(soup_of(client.get("/collections/col-council"))) == ["s-x", "s-y"]
    partial = soup_of(client.get("/collections/col-council", headers={"HX-Request": "true"}))
    assert partial.find("body").find()["id"] == "collection-sources"
    assert client.get("/api/collections/col-council?sort=title").status_code == 400


@pytest.mark.parametrize(
    ("path", "what"),
    [("/sources/s-none", "source"), ("/repositories/rep-none", "repository"), ("/collections/col-none", "collection")],
)
def test_unknown_keys_are_404_pages_saying_what_was_not_found(client: TestClient, path: str, what: str):
    response = client.get(path)
    assert response.status_code == 404
    page = BeautifulSoup(response.text, "lxml")
    assert page.select_one("#error h1").get_text(strip=True) == "Not found"
    detail = page.select_one("#error .error-detail").get_text()
    assert what in detail and path.rsplit("/", 1)[1] in detail
    assert page.select_one("header .product") is not None  # in the site's frame
    body = client.get("/api" + path)
    assert body.status_code == 404 and body.json()["error"] == "not found"


# --- documentation ---------------------------------------------------------------------------------


def test_routes_and_fields_are_documented(client: TestClient):
    schema = client.get("/openapi.json").json()
    for path in ("/sources", "/sources/{key}", "/repositories", "/repositories/{key}", "/collections/{key}"):
        for route in (path, "/api" + path):
            operation = schema["paths"][route]["get"]
            assert operation["summary"] and operation["description"], route
    assert {p["name"] for p in schema["paths"]["/api/sources"]["get"]["parameters"]} >= {"q", "kind", "from", "to", "sort", "page"}
    models = [views.SourcesPage, views.SourcePage, views.RepositoriesPage, views.RepositoryPage, views.CollectionPage,
              store.SourceList, store.SourceRow, store.SourceDetail, store.AttestedRelation, store.AttestedMembership,
              store.AttestedFact, store.RepositoryRow, store.RepositoryDetail, store.CollectionRow, store.CollectionDetail,
              store.EvidenceTotals, store.PlaceRef, store.SourceRef]  # fmt: skip
    for model in models:
        properties = schema["components"]["schemas"][model.__name__]["properties"]
        assert set(properties) == {f.name for f in dataclasses.fields(model)}, model.__name__
        undocumented = [name for name, spec in properties.items() if not spec.get("description")]
        assert undocumented == [], model.__name__
