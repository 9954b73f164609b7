"""The igraph adapter: the heavy kernels, with igraph's conventions turned into networkx's.

networkx is the reference implementation of every measure; igraph computes the costly ones
(shortest-path counts, closeness, harmonic closeness, community detection, path lengths) in
compiled code. Every function here takes a networkx graph and returns what the named networkx
function returns on the same graph, so callers never see igraph's conventions:

- betweenness: igraph's figure is raw; on an undirected graph it counts each pair of persons
  once, as networkx's ``betweenness_centrality(normalized=False)`` does (which halves its
  ordered-pair count); on a directed graph both count ordered pairs.
- closeness: igraph's ``normalized=True`` is (r - 1) / (sum of distances) over the r persons in
  reach and NaN for a person who reaches nobody; networkx's ``wf_improved=True`` multiplies it
  by (r - 1)/(n - 1) (Wasserman and Faust) and gives 0. On a directed graph networkx uses
  incoming distances, igraph's ``mode="in"``.
- harmonic: the sum of 1/d from every other person, incoming on a directed graph, as networkx's
  ``harmonic_centrality``.
- weights are distances here (the caller passes whole units, see ``conventions``): igraph
  compares path lengths with a relative tolerance of about 1e-10, networkx exactly. Two
  different whole-unit lengths below 10^9 differ by at least 1e-9 of their size, so both see
  the same ties (10^9 units is a path of about 1,400 ties of weight 1, far longer than any
  shortest path between persons).

igraph's random number generator is global: seeded runs hold a lock and put the default
generator back afterwards.
"""

from __future__ import annotations

import math
import multiprocessing
import os
import random
import threading
import weakref
from collections.abc import Hashable, Iterator
from contextlib import contextmanager
from typing import Any

import igraph as ig
import networkx as nx
import numpy as np

from app.network.measures.arcs import ArcGraph
from app.network.measures.conventions import DISTANCE

__all__ = [
    "betweenness",
    "betweenness_by_group",
    "closeness",
    "cut_structure",
    "harmonic",
    "leiden",
    "louvain",
    "maximal_cliques",
    "modularity",
    "path_lengths",
    "sampled_path_lengths",
    "to_igraph",
    "transitivity",
]

_RNG_LOCK = threading.Lock()
LEIDEN_PASSES = 10
"""Passes of the Leiden method (see ``leiden``)."""
_CONVERTED: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()  # ArcGraph -> {attribute: (igraph Graph, nodes)}


def to_igraph(G: nx.Graph | ArcGraph, *, attribute: str | None = None) -> tuple[ig.Graph, list[Hashable]]:
    """Return G (a networkx graph or an ArcGraph) as an igraph Graph (vertex i is ``nodes[i]``) and the list of nodes.

    Examples
    --------
    >>> g, nodes = to_igraph(nx.path_graph(["a", "b", "c"]))
    >>> g.vcount(), g.ecount(), nodes
    (3, 2, ['a', 'b', 'c'])
    """
    if isinstance(G, ArcGraph):  # arrays already: no Python loop over the ties; converted once per graph
        known = _CONVERTED.setdefault(G, {})
        if attribute not in known:
            known[attribute] = _from_arrays(G, attribute)
        return known[attribute]
    nodes = list(G)
    index = {node: i for i, node in enumerate(nodes)}
    g = ig.Graph(n=len(nodes), edges=[(index[u], index[v]) for u, v in G.edges()], directed=G.is_directed())
    if attribute is not None:
        g.es[attribute] = [float(data[attribute]) for _, _, data in G.edges(data=True)]
    return g, nodes


def _from_arrays(G: ArcGraph, attribute: str | None) -> tuple[ig.Graph, list[Hashable]]:
    # A list of pairs: igraph reads a numpy array of edges element by element, several times slower.
    g = ig.Graph(n=len(G), edges=list(zip(G.source.tolist(), G.target.tolist())), directed=G.directed)
    if attribute is not None:
        g.es[attribute] = (G.distance if attribute == DISTANCE else G.weight).astype(float).tolist()
    return g, G.nodes


def betweenness(G: nx.Graph, *, distance: str | None = None) -> dict[Hashable, float]:
    """Return raw betweenness, as networkx's ``betweenness_centrality(G, normalized=False)``.

    References
    ----------
    Brandes, U. (2001). A faster algorithm for betweenness centrality. Journal of Mathematical
    Sociology 25(2), 163-177.

    Examples
    --------
    >>> betweenness(nx.path_graph(3))
    {0: 0.0, 1: 1.0, 2: 0.0}
    """
    g, nodes = to_igraph(G, attribute=distance)
    workers = _path_workers(g)
    if workers > 1:
        return dict(zip(nodes, _betweenness_in_processes(g, distance, workers).tolist()))
    return dict(zip(nodes, g.betweenness(directed=G.is_directed(), weights=distance)))


PARALLEL_PATHS_ABOVE = 2 * 10**7
"""Above this many persons × ties, exact betweenness runs its path searches in one process per core."""
_SHARED: dict[str, Any] = {}  # the graph a forked path-search process reads (inherited, never pickled)


def _path_workers(g: ig.Graph) -> int:
    """Return how many processes exact betweenness should use on ``g`` (1: here, in this process).

    Only a process with no other thread forks (the background worker; not a server, whose other
    threads could hold a lock at the moment of the fork).
    """
    if (g.vcount() * g.ecount() <= PARALLEL_PATHS_ABOVE or threading.active_count() > 1
            or "fork" not in multiprocessing.get_all_start_methods()):
        return 1
    return min(len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count() or 1, 4)


def _betweenness_in_processes(g: ig.Graph, distance: str | None, workers: int) -> np.ndarray:
    """Return igraph's exact betweenness as the sum of the shares of ``workers`` groups of sources.

    igraph holds the interpreter lock while it searches paths, so the groups run in forked
    processes (each inherits the graph), one per core: on two idle cores the figure takes about
    half the time. The shares of a partition of the sources add up to the whole
    (``betweenness_by_group``), equal to one call's figure to rounding.
    """
    groups = [list(range(start, g.vcount(), workers)) for start in range(workers)]
    _SHARED["graph"], _SHARED["distance"] = g, distance
    try:
        with multiprocessing.get_context("fork").Pool(workers) as pool:
            shares = pool.map(_shares_from, groups)
    finally:
        _SHARED.clear()
    return np.sum(shares, axis=0)


def _shares_from(sources: list[int]) -> np.ndarray:
    g = _SHARED["graph"]
    return np.asarray(g.betweenness(directed=g.is_directed(), weights=_SHARED["distance"], sources=sources))


def betweenness_by_group(
    G: nx.Graph, groups: list[list[Hashable]], *, distance: str | None = None
) -> tuple[list[Hashable], np.ndarray]:
    """Return the nodes and, per group of sources, each node's share of the paths from that group.

    Row g of the array (a column per node, in the order of the nodes returned) is the part of the
    shortest paths from the sources of ``groups[g]`` which pass through each node, on networkx's
    raw scale (``betweenness_centrality_subset(G, group, G)``; halved on an undirected graph,
    where every pair is met from both ends), so that the rows of groups covering every node add
    up to ``betweenness(G)``. One igraph call per group: each call costs a pass over the ties
    besides its paths, so a few groups of many sources cost far less than one call per source.

    Examples
    --------
    >>> nodes, shares = betweenness_by_group(nx.path_graph(3), [[0], [2]])
    >>> nodes, shares.tolist()
    ([0, 1, 2], [[0.0, 0.5, 0.0], [0.0, 0.5, 0.0]])
    """
    g, nodes = to_igraph(G, attribute=distance)
    index = {node: i for i, node in enumerate(nodes)}
    shares = np.zeros((len(groups), len(nodes)))
    for row, group in enumerate(groups):
        if group:
            shares[row] = g.betweenness(directed=G.is_directed(), weights=distance, sources=[index[s] for s in group])
    return nodes, shares


def closeness(G: nx.Graph, *, distance: str | None = None) -> tuple[dict[Hashable, float], dict[Hashable, float]]:
    """Return Wasserman-Faust closeness and closeness within reach, as networkx computes them.

    The first is networkx's ``closeness_centrality(G, distance=distance, wf_improved=True)``,
    the second the same with ``wf_improved=False``: (r - 1)/(sum of distances) over the r
    persons in reach (r counts the person). Both are 0 for a person who reaches nobody.

    References
    ----------
    Wasserman, S., & Faust, K. (1994). Social Network Analysis: Methods and Applications.
    Cambridge University Press.

    Examples
    --------
    >>> G = nx.path_graph(3)
    >>> G.add_node(3)
    >>> improved, within = closeness(G)
    >>> improved[1], within[1], improved[3]
    (0.6666666666666666, 1.0, 0.0)
    """
    n = G.number_of_nodes()
    g, nodes = to_igraph(G, attribute=distance)
    mode = "in" if G.is_directed() else "all"
    within = [_zero_if_nan(c) for c in g.closeness(mode=mode, weights=distance, normalized=True)]
    if G.is_directed():
        inverse = g.closeness(mode=mode, weights=distance, normalized=False)
        reached = [0 if w == 0 else round(w / i) for w, i in zip(within, inverse)]
    else:
        membership = g.connected_components().membership
        sizes = np.bincount(membership) if membership else np.zeros(0, dtype=int)
        reached = [int(sizes[m]) - 1 for m in membership]
    improved = [w * r / (n - 1) if n > 1 else 0.0 for w, r in zip(within, reached)]
    return dict(zip(nodes, improved)), dict(zip(nodes, within))


def harmonic(G: nx.Graph, *, distance: str | None = None) -> dict[Hashable, float]:
    """Return the sum of 1/d from every other person, as networkx's ``harmonic_centrality``.

    References
    ----------
    Marchiori, M., & Latora, V. (2000). Harmony in the small-world. Physica A 285, 539-546.

    Examples
    --------
    >>> harmonic(nx.path_graph(3))
    {0: 1.5, 1: 2.0, 2: 1.5}
    """
    g, nodes = to_igraph(G, attribute=distance)
    mode = "in" if G.is_directed() else "all"
    return dict(zip(nodes, (_zero_if_nan(h) for h in g.harmonic_centrality(mode=mode, weights=distance, normalized=False))))


def louvain(G: nx.Graph, *, weight: str | None = None, seed: int = 0) -> list[list[Hashable]]:
    """Return the communities found by igraph's multilevel (Louvain) method on an undirected G.

    References
    ----------
    Blondel, V. D., Guillaume, J.-L., Lambiotte, R., & Lefebvre, E. (2008). Fast unfolding of
    communities in large networks. J. Stat. Mech. P10008.

    Examples
    --------
    >>> sorted(map(sorted, louvain(nx.disjoint_union(nx.complete_graph(3), nx.complete_graph(3)))))
    [[0, 1, 2], [3, 4, 5]]
    """
    g, nodes = to_igraph(G, attribute=weight)
    with _seeded(seed):
        membership = g.community_multilevel(weights=weight).membership
    return _groups(nodes, membership)


def leiden(G: nx.Graph, *, weight: str | None = None, seed: int = 0) -> list[list[Hashable]]:
    """Return the communities found by igraph's Leiden method (modularity) on an undirected G.

    ``LEIDEN_PASSES`` passes, each of which can only keep or improve the partition. Running
    until a pass changes nothing took 2 to 3 s on a generated network of 20,000 persons and
    166,000 ties, ten passes 0.6 s, and both reached the same modularity to three decimals.

    References
    ----------
    Traag, V. A., Waltman, L., & van Eck, N. J. (2019). From Louvain to Leiden: guaranteeing
    well-connected communities. Scientific Reports 9, 5233.

    Examples
    --------
    >>> sorted(map(sorted, leiden(nx.disjoint_union(nx.complete_graph(3), nx.complete_graph(3)))))
    [[0, 1, 2], [3, 4, 5]]
    """
    g, nodes = to_igraph(G, attribute=weight)
    with _seeded(seed):
        membership = g.community_leiden(objective_function="modularity", weights=weight, n_iterations=LEIDEN_PASSES).membership
    return _groups(nodes, membership)


def cut_structure(H: ArcGraph) -> tuple[list[tuple[int, list[int], int]], list[tuple[int, int, int, int]]]:
    """Return the cut points and bridges of an undirected H without loops, with the sizes of the pieces.

    As networkx's ``articulation_points`` and ``bridges``, with for each cut point (its
    position) the sizes of the pieces its removal leaves of its component, largest first, and
    the component's size; for each bridge its two ends (positions) and the persons on each
    side once it is gone. igraph finds the blocks (biconnected components) and the cut points;
    the pieces are read off the block-cut tree (a cut point's pieces are its subtrees in it).

    References
    ----------
    Hopcroft, J., & Tarjan, R. (1973). Algorithm 447: efficient algorithms for graph
    manipulation. Communications of the ACM 16(6), 372-378.

    Examples
    --------
    >>> H = ArcGraph.from_networkx(nx.Graph([(0, 1), (1, 2), (2, 0), (2, 3), (3, 4), (4, 5), (5, 3)]))
    >>> cut_structure(H)
    ([(2, [3, 2], 6), (3, [3, 2], 6)], [(2, 3, 3, 3)])
    """
    g, _ = to_igraph(H)
    membership = np.asarray(g.connected_components().membership, dtype=np.int64)
    component_size = np.bincount(membership) if len(membership) else np.zeros(0, dtype=np.int64)
    blocks, points = g.biconnected_components(return_articulation_points=True)
    blocks = list(blocks)
    tree_of = {v: len(blocks) + i for i, v in enumerate(points)}  # the tree: blocks first, then cut points
    neighbours: list[list[int]] = [[] for _ in range(len(blocks) + len(points))]
    weight = [0] * len(blocks) + [1] * len(points)  # persons a tree node stands for (a block: those of no other)
    for b, members in enumerate(blocks):
        for v in members:
            if v in tree_of:
                neighbours[b].append(tree_of[v])
                neighbours[tree_of[v]].append(b)
            else:
                weight[b] += 1
    parent = [-2] * len(neighbours)
    below = list(weight)
    for root in range(len(neighbours)):
        if parent[root] != -2:
            continue
        parent[root], order, stack = -1, [], [root]
        while stack:
            t = stack.pop()
            order.append(t)
            for w in neighbours[t]:
                if parent[w] == -2:
                    parent[w] = t
                    stack.append(w)
        for t in reversed(order[1:]):
            below[parent[t]] += below[t]
    cut_points = []
    for v in points:
        t, size = tree_of[v], int(component_size[membership[v]])
        pieces = [below[w] for w in neighbours[t] if parent[w] == t] + ([size - below[t]] if parent[t] >= 0 else [])
        cut_points.append((int(v), sorted(pieces, reverse=True), size))
    block_of = {frozenset(members): b for b, members in enumerate(blocks) if len(members) == 2}
    bridges = []
    for edge in g.bridges():
        u, v = g.es[edge].tuple
        b, size = block_of[frozenset((u, v))], int(component_size[membership[u]])

        def side(x: int) -> int:  # persons on x's side once the bridge is gone
            t = tree_of.get(x)
            if t is None:  # x is in no other block
                return 1
            return below[t] if parent[t] == b else size - below[b]  # x's other blocks hang below b, or b below x

        bridges.append((int(u), int(v), side(u), side(v)))
    return cut_points, bridges


def maximal_cliques(H: ArcGraph, *, min_size: int, limit: int) -> tuple[list[list[int]], bool]:
    """Return up to ``limit`` maximal cliques (positions) of at least ``min_size`` persons, and whether that is all.

    As networkx's ``find_cliques`` on an undirected H without loops, keeping those of
    ``min_size`` or more; igraph searches only the (min_size - 1)-core, where every such clique lies.
    """
    g, _ = to_igraph(H)
    core = [v for v, k in enumerate(g.coreness()) if k >= min_size - 1]
    sub = g.induced_subgraph(core)
    found = sub.maximal_cliques(min=min_size, max_results=limit + 1)
    return [sorted(core[v] for v in clique) for clique in found[:limit]], len(found) <= limit


def modularity(H: ArcGraph, groups: list[list[int]]) -> float:
    """Return the modularity of a partition (positions) of an undirected H, as networkx's ``community.modularity``.

    The ``weight`` of each tie counts; a loop adds its weight inside its person's community and
    twice to that person's strength, in both libraries.
    """
    g, _ = to_igraph(H, attribute="weight")
    membership = [0] * len(H)
    for number, members in enumerate(groups):
        for v in members:
            membership[v] = number
    return float(g.modularity(membership, weights="weight"))


def path_lengths(G: nx.Graph) -> tuple[int, float | None]:
    """Return the diameter and the average shortest path length (in ties) of a connected G.

    As networkx's ``diameter`` and ``average_shortest_path_length``, on the undirected view;
    a single person has diameter 0 and no average.

    Examples
    --------
    >>> path_lengths(nx.path_graph(4))
    (3, 1.6666666666666667)
    """
    g, _ = to_igraph(G)
    if g.vcount() < 2:
        return 0, None
    return int(g.diameter(directed=False)), float(g.average_path_length(directed=False))


def sampled_path_lengths(G: nx.Graph, *, sources: int, seed: int = 0) -> tuple[int, float | None]:
    """Return a lower bound of the diameter and an estimate of the average path length of a connected G.

    Distances are counted from ``sources`` persons drawn at random (seeded) instead of from
    everyone: the average is that of all their distances, the diameter the longest of them,
    lengthened by one more search from the farthest person found (never above the true one).
    """
    g, _ = to_igraph(G)
    n = g.vcount()
    if n < 2:
        return 0, None
    drawn = random.Random(seed).sample(range(n), min(sources, n))
    rows = np.asarray(g.distances(source=drawn, mode="all"), dtype=float)
    average = float(rows.sum() / (len(drawn) * (n - 1)))
    far = int(np.unravel_index(int(rows.argmax()), rows.shape)[1])
    diameter = max(int(rows.max()), int(max(g.distances(source=[far], mode="all")[0])))
    return diameter, average


def transitivity(G: nx.Graph) -> tuple[float, float]:
    """Return transitivity and average clustering of an undirected simple G, as networkx's functions.

    The first is networkx's ``transitivity`` (0 without connected triples), the second its
    ``average_clustering`` over every person (0 for those with fewer than two ties).

    Examples
    --------
    >>> G = nx.Graph([(0, 1), (1, 2), (2, 0), (2, 3)])
    >>> [round(value, 12) for value in transitivity(G)] == [round(nx.transitivity(G), 12), round(nx.average_clustering(G), 12)]
    True
    """
    if G.number_of_nodes() == 0:
        return 0.0, 0.0
    g, _ = to_igraph(G)
    return _zero_if_nan(g.transitivity_undirected()), _zero_if_nan(g.transitivity_avglocal_undirected(mode="zero"))


@contextmanager
def _seeded(seed: int) -> Iterator[None]:
    with _RNG_LOCK:
        ig.set_random_number_generator(random.Random(seed))
        try:
            yield
        finally:
            ig.set_random_number_generator(random)


def _groups(nodes: list[Hashable], membership: list[int]) -> list[list[Hashable]]:
    groups: dict[int, list[Hashable]] = {}
    for node, label in zip(nodes, membership):
        groups.setdefault(label, []).append(node)
    return list(groups.values())


def _zero_if_nan(value: float) -> float:
    return 0.0 if math.isnan(value) else float(value)
