"""Components: the separate pieces of the network, every one of them, isolates included.

A historian reads the small pieces as closely as the large one (a family whose papers stand
apart, a person known from a single register entry), so the result never keeps only the
largest component. On a directed slice both kinds are given: weakly connected components (ties
in either direction) and strongly connected ones (every member reaches every other along the
arcs).
"""

from __future__ import annotations

from collections.abc import Hashable, Iterable
from dataclasses import dataclass

import networkx as nx
import numpy as np

from app.network.measures.arcs import ArcGraph, component_labels, unreached
from app.network.measures.conventions import direction_sentence, loops_sentence, population_sentence, working_graph
from app.network.measures.results import node_key

__all__ = ["Component", "ComponentsResult", "components"]


@dataclass(frozen=True)
class Component:
    """One component."""

    number: int
    """1 for the largest; larger components come first."""
    size: int
    """Number of persons."""
    members: list[Hashable]
    """The persons, ids ascending."""
    ties: int
    """Ties among the members (arcs on a directed slice; self-loops only when kept)."""


@dataclass(frozen=True)
class ComponentsResult:
    """Every component of a graph, largest first."""

    components: list[Component]
    """Connected components (weakly connected on a directed slice), isolates included."""
    strong: list[Component] | None
    """Strongly connected components of a directed slice; None for an undirected one."""
    isolates: list[Hashable]
    """Persons without a tie to anyone else (each is also a component of one)."""
    n: int
    """Number of persons."""
    largest_share: float | None
    """Share of the persons in the largest component (None for an empty graph)."""
    conventions: str
    """Plain sentences: node set and n, direction, loops, what is listed."""


def components(G: nx.Graph, *, loops: str = "drop", node_set: str | None = None) -> ComponentsResult:
    """Return every component of G, largest first, with members and tie counts.

    Components of equal size are ordered by ties, then by their first member.

    References
    ----------
    Tarjan, R. (1972). Depth-first search and linear graph algorithms. SIAM Journal on
    Computing 1(2), 146-160.

    Examples
    --------
    >>> G = nx.Graph([(1, 2), (2, 3), (4, 5)])
    >>> G.add_node(6)
    >>> result = components(G)
    >>> [(c.size, c.members, c.ties) for c in result.components], result.isolates
    ([(3, [1, 2, 3], 2), (2, [4, 5], 1), (1, [6], 0)], [6])
    """
    H = working_graph(G, loops=loops)
    n = len(H)
    if isinstance(H, ArcGraph):
        return _from_arrays(G, H, loops=loops, node_set=node_set)
    if H.is_directed():
        weak = _listed(H, nx.weakly_connected_components(H))
        strong: list[Component] | None = _listed(H, nx.strongly_connected_components(H))
        kinds = ("Weakly connected components (ties in either direction) and strongly connected ones "
                 "(every member reaches every other along the arcs) are both listed, largest first.")
    else:
        weak = _listed(H, nx.connected_components(H))
        strong = None
        kinds = "Components are listed largest first."
    isolates = sorted((v for v in H if all(u == v for u in nx.all_neighbors(H, v))), key=node_key)
    return _result(G, weak, strong, isolates, n, kinds, loops=loops, node_set=node_set)


def _result(G: nx.Graph | ArcGraph, weak: list[Component], strong: list[Component] | None, isolates: list[Hashable],
            n: int, kinds: str, *, loops: str, node_set: str | None) -> ComponentsResult:
    conventions = " ".join([
        population_sentence(n, node_set),
        direction_sentence(G, undirected_measure=False),
        loops_sentence(loops, "a loop counts as a tie of its component"),
        kinds,
        "Every component is listed, the smallest too; an isolate (a person without ties to others) is a component of one.",
    ])
    return ComponentsResult(
        components=weak, strong=strong, isolates=isolates, n=n,
        largest_share=weak[0].size / n if n else None, conventions=conventions,
    )


def _from_arrays(G: ArcGraph, H: ArcGraph, *, loops: str, node_set: str | None) -> ComponentsResult:
    """``components`` on arrays: the same parts, ties and order, from scipy's component labels."""
    weak = _listed_labels(H, component_labels(H))
    strong = _listed_labels(H, component_labels(H, strong=True)) if H.directed else None
    kinds = ("Weakly connected components (ties in either direction) and strongly connected ones "
             "(every member reaches every other along the arcs) are both listed, largest first."
             if H.directed else "Components are listed largest first.")
    isolates = sorted(unreached(H.with_(source=H.source, target=H.target, weight=H.weight, directed=False)), key=node_key)
    return _result(G, weak, strong, isolates, len(H), kinds, loops=loops, node_set=node_set)


def _listed_labels(H: ArcGraph, labels: np.ndarray) -> list[Component]:
    """Return the components of these labels (one per person), as ``_listed`` orders them."""
    count = int(labels.max()) + 1 if len(labels) else 0
    inside = labels[H.source] == labels[H.target]
    ties = np.bincount(labels[H.source[inside]], minlength=count).tolist()
    groups: list[list[Hashable]] = [[] for _ in range(count)]
    for node, label in zip(H.nodes, labels.tolist()):
        groups[label].append(node)
    for members in groups:
        members.sort(key=node_key)
    order = sorted(range(count), key=lambda i: (-len(groups[i]), -ties[i], node_key(groups[i][0])))
    return [Component(number=rank, size=len(groups[i]), members=groups[i], ties=ties[i]) for rank, i in enumerate(order, 1)]


def _listed(H: nx.Graph, parts: Iterable[set[Hashable]]) -> list[Component]:
    part_of: dict[Hashable, int] = {}
    groups = [sorted(part, key=node_key) for part in parts]
    for index, members in enumerate(groups):
        for v in members:
            part_of[v] = index
    ties = [0] * len(groups)
    for u, v in H.edges():
        if part_of[u] == part_of[v]:
            ties[part_of[u]] += 1
    order = sorted(range(len(groups)), key=lambda i: (-len(groups[i]), -ties[i], node_key(groups[i][0])))
    return [Component(number=rank, size=len(groups[i]), members=groups[i], ties=ties[i]) for rank, i in enumerate(order, 1)]
