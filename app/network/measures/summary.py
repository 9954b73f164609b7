"""The slice at a glance: size, density, clustering, components, path lengths, degrees, warnings.

The warnings say in plain words when the figures should not be trusted far: a slice with few
ties, or one whose evidence comes mostly from a single collection (the network may then show
what one archive kept rather than what happened).
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Hashable, Mapping
from dataclasses import dataclass

import networkx as nx
import numpy as np

from app.network.measures import kernels
from app.network.measures.arcs import ArcGraph, component_labels, degrees
from app.network.measures.conventions import population_sentence, working_graph

__all__ = [
    "FEW_PERSONS",
    "FEW_TIES",
    "ONE_COLLECTION_SHARE",
    "NetworkSummary",
    "collection_warning",
    "concentration_note",
    "small_slice_warning",
    "summarize",
]

FEW_PERSONS = 30
"""Below this many persons a slice is called small."""
FEW_TIES = 50
"""Below this many ties a slice is called small."""
ONE_COLLECTION_SHARE = 0.5
"""Above this share of the attestations from one collection, the summary warns."""
EXACT_PATHS_UP_TO = 3000
"""Above this many persons in the largest component, path lengths are estimated from sampled sources."""
PATH_SOURCES = 200
"""Number of sampled sources of that estimate."""


@dataclass(frozen=True)
class NetworkSummary:
    """The figures that describe a whole slice."""

    persons: int
    """n, the number of persons (nodes)."""
    ties: int
    """Ties between two different persons (arcs on a directed slice)."""
    loops: int
    """Self-loops, counted apart and left out of every other figure."""
    attestations: int | None
    """Distinct attestations behind the ties, loops included (None if the graph does not say)."""
    directed: bool
    """True for a directed slice (direction=recorded)."""
    density: float | None
    """Ties ÷ possible ties: n(n − 1)/2 undirected, n(n − 1) directed (None below two persons)."""
    reciprocity: float | None
    """Share of arcs whose opposite arc exists too (directed slices only)."""
    transitivity: float
    """Share of connected triples that close into triangles (undirected view)."""
    average_clustering: float
    """Mean local clustering over all n persons, 0 for those with fewer than two ties (undirected view)."""
    components: int
    """Number of components (weakly connected on a directed slice), isolates included."""
    largest_component: int
    """Persons in the largest component."""
    largest_share: float | None
    """Share of the persons in the largest component."""
    diameter: int | None
    """Longest shortest path, in ties, within the largest component (None for an empty graph)."""
    average_path_length: float | None
    """Mean shortest path length, in ties, within the largest component (None below two persons)."""
    degree_distribution: dict[int, int]
    """Number of persons per degree (undirected view), degrees ascending."""
    in_degree_distribution: dict[int, int] | None
    """Number of persons per in-degree (directed slices only)."""
    out_degree_distribution: dict[int, int] | None
    """Number of persons per out-degree (directed slices only)."""
    warnings: list[str]
    """Plain sentences on what limits the figures."""
    conventions: str
    """Plain sentences: node set and n, loops, views, the component used for path lengths."""
    path_sources: int | None = None
    """None when path lengths are exact, else the number of sampled sources they were estimated from."""


def summarize(
    G: nx.Graph | ArcGraph, *, node_set: str | None = None, collection_counts: Mapping[str, int] | None = None,
    repository_counts: Mapping[str, int] | None = None, attestations: int | None = None, exact_paths: bool | None = None,
) -> NetworkSummary:
    """Return the summary of a slice's graph, with warnings.

    ``collection_counts`` and ``repository_counts`` give the number of attestations per
    collection and per repository in the slice (by name), ``attestations`` all of them (printed
    sources too); when one repository or one collection supplies more than half of them, a
    warning says so (``collection_warning``). Path lengths
    are exact up to ``EXACT_PATHS_UP_TO`` persons in the largest component and estimated from
    ``PATH_SOURCES`` sampled sources above, unless ``exact_paths`` says otherwise.

    References
    ----------
    Wasserman, S., & Faust, K. (1994). Social Network Analysis: Methods and Applications.
    Cambridge University Press (density, reciprocity, components).
    Watts, D. J., & Strogatz, S. H. (1998). Collective dynamics of 'small-world' networks.
    Nature 393, 440-442 (clustering).

    Examples
    --------
    >>> summary = summarize(nx.path_graph(4))
    >>> summary.ties, summary.density, summary.diameter, summary.degree_distribution
    (3, 0.5, 3, {1: 2, 2: 2})
    """
    arcs = G if isinstance(G, ArcGraph) else ArcGraph.from_networkx(G)
    n = len(arcs)
    directed = arcs.is_directed()
    plain = working_graph(arcs, loops="drop")
    undirected = working_graph(arcs, loops="drop", undirected=True)
    ties = plain.number_of_edges()
    possible = n * (n - 1) if directed else n * (n - 1) / 2
    labels = component_labels(undirected)
    sizes = np.bincount(labels) if n else np.zeros(0, dtype=np.int64)
    first = np.full(len(sizes), n, dtype=np.int64)
    np.minimum.at(first, labels, np.arange(n))  # persons come ids ascending: a component's first member
    order = sorted(range(len(sizes)), key=lambda c: (-int(sizes[c]), int(first[c])))
    parts = [int(sizes[c]) for c in order]
    largest = parts[0] if parts else 0
    exact = exact_paths if exact_paths is not None else largest <= EXACT_PATHS_UP_TO
    diameter, average = None, None
    if largest:
        component = undirected.subgraph(labels == order[0]) if len(parts) > 1 else undirected
        diameter, average = (kernels.path_lengths(component) if exact
                             else kernels.sampled_path_lengths(component, sources=PATH_SOURCES, seed=0))
    transitivity, clustering = kernels.transitivity(undirected)
    concentrated = collection_warning(collection_counts or {}, repositories=repository_counts, total=attestations)
    warnings = [w for w in (small_slice_warning(n, ties), concentrated) if w]
    path_part = (f"Diameter and average path length are those of the largest component ({largest} of {n} persons"
                 + (", the first of several of that size" if len(parts) > 1 and parts[1] == largest else "")
                 + "), counted in ties.") if largest else ""
    conventions = " ".join(s for s in [
        population_sentence(n, node_set),
        "Self-loops are counted apart and left out of every other figure.",
        "Transitivity, clustering, components, path lengths and degrees use the undirected view"
        + (" (two opposite arcs are one tie)." if directed else "."),
        path_part,
        "" if exact or not largest else (
            f"Both are estimated from the distances of {min(PATH_SOURCES, largest)} persons drawn at random "
            "(seed 0) to everyone in that component; the diameter shown is the longest distance found, "
            "so the true one may be larger."),
    ] if s)
    return NetworkSummary(
        persons=n, ties=ties, loops=int(np.count_nonzero(arcs.source == arcs.target)),
        attestations=None if isinstance(G, ArcGraph) else _attestations(G), directed=directed,
        density=ties / possible if n > 1 else None,
        reciprocity=_reciprocity(plain) if directed and ties else None,
        transitivity=transitivity, average_clustering=clustering,
        components=len(parts), largest_component=largest, largest_share=largest / n if n else None,
        diameter=diameter, average_path_length=average,
        degree_distribution=_distribution(degrees(undirected).values()),
        in_degree_distribution=_distribution(degrees(plain, way="in").values()) if directed else None,
        out_degree_distribution=_distribution(degrees(plain, way="out").values()) if directed else None,
        warnings=warnings, conventions=conventions, path_sources=None if exact or not largest else min(PATH_SOURCES, largest),
    )


def small_slice_warning(persons: int, ties: int) -> str | None:
    """Return a warning when the slice has fewer than 30 persons or 50 ties, else None.

    Examples
    --------
    >>> small_slice_warning(12, 15)
    'Only 12 persons and 15 ties: measures on so few ties say little.'
    >>> small_slice_warning(300, 900) is None
    True
    """
    if persons >= FEW_PERSONS and ties >= FEW_TIES:
        return None
    persons_text = f"{persons} {'person' if persons == 1 else 'persons'}"
    return f"Only {persons_text} and {ties} {'tie' if ties == 1 else 'ties'}: measures on so few ties say little."


def collection_warning(
    counts: Mapping[str, int], *, repositories: Mapping[str, int] | None = None, total: int | None = None,
    share: float = ONE_COLLECTION_SHARE,
) -> str | None:
    """Return a warning when one repository or one collection supplies more than ``share`` of the attestations.

    ``counts`` maps each collection (its name) to its attestations in the slice, ``repositories``
    each repository (its name) to its attestations, and ``total`` counts every attestation of the
    slice, printed sources included (the sum of ``counts`` when not given). The threshold, more
    than half, is common practice, not a published rule; the warning states it.

    Examples
    --------
    >>> print(collection_warning({"Vell family papers": 70, "Town register": 30}))  # doctest: +NORMALIZE_WHITESPACE
    Most of the attestations come from one source of evidence: 70% (70 of 100) come from one collection, Vell
    family papers. The network may show what that archive kept rather than all that happened. (A warning is
    given when one repository or one collection supplies more than 50% of the attestations: common practice,
    not a published rule.)
    >>> print(collection_warning({"A: letters": 30, "A: accounts": 30, "B: registers": 40},
    ...                          repositories={"A": 60, "B": 40}))  # doctest: +NORMALIZE_WHITESPACE
    Most of the attestations come from one source of evidence: 60% (60 of 100) come from one repository, A.
    The network may show what that archive kept rather than all that happened. (A warning is given when one
    repository or one collection supplies more than 50% of the attestations: common practice, not a published rule.)
    >>> collection_warning({"Vell family papers": 50, "Town register": 50}) is None
    True
    """
    total = sum(counts.values()) if total is None else total
    if not total:
        return None
    found = []
    for what, by_name in (("repository", repositories or {}), ("collection", counts)):
        if not by_name:
            continue
        name, top = max(by_name.items(), key=lambda item: (item[1], item[0]))
        if top / total > share:
            found.append(f"{top / total:.0%} ({top:,} of {total:,}) come from one {what}, {name}")
    if not found:
        return None
    return (f"Most of the attestations come from one source of evidence: {'; '.join(found)}. The network may show "
            f"what that archive kept rather than all that happened. ({_THRESHOLD.format(share=share)})")


def concentration_note(
    counts: Mapping[str, int], *, repositories: Mapping[str, int], total: int, share: float = ONE_COLLECTION_SHARE,
) -> str | None:
    """Return where most evidence comes from in plain words: the largest repository and collection and their shares.

    Examples
    --------
    >>> print(concentration_note({"A: letters": 30, "B: registers": 40}, repositories={"A": 30, "B": 40}, total=80))
    ... # doctest: +NORMALIZE_WHITESPACE
    The largest repository, B, supplies 50% of the attestations (40 of 80); the largest collection, B: registers,
    50%; 10 come from printed sources. (A warning is given when one repository or one collection supplies more
    than 50% of the attestations: common practice, not a published rule.)
    """
    if not total or not counts:
        return None
    repository, in_repository = max(repositories.items(), key=lambda item: (item[1], item[0]))
    collection, in_collection = max(counts.items(), key=lambda item: (item[1], item[0]))
    printed = total - sum(counts.values())
    printed_part = f"; {printed:,} come from printed sources" if printed else ""
    return (f"The largest repository, {repository}, supplies {in_repository / total:.0%} of the attestations "
            f"({in_repository:,} of {total:,}); the largest collection, {collection}, {in_collection / total:.0%}"
            f"{printed_part}. ({_THRESHOLD.format(share=share)})")


_THRESHOLD = ("A warning is given when one repository or one collection supplies more than {share:.0%} of the "
              "attestations: common practice, not a published rule.")


def _reciprocity(H: ArcGraph) -> float:
    """Share of the arcs whose opposite arc is there too, as networkx's ``overall_reciprocity`` (loops left out)."""
    span = len(H) + 1
    forward, backward = H.source * span + H.target, H.target * span + H.source
    return float(np.count_nonzero(np.isin(forward, backward)) / len(forward))


def _attestations(G: nx.Graph) -> int | None:
    ids: set[Hashable] = set()
    carried = False
    for _, _, data in G.edges(data=True):
        if "attestation_ids" in data:
            carried = True
            ids.update(data["attestation_ids"])
    return len(ids) if carried else None


def _distribution(degrees) -> dict[int, int]:  # noqa: ANN001 - any iterable of ints
    return dict(sorted(Counter(int(d) for d in degrees).items()))
