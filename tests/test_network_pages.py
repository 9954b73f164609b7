"""The measure pages, their JSON and CSV twins and the stored results, over HTTP on real imported data.

The reference check uses Padgett's Florentine families marriage network (Padgett & Ansell 1993,
"Robust action and the rise of the Medici, 1400-1434", American Journal of Sociology 98(6);
shipped with networkx as ``florentine_families_graph``, which leaves out the isolated Pucci
family: 15 families, 20 marriages), imported through the workbook. The figures usually quoted
(Medici raw betweenness 47.5, after Wasserman & Faust 1994, Social Network Analysis, from
memory) were checked with networkx 3.6, which the tests call too.
"""

from __future__ import annotations

import csv
import dataclasses
import doctest
import io
from pathlib import Path
from urllib.parse import parse_qsl, urlsplit

import networkx as nx
import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient

from app.config import Settings
from app.db import Database
from app.exchange.workbook import import_workbook
from app.main import create_app
from app.models import EVIDENCE_KINDS
from app.names import fold
from app.network import results as network_results
from app.store.measure_results import count_stored_results
from app.network.definitions import FAMILIES as PAGE_INFO
from app.network.definitions import MEASURE_INFO, Definition
from app.network.measures import MEASURES
from app.views import charts
from app.views import network as network_views
from app.views import network_models
from tests.evidence_world import XSS_NAME, world, world_file  # noqa: F401 - fixtures
from tests.workbooks import write_workbook

FLORENTINE = nx.florentine_families_graph()  # Padgett & Ansell 1993, as shipped with networkx


def family_key(name: str) -> str:
    return "fam-" + name.lower()


def florentine_tables() -> dict[str, list[dict[str, str]]]:
    """One person per family, one undirected marriage relation per marriage, each from its own source."""
    marriages = sorted(tuple(sorted(edge)) for edge in FLORENTINE.edges())
    return {
        "relation_kinds.csv": [{"key": "marriage", "label": "marriage", "directed": "no"}],
        "persons.csv": [{"key": family_key(name), "name": name} for name in sorted(FLORENTINE)],
        "sources.csv": [{"key": f"s-marriage-{i}", "kind": "register", "title": f"Marriage of {a} and {b}",
                         "date": "1430"} for i, (a, b) in enumerate(marriages)],
        "relations.csv": [{"person": family_key(a), "other": family_key(b), "kind": "marriage",
                           "source": f"s-marriage-{i}"} for i, (a, b) in enumerate(marriages)],
    }  # fmt: skip


def pucci_tables() -> dict[str, list[dict[str, str]]]:
    """The Pucci family, known from one fact and no marriage."""
    return {
        "persons.csv": [{"key": "fam-pucci", "name": "Pucci"}],
        "sources.csv": [{"key": "s-pucci", "kind": "register", "title": "Catasto of 1427", "date": "1427"}],
        "facts.csv": [{"person": "fam-pucci", "fact": "residence", "value": "Florence", "source": "s-pucci"}],
    }


def rows_by_key(client: TestClient, **params: str) -> dict[str, dict]:
    response = client.get("/api/network/centrality", params=params)
    assert response.status_code == 200, response.text
    return {row["key"]: row for row in response.json()["rows"]}


def soup_of(response) -> BeautifulSoup:  # noqa: ANN001
    return BeautifulSoup(response.text, "lxml")


# --- the Florentine families: values against networkx and the published figures ---------------


@pytest.fixture
def florentine(tmp_path: Path, database: Database, settings: Settings):
    import_workbook(database, write_workbook(tmp_path / "florentine", florentine_tables()), size_limit=10**9)
    with TestClient(create_app(settings)) as client:
        yield client, database, tmp_path


def test_florentine_centralities_match_the_published_figures_and_networkx(florentine):
    client, _, _ = florentine
    undirected = {"direction": "undirected"}
    betweenness = rows_by_key(client, measure="betweenness", **undirected)
    medici = betweenness["fam-medici"]
    assert medici["raw"] == pytest.approx(47.5)  # Wasserman & Faust 1994, from memory
    assert medici["value"] == pytest.approx(0.522, abs=5e-4)  # 47.5 x 2/(14 x 13)
    assert medici["rank"] == 1
    assert betweenness["fam-guadagni"]["raw"] == pytest.approx(23.17, abs=0.005)
    assert betweenness["fam-albizzi"]["raw"] == pytest.approx(19.33, abs=0.005)
    assert betweenness["fam-salviati"]["raw"] == pytest.approx(13.0)
    # every family against networkx 3.6 on the shipped graph
    reference = nx.betweenness_centrality(FLORENTINE, normalized=False)
    normalized = nx.betweenness_centrality(FLORENTINE)
    assert set(betweenness) == {family_key(name) for name in FLORENTINE}
    for name in FLORENTINE:
        assert betweenness[family_key(name)]["raw"] == pytest.approx(reference[name], abs=1e-9)
        assert betweenness[family_key(name)]["value"] == pytest.approx(normalized[name], abs=1e-12)

    closeness = rows_by_key(client, measure="closeness", **undirected)
    assert closeness["fam-medici"]["value"] == pytest.approx(0.560, abs=5e-4)
    expected = nx.closeness_centrality(FLORENTINE)
    for name in FLORENTINE:
        assert closeness[family_key(name)]["value"] == pytest.approx(expected[name], abs=1e-12)

    degree = rows_by_key(client, measure="degree", **undirected)
    assert degree["fam-medici"]["raw"] == 6
    assert degree["fam-medici"]["rank"] == 1


def test_florentine_cut_points_and_bridges(florentine):
    client, _, _ = florentine
    body = client.get("/api/network/cut-points", params={"direction": "undirected"}).json()
    cut_points = {row["person"]["key"] for row in body["cut_points"]}
    assert cut_points == {"fam-albizzi", "fam-guadagni", "fam-medici", "fam-salviati"}
    assert cut_points == {family_key(name) for name in nx.articulation_points(FLORENTINE)}  # networkx 3.6
    bridges = {frozenset((row["a"]["key"], row["b"]["key"])) for row in body["bridges"]}
    assert len(bridges) == 5
    assert bridges == {frozenset(map(family_key, edge)) for edge in nx.bridges(FLORENTINE)}
    assert all(row["single_document"] for row in body["bridges"])  # each marriage has its own source

    page = soup_of(client.get("/network/cut-points", params={"direction": "undirected"}))
    links = {a["href"] for a in page.select(".bridges-table a.ties-link")}
    assert "/ties/fam-medici/fam-salviati?direction=undirected" in links
    assert len(page.select(".bridges-table .tag-flag")) == 5


def bridge_tables() -> dict[str, list[dict[str, str]]]:
    """A hand-built slice: letters both ways among a, b, c; c and d married (one register entry); d and e
    married (two entries); e wrote to f and f to e (one letter each)."""
    people = "abcdef"
    relations = [("a", "b", "letter"), ("b", "a", "letter"), ("b", "c", "letter"), ("c", "b", "letter"),
                 ("a", "c", "letter"), ("c", "a", "letter"), ("c", "d", "spouse"), ("d", "e", "spouse"),
                 ("d", "e", "spouse"), ("e", "f", "letter"), ("f", "e", "letter")]
    return {
        "relation_kinds.csv": [{"key": "spouse", "label": "spouse", "directed": "no"},
                               {"key": "letter", "label": "letter", "directed": "yes"}],
        "persons.csv": [{"key": f"p-{p}", "name": f"Person {p.upper()}"} for p in people],
        "sources.csv": [{"key": f"s-{i}", "kind": "register" if kind == "spouse" else "letter", "title": f"Source {i}",
                         "date": "1650"} for i, (_, _, kind) in enumerate(relations)],
        "relations.csv": [{"person": f"p-{a}", "other": f"p-{b}", "kind": kind, "source": f"s-{i}"}
                          for i, (a, b, kind) in enumerate(relations)],
    }  # fmt: skip


@pytest.mark.parametrize("direction", ["recorded", "undirected", "reciprocal"])
def test_single_document_bridges_in_every_direction_mode(tmp_path: Path, database: Database, settings: Settings, direction):
    """Worked by hand: c-d (one register entry) is the only single-document bridge, whatever the direction mode;
    an undirected kind drawn both ways under direction=recorded is still one relation and one document."""
    import_workbook(database, write_workbook(tmp_path / "bridges", bridge_tables()), size_limit=10**9)
    client = TestClient(create_app(settings))
    params = {} if direction == "recorded" else {"direction": direction}
    body = client.get("/api/network/cut-points", params=params).json()
    rows = [(row["a"]["key"], row["b"]["key"], row["sides"], row["documents"], row["single_document"]) for row in body["bridges"]]
    assert rows == [("p-c", "p-d", [3, 3], 1, True), ("p-d", "p-e", [4, 2], 2, False), ("p-e", "p-f", [5, 1], 2, False)]
    assert [(row["person"]["key"], row["pieces"]) for row in body["cut_points"]] == [
        ("p-c", [3, 2]), ("p-d", [3, 2]), ("p-e", [4, 1])]
    assert body["single_document_bridges"] == 1
    page = soup_of(client.get("/network/cut-points", params=params))
    assert page.select_one("#bridges-heading").get_text(strip=True) == "Bridges (3)"
    table = page.select(".bridges-table tbody tr")
    assert len(table) == 3 and [tr.get("class") for tr in table] == [["single-document"], None, None]
    assert len(page.select(".bridges-table .tag-flag")) == 1
    assert "1 rest on a single document" in page.select_one("#bridges-heading").find_next("p").get_text(" ", strip=True)
    assert [td.get_text() for td in page.select(".bridges-table td.sides")] == ["3\xa0|\xa03", "4\xa0|\xa02", "5\xa0|\xa01"]
    csv_rows = client.get("/network/cut-points", params={**params, "format": "csv", "table": "bridges"}).text.splitlines()
    assert [line.split(",")[4:6] for line in csv_rows[1:]] == [["3", "3"], ["4", "2"], ["5", "1"]]


def test_an_isolate_changes_n_but_not_raw_betweenness_and_stale_results_wait_for_a_recompute(florentine):
    client, database, tmp_path = florentine
    params = {"measure": "betweenness", "direction": "undirected"}
    before = client.get("/api/network/centrality", params=params).json()
    version = before["computed_at_version"]
    degree_before = client.get("/api/network/centrality", params={"measure": "degree", "direction": "undirected"}).json()
    assert degree_before["context"]["n"] == 15

    # Pucci comes in with a fact only: with nodes=evidence the family is an isolate of the slice.
    report = import_workbook(database, write_workbook(tmp_path / "pucci", pucci_tables()), size_limit=10**9)
    assert report.data_version == version + 1

    # betweenness is expensive: the stored table is shown as it was, with its version
    stale = client.get("/api/network/centrality", params=params).json()
    assert stale["computed_at_version"] == version
    assert stale["context"]["freshness"] == {**stale["context"]["freshness"], "stale": True, "changes_since": 1,
                                             "current_version": version + 1, "from_store": True}
    assert stale["context"]["n"] == 15
    page = soup_of(client.get("/network/centrality", params=params))
    note = page.select_one(".stale-note")
    assert f"computed at version {version}, 1 change since" in note.get_text(" ", strip=True)
    form = note.select_one("form[method=post]")
    assert form["action"] == "/network/centrality/recompute?direction=undirected&measure=betweenness"

    # degree is cheap: recomputed at once, silently
    degree_after = client.get("/api/network/centrality", params={"measure": "degree", "direction": "undirected"}).json()
    assert degree_after["context"]["n"] == 16
    assert degree_after["computed_at_version"] == version + 1
    assert degree_after["context"]["freshness"]["stale"] is False

    # the recompute button replaces the stored table, and the page then has no stale note
    token = form.select_one("input[name=csrf_token]")["value"]
    assert client.post(form["action"], follow_redirects=False).status_code == 403  # no CSRF token: refused
    response = client.post(form["action"], data={"csrf_token": token}, follow_redirects=False)
    assert response.status_code == 303
    assert response.headers["location"] == "/network/centrality?direction=undirected&measure=betweenness"
    assert soup_of(client.get(response.headers["location"])).select_one(".stale-note") is None
    fresh = client.get("/api/network/centrality", params=params).json()
    assert fresh["computed_at_version"] == version + 1
    assert fresh["context"]["n"] == 16
    rows = {row["key"]: row for row in fresh["rows"]}
    assert rows["fam-medici"]["raw"] == pytest.approx(47.5)
    assert rows["fam-medici"]["value"] == pytest.approx(47.5 / 105)  # x 2/(15 x 14)
    assert rows["fam-pucci"]["raw"] == 0
    with_pucci = FLORENTINE.copy()
    with_pucci.add_node("Pucci")
    assert rows["fam-medici"]["value"] == pytest.approx(nx.betweenness_centrality(with_pucci)["Medici"])  # networkx 3.6
    with database.read() as session:
        assert count_stored_results(session=session, measure="betweenness") == 1  # replaced, not added


def test_on_a_large_slice_even_cheap_results_wait_for_a_recompute(florentine, monkeypatch: pytest.MonkeyPatch):
    client, database, tmp_path = florentine
    monkeypatch.setattr(network_results, "LARGE_SLICE", 10)  # the 15 families stand in for a large slice
    params = {"measure": "degree", "direction": "undirected"}
    before = client.get("/api/network/centrality", params=params).json()
    import_workbook(database, write_workbook(tmp_path / "pucci", pucci_tables()), size_limit=10**9)
    kept = client.get("/api/network/centrality", params=params).json()
    assert kept["context"]["freshness"]["changes_since"] == 1
    assert kept["rows"] == before["rows"]
    monkeypatch.setattr(network_results, "LARGE_SLICE", 3000)
    assert client.get("/api/network/centrality", params=params).json()["context"]["n"] == 16


def test_the_doctests_of_the_results_and_pages():
    for module in (network_results, network_views, charts):
        failures, tried = doctest.testmod(module)
        assert tried and not failures, module.__name__


def test_a_second_request_is_served_from_the_stored_results(florentine):
    client, database, _ = florentine
    params = {"measure": "closeness", "direction": "undirected"}
    with database.read() as session:
        assert count_stored_results(session=session) == 0
    first = client.get("/api/network/centrality", params=params).json()
    second = client.get("/api/network/centrality", params=params).json()
    assert first["context"]["freshness"]["from_store"] is False
    assert second["context"]["freshness"]["from_store"] is True
    assert second["context"]["freshness"]["computed_at"] == first["context"]["freshness"]["computed_at"]
    assert second["rows"] == first["rows"]
    # the page and a re-ordered slice share the stored result
    client.get("/network/centrality", params={**params, "sort": "name"})
    with database.read() as session:
        assert count_stored_results(session=session) == 1
    # a new app on the same file (a restart, another process) reads it too
    with TestClient(create_app(Settings(database_url=database.url))) as other:
        again = other.get("/api/network/centrality", params=params).json()
    assert again["context"]["freshness"]["from_store"] is True
    assert again["rows"] == first["rows"]


# --- every page on the evidence world ----------------------------------------------------------


@pytest.fixture(scope="module")
def client(world_file: Path):
    """One app on the evidence world for the tests that only read (stored results are shared)."""
    with TestClient(create_app(Settings(database_url=f"sqlite:///{world_file}"))) as test_client:
        yield test_client


PAGES = {
    "summary": {},
    "centrality": {"measure": "betweenness"},
    "components": {},
    "cut-points": {},
    "cliques": {"min_size": "2"},
    "communities": {"method": "louvain", "seed": "4"},
}


@pytest.mark.parametrize("view", list(PAGES))
def test_every_page_renders_with_definitions_links_and_conventions(client: TestClient, view: str):
    params = PAGES[view]
    response = client.get(f"/network/{view}", params=params)
    assert response.status_code == 200, response.text
    page = soup_of(response)
    body = client.get(f"/api/network/{view}", params=params).json()
    definition = PAGE_INFO[view] if view != "centrality" else MEASURE_INFO["betweenness"]
    text = page.select_one("main").get_text(" ", strip=True)
    assert definition.definition in text
    assert page.select_one(".conventions-text").get_text(strip=True) == body["conventions"]
    assert page.select_one(".population").get_text(strip=True).startswith(f"n = {body['context']['n']} persons (node set: evidence")
    assert page.select_one('nav.site-nav a[aria-current="page"]').get_text() == "Network"
    person_links = {a["href"].split("?")[0] for a in page.select("#measure-results a.person-link")}
    assert all(href.startswith("/persons/p-") for href in person_links)
    if view != "summary":
        assert "/persons/p-jost" in person_links
    assert page.select_one("#slice-form")["action"] == f"/network/{view}"
    # the page's own parameters survive the slice form
    assert {(i["name"], i["value"]) for i in page.select("#slice-form input[type=hidden]")} >= set(params.items()) - {("min_size", "3")}


def test_htmx_gets_only_the_results(client: TestClient):
    response = client.get("/network/components", headers={"HX-Request": "true"})
    assert response.status_code == 200
    assert "<html" not in response.text
    assert soup_of(response).select_one("section#measure-results") is not None


@pytest.mark.parametrize("view", list(PAGES))
def test_every_table_downloads_as_csv_matching_the_json(client: TestClient, view: str):
    params = PAGES[view]
    body = client.get(f"/api/network/{view}", params=params).json()
    tables = body["context"]["tables"]
    assert tables
    page = soup_of(client.get(f"/network/{view}", params=params))
    assert [a["data-table"] for a in page.select("a[data-table]")] == tables
    for name in tables:
        response = client.get(f"/network/{view}", params={**params, "format": "csv", "table": name})
        assert response.status_code == 200, response.text
        assert response.headers["content-type"].startswith("text/csv")
        assert "attachment" in response.headers["content-disposition"]
        rows = list(csv.DictReader(io.StringIO(response.text)))
        assert rows == [dict(zip(rows[0].keys(), r.values())) for r in rows]
        assert_csv_matches_json(view, name, rows, body)
    assert client.get(f"/api/network/{view}", params={**params, "format": "csv"}).status_code == 200


def assert_csv_matches_json(view: str, table: str, rows: list[dict[str, str]], body: dict) -> None:
    def number(text: str) -> float | None:
        return float(text) if text != "" else None

    if view == "centrality":
        assert [r["key"] for r in rows] == [r["key"] for r in body["rows"]]
        assert [(number(r["value"]), number(r["raw"])) for r in rows] == [(r["value"], r["raw"]) for r in body["rows"]]
        assert [r["rank"] for r in rows] == [str(r["rank"]) if r["rank"] is not None else "" for r in body["rows"]]
    elif view == "summary" and table == "degrees":
        assert [(int(r["degree"]), int(r["persons"])) for r in rows] == [(d["degree"], d["persons"]) for d in body["degree_distribution"]]
    elif view == "summary" and table in ("in_degrees", "out_degrees"):
        column, field = {"in_degrees": ("in_degree", "in_degree_distribution"),
                         "out_degrees": ("out_degree", "out_degree_distribution")}[table]
        assert [(int(r[column]), int(r["persons"])) for r in rows] == [(d["degree"], d["persons"]) for d in body[field]]
    elif view == "summary" and table == "collections":
        assert [(r["collection"], int(r["attestations"])) for r in rows] == [(c["name"], c["attestations"]) for c in body["collections"]]
    elif view == "summary" and table == "figures":
        figures = {r["figure"]: r["value"] for r in rows}
        assert int(figures["persons"]) == body["persons"] and int(figures["ties"]) == body["ties"]
        assert float(figures["density"]) == body["density"]
    elif view == "components" and table in ("components", "strong"):
        parts = body["components"] if table == "components" else body["strong"]
        assert [r["key"] for r in rows] == [p["key"] for c in parts for p in c["members"]]
    elif view == "cut-points" and table == "bridges":
        assert [(r["a_key"], r["b_key"], r["single_document"]) for r in rows] == [
            (b["a"]["key"], b["b"]["key"], "yes" if b["single_document"] else "no") for b in body["bridges"]]
    elif view == "cut-points" and table == "cut_points":
        assert [r["key"] for r in rows] == [c["person"]["key"] for c in body["cut_points"]]
    elif view == "cliques" and table == "cliques":
        assert [(int(r["clique"]), r["key"]) for r in rows] == [(c["number"], p["key"]) for c in body["cliques"] for p in c["members"]]
    elif view == "cliques" and table == "per_person":
        assert [(r["key"], int(r["cliques"])) for r in rows] == [(p["person"]["key"], p["cliques"]) for p in body["per_person"]]
    elif view == "communities" and table == "members":
        assert [(int(r["community"]), r["key"]) for r in rows] == [
            (c["number"], m["person"]["key"]) for c in body["communities"] for m in c["members"]]
    elif table == "isolates":
        assert [r["key"] for r in rows] == [p["key"] for p in body["isolates"]]
    elif view == "communities" and table == "links":
        assert [(int(r["a"]), int(r["b"])) for r in rows] == [(link["a"], link["b"]) for link in body["links"]]
    else:
        raise AssertionError(f"no check for {view}/{table}")


def test_the_summary_draws_its_degree_distribution_and_warns(client: TestClient):
    body = client.get("/api/network/summary").json()
    # the evidence world: a handful of persons, most evidence from the Vell family papers
    assert body["warnings"][0].startswith(f"Only {body['persons']} persons and {body['ties']} ties")
    assert any("come from one collection, Harwick Town Archive: Vell family papers" in w for w in body["warnings"])
    assert any("come from one repository, Harwick Town Archive" in w for w in body["warnings"])
    assert body["concentration"].startswith("The largest repository, Harwick Town Archive, supplies ")
    assert "more than 50% of the attestations: common practice" in body["concentration"]
    assert sum(d["persons"] for d in body["degree_distribution"]) == body["persons"]
    assert body["context"]["n"] == body["persons"]
    page = soup_of(client.get("/network/summary"))
    assert [li.get_text(strip=True) for li in page.select(".warnings li")] == body["warnings"]
    assert page.select_one(".concentration-note").get_text(strip=True) == body["concentration"]
    image = page.select_one("figure.chart img")
    assert image["src"] == "/network/summary/degrees.svg"
    assert image["alt"]
    svg = client.get(image["src"])
    assert svg.headers["content-type"] == "image/svg+xml"
    chart = BeautifulSoup(svg.text, "xml")
    assert chart.find("svg") is not None
    assert chart.find("script") is None  # a plain picture: nothing runs, nothing is fetched
    assert "http://" not in svg.text.replace("http://www.w3.org/", "")
    bars = chart.select("g.histbars g.histbar rect")
    assert len(bars) == len(body["degree_distribution"])


def test_centrality_sorts_on_every_column_and_shares_ranks(client: TestClient):
    by_rank = client.get("/api/network/centrality", params={"measure": "degree"}).json()
    rows = by_rank["rows"]
    assert [r["rank"] for r in rows] == sorted(r["rank"] for r in rows)
    # equal values share a rank, and the next rank skips
    for before, after in zip(rows, rows[1:]):
        assert (after["rank"] == before["rank"]) == (after["value"] == before["value"])
    by_name = client.get("/api/network/centrality", params={"measure": "degree", "sort": "name"}).json()["rows"]
    assert [fold(r["name"]) for r in by_name] == sorted(fold(r["name"]) for r in by_name)  # accents aside
    by_raw = client.get("/api/network/centrality", params={"measure": "degree", "sort": "raw", "order": "asc"}).json()["rows"]
    assert [r["raw"] for r in by_raw] == sorted(r["raw"] for r in by_raw)
    page = soup_of(client.get("/network/centrality", params={"measure": "degree", "sort": "name"}))
    header = {th.get_text(strip=True): th for th in page.select(".ranking-table thead th")}
    assert header["person"]["aria-sort"] == "ascending"
    assert header["person"].a["href"] == "/network/centrality?measure=degree&sort=name&order=desc"
    assert header["raw"].a["href"] == "/network/centrality?measure=degree&sort=raw"
    assert [tr["data-key"] for tr in page.select(".ranking-table tbody tr")] == [r["key"] for r in by_name]


def test_the_ranked_table_comes_in_pages_with_its_sort_and_whole_table_ranks(tmp_path: Path, database: Database,
                                                                           settings: Settings):
    G = nx.barabasi_albert_graph(230, 2, seed=5)  # 230 persons with many degrees: three pages of 100
    tables = {
        "relation_kinds.csv": [{"key": "letter", "label": "letter", "directed": "no"}],
        "persons.csv": [{"key": f"p-{v:03d}", "name": f"Person {v:03d}"} for v in G],
        "sources.csv": [{"key": f"s-{i}", "kind": "original", "title": f"Letter {i}", "date": "1700"}
                        for i, _ in enumerate(G.edges())],
        "relations.csv": [{"person": f"p-{u:03d}", "other": f"p-{v:03d}", "kind": "letter", "source": f"s-{i}"}
                          for i, (u, v) in enumerate(G.edges())],
    }
    import_workbook(database, write_workbook(tmp_path / "paged", tables), size_limit=10**9)
    with TestClient(create_app(settings)) as client:
        for sort in ("rank", "name", "raw"):
            params = {"measure": "degree", "sort": sort}
            everything = list(csv.DictReader(io.StringIO(client.get("/network/centrality",
                                                                    params={**params, "format": "csv"}).text)))
            assert len(everything) == 230
            pages = [client.get("/api/network/centrality", params={**params, "page": str(n)}).json() for n in (1, 2, 3)]
            assert [len(p["rows"]) for p in pages] == [100, 100, 30]
            assert {(p["page"], p["pages"], p["total"]) for p in pages} == {(1, 3, 230), (2, 3, 230), (3, 3, 230)}
            paged = [row for p in pages for row in p["rows"]]
            assert [r["key"] for r in paged] == [r["key"] for r in everything]
            assert [str(r["rank"]) for r in paged] == [r["rank"] for r in everything]  # ranks of the whole table
            html = soup_of(client.get("/network/centrality", params={**params, "page": "2"}))
            links = {a["rel"][0]: a["href"] for a in html.select("nav.pagination a")}
            for rel, number in (("prev", "1"), ("next", "3")):
                query = dict(parse_qsl(urlsplit(links[rel]).query))
                assert query["page"] == number and query.get("sort", "rank") == sort, links[rel]
            assert "rows 101–200 of 230" in html.select_one("nav.pagination .page-of").get_text()
        degrees = dict(G.degree())
        first = client.get("/api/network/centrality", params={"measure": "degree"}).json()["rows"][0]
        assert first["raw"] == max(degrees.values())  # networkx's degree of the best-tied person
        assert client.get("/api/network/centrality", params={"measure": "degree", "page": "4"}).status_code == 400


def test_the_measure_chooser_and_the_definitions(client: TestClient):
    body = client.get("/api/network/centrality", params={"measure": "pagerank"}).json()
    assert body["definition"]["reference"].startswith("Page, L.")
    assert {m["name"] for m in body["measures"]} == set(MEASURES)
    page = soup_of(client.get("/network/centrality", params={"measure": "pagerank", "direction": "undirected"}))
    options = {o["value"]: o for o in page.select("#measure-choice option")}
    assert options["pagerank"].has_attr("selected")
    assert options["in_degree"].has_attr("disabled") and not options["degree"].has_attr("disabled")
    assert page.select_one(".measure-definition .reference").get_text(strip=True) == body["definition"]["reference"]


def test_names_with_markup_are_text(client: TestClient):
    page = soup_of(client.get("/network/centrality", params={"measure": "degree"}))
    link = page.select_one('.ranking-table tr[data-key="p-xss"] a.person-link')
    assert link.get_text() == XSS_NAME
    assert page.select("main script") == []
    csv_text = client.get("/network/centrality", params={"measure": "degree", "format": "csv"}).text
    assert XSS_NAME in {row["name"] for row in csv.DictReader(io.StringIO(csv_text))}


def test_components_list_isolates_and_strong_components(client: TestClient):
    with_drafts = {"evidence": ",".join(EVIDENCE_KINDS)}
    body = client.get("/api/network/components", params=with_drafts).json()
    members = [p["key"] for c in body["components"] for p in c["members"]]
    assert sorted(members) == sorted(set(members))
    assert len(members) == body["context"]["n"]
    assert body["strong"] is not None  # direction=recorded
    assert [p["key"] for p in body["isolates"]] == ["p-widow"]  # her only tie is a draft to herself
    assert body["components"][-1]["members"][0]["key"] == "p-widow"  # an isolate is a component too
    undirected = client.get("/api/network/components", params={"direction": "undirected"}).json()
    assert undirected["strong"] is None
    assert "strong" not in undirected["context"]["tables"]


def test_communities_say_one_seed_is_not_a_finding(client: TestClient):
    body = client.get("/api/network/communities", params={"method": "louvain", "seed": "4"}).json()
    assert body["method"] == "louvain" and body["seed"] == 4
    assert body["stability"]["seeds"] == list(range(4, 14))
    assert 0 <= body["stability"]["mutual_information"] <= 1
    assert "not a finding" in body["caution"]
    page = soup_of(client.get("/network/communities", params={"method": "louvain", "seed": "4"}))
    assert "not a finding" in page.select_one(".caution").get_text()
    assert page.select_one("#community-method option[selected]")["value"] == "louvain"


def test_cliques_state_the_minimum_and_the_cap(client: TestClient):
    body = client.get("/api/network/cliques", params={"min_size": "2"}).json()
    assert body["min_size"] == 2 and body["complete"] is True
    sizes = [len(c["members"]) for c in body["cliques"]]
    assert sizes == sorted(sizes, reverse=True) and min(sizes) >= 2
    assert "All" in body["conventions"] and str(body["limit"]) not in body["conventions"]
    default = client.get("/api/network/cliques").json()
    assert default["min_size"] == 3


# --- bad parameters, empty slices ---------------------------------------------------------------


@pytest.mark.parametrize(("path", "params", "parameter", "says"), [
    ("/api/network/centrality", {"measure": "fame"}, "measure", "betweenness"),
    ("/api/network/centrality", {"measure": "in_degree", "direction": "undirected"}, "measure", "direction=recorded"),
    ("/api/network/centrality", {"sort": "age"}, "sort", "rank"),
    ("/api/network/centrality", {"order": "up"}, "order", "asc"),
    ("/api/network/centrality", {"page": "0"}, "page", "whole number"),
    ("/api/network/centrality", {"exact": "maybe"}, "exact", "yes"),
    ("/api/network/cliques", {"min_size": "1"}, "min_size", "from 2"),
    ("/api/network/cliques", {"min_size": "three"}, "min_size", "from 2"),
    ("/api/network/communities", {"method": "spectral"}, "method", "leiden, louvain"),
    ("/api/network/communities", {"seed": "-1"}, "seed", "whole number"),
    ("/api/network/summary", {"format": "xlsx"}, "format", "csv"),
    ("/api/network/summary", {"format": "csv", "table": "nope"}, "table", "figures"),
    ("/api/network/components", {"nodes": "some"}, "nodes", "evidence"),
    ("/api/network/summary", {"kind": "duel"}, "kind", "letter"),
])  # fmt: skip
def test_bad_parameters_are_400s_naming_the_parameter(client: TestClient, path: str, params: dict, parameter: str, says: str):
    response = client.get(path, params=params)
    assert response.status_code == 400, response.text
    body = response.json()
    assert body["error"] == "bad parameter"
    assert body["detail"].startswith(f"{parameter}=") and says in body["detail"]
    page = client.get(path.removeprefix("/api"), params=params)
    assert page.status_code == 400
    assert soup_of(page).select_one("#error .error-detail").get_text() == body["detail"]


def test_a_directed_measure_on_an_undirected_slice_says_why(client: TestClient):
    detail = client.get("/api/network/centrality", params={"measure": "out_strength", "direction": "reciprocal"}).json()["detail"]
    assert "counts which way the ties run" in detail and "direction=reciprocal" in detail


def test_unknown_pages_and_persons_are_404s(client: TestClient):
    token = client.get("/api/login").json()["csrf_token"]
    assert client.post("/network/fame/recompute", headers={"X-CSRF-Token": token}).status_code == 404
    response = client.get("/persons/nobody/measures")
    assert response.status_code == 404
    assert soup_of(response).select_one("#error .error-detail").get_text() == "There is no person with the key nobody."


@pytest.mark.parametrize("view", list(PAGES))
def test_an_empty_slice_gives_an_empty_result_and_a_sentence(client: TestClient, view: str):
    empty = {"from": "1200", "to": "1210", "undated": "drop", **PAGES[view]}
    body = client.get(f"/api/network/{view}", params=empty).json()
    assert body["context"]["n"] == 0
    assert body["context"]["empty_note"].startswith("No person is in this slice")
    page = soup_of(client.get(f"/network/{view}", params=empty))
    assert page.select_one(".empty-note").get_text(strip=True) == body["context"]["empty_note"]
    for name in body["context"]["tables"]:
        response = client.get(f"/network/{view}", params={**empty, "format": "csv", "table": name})
        assert response.status_code == 200


# --- sampled betweenness on a large slice -------------------------------------------------------


def test_betweenness_above_the_threshold_is_an_estimate_said_so(world: Database, monkeypatch: pytest.MonkeyPatch):
    # The evidence world stands in for a large slice: the threshold and samples are lowered to fit it.
    monkeypatch.setattr(network_results, "SAMPLE_ABOVE", 3)
    monkeypatch.setattr(network_results, "SAMPLES", 3)
    with TestClient(create_app(Settings(database_url=world.url))) as client:
        body = client.get("/api/network/centrality", params={"measure": "betweenness"}).json()
        assert body["estimate"] is True and body["samples"] == 3
        assert "Brandes & Pich 2007" in body["sampling_statement"]
        assert any(row["standard_error"] is not None for row in body["rows"])
        page = soup_of(client.get("/network/centrality", params={"measure": "betweenness"}))
        assert page.select_one(".estimate-note").get_text(" ", strip=True).startswith("An estimate.")
        exact_link = page.select_one(".estimate-note a")["href"]
        assert exact_link == "/network/centrality?measure=betweenness&exact=yes"
        exact = client.get("/api/network/centrality", params={"measure": "betweenness", "exact": "yes"}).json()
        assert exact["estimate"] is False and exact["exact"] is True
        assert all(row["standard_error"] is None for row in exact["rows"])


# --- the person page and its measures -------------------------------------------------------------


def test_the_person_page_loads_its_measures_lazily(client: TestClient):
    page = soup_of(client.get("/persons/p-jost", params={"direction": "undirected"}))
    section = page.select_one("section#person-measures")
    assert section["hx-get"] == "/persons/p-jost/measures?direction=undirected"
    assert section["hx-trigger"] == "load"
    assert section.select_one("a.measures-link")["href"] == "/persons/p-jost/measures?direction=undirected"
    assert section.select("table") == []  # the figures come later, so the person page stays fast

    partial = client.get(section["hx-get"], headers={"HX-Request": "true"})
    assert "<html" not in partial.text
    rows = soup_of(partial).select(".person-measures-table tbody tr")
    body = client.get("/api/persons/p-jost/measures", params={"direction": "undirected"}).json()
    assert body["in_slice"] is True
    assert [tr["data-measure"] for tr in rows] == [m["measure"] for m in body["measures"]]
    assert "in_degree" not in [m["measure"] for m in body["measures"]]  # undirected slice
    # the same figure and rank as the ranked table
    ranked = rows_by_key(client, measure="betweenness", direction="undirected")["p-jost"]
    mine = next(m for m in body["measures"] if m["measure"] == "betweenness")
    assert (mine["value"], mine["rank"]) == (ranked["value"], ranked["rank"])
    assert rows[0].select_one("a")["href"].startswith("/network/centrality?direction=undirected&measure=")

    directed = client.get("/api/persons/p-jost/measures").json()
    assert "in_degree" in [m["measure"] for m in directed["measures"]]
    full = soup_of(client.get("/persons/p-jost/measures"))
    assert full.select_one("h1").get_text() == "Jost Brenner in the network"


def test_a_person_outside_the_slice_gets_a_sentence(client: TestClient):
    body = client.get("/api/persons/p-hans/measures").json()  # no evidence at all
    assert body["in_slice"] is False and body["measures"] == []
    assert "not among the persons of this slice" in body["note"]


# --- documentation ------------------------------------------------------------------------------


def test_openapi_documents_every_route_and_field(client: TestClient):
    schema = client.get("/openapi.json").json()
    paths = ["/network", "/api/network", "/network/summary/degrees.svg", "/persons/{key}/measures", "/api/persons/{key}/measures"]
    paths += [f"{prefix}/network/{view}" for view in PAGES for prefix in ("", "/api")]
    for path in paths:
        operation = schema["paths"][path]["get"]
        assert operation["summary"] and operation["description"], path
    for path in ("/network/{view}/recompute", "/api/network/{view}/recompute"):
        assert schema["paths"][path]["post"]["description"]
    models = [getattr(network_models, name) for name in network_models.__all__]
    assert all(dataclasses.is_dataclass(model) for model in models) and len(models) >= 20
    components = schema["components"]["schemas"]
    for model in [*models, Definition]:
        properties = components[model.__name__]["properties"]
        assert set(properties) == {f.name for f in dataclasses.fields(model)}, model.__name__
        undocumented = [name for name, spec in properties.items() if not spec.get("description")]
        assert undocumented == [], model.__name__


def test_the_readme_lists_the_measure_pages():
    readme = (Path(__file__).resolve().parent.parent / "README.md").read_text(encoding="utf-8")
    for path in ("/network/summary", "/network/centrality", "/network/components", "/network/cut-points",
                 "/network/cliques", "/network/communities", "/persons/{key}/measures"):
        assert f"`{path}" in readme, path


def test_every_measure_page_warns_on_a_small_slice(florentine):
    # 15 families and 20 marriages (Padgett & Ansell 1993, as shipped with networkx) are below the
    # small-slice limits of 30 persons and 50 ties (common practice, not a published threshold).
    client, _database, _tmp_path = florentine
    for view in ("centrality", "components", "cut-points", "cliques", "communities"):
        page = BeautifulSoup(client.get(f"/network/{view}", params={"direction": "undirected"}).text, "html.parser")
        note = page.select_one(".small-slice-note")
        assert note is not None, view
        assert "Only 15 persons and 20 ties" in note.get_text(), (view, note.get_text())
        assert client.get(f"/api/network/{view}", params={"direction": "undirected"}).json()["context"]["small_note"]
    # the summary lists the same warning among its own, once
    summary = BeautifulSoup(client.get("/network/summary", params={"direction": "undirected"}).text, "html.parser")
    assert summary.select_one(".small-slice-note") is None
    assert "Only 15 persons and 20 ties" in summary.get_text()


def test_centrality_warns_when_one_collection_holds_most_of_the_evidence(client: TestClient):
    # the evidence world: most attestations come from the Vell family papers; the centrality page
    # gives the summary's own warning, word for word, and the summary does not give it twice
    summary = client.get("/api/network/summary").json()
    [concentrated] = [w for w in summary["warnings"] if "come from one collection" in w]
    assert "come from one repository" in concentrated  # the archive and its collection, in one warning
    for measure in ("degree", "betweenness", "pagerank"):
        context = client.get("/api/network/centrality", params={"measure": measure}).json()["context"]
        assert context["collection_note"] == concentrated, measure
        page = soup_of(client.get("/network/centrality", params={"measure": measure}))
        assert page.select_one(".collection-note").get_text(strip=True) == concentrated
    assert soup_of(client.get("/network/summary")).select_one(".collection-note") is None
    # the other measure pages do not repeat it
    assert client.get("/api/network/components").json()["context"]["collection_note"] is None


def test_the_degree_chart_has_whole_number_ticks_and_bars_clear_of_the_axis(client: TestClient):
    # a handful of persons: pygal's own ticks would be 0, 0.2, 0.4 ... and its axis would run at degree 0
    svg = BeautifulSoup(client.get("/network/summary/degrees.svg").text, "xml")
    for axis in ("x", "y"):
        ticks = [text.get_text() for text in svg.select(f"g.axis.{axis} g.guides text")]
        assert ticks and all(tick.isdigit() for tick in ticks), (axis, ticks)
    bars = svg.select("g.serie-0 rect.rect")
    body = client.get("/api/network/summary").json()
    assert len(bars) == len(body["degree_distribution"])  # no bar of the margins is left
    drawn = [p for p in svg.select("g.axis.x path") if "guide" not in p["class"].split()]  # guides are hidden
    assert drawn
    assert min(float(bar["x"]) for bar in bars) > max(float(p["d"].split()[0][1:]) for p in drawn) + 10


def test_the_home_and_the_summary_say_what_each_counts(client: TestClient):
    # the evidence world holds a person without evidence and a draft: the two pages' figures differ,
    # and each page says what it counts and points to the other
    home = soup_of(client.get("/"))
    summary = soup_of(client.get("/network/summary"))
    stored = int(home.select_one('[data-count="persons"]')["data-value"])
    in_slice = client.get("/api/network/summary").json()["persons"]
    assert stored > in_slice
    home_note = home.select_one(".counts-note")
    assert "everything stored" in home_note.get_text() and "drafts" in home_note.get_text()
    assert home_note.select_one("a")["href"] == "/network/summary"
    summary_note = summary.select_one(".counts-note")
    assert "this slice only" in summary_note.get_text() and "everything stored" in summary_note.get_text()
    assert summary_note.select_one("a")["href"] == "/"
