"""Cliques: groups of persons in which everyone is tied to everyone else.

Maximal cliques are read on the undirected view without self-loops. Their number can grow
very fast in dense networks, so the enumeration stops at a cap and says so.
"""

from __future__ import annotations

from collections.abc import Hashable
from dataclasses import dataclass

import networkx as nx

from app.network.measures import kernels
from app.network.measures.arcs import ArcGraph
from app.network.measures.conventions import direction_sentence, population_sentence, working_graph
from app.network.measures.results import MeasureError, node_key

__all__ = ["CLIQUE_LIMIT", "Clique", "CliquesResult", "cliques"]

CLIQUE_LIMIT = 10_000
"""How many cliques are enumerated at most by default."""


@dataclass(frozen=True)
class Clique:
    """One maximal clique."""

    number: int
    """1 for the first listed (the largest)."""
    members: list[Hashable]
    """The persons, ids ascending."""

    @property
    def size(self) -> int:
        """Number of persons."""
        return len(self.members)


@dataclass(frozen=True)
class CliquesResult:
    """The maximal cliques of at least ``min_size`` persons."""

    cliques: list[Clique]
    """The cliques, largest first."""
    per_node: dict[Hashable, int]
    """For every person, the number of listed cliques they belong to (0 included)."""
    min_size: int
    """The smallest clique size listed."""
    limit: int
    """The cap on the number of cliques enumerated."""
    complete: bool
    """False when the cap was reached and more cliques exist."""
    conventions: str
    """Plain sentences: node set and n, the view used, the cap."""


def cliques(G: nx.Graph | ArcGraph, *, min_size: int = 3, limit: int = CLIQUE_LIMIT, node_set: str | None = None) -> CliquesResult:
    """Return the maximal cliques of G with at least ``min_size`` persons, largest first.

    Only the (min_size - 1)-core is searched: a person in a clique of k persons has at least
    k - 1 ties inside it, and a clique maximal in the core is maximal in G (a person who
    extended it would be in the core too).

    References
    ----------
    Bron, C., & Kerbosch, J. (1973). Algorithm 457: finding all cliques of an undirected graph.
    Communications of the ACM 16(9), 575-577.
    Tomita, E., Tanaka, A., & Takahashi, H. (2006). The worst-case time complexity for
    generating all maximal cliques. Theoretical Computer Science 363(1), 28-42.

    Examples
    --------
    >>> G = nx.Graph([(1, 2), (2, 3), (3, 1), (3, 4), (4, 5), (5, 3), (5, 6)])
    >>> result = cliques(G)
    >>> [c.members for c in result.cliques], result.per_node[3], result.per_node[6]
    ([[1, 2, 3], [3, 4, 5]], 2, 0)
    """
    if isinstance(min_size, bool) or not isinstance(min_size, int) or min_size < 2:
        raise MeasureError("min_size", min_size, "a whole number of 2 or more")
    if isinstance(limit, bool) or not isinstance(limit, int) or limit < 1:
        raise MeasureError("limit", limit, "a whole number of 1 or more")
    H = working_graph(G if isinstance(G, ArcGraph) else ArcGraph.from_networkx(G), loops="drop", undirected=True)
    positions, complete = kernels.maximal_cliques(H, min_size=min_size, limit=limit)
    found = [sorted((H.nodes[i] for i in clique), key=node_key) for clique in positions]
    found.sort(key=lambda members: (-len(members), [node_key(v) for v in members]))
    per_node = dict.fromkeys(H.nodes, 0)
    for members in found:
        for v in members:
            per_node[v] += 1
    sentences = [
        population_sentence(len(H), node_set),
        direction_sentence(G, undirected_measure=True),
        "Self-loops are left out.",
        f"Maximal cliques (everyone tied to everyone, no one left who could join) of {min_size} or more persons, "
        "largest first (igraph).",
    ]
    if complete:
        sentences.append(f"All {len(found)} are listed.")
    else:
        sentences.append(f"The search stopped at {limit} cliques: there are more, and the list is not "
                         "necessarily the largest ones; a larger minimum size narrows the search.")
    return CliquesResult(
        cliques=[Clique(number, members) for number, members in enumerate(found, 1)], per_node=per_node,
        min_size=min_size, limit=limit, complete=complete, conventions=" ".join(sentences),
    )
