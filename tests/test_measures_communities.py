"""Communities: on paper, on Zachary's karate club by modularity, their stability across seeds.

Outside references: Zachary's karate club (Zachary 1977, Journal of Anthropological Research
33(4)) as shipped with networkx; modularity recomputed with networkx's ``community.modularity``
(Newman & Girvan 2004); mutual information checked against scipy's entropy (normalized as
Danon et al. 2005, J. Stat. Mech. P09008).
"""

from __future__ import annotations

import math
import random

import networkx as nx
import numpy as np
import pytest
from scipy.stats import entropy

from app.network.measures.communities import communities, consistency, normalized_mutual_information, partition
from app.network.measures.results import MeasureError


def two_triangles() -> nx.Graph:
    return nx.Graph([(0, 1), (1, 2), (2, 0), (3, 4), (4, 5), (5, 3), (2, 3)])


@pytest.mark.parametrize("method,engine", [("leiden", "igraph"), ("louvain", "igraph"), ("louvain", "networkx")])
def test_two_triangles_on_paper(method, engine):
    G = two_triangles()
    G.add_node(9)
    result = communities(G, method=method, engine=engine, weight=None, runs=3, node_set="evidence")
    assert [(c.number, c.members, c.ties, c.weight) for c in result.communities] == [(1, [0, 1, 2], 3, 3.0), (2, [3, 4, 5], 3, 3.0)]
    # 7 ties; each side holds 3 of them and half of the degree: 2 (3/7 - (7/14)^2)
    assert result.modularity == pytest.approx(2 * (3 / 7 - 1 / 4))
    assert [(link.a, link.b, link.ties, link.weight) for link in result.links] == [(1, 2, 1, 1.0)]
    assert result.isolates == [9] and result.membership[9] is None and result.membership[4] == 2
    assert result.stability.mutual_information == 1.0 and set(result.stability.consistency.values()) == {1.0}
    assert result.stability.seeds == [0, 1, 2]
    assert "n = 7 persons (node set: evidence" in result.conventions and "seed 0" in result.conventions


@pytest.mark.parametrize("weight", [None, "weight"])
@pytest.mark.parametrize("method,engine", [("leiden", "igraph"), ("louvain", "igraph"), ("louvain", "networkx")])
def test_karate_communities_reach_high_modularity(method, engine, weight):
    G = nx.karate_club_graph()
    result = communities(G, method=method, engine=engine, weight=weight, runs=1)
    groups = [set(c.members) for c in result.communities]
    assert result.modularity == pytest.approx(nx.community.modularity(G, groups, weight=weight))
    assert result.modularity > 0.37  # compared by modularity, never by identical partitions
    assert sorted(v for c in result.communities for v in c.members) == list(range(34))
    assert result.stability is None


def test_same_slice_and_seed_give_the_same_answer_whatever_the_insertion_order():
    G = nx.karate_club_graph()
    edges = list(G.edges(data=True))
    random.Random(2).shuffle(edges)
    shuffled = nx.Graph()
    shuffled.add_nodes_from(random.Random(3).sample(list(G), len(G)))
    shuffled.add_edges_from(edges)
    for method, engine in (("leiden", "igraph"), ("louvain", "igraph"), ("louvain", "networkx")):
        first = communities(G, method=method, engine=engine, seed=5, runs=4)
        again = communities(shuffled, method=method, engine=engine, seed=5, runs=4)
        assert again.communities == first.communities and again.modularity == first.modularity
        assert again.stability == first.stability


def test_stability_tells_clear_structure_from_ambiguous_structure():
    clear = nx.disjoint_union(nx.complete_graph(6), nx.complete_graph(6))
    clear.add_edge(0, 6)
    stable = communities(clear).stability
    assert stable.mutual_information == 1.0 and min(stable.consistency.values()) == 1.0
    vague = communities(nx.gnp_random_graph(80, 0.08, seed=4)).stability
    assert len(vague.seeds) == 10
    assert 0 < vague.lowest_mutual_information <= vague.mutual_information < 1
    assert 0 < min(vague.consistency.values()) < 1
    assert "Stability over 10 runs" in vague.statement


def test_normalized_mutual_information_on_paper_and_against_scipy_entropy():
    a = {1: 0, 2: 0, 3: 0, 4: 1, 5: 1, 6: 1}
    b = {1: 0, 2: 0, 3: 1, 4: 1, 5: 2, 6: 2}
    # H(A) = ln 2, H(B) = ln 3, I(A; B) = (2/3) ln 2, so NMI = (4/3) ln 2 / ln 6
    assert normalized_mutual_information(a, b) == pytest.approx(4 / 3 * math.log(2) / math.log(6))
    rng = random.Random(9)
    for _ in range(20):
        nodes = range(rng.randint(5, 60))
        x = {v: rng.randint(0, 4) for v in nodes}
        y = {v: rng.randint(0, 3) if rng.random() < 0.5 else x[v] for v in nodes}
        hx = entropy(np.bincount(list(x.values())))
        hy = entropy(np.bincount(list(y.values())))
        hxy = entropy(np.unique([10 * x[v] + y[v] for v in nodes], return_counts=True)[1])
        expected = 2 * (hx + hy - hxy) / (hx + hy) if hx + hy else 1.0
        assert normalized_mutual_information(x, y) == pytest.approx(expected, abs=1e-12)
    assert normalized_mutual_information({1: "a", 2: "a"}, {1: 5, 2: 5}) == 1.0
    with pytest.raises(ValueError):
        normalized_mutual_information({1: 0}, {2: 0})


def test_consistency_on_paper():
    runs = [{1: 0, 2: 0, 3: 0, 4: 1}, {1: 0, 2: 0, 3: 1, 4: 1}, {1: 0, 2: 0, 3: 1, 4: 1}]
    # node 1: {1,2,3} vs {1,2}: 2/3, twice; {1,2} vs {1,2}: 1 -> (2/3 + 2/3 + 1)/3
    # node 3: {1,2,3} vs {3,4}: 1/4, twice; {3,4} vs {3,4}: 1
    # node 4: {4} vs {3,4}: 1/2, twice; then 1
    assert consistency(runs) == pytest.approx({1: 7 / 9, 2: 7 / 9, 3: 1 / 2, 4: 2 / 3})


def test_directed_slices_loops_and_bad_options():
    D = nx.DiGraph([(0, 1), (1, 2), (2, 0), (3, 4), (4, 5), (5, 3), (2, 3), (1, 1)])
    result = communities(D, runs=2)
    assert [c.members for c in result.communities] == [[0, 1, 2], [3, 4, 5]]
    assert "undirected view" in result.conventions
    kept = communities(D, runs=1, loops="keep")
    assert kept.communities[0].ties == 4  # the loop lies inside its person's community
    assert communities(nx.empty_graph(3)).modularity is None
    with pytest.raises(MeasureError):
        communities(D, method="spectral")
    with pytest.raises(MeasureError) as error:
        partition(nx.path_graph(3), method="leiden", engine="networkx")
    assert error.value.parameter == "engine"
    with pytest.raises(MeasureError):
        communities(D, runs=0)
