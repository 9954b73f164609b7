"""Communities: groups of persons more tied among themselves than to the rest, and how stable.

Louvain and Leiden both climb towards high modularity from a random order of visits, so one
run is one answer among several. The result therefore gives, beside the communities of the
chosen seed, how far runs with other seeds agree: the normalized mutual information between
their partitions, and for each person how consistently they fall with the same others.
Communities are found on the undirected view with the slice's weight.
"""

from __future__ import annotations

from collections.abc import Hashable, Mapping, Sequence
from dataclasses import dataclass
from itertools import combinations

import networkx as nx
import numpy as np

from app.network.measures import kernels
from app.network.measures.arcs import ArcGraph
from app.network.measures.conventions import WEIGHT, direction_sentence, loops_sentence, population_sentence, working_graph
from app.network.measures.results import MeasureError, node_key

__all__ = [
    "METHODS",
    "STABILITY_RUNS",
    "CommunitiesResult",
    "Community",
    "CommunityLink",
    "Stability",
    "communities",
    "consistency",
    "normalized_mutual_information",
    "partition",
]

METHODS = ("leiden", "louvain")
STABILITY_RUNS = 10
"""Runs (seeds) compared by default to judge stability."""


@dataclass(frozen=True)
class Community:
    """One community."""

    number: int
    """1 for the largest; larger communities come first."""
    members: list[Hashable]
    """The persons, ids ascending."""
    ties: int
    """Ties among the members."""
    weight: float
    """Sum of the weights of those ties."""

    @property
    def size(self) -> int:
        """Number of persons."""
        return len(self.members)


@dataclass(frozen=True)
class CommunityLink:
    """The ties between two communities."""

    a: int
    """Number of the first community (the smaller number)."""
    b: int
    """Number of the second community."""
    ties: int
    """Ties between a member of one and a member of the other."""
    weight: float
    """Sum of their weights."""


@dataclass(frozen=True)
class Stability:
    """How far runs with different seeds agree."""

    seeds: list[int]
    """The seeds of the runs compared."""
    mutual_information: float
    """Mean normalized mutual information over all pairs of runs (1: identical partitions)."""
    lowest_mutual_information: float
    """The lowest over all pairs."""
    consistency: dict[Hashable, float]
    """Per person with ties, the mean Jaccard overlap of its communities in two runs (1: always the same)."""
    statement: str
    """The stability in plain words."""


@dataclass(frozen=True)
class CommunitiesResult:
    """The communities of a graph found by one method with one seed."""

    method: str
    """``leiden`` or ``louvain``."""
    seed: int
    """The seed: the same graph and seed give the same communities."""
    engine: str
    """The library that found them."""
    communities: list[Community]
    """The communities, largest first (persons without ties are listed apart)."""
    membership: dict[Hashable, int | None]
    """Every person's community number; None for a person without ties."""
    modularity: float | None
    """Modularity of the partition with the slice's weight (None without ties)."""
    links: list[CommunityLink]
    """Ties between communities, heaviest first."""
    isolates: list[Hashable]
    """Persons without ties to others: they belong to no community."""
    stability: Stability | None
    """Agreement across seeds (None when a single run was asked for)."""
    conventions: str
    """Plain sentences: node set and n, the view, method, seed, modularity, stability."""


def communities(
    G: nx.Graph | ArcGraph, *, method: str = "leiden", seed: int = 0, weight: str | None = "weight", loops: str = "drop",
    engine: str = "igraph", runs: int = STABILITY_RUNS, node_set: str | None = None,
) -> CommunitiesResult:
    """Return the communities of G found by ``method`` with ``seed``, and their stability.

    The partition of ``seed`` is the one shown; ``runs`` runs with seeds ``seed``,
    ``seed + 1``, ... are compared for stability (``runs=1`` skips it).

    References
    ----------
    Blondel, V. D., Guillaume, J.-L., Lambiotte, R., & Lefebvre, E. (2008). Fast unfolding of
    communities in large networks. J. Stat. Mech. P10008.
    Traag, V. A., Waltman, L., & van Eck, N. J. (2019). From Louvain to Leiden: guaranteeing
    well-connected communities. Scientific Reports 9, 5233.
    Newman, M. E. J., & Girvan, M. (2004). Finding and evaluating community structure in
    networks. Physical Review E 69, 026113.
    Danon, L., Díaz-Guilera, A., Duch, J., & Arenas, A. (2005). Comparing community structure
    identification. J. Stat. Mech. P09008.

    Examples
    --------
    >>> G = nx.disjoint_union(nx.complete_graph(4), nx.complete_graph(4))
    >>> G.add_edge(0, 4)
    >>> result = communities(G, runs=3)
    >>> [c.members for c in result.communities], round(result.modularity, 3), result.stability.mutual_information
    ([[0, 1, 2, 3], [4, 5, 6, 7]], 0.423, 1.0)
    """
    if isinstance(runs, bool) or not isinstance(runs, int) or runs < 1:
        raise MeasureError("runs", runs, "a whole number of 1 or more")
    H = _sorted_ties(working_graph(G if isinstance(G, ArcGraph) else ArcGraph.from_networkx(G), weight=weight,
                                   loops=loops, undirected=True))
    other = H.source != H.target
    tied = np.zeros(len(H), dtype=bool)
    tied[H.source[other]] = tied[H.target[other]] = True
    isolates = [H.nodes[i] for i in np.flatnonzero(~tied)]
    connected = H.subgraph(tied)
    groups = partition(connected, method=method, seed=seed, engine=engine)
    numbered = sorted((sorted(group, key=node_key) for group in groups), key=lambda g: (-len(g), node_key(g[0])))
    membership: dict[Hashable, int | None] = dict.fromkeys(H.nodes, None)
    for number, members in enumerate(numbered, 1):
        for v in members:
            membership[v] = number
    label = np.array([membership[v] for v in connected.nodes], dtype=np.int64)
    a, b = label[connected.source], label[connected.target]
    low, high = np.minimum(a, b), np.maximum(a, b)
    count = len(numbered) + 1
    inside_ties = np.bincount(low[low == high], minlength=count)
    inside_weight = np.bincount(low[low == high], weights=connected.weight[low == high], minlength=count)
    inside = {number: [int(inside_ties[number]), float(inside_weight[number])] for number in range(1, count)}
    cells, where = np.unique(low[low != high] * count + high[low != high], return_inverse=True)
    link_ties = np.bincount(where.reshape(-1), minlength=len(cells))
    link_weight = np.bincount(where.reshape(-1), weights=connected.weight[low != high], minlength=len(cells))
    between = {(int(c // count), int(c % count)): [int(t), float(w)] for c, t, w in zip(cells, link_ties, link_weight)}
    modularity = None
    if connected.number_of_edges():
        # The persons without ties add nothing unless they hold loops: then they count, each a community of one.
        whole = connected if connected.number_of_edges() == H.number_of_edges() else H
        position = {v: i for i, v in enumerate(whole.nodes)}
        parts = numbered if whole is connected else [*numbered, *([v] for v in isolates)]
        modularity = kernels.modularity(whole, [[position[v] for v in g] for g in parts])
    stability = None
    if runs > 1 and len(connected):
        others = [groups] + [partition(connected, method=method, seed=s, engine=engine) for s in range(seed + 1, seed + runs)]
        stability = _stability(list(connected), others, list(range(seed, seed + runs)))
    sentences = [
        population_sentence(len(H), node_set),
        direction_sentence(G, undirected_measure=True),
        loops_sentence(loops, "a loop adds its weight inside its person's community"),
        f"{'Leiden' if method == 'leiden' else 'Louvain'} method ({engine}) maximizing modularity with the slice's weight, "
        f"seed {seed}: the same slice and seed give the same communities.",
        "Modularity (igraph, as networkx computes it) is the share of the weight inside communities minus the share expected if ties fell at "
        "random with the same strengths.",
        "Persons without ties belong to no community and are listed apart.",
    ]
    if stability is not None:
        sentences.append(stability.statement)
    return CommunitiesResult(
        method=method, seed=seed, engine=engine,
        communities=[Community(number, members, *inside[number]) for number, members in enumerate(numbered, 1)],
        membership=membership, modularity=modularity,
        links=sorted((CommunityLink(a, b, ties, w) for (a, b), (ties, w) in between.items()),
                     key=lambda link: (-link.weight, -link.ties, link.a, link.b)),
        isolates=sorted(isolates, key=node_key), stability=stability, conventions=" ".join(sentences),
    )


def partition(G: nx.Graph | ArcGraph, *, method: str = "leiden", seed: int = 0, engine: str = "igraph") -> list[list[Hashable]]:
    """Return the communities of an undirected working graph (weights in ``weight``) as lists.

    Leiden is computed by igraph only; Louvain by igraph or by networkx (the reference).

    Examples
    --------
    >>> G = nx.disjoint_union(nx.complete_graph(3), nx.complete_graph(3))
    >>> sorted(map(sorted, partition(G, method="louvain", engine="networkx")))
    [[0, 1, 2], [3, 4, 5]]
    """
    if method not in METHODS:
        raise MeasureError("method", method, "one of " + ", ".join(METHODS))
    if engine not in ("igraph", "networkx") or (method == "leiden" and engine != "igraph"):
        raise MeasureError("engine", engine, "igraph" + (" (Leiden is computed by igraph)" if method == "leiden" else " or networkx"))
    if len(G) == 0:
        return []
    if method == "leiden":
        return kernels.leiden(G, weight=WEIGHT, seed=seed)
    if engine == "igraph":
        return kernels.louvain(G, weight=WEIGHT, seed=seed)
    if isinstance(G, ArcGraph):  # the reference: networkx's own Louvain on the same ties, in the same order
        reference = nx.Graph()
        reference.add_nodes_from(G.nodes)
        reference.add_weighted_edges_from((G.nodes[u], G.nodes[v], w) for u, v, w in
                                          zip(G.source.tolist(), G.target.tolist(), G.weight.tolist()))
        G = reference
    return [list(c) for c in nx.community.louvain_communities(G, weight=WEIGHT, seed=seed)]


def normalized_mutual_information(a: Mapping[Hashable, Hashable], b: Mapping[Hashable, Hashable]) -> float:
    """Return the normalized mutual information of two partitions given as node -> community.

    NMI = 2 I(A; B) / (H(A) + H(B)), 1 for identical partitions and 0 for independent ones;
    two partitions that both put everyone in one community count as identical (1).

    References
    ----------
    Danon, L., Díaz-Guilera, A., Duch, J., & Arenas, A. (2005). Comparing community structure
    identification. J. Stat. Mech. P09008.

    Examples
    --------
    >>> normalized_mutual_information({1: "x", 2: "x", 3: "y", 4: "y"}, {1: 0, 2: 0, 3: 1, 4: 1})
    1.0
    >>> normalized_mutual_information({1: "x", 2: "x", 3: "y", 4: "y"}, {1: 0, 2: 1, 3: 0, 4: 1})
    0.0
    """
    if set(a) != set(b):
        raise ValueError("the two partitions must cover the same nodes")
    nodes = list(a)
    return _nmi(_labels([a[v] for v in nodes]), _labels([b[v] for v in nodes]))


def consistency(partitions: Sequence[Mapping[Hashable, Hashable]]) -> dict[Hashable, float]:
    """Return, per node, the mean over pairs of partitions of the Jaccard overlap of its communities.

    For one node and two partitions: |A ∩ B| / |A ∪ B|, where A and B are the node's community
    in each. 1 means the node always falls with exactly the same others.

    Examples
    --------
    >>> consistency([{1: 0, 2: 0, 3: 1}, {1: 0, 2: 0, 3: 0}])
    {1: 0.6666666666666666, 2: 0.6666666666666666, 3: 0.3333333333333333}
    """
    if not partitions:
        return {}
    nodes = list(partitions[0])
    labels = [_labels([p[v] for v in nodes]) for p in partitions]
    return dict(zip(nodes, _jaccard_means(labels).tolist()))


# --- helpers -------------------------------------------------------------------------------


def _sorted_ties(H: ArcGraph) -> ArcGraph:
    """Return H with each tie's lower position first and the ties in order: a seeded search visits them in that order."""
    low, high = np.minimum(H.source, H.target), np.maximum(H.source, H.target)
    order = np.lexsort((high, low))
    return H.with_(source=low[order], target=high[order], weight=H.weight[order])


def _stability(nodes: list[Hashable], runs: list[list[list[Hashable]]], seeds: list[int]) -> Stability:
    position = {v: i for i, v in enumerate(nodes)}
    labels = []
    for groups in runs:
        label = np.empty(len(nodes), dtype=np.int64)
        for number, group in enumerate(groups):
            label[[position[v] for v in group]] = number
        labels.append(label)
    scores = [_nmi(x, y) for x, y in combinations(labels, 2)]
    per_node = _jaccard_means(labels)
    mean, lowest = float(np.mean(scores)), float(min(scores))
    statement = (f"Stability over {len(runs)} runs (seeds {seeds[0]}–{seeds[-1]}): normalized mutual information "
                 f"between their partitions {mean:.2f} on average, {lowest:.2f} at the lowest (1 = identical). "
                 "Each person's consistency is the mean overlap (Jaccard) of its communities in two runs: "
                 "1 means it always falls with the same persons.")
    return Stability(seeds=seeds, mutual_information=mean, lowest_mutual_information=lowest,
                     consistency=dict(zip(nodes, per_node.tolist())), statement=statement)


def _labels(values: list[Hashable]) -> np.ndarray:
    codes: dict[Hashable, int] = {}
    return np.array([codes.setdefault(v, len(codes)) for v in values], dtype=np.int64)


def _nmi(x: np.ndarray, y: np.ndarray) -> float:
    n = len(x)
    if n == 0:
        return 1.0
    joint = np.unique(x * (int(y.max()) + 1) + y, return_counts=True)[1] / n
    px = np.bincount(x) / n
    py = np.bincount(y) / n
    hx = -float(np.sum(px[px > 0] * np.log(px[px > 0])))
    hy = -float(np.sum(py[py > 0] * np.log(py[py > 0])))
    hxy = -float(np.sum(joint * np.log(joint)))
    if hx + hy == 0:
        return 1.0
    return min(1.0, max(0.0, 2 * (hx + hy - hxy) / (hx + hy)))


def _jaccard_means(labels: list[np.ndarray]) -> np.ndarray:
    """Mean over pairs of label arrays of each node's community overlap, via the contingency table."""
    total = np.zeros(len(labels[0]))
    pairs = 0
    for x, y in combinations(labels, 2):
        cell = x * (int(y.max()) + 1) + y
        _, inverse, counts = np.unique(cell, return_inverse=True, return_counts=True)
        both = counts[inverse]
        total += both / (np.bincount(x)[x] + np.bincount(y)[y] - both)
        pairs += 1
    return total / pairs if pairs else np.ones(len(labels[0]))
