"""The measure pages on projections: ``mode=co-membership`` and ``mode=both`` over HTTP, on a real
database imported through the workbook.

References: the Southern Women data of Davis, Gardner & Gardner (1941), shipped with networkx as
``davis_southern_women_graph``; the person projection is compared with
``networkx.algorithms.bipartite.weighted_projected_graph`` (shared counts, Breiger 1974),
``collaboration_weighted_projected_graph`` (Newman 2001) and ``overlap_weighted_projected_graph``
(Jaccard), and every measure on it with networkx run on that projected graph. The parish world
(tests/twomode_world.py) is small enough to check on paper.
"""

from __future__ import annotations

import networkx as nx
import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient
from networkx.algorithms import bipartite

from app.config import Settings, database_url
from app.db import Database, upgrade
from app.exchange.workbook import import_workbook
from app.main import create_app
from tests.twomode_world import DAVIS, WOMEN, davis_workbook, parish_workbook, woman_key
from tests.workbooks import write_workbook

PARISH = ("p-aart", "p-bette", "p-cas", "p-dirk")
# Two letters and a friendship beside the memberships, for mode=both:
# Aart -> Cas (they share the parish, so the pair is tied both ways), Cas -> Aart, and Evelyn and
# Laura (who share six events) as friends; Aart and the first woman by letter (no shared group).
LETTERS = [
    ("r-1", "p-aart", "p-cas", "letter", "s-letter-1"),
    ("r-2", "p-cas", "p-aart", "letter", "s-letter-2"),
    ("r-3", woman_key("Evelyn Jefferson"), woman_key("Laura Mandeville"), "friendship", "s-letter-3"),
    ("r-4", "p-aart", woman_key("Evelyn Jefferson"), "letter", "s-letter-4"),
]


def world() -> dict[str, list[dict[str, str]]]:
    tables = parish_workbook()
    for name, rows in davis_workbook().items():
        tables[name] = tables.get(name, []) + rows
    tables["sources.csv"] += [{"key": s, "kind": "letter", "title": f"Letter {s}", "date": "1710"} for *_, s in LETTERS]
    tables["relations.csv"] = [{"key": k, "person": a, "other": b, "kind": kind, "source": s, "certainty": "certain"}
                               for k, a, b, kind, s in LETTERS]  # fmt: skip
    return tables


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    folder = tmp_path_factory.mktemp("twomode_measures")
    database = Database(database_url(folder / "attesta.db"))
    upgrade(database)
    import_workbook(database, write_workbook(folder / "wb", world()), size_limit=10**9)
    database.dispose()
    with TestClient(create_app(Settings(database_url=database_url(folder / "attesta.db")))) as test_client:
        yield test_client


def reference(weighting: str = "shared") -> nx.Graph:
    """The person projection of the whole world by networkx, with persons by key.

    The Southern Women by the networkx projection of the weighting; the parish world on paper:
    Aart, Bette, Cas and Dirk all share the parish (one group each pair), Aart and Bette the guild too.
    """
    project = {"shared": bipartite.weighted_projected_graph, "newman": bipartite.collaboration_weighted_projected_graph,
               "jaccard": bipartite.overlap_weighted_projected_graph}[weighting]  # fmt: skip
    G = nx.relabel_nodes(project(DAVIS, WOMEN), woman_key)
    parish = {"shared": 1.0, "newman": 1 / 3, "jaccard": None}[weighting]
    groups = {"p-aart": {"parish", "guild"}, "p-bette": {"parish", "guild"}, "p-cas": {"parish"}, "p-dirk": {"parish"}}
    for i, a in enumerate(PARISH):
        for b in PARISH[i + 1:]:
            shared = groups[a] & groups[b]
            if weighting == "jaccard":
                weight = len(shared) / len(groups[a] | groups[b])
            elif weighting == "newman":  # the parish has 4 members (1/3 each pair), the guild 2 (1/1)
                weight = parish + (1.0 if "guild" in shared else 0.0)
            else:
                weight = float(len(shared))
            G.add_edge(a, b, weight=weight)
    return G


def api(client: TestClient, path: str, **query: str) -> dict:
    response = client.get(f"/api{path}", params=query)
    assert response.status_code == 200, response.text
    return response.json()


def ranking(client: TestClient, measure: str, **query: str) -> dict[str, dict]:
    page = api(client, "/network/centrality", measure=measure, mode=query.pop("mode", "co-membership"), **query)
    return {row["key"]: row for row in page["rows"]}


@pytest.mark.parametrize("weighting", ["shared", "newman", "jaccard"])
def test_strength_on_the_projection_equals_networkx_projection(client: TestClient, weighting: str):
    # The strength of a woman is the sum of her projected weights: networkx's projection, summed.
    G = reference(weighting)
    rows = ranking(client, "strength", weighting=weighting)
    assert set(rows) == set(G)
    for node in G:
        assert rows[node]["raw"] == pytest.approx(G.degree(node, weight="weight")), node


def test_shared_counts_equal_breiger_product(client: TestClient):
    # Breiger (1974): the woman-by-woman matrix is B Bᵀ; its off-diagonal sums are the strengths.
    import numpy as np

    B = bipartite.biadjacency_matrix(DAVIS, WOMEN).toarray()
    product = B @ B.T
    rows = ranking(client, "strength")
    for n, woman in enumerate(WOMEN):
        assert rows[woman_key(woman)]["raw"] == pytest.approx(product[n].sum() - product[n, n])
    assert np.all(product.diagonal() == B.sum(axis=1))


@pytest.mark.parametrize("measure", ["degree", "betweenness", "closeness", "harmonic", "eigenvector", "pagerank",
                                     "weighted_betweenness"])
def test_measures_on_the_projection_equal_networkx(client: TestClient, measure: str):
    G = reference()
    rows = ranking(client, measure)
    if measure == "degree":
        expected, field = dict(G.degree()), "raw"
    elif measure == "betweenness":
        expected, field = nx.betweenness_centrality(G, normalized=False), "raw"
    elif measure == "closeness":
        expected, field = nx.closeness_centrality(G, wf_improved=True), "value"
    elif measure == "harmonic":
        expected, field = nx.harmonic_centrality(G), "raw"
    elif measure == "eigenvector":
        # The weighted principal eigenvector, per component as the page computes it, is checked on
        # the Southern Women only, a connected projection (the parish is a component of its own).
        women = G.subgraph([woman_key(w) for w in WOMEN])
        expected = nx.eigenvector_centrality_numpy(women, weight="weight")
        total = sum(rows[k]["raw"] for k in expected)
        scale = sum(expected.values()) / total
        for key, value in expected.items():
            assert rows[key]["raw"] * scale == pytest.approx(value, abs=1e-6), key
        return
    elif measure == "pagerank":
        expected, field = nx.pagerank(G, weight="weight"), "raw"
    else:
        # Weighted paths: length 1/weight in whole units of 1/720720 (DEVELOPERS.md, "Weighted paths"),
        # so that equal paths tie exactly; the shared counts 1..6 all divide 720720.
        H = G.copy()
        for _u, _v, data in H.edges(data=True):
            data["length"] = 720720 // int(data["weight"])
        expected, field = nx.betweenness_centrality(H, weight="length", normalized=False), "raw"
    for key, value in expected.items():
        assert rows[key][field] == pytest.approx(value, abs=1e-6), (measure, key)


def test_components_cut_points_and_summary_on_the_projection(client: TestClient):
    G = reference()
    components = api(client, "/network/components", mode="co-membership")
    assert sorted(c["size"] for c in components["components"]) == sorted(len(c) for c in nx.connected_components(G))
    assert components["context"]["n"] == len(G) == 18 + 4
    cuts = api(client, "/network/cut-points", mode="co-membership")
    assert {c["person"]["key"] for c in cuts["cut_points"]} == set(nx.articulation_points(G))
    summary = api(client, "/network/summary", mode="co-membership")
    assert (summary["persons"], summary["ties"]) == (len(G), G.number_of_edges())
    assert summary["density"] == pytest.approx(nx.density(G))
    assert summary["transitivity"] == pytest.approx(nx.transitivity(G))
    assert summary["attestations"] == 89 + 6  # the memberships' attestations, not the letters
    assert "shared groups" in summary["context"]["mode_note"] and "node set" in summary["context"]["mode_note"]


def test_cliques_on_the_projection_are_capped_and_say_why(client: TestClient):
    G = reference()
    page = api(client, "/network/cliques", mode="co-membership")
    expected = sorted(sorted(c) for c in nx.find_cliques(G) if len(c) >= 3)
    assert sorted(sorted(p["key"] for p in c["members"]) for c in page["cliques"]) == expected
    assert page["limit"] == 1000 and "clique by construction" in page["projection_note"]
    relations = api(client, "/network/cliques")
    assert relations["limit"] == 10_000 and relations["projection_note"] is None
    soup = BeautifulSoup(client.get("/network/cliques", params={"mode": "co-membership"}).text, "lxml")
    assert "clique by construction" in soup.select_one(".projection-cliques-note").get_text()
    assert soup.select_one(".mode-note") is not None


def test_communities_run_on_the_projection(client: TestClient):
    page = api(client, "/network/communities", mode="co-membership")
    members = {m["person"]["key"] for c in page["communities"] for m in c["members"]} | {p["key"] for p in page["isolates"]}
    assert members == set(reference())
    # The parish persons share no group with the women: no community mixes them.
    for c in page["communities"]:
        keys = {m["person"]["key"] for m in c["members"]}
        assert keys <= set(PARISH) or not keys & set(PARISH)


def test_overlap_required_and_max_group_size_reach_the_measures(client: TestClient):
    # On paper: with overlap=required only Bette-Cas (parish, 1712 within 1705-1715) and Aart-Bette
    # (guild, 1655 within 1650-1700) remain; the women's attendances are undated and overlap nothing.
    rows = ranking(client, "degree", overlap="required")
    assert {k: r["raw"] for k, r in rows.items() if r["raw"]} == {"p-aart": 1, "p-bette": 2, "p-cas": 1}
    # max_group_size=3 leaves out the parish (4 members) and every event of more than 3 women.
    rows = ranking(client, "strength", max_group_size="3")
    small = {e for e in DAVIS.graph["bottom"] if DAVIS.degree(e) <= 3}
    kept = DAVIS.subgraph(set(WOMEN) | small)
    G = nx.relabel_nodes(bipartite.weighted_projected_graph(kept, [w for w in WOMEN if kept.degree(w)]), woman_key)
    assert rows["p-aart"]["raw"] == 1 and rows["p-bette"]["raw"] == 1  # the guild alone
    for node in G:
        assert rows[node]["raw"] == pytest.approx(G.degree(node, weight="weight"))


def test_both_adds_relation_and_co_membership_weights(client: TestClient):
    # mode=both, undirected: Aart-Cas has 2 letter documents + 1 shared group = 3; Evelyn-Laura 1
    # friendship document + their shared events; Aart-Evelyn only the letter.
    G = reference()
    rows = ranking(client, "strength", mode="both", direction="undirected")
    evelyn, laura = woman_key("Evelyn Jefferson"), woman_key("Laura Mandeville")
    expected = {node: G.degree(node, weight="weight") for node in G}
    expected["p-aart"] += 2 + 1
    expected["p-cas"] += 2
    expected[evelyn] += 1 + 1
    expected[laura] += 1
    for node, value in expected.items():
        assert rows[node]["raw"] == pytest.approx(value), node
    summary = api(client, "/network/summary", mode="both", direction="undirected")
    assert summary["ties"] == G.number_of_edges() + 1  # Aart-Evelyn is new; the others merge
    assert summary["attestations"] == 89 + 6 + 4
    assert "sum of the two weights" in summary["context"]["mode_note"]
    # Directed: a co-membership tie runs both ways, so in-degree counts it.
    rows = ranking(client, "in_degree", mode="both")
    assert rows["p-aart"]["raw"] == 3  # Bette, Cas, Dirk by the parish (Cas's letter merges); none from Evelyn
    assert rows[evelyn]["raw"] == G.degree(evelyn) + 1  # Aart's letter


def test_directed_measures_are_refused_on_co_membership(client: TestClient):
    response = client.get("/api/network/centrality", params={"mode": "co-membership", "measure": "in_degree"})
    assert response.status_code == 400
    assert response.json()["detail"].startswith("measure=") and "no direction" in response.json()["detail"]


def test_person_measures_follow_the_mode(client: TestClient):
    page = api(client, "/persons/p-bette/measures", mode="co-membership")
    by_measure = {row["measure"]: row for row in page["measures"]}
    assert by_measure["degree"]["raw"] == 3 and "in_degree" not in by_measure
    relations = api(client, "/persons/p-bette/measures")
    assert {row["measure"]: row for row in relations["measures"]}["degree"]["raw"] == 0


def test_the_stored_result_follows_the_mode(client: TestClient):
    # Results are stored by the slice's query string: the two modes never share one.
    a = ranking(client, "degree")
    b = ranking(client, "degree", mode="relations")
    assert a["p-dirk"]["raw"] == 3 and b["p-dirk"]["raw"] == 0


# --- the ego drawing under the modes ------------------------------------------------------------


def ego(client: TestClient, key: str, **query: str) -> dict:
    return api(client, f"/persons/{key}/ego", **query)


@pytest.mark.parametrize("weighting", ["shared", "newman", "jaccard"])
def test_ego_co_membership_ties_weigh_as_the_projection(client: TestClient, weighting: str):
    # Every tie by shared groups drawn around Evelyn, to her and among her alters, has the weight
    # of the networkx projection (radius 1, under the cap of 60: all her co-members are drawn).
    G = reference(weighting)
    evelyn = woman_key("Evelyn Jefferson")
    panel = ego(client, evelyn, mode="co-membership", weighting=weighting)
    assert {n["key"] for n in panel["nodes"]} == {evelyn, *G[evelyn]}
    drawn = {n["key"] for n in panel["nodes"]}
    edges = {frozenset((e["source"], e["target"])): e for e in panel["edges"]}
    assert all(e["co_membership"] and e["kind"] == "co-membership" and not e["directed"] for e in edges.values())
    assert set(edges) == {frozenset(pair) for pair in G.subgraph(drawn).edges()}
    for (a, b), weight in ((pair, G.edges[pair]["weight"]) for pair in G.subgraph(drawn).edges()):
        assert edges[frozenset((a, b))]["weight"] == pytest.approx(weight)
        assert edges[frozenset((a, b))]["shared_groups"] == len(set(DAVIS[_name(a)]) & set(DAVIS[_name(b)]))


def _name(key: str) -> str:
    return next(w for w in WOMEN if woman_key(w) == key)


def test_ego_co_membership_on_the_parish_by_hand(client: TestClient):
    panel = ego(client, "p-aart", mode="co-membership")
    assert {n["key"] for n in panel["nodes"]} == set(PARISH)
    edges = {frozenset((e["source"], e["target"])): e for e in panel["edges"]}
    assert len(edges) == 6 and edges[frozenset(("p-aart", "p-bette"))]["shared_groups"] == 2
    # Aart (parish register 1655, guild roll 1655) and Bette (register 1712, roll 1690): four documents.
    assert edges[frozenset(("p-aart", "p-bette"))]["documents"] == 4
    required = ego(client, "p-aart", mode="co-membership", overlap="required")
    assert {n["key"] for n in required["nodes"]} == {"p-aart", "p-bette"}  # only the guild overlaps in time


def test_ego_both_draws_relations_and_shared_groups(client: TestClient):
    panel = ego(client, "p-aart", mode="both")
    evelyn = woman_key("Evelyn Jefferson")
    assert {n["key"] for n in panel["nodes"]} == {*PARISH, evelyn}
    kinds = {(e["source"], e["target"], e["kind"]) for e in panel["edges"]}
    assert {("p-aart", "p-cas", "letter"), ("p-cas", "p-aart", "letter"), ("p-aart", evelyn, "letter"),
            ("p-aart", "p-cas", "co-membership")} <= kinds  # fmt: skip
    assert not any(e["co_membership"] for e in panel["edges"] if evelyn in (e["source"], e["target"]))
    legend = [k["key"] for k in panel["drawing"]["kinds"]]
    assert legend[-1] == "co-membership" and "letter" in legend


def test_ego_page_links_co_membership_ties_to_the_shared_groups(client: TestClient):
    response = client.get("/persons/p-aart/ego", params={"mode": "both"})
    assert response.status_code == 200
    soup = BeautifulSoup(response.text, "lxml")
    group_links = soup.select("a.ego-edge-groups")
    assert len(group_links) == 6
    assert all("mode=co-membership" in a["href"] and a["href"].startswith("/ties/") for a in group_links)
    letters = [a for a in soup.select("a.ego-edge") if a["data-kind"] == "letter"]
    assert letters and all("mode=both" in a["href"] for a in letters)
    line = group_links[0].select_one("path.ego-line")
    assert line["stroke"] == "#3d8a78" and line["stroke-dasharray"]
    assert soup.select_one('.ego-legend li[data-kind="co-membership"]') is not None
    # The tie opens the groups both share with both memberships' documents.
    tie = client.get(group_links[0]["href"])
    assert tie.status_code == 200 and "shared-group" in tie.text
    svg = client.get("/persons/p-aart/ego.svg", params={"mode": "co-membership"})
    assert svg.status_code == 200 and "shared groups (co-membership)" in svg.text
    assert client.get("/persons/p-aart", params={"mode": "co-membership"}).status_code == 200


def test_ego_cap_keeps_the_strongest_co_members(client: TestClient):
    # Directly in the network code: with a cap of 3, Evelyn keeps her three strongest co-members
    # (most shared events, then key) and counts the others as left out.
    from app.network.ego_memberships import ego_network_in_mode
    from app.network.slice import Slice, resolve_slice
    from app.store.network_labels import list_person_labels_by_key

    database = client.app.state.database
    G = reference()
    evelyn = woman_key("Evelyn Jefferson")
    expected = sorted(G[evelyn], key=lambda k: (-G.edges[evelyn, k]["weight"], k))[:3]
    with database.read() as session:
        resolved = resolve_slice(session, Slice(mode="co-membership"))
        ego_id = list_person_labels_by_key(session=session, keys=[evelyn])[evelyn].id
        network = ego_network_in_mode(session, resolved, ego_id, max_alters=3)
    assert {n.key for n in network.nodes if n.distance == 1} == set(expected)
    assert network.co_members_left_out == G.degree(evelyn) - 3


def test_the_doctests_of_the_mode_modules():
    import doctest

    from app.network import bipartite_drawing, comembership

    for module in (comembership, bipartite_drawing):
        failures, tried = doctest.testmod(module)
        assert tried and not failures, module.__name__


def test_a_heavy_measure_on_a_projection_goes_through_the_worker(client: TestClient):
    # The job keeps the slice's mode and weighting in its key; the worker computes the projection.
    from app.network import jobs

    state = client.app.state
    kept = getattr(state, "inline_up_to", jobs.INLINE_UP_TO)
    worker, state.worker = getattr(state, "worker", None), None  # the test runs the job itself
    state.inline_up_to = 5
    try:
        query = {"mode": "co-membership", "weighting": "newman", "measure": "harmonic", "overlap": "any", "nodes": "ties"}
        waiting = api(client, "/network/centrality", **query)
        assert waiting["job"] is not None and waiting["rows"] == []
        assert jobs.run_next_job(state.database).error is None
        done = api(client, "/network/centrality", **query)
    finally:
        state.inline_up_to, state.worker = kept, worker
    G = reference("newman")
    expected = nx.harmonic_centrality(G)
    assert {row["key"]: row["raw"] for row in done["rows"]} == pytest.approx(expected)


def test_sparse_clustering_equals_networkx_latapy():
    # networkx's bipartite.latapy_clustering(mode="dot") (Latapy, Magnien & Del Vecchio 2008) on a
    # random two-mode graph with isolated pairs, against the sparse products of two_mode_summary.
    from app.network.twomode import two_mode_summary

    R = bipartite.random_graph(40, 15, 0.12, seed=7)
    R.remove_nodes_from([n for n in list(R) if R.degree(n) == 0])
    B = nx.relabel_nodes(R, {n: ("p", n) if R.nodes[n]["bipartite"] == 0 else ("g", n) for n in R})
    B.add_edge(("p", 100), ("g", 200))  # a person and a group with no one two steps away
    reference = bipartite.latapy_clustering(B, mode="dot")
    summary = two_mode_summary(B)
    for (mode, node), value in reference.items():
        found = summary.person_clustering[node] if mode == "p" else summary.group_clustering[node]
        assert found == pytest.approx(value), (mode, node)


def test_a_projection_too_large_to_build_is_refused_naming_max_group_size(client: TestClient, monkeypatch):
    # The measure pages build at most MAX_PROJECTED_TIES ties; above it a 400 names max_group_size
    # and the largest groups (here the limit is lowered below the 145 ties of the test world).
    from app.network import comembership

    monkeypatch.setattr(comembership, "MAX_PROJECTED_TIES", 100)
    response = client.get("/api/network/summary", params={"mode": "co-membership", "overlap": "any", "weighting": "jaccard"})
    assert response.status_code == 400
    detail = response.json()["detail"]
    assert detail.startswith("max_group_size=none") and "145 pairs" in detail and "largest groups have 14, 12, 10 members" in detail
    # max_group_size=6 leaves out the large events and the parish: the page is computed.
    assert client.get("/api/network/summary", params={"mode": "co-membership", "max_group_size": "6",
                                                      "weighting": "jaccard"}).status_code == 200


def test_the_population_line_names_the_node_set_of_the_mode(client: TestClient):
    page = api(client, "/network/components", mode="co-membership", weighting="newman")
    assert "every person with a membership the slice keeps" in page["context"]["population"]
    assert "any kind" not in page["conventions"]
    assert "any kind" in api(client, "/network/components")["context"]["population"]
