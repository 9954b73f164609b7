"""The fast paths of large slices against networkx: igraph's transitivity and clustering, the
sampled path lengths, and the graph built from per-relation counts."""

from __future__ import annotations

import networkx as nx
import pytest

from app.network.measures import kernels
from app.network.measures.summary import summarize
from tests.evidence_world import world, world_file  # noqa: F401 - fixtures


@pytest.mark.parametrize("G", [
    nx.karate_club_graph(),  # Zachary 1977, as shipped with networkx
    nx.florentine_families_graph(),  # Padgett & Ansell 1993, as shipped with networkx
    nx.disjoint_union(nx.path_graph(4), nx.star_graph(3)),
    nx.gnm_random_graph(300, 900, seed=3),
    nx.empty_graph(3),
])
def test_igraph_transitivity_and_clustering_equal_networkx(G: nx.Graph):
    transitivity, clustering = kernels.transitivity(G)
    assert transitivity == pytest.approx(nx.transitivity(G), abs=1e-12)
    assert clustering == pytest.approx(nx.average_clustering(G), abs=1e-12)


def test_sampled_path_lengths_bound_the_diameter_and_estimate_the_average():
    G = nx.connected_watts_strogatz_graph(2000, 6, 0.1, seed=5)
    exact_diameter, exact_average = nx.diameter(G), nx.average_shortest_path_length(G)
    diameter, average = kernels.sampled_path_lengths(G, sources=100, seed=0)
    assert diameter <= exact_diameter and diameter >= exact_diameter - 1
    assert average == pytest.approx(exact_average, rel=0.03)
    everyone = kernels.sampled_path_lengths(G, sources=len(G), seed=0)
    assert everyone == (exact_diameter, pytest.approx(exact_average, rel=1e-12))


def test_the_summary_says_when_path_lengths_are_estimated():
    G = nx.connected_watts_strogatz_graph(500, 4, 0.1, seed=1)
    exact = summarize(G)
    sampled = summarize(G, exact_paths=False)
    assert exact.path_sources is None and "estimated" not in exact.conventions
    assert sampled.path_sources == 200 and "estimated from the distances of 200 persons" in sampled.conventions
    assert sampled.diameter <= exact.diameter


@pytest.mark.parametrize("query", [
    {}, {"direction": "undirected"}, {"direction": "reciprocal"}, {"loops": "keep", "weight": "attestations"},
    {"nodes": "all", "weight": "none"}, {"certainty": "certain"}, {"nodes": "ties", "loops": "keep"},
    {"min_collections": "2"}, {"direction": "reciprocal", "loops": "keep", "nodes": "ties"}, {"same_as": "merge"},
])
def test_the_graph_from_counts_equals_the_graph_from_every_attestation(world, query):  # noqa: F811
    from app.network.results import SliceGraph
    from app.network.slice import Slice, graph_from_evidence, relation_evidence, resolve_slice

    with world.read() as session:
        slice_ = Slice.from_query({k: [v] for k, v in query.items()})
        resolved = resolve_slice(session, slice_)
        full = graph_from_evidence(session, resolved, relation_evidence(session, resolved))
        graph = SliceGraph.build(session, slice_)
        light = graph.G
    assert set(light) == set(full) and set(light.edges) == set(full.edges) and light.is_directed() == full.is_directed()
    assert full.number_of_edges() > 0 or query == {"min_collections": "2"}
    arcs = graph.arcs  # the arrays the centralities read hold the same ties and weights
    ends = (lambda u, v: (u, v)) if full.is_directed() else (lambda u, v: (min(u, v), max(u, v)))
    assert sorted((*ends(arcs.nodes[i], arcs.nodes[j]), w) for i, j, w in zip(arcs.source, arcs.target, arcs.weight)) == sorted(
        (*ends(u, v), w) for u, v, w in full.edges(data="weight"))
    for u, v, data in full.edges(data=True):
        got = light[u][v]
        assert (got["weight"], got["attestations"], got["documents"], got["relation_ids"], got["kinds"]) == (
            data["weight"], data["attestations"], data["documents"], data["relation_ids"], data["kinds"])


@pytest.mark.parametrize("query", [
    {}, {"direction": "undirected"}, {"direction": "reciprocal"}, {"loops": "keep", "weight": "attestations"},
    {"nodes": "all"}, {"min_collections": "2"},
])
def test_the_summary_from_arrays_equals_the_summary_of_the_networkx_graph(world, query):  # noqa: F811
    """The summary page's figures from the slice's arrays against summarize() on the graph of every attestation."""
    from app.network.results import SliceGraph, compute_result
    from app.network.slice import Slice, collection_counts, graph_from_evidence, relation_evidence, resolve_slice
    from app.store.network_labels import list_collection_names

    with world.read() as session:
        slice_ = Slice.from_query({k: [v] for k, v in query.items()})
        resolved = resolve_slice(session, slice_)
        full = graph_from_evidence(session, resolved, relation_evidence(session, resolved))
        payload = compute_result(session, SliceGraph.build(session, slice_), measure="summary", options={})
        in_graph = {r for _, _, ids in full.edges(data="relation_ids") for r in ids}
        counts = collection_counts(session, resolved, in_graph)
        names = list_collection_names(session=session, ids=[c for c in counts if c is not None])
    reference = summarize(full)
    for name in ("persons", "ties", "loops", "directed", "components", "largest_component", "diameter"):
        assert payload[name] == getattr(reference, name), name
    for name in ("density", "reciprocity", "transitivity", "average_clustering", "largest_share", "average_path_length"):
        assert payload[name] == pytest.approx(getattr(reference, name), abs=1e-12), name
    assert payload["degree_distribution"] == [[d, p] for d, p in reference.degree_distribution.items()]
    assert payload["attestations"] == (reference.attestations or 0)  # graph_from_evidence carries the attestation ids
    assert dict(map(tuple, payload["collections"])) == {names[c]: k for c, k in counts.items() if c is not None}
    assert payload["printed_attestations"] == counts.get(None, 0)
