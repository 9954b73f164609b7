"""The ego network: its persons and ties on paper, in every slice, against networkx, and drawn as SVG."""

from __future__ import annotations

import dataclasses
from collections import defaultdict
from pathlib import Path
from urllib.parse import parse_qsl, urlsplit

import networkx as nx
import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient
from lxml import etree
from sqlalchemy import select

from app.config import Settings, database_url
from app.db import Database, upgrade
from app.main import create_app
from app.models import Person
from app.network.ego import ego_network
from app.network.slice import Slice, resolve_slice
from app.views.common import Urls, templates
from app.views.ego import EgoPanel, ego_panel
from tests.slice_world import XSS_NAME, import_world, key, slice_world

SVG = "{http://www.w3.org/2000/svg}"


def make_database(folder: Path, tables: dict) -> Settings:
    """Migrate a fresh database in ``folder``, import ``tables`` into it and return its settings."""
    folder.mkdir(parents=True, exist_ok=True)
    database = Database(database_url(folder / "attesta.db"))
    upgrade(database)
    import_world(database, folder / "workbook", tables)
    database.dispose()
    return Settings(database_url=database_url(folder / "attesta.db"))


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    settings = make_database(tmp_path_factory.mktemp("slice-world"), slice_world())
    with TestClient(create_app(settings)) as test_client:
        yield test_client


def ego(client: TestClient, query: str = "", person: str = "E") -> dict:
    response = client.get(f"/api/persons/{key(person)}/ego?{query}")
    assert response.status_code == 200, response.text
    return response.json()


def nodes(body: dict) -> set[str]:
    return {node["key"] for node in body["nodes"]}


def ties(body: dict) -> set[tuple[str, str, str]]:
    """The ties as (first, second, kind), in letters of the dataset's table; undirected pairs sorted."""
    letters = {key(letter): letter for letter in "EABCDFGHXZW"}
    found = set()
    for edge in body["edges"]:
        a, b = letters[edge["source"]], letters[edge["target"]]
        found.add((a, b, edge["kind"]) if edge["directed"] else (*sorted((a, b)), edge["kind"]))
    return found


def keys(letters: str) -> set[str]:
    return {key(letter) for letter in letters}


# --- the ego network on paper (tests/slice_world.py) ---------------------------------------------

RADIUS_1 = {("E", "A", "letter"), ("A", "E", "letter"), ("A", "E", "friendship"), ("E", "B", "letter"),
            ("C", "E", "sibling"), ("E", "G", "letter"), ("E", "X", "business"), ("A", "B", "business"),
            ("E", "E", "letter")}  # fmt: skip
RADIUS_2 = RADIUS_1 | {("B", "D", "friendship"), ("C", "F", "parent"), ("D", "F", "spouse")}


def test_radius_one_has_the_alters_and_the_ties_among_them(client: TestClient):
    body = ego(client)
    assert nodes(body) == keys("EABCGX")  # H is known only from a draft
    assert ties(body) == RADIUS_1  # A--B is a tie between alters: not a star
    assert body["nodes"][0]["key"] == key("E") and body["nodes"][0]["distance"] == 0
    assert {n["key"]: n["distance"] for n in body["nodes"][1:]} == {k: 1 for k in keys("ABCGX")}
    assert body["left_out"] == {"1": 0}


def test_radius_two_adds_the_alters_of_the_alters(client: TestClient):
    body = ego(client, "radius=2")
    assert nodes(body) == keys("EABCGXDF")
    assert ties(body) == RADIUS_2  # D--F: a tie between two persons two steps away
    assert {n["key"] for n in body["nodes"] if n["distance"] == 2} == keys("DF")


def test_edges_carry_counts_and_relation_ids(client: TestClient):
    body = ego(client)
    edge = next(e for e in body["edges"] if (e["source"], e["target"], e["kind"]) == (key("A"), key("E"), "letter"))
    assert (edge["attestations"], edge["documents"], edge["weight"]) == (2, 1, 1.0)  # the copy folds into s2
    assert edge["directed"] is True and len(edge["relation_ids"]) == 1
    assert edge["source_name"] == "Anna Alting" and edge["kind_label"] == "letter"
    with_attestations = ego(client, "weight=attestations")
    assert next(e["weight"] for e in with_attestations["edges"] if e["relation_ids"] == edge["relation_ids"]) == 2.0
    # every relation id is unique to its edge, and the relation page exists for it in the slice's URL space
    ids = [i for e in body["edges"] for i in e["relation_ids"]]
    assert len(ids) == len(set(ids)) == len(body["edges"])


def test_degree_counts_persons_and_a_loop_only_when_kept(client: TestClient):
    degree = {n["key"]: n["degree"] for n in ego(client)["nodes"]}
    assert degree == {key("E"): 5, key("A"): 2, key("B"): 2, key("C"): 1, key("G"): 1, key("X"): 1}
    kept = {n["key"]: n["degree"] for n in ego(client, "loops=keep")["nodes"]}
    assert kept[key("E")] == 6 and ("E", "E", "letter") in ties(ego(client, "loops=keep"))


@pytest.mark.parametrize(
    ("query", "radius_1", "radius_2"),
    [
        # a parent kind selects its sub-kinds: sibling, parent and spouse
        ("kind=kinship", "EC", "ECF"),
        ("kind=letter", "EABG", "EABG"),
        ("kind=letter&kind=sibling", "EABCG", "EABCG"),
        # the period 1700: a04 (1699/1701) overlaps it but is not inside it; a05 is undated
        ("from=1700&to=1700", "EABCX", "EABCX"),
        ("from=1700&to=1700&dates=inside", "EACX", "EACX"),
        ("from=1700&to=1700&undated=drop", "EABX", "EABX"),
        # probable a04 goes; A--B keeps its certain attestation a07, so B is two steps away
        ("certainty=certain", "EACGX", "EACGXBF"),
        ("certainty=probable", "EABCGX", "EABCGXDF"),
        # drafts are left out unless asked for
        ("evidence=draft", "EH", "EH"),
        ("evidence=original&evidence=draft&evidence=copy&evidence=edition", "EABCGXH", "EABCGXHDF"),
        # collections and repositories: col-s1 is the whole of rep-south
        ("omit_collection=col-s1", "EACGX", "EACGXBF"),
        ("omit_repository=rep-south", "EACGX", "EACGXBF"),
        ("keep_collection=col-n1", "EAGX", "EAGX"),
        ("keep_repository=rep-north", "EACGX", "EACGXBF"),
        # only A->E (n1 and s1) and A--B (n2 and s1) are attested in two collections
        ("min_collections=2", "EA", "EAB"),
        ("unidentified=drop", "EABCX", "EABCXDF"),
        # reciprocal: E->B, E->G and C->F are one way only
        ("direction=reciprocal", "EACX", "EACXB"),
        ("direction=undirected", "EABCGX", "EABCGXDF"),
        ("nodes=ties", "EABCGX", "EABCGXDF"),
        ("nodes=all", "EABCGX", "EABCGXDF"),
    ],
)
def test_each_slice_filter_changes_the_network_as_on_paper(client: TestClient, query: str, radius_1: str, radius_2: str):
    assert nodes(ego(client, query)) == keys(radius_1)
    assert nodes(ego(client, query + "&radius=2")) == keys(radius_2)


def test_period_filter_keeps_exactly_the_ties_in_it(client: TestClient):
    assert ties(ego(client, "from=1700&to=1700")) == {
        ("E", "A", "letter"), ("E", "B", "letter"), ("C", "E", "sibling"), ("E", "E", "letter"), ("E", "X", "business"),
    }  # fmt: skip


def test_a_tie_stays_while_one_of_its_attestations_is_in_the_slice(client: TestClient):
    def business(body: dict) -> list[dict]:
        return [e for e in body["edges"] if e["kind"] == "business" and {e["source"], e["target"]} == keys("AB")]

    assert [e["attestations"] for e in business(ego(client, "radius=2"))] == [2]
    assert [e["attestations"] for e in business(ego(client, "radius=2&certainty=certain"))] == [1]  # a06 is possible
    assert [e["attestations"] for e in business(ego(client, "radius=2&omit_collection=col-s1"))] == [1]  # a07 is in s1
    assert business(ego(client, "radius=2&omit_collection=col-s1&certainty=certain")) == []  # both gone


def test_direction_modes(client: TestClient):
    undirected = ego(client, "direction=undirected")
    assert all(not e["directed"] for e in undirected["edges"])
    assert ties(undirected) == {("A", "E", "letter"), ("A", "E", "friendship"), ("B", "E", "letter"), ("C", "E", "sibling"),
                                ("E", "G", "letter"), ("E", "X", "business"), ("A", "B", "business"), ("E", "E", "letter")}  # fmt: skip
    letters = next(e for e in undirected["edges"] if e["kind"] == "letter" and {e["source"], e["target"]} == keys("AE"))
    assert len(letters["relation_ids"]) == 2  # E->A and A->E merged
    assert (letters["attestations"], letters["documents"]) == (3, 2)

    reciprocal = ego(client, "direction=reciprocal&radius=2")
    assert ties(reciprocal) == {("A", "E", "letter"), ("A", "E", "friendship"), ("C", "E", "sibling"), ("E", "X", "business"),
                                ("A", "B", "business"), ("E", "E", "letter")}  # fmt: skip

    recorded = ego(client)
    assert sum(1 for e in recorded["edges"] if e["kind"] == "letter" and {e["source"], e["target"]} == keys("AE")) == 2


def test_self_loops_are_drawn_whatever_the_loops_setting(client: TestClient):
    for query in ("", "loops=drop", "loops=keep", "direction=undirected", "direction=reciprocal"):
        assert ("E", "E", "letter") in ties(ego(client, query)), query
    body = ego(client)
    assert any("loop" in note for note in body["notes"])


def test_an_unidentified_ego_dropped_by_the_slice_stands_alone(client: TestClient):
    body = ego(client, "unidentified=drop", person="G")
    assert nodes(body) == keys("G") and body["edges"] == []
    assert any("unidentified" in note for note in body["notes"])
    assert nodes(ego(client, person="G")) == keys("GE")


def test_a_person_without_ties_is_drawn_alone(client: TestClient):
    body = ego(client, person="Z")
    assert nodes(body) == keys("Z") and body["edges"] == []
    assert body["notes"] == ["No tie of Zeno Zand is in this slice."]


# --- against networkx ------------------------------------------------------------------------------


def graph_tables(G: nx.Graph, names: dict) -> dict[str, list[dict[str, str]]]:
    """Return a workbook with the graph's nodes as persons and each edge as a business tie in one source."""
    edges = sorted(tuple(sorted((u, v))) for u, v in G.edges())
    return {
        "persons.csv": [{"key": f"n{node}", "name": names.get(node, str(node))} for node in G.nodes()],
        "sources.csv": [{"key": f"s{i}", "date": "1500"} for i in range(len(edges))],
        "relations.csv": [
            {"person": f"n{u}", "other": f"n{v}", "kind": "business", "source": f"s{i}"} for i, (u, v) in enumerate(edges)
        ],
    }


@pytest.mark.parametrize(
    ("name", "G"),
    [
        # Florentine families: marriage ties of Padgett & Ansell (1993), "Robust action and the rise of
        # the Medici, 1400-1434", American Journal of Sociology 98(6); shipped with networkx.
        ("florentine", nx.florentine_families_graph()),
        # Zachary (1977), "An information flow model for conflict and fission in small groups",
        # Journal of Anthropological Research 33(4); shipped with networkx.
        ("karate", nx.karate_club_graph()),
    ],
)
def test_ego_networks_equal_networkx_ego_graph(tmp_path, name: str, G: nx.Graph):
    names = {node: node for node in G.nodes()} if name == "florentine" else {}
    G = nx.relabel_nodes(G, {node: str(node).replace(" ", "_") for node in G.nodes()})
    settings = make_database(tmp_path / name, graph_tables(G, names))
    egos = sorted(G.nodes(), key=lambda n: (-G.degree(n), n))[:3] + sorted(G.nodes(), key=lambda n: (G.degree(n), n))[:2]
    with TestClient(create_app(settings)) as client:
        for node in egos:
            for radius in (1, 2):
                expected = nx.ego_graph(G, node, radius=radius)
                body = client.get(f"/api/persons/n{node}/ego?radius={radius}").json()
                assert nodes(body) == {f"n{n}" for n in expected.nodes()}, (node, radius)
                drawn = {frozenset((e["source"], e["target"])) for e in body["edges"]}
                assert drawn == {frozenset((f"n{u}", f"n{v}")) for u, v in expected.edges()}, (node, radius)
                assert len(body["edges"]) == expected.number_of_edges()
                degree = dict(expected.degree())
                assert {n["key"]: n["degree"] for n in body["nodes"]} == {f"n{n}": d for n, d in degree.items()}


# --- the cap on hubs -------------------------------------------------------------------------------


def hub_tables(alters: int, *, second: int = 0) -> dict[str, list[dict[str, str]]]:
    """A hub h whose alter a<i> is attested by i letters (in i sources); alter a1 knows ``second`` others."""
    persons = [{"key": "h", "name": "Hub"}] + [{"key": f"a{i:03d}", "name": f"Alter {i}"} for i in range(1, alters + 1)]
    persons += [{"key": f"b{j:03d}", "name": f"Far {j}"} for j in range(1, second + 1)]
    sources, relations = [], []
    for i in range(1, alters + 1):
        for copy in range(i):
            sources.append({"key": f"s{i}-{copy}", "date": "1600"})
            relations.append({"person": "h", "other": f"a{i:03d}", "kind": "letter", "source": f"s{i}-{copy}"})
    for j in range(1, second + 1):
        sources.append({"key": f"t{j}", "date": "1600"})
        relations.append({"person": f"a{alters:03d}", "other": f"b{j:03d}", "kind": "letter", "source": f"t{j}"})
    return {"persons.csv": persons, "sources.csv": sources, "relations.csv": relations}


def test_a_hub_keeps_its_strongest_alters_and_says_how_many_are_left_out(tmp_path):
    settings = make_database(tmp_path / "hub", hub_tables(65))
    with TestClient(create_app(settings)) as client:
        body = client.get("/api/persons/h/ego").json()
        assert body["max_alters"] == 60 and body["left_out"] == {"1": 5}
        assert nodes(body) == {"h"} | {f"a{i:03d}" for i in range(6, 66)}  # a001..a005 have the fewest letters
        note = next(n for n in body["notes"] if "not drawn" in n)
        assert note.startswith("5 more persons are tied to Hub but not drawn")


def test_the_cap_at_radius_two_and_equal_strengths_decided_by_key(tmp_path):
    settings = make_database(tmp_path / "hub2", hub_tables(4, second=5))
    database = Database(settings.database_url)
    with database.read() as session:
        resolved = resolve_slice(session, Slice())
        hub = session.scalars(select(Person.id).where(Person.key == "h")).one()
        network = ego_network(session, resolved, hub, radius=2, max_alters=7)
        again = ego_network(session, resolved, hub, radius=2, max_alters=7)
        weighed = ego_network(session, resolve_slice(session, Slice(weight="none")), hub, radius=1, max_alters=2)
    database.dispose()
    # four alters at one step, then three of the five at two steps (all equally tied to a004: b001..b003 by key)
    assert {n.key for n in network.nodes} == {"h", "a001", "a002", "a003", "a004", "b001", "b002", "b003"}
    assert network.left_out == {1: 0, 2: 2}
    assert network == again
    # with weight=none every tie weighs 1: documents, then attestations decide (a004, then a003)
    assert {n.key for n in weighed.nodes} == {"h", "a004", "a003"} and weighed.left_out == {1: 2}


# --- the drawing ----------------------------------------------------------------------------------


def page(client: TestClient, query: str = "", person: str = "E") -> BeautifulSoup:
    response = client.get(f"/persons/{key(person)}/ego?{query}")
    assert response.status_code == 200, response.text
    return BeautifulSoup(response.text, "html.parser")


def same_link(href: str, path: str, query: list[tuple[str, str]]) -> bool:
    parts = urlsplit(href)
    return parts.path == path and sorted(parse_qsl(parts.query)) == sorted(query)


def test_every_node_and_edge_is_a_link_that_keeps_the_slice(client: TestClient):
    query = "kind=letter&kind=business&from=1690&certainty=probable&radius=2"
    slice_pairs = Slice.from_query(parse_qsl(query)).to_query()
    soup = page(client, query)
    svg = soup.select_one("#ego-panel svg.ego-svg")
    body = ego(client, query)
    node_links = svg.select("a.ego-node")
    assert {a["data-key"] for a in node_links} == nodes(body)
    for a in node_links:
        assert same_link(a["href"], f"/persons/{a['data-key']}", slice_pairs), a["href"]
        assert a.find("title").get_text()
    edge_links = svg.select("a.ego-edge")
    assert len(edge_links) == len(body["edges"])
    for a in edge_links:
        assert same_link(a["href"], f"/ties/{a['data-source']}/{a['data-target']}", slice_pairs), a["href"]
        assert a["hx-get"] == a["href"]
        group = a.find_parent("g", class_="ego-edges")  # htmx inherits the target and swap from the edges' group
        assert group["hx-target"] == "#tie-panel" and group["hx-swap"] == "innerHTML"
        arrow = " → " if a["data-kind"] == "letter" else " – "
        title = a.find("title").get_text()
        assert arrow in title and ": " + a["data-kind"] in title and "document" in title
    assert soup.select_one("#tie-panel") is not None


def test_drawing_marks_kinds_directions_loops_and_persons(client: TestClient):
    body = ego(client, "radius=2")
    drawing = body["drawing"]
    styles = {k["key"]: k for k in drawing["kinds"]}
    assert set(styles) == {"letter", "friendship", "sibling", "business", "parent", "spouse"}
    assert len({(k["colour"], k["dash"]) for k in styles.values()}) == len(styles)  # each kind its own line
    assert styles["letter"]["marker"] and styles["parent"]["marker"] and not styles["sibling"]["marker"]
    drawn = {(e["source"], e["target"], e["kind"]): e for e in drawing["edges"]}
    assert drawn[(key("E"), key("A"), "letter")]["marker"] == styles["letter"]["marker"]
    assert " C" in drawn[(key("E"), key("E"), "letter")]["path"]  # a loop is a curve back to its node
    # three kinds between E and A: three separate paths
    between = [e["path"] for (s, t, _k), e in drawn.items() if {s, t} == keys("AE")]
    assert len(between) == len(set(between)) == 3 and sum(" Q" in p for p in between) >= 2
    marks = {n["key"]: n for n in drawing["nodes"]}
    assert marks[key("G")]["unidentified"] and marks[key("E")]["ego"] and marks[key("A")]["shape"] == "circle"
    assert marks[key("E")]["size"] > marks[key("G")]["size"]  # sized by degree

    soup = page(client, "evidence=draft&evidence=original&radius=2")
    svg = soup.select_one("svg.ego-svg")
    assert svg.select_one(f'a[data-key="{key("H")}"] rect') is not None  # a corporate body is a rounded square
    assert "ego-mark-unidentified" in svg.select_one(f'a[data-key="{key("G")}"] circle')["class"]
    assert svg.select('path[marker-end]')
    legend = soup.select_one(".ego-legend")
    assert {li["data-kind"] for li in legend.select("li[data-kind]")} >= {"letter", "business"}
    legend_text = legend.get_text(" ", strip=True)
    assert "corporate body" in legend_text and "unidentified" in legend_text and "line width" in legend_text


def test_markup_in_a_name_stays_text(client: TestClient):
    response = client.get(f"/persons/{key('E')}/ego")
    assert "<script>alert(1)" not in response.text
    soup = BeautifulSoup(response.text, "html.parser")
    assert [s.get("src") for s in soup.find_all("script")] == ["/static/htmx.min.js"]
    node = soup.select_one(f'svg a[data-key="{key("X")}"]')
    assert node.find("title").get_text().startswith(XSS_NAME)
    assert node.find("text").get_text().startswith("<script>")

    download = client.get(f"/persons/{key('E')}/ego.svg")
    root = etree.fromstring(download.content)
    assert root.tag == f"{SVG}svg"
    assert not [el for el in root.iter() if isinstance(el.tag, str) and el.tag.endswith("script")]
    titles = [el.text for el in root.iter(f"{SVG}title")]
    assert any(t.startswith(XSS_NAME) for t in titles)


def test_svg_download_is_a_standalone_file_with_its_caption(client: TestClient):
    response = client.get(f"/persons/{key('E')}/ego.svg?radius=2&certainty=probable")
    assert response.status_code == 200
    assert response.headers["content-type"].startswith("image/svg+xml")
    assert response.headers["content-disposition"] == 'attachment; filename="ego-p-e-radius2.svg"'
    assert response.content.startswith(b'<?xml version="1.0" encoding="UTF-8"?>')
    root = etree.fromstring(response.content)
    assert root.tag == f"{SVG}svg" and root.get("viewBox") and root.get("width")
    assert root.find(f"{SVG}style") is not None
    assert not root.findall(f".//{SVG}a")  # a file for a paper carries no links into this site
    text = " ".join(t.text or "" for t in root.iter(f"{SVG}text"))
    assert "Ego network of Elias Egmont (p-e), radius 2" in text
    assert "certain and probable evidence" in text and "dataset version " in text and "data version" in text
    assert len(root.findall(f".//{SVG}circle")) + len(root.findall(f".//{SVG}rect")) >= 8


def test_the_same_data_and_slice_give_the_same_picture(tmp_path):
    pictures = []
    for name in ("first", "second"):
        settings = make_database(tmp_path / name, slice_world())
        with TestClient(create_app(settings)) as client:
            pictures.append(client.get(f"/persons/{key('E')}/ego.svg?radius=2").content)
            pictures.append(client.get(f"/persons/{key('E')}/ego.svg?radius=2").content)
    assert pictures[0] == pictures[1] == pictures[2] == pictures[3]


# --- the page, its partial, its errors ----------------------------------------------------------


def test_page_shows_the_slice_line_the_form_and_the_panel(client: TestClient):
    soup = page(client, "certainty=certain")
    assert soup.find("h1").get_text(strip=True) == "Ego network of Elias Egmont"
    line = soup.select_one("#ego-panel .slice-line").get_text(" ", strip=True)
    assert "certain evidence only" in line
    assert soup.select_one("form#slice-form") is not None
    assert soup.select_one('#ego-panel [data-count="alters"]').get_text() == "4"
    rows = soup.select(".ego-tie-table tbody tr")
    assert len(rows) == len(ego(client, "certainty=certain")["edges"])
    download = soup.select_one(".downloads a[download]")["href"]
    assert same_link(download, f"/persons/{key('E')}/ego.svg", [("certainty", "certain")])
    radius_two = soup.select_one('.radius-switch a[data-radius="2"]')["href"]
    assert same_link(radius_two, f"/persons/{key('E')}/ego", [("certainty", "certain"), ("radius", "2")])


def test_person_page_lists_the_strongest_ties_of_each_kind_when_many_are_drawn(client: TestClient, monkeypatch):
    """Above the limit the person page lists the ties drawn by kind, the strongest of each; the ego page lists all."""
    from app.views.persons import PersonPage

    edges = ego(client)["edges"]
    monkeypatch.setattr(PersonPage, "tie_list_limit", len(edges) - 1)  # the limit of a hub's page, on a small network
    monkeypatch.setattr(PersonPage, "tie_kind_limit", 2)
    soup = BeautifulSoup(client.get(f"/persons/{key('E')}").text, "html.parser")
    tables = soup.select("details.ego-ties table.ego-tie-table")
    by_kind: dict[str, list[dict]] = defaultdict(list)
    for edge in edges:
        by_kind[edge["kind"]].append(edge)
    assert [t["data-kind"] for t in tables] == sorted(by_kind)
    for table in tables:
        drawn = by_kind[table["data-kind"]]
        listed = [(r["data-source"], r["data-target"]) for r in table.select("tbody tr")]
        strongest = sorted(drawn, key=lambda e: (e["documents"], e["attestations"]), reverse=True)[:2]  # stable: by pair
        assert listed == [(e["source"], e["target"]) for e in strongest]
        assert f"{len(drawn)} tie" in table.caption.get_text()
    assert len(by_kind["letter"]) > 2 and "the 2 with the most documents" in soup.select_one('table[data-kind="letter"] caption').text
    assert same_link(soup.select_one(".ties-cut a")["href"], f"/persons/{key('E')}/ego", [])
    every = BeautifulSoup(client.get(f"/persons/{key('E')}/ego").text, "html.parser")
    assert len(every.select(".ego-tie-table tbody tr")) == len(edges) and every.select_one(".ties-cut") is None


def test_htmx_request_gets_only_the_panel(client: TestClient):
    response = client.get(f"/persons/{key('E')}/ego", headers={"HX-Request": "true"})
    soup = BeautifulSoup(response.text, "html.parser")
    assert soup.find("header") is None and soup.find("form") is None
    assert soup.select_one("section#ego-panel svg.ego-svg") is not None


def test_panel_renders_inside_a_page_that_holds_it_as_ego(client: TestClient):
    """The person page includes _ego_panel.html with the panel in its view-model's `ego` field."""

    @dataclasses.dataclass
    class PersonPage:
        ego: EgoPanel

    database = Database(client.app.state.settings.database_url)
    with database.read() as session:
        panel = ego_panel(session=session, person_key=key("E"), slice=Slice(kind=("letter",)), radius=1)
    database.dispose()
    html = templates.get_template("_ego_panel.html").render(page=PersonPage(panel), urls=Urls())
    soup = BeautifulSoup(html, "html.parser")
    assert {a["data-key"] for a in soup.select("svg a.ego-node")} == nodes(ego(client, "kind=letter"))
    assert all("kind=letter" in a["href"] for a in soup.select("svg a"))


@pytest.mark.parametrize("radius", ["7", "0", "two", "1.5"])
def test_bad_radius_is_a_400_naming_it(client: TestClient, radius: str):
    for path in (f"/persons/{key('E')}/ego", f"/api/persons/{key('E')}/ego", f"/persons/{key('E')}/ego.svg"):
        response = client.get(f"{path}?radius={radius}")
        assert response.status_code == 400, path
        text = response.text
        assert f"radius={radius}" in text and "one of 1, 2" in text
    assert client.get(f"/api/persons/{key('E')}/ego?radius=7").json() == {
        "error": "bad parameter", "detail": "radius=7 is not accepted; accepted: one of 1, 2",
    }  # fmt: skip


@pytest.mark.parametrize(
    ("query", "parameter"),
    [("direction=sideways", "direction"), ("kind=gossip", "kind"), ("from=17x", "from"), ("min_collections=0", "min_collections"),
     ("omit_collection=col-zz", "omit_collection"), ("evidence=rumour", "evidence")],
)
def test_bad_slice_parameter_is_a_400_naming_it(client: TestClient, query: str, parameter: str):
    response = client.get(f"/api/persons/{key('E')}/ego?{query}")
    assert response.status_code == 400
    assert response.json()["detail"].startswith(f"{parameter}=")
    page_response = client.get(f"/persons/{key('E')}/ego?{query}")
    assert page_response.status_code == 400
    assert BeautifulSoup(page_response.text, "html.parser").select_one("#error .error-detail").get_text().startswith(f"{parameter}=")


def test_unknown_person_is_a_404_in_the_site_style(client: TestClient):
    for path in ("/persons/nobody/ego", "/persons/nobody/ego.svg"):
        response = client.get(path)
        assert response.status_code == 404
        soup = BeautifulSoup(response.text, "html.parser")
        assert soup.select_one("#error .error-detail").get_text(strip=True) == "There is no person with the key nobody."
    assert client.get("/api/persons/nobody/ego").json()["error"] == "not found"


def test_openapi_documents_the_routes_and_the_view_model(client: TestClient):
    schema = client.get("/openapi.json").json()
    for path in ("/persons/{key}/ego", "/api/persons/{key}/ego", "/persons/{key}/ego.svg"):
        operation = schema["paths"][path]["get"]
        assert operation["summary"] and operation["description"], path
        assert "radius" in {p["name"] for p in operation["parameters"]}
    components = schema["components"]["schemas"]
    for model in ("EgoPanel", "EgoNode", "EgoEdge", "Drawing", "DrawnNode", "DrawnEdge", "KindStyle", "SliceControls"):
        undocumented = [name for name, spec in components[model]["properties"].items() if not spec.get("description")]
        assert undocumented == [], model


# --- alters chosen on sums made in SQL --------------------------------------------------------


@pytest.mark.parametrize("query", ["", "direction=undirected", "weight=attestations", "weight=none",
                                   "min_collections=2", "certainty=certain", "from=1705&to=1712"])
def test_neighbour_sums_equal_the_sums_of_each_relation(client: TestClient, query: str):
    """``neighbour_totals`` (grouped by the other person in SQL) adds up exactly what ``relation_totals`` lists per relation."""
    from collections import defaultdict

    from app.network.slice import neighbour_totals, relation_totals

    database = client.app.state.database
    with database.read() as session:
        resolved = resolve_slice(session, Slice.from_query(parse_qsl(query)))
        everyone = list(session.scalars(select(Person.id)))
        for group in ([p] for p in everyone), [everyone[:3]], [everyone]:
            for anchors in group:
                expected: dict[int, list[int]] = defaultdict(lambda: [0, 0, 0])
                for total in relation_totals(session, resolved, persons=anchors):
                    other = total.person_b if total.person_a in anchors else total.person_a
                    sums = expected[other]
                    sums[0] += 1
                    sums[1] += total.attestations
                    sums[2] += total.documents
                found = {row.person: [row.relations, row.attestations, row.documents]
                         for row in neighbour_totals(session, resolved, persons=anchors)}
                assert found == dict(expected), (query, anchors)


@pytest.mark.parametrize("query", ["", "direction=undirected", "min_collections=2", "certainty=certain",
                                   "from=1705&to=1712", "unidentified=drop", "kind=letter", "keep_collection=col-n1",
                                   "omit_repository=rep-south", "evidence=original"])
def test_neighbours_are_the_persons_of_the_neighbour_sums(client: TestClient, query: str):
    """``neighbours`` (who only, from the attestations' index) finds exactly the persons ``neighbour_totals`` sums for,
    less the ``known`` ones."""
    from app.network.slice import neighbour_totals, neighbours

    database = client.app.state.database
    with database.read() as session:
        resolved = resolve_slice(session, Slice.from_query(parse_qsl(query)))
        everyone = list(session.scalars(select(Person.id)))
        for anchors in [*([p] for p in everyone), everyone[:3], everyone]:
            expected = {row.person for row in neighbour_totals(session, resolved, persons=anchors)}
            assert neighbours(session, resolved, persons=anchors) == expected, (query, anchors)
            known = set(everyone[::3]) | set(anchors[:1])  # found already: left out, their relations not read
            assert neighbours(session, resolved, persons=anchors, known=known) == expected - known, (query, anchors)


def test_a_full_first_ring_counts_the_persons_two_steps_away_as_networkx_does(tmp_path):
    """At radius 2 a cap the first ring fills leaves every person two steps away out, and counts them.

    Zachary (1977), "An information flow model for conflict and fission in small groups", Journal
    of Anthropological Research 33(4), shipped with networkx: every tie is one document, so the cap
    keeps the alters by key, and the persons two steps away are the networkx neighbours of those.
    """
    G = nx.relabel_nodes(nx.karate_club_graph(), str)
    settings = make_database(tmp_path / "karate-cap", graph_tables(G, {}))
    database = Database(settings.database_url)
    with database.read() as session:
        resolved = resolve_slice(session, Slice())
        ids = dict(session.execute(select(Person.key, Person.id)).all())
        for node in sorted(G.nodes(), key=lambda n: (-G.degree(n), n))[:3]:
            for cap in (2, 5):
                network = ego_network(session, resolved, ids[f"n{node}"], radius=2, max_alters=cap)
                kept = sorted(f"n{n}" for n in G[node])[:cap]
                second = {m for k in kept for m in G[k.removeprefix("n")]} - set(G[node]) - {node}
                assert {n.key for n in network.nodes} == {f"n{node}", *kept}, (node, cap)
                assert network.left_out == {1: G.degree(node) - cap, 2: len(second)}, (node, cap)
    database.dispose()


def test_the_cap_keeps_the_strongest_alters_whatever_the_direction_mode(client: TestClient):
    """With the cap lowered to 2, the two alters kept are those of the largest summed weight (ties by key)."""
    database = client.app.state.database
    with database.read() as session:
        ego_id = session.scalar(select(Person.id).where(Person.key == key("E")))
        for direction in ("recorded", "undirected", "reciprocal"):
            resolved = resolve_slice(session, Slice(direction=direction))
            full = ego_network(session, resolved, ego_id, radius=1, max_alters=100)
            capped = ego_network(session, resolved, ego_id, radius=1, max_alters=2)
            strength: dict[str, list[float]] = {}
            for edge in full.edges:
                if full.ego in (edge.source, edge.target) and edge.source != edge.target:
                    other = edge.target if edge.source == full.ego else edge.source
                    s = strength.setdefault(other, [0.0, 0, 0])
                    s[0] += edge.weight
                    s[1] += edge.documents
                    s[2] += edge.attestations
            ranked = sorted(strength, key=lambda k: ([-x for x in strength[k]], k))
            kept = {n.key for n in capped.nodes if n.distance == 1}
            assert len(kept) == min(2, len(ranked)), direction
            assert kept == set(ranked[:2]), (direction, strength)
            assert capped.left_out[1] == len(ranked) - len(kept)


# --- the drawing's geometry --------------------------------------------------------------------


def _star(alters: int, ties: list[tuple[int, int]], radius: int = 1):  # noqa: ANN202
    """An ego tied to ``alters`` persons, and the given ties between alters (by number), as a network."""
    from app.network.ego import EgoEdge, EgoNetwork, EgoNode

    def edge(a: str, b: str) -> EgoEdge:
        return EgoEdge(a, b, a, b, "business", "business", False, 1, 1, 1.0, [1])

    nodes = [EgoNode("ego", "Ego", "individual", False, alters, 0)]
    nodes += [EgoNode(f"a{i:02d}", f"Alter {i}", "individual", False, 1, 1) for i in range(alters)]
    edges = [edge("ego", f"a{i:02d}") for i in range(alters)] + [edge(f"a{i:02d}", f"a{j:02d}") for i, j in ties]
    return EgoNetwork("ego", radius, nodes, edges, max_alters=200)


def _points(path: str, steps: int = 50) -> list[tuple[float, float]]:
    """Points along an SVG path of one line (M … L …) or one quadratic curve (M … Q … …)."""
    import re

    numbers = [float(n) for n in re.findall(r"-?\d+(?:\.\d+)?", path)]
    if "Q" in path:
        (x1, y1, cx, cy, x2, y2) = numbers
        return [((1 - t) ** 2 * x1 + 2 * (1 - t) * t * cx + t * t * x2, (1 - t) ** 2 * y1 + 2 * (1 - t) * t * cy + t * t * y2)
                for t in (i / steps for i in range(steps + 1))]
    (x1, y1, x2, y2) = numbers
    return [(x1 + (x2 - x1) * t, y1 + (y2 - y1) * t) for t in (i / steps for i in range(steps + 1))]


def test_a_tie_between_two_alters_goes_round_the_ego():
    import math

    from app.network.drawing import EGO_CLEARANCE, ego_drawing
    from app.store.network_labels import KindLabel

    kinds = [KindLabel(1, "business", "business", False, None)]
    # six alters on the ring: 0 and 3 face each other across the ego, 0 and 1 are neighbours
    drawing = ego_drawing(_star(6, [(0, 3), (1, 4), (0, 1)]), kinds)
    ego = next(n for n in drawing.nodes if n.ego)
    far = {(e.source, e.target): e for e in drawing.edges if e.far}
    assert set(far) == {("a00", "a03"), ("a01", "a04"), ("a00", "a01")}
    for pair in (("a00", "a03"), ("a01", "a04")):  # straight, these would run over the ego's mark and ties
        nearest = min(math.hypot(x - ego.x, y - ego.y) for x, y in _points(far[pair].path))
        assert nearest >= ego.size + EGO_CLEARANCE - 1, (pair, nearest)
    assert "Q" not in far[("a00", "a01")].path  # a tie clear of the ego keeps its straight course
    assert not drawing.crowded and all(e.width == 1.2 for e in drawing.edges)


def test_a_crowded_drawing_draws_the_ties_between_alters_fainter():
    from app.network.drawing import CROWDED, FAR_WIDTH, ego_drawing
    from app.store.network_labels import KindLabel

    kinds = [KindLabel(1, "business", "business", False, None)]
    drawing = ego_drawing(_star(CROWDED + 1, [(i, i + 1) for i in range(CROWDED)]), kinds)
    assert drawing.crowded
    assert {e.width for e in drawing.edges if e.far} == {round(1.2 * FAR_WIDTH, 2)}
    assert {e.width for e in drawing.edges if not e.far} == {1.2}
    svg = BeautifulSoup(templates.get_template("_ego_svg.html").render(
        drawing=drawing, svg_label="x", standalone=False, slice=Slice(), urls=Urls()), "html.parser")
    assert len(svg.select("path.ego-line-far")) == CROWDED


def test_a_person_without_ties_gets_a_small_box_with_a_sentence(client: TestClient):
    soup = BeautifulSoup(client.get(f"/persons/{key('Z')}/ego").text, "html.parser")
    assert soup.select_one("#ego-panel svg.ego-svg") is None  # no big empty drawing
    alone = soup.select_one("figure.ego-alone")
    assert alone.get_text(" ", strip=True).startswith("No tie of Zeno Zand is in this slice.")
    assert soup.select_one(".ego-counts") is None and soup.select_one("details.ego-ties") is None
    assert soup.select_one(".ego-notes") is None  # the sentence is said once, in the box


def test_the_doctests_of_the_drawing():
    # labels of persons told apart by their life dates keep the years when they are shortened
    import doctest

    from app.network import drawing

    failures, tried = doctest.testmod(drawing)
    assert tried and not failures
