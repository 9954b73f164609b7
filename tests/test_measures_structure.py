"""Components, cut points and bridges, cliques and the summary: on paper, against networkx, by brute force.

Outside reference: Padgett's Florentine families marriage network (Padgett & Ansell 1993,
American Journal of Sociology 98(6)) as shipped with networkx; its articulation points and
bridges were computed with networkx 3.6 and are recomputed here.
"""

from __future__ import annotations

import random

import networkx as nx
import pytest

from app.network.measures.cliques import cliques
from app.network.measures.components import components
from app.network.measures.cuts import cuts
from app.network.measures.results import MeasureError
from app.network.measures.summary import collection_warning, small_slice_warning, summarize


def two_triangles() -> nx.Graph:
    return nx.Graph([(0, 1), (1, 2), (2, 0), (3, 4), (4, 5), (5, 3), (2, 3)])


def random_graphs() -> list[nx.Graph]:
    graphs = []
    for seed in range(12):
        rng = random.Random(seed)
        G = nx.gnp_random_graph(rng.randint(8, 30), rng.choice([0.08, 0.12, 0.2]), seed=seed, directed=seed % 3 == 0)
        G.add_edges_from((v, v) for v in list(G)[:3])
        graphs.append(G)
    return graphs


# --- components ------------------------------------------------------------------------------


def test_components_list_every_piece_with_isolates():
    G = two_triangles()
    G.add_edges_from([(10, 11)])
    G.add_nodes_from([20, 7])
    result = components(G, node_set="evidence")
    assert [(c.number, c.size, c.members, c.ties) for c in result.components] == [
        (1, 6, [0, 1, 2, 3, 4, 5], 7), (2, 2, [10, 11], 1), (3, 1, [7], 0), (4, 1, [20], 0),
    ]
    assert result.isolates == [7, 20] and result.strong is None
    assert result.largest_share == pytest.approx(6 / 10)
    assert "n = 10 persons (node set: evidence" in result.conventions and "isolate" in result.conventions


def test_directed_components_weak_and_strong():
    G = nx.DiGraph([(0, 1), (1, 2), (2, 0), (2, 3), (1, 1)])
    G.add_node(4)
    result = components(G)
    assert [(c.members, c.ties) for c in result.components] == [([0, 1, 2, 3], 4), ([4], 0)]
    assert [(c.members, c.ties) for c in result.strong] == [([0, 1, 2], 3), ([3], 0), ([4], 0)]
    kept = components(G, loops="keep")
    assert kept.components[0].ties == 5  # the loop counts when kept
    assert result.isolates == [4]


@pytest.mark.parametrize("G", random_graphs())
def test_components_agree_with_networkx(G):
    result = components(G)
    reference = nx.weakly_connected_components(G) if G.is_directed() else nx.connected_components(G)
    assert sorted(sorted(c.members) for c in result.components) == sorted(sorted(c) for c in reference)
    assert [c.size for c in result.components] == sorted((c.size for c in result.components), reverse=True)
    assert sum(c.ties for c in result.components) == G.number_of_edges() - nx.number_of_selfloops(G)
    if G.is_directed():
        assert len(result.strong) == nx.number_strongly_connected_components(G)


# --- cut points and bridges --------------------------------------------------------------------


def test_cut_points_and_bridges_on_paper():
    result = cuts(two_triangles())
    assert [(c.node, c.pieces, c.component_size) for c in result.cut_points] == [(2, [3, 2], 6), (3, [3, 2], 6)]
    assert [(b.u, b.v, b.sides) for b in result.bridges] == [(2, 3, (3, 3))]
    path = cuts(nx.path_graph(4))
    assert [(c.node, c.pieces) for c in path.cut_points] == [(1, [2, 1]), (2, [2, 1])]
    assert [(b.u, b.v, b.sides) for b in path.bridges] == [(1, 2, (2, 2)), (0, 1, (1, 3)), (2, 3, (3, 1))]
    star = cuts(nx.star_graph(3))
    assert [(c.node, c.pieces) for c in star.cut_points] == [(0, [1, 1, 1])]
    pendant = cuts(nx.Graph([(0, 1), (1, 2), (2, 0), (2, 3)]))
    assert [(c.node, c.pieces) for c in pendant.cut_points] == [(2, [2, 1])]
    cycle = cuts(nx.DiGraph([(0, 1), (1, 2), (2, 0), (1, 1)]))
    assert cycle.cut_points == [] and cycle.bridges == []


def test_florentine_cut_points_and_bridges():
    G = nx.florentine_families_graph()
    result = cuts(G)
    assert sorted(c.node for c in result.cut_points) == ["Albizzi", "Guadagni", "Medici", "Salviati"]
    assert sorted(c.node for c in result.cut_points) == sorted(nx.articulation_points(G))
    assert len(result.bridges) == 5
    assert {frozenset((b.u, b.v)) for b in result.bridges} == {frozenset(e) for e in nx.bridges(G)}
    medici = next(c for c in result.cut_points if c.node == "Medici")
    assert medici.pieces == brute_force_pieces(G, "Medici")
    assert result.cut_points[0].node == "Medici"  # it separates most families


def brute_force_pieces(G: nx.Graph, node) -> list[int]:
    component = nx.node_connected_component(G, node)
    rest = G.subgraph(component - {node})
    return sorted((len(c) for c in nx.connected_components(rest)), reverse=True)


@pytest.mark.parametrize("G", random_graphs())
def test_cut_points_and_bridges_agree_with_networkx_and_brute_force(G):
    U = nx.Graph(G.to_undirected())
    U.remove_edges_from(list(nx.selfloop_edges(U)))
    result = cuts(G)
    assert sorted(c.node for c in result.cut_points) == sorted(nx.articulation_points(U))
    for cut in result.cut_points:
        assert cut.pieces == brute_force_pieces(U, cut.node)
        assert cut.component_size == len(nx.node_connected_component(U, cut.node))
    assert {frozenset((b.u, b.v)) for b in result.bridges} == {frozenset(e) for e in nx.bridges(U)}
    for bridge in result.bridges:
        H = U.copy()
        H.remove_edge(bridge.u, bridge.v)
        assert bridge.sides == (len(nx.node_connected_component(H, bridge.u)), len(nx.node_connected_component(H, bridge.v)))


def test_a_long_chain_does_not_exhaust_the_stack():
    result = cuts(nx.path_graph(5000))
    assert len(result.cut_points) == 4998 and len(result.bridges) == 4999


def test_bridges_carry_their_evidence_and_flag_a_single_document():
    G = nx.Graph()
    G.add_edge(1, 2, weight=1.0, documents=1, attestations=2, attestation_ids=[11, 12], relation_ids=[5], kinds=[1])
    G.add_edge(2, 3, weight=3.0, documents=3, attestations=3, attestation_ids=[13, 14, 15], relation_ids=[6], kinds=[1])
    single, multiple = sorted(cuts(G).bridges, key=lambda b: b.u)
    assert (single.attestation_ids, single.relation_ids, single.documents, single.single_document) == ([11, 12], [5], 1, True)
    assert (multiple.weight, multiple.documents, multiple.single_document) == (3.0, 3, False)
    # a directed slice: the two arcs of a letter exchange are one tie with both attestations
    D = nx.DiGraph()
    D.add_edge(1, 2, weight=1.0, documents=1, attestations=1, attestation_ids=[21], relation_ids=[7], kinds=[1])
    D.add_edge(2, 1, weight=1.0, documents=1, attestations=1, attestation_ids=[22], relation_ids=[8], kinds=[1])
    D.add_edge(2, 3, weight=1.0, documents=1, attestations=1, attestation_ids=[23], relation_ids=[9], kinds=[1])
    bridge = next(b for b in cuts(D).bridges if {b.u, b.v} == {1, 2})
    assert bridge.attestation_ids == [21, 22] and bridge.relation_ids == [7, 8] and bridge.attestations == 2
    assert bridge.documents == 1  # the larger per-arc count: a lower bound, as the conventions say
    assert "direction=undirected" in cuts(D).conventions
    D[1][2]["document_ids"], D[2][1]["document_ids"] = [101], [102]
    exact = next(b for b in cuts(D).bridges if {b.u, b.v} == {1, 2})
    assert exact.documents == 2 and not exact.single_document


# --- cliques ---------------------------------------------------------------------------------


def test_cliques_on_paper():
    G = two_triangles()
    G.add_edges_from([(3, 6), (4, 6), (5, 6)])  # 3, 4, 5, 6 form a clique of four
    result = cliques(G)
    assert [c.members for c in result.cliques] == [[3, 4, 5, 6], [0, 1, 2]]
    assert result.per_node == {0: 1, 1: 1, 2: 1, 3: 1, 4: 1, 5: 1, 6: 1}
    assert result.complete and "All 2 are listed" in result.conventions
    assert [c.members for c in cliques(G, min_size=4).cliques] == [[3, 4, 5, 6]]
    assert len(cliques(G, min_size=2).cliques) == 3  # the bridge 2-3 is a maximal clique of two
    directed = cliques(nx.DiGraph([(0, 1), (1, 2), (2, 0), (1, 1)]))
    assert [c.members for c in directed.cliques] == [[0, 1, 2]]


@pytest.mark.parametrize("G", random_graphs())
def test_cliques_agree_with_networkx(G):
    U = nx.Graph(G.to_undirected())
    U.remove_edges_from(list(nx.selfloop_edges(U)))
    result = cliques(G, min_size=3)
    assert sorted(c.members for c in result.cliques) == sorted(sorted(c) for c in nx.find_cliques(U) if len(c) >= 3)
    for v in U:
        assert result.per_node[v] == sum(v in c.members for c in result.cliques)


def test_clique_cap_is_stated():
    G = nx.complete_multipartite_graph(*[2] * 7)  # 2^7 = 128 maximal cliques of seven
    result = cliques(G, limit=50)
    assert len(result.cliques) == 50 and not result.complete
    assert "stopped at 50 cliques" in result.conventions
    assert len(cliques(G).cliques) == 128
    with pytest.raises(MeasureError):
        cliques(G, min_size=1)
    with pytest.raises(MeasureError):
        cliques(G, limit=0)


# --- summary ---------------------------------------------------------------------------------


def test_summary_of_a_directed_cycle_with_a_loop():
    G = nx.DiGraph([(0, 1), (1, 2), (2, 0), (1, 1)])
    summary = summarize(G)
    assert (summary.persons, summary.ties, summary.loops, summary.directed) == (3, 3, 1, True)
    assert summary.density == pytest.approx(3 / 6)
    assert summary.reciprocity == 0
    assert summary.transitivity == 1 and summary.average_clustering == 1  # a triangle, undirected
    assert (summary.components, summary.largest_component, summary.diameter, summary.average_path_length) == (1, 3, 1, 1.0)
    assert summary.degree_distribution == {2: 3}
    assert summary.in_degree_distribution == {1: 3} and summary.out_degree_distribution == {1: 3}
    assert summary.warnings == [small_slice_warning(3, 3)]


def test_summary_of_florentine_families_against_networkx():
    G = nx.florentine_families_graph()
    G.add_node("Pucci")
    summary = summarize(G, node_set="all")
    assert (summary.persons, summary.ties, summary.loops) == (16, 20, 0)
    assert summary.density == pytest.approx(nx.density(G)) == pytest.approx(20 / 120)
    assert summary.transitivity == pytest.approx(nx.transitivity(G))
    assert summary.average_clustering == pytest.approx(nx.average_clustering(G))
    assert summary.reciprocity is None and summary.in_degree_distribution is None
    assert (summary.components, summary.largest_component) == (2, 15)
    assert summary.largest_share == pytest.approx(15 / 16)
    main = G.subgraph(nx.node_connected_component(G, "Medici"))
    assert summary.diameter == nx.diameter(main)
    assert summary.average_path_length == pytest.approx(nx.average_shortest_path_length(main))
    assert summary.degree_distribution == {d: count for d, count in enumerate(nx.degree_histogram(G)) if count}
    assert sum(summary.degree_distribution.values()) == 16 and summary.degree_distribution[0] == 1
    assert summary.degree_distribution[6] == 1  # the Medici
    assert "largest component (15 of 16 persons" in summary.conventions
    assert summary.attestations is None  # networkx's graph carries no evidence


def test_summary_counts_distinct_attestations_and_warns():
    G = nx.DiGraph()
    G.add_edge(1, 2, attestation_ids=[1, 2])  # an undirected kind is recorded on both arcs
    G.add_edge(2, 1, attestation_ids=[1, 2, 3])
    G.add_edge(3, 3, attestation_ids=[4])
    summary = summarize(G, collection_counts={"Vell family papers": 3, "Town register": 1})
    assert summary.attestations == 4
    assert summary.reciprocity == 1.0
    assert summary.warnings == [
        "Only 3 persons and 2 ties: measures on so few ties say little.",
        "Most of the attestations come from one source of evidence: 75% (3 of 4) come from one collection, Vell "
        "family papers. The network may show what that archive kept rather than all that happened. (A warning is "
        "given when one repository or one collection supplies more than 50% of the attestations: common practice, "
        "not a published rule.)",
    ]
    big = nx.gnm_random_graph(40, 80, seed=1)
    assert summarize(big, collection_counts={"a": 5, "b": 5}).warnings == []
    assert collection_warning({}) is None
    # one repository holds most of the evidence in collections none of which does (common practice: more than half)
    spread = {"Harwick: letters": 30, "Harwick: accounts": 30, "Harwick: registers": 10, "Delden: council": 30}
    warning = collection_warning(spread, repositories={"Harwick": 70, "Delden": 30}, total=100)
    assert "70% (70 of 100) come from one repository, Harwick." in warning and "from one collection" not in warning
    assert "more than 50%" in warning
    # printed sources count in the whole: 60 of 130 from one repository is not most
    assert collection_warning({"Harwick: letters": 60}, repositories={"Harwick": 60}, total=130) is None
    both = collection_warning({"Harwick: letters": 80, "Delden: council": 20}, repositories={"Harwick": 80, "Delden": 20})
    assert "80% (80 of 100) come from one repository, Harwick; 80% (80 of 100) come from one collection, Harwick: letters" in both
    empty = summarize(nx.Graph())
    assert (empty.persons, empty.density, empty.diameter, empty.largest_share) == (0, None, None, None)


def test_single_document_bridges_on_a_directed_slice_without_document_ids():
    """Letters both ways, each from its own document, are not a single-document bridge (worked by hand)."""
    import networkx as nx

    from app.network.measures.cuts import cuts

    G = nx.DiGraph()
    G.add_edge(1, 2, weight=1.0, documents=1, attestations=1)  # letter 1 -> 2, document a
    G.add_edge(2, 1, weight=1.0, documents=1, attestations=1)  # letter 2 -> 1, document b
    G.add_edge(2, 3, weight=1.0, documents=1, attestations=1)  # letter 2 -> 3, document c
    flags = {(b.u, b.v): b.single_document for b in cuts(G).bridges}
    assert flags == {(1, 2): False, (2, 3): True}


# --- igraph on the slice's arrays, held to networkx ------------------------------------------


def weighted_shapes() -> list[nx.Graph]:
    """Disconnected, directed (with opposite arcs of different weights), weighted, with self-loops."""
    shapes = []
    for seed, G in enumerate(random_graphs()):
        rng = random.Random(100 + seed)
        for _, _, data in G.edges(data=True):
            data["weight"] = float(rng.randint(1, 5))
        G.add_nodes_from([500, 501])  # isolates
        G.add_edge(600, 601, weight=2.0)  # a separate pair
        shapes.append(G)
    return shapes


@pytest.mark.parametrize("G", weighted_shapes())
def test_cut_points_bridges_and_cliques_from_arrays_equal_networkx(G):
    from app.network.measures.arcs import ArcGraph

    U = nx.Graph(G.to_undirected())
    U.remove_edges_from(list(nx.selfloop_edges(U)))
    A = ArcGraph.from_networkx(G)
    result = cuts(A)
    assert sorted(c.node for c in result.cut_points) == sorted(nx.articulation_points(U))
    for cut in result.cut_points:
        assert cut.pieces == brute_force_pieces(U, cut.node)
    assert {frozenset((b.u, b.v)) for b in result.bridges} == {frozenset(e) for e in nx.bridges(U)}
    for bridge in result.bridges:
        H = U.copy()
        H.remove_edge(bridge.u, bridge.v)
        assert bridge.sides == (len(nx.node_connected_component(H, bridge.u)), len(nx.node_connected_component(H, bridge.v)))
        # the undirected view's weight: the larger of two opposite arcs (conventions.working_graph)
        assert bridge.weight == max(G[a][b]["weight"] for a, b in ((bridge.u, bridge.v), (bridge.v, bridge.u)) if G.has_edge(a, b))
    assert [(c.node, c.pieces) for c in result.cut_points] == [(c.node, c.pieces) for c in cuts(G).cut_points]
    for size in (2, 3, 4):
        found = cliques(A, min_size=size)
        assert sorted(c.members for c in found.cliques) == sorted(sorted(c) for c in nx.find_cliques(U) if len(c) >= size)
        assert found.complete


@pytest.mark.parametrize("G", weighted_shapes())
@pytest.mark.parametrize("loops", ["drop", "keep"])
def test_communities_from_arrays_reach_networkx_modularity(G, loops):
    """Compared by modularity (networkx's ``community.modularity``), never by identical partitions."""
    from app.network.measures.arcs import ArcGraph
    from app.network.measures.communities import communities

    U = nx.Graph()
    U.add_nodes_from(G)
    for u, v, w in G.edges(data="weight"):
        if u == v and loops == "drop":
            continue
        U.add_edge(u, v, weight=max(w, U[u][v]["weight"]) if U.has_edge(u, v) else w)
    A = ArcGraph.from_networkx(G)
    for method in ("leiden", "louvain"):
        result = communities(A, method=method, loops=loops, runs=3)
        groups = [set(c.members) for c in result.communities] + [{v} for v in result.isolates]
        assert sorted(v for g in groups for v in g) == sorted(G)
        assert result.modularity == pytest.approx(nx.community.modularity(U, groups, weight="weight"), abs=1e-9)
        reference = nx.community.louvain_communities(U, weight="weight", seed=0)
        assert result.modularity == pytest.approx(nx.community.modularity(U, reference, weight="weight"), abs=0.05)
        assert {500, 501} <= set(result.isolates) and result.membership[600] == result.membership[601]
