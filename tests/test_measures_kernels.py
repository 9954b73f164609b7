"""The igraph adapter: each conversion of igraph's conventions into networkx's, on several graph shapes.

networkx (3.6) is the reference: every kernel must give what the named networkx function gives
on the same graph.
"""

from __future__ import annotations

import random

import igraph as ig
import networkx as nx
import pytest

from app.network.measures import kernels
from app.network.measures.conventions import DISTANCE, with_distances, working_graph


def shapes() -> dict[str, nx.Graph]:
    """Graphs of different shapes, with integer weights (1 to 7, and 2, 3, 6 for many ties) and loops."""
    rng = random.Random(5)
    disconnected = nx.gnp_random_graph(40, 0.06, seed=1)
    disconnected.add_nodes_from([100, 101])  # isolates
    directed = nx.gnp_random_graph(40, 0.08, seed=2, directed=True)
    grid = nx.convert_node_labels_to_integers(nx.grid_2d_graph(5, 5))  # many equally short paths
    looped = nx.gnp_random_graph(30, 0.12, seed=3)
    looped.add_edges_from((v, v) for v in range(0, 30, 4))
    directed_looped = nx.gnp_random_graph(30, 0.1, seed=4, directed=True)
    directed_looped.add_edges_from((v, v) for v in range(0, 30, 5))
    graphs = {"disconnected": disconnected, "directed": directed, "grid": grid, "looped": looped,
              "directed_looped": directed_looped, "karate": nx.karate_club_graph()}
    for name, G in graphs.items():
        for _, _, data in G.edges(data=True):
            if name == "grid":
                data["weight"] = rng.choice([2, 3, 6])
            elif name != "karate":
                data["weight"] = rng.randint(1, 7)
    return graphs


SHAPES = shapes()


def prepared(G: nx.Graph, weighted: bool) -> nx.Graph:
    """The working graph the measures hand to the kernels: loops kept, lengths in whole units if weighted."""
    H = working_graph(G, weight="weight" if weighted else None, loops="keep")
    return with_distances(H) if weighted else H


def close(a: dict, b: dict, rel: float = 1e-9) -> None:
    assert set(a) == set(b)
    for node in a:
        assert a[node] == pytest.approx(b[node], rel=rel, abs=1e-12), node


@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("name", list(SHAPES))
def test_betweenness_is_networkx_raw(name, weighted):
    H = prepared(SHAPES[name], weighted)
    distance = DISTANCE if weighted else None
    close(kernels.betweenness(H, distance=distance), nx.betweenness_centrality(H, normalized=False, weight=distance))


@pytest.mark.parametrize("name", ["disconnected", "directed", "grid", "directed_looped"])
def test_betweenness_in_forked_processes_is_networkx_raw(name, monkeypatch):
    # a large graph's path searches run in one process per core: forced here on small shapes
    monkeypatch.setattr(kernels, "PARALLEL_PATHS_ABOVE", 0)
    H = prepared(SHAPES[name], weighted=True)
    for distance in (None, DISTANCE):
        reference = nx.betweenness_centrality(H, normalized=False, weight=distance)
        g, nodes = kernels.to_igraph(H, attribute=distance)
        close(dict(zip(nodes, kernels._betweenness_in_processes(g, distance, 2).tolist())), reference)
        close(kernels.betweenness(H, distance=distance), reference)  # in processes unless this one has threads


@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("name", list(SHAPES))
def test_closeness_is_networkx_with_and_without_correction(name, weighted):
    H = prepared(SHAPES[name], weighted)
    distance = DISTANCE if weighted else None
    improved, within = kernels.closeness(H, distance=distance)
    close(improved, nx.closeness_centrality(H, distance=distance, wf_improved=True))
    close(within, nx.closeness_centrality(H, distance=distance, wf_improved=False))


@pytest.mark.parametrize("name", list(SHAPES))
def test_harmonic_is_networkx(name):
    H = prepared(SHAPES[name], weighted=False)
    close(kernels.harmonic(H), nx.harmonic_centrality(H))


def test_igraph_conventions_that_the_adapter_converts():
    # The raw igraph figures differ from networkx's exactly where the adapter converts them.
    G = nx.path_graph(4)
    G.add_node(4)  # an isolate
    g, nodes = kernels.to_igraph(G)
    assert nodes == [0, 1, 2, 3, 4]
    plain = g.closeness(normalized=True)
    assert plain[4] != plain[4]  # NaN for the isolate; the adapter gives 0
    assert plain[0] == pytest.approx(3 / 6)  # reachable persons only; networkx scales by 3/4
    assert kernels.closeness(G)[0][0] == pytest.approx(3 / 6 * 3 / 4) == nx.closeness_centrality(G)[0]
    D = nx.DiGraph([(0, 1), (1, 2)])
    d, _ = kernels.to_igraph(D)
    assert d.closeness(mode="out")[2] != d.closeness(mode="out")[2]  # 2 reaches no one
    assert kernels.closeness(D)[0][2] == pytest.approx(nx.closeness_centrality(D)[2]) == pytest.approx(2 / 3 * 2 / 2)
    # undirected betweenness: igraph counts each pair once, networkx's raw figure halves its count
    assert g.betweenness(directed=False)[1] == 2 == nx.betweenness_centrality(G, normalized=False)[1]


@pytest.mark.parametrize("name", ["disconnected", "directed", "grid", "directed_looped"])
def test_betweenness_by_group_adds_up_and_matches_networkx_subsets(name):
    H = prepared(SHAPES[name], weighted=True)
    sources = random.Random(1).sample(list(H), 6)
    groups = [sources[:1], sources[1:4], sources[4:]]
    nodes, shares = kernels.betweenness_by_group(H, groups, distance=DISTANCE)
    for group, row in zip(groups, shares):  # networkx 3.6: the paths from one group of sources
        close(dict(zip(nodes, row.tolist())),
              nx.betweenness_centrality_subset(H, group, list(H), normalized=False, weight=DISTANCE))
    nodes, every = kernels.betweenness_by_group(H, [[v] for v in H], distance=DISTANCE)
    close(dict(zip(nodes, every.sum(axis=0).tolist())), kernels.betweenness(H, distance=DISTANCE))


@pytest.mark.parametrize("name", ["grid", "karate", "looped"])
def test_path_lengths_are_networkx(name):
    H = working_graph(SHAPES[name])
    largest = H.subgraph(max(nx.connected_components(H), key=len))
    assert kernels.path_lengths(largest) == (nx.diameter(largest), pytest.approx(nx.average_shortest_path_length(largest)))
    single = nx.Graph()
    single.add_node(1)
    assert kernels.path_lengths(single) == (0, None)


def test_seeded_community_runs_repeat_and_give_back_the_random_generator():
    G = nx.karate_club_graph()
    H = working_graph(G, weight="weight", sort_edges=True)
    for method in (kernels.leiden, kernels.louvain):
        first = method(H, weight="weight", seed=3)
        assert method(H, weight="weight", seed=3) == first
        assert sorted(v for group in first for v in group) == list(range(34))
    # igraph draws from Python's random module again afterwards
    random.seed(8)
    before = ig.Graph.Erdos_Renyi(30, 0.2).get_edgelist()
    random.seed(8)
    kernels.leiden(H, weight="weight", seed=1)
    random.seed(8)
    assert ig.Graph.Erdos_Renyi(30, 0.2).get_edgelist() == before


def test_plain_float_lengths_would_make_the_libraries_disagree():
    # Why lengths are whole units: with 1/weight as floats, igraph (which compares lengths with a
    # relative tolerance) and networkx (which compares them exactly) split different pairs.
    G = SHAPES["grid"].copy()
    for _, _, data in G.edges(data=True):
        data["length"] = 1 / data["weight"]
    ours = kernels.betweenness(G, distance="length")
    reference = nx.betweenness_centrality(G, normalized=False, weight="length")
    assert max(abs(ours[v] - reference[v]) for v in G) > 0.5
