"""The conventions every measure follows, in code and in the sentences shown beside the numbers.

- Self-loops are left out unless the caller passes ``loops="keep"`` (the slice's ``loops``).
- Undirected measures use the undirected view of a directed slice, where two opposite arcs are
  one tie whose weight is the larger of the two (never the sum: an undirected kind is recorded
  on both arcs, and a sum would count its documents twice).
- Weighted paths use distance = 1/weight, counted in whole units of 1/720720 so that equal
  paths tie exactly, whatever the library and the order of summation (see ``distance_units``).
- n is the number of nodes of the graph, which the slice's node set decides.
"""

from __future__ import annotations

import math
from typing import Any

import networkx as nx
import numpy as np

from app.network.measures.arcs import ArcGraph
from app.network.measures.results import MeasureError, node_key

__all__ = [
    "DISTANCE",
    "DISTANCE_RULE",
    "DISTANCE_SCALE",
    "LOOPS",
    "NODE_SETS",
    "WEIGHT",
    "check_loops",
    "direction_sentence",
    "distance_units",
    "induced",
    "loops_sentence",
    "population_sentence",
    "undirected_view",
    "with_distances",
    "working_graph",
]

LOOPS = ("drop", "keep")
WEIGHT = "weight"
"""Name of the weight attribute in working graphs."""
DISTANCE = "distance"
"""Name of the path length attribute (whole units) in working graphs."""
DISTANCE_SCALE = 720_720
"""Units per unit of distance: 720720 = lcm(1, ..., 16), so 1/w is a whole number of units for
every whole weight from 1 to 16 (and for many more: 18, 20, 21, 22, 24, 26, 28, 30, ...)."""

NODE_SETS = {
    "evidence": "every person with at least one attestation of any kind in the slice",
    "ties": "only persons with at least one tie in the slice",
    "all": "every person in the dataset",
}

DISTANCE_RULE = (
    "Weighted paths: a tie's length is 1/weight, counted in whole units of 1/720720 "
    "(720720 is divisible by every whole number up to 16, so those weights give exact lengths; "
    "other weights are rounded to the nearest unit, less than 0.01% off for weights up to 100); "
    "two paths are equally short when their lengths are the same number of units, "
    "so a tie of two paths 1/2 + 1/2 and 1/3 + 1/3 + 1/3 is an exact tie."
)


def check_loops(loops: str) -> str:
    """Return ``loops`` if it is ``drop`` or ``keep``; raise MeasureError otherwise."""
    if loops not in LOOPS:
        raise MeasureError("loops", loops, "one of " + ", ".join(LOOPS))
    return loops


def working_graph(
    G: nx.Graph, *, weight: str | None = None, loops: str = "drop", undirected: bool = False, sort_edges: bool = False
) -> nx.Graph:
    """Return a light copy of G with only a ``weight`` attribute on its edges.

    Nodes come in a fixed order (ids ascending) so that anything that depends on node order,
    such as sampled path sources, gives the same answer however the graph was built; with
    ``sort_edges`` the edges too (community detection visits them in order). ``weight=None``
    gives every tie weight 1. With ``undirected``, a DiGraph becomes its undirected view, two
    opposite arcs one tie of the larger weight. Self-loops are dropped unless ``loops="keep"``.
    """
    check_loops(loops)
    if isinstance(G, ArcGraph):
        if weight is not None:
            _checked_weights(G.weight)
        order = sorted(range(len(G)), key=lambda i: node_key(G.nodes[i]))
        return G.working(weighted=weight is not None, loops=loops, undirected=undirected,
                         order=None if order == list(range(len(G))) else order)
    as_undirected = undirected or not G.is_directed()
    H: nx.Graph = nx.Graph() if as_undirected else nx.DiGraph()
    H.add_nodes_from(sorted(G, key=node_key))
    edges = G.edges(data=True)
    if sort_edges:
        edges = sorted(edges, key=lambda e: (node_key(e[0]), node_key(e[1])))
    for u, v, data in edges:
        if u == v and loops == "drop":
            continue
        w = _checked_weight(data.get(weight, 1.0) if weight is not None else 1.0)
        if as_undirected and H.has_edge(u, v):
            w = max(w, H[u][v][WEIGHT])
        H.add_edge(u, v, **{WEIGHT: w})
    return H


def undirected_view(G: nx.Graph) -> nx.Graph:
    """Return G itself if undirected, else a Graph in which two opposite arcs become one tie.

    The tie keeps the union of the arcs' attestation ids, relation ids and kinds; its weight and
    its ``documents`` are the larger of the two arcs' (a lower bound of the documents behind
    both, unless the edges carry ``document_ids``, whose union is then exact).
    """
    if not G.is_directed():
        return G
    H = nx.Graph()
    H.add_nodes_from(G)
    for u, v, data in G.edges(data=True):
        if H.has_edge(u, v):
            H[u][v].update(_merge_arcs(H[u][v], data))
        else:
            H.add_edge(u, v, **data)
    return H


def induced(H: nx.Graph, keep: set) -> nx.Graph:
    """Return the subgraph of H on the nodes in ``keep``, as a new graph in H's node and edge order.

    networkx's subgraph views are slow to iterate and, for small node sets, follow the order of
    a Python set; a seeded community search must see the same order on every run.
    """
    S = H.__class__()
    S.add_nodes_from(v for v in H if v in keep)
    S.add_edges_from((u, v, data) for u, v, data in H.edges(data=True) if u in keep and v in keep)
    return S


def distance_units(weight: float) -> int:
    """Return the length of a tie of this weight in whole units of 1/720720 (at least 1).

    Examples
    --------
    >>> distance_units(2) + distance_units(2) == distance_units(3) * 3
    True
    >>> distance_units(2) + distance_units(2) == distance_units(2) + distance_units(3) + distance_units(6)
    True
    """
    return max(1, round(DISTANCE_SCALE / weight))


def with_distances(H: nx.Graph) -> nx.Graph:
    """Set ``distance`` (whole units of 1/weight) on every edge of a working graph; return it."""
    if isinstance(H, ArcGraph):
        return H.with_(source=H.source, target=H.target, weight=H.weight,
                       distance=np.maximum(1, np.rint(DISTANCE_SCALE / H.weight)).astype(np.int64))
    for _, _, data in H.edges(data=True):
        data[DISTANCE] = distance_units(data[WEIGHT])
    return H


def population_sentence(n: int, node_set: str | None) -> str:
    """Return the sentence that says what n is."""
    persons = "person" if n == 1 else "persons"
    if node_set is None:
        return f"n = {n} {persons} (every node of the graph)."
    return f"n = {n} {persons} (node set: {node_set}, {NODE_SETS.get(node_set, node_set)})."


def loops_sentence(loops: str, kept_effect: str = "") -> str:
    """Return the sentence about self-loops; ``kept_effect`` says what a kept loop changes."""
    if check_loops(loops) == "drop":
        return "Self-loops are left out (loops=drop)."
    return "Self-loops are kept (loops=keep)" + (f": {kept_effect}." if kept_effect else ".")


def direction_sentence(G: nx.Graph, *, undirected_measure: bool) -> str:
    """Return the sentence about direction for a measure on G."""
    if not G.is_directed():
        return "The slice is undirected."
    if undirected_measure:
        return ("Computed on the undirected view of the directed slice: two opposite arcs are one tie, "
                "whose weight is the larger of the two.")
    return "Computed along the recorded direction of the ties."


def _checked_weight(w: Any) -> float:
    try:
        value = float(w)
    except (TypeError, ValueError):
        raise MeasureError("weight", w, "a positive number on every tie") from None
    if not math.isfinite(value) or value <= 0:
        raise MeasureError("weight", w, "a positive number on every tie")
    return value


def _checked_weights(weights: np.ndarray) -> None:
    bad = ~(np.isfinite(weights) & (weights > 0))
    if bad.any():
        raise MeasureError("weight", float(weights[bad][0]), "a positive number on every tie")


def _merge_arcs(a: dict[str, Any], b: dict[str, Any]) -> dict[str, Any]:
    merged: dict[str, Any] = {}
    for key in ("attestation_ids", "relation_ids", "kinds", "document_ids"):
        if key in a or key in b:
            merged[key] = sorted(set(a.get(key, ())) | set(b.get(key, ())), key=node_key)
    for key in ("weight", "documents", "attestations"):
        if key in a or key in b:
            merged[key] = max(a.get(key, 0), b.get(key, 0))
    if "attestation_ids" in merged:
        merged["attestations"] = len(merged["attestation_ids"])
    if "document_ids" in merged:
        merged["documents"] = len(merged["document_ids"])
    return merged

