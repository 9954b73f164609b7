"""Cut points and bridges: the persons and ties whose loss would split the network.

A cut point (articulation point) is a person whose removal leaves their component in several
pieces; a bridge is a tie whose removal does. Both are read on the undirected view without
self-loops. For each the sizes of the pieces are given, since a cut point that detaches one
person matters less than one that halves the network; each bridge carries its evidence (the
attestation and relation ids) and a flag when a single document attests it, the case where one
lost or misread letter would change the picture.
"""

from __future__ import annotations

from collections.abc import Callable, Hashable
from dataclasses import dataclass

import networkx as nx

from app.network.measures import kernels
from app.network.measures.arcs import ArcGraph
from app.network.measures.conventions import direction_sentence, population_sentence, undirected_view, working_graph
from app.network.measures.results import node_key

__all__ = ["Bridge", "CutPoint", "CutsResult", "TieRecord", "cuts"]


@dataclass(frozen=True)
class CutPoint:
    """A person whose removal splits their component."""

    node: Hashable
    """The person."""
    pieces: list[int]
    """Sizes of the pieces its removal leaves of its component, largest first."""
    component_size: int
    """Size of its component (the person included)."""

    @property
    def cut_off(self) -> int:
        """Persons separated from the largest remaining piece."""
        return sum(self.pieces) - self.pieces[0]


@dataclass(frozen=True)
class Bridge:
    """A tie whose removal splits its component, with the evidence behind it."""

    u: Hashable
    """One end (the lower id)."""
    v: Hashable
    """The other end."""
    sides: tuple[int, int]
    """Persons on u's side and on v's side once the tie is gone."""
    weight: float
    """The tie's weight in the slice."""
    documents: int | None
    """Distinct documents attesting it (None when the graph does not say)."""
    attestations: int | None
    """Attestations of it (None when the graph does not say)."""
    attestation_ids: list[int]
    """The attestations, to link them."""
    relation_ids: list[int]
    """The relations (one per kind) between the two persons."""
    single_document: bool
    """True when one document alone attests the tie."""


@dataclass(frozen=True)
class CutsResult:
    """The cut points and bridges of a graph."""

    cut_points: list[CutPoint]
    """Cut points, those that separate most persons first."""
    bridges: list[Bridge]
    """Bridges, those that separate most persons first."""
    conventions: str
    """Plain sentences: node set and n, the view used, orderings."""


def cuts(G: nx.Graph | ArcGraph, *, node_set: str | None = None,
         evidence: Callable[[Hashable, Hashable], TieRecord] | None = None) -> CutsResult:
    """Return the cut points of G with the pieces they leave, and its bridges with their evidence.

    G is a networkx graph or an ArcGraph; igraph finds both on the undirected view without
    loops (``kernels.cut_structure``). ``evidence(u, v)`` gives what the slice holds about the
    tie between two persons; without it, a networkx graph's edge data is read (an ArcGraph then
    gives weights only).

    References
    ----------
    Hopcroft, J., & Tarjan, R. (1973). Algorithm 447: efficient algorithms for graph
    manipulation. Communications of the ACM 16(6), 372-378.

    Examples
    --------
    >>> G = nx.Graph([(1, 2), (2, 3), (3, 1), (3, 4), (4, 5), (5, 6), (6, 4)])
    >>> result = cuts(G)
    >>> [(c.node, c.pieces) for c in result.cut_points]
    [(3, [3, 2]), (4, [3, 2])]
    >>> [(b.u, b.v, b.sides) for b in result.bridges]
    [(3, 4, (3, 3))]
    """
    arcs = G if isinstance(G, ArcGraph) else ArcGraph.from_networkx(G)
    H = working_graph(arcs, loops="drop", undirected=True)
    found_cut_points, found_bridges = kernels.cut_structure(H)
    nodes = H.nodes
    cut_points = [CutPoint(node=nodes[v], pieces=pieces, component_size=size) for v, pieces, size in found_cut_points]
    if evidence is None:
        evidence = _graph_evidence(G) if not isinstance(G, ArcGraph) else _weight_only(G)
    exact = not G.is_directed() or isinstance(G, ArcGraph) or _has_document_ids(G)
    bridges: list[Bridge] = []
    for a, b, a_side, b_side in found_bridges:
        u, v, sides = nodes[a], nodes[b], (a_side, b_side)
        if node_key(v) < node_key(u):
            u, v, sides = v, u, (b_side, a_side)
        record = evidence(u, v)
        bridges.append(Bridge(
            u=u, v=v, sides=sides, weight=record.weight, documents=record.documents, attestations=record.attestations,
            attestation_ids=list(record.attestation_ids), relation_ids=list(record.relation_ids),
            single_document=record.single_document,
        ))
    cut_points.sort(key=lambda c: (-c.cut_off, node_key(c.node)))
    bridges.sort(key=lambda b: (-min(b.sides), node_key(b.u), node_key(b.v)))
    conventions = " ".join([
        population_sentence(len(H), node_set),
        direction_sentence(G, undirected_measure=True),
        "Self-loops are left out: they never connect anyone.",
        "A cut point's pieces are the parts its removal leaves of its own component; cut points and bridges "
        "that separate most persons from the largest remaining piece come first (igraph).",
        "A bridge attested by a single document is flagged: one lost or misread document would change the picture"
        + ("." if exact else " (on a directed slice a tie recorded both ways is flagged only when the two directions "
                             "together hold one document; direction=undirected counts exactly)."),
    ])
    if G.is_directed():
        conventions += (" On a directed slice a bridge's documents are those of every relation between the two persons, "
                        "in either direction, each document counted once." if exact else
                        " On a directed slice a bridge's documents are counted per arc and the larger count is given: "
                        "use direction=undirected for the exact number.")
    return CutsResult(cut_points=cut_points, bridges=bridges, conventions=conventions)


@dataclass(frozen=True)
class TieRecord:
    """What the slice holds about the tie between two persons (both directions together)."""

    weight: float
    documents: int | None
    attestations: int | None
    attestation_ids: list[int]
    relation_ids: list[int]
    single_document: bool


def _has_document_ids(G: nx.Graph) -> bool:
    return all("document_ids" in data for _, _, data in G.edges(data=True))


def _graph_evidence(G: nx.Graph) -> Callable[[Hashable, Hashable], TieRecord]:
    """Read a bridge's evidence off a networkx graph's edges (the two arcs merged on a directed one)."""
    full = undirected_view(G)

    def record(u: Hashable, v: Hashable) -> TieRecord:
        data = full[u][v]
        documents = data.get("documents")
        single = documents == 1
        if G.is_directed() and "document_ids" not in data:
            # Without document ids the merged count is the larger arc's, a lower bound: flag only
            # when both arcs together hold one document (direction=undirected counts exactly).
            arcs = [G[a][b].get("documents", 0) for a, b in ((u, v), (v, u)) if G.has_edge(a, b)]
            single = sum(arcs) == 1
        return TieRecord(float(data.get("weight", 1.0)), documents, data.get("attestations"),
                         list(data.get("attestation_ids", [])), list(data.get("relation_ids", [])), single)

    return record


def _weight_only(G: ArcGraph) -> Callable[[Hashable, Hashable], TieRecord]:
    """Read only a bridge's weight (the larger of two opposite arcs) off an ArcGraph."""
    H = G.working(weighted=True, loops="drop", undirected=True)
    position = {node: i for i, node in enumerate(H.nodes)}
    pair = {(min(int(a), int(b)), max(int(a), int(b))): float(w) for a, b, w in zip(H.source, H.target, H.weight)}

    def record(u: Hashable, v: Hashable) -> TieRecord:
        a, b = sorted((position[u], position[v]))
        return TieRecord(pair[(a, b)], None, None, [], [], False)

    return record
