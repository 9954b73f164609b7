"""Centrality: how many ties a person has, how close they are to everyone, how much lies between.

Every function takes a graph built from a slice (``app.network.slice.build_graph``: persons as
nodes, ties with a ``weight``) and returns a :class:`MeasureResult` holding every node of the
graph, the normalized ``values``, the ``raw`` figures and the conventions as sentences.

Degree, strength and eigenvector centrality use the undirected view; the ``in_`` and ``out_``
measures need a directed slice; closeness, harmonic closeness, betweenness and PageRank follow
the recorded direction of a directed slice (closeness counts the paths that arrive at a
person, as networkx does). networkx computes every measure and is the reference; igraph
computes the path-based ones by default (``engine="igraph"``, see ``kernels``), giving the
same figures.
"""

from __future__ import annotations

import inspect
import math
import random
from collections.abc import Callable, Hashable
from typing import Any

import networkx as nx
import numpy as np

from app.network.measures import arcs, kernels
from app.network.measures.conventions import (
    DISTANCE,
    DISTANCE_RULE,
    DISTANCE_SCALE,
    WEIGHT,
    direction_sentence,
    induced,
    loops_sentence,
    population_sentence,
    with_distances,
    working_graph,
)
from app.network.measures.results import RANK_TOLERANCE, MeasureError, MeasureResult, Sampling

__all__ = [
    "DIRECTED_MEASURES",
    "ENGINES",
    "MEASURES",
    "PAGERANK_TOLERANCE",
    "betweenness",
    "closeness",
    "compute",
    "degree",
    "eigenvector",
    "harmonic",
    "in_degree",
    "in_strength",
    "out_degree",
    "out_strength",
    "pagerank",
    "strength",
    "weighted_betweenness",
    "weighted_closeness",
]

ENGINES = ("igraph", "networkx")
PAGERANK_TOLERANCE = 1e-10
"""PageRank's power iteration stops when the values move less than this per person (networkx's
default, 1e-6, leaves them off by up to 1e-4 of their size)."""

Values = dict[Hashable, float | None]

LOOP_EFFECT = "a loop adds 2 to its person's degree and twice its weight to strength, as networkx counts; paths ignore it"


def degree(G: nx.Graph, *, loops: str = "drop", node_set: str | None = None) -> MeasureResult:
    """Return degree centrality: the persons each person is tied to, divided by n - 1.

    Parameters
    ----------
    G : graph
        A Graph or DiGraph (its undirected view is used).
    loops : "drop" or "keep"
        Whether self-loops count.
    node_set : str, optional
        The slice's node set, named in the conventions.

    Returns
    -------
    MeasureResult
        ``raw`` the number of ties, ``values`` raw / (n - 1).

    References
    ----------
    Freeman, L. C. (1979). Centrality in social networks: conceptual clarification. Social
    Networks 1(3), 215-239.

    Examples
    --------
    >>> result = degree(nx.star_graph(3))
    >>> result.raw[0], result.values[0], result.values[1]
    (3.0, 1.0, 0.3333333333333333)
    """
    H = working_graph(G, loops=loops, undirected=True)
    raw = _degrees(H)
    values, reasons = _per_other_person(raw, len(H))
    return _result("degree", G, H, values, raw, reasons, loops=loops, node_set=node_set, undirected=True,
                   text="value = the number of persons a person is tied to ÷ (n − 1); raw = that number.")


def in_degree(G: nx.DiGraph, *, loops: str = "drop", node_set: str | None = None) -> MeasureResult:
    """Return in-degree centrality: the arcs that reach each person, divided by n - 1.

    Examples
    --------
    >>> result = in_degree(nx.DiGraph([(1, 2), (3, 2)]))
    >>> result.raw[2], result.values[2]
    (2.0, 1.0)
    """
    return _directed_degree(G, "in_degree", weighted=False, loops=loops, node_set=node_set)


def out_degree(G: nx.DiGraph, *, loops: str = "drop", node_set: str | None = None) -> MeasureResult:
    """Return out-degree centrality: the arcs that leave each person, divided by n - 1.

    Examples
    --------
    >>> out_degree(nx.DiGraph([(1, 2), (1, 3)])).raw[1]
    2.0
    """
    return _directed_degree(G, "out_degree", weighted=False, loops=loops, node_set=node_set)


def strength(G: nx.Graph, *, weight: str | None = "weight", loops: str = "drop", node_set: str | None = None) -> MeasureResult:
    """Return strength: the sum of the weights of each person's ties (not normalized).

    Examples
    --------
    >>> G = nx.Graph()
    >>> G.add_edge("a", "b", weight=2.0)
    >>> G.add_edge("a", "c", weight=3.0)
    >>> strength(G).values["a"]
    5.0
    """
    H = working_graph(G, weight=weight, loops=loops, undirected=True)
    raw = _degrees(H, weighted=True)
    return _result("strength", G, H, dict(raw), raw, {}, loops=loops, node_set=node_set, undirected=True,
                   text="value = raw = the sum of the weights of a person's ties (the slice's weight); not normalized.")


def in_strength(G: nx.DiGraph, *, weight: str | None = "weight", loops: str = "drop", node_set: str | None = None) -> MeasureResult:
    """Return in-strength: the sum of the weights of the arcs that reach each person.

    Examples
    --------
    >>> G = nx.DiGraph()
    >>> G.add_edge("a", "b", weight=2.0)
    >>> in_strength(G).values["b"]
    2.0
    """
    return _directed_degree(G, "in_strength", weighted=True, weight=weight, loops=loops, node_set=node_set)


def out_strength(G: nx.DiGraph, *, weight: str | None = "weight", loops: str = "drop", node_set: str | None = None) -> MeasureResult:
    """Return out-strength: the sum of the weights of the arcs that leave each person.

    Examples
    --------
    >>> G = nx.DiGraph()
    >>> G.add_edge("a", "b", weight=2.0)
    >>> out_strength(G).values["a"]
    2.0
    """
    return _directed_degree(G, "out_strength", weighted=True, weight=weight, loops=loops, node_set=node_set)


def closeness(G: nx.Graph, *, loops: str = "drop", node_set: str | None = None, engine: str = "igraph") -> MeasureResult:
    """Return closeness with the Wasserman-Faust correction, path lengths counted in ties.

    ``values`` are (r - 1)/(sum of distances) x (r - 1)/(n - 1), where r counts the persons in
    reach (the person included), as networkx's ``closeness_centrality(wf_improved=True)``;
    ``raw`` is (r - 1)/(sum of distances), closeness within the person's own part of the
    network. On a directed slice the distances are those of the paths arriving at the person.
    A person whom no path reaches gets 0.

    References
    ----------
    Freeman, L. C. (1979). Centrality in social networks: conceptual clarification. Social
    Networks 1(3), 215-239.
    Wasserman, S., & Faust, K. (1994). Social Network Analysis: Methods and Applications.
    Cambridge University Press, p. 201.

    Examples
    --------
    >>> result = closeness(nx.path_graph(3))
    >>> result.values[1], result.values[0]
    (1.0, 0.6666666666666666)
    """
    return _closeness(G, "closeness", weight=None, loops=loops, node_set=node_set, engine=engine)


def weighted_closeness(
    G: nx.Graph, *, weight: str | None = "weight", loops: str = "drop", node_set: str | None = None, engine: str = "igraph"
) -> MeasureResult:
    """Return closeness as :func:`closeness`, with the length of a tie 1/weight.

    Lengths are counted in whole units of 1/720720 (see ``conventions.distance_units``), so
    that both libraries see the same ties between paths.

    Examples
    --------
    >>> G = nx.Graph()
    >>> G.add_edge(0, 1, weight=2.0)
    >>> G.add_edge(1, 2, weight=2.0)
    >>> weighted_closeness(G).values[1]
    2.0
    """
    return _closeness(G, "weighted_closeness", weight=weight, loops=loops, node_set=node_set, engine=engine)


def harmonic(G: nx.Graph, *, loops: str = "drop", node_set: str | None = None, engine: str = "igraph") -> MeasureResult:
    """Return harmonic closeness: the mean of 1/d over the n - 1 other persons (0 if no path).

    ``raw`` is the sum of 1/d; on a directed slice d is the length of the paths arriving at the
    person, as networkx's ``harmonic_centrality``. Unlike closeness it needs no correction on
    a network in several pieces.

    References
    ----------
    Marchiori, M., & Latora, V. (2000). Harmony in the small-world. Physica A 285, 539-546.

    Examples
    --------
    >>> result = harmonic(nx.path_graph(3))
    >>> result.raw[0], result.values[0]
    (1.5, 0.75)
    """
    engine = _check_engine(engine)
    H = working_graph(G, loops=loops)
    raw: Values = dict(kernels.harmonic(H) if engine == "igraph" else nx.harmonic_centrality(H))
    values, reasons = _per_other_person(raw, len(H))
    for node in _unreached(H):
        reasons.setdefault(node, _unreached_reason(H))
    return _result("harmonic", G, H, values, raw, reasons, loops=loops, node_set=node_set, undirected=False, engine=engine,
                   text="value = the sum of 1/d over the other persons ÷ (n − 1), d the length in ties of the shortest path"
                        + (" arriving at the person" if H.is_directed() else "") + " (1/d = 0 where no path); raw = the sum.")


def betweenness(
    G: nx.Graph, *, loops: str = "drop", node_set: str | None = None, engine: str = "igraph",
    samples: int | None = None, seed: int = 0,
) -> MeasureResult:
    """Return betweenness: how much of the shortest paths between others pass through a person.

    ``raw`` is Freeman's figure: every pair of other persons shares one unit among its shortest
    paths (counted in ties), and a person gets the shares of the paths through it; pairs are
    unordered on an undirected slice and ordered on a directed one. ``values`` normalize it as
    networkx does: x 2/((n - 1)(n - 2)) undirected, / ((n - 1)(n - 2)) directed.

    With ``samples=k`` (fewer than n), only the paths from k persons drawn at random with
    ``seed`` are followed and the sums scaled up (Brandes & Pich 2007), exactly as networkx's
    ``betweenness_centrality(k=k, seed=seed)``; ``sampling`` then gives each value's standard
    error.

    References
    ----------
    Freeman, L. C. (1977). A set of measures of centrality based on betweenness. Sociometry 40,
    35-41; and (1979), Social Networks 1(3), 215-239.
    Brandes, U. (2001). A faster algorithm for betweenness centrality. Journal of Mathematical
    Sociology 25(2), 163-177.
    Brandes, U., & Pich, C. (2007). Centrality estimation in large networks. International
    Journal of Bifurcation and Chaos 17(7), 2303-2318.

    Examples
    --------
    >>> result = betweenness(nx.star_graph(3))
    >>> result.raw[0], result.values[0], result.values[1]
    (3.0, 1.0, 0.0)
    """
    return _betweenness(G, "betweenness", weight=None, loops=loops, node_set=node_set, engine=engine, samples=samples, seed=seed)


def weighted_betweenness(
    G: nx.Graph, *, weight: str | None = "weight", loops: str = "drop", node_set: str | None = None,
    engine: str = "igraph", samples: int | None = None, seed: int = 0,
) -> MeasureResult:
    """Return betweenness as :func:`betweenness`, with the length of a tie 1/weight.

    Lengths are counted in whole units of 1/720720, so that two paths of equal length (such
    as 1/2 + 1/2 and 1/3 + 1/3 + 1/3) are an exact tie and share their pair's unit.

    Examples
    --------
    >>> G = nx.Graph()
    >>> G.add_weighted_edges_from([("a", "b", 2), ("b", "z", 2), ("a", "c", 3), ("c", "d", 3), ("d", "z", 3)])
    >>> weighted_betweenness(G).raw["b"]
    0.5
    """
    return _betweenness(G, "weighted_betweenness", weight=weight, loops=loops, node_set=node_set, engine=engine,
                        samples=samples, seed=seed)


def eigenvector(G: nx.Graph, *, weight: str | None = "weight", loops: str = "drop", node_set: str | None = None) -> MeasureResult:
    """Return eigenvector centrality of the undirected view, weighted, with unit Euclidean length.

    Computed by networkx's power iteration (at most 1000 steps, tolerance 1e-6 per person) on
    the persons with ties; a person without ties gets 0. If the iteration does not converge,
    every value is None with that reason.

    References
    ----------
    Bonacich, P. (1987). Power and centrality: a family of measures. American Journal of
    Sociology 92(5), 1170-1182.

    Examples
    --------
    >>> result = eigenvector(nx.complete_graph(4))
    >>> round(result.values[0], 6)
    0.5
    """
    H = working_graph(G, weight=weight, loops=loops, undirected=True)
    degree_of = _degrees(H)
    isolates = [v for v in H if degree_of[v] == 0]
    values: Values = dict.fromkeys(H, 0.0)
    reasons = dict.fromkeys(isolates, "no ties in the slice: 0")
    if isinstance(H, arcs.ArcGraph):
        core: Any = H.subgraph(np.asarray([degree_of[v] > 0 for v in H], dtype=bool))
    else:
        core = induced(H, {v for v in H if degree_of[v] > 0})
    if len(core):
        try:
            if isinstance(core, arcs.ArcGraph):
                values.update(arcs.eigenvector(core, max_iter=1000))
            else:
                values.update(nx.eigenvector_centrality(core, weight=WEIGHT, max_iter=1000))
        except (nx.PowerIterationFailedConvergence, arcs.PowerIterationFailed):
            values.update(dict.fromkeys(core, None))
            reasons.update(dict.fromkeys(core, "the power iteration did not converge in 1000 steps"))
    if isinstance(core, arcs.ArcGraph):
        several = len(core) and len(set(arcs.component_labels(core).tolist())) > 1
    else:
        several = len(core) and not nx.is_connected(core)
    text = ("value = raw = the principal eigenvector of the weighted adjacency of the undirected view, "
            "scaled to Euclidean length 1 (networkx).")
    if several:
        text += (" The slice has several components: persons outside the component with the largest eigenvalue "
                 "get values near 0, so compare persons within one component.")
    return _result("eigenvector", G, H, values, dict(values), reasons, loops=loops, node_set=node_set, undirected=True, text=text)


def pagerank(
    G: nx.Graph, *, weight: str | None = "weight", alpha: float = 0.85, loops: str = "drop", node_set: str | None = None
) -> MeasureResult:
    """Return PageRank with damping ``alpha`` and the slice's weight; the values sum to 1.

    On a directed slice a person scores through the arcs that reach it; a person without ties
    keeps only its share of the random jump.

    References
    ----------
    Page, L., Brin, S., Motwani, R., & Winograd, T. (1999). The PageRank citation ranking:
    bringing order to the web. Stanford InfoLab technical report 1999-66.

    Examples
    --------
    >>> result = pagerank(nx.star_graph(2))
    >>> round(result.values[0], 4), round(sum(result.values.values()), 6)
    (0.4865, 1.0)
    """
    if not 0 < alpha < 1:
        raise MeasureError("alpha", alpha, "a number between 0 and 1")
    H = working_graph(G, weight=weight, loops=loops)
    values: Values = {}
    reasons: dict[Hashable, str] = {}
    if len(H):
        try:
            if isinstance(H, arcs.ArcGraph):
                values = arcs.pagerank(H, alpha=alpha, tol=PAGERANK_TOLERANCE, max_iter=1000)
            else:
                values = dict(nx.pagerank(H, alpha=alpha, weight=WEIGHT, tol=PAGERANK_TOLERANCE, max_iter=1000))
        except (nx.PowerIterationFailedConvergence, arcs.PowerIterationFailed):
            values = dict.fromkeys(H, None)
            reasons = dict.fromkeys(H, "the power iteration did not converge")
    degree_of = _degrees(H)
    for node in H:
        if degree_of[node] == 0:
            reasons.setdefault(node, "no ties in the slice: only its share of the random jump")
    return _result("pagerank", G, H, values, dict(values), reasons, loops=loops, node_set=node_set, undirected=False,
                   text=f"value = raw = PageRank with damping {alpha} and the slice's weight (networkx, iterated until the values "
                        f"move less than {_power_of_ten(PAGERANK_TOLERANCE)} per person); the values sum to 1"
                        + ("; a person scores through the arcs that reach it." if H.is_directed() else "."))


MEASURES: dict[str, Callable[..., MeasureResult]] = {
    "degree": degree,
    "in_degree": in_degree,
    "out_degree": out_degree,
    "strength": strength,
    "in_strength": in_strength,
    "out_strength": out_strength,
    "closeness": closeness,
    "harmonic": harmonic,
    "betweenness": betweenness,
    "weighted_closeness": weighted_closeness,
    "weighted_betweenness": weighted_betweenness,
    "eigenvector": eigenvector,
    "pagerank": pagerank,
}
"""Every measure by its name in URLs."""

DIRECTED_MEASURES = ("in_degree", "out_degree", "in_strength", "out_strength")
"""Measures that need a directed slice (direction=recorded)."""


def compute(G: nx.Graph, measure: str, **options: Any) -> MeasureResult:
    """Return the measure named ``measure`` (as in URLs) of every node of G.

    ``options`` are passed on to the measure's function where it accepts them (``loops``,
    ``node_set``, ``weight``, ``engine``, ``samples``, ``seed``...) and ignored where it does
    not, so a page can pass the same options for every measure. An unknown measure, or a
    directed measure on an undirected graph, raises MeasureError naming the accepted ones.

    Examples
    --------
    >>> compute(nx.path_graph(3), "betweenness", samples=None).raw[1]
    1.0
    """
    function = MEASURES.get(measure)
    if function is None:
        raise MeasureError("measure", measure, "one of " + ", ".join(MEASURES))
    accepted = inspect.signature(function).parameters
    return function(G, **{name: value for name, value in options.items() if name in accepted})


# --- helpers -------------------------------------------------------------------------------


def _directed_degree(
    G: nx.Graph, measure: str, *, weighted: bool, weight: str | None = None, loops: str, node_set: str | None
) -> MeasureResult:
    if not G.is_directed():
        undirected = [m for m in MEASURES if m not in DIRECTED_MEASURES]
        raise MeasureError("measure", measure, "on an undirected slice one of " + ", ".join(undirected)
                           + f" ({measure} needs direction=recorded)")
    H = working_graph(G, weight=weight if weighted else None, loops=loops)
    way = "reach" if measure.startswith("in_") else "leave"
    if weighted:
        raw = _degrees(H, weighted=True, way=measure[:measure.index("_")])
        values: Values = dict(raw)
        reasons: dict[Hashable, str] = {}
        text = f"value = raw = the sum of the weights of the arcs that {way} a person (the slice's weight); not normalized."
    else:
        raw = _degrees(H, way=measure[:measure.index("_")])
        values, reasons = _per_other_person(raw, len(H))
        text = f"value = the number of arcs that {way} a person ÷ (n − 1); raw = that number."
    return _result(measure, G, H, values, raw, reasons, loops=loops, node_set=node_set, undirected=False, text=text)


def _closeness(G: nx.Graph, measure: str, *, weight: str | None, loops: str, node_set: str | None, engine: str) -> MeasureResult:
    engine = _check_engine(engine)
    weighted = measure.startswith("weighted")
    H = working_graph(G, weight=weight if weighted else None, loops=loops)
    distance = DISTANCE if weighted else None
    if weighted:
        H = with_distances(H)
    if engine == "igraph":
        improved, within = kernels.closeness(H, distance=distance)
    else:
        improved = nx.closeness_centrality(H, distance=distance, wf_improved=True)
        within = nx.closeness_centrality(H, distance=distance, wf_improved=False)
    scale = DISTANCE_SCALE if weighted else 1  # closeness in units of 1/720720 back to 1/weight
    values: Values = {v: improved[v] * scale for v in H}
    raw: Values = {v: within[v] * scale for v in H}
    reasons = {node: _unreached_reason(H) for node in _unreached(H)}
    if len(H) < 2:
        values = dict.fromkeys(H, None)
        reasons = dict.fromkeys(H, "a slice of one person: there is no one to be close to")
    length = "1/weight (the slice's weight)" if weighted else "the number of ties"
    arriving = ", of the paths arriving at the person" if H.is_directed() else ""
    text = (f"value = closeness with the Wasserman–Faust correction: (r − 1)/Σd × (r − 1)/(n − 1), where d are the "
            f"shortest path lengths{arriving} to the r − 1 other persons in reach, a tie's length being {length}; "
            "raw = (r − 1)/Σd, closeness within the person's own part of the network; 0 where no path. "
            "Harmonic closeness is the alternative for a network in several pieces.")
    if weighted:
        text += " " + DISTANCE_RULE
    return _result(measure, G, H, values, raw, reasons, loops=loops, node_set=node_set, undirected=False, engine=engine, text=text)


def _betweenness(
    G: nx.Graph, measure: str, *, weight: str | None, loops: str, node_set: str | None, engine: str,
    samples: int | None, seed: int,
) -> MeasureResult:
    engine = _check_engine(engine)
    weighted = measure.startswith("weighted")
    H = working_graph(G, weight=weight if weighted else None, loops=loops)
    if weighted:
        H = with_distances(H)
    distance = DISTANCE if weighted else None
    n = len(H)
    directed = H.is_directed()
    if samples is not None and (isinstance(samples, bool) or not isinstance(samples, int) or samples < 2):
        raise MeasureError("samples", samples, "a whole number of 2 or more")
    sampled = samples is not None and samples < n  # k >= n: every source, the exact figure
    if sampled:
        raw, errors, pivots = _sampled_raw(H, samples, seed, distance, engine)
    elif engine == "igraph":
        raw = kernels.betweenness(H, distance=distance)
    else:
        raw = nx.betweenness_centrality(H, normalized=False, weight=distance)
    reasons: dict[Hashable, str] = {}
    scale = (1 if directed else 2) / ((n - 1) * (n - 2)) if n > 2 else 0.0
    values: Values = {v: raw[v] * scale for v in H}
    if n <= 2:
        values = dict.fromkeys(H, None)
        reasons = dict.fromkeys(H, f"a slice of {n} {'person' if n == 1 else 'persons'}: no path has a person between its ends")
    sampling = _sampling(H, values, errors, pivots, seed, scale) if sampled else None
    pairs = "ordered pairs (a → b and b → a apart)" if directed else "unordered pairs"
    normalization = "÷ ((n − 1)(n − 2))" if directed else "× 2/((n − 1)(n − 2))"
    length = "1/weight (the slice's weight)" if weighted else "the number of ties (hops)"
    text = (f"raw = the sum, over {pairs} of other persons, of the share of their shortest paths that pass through "
            f"the person (Freeman; Brandes's algorithm), a tie's length being {length}; value = raw {normalization}, "
            "as networkx normalizes.")
    if weighted:
        text += " " + DISTANCE_RULE
    if sampling is not None:
        text += " " + sampling.statement
    return _result(measure, G, H, values, dict(raw), reasons, loops=loops, node_set=node_set, undirected=False,
                   engine=engine, text=text, sampling=sampling)


SAMPLE_GROUPS = 20
"""The sampled sources are taken in this many groups (one path search per group); the spread of
the groups' shares gives the standard error. With at most this many sources, each is a group."""


def _sampled_raw(
    H: nx.Graph, samples: int, seed: int, distance: str | None, engine: str
) -> tuple[dict[Hashable, float], dict[Hashable, float | None], list[Hashable]]:
    """Estimate raw betweenness from ``samples`` random sources, as networkx does, with errors.

    The sources are drawn as networkx draws them (``random.Random(seed).sample(nodes, k)``).
    A person's betweenness sums the shares of the n - 1 other persons as sources; a random
    sample of m of them (m = k, or k - 1 for a sampled person) estimates it without bias as
    (n - 1)/m times their sum. The standard error comes from the spread of the shares of the
    sources taken in ``SAMPLE_GROUPS`` groups (batch means: a group of b sources has b times
    the variance of one source's share), with the correction for sampling without replacement;
    with no more sources than groups, each source is a group and this is the plain spread of
    the sampled shares.
    """
    n = len(H)
    pivots = random.Random(seed).sample(list(H), samples)
    groups = [pivots[g::SAMPLE_GROUPS] for g in range(min(SAMPLE_GROUPS, samples))]
    if engine == "igraph":
        nodes, shares = kernels.betweenness_by_group(H, groups, distance=distance)
    else:
        nodes = list(H)
        shares = np.array([[found[v] for v in nodes] for found in (
            nx.betweenness_centrality_subset(H, group, nodes, normalized=False, weight=distance) for group in groups)])
    # sizes[g, i]: the sources of group g other than node i itself (a source's own share is 0)
    sizes = np.repeat(np.array([len(group) for group in groups], dtype=float)[:, None], len(nodes), axis=1)
    position = {v: i for i, v in enumerate(nodes)}
    for g, group in enumerate(groups):
        sizes[g, [position[v] for v in group]] -= 1
    m = sizes.sum(axis=0)
    total = shares.sum(axis=0)
    mean = total / m
    used = sizes > 0
    counted = used.sum(axis=0)
    deviations = np.where(used, (shares - sizes * mean) ** 2 / np.where(used, sizes, 1), 0.0).sum(axis=0)
    raw: dict[Hashable, float] = {}
    errors: dict[Hashable, float | None] = {}
    for i, v in enumerate(nodes):
        raw[v] = float((n - 1) / m[i] * total[i])
        if counted[i] < 2:
            errors[v] = None
            continue
        variance = max(0.0, deviations[i] / (counted[i] - 1))
        errors[v] = (n - 1) * math.sqrt(variance / m[i] * (1 - m[i] / (n - 1)))
    return raw, errors, pivots


def _sampling(
    H: nx.Graph, values: Values, errors: dict[Hashable, float | None], pivots: list[Hashable], seed: int, scale: float
) -> Sampling:
    standard_errors = {v: (e * scale if e is not None else None) for v, e in errors.items()}
    known = [e for e in standard_errors.values() if e is not None]
    largest = max(known, default=0.0)
    top = max((v for v in values.values() if v is not None), default=0.0)
    share = f" ({largest / top:.0%} of the highest value)" if top > 0 else ""
    statement = (f"Estimated from the paths of {len(pivots)} of the {len(H)} persons, drawn at random with seed {seed} "
                 "(Brandes & Pich 2007, as networkx's betweenness_centrality(k, seed)): each person's sum over those "
                 "sources is scaled by (n − 1)/k (by (n − 1)/(k − 1) for a drawn person), an unbiased estimate. "
                 "Each value carries its standard error, from the spread of the sampled sources' shares "
                 f"(the sources taken in {min(SAMPLE_GROUPS, len(pivots))} groups); the largest is {largest:.3g}{share}. "
                 "More sources shrink it roughly as 1/√k.")
    return Sampling(samples=len(pivots), seed=seed, standard_errors=standard_errors, statement=statement)


def _per_other_person(raw: dict[Hashable, float], n: int) -> tuple[Values, dict[Hashable, str]]:
    if n < 2:
        return dict.fromkeys(raw, None), dict.fromkeys(raw, "a slice of one person: n − 1 = 0, nothing to divide by")
    return {v: r / (n - 1) for v, r in raw.items()}, {}


def _degrees(H: nx.Graph | arcs.ArcGraph, *, weighted: bool = False, way: str = "all") -> dict[Hashable, float]:
    """Return each node's degree (or strength with ``weighted``): ``all``, ``in`` or ``out``."""
    if isinstance(H, arcs.ArcGraph):
        return arcs.degrees(H, weighted=weighted, way=way)
    view = {"all": H.degree, "in": getattr(H, "in_degree", None), "out": getattr(H, "out_degree", None)}[way]
    return {v: float(d) for v, d in view(weight=WEIGHT if weighted else None)}


def _unreached(H: nx.Graph) -> list[Hashable]:
    """Return the nodes that no path reaches (no other person reaches them, on a directed graph)."""
    if isinstance(H, arcs.ArcGraph):
        return arcs.unreached(H)
    if H.is_directed():
        return [v for v in H if not any(u != v for u in H.predecessors(v))]
    return [v for v in H if not any(u != v for u in H.neighbors(v))]


def _unreached_reason(H: nx.Graph) -> str:
    return ("no other person has a path to this person: 0" if H.is_directed()
            else "no path to any other person: 0")


def _power_of_ten(number: float) -> str:
    mantissa, exponent = f"{number:e}".split("e")
    return f"{float(mantissa):g}e{int(exponent)}"


def _check_engine(engine: str) -> str:
    if engine not in ENGINES:
        raise MeasureError("engine", engine, "one of " + ", ".join(ENGINES))
    return engine


def _result(
    measure: str, G: nx.Graph, H: nx.Graph, values: Values, raw: Values, reasons: dict[Hashable, str], *,
    loops: str, node_set: str | None, undirected: bool, text: str, engine: str = "networkx",
    sampling: Sampling | None = None,
) -> MeasureResult:
    computed = ("Computed by igraph, which the tests hold to networkx's figures." if engine == "igraph"
                else "Computed by networkx.")
    conventions = " ".join([
        population_sentence(len(H), node_set),
        direction_sentence(G, undirected_measure=undirected),
        loops_sentence(loops, LOOP_EFFECT),
        text,
        computed,
        f"Ranks tie when values agree within a relative {_power_of_ten(RANK_TOLERANCE)}.",
    ])
    return MeasureResult(measure=measure, values=values, raw=raw, conventions=conventions, reasons=reasons,
                         engine=engine, sampling=sampling)
