"""Centrality measures: small graphs checked on paper, then published networks against networkx and igraph.

Outside references:
- Padgett's Florentine families marriage network (Padgett & Ansell 1993, "Robust action and the
  rise of the Medici", American Journal of Sociology 98(6)), as shipped with networkx
  (``nx.florentine_families_graph()``, 15 families, the isolated Pucci left out). The Medici's
  raw betweenness 47.5 is the figure quoted from Wasserman & Faust (1994), Social Network
  Analysis; the other figures were computed with networkx 3.6 and are recomputed here.
- Zachary's karate club (Zachary 1977, "An information flow model for conflict and fission in
  small groups", Journal of Anthropological Research 33(4)), ``nx.karate_club_graph()`` with
  the ``weight`` attribute networkx ships.
"""

from __future__ import annotations

import math
import random
import statistics

import igraph as ig
import networkx as nx
import pytest

from app.network.measures import centrality
from app.network.measures.centrality import MEASURES, compute
from app.network.measures.conventions import DISTANCE_SCALE
from app.network.measures.results import MeasureError

PHI = (1 + math.sqrt(5)) / 2


def approx(values: dict, expected: dict, rel: float = 1e-9, abs: float = 1e-12) -> None:
    assert set(values) == set(expected)
    for node, value in expected.items():
        assert values[node] == pytest.approx(value, rel=rel, abs=abs), node


# --- small graphs on paper -------------------------------------------------------------------


def test_path_of_four_undirected():
    G = nx.path_graph(4)  # 0 - 1 - 2 - 3
    approx(centrality.degree(G).raw, {0: 1, 1: 2, 2: 2, 3: 1})
    approx(centrality.degree(G).values, {0: 1 / 3, 1: 2 / 3, 2: 2 / 3, 3: 1 / 3})
    approx(centrality.closeness(G).values, {0: 3 / 6, 1: 3 / 4, 2: 3 / 4, 3: 3 / 6})
    approx(centrality.harmonic(G).raw, {0: 11 / 6, 1: 5 / 2, 2: 5 / 2, 3: 11 / 6})
    approx(centrality.harmonic(G).values, {0: 11 / 18, 1: 5 / 6, 2: 5 / 6, 3: 11 / 18})
    result = centrality.betweenness(G)
    approx(result.raw, {0: 0, 1: 2, 2: 2, 3: 0})
    approx(result.values, {0: 0, 1: 2 / 3, 2: 2 / 3, 3: 0})  # x 2/((n-1)(n-2)) = 1/3
    # eigenvector of a path of four: (1, phi, phi, 1), scaled to length 1
    norm = math.sqrt(2 + 2 * PHI**2)
    approx(centrality.eigenvector(G).values, {0: 1 / norm, 1: PHI / norm, 2: PHI / norm, 3: 1 / norm}, rel=1e-4)


def test_path_of_four_directed():
    G = nx.DiGraph([(0, 1), (1, 2), (2, 3)])
    approx(centrality.in_degree(G).raw, {0: 0, 1: 1, 2: 1, 3: 1})
    approx(centrality.out_degree(G).values, {0: 1 / 3, 1: 1 / 3, 2: 1 / 3, 3: 0})
    approx(centrality.degree(G).raw, {0: 1, 1: 2, 2: 2, 3: 1})  # undirected view
    # incoming distances: 3 is reached from 2, 1, 0 at 1, 2, 3; 1 only from 0
    closeness = centrality.closeness(G)
    approx(closeness.values, {0: 0, 1: 1 * 1 / 3, 2: (2 / 3) * 2 / 3, 3: (3 / 6) * 3 / 3})
    approx(closeness.raw, {0: 0, 1: 1, 2: 2 / 3, 3: 1 / 2})
    assert "no other person has a path" in closeness.reasons[0]
    approx(centrality.harmonic(G).raw, {0: 0, 1: 1, 2: 1.5, 3: 11 / 6})
    betweenness = centrality.betweenness(G)
    approx(betweenness.raw, {0: 0, 1: 2, 2: 2, 3: 0})  # 1 lies on 0->2 and 0->3
    approx(betweenness.values, {0: 0, 1: 1 / 3, 2: 1 / 3, 3: 0})  # / ((n-1)(n-2)) = 6


def test_star_undirected_and_directed():
    G = nx.star_graph(3)  # centre 0
    approx(centrality.degree(G).values, {0: 1, 1: 1 / 3, 2: 1 / 3, 3: 1 / 3})
    approx(centrality.closeness(G).values, {0: 1, 1: 3 / 5, 2: 3 / 5, 3: 3 / 5})
    approx(centrality.harmonic(G).values, {0: 1, 1: 2 / 3, 2: 2 / 3, 3: 2 / 3})
    approx(centrality.betweenness(G).raw, {0: 3, 1: 0, 2: 0, 3: 0})
    approx(centrality.betweenness(G).values, {0: 1, 1: 0, 2: 0, 3: 0})
    leaf = 1 / math.sqrt(6)  # eigenvalue sqrt(3): centre sqrt(3), leaves 1, over length sqrt(6)
    approx(centrality.eigenvector(G).values, {0: 1 / math.sqrt(2), 1: leaf, 2: leaf, 3: leaf}, rel=1e-4)
    # PageRank of a star, solved by hand: centre (1 + a k) / (n (1 + a)), leaves share the rest
    alpha, k, n = 0.85, 3, 4
    centre = (1 + alpha * k) / (n * (1 + alpha))
    approx(centrality.pagerank(G).values, {0: centre, 1: (1 - centre) / 3, 2: (1 - centre) / 3, 3: (1 - centre) / 3}, rel=1e-6)

    D = nx.DiGraph([(1, 0), (2, 0), (3, 0)])  # every arc points at the centre
    approx(centrality.in_degree(D).raw, {0: 3, 1: 0, 2: 0, 3: 0})
    approx(centrality.closeness(D).values, {0: 1, 1: 0, 2: 0, 3: 0})
    approx(centrality.betweenness(D).raw, {0: 0, 1: 0, 2: 0, 3: 0})  # no path goes on from the centre


def test_triangle_with_pendant():
    G = nx.Graph([(0, 1), (1, 2), (2, 0), (2, 3)])
    approx(centrality.degree(G).raw, {0: 2, 1: 2, 2: 3, 3: 1})
    approx(centrality.closeness(G).values, {0: 3 / 4, 1: 3 / 4, 2: 1, 3: 3 / 5})
    approx(centrality.harmonic(G).values, {0: 5 / 6, 1: 5 / 6, 2: 1, 3: 2 / 3})
    approx(centrality.betweenness(G).raw, {0: 0, 1: 0, 2: 2, 3: 0})
    approx(centrality.betweenness(G).values, {0: 0, 1: 0, 2: 2 / 3, 3: 0})

    D = nx.DiGraph([(0, 1), (1, 2), (2, 0), (2, 3)])  # a directed triangle and an arc out of it
    approx(centrality.in_degree(D).raw, {0: 1, 1: 1, 2: 1, 3: 1})
    approx(centrality.out_degree(D).raw, {0: 1, 1: 1, 2: 2, 3: 0})
    # 3 is reached from 2, 1, 0 at distances 1, 2, 3
    approx(centrality.closeness(D).raw, {0: 2 / 3, 1: 2 / 3, 2: 2 / 3, 3: 3 / 6})
    # ordered pairs: 1 lies on 0->2 and 0->3; 2 on 1->0, 0->3, 1->3; 0 on 2->1
    approx(centrality.betweenness(D).raw, {0: 1, 1: 2, 2: 3, 3: 0})


def test_two_triangles_joined_by_a_bridge():
    G = nx.Graph([(0, 1), (1, 2), (2, 0), (3, 4), (4, 5), (5, 3), (2, 3)])
    # 2 lies on every path from {0, 1} to {3, 4, 5}: 6 pairs; 3 symmetrically
    approx(centrality.betweenness(G).raw, {0: 0, 1: 0, 2: 6, 3: 6, 4: 0, 5: 0})
    approx(centrality.betweenness(G).values, {0: 0, 1: 0, 2: 0.6, 3: 0.6, 4: 0, 5: 0})
    approx(centrality.closeness(G).values, {0: 5 / 10, 1: 5 / 10, 2: 5 / 7, 3: 5 / 7, 4: 5 / 10, 5: 5 / 10})
    approx(centrality.degree(G).raw, {0: 2, 1: 2, 2: 3, 3: 3, 4: 2, 5: 2})


def test_directed_cycle_with_a_self_loop():
    G = nx.DiGraph([(0, 1), (1, 2), (2, 0), (1, 1)])
    approx(centrality.in_degree(G).raw, {0: 1, 1: 1, 2: 1})
    approx(centrality.in_degree(G, loops="keep").raw, {0: 1, 1: 2, 2: 1})
    approx(centrality.out_degree(G, loops="keep").raw, {0: 1, 1: 2, 2: 1})
    approx(centrality.degree(G).raw, {0: 2, 1: 2, 2: 2})
    approx(centrality.degree(G, loops="keep").raw, {0: 2, 1: 4, 2: 2})  # a loop adds 2, as networkx counts
    approx(centrality.closeness(G).values, {0: 2 / 3, 1: 2 / 3, 2: 2 / 3})  # reached at 1 and 2
    approx(centrality.harmonic(G).values, {0: 0.75, 1: 0.75, 2: 0.75})
    approx(centrality.betweenness(G).raw, {0: 1, 1: 1, 2: 1})  # each lies on one ordered pair
    approx(centrality.betweenness(G).values, {0: 0.5, 1: 0.5, 2: 0.5})
    approx(centrality.betweenness(G, loops="keep").raw, {0: 1, 1: 1, 2: 1})  # paths ignore loops
    approx(centrality.pagerank(G).values, {0: 1 / 3, 1: 1 / 3, 2: 1 / 3}, rel=1e-6)
    kept = centrality.pagerank(G, loops="keep").values
    assert kept[1] > 1 / 3 + 0.01  # the loop sends part of 1's score back to itself
    assert kept == pytest.approx(nx.pagerank(G, alpha=0.85, tol=1e-10, max_iter=1000))  # networkx with the loop
    assert "left out (loops=drop)" in centrality.degree(G).conventions
    assert "kept (loops=keep)" in centrality.degree(G, loops="keep").conventions


def test_strength_counts_weights_and_in_and_out():
    G = nx.DiGraph()
    G.add_edge("a", "b", weight=2.0)
    G.add_edge("b", "a", weight=3.0)
    G.add_edge("b", "c", weight=1.0)
    G.add_edge("c", "c", weight=4.0)
    approx(centrality.in_strength(G).values, {"a": 3, "b": 2, "c": 1})
    approx(centrality.out_strength(G).values, {"a": 2, "b": 4, "c": 0})
    approx(centrality.in_strength(G, loops="keep").values, {"a": 3, "b": 2, "c": 5})
    # undirected view: a-b is one tie of the larger weight, never the sum
    approx(centrality.strength(G).values, {"a": 3, "b": 4, "c": 1})
    approx(centrality.strength(G, loops="keep").values, {"a": 3, "b": 4, "c": 9})  # a loop counts twice
    approx(centrality.strength(G, weight=None).values, {"a": 1, "b": 2, "c": 1})


def test_weighted_closeness_on_paper():
    G = nx.Graph()
    G.add_edge(0, 1, weight=1.0)  # length 1
    G.add_edge(1, 2, weight=4.0)  # length 1/4
    result = centrality.weighted_closeness(G)
    approx(result.values, {0: 2 / 2.25, 1: 2 / 1.25, 2: 2 / 1.5})
    assert "1/weight" in result.conventions and "720720" in result.conventions


def test_isolates_are_in_every_result_with_reasons():
    G = nx.Graph([(0, 1), (1, 2)])
    G.add_node(9)
    for name in ("degree", "strength", "closeness", "weighted_closeness", "harmonic", "betweenness",
                 "weighted_betweenness", "eigenvector", "pagerank"):
        result = compute(G, name)
        assert set(result.values) == set(result.raw) == {0, 1, 2, 9}, name
    assert centrality.closeness(G).values[9] == 0 and "no path" in centrality.closeness(G).reasons[9]
    assert centrality.eigenvector(G).values[9] == 0 and "no ties" in centrality.eigenvector(G).reasons[9]
    assert centrality.pagerank(G).values[9] == pytest.approx(nx.pagerank(G, tol=1e-10, max_iter=1000)[9])
    assert "random jump" in centrality.pagerank(G).reasons[9]
    assert centrality.harmonic(G).values[9] == 0


def test_undefined_values_become_none_with_a_reason():
    single = nx.Graph()
    single.add_node("x")
    for name in ("degree", "closeness", "harmonic", "betweenness"):
        result = compute(single, name)
        assert result.values == {"x": None} and result.reasons["x"], name
    pair = nx.Graph([(1, 2)])
    assert centrality.betweenness(pair).values == {1: None, 2: None}
    assert centrality.betweenness(pair).raw == {1: 0.0, 2: 0.0}
    # two cliques of nearly equal size: the power iteration cannot settle in 1000 steps
    A = nx.complete_graph(30)
    B = nx.relabel_nodes(nx.complete_graph(30), lambda v: v + 100)
    B.remove_edge(100, 101)
    stuck = centrality.eigenvector(nx.union(A, B))
    assert all(v is None for v in stuck.values.values())
    assert "did not converge" in stuck.reasons[0]
    assert [row.rank for row in stuck.rows()][:1] == [None]


def test_directed_measures_need_a_directed_slice_and_options_are_checked():
    G = nx.path_graph(3)
    for name in ("in_degree", "out_degree", "in_strength", "out_strength"):
        with pytest.raises(MeasureError) as error:
            compute(G, name)
        assert error.value.parameter == "measure" and "direction=recorded" in error.value.accepted
    with pytest.raises(MeasureError) as error:
        compute(G, "popularity")
    assert "betweenness" in error.value.accepted
    with pytest.raises(MeasureError):
        centrality.closeness(G, engine="fortran")
    with pytest.raises(MeasureError):
        centrality.degree(G, loops="sometimes")
    with pytest.raises(MeasureError):
        centrality.betweenness(G, samples=1)
    bad = nx.Graph()
    bad.add_edge(1, 2, weight=0)
    with pytest.raises(MeasureError) as error:
        centrality.weighted_betweenness(bad)
    assert error.value.parameter == "weight"
    assert set(MEASURES) == {"degree", "in_degree", "out_degree", "strength", "in_strength", "out_strength", "closeness",
                             "harmonic", "betweenness", "weighted_closeness", "weighted_betweenness", "eigenvector", "pagerank"}


def test_conventions_name_the_node_set_and_n():
    G = nx.path_graph(5)
    text = centrality.betweenness(G, node_set="evidence").conventions
    assert "n = 5 persons (node set: evidence" in text
    assert "2/((n − 1)(n − 2))" in text
    directed = centrality.betweenness(nx.DiGraph([(0, 1), (1, 2)])).conventions
    assert "÷ ((n − 1)(n − 2))" in directed and "ordered pairs" in directed
    assert "undirected view" in centrality.degree(nx.DiGraph([(0, 1)])).conventions
    assert "Wasserman–Faust" in centrality.closeness(G).conventions


# --- weighted paths: the tie rule ------------------------------------------------------------


def tie_graph(lower: list[int], upper: list[int]) -> nx.Graph:
    """Two routes from a to z: through b (weights ``lower``) and through c, d (weights ``upper``)."""
    G = nx.Graph()
    G.add_edge("a", "b", weight=lower[0])
    G.add_edge("b", "z", weight=lower[1])
    G.add_edge("a", "c", weight=upper[0])
    G.add_edge("c", "d", weight=upper[1])
    G.add_edge("d", "z", weight=upper[2])
    return G


@pytest.mark.parametrize("engine", ["igraph", "networkx"])
def test_exact_tie_of_half_half_and_three_thirds(engine):
    # a-b-z has length 1/2 + 1/2, a-c-d-z 1/3 + 1/3 + 1/3: the pair (a, z) splits its unit.
    # By hand: (a,z) gives b, c, d 1/2 each; (a,d) gives c 1; (b,c) gives a 1; (b,d) gives z 1;
    # (z,c) gives d 1.
    G = tie_graph([2, 2], [3, 3, 3])
    result = centrality.weighted_betweenness(G, engine=engine)
    approx(result.raw, {"a": 1, "b": 0.5, "z": 1, "c": 1.5, "d": 1.5})
    approx(result.values, {"a": 1 / 6, "b": 0.5 / 6, "z": 1 / 6, "c": 1.5 / 6, "d": 1.5 / 6})  # x 2/(4*3)


@pytest.mark.parametrize("engine", ["igraph", "networkx"])
def test_a_tie_that_floating_point_sums_break(engine):
    # 1/2 + 1/2 = 1/2 + 1/3 + 1/6, but summed in floats from a the second is 0.9999999999999999.
    # By hand: (a,z) gives b, c, d 1/2; (b,c) also ties: b-a-c = 1 = b-z-d-c, giving a, z, d 1/2;
    # (a,d) gives c 1; (b,d) gives z 1; (z,c) gives d 1.
    G = tie_graph([2, 2], [2, 3, 6])
    expected = {"a": 0.5, "b": 0.5, "c": 1.5, "d": 2.0, "z": 1.5}
    approx(centrality.weighted_betweenness(G, engine=engine).raw, expected)
    # Plain float lengths make networkx see one path from a and two from z, so it differs:
    for u, v, data in G.edges(data=True):
        data["length"] = 1 / data["weight"]
    naive = nx.betweenness_centrality(G, weight="length", normalized=False)
    assert naive != pytest.approx(expected)


def test_weighted_measures_match_networkx_given_the_same_whole_unit_lengths():
    G = tie_graph([2, 2], [2, 3, 6])
    for u, v, data in G.edges(data=True):
        data["units"] = round(DISTANCE_SCALE / data["weight"])
    reference = nx.betweenness_centrality(G, weight="units", normalized=False)
    approx(centrality.weighted_betweenness(G).raw, reference)
    closeness = nx.closeness_centrality(G, distance="units")  # in 1/units: scale back to 1/weight
    approx(centrality.weighted_closeness(G).values, {v: c * DISTANCE_SCALE for v, c in closeness.items()})


# --- Padgett's Florentine families -------------------------------------------------------------


def florentine(with_pucci: bool = False) -> nx.Graph:
    G = nx.florentine_families_graph()
    nx.set_edge_attributes(G, 1.0, "weight")
    if with_pucci:
        G.add_node("Pucci")  # the isolated family that networkx leaves out
    return G


@pytest.mark.parametrize("engine", ["igraph", "networkx"])
def test_florentine_medici(engine):
    G = florentine()
    assert len(G) == 15 and G.number_of_edges() == 20
    degree = centrality.degree(G)
    assert degree.raw["Medici"] == 6
    betweenness = centrality.betweenness(G, engine=engine)
    assert betweenness.raw["Medici"] == pytest.approx(47.5)  # Wasserman & Faust 1994
    assert betweenness.values["Medici"] == pytest.approx(47.5 / 91) == pytest.approx(0.522, abs=5e-4)
    assert betweenness.raw["Guadagni"] == pytest.approx(23.17, abs=0.005)
    assert betweenness.raw["Albizzi"] == pytest.approx(19.33, abs=0.005)
    assert betweenness.raw["Salviati"] == pytest.approx(13.0)
    closeness = centrality.closeness(G, engine=engine)
    assert closeness.values["Medici"] == pytest.approx(0.560)
    # and networkx itself, on the same graph
    approx(betweenness.raw, nx.betweenness_centrality(G, normalized=False))
    approx(closeness.values, nx.closeness_centrality(G, wf_improved=True))
    rows = betweenness.rows()
    assert [row.node for row in rows[:4]] == ["Medici", "Guadagni", "Albizzi", "Salviati"]
    assert rows[0].rank == 1 and rows[0].raw == pytest.approx(47.5)


@pytest.mark.parametrize("engine", ["igraph", "networkx"])
def test_florentine_with_pucci_as_an_isolate(engine):
    G = florentine(with_pucci=True)
    betweenness = centrality.betweenness(G, engine=engine, node_set="all")
    assert betweenness.raw["Medici"] == pytest.approx(47.5)
    assert betweenness.values["Medici"] == pytest.approx(47.5 / 105)  # n = 16: 2/(15*14)
    assert "n = 16 persons" in betweenness.conventions
    closeness = centrality.closeness(G, engine=engine)
    assert closeness.values["Pucci"] == 0
    # Wasserman-Faust: 14 families in reach out of 15 others
    assert closeness.values["Medici"] == pytest.approx(0.560 * 14 / 15)
    approx(closeness.values, nx.closeness_centrality(G, wf_improved=True))
    assert closeness.raw["Medici"] == pytest.approx(0.560)
    approx(centrality.degree(G).values, nx.degree_centrality(G))


# --- Zachary's karate club: igraph and networkx agree ------------------------------------------


@pytest.fixture(scope="module")
def karate() -> nx.Graph:
    return nx.karate_club_graph()


def karate_igraph(G: nx.Graph) -> ig.Graph:
    return ig.Graph(n=len(G), edges=list(G.edges()), edge_attrs={"weight": [d["weight"] for _, _, d in G.edges(data=True)]})


def test_karate_every_centrality_matches_networkx(karate):
    n = len(karate)
    units = nx.Graph()
    units.add_edges_from((u, v, {"units": round(DISTANCE_SCALE / d["weight"])}) for u, v, d in karate.edges(data=True))
    references = {
        "degree": nx.degree_centrality(karate),
        "strength": dict(karate.degree(weight="weight")),
        "closeness": nx.closeness_centrality(karate),
        "harmonic": {v: h / (n - 1) for v, h in nx.harmonic_centrality(karate).items()},
        "betweenness": nx.betweenness_centrality(karate),
        "weighted_closeness": {v: c * DISTANCE_SCALE for v, c in nx.closeness_centrality(units, distance="units").items()},
        "weighted_betweenness": nx.betweenness_centrality(units, weight="units"),
        "eigenvector": nx.eigenvector_centrality(karate, weight="weight", max_iter=1000),
        "pagerank": nx.pagerank(karate, alpha=0.85, weight="weight", tol=1e-10, max_iter=1000),
    }
    for name, reference in references.items():
        for engine in ("igraph", "networkx"):
            approx(compute(karate, name, engine=engine).values, reference, rel=1e-9, abs=1e-12)


def test_karate_every_centrality_matches_igraph(karate):
    g = karate_igraph(karate)
    n = len(karate)
    lengths = [round(DISTANCE_SCALE / w) for w in g.es["weight"]]
    scale = 2 / ((n - 1) * (n - 2))
    references = {
        "degree": [d / (n - 1) for d in g.degree()],
        "strength": g.strength(weights="weight"),
        "closeness": g.closeness(),  # connected: no correction needed
        "harmonic": g.harmonic_centrality(normalized=True),
        "betweenness": [b * scale for b in g.betweenness(directed=False)],
        "weighted_closeness": [c * DISTANCE_SCALE for c in g.closeness(weights=lengths)],
        "weighted_betweenness": [b * scale for b in g.betweenness(directed=False, weights=lengths)],
        "pagerank": g.pagerank(damping=0.85, weights="weight"),
    }
    for name, reference in references.items():
        approx(compute(karate, name).values, dict(enumerate(reference)), rel=1e-6, abs=1e-12)
    # igraph scales eigenvector centrality to a maximum of 1, networkx to Euclidean length 1
    scaled = g.eigenvector_centrality(weights="weight", scale=True)
    norm = math.sqrt(sum(x * x for x in scaled))
    approx(centrality.eigenvector(karate).values, {v: x / norm for v, x in enumerate(scaled)}, rel=1e-4)


def test_karate_weighted_betweenness_equals_exact_rational_arithmetic(karate):
    # karate's weights run from 1 to 7, all dividing 720720: whole units are exact lengths.
    from fractions import Fraction

    exact = nx.Graph()
    exact.add_edges_from((u, v, {"length": Fraction(1, d["weight"])}) for u, v, d in karate.edges(data=True))
    reference = nx.betweenness_centrality(exact, weight="length", normalized=False)
    approx(centrality.weighted_betweenness(karate).raw, {v: float(b) for v, b in reference.items()})


# --- sampled betweenness --------------------------------------------------------------------


@pytest.mark.parametrize("engine", ["igraph", "networkx"])
def test_sampled_betweenness_equals_networkx_estimate(karate, engine):
    for k, seed in ((5, 1), (12, 7), (27, 3)):  # 27 sources: taken in 20 groups
        result = centrality.betweenness(karate, samples=k, seed=seed, engine=engine)
        # networkx >= 3.5: sampled sources, scaled by (n - 1)/k, (n - 1)/(k - 1) for the sources themselves
        approx(result.values, nx.betweenness_centrality(karate, k=k, seed=seed), rel=1e-9, abs=1e-12)
        approx(result.raw, nx.betweenness_centrality(karate, k=k, seed=seed, normalized=False), rel=1e-9, abs=1e-12)
        assert result.sampling.samples == k and result.sampling.seed == seed
        assert f"{k} of the 34 persons" in result.conventions
    weighted = centrality.weighted_betweenness(karate, samples=8, seed=2, engine=engine)
    units = nx.Graph()
    units.add_nodes_from(sorted(karate))  # sources are drawn from the nodes in this order
    units.add_edges_from((u, v, {"units": round(DISTANCE_SCALE / d["weight"])}) for u, v, d in karate.edges(data=True))
    approx(weighted.values, nx.betweenness_centrality(units, k=8, seed=2, weight="units"), rel=1e-9, abs=1e-12)


def test_sampled_betweenness_is_the_same_for_the_same_seed_and_exact_without_sampling(karate):
    shuffled = nx.Graph()
    nodes = list(karate)
    random.Random(4).shuffle(nodes)
    shuffled.add_nodes_from(nodes)
    shuffled.add_edges_from(karate.edges(data=True))
    first = centrality.betweenness(karate, samples=9, seed=11)
    assert centrality.betweenness(shuffled, samples=9, seed=11).values == first.values
    assert centrality.betweenness(karate, samples=9, seed=12).values != first.values
    exact = centrality.betweenness(karate, samples=34)
    assert exact.sampling is None and exact.values == centrality.betweenness(karate).values


def test_sampled_betweenness_standard_errors_hold_when_sources_are_grouped():
    # More sources than groups (60 sources in 20 groups of 3): the errors, from the spread of the
    # groups' shares, still match the spread of the estimates over seeds. Graph: the Les
    # Misérables co-appearance network (Knuth 1993), shipped with networkx.
    G = nx.convert_node_labels_to_integers(nx.les_miserables_graph())
    exact = centrality.betweenness(G).values
    runs = [centrality.betweenness(G, samples=60, seed=seed) for seed in range(200)]
    assert "taken in 20 groups" in runs[0].conventions
    for node in sorted(exact, key=exact.get, reverse=True)[:4]:
        estimates = [r.values[node] for r in runs]
        spread = statistics.pstdev(estimates)
        mean_error = statistics.mean(r.sampling.standard_errors[node] ** 2 for r in runs) ** 0.5
        assert statistics.mean(estimates) == pytest.approx(exact[node], abs=3 * spread / math.sqrt(len(runs)))
        assert mean_error == pytest.approx(spread, rel=0.25), node


def test_sampled_betweenness_standard_errors_match_the_spread_of_estimates(karate):
    # Over many seeds the estimates average to the exact value (no bias) and spread as the
    # standard errors say (sampling without replacement).
    exact = centrality.betweenness(karate).values
    k = 8
    runs = [centrality.betweenness(karate, samples=k, seed=seed) for seed in range(400)]
    for node in (0, 33, 2, 31):
        estimates = [r.values[node] for r in runs]
        spread = statistics.pstdev(estimates)
        mean_error = statistics.mean(r.sampling.standard_errors[node] ** 2 for r in runs) ** 0.5
        assert statistics.mean(estimates) == pytest.approx(exact[node], abs=3 * spread / math.sqrt(len(runs)))
        assert mean_error == pytest.approx(spread, rel=0.25), node
