"""A slice's graph as arrays of ties, for the measures of large slices.

On a slice of 20,000 persons and 100,000 ties, copying graphs in Python (the slice's networkx
graph, its working copy, an igraph copy for each kernel) costs more than the measures themselves.
An :class:`ArcGraph` holds the same graph as arrays: the persons in a fixed order (ids ascending)
and, for each tie, the positions of its two ends and its weight. It is built straight from the
per-relation counts made in SQL (``app.network.results.SliceGraph``), or from a networkx graph
(``from_networkx``, which the tests use to hold every measure to networkx's figures on the same
graph). The measure functions of ``centrality`` and ``components`` accept either kind of graph;
``conventions.working_graph`` gives an ArcGraph's working view as another ArcGraph, and here are
the array forms of what those functions ask of a networkx graph: degrees, the persons no path
reaches, the components, and the power iterations of eigenvector centrality and PageRank
(ported from networkx 3.6, step for step, so that they stop at the same iteration).
"""

from __future__ import annotations

import math
from collections.abc import Hashable, Iterator, Sequence
from dataclasses import dataclass

import networkx as nx
import numpy as np
from scipy import sparse
from scipy.sparse import csgraph

__all__ = ["ArcGraph", "PowerIterationFailed", "component_labels", "degrees", "eigenvector", "pagerank", "unreached"]


class PowerIterationFailed(Exception):
    """The power iteration did not converge within its steps (networkx's PowerIterationFailedConvergence)."""


@dataclass(frozen=True, eq=False)
class ArcGraph:
    """A graph as arrays: ``nodes[i]`` is person i; tie k joins ``source[k]`` and ``target[k]`` with ``weight[k]``.

    A directed graph holds each arc once; an undirected one each tie once (in either order).
    Self-loops are ties whose two ends are equal. ``distance`` holds path lengths once set
    (``conventions.with_distances``).

    Examples
    --------
    >>> A = ArcGraph.from_networkx(nx.path_graph(3))
    >>> len(A), A.is_directed(), A.number_of_edges(), list(A)
    (3, False, 2, [0, 1, 2])
    """

    nodes: list[Hashable]
    source: np.ndarray
    target: np.ndarray
    weight: np.ndarray
    directed: bool
    distance: np.ndarray | None = None

    @classmethod
    def from_arrays(cls, nodes: Sequence[Hashable], source: Sequence[int], target: Sequence[int],
                    weight: Sequence[float], *, directed: bool) -> ArcGraph:
        """Return the graph of these ties (positions into ``nodes``)."""
        return cls(list(nodes), np.asarray(source, dtype=np.int64), np.asarray(target, dtype=np.int64),
                   np.asarray(weight, dtype=float), directed)

    @classmethod
    def from_networkx(cls, G: nx.Graph, *, weight: str = "weight") -> ArcGraph:
        """Return G as arrays (its nodes in G's order; a tie without ``weight`` weighs 1)."""
        nodes = list(G)
        index = {node: i for i, node in enumerate(nodes)}
        edges = list(G.edges(data=weight, default=1.0))
        return cls.from_arrays(nodes, [index[u] for u, _, _ in edges], [index[v] for _, v, _ in edges],
                               [float(w) for _, _, w in edges], directed=G.is_directed())

    def __len__(self) -> int:
        return len(self.nodes)

    def __iter__(self) -> Iterator[Hashable]:
        return iter(self.nodes)

    def is_directed(self) -> bool:
        return self.directed

    def number_of_nodes(self) -> int:
        return len(self.nodes)

    def number_of_edges(self) -> int:
        return len(self.source)

    def with_(self, *, source: np.ndarray, target: np.ndarray, weight: np.ndarray, directed: bool | None = None,
              distance: np.ndarray | None = None) -> ArcGraph:
        return ArcGraph(self.nodes, source, target, weight, self.directed if directed is None else directed, distance)

    def working(self, *, weighted: bool, loops: str, undirected: bool, order: Sequence[int] | None = None) -> ArcGraph:
        """Return the working view (see ``conventions.working_graph``): loops dropped unless kept,
        every weight 1 unless ``weighted``, and with ``undirected`` two opposite arcs one tie of the
        larger weight. Persons come in ``order`` (positions) when given."""
        source, target = self.source, self.target
        weight = self.weight if weighted else np.ones(len(source))
        if loops == "drop":
            keep = source != target
            source, target, weight = source[keep], target[keep], weight[keep]
        nodes = self.nodes
        if order is not None:
            position = np.empty(len(order), dtype=np.int64)
            position[np.asarray(order, dtype=np.int64)] = np.arange(len(order))
            source, target, nodes = position[source], position[target], [self.nodes[i] for i in order]
        directed = self.directed and not undirected
        if self.directed and undirected and len(source):
            low, high = np.minimum(source, target), np.maximum(source, target)
            pair = low * len(nodes) + high
            ranked = np.lexsort((-weight, pair))  # each pair's largest weight first
            pair, low, high, weight = pair[ranked], low[ranked], high[ranked], weight[ranked]
            first = np.ones(len(pair), dtype=bool)
            first[1:] = pair[1:] != pair[:-1]
            source, target, weight = low[first], high[first], weight[first]
        return ArcGraph(nodes, source, target, weight, directed)

    def subgraph(self, keep: np.ndarray) -> ArcGraph:
        """Return the graph on the persons where ``keep`` (a mask) is true, in the same order."""
        position = np.cumsum(keep) - 1
        inside = keep[self.source] & keep[self.target]
        nodes = [node for node, kept in zip(self.nodes, keep.tolist()) if kept]
        return ArcGraph(nodes, position[self.source[inside]], position[self.target[inside]], self.weight[inside], self.directed)

    def adjacency(self, values: np.ndarray | None = None) -> sparse.csr_array:
        """Return the sparse adjacency matrix (an undirected tie both ways, a loop once on the diagonal)."""
        n = len(self.nodes)
        values = self.weight if values is None else values
        rows, cols, data = self.source, self.target, values
        if not self.directed:
            other = rows != cols
            rows = np.concatenate([rows, cols[other]])
            cols = np.concatenate([cols, self.source[other]])
            data = np.concatenate([data, values[other]])
        return sparse.csr_array((data, (rows, cols)), shape=(n, n))


def degrees(H: ArcGraph, *, weighted: bool = False, way: str = "all") -> dict[Hashable, float]:
    """Return each person's degree (or strength), as networkx's ``degree``, ``in_degree``, ``out_degree``.

    A loop counts twice in ``all`` (once as each end), once in ``in`` and in ``out``.
    """
    n = len(H)
    w = H.weight if weighted else None
    total = np.zeros(n)
    if way in ("all", "out"):
        total += np.bincount(H.source, weights=w, minlength=n)
    if way in ("all", "in"):
        total += np.bincount(H.target, weights=w, minlength=n)
    return dict(zip(H.nodes, total.tolist()))


def unreached(H: ArcGraph) -> list[Hashable]:
    """Return the persons no other person reaches (along the arcs on a directed graph)."""
    other = H.source != H.target
    reached = np.zeros(len(H), dtype=bool)
    reached[H.target[other]] = True
    if not H.directed:
        reached[H.source[other]] = True
    return [H.nodes[i] for i in np.flatnonzero(~reached)]


def component_labels(H: ArcGraph, *, strong: bool = False) -> np.ndarray:
    """Return the component of each person (weak, or strong on a directed graph), as labels."""
    matrix = sparse.csr_array((np.ones(len(H.source)), (H.source, H.target)), shape=(len(H), len(H)))
    _, labels = csgraph.connected_components(matrix, directed=H.directed, connection="strong" if strong else "weak")
    return labels


def eigenvector(H: ArcGraph, *, max_iter: int = 1000, tol: float = 1e-6) -> dict[Hashable, float]:
    """Return eigenvector centrality as networkx's ``eigenvector_centrality`` on an undirected H.

    The same power iteration on A + I from the vector of ones, normalized to Euclidean length
    1 after each step, stopping when the L1 change is below n * tol; raises PowerIterationFailed.

    References
    ----------
    Bonacich, P. (1987). Power and centrality: a family of measures. American Journal of
    Sociology 92(5), 1170-1182.
    """
    n = len(H)
    A = H.adjacency()
    x = np.full(n, 1.0 / n)
    for _ in range(max_iter):
        last = x
        x = last + A @ last
        x = x / (math.hypot(*x.tolist()) or 1)
        if float(np.abs(x - last).sum()) < n * tol:
            return dict(zip(H.nodes, x.tolist()))
    raise PowerIterationFailed(max_iter)


def pagerank(H: ArcGraph, *, alpha: float = 0.85, max_iter: int = 100, tol: float = 1e-6) -> dict[Hashable, float]:
    """Return PageRank as networkx's ``pagerank`` (its scipy form): uniform jump, dangling persons spread evenly.

    References
    ----------
    Page, L., Brin, S., Motwani, R., & Winograd, T. (1999). The PageRank citation ranking:
    bringing order to the web. Stanford InfoLab technical report 1999-66.
    """
    n = len(H)
    if n == 0:
        return {}
    A = H.adjacency()
    S = np.asarray(A.sum(axis=1)).ravel()
    S[S != 0] = 1.0 / S[S != 0]
    A = sparse.csr_array(sparse.diags_array(S) @ A)
    x = np.repeat(1.0 / n, n)
    p = np.repeat(1.0 / n, n)
    dangling = np.where(S == 0)[0]
    for _ in range(max_iter):
        last = x
        x = alpha * (x @ A + sum(x[dangling]) * p) + (1 - alpha) * p
        if np.absolute(x - last).sum() < n * tol:
            return dict(zip(H.nodes, map(float, x)))
    raise PowerIterationFailed(max_iter)
