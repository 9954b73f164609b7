"""Cut points and bridges: the persons and ties whose loss would split the network.

A cut point (articulation point) is a person whose removal leaves their component in several
pieces; a bridge is a tie whose removal does. Both are read on the undirected view without
self-loops. For each the sizes of the pieces are given, since a cut point that detaches one
person matters less than one that halves the network; each bridge carries its evidence (the
attestation and relation ids) and a flag when a single document attests it, the case where one
lost or misread letter would change the picture.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Hashable
from dataclasses import dataclass

import networkx as nx

from app.network.measures.conventions import direction_sentence, population_sentence, undirected_view, working_graph
from app.network.measures.results import node_key

__all__ = ["Bridge", "CutPoint", "CutsResult", "cuts"]


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


def cuts(G: nx.Graph, *, node_set: str | None = None) -> CutsResult:
    """Return the cut points of G with the pieces they leave, and its bridges with their evidence.

    One depth-first search finds both and sizes the pieces (Hopcroft and Tarjan): a child
    subtree whose back edges climb no higher than its parent is cut off by the parent; if they
    do not reach the parent at all, the tree edge to it is a bridge.

    References
    ----------
    Hopcroft, J., & Tarjan, R. (1973). Algorithm 447: efficient algorithms for graph
    manipulation. Communications of the ACM 16(6), 372-378.
    Tarjan, R. (1972). Depth-first search and linear graph algorithms. SIAM Journal on
    Computing 1(2), 146-160.

    Examples
    --------
    >>> G = nx.Graph([(1, 2), (2, 3), (3, 1), (3, 4), (4, 5), (5, 6), (6, 4)])
    >>> result = cuts(G)
    >>> [(c.node, c.pieces) for c in result.cut_points]
    [(3, [3, 2]), (4, [3, 2])]
    >>> [(b.u, b.v, b.sides) for b in result.bridges]
    [(3, 4, (3, 3))]
    """
    H = working_graph(G, loops="drop", undirected=True)
    full = undirected_view(G)
    found_cut_points, found_bridges = _search(H)
    cut_points = [CutPoint(node=node, pieces=pieces, component_size=size) for node, pieces, size in found_cut_points]
    bridges: list[Bridge] = []
    for parent, child, parent_side, child_side in found_bridges:
        u, v, sides = (parent, child, (parent_side, child_side))
        if node_key(v) < node_key(u):
            u, v, sides = v, u, (child_side, parent_side)
        data = full[u][v]
        documents = data.get("documents")
        single = documents == 1
        if G.is_directed() and "document_ids" not in data:
            # Without document ids the merged count is the larger arc's, a lower bound: flag only
            # when both arcs together hold one document (direction=undirected counts exactly).
            arcs = [G[a][b].get("documents", 0) for a, b in ((u, v), (v, u)) if G.has_edge(a, b)]
            single = sum(arcs) == 1
        bridges.append(Bridge(
            u=u, v=v, sides=sides, weight=float(data.get("weight", 1.0)), documents=documents,
            attestations=data.get("attestations"), attestation_ids=list(data.get("attestation_ids", [])),
            relation_ids=list(data.get("relation_ids", [])), single_document=single,
        ))
    cut_points.sort(key=lambda c: (-c.cut_off, node_key(c.node)))
    bridges.sort(key=lambda b: (-min(b.sides), node_key(b.u), node_key(b.v)))
    conventions = " ".join([
        population_sentence(len(H), node_set),
        direction_sentence(G, undirected_measure=True),
        "Self-loops are left out: they never connect anyone.",
        "A cut point's pieces are the parts its removal leaves of its own component; cut points and bridges "
        "that separate most persons from the largest remaining piece come first.",
        "A bridge attested by a single document is flagged: one lost or misread document would change the picture"
        + (" (on a directed slice a tie recorded both ways is flagged only when the two directions together hold one "
           "document; direction=undirected counts exactly)." if G.is_directed() else "."),
    ])
    if G.is_directed():
        conventions += (" On a directed slice a bridge's documents are counted per arc and the larger count is given: "
                        "use direction=undirected for the exact number.")
    return CutsResult(cut_points=cut_points, bridges=bridges, conventions=conventions)


def _search(
    H: nx.Graph,
) -> tuple[list[tuple[Hashable, list[int], int]], list[tuple[Hashable, Hashable, int, int]]]:
    """Return (cut point, piece sizes, component size) and (parent, child, parent's side, child's side).

    Iterative depth-first search, so that long chains of persons do not exhaust Python's stack.
    """
    cut_points: list[tuple[Hashable, list[int], int]] = []
    bridges: list[tuple[Hashable, Hashable, int, int]] = []
    discovered: dict[Hashable, int] = {}
    low: dict[Hashable, int] = {}
    below: dict[Hashable, int] = {}  # persons in the subtree, the person included
    clock = 0
    for root in H:
        if root in discovered:
            continue
        discovered[root] = low[root] = clock
        clock += 1
        below[root] = 1
        separated: dict[Hashable, list[int]] = defaultdict(list)
        tree_bridges: list[tuple[Hashable, Hashable]] = []
        size = 1
        stack = [(root, None, iter(H[root]))]
        while stack:
            v, parent, neighbours = stack[-1]
            for w in neighbours:
                if w == parent:
                    continue
                if w in discovered:
                    low[v] = min(low[v], discovered[w])
                    continue
                discovered[w] = low[w] = clock
                clock += 1
                below[w] = 1
                size += 1
                stack.append((w, v, iter(H[w])))
                break
            else:
                stack.pop()
                if parent is None:
                    continue
                low[parent] = min(low[parent], low[v])
                below[parent] += below[v]
                if low[v] >= discovered[parent]:
                    separated[parent].append(below[v])
                if low[v] > discovered[parent]:
                    tree_bridges.append((parent, v))
        for v, sizes in separated.items():
            if v == root:
                if len(sizes) >= 2:
                    cut_points.append((v, sorted(sizes, reverse=True), size))
            else:
                cut_points.append((v, sorted([*sizes, size - 1 - sum(sizes)], reverse=True), size))
        bridges.extend((parent, child, size - below[child], below[child]) for parent, child in tree_bridges)
    return cut_points, bridges
