"""Measures on arrays of ties (``ArcGraph``) give what the same functions give on the networkx graph.

networkx (3.6) is the reference: every centrality and the components are computed on a networkx
graph and on the same graph as arrays, and must agree (values, raw figures, reasons, ranks and
the conventions stated beside them). Graph shapes from tests/test_measures_kernels.py, plus
Zachary's karate club (networkx ``karate_club_graph``; Zachary 1977) and Padgett's Florentine
families (networkx ``florentine_families_graph``; Padgett & Ansell 1993).
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from app.network.measures import MEASURES, components, compute
from app.network.measures.arcs import ArcGraph, PowerIterationFailed, eigenvector, pagerank
from app.network.measures.centrality import DIRECTED_MEASURES
from tests.test_measures_kernels import SHAPES


def graphs() -> dict[str, nx.Graph]:
    found = dict(SHAPES)
    found["florentine"] = nx.convert_node_labels_to_integers(nx.florentine_families_graph(), ordering="sorted")
    found["path"] = nx.path_graph(4)
    found["single"] = nx.empty_graph(1)
    found["empty"] = nx.empty_graph(0)
    shuffled = nx.DiGraph()  # nodes met in no particular order, both arcs of some pairs
    shuffled.add_weighted_edges_from([(9, 2, 3.0), (2, 9, 5.0), (4, 2, 1.0), (7, 7, 2.0), (2, 4, 2.0), (11, 4, 1.0)])
    shuffled.add_node(1)
    found["shuffled"] = shuffled
    return found


GRAPHS = graphs()


def agree(a, b) -> None:  # noqa: ANN001
    assert a.conventions == b.conventions
    assert a.reasons == b.reasons
    assert set(a.values) == set(b.values)
    for node in a.values:
        for ours, reference in ((b.values[node], a.values[node]), (b.raw[node], a.raw[node])):
            if reference is None:
                assert ours is None, node
            else:
                assert ours == pytest.approx(reference, rel=1e-9, abs=1e-12), node
    assert [(r.node, r.rank) for r in a.rows()] == [(r.node, r.rank) for r in b.rows()]


@pytest.mark.parametrize("loops", ["drop", "keep"])
@pytest.mark.parametrize("name", list(GRAPHS))
def test_every_centrality_agrees_on_arrays(name, loops):
    G = GRAPHS[name]
    A = ArcGraph.from_networkx(G)
    for measure in MEASURES:
        if measure in DIRECTED_MEASURES and not G.is_directed():
            continue
        options = {"loops": loops, "node_set": "evidence"}
        if measure in ("betweenness", "weighted_betweenness") and len(G) > 10:
            agree(compute(G, measure, samples=8, seed=3, **options), compute(A, measure, samples=8, seed=3, **options))
        agree(compute(G, measure, **options), compute(A, measure, **options))


@pytest.mark.parametrize("loops", ["drop", "keep"])
@pytest.mark.parametrize("name", list(GRAPHS))
def test_components_agree_on_arrays(name, loops):
    G = GRAPHS[name]
    reference, ours = components(G, loops=loops), components(ArcGraph.from_networkx(G), loops=loops)
    assert ours == reference


def test_the_power_iterations_are_networkx_step_for_step():
    """Same stopping step: with one step fewer allowed than networkx needs, both fail."""
    G = nx.karate_club_graph()
    A = ArcGraph.from_networkx(G)
    reference = nx.eigenvector_centrality(G, weight="weight", max_iter=1000)
    ours = eigenvector(A)
    assert ours == pytest.approx(reference, rel=1e-12)
    steps = next(k for k in range(1, 1000) if _converges(lambda k=k: nx.eigenvector_centrality(G, weight="weight", max_iter=k)))
    with pytest.raises(PowerIterationFailed):
        eigenvector(A, max_iter=steps - 1)
    assert eigenvector(A, max_iter=steps) == pytest.approx(reference, rel=1e-12)
    D = SHAPES["directed_looped"]
    assert pagerank(ArcGraph.from_networkx(D), tol=1e-10, max_iter=1000) == pytest.approx(
        nx.pagerank(D, weight="weight", tol=1e-10, max_iter=1000), rel=1e-12)


def test_the_undirected_view_keeps_the_larger_arc():
    """Two opposite arcs of weights 3 and 5 become one tie of weight 5 (DEVELOPERS.md, "Undirected view")."""
    A = ArcGraph.from_networkx(GRAPHS["shuffled"])
    H = A.working(weighted=True, loops="drop", undirected=True)
    ties = {(min(A.nodes[u], A.nodes[v]), max(A.nodes[u], A.nodes[v])): w
            for u, v, w in zip(H.source.tolist(), H.target.tolist(), H.weight.tolist())}
    assert ties == {(2, 9): 5.0, (2, 4): 2.0, (4, 11): 1.0}
    assert not H.is_directed() and np.all(H.source != H.target)


def _converges(call) -> bool:  # noqa: ANN001
    try:
        call()
    except nx.PowerIterationFailedConvergence:
        return False
    return True
