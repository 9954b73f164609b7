"""The two-mode page (/network/two-mode), its JSON twin and CSV downloads, and the ties page under
mode=co-membership, over HTTP on a real database imported through the workbook.

References: the Southern Women data of Davis, Gardner & Gardner (1941), shipped with networkx as
``davis_southern_women_graph``; projections compared with
``networkx.algorithms.bipartite.weighted_projected_graph`` (shared counts, Breiger 1974) and
``collaboration_weighted_projected_graph`` (Newman 2001); density with ``bipartite.density`` and
clustering with ``bipartite.latapy_clustering`` (Latapy, Magnien & Del Vecchio 2008).
"""

from __future__ import annotations

import csv
import io

import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient
from networkx.algorithms import bipartite

from app.main import create_app
from tests.test_groups import make_settings
from tests.twomode_world import DAVIS, EVENTS, MARKUP_GROUP, WOMEN, event_key, woman_key

PARISH_PERSONS = {"p-aart", "p-bette", "p-cas", "p-dirk"}
PARISH_GROUPS = {"g-parish", "g-guild"}


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    settings, database = make_settings(tmp_path_factory.mktemp("twomode_pages"))
    database.dispose()
    with TestClient(create_app(settings)) as test_client:
        yield test_client


def api(client: TestClient, **query: str) -> dict:
    response = client.get("/api/network/two-mode", params=query)
    assert response.status_code == 200, response.text
    return response.json()


def test_counts_density_and_degrees(client: TestClient):
    page = api(client)
    # Southern Women: 18 women, 14 events, 89 attendances; parish world: 4 persons, 2 groups, 6 memberships.
    assert (page["persons"], page["groups"], page["memberships"]) == (18 + 4, 14 + 2, 89 + 6)
    assert page["density"] == pytest.approx((89 + 6) / (22 * 16))
    persons = {row["person"]["key"]: row["groups"] for row in page["person_degrees"]}
    for woman in WOMEN:
        assert persons[woman_key(woman)] == DAVIS.degree(woman)
    assert {k: persons[k] for k in PARISH_PERSONS} == {"p-aart": 2, "p-bette": 2, "p-cas": 1, "p-dirk": 1}
    groups = {row["group"]["key"]: row["members"] for row in page["group_degrees"]}
    assert {event_key(e): DAVIS.degree(e) for e in EVENTS} == {k: v for k, v in groups.items() if k not in PARISH_GROUPS}
    assert groups["g-parish"] == 4 and groups["g-guild"] == 2
    degrees = [row["groups"] for row in page["person_degrees"]]
    assert degrees == sorted(degrees, reverse=True)
    # Clustering of the women equals networkx's Latapy clustering (the parish world is a separate component).
    reference = bipartite.latapy_clustering(DAVIS)
    clustering = {row["person"]["key"]: row["clustering"] for row in page["person_degrees"]}
    for woman in WOMEN:
        assert clustering[woman_key(woman)] == pytest.approx(reference[woman])


def test_density_equals_networkx(client: TestClient):
    # networkx's bipartite.density on the same two-mode graph: the Southern Women and the parish world.
    import networkx as nx

    union = nx.union(DAVIS, nx.Graph([("A", "parish"), ("B", "parish"), ("C", "parish"), ("D", "parish"),
                                      ("A", "guild"), ("B", "guild")]))  # fmt: skip
    top = set(WOMEN) | {"A", "B", "C", "D"}
    assert api(client)["density"] == pytest.approx(bipartite.density(union, top))


@pytest.mark.parametrize("weighting", ["shared", "newman", "jaccard"])
def test_person_pairs_equal_networkx_projections(client: TestClient, weighting: str):
    page = api(client, weighting=weighting)
    reference = {
        "shared": bipartite.weighted_projected_graph(DAVIS, WOMEN),
        "newman": bipartite.collaboration_weighted_projected_graph(DAVIS, WOMEN),
        "jaccard": bipartite.overlap_weighted_projected_graph(DAVIS, WOMEN),
    }[weighting]
    expected = {frozenset((woman_key(u), woman_key(v))): w for u, v, w in reference.edges(data="weight")}
    shown = {frozenset((p["a"]["key"], p["b"]["key"])): p["weight"] for p in page["person_pairs"]}
    women_pairs = {pair: w for pair, w in shown.items() if not pair & PARISH_PERSONS}
    # The page shows the heaviest 100 pairs of all; every shown pair has networkx's weight ...
    assert women_pairs and all(w == pytest.approx(expected[pair]) for pair, w in women_pairs.items())
    # ... and nothing heavier was left out.
    lightest = min(p["weight"] for p in page["person_pairs"])
    assert all(w <= lightest + 1e-9 for pair, w in expected.items() if pair not in shown)
    assert page["person_pairs_total"] == len(expected) + 6  # the four parishioners pair up six ways


def test_group_pairs_equal_networkx_projection(client: TestClient):
    page = api(client)
    reference = bipartite.weighted_projected_graph(DAVIS, EVENTS)
    expected = {frozenset((event_key(u), event_key(v))): w for u, v, w in reference.edges(data="weight")}
    shown = {frozenset((p["a"]["key"], p["b"]["key"])): (p["weight"], p["shared"], len(p["members"])) for p in page["group_pairs"]}
    assert shown.pop(frozenset(PARISH_GROUPS)) == (2, 2, 2)  # Aart and Bette
    assert {pair: w for pair, (w, _, _) in shown.items()} == expected
    assert all(w == s == m for w, s, m in shown.values())


def test_csv_downloads_parse_and_match(client: TestClient):
    def table(name: str, **extra: str) -> list[list[str]]:
        response = client.get("/network/two-mode", params={"format": "csv", "table": name, **extra})
        assert response.status_code == 200 and response.headers["content-type"].startswith("text/csv")
        return list(csv.reader(io.StringIO(response.text)))

    rows = table("incidence")
    header, body = rows[0], rows[1:]
    assert len(header) == 1 + 16 and len(body) == 22
    assert sum(int(v) for row in body for v in row[1:]) == 89 + 6
    assert f"g-guild ({MARKUP_GROUP})" in header
    col = {label.split(" ")[0]: n for n, label in enumerate(header)}
    row = {r[0].split(" ")[0]: r for r in body}
    for woman, event in DAVIS.edges():
        w, e = (woman, event) if woman in WOMEN else (event, woman)
        assert row[woman_key(w)][col[event_key(e)]] == "1"

    matrix = table("person_projection", weighting="newman")
    col = {label.split(" ")[0]: n for n, label in enumerate(matrix[0])}
    row = {r[0].split(" ")[0]: r for r in matrix[1:]}
    reference = bipartite.collaboration_weighted_projected_graph(DAVIS, WOMEN)
    for u, v, w in reference.edges(data="weight"):
        assert float(row[woman_key(u)][col[woman_key(v)]]) == pytest.approx(w)
    assert all(float(row[k][col[k]]) == 0 for k in row)

    groups = table("group_projection")
    col = {label.split(" ")[0]: n for n, label in enumerate(groups[0])}
    row = {r[0].split(" ")[0]: r for r in groups[1:]}
    assert row["g-parish"][col["g-guild"]] == "2"

    persons = table("persons")
    assert persons[0] == ["person_key", "person", "groups", "clustering"]
    assert {r[0]: int(r[2]) for r in persons[1:]}[woman_key("Evelyn Jefferson")] == DAVIS.degree("Evelyn Jefferson")
    assert len(table("groups")) == 1 + 16


def test_overlap_required_on_the_parish(client: TestClient):
    # On paper (tests/twomode_world.py): in the parish Aart 1650-1660, Bette 1712 only, Cas 1705-1715
    # (start recorded, end from the entry of 1715), Dirk undated; in the guild Aart 1655, Bette 1650-1700.
    # Overlapping terms: Bette and Cas in the parish (1712 within 1705-1715); Aart and Bette in the guild.
    page = api(client, overlap="required")
    parish_pairs = {frozenset((p["a"]["key"], p["b"]["key"])): p["shared"] for p in page["person_pairs"]
                    if {p["a"]["key"], p["b"]["key"]} <= PARISH_PERSONS}  # fmt: skip
    assert parish_pairs == {frozenset(("p-bette", "p-cas")): 1, frozenset(("p-aart", "p-bette")): 1}
    any_pairs = {frozenset((p["a"]["key"], p["b"]["key"])): p["shared"] for p in api(client)["person_pairs"]
                 if {p["a"]["key"], p["b"]["key"]} <= PARISH_PERSONS}  # fmt: skip
    assert any_pairs[frozenset(("p-aart", "p-bette"))] == 2  # parish and guild, whenever held


def test_the_page_links_and_states_its_conventions(client: TestClient):
    response = client.get("/network/two-mode", params={"weighting": "jaccard", "overlap": "required"})
    assert response.status_code == 200
    soup = BeautifulSoup(response.text, "lxml")
    text = soup.get_text(" ")
    assert "Latapy" in text and "Jaccard" in text and "overlap=required" in text and "span of the dates" in text
    link = soup.select_one("#person-pairs a.pair-link")["href"]
    assert link.startswith("/ties/") and "mode=co-membership" in link and "overlap=required" in link
    assert "<script>" not in str(soup.select_one("#group-degrees"))  # markup shown as text
    assert MARKUP_GROUP in soup.select_one("#group-degrees").get_text()
    for page in ("/network", "/groups"):
        assert BeautifulSoup(client.get(page).text, "lxml").select_one('a[href^="/network/two-mode"]') is not None


def test_empty_projection_says_so(client: TestClient):
    # max_group_size=1 leaves out every group of two or more members, so no two persons share a group.
    soup = BeautifulSoup(client.get("/network/two-mode", params={"max_group_size": "1"}).text, "lxml")
    assert soup.select_one('.empty-projection[data-projection="persons"]') is not None
    assert soup.select_one('.empty-projection[data-projection="groups"]') is not None


@pytest.mark.parametrize(
    ("path", "query", "parameter"),
    [
        ("/api/network/two-mode", {"weighting": "heavy"}, "weighting"),
        ("/api/network/two-mode", {"format": "csv", "table": "matrix"}, "table"),
        ("/api/network/two-mode", {"format": "xlsx"}, "format"),
        ("/api/network/two-mode", {"overlap": "sometimes"}, "overlap"),
        ("/api/ties/p-aart/p-bette", {"mode": "groups"}, "mode"),
        ("/api/network/summary", {"mode": "co-members"}, "mode"),
        ("/api/network/centrality", {"weighting": "heavy"}, "weighting"),
        ("/api/persons/p-aart/ego", {"mode": "groups"}, "mode"),
        ("/api/persons/p-aart", {"weighting": "most"}, "weighting"),
    ],
)
def test_bad_parameters_are_400_naming_them(client: TestClient, path: str, query: dict, parameter: str):
    response = client.get(path, params=query)
    assert response.status_code == 400, response.text
    assert response.json()["detail"].startswith(f"{parameter}=")


def test_ties_page_lists_shared_groups_with_both_attestations_and_overlap(client: TestClient):
    page = client.get("/api/ties/p-aart/p-bette", params={"mode": "co-membership"}).json()
    assert page["ties"] is None
    shared = {g["group"]["key"]: g for g in page["shared_groups"]}
    assert set(shared) == {"g-parish", "g-guild"}
    parish, guild = shared["g-parish"], shared["g-guild"]
    # Aart 1650-1660 (term as recorded), Bette 1712 (span of the attestation dates): no overlap.
    assert parish["overlap"] is False and parish["counted"] is True
    assert (parish["first"][0]["start"], parish["first"][0]["end"]) == ("1650-01-01", "1660-12-31")
    assert parish["first"][0]["term_from"] == "term as recorded"
    assert parish["second"][0]["term_from"] == "span of the attestation dates"
    assert [a["source"]["key"] for a in parish["first"][0]["attestations"]] == ["s-reg-1655"]
    assert [a["source"]["key"] for a in parish["second"][0]["attestations"]] == ["s-reg-1712"]
    # Guild: Aart 1655 (roll), Bette 1650-1700 as recorded: overlap.
    assert guild["overlap"] is True
    assert [a["source"]["key"] for a in guild["second"][0]["attestations"]] == ["s-roll-1690"]

    required = client.get("/api/ties/p-aart/p-bette", params={"mode": "both", "overlap": "required"}).json()
    assert required["ties"] is not None
    assert {g["group"]["key"]: g["counted"] for g in required["shared_groups"]} == {"g-parish": False, "g-guild": True}
    # Dirk's membership is undated: overlap unknown.
    dirk = client.get("/api/ties/p-aart/p-dirk", params={"mode": "co-membership"}).json()["shared_groups"]
    assert [(g["group"]["key"], g["overlap"]) for g in dirk] == [("g-parish", None)]

    soup = BeautifulSoup(client.get("/ties/p-aart/p-bette", params={"mode": "co-membership"}).text, "lxml")
    sections = {s["data-group"]: s for s in soup.select("section.shared-group")}
    assert sections["g-parish"]["data-overlap"] == "no" and sections["g-guild"]["data-overlap"] == "yes"
    assert "do not overlap" in sections["g-parish"].get_text()
    assert "Parish register" in sections["g-parish"].get_text() and "Guild roll" in sections["g-guild"].get_text()
    assert MARKUP_GROUP in soup.get_text() and "<script>alert(1)" not in str(soup.select_one("#shared-groups"))
    # Links to the persons keep the slice, mode included: their pages draw ties by shared groups too.
    assert all("mode=co-membership" in a["href"] for a in soup.select(".tie-persons a"))
    assert client.get("/api/ties/p-aart/p-bette").json()["shared_groups"] is None


def test_openapi_documents_the_routes_and_every_field(client: TestClient):
    import dataclasses

    from app.views.ties import GroupInCommon, MembershipInCommon, TiesPage
    from app.views.twomode import GroupDegree, GroupPair, PersonDegree, PersonPair, TwoModePage

    schema = client.get("/openapi.json").json()
    for path in ("/network/two-mode", "/api/network/two-mode", "/ties/{a}/{b}"):
        operation = schema["paths"][path]["get"]
        assert operation["summary"] and operation["description"], path
    for model in (TwoModePage, PersonDegree, GroupDegree, PersonPair, GroupPair, TiesPage, GroupInCommon, MembershipInCommon):
        properties = schema["components"]["schemas"][model.__name__]["properties"]
        assert set(properties) == {f.name for f in dataclasses.fields(model)}, model.__name__
        assert [n for n, spec in properties.items() if not spec.get("description")] == [], model.__name__


def test_bipartite_drawing_marks_link_and_tell_the_modes_apart(client: TestClient):
    response = client.get("/network/two-mode")
    soup = BeautifulSoup(response.text, "lxml")
    svg = soup.select_one("svg.two-mode-svg")
    persons = svg.select('a.tm-node[data-mode="person"]')
    groups = svg.select('a.tm-node[data-mode="group"]')
    assert len(persons) == 18 + 4 and len(groups) == 14 + 2
    assert len(svg.select("path.tm-line")) == 89 + 6  # every membership, drawn once
    # Groups are hexagons of the groups' green, persons pale circles (Dirk, unidentified, dashed).
    assert all(a.select_one("polygon.tm-group") for a in groups)
    assert all(a.select_one("circle.tm-person") for a in persons)
    assert "tm-unidentified" in svg.select_one('a[data-key="p-dirk"] circle')["class"]
    # Each mark opens its page; hovering shows its name and counts.
    evelyn = svg.select_one(f'a[data-key="{woman_key("Evelyn Jefferson")}"]')
    assert evelyn["href"].startswith(f"/persons/{woman_key('Evelyn Jefferson')}")
    assert evelyn.title.get_text() == f"Evelyn Jefferson: in {DAVIS.degree('Evelyn Jefferson')} groups"
    parish = svg.select_one('a[data-key="g-parish"]')
    assert parish["href"].startswith("/groups/g-parish") and "4 members" in parish.title.get_text()
    assert "<script>" not in str(svg) or "&lt;script&gt;" in str(svg)  # names with markup stay text
    assert svg.find("script") is None
    # The layout is deterministic: the same data gives the same picture.
    again = BeautifulSoup(client.get("/network/two-mode").text, "lxml").select_one("svg.two-mode-svg")
    assert str(again) == str(svg)
    assert api(client)["drawing"]["persons_left_out"] == 0


def test_bipartite_drawing_caps_and_says_what_it_leaves_out():
    from types import SimpleNamespace

    from app.network.bipartite_drawing import two_mode_drawing
    from app.network.twomode import MembershipEvidence

    # 30 persons; person i belongs to groups i % 10 and (i + 1) % 10: 10 groups of 6 members.
    evidence = [MembershipEvidence(n, p, g, "", None, None, None, None, None, None, (n,), (n,))
                for n, (p, g) in enumerate((p, (p + k) % 10) for p in range(30) for k in (0, 1))]  # fmt: skip
    persons = {p: SimpleNamespace(key=f"p-{p:02d}", name=f"P {p}", kind="individual", unidentified=False) for p in range(30)}
    groups = {g: SimpleNamespace(key=f"g-{g:02d}", name=f"G {g}", kind=None) for g in range(10)}
    drawing = two_mode_drawing(evidence, persons=persons, groups=groups, max_persons=9, max_groups=4)
    assert (drawing.groups_drawn, drawing.groups_left_out) == (4, 6)
    assert (drawing.persons_drawn, drawing.persons_left_out) == (9, 21)
    assert "6 of 10 groups are not drawn" in drawing.notes[0] and "21 of 30 persons" in drawing.notes[1]
    # The groups with most members (all have 6: by key) and the persons in most of them are drawn.
    assert {n.key for n in drawing.nodes if n.mode == "group"} == {"g-00", "g-01", "g-02", "g-03"}
    drawn = {n.key for n in drawing.nodes if n.mode == "person"}
    in_both = {f"p-{p:02d}" for p in range(30) if {p % 10, (p + 1) % 10} <= {0, 1, 2, 3}}
    assert in_both == drawn  # the nine persons in two drawn groups come first
    assert all(e.person in drawn and e.group in {"g-00", "g-01", "g-02", "g-03"} for e in drawing.edges)


def test_long_tables_are_paged(client: TestClient):
    first = api(client)
    assert first["paging"]["person_pairs"]["pages"] == 2 and len(first["person_pairs"]) == 100
    second = api(client, person_pairs_page="2")
    assert second["paging"]["person_pairs"]["first"] == 101 and len(second["person_pairs"]) == first["person_pairs_total"] - 100
    keys = lambda page: {frozenset((p["a"]["key"], p["b"]["key"])) for p in page["person_pairs"]}  # noqa: E731
    assert not keys(first) & keys(second) and len(keys(first) | keys(second)) == first["person_pairs_total"]
    assert min(p["weight"] for p in first["person_pairs"]) >= max(p["weight"] for p in second["person_pairs"])
    assert first["paging"]["persons"]["pages"] == 1 and len(first["person_degrees"]) == 22
    response = client.get("/api/network/two-mode", params={"person_pairs_page": "3"})
    assert response.status_code == 400 and response.json()["detail"].startswith("person_pairs_page=")
    soup = BeautifulSoup(client.get("/network/two-mode", params={"person_pairs_page": "2", "weighting": "newman"}).text, "lxml")
    nav = soup.select_one('nav[data-table="person_pairs"]')
    previous = nav.select_one('a[rel="prev"]')["href"]
    assert "weighting=newman" in previous and "person_pairs_page" not in previous
    assert len(next(csv.reader(io.StringIO(client.get("/network/two-mode", params={"format": "csv", "table": "persons"}).text)))) == 4


def test_the_page_has_the_shared_slice_form_the_exports_and_short_tables(client: TestClient):
    soup = BeautifulSoup(client.get("/network/two-mode", params={"weighting": "newman"}).text, "lxml")
    assert soup.select_one(".breadcrumbs a")["href"] == "/network?weighting=newman"
    form = soup.select_one("form#slice-form")
    assert form["action"] == "/network/two-mode"
    assert form.select_one('input[name="weighting"][value="newman"]').has_attr("checked")
    assert form.select_one('input[name="overlap"]') is not None and form.select_one('input[name="max_group_size"]') is not None
    assert soup.select_one("form.two-mode-form") is None  # one form, the one every network page has
    exports = soup.select_one("section.exports")
    assert exports.select_one('a[data-export="graphml"]')["href"].startswith("/export/graphml?")
    # the 100 rows of a page: the first 10 shown, the others folded away below them
    pairs = soup.select_one("#person-pairs")
    assert pairs["data-rows"] == "100"
    assert len(pairs.select(":scope > table tbody tr")) == 10
    assert len(pairs.select("details.more-rows tbody tr")) == 90
    assert pairs.select_one("details.more-rows summary").get_text(strip=True) == "The other 90 pairs of this page"


def test_persons_of_one_name_are_told_apart(tmp_path):
    from app.config import Settings, database_url
    from app.db import Database, upgrade
    from app.exchange.workbook import import_workbook
    from tests.workbooks import write_workbook

    tables = {
        "persons.csv": [{"key": "p-jan-1", "name": "Jan Smit", "born": "1650", "died": "1700"},
                        {"key": "p-jan-2", "name": "Jan Smit", "born": "1672"},
                        {"key": "p-kee", "name": "Kee Smit"}],
        "groups.csv": [{"key": "g-guild", "name": "Guild", "kind": "guild"}],
        "sources.csv": [{"key": "s-roll", "kind": "register", "title": "Roll of the guild"}],
        "memberships.csv": [{"key": f"m-{p}", "person": p, "group": "g-guild", "role": "member", "source": "s-roll",
                             "evidence": "register", "certainty": "certain"} for p in ("p-jan-1", "p-jan-2", "p-kee")],
    }
    database = Database(database_url(tmp_path / "attesta.db"))
    upgrade(database)
    import_workbook(database, write_workbook(tmp_path / "wb", tables), size_limit=10**9)
    database.dispose()
    with TestClient(create_app(Settings(database_url=database_url(tmp_path / "attesta.db")))) as smiths:
        names = {(p["a"]["key"], p["b"]["key"]): (p["a"]["name"], p["b"]["name"]) for p in api(smiths)["person_pairs"]}
        assert names[("p-jan-1", "p-jan-2")] == ("Jan Smit (1650–1700)", "Jan Smit (1672–?)")
        soup = BeautifulSoup(smiths.get("/network/two-mode").text, "lxml")
        links = {a.get_text(strip=True) for a in soup.select("#person-pairs a.pair-link")}
        assert "Jan Smit (1650–1700) and Jan Smit (1672–?)" in links
        assert "Kee Smit" in {a.get_text(strip=True) for a in soup.select("#person-degrees a")}


NETWORK_VIEWS = ["/network", "/network/summary", "/network/centrality", "/network/components", "/network/cut-points",
                 "/network/cliques", "/network/communities", "/network/two-mode"]


@pytest.mark.parametrize("mode", ["relations", "co-membership", "both"])
def test_every_network_view_offers_the_exports_of_its_slice(client: TestClient, mode: str):
    from urllib.parse import parse_qsl, urlsplit

    person = api(client)["person_degrees"][0]["person"]["key"]
    answered: dict[str, int] = {}  # the views link the same files: each is fetched once
    for view in [*NETWORK_VIEWS, f"/persons/{person}"]:
        page = client.get(view, params={"mode": mode, "certainty": "probable"})
        assert page.status_code == 200, (view, page.text[:300])
        links = {a["data-export"]: a["href"] for a in BeautifulSoup(page.text, "lxml").select("section.exports a[data-export]")}
        files = {"graphml", "nodes", "edges", "matrix", "sources", "page"}
        expected = files | ({"ego-svg", "ego-png"} if view.startswith("/persons/") else set()) | (
            {"incidence", "person-projection"} if mode != "relations" else set()) | (
            {"two-mode-svg", "two-mode-png"} if view == "/network/two-mode" else set())  # the page's own drawing
        assert set(links) == expected, view
        for name, href in links.items():
            query = dict(parse_qsl(urlsplit(href).query))
            assert query["certainty"] == "probable", (view, name)  # the page's slice
            # the files hold relations: under a co-membership mode, those of the same slice's relations;
            # the drawings and the two-mode matrices keep the mode, as their pages show it
            keeps_mode = name in ("ego-svg", "ego-png", "two-mode-svg", "two-mode-png", "incidence", "person-projection",
                                  "page")
            assert query.get("mode") == (mode if mode != "relations" and keeps_mode else None), (view, name, href)
            if href not in answered:
                answered[href] = client.get(href).status_code
            assert answered[href] == 200, (view, name, href)
    export = BeautifulSoup(client.get("/export", params={"mode": mode}).text, "lxml")
    assert bool(export.select(".shared-groups-file")) == (mode != "relations")
    assert client.get("/export/graphml", params={"mode": mode}).status_code == (200 if mode == "relations" else 400)


def test_the_two_mode_drawing_downloads_with_a_caption_naming_slice_and_dataset_version(client: TestClient):
    from lxml import etree

    svg = client.get("/export/two-mode.svg", params={"certainty": "probable"})
    assert svg.status_code == 200 and svg.headers["content-type"].startswith("image/svg+xml")
    root = etree.fromstring(svg.content)  # a standalone SVG file (W3C SVG namespace)
    assert root.tag == "{http://www.w3.org/2000/svg}svg" and float(root.get("width")) > 0
    page = BeautifulSoup(client.get("/network/two-mode", params={"certainty": "probable"}).text, "lxml")
    drawn = {a["data-key"] for a in page.select(".two-mode-svg a[data-key]")}
    assert drawn and drawn == {a.get("data-key") for a in root.iter("{http://www.w3.org/2000/svg}a")}  # the page's drawing
    caption = " ".join(t.text for t in root.iterfind(".//{*}g[@class='tm-caption']/{*}text"))
    version = BeautifulSoup(client.get("/export").text, "lxml").select_one("code.dataset-hash").get_text()
    assert f"dataset version {version[:16]}" in caption
    assert page.select_one(".slice-line").get_text(" ", strip=True).removeprefix("Slice: ") in " ".join(caption.split())
    png = client.get("/export/two-mode.png", params={"certainty": "probable"})
    assert png.status_code == 200 and png.content.startswith(b"\x89PNG\r\n\x1a\n")  # the PNG signature (RFC 2083)
