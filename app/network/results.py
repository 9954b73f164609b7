"""Measures on demand: computed on a slice, stored with the data version, shared by every process.

:func:`get_or_compute` is the one door to every measure page: it returns the stored result of a
request (measure, options, slice, visibility) when there is one, and otherwise builds the
slice's graph, computes, stores and returns the result. A stored result outlives later writes:

- an expensive measure (paths, cliques, communities) is served as it is, with the version it
  was computed at, until someone asks for a recompute;
- a cheap one (degrees, strength, eigenvector, PageRank, summary, components, cut points) is
  recomputed as soon as the data version moved, unless its slice is large (``LARGE_SLICE``).

Results are plain JSON with persons named by key, never by id, so that they read the same
in every process and after a restart. A background worker can take over the computing part of
:func:`get_or_compute_many` (``SliceGraph.build`` + :func:`compute_result`) without the pages noticing.
"""

from __future__ import annotations

import json
import math
import time
from collections import Counter
from collections.abc import Callable, Hashable
from dataclasses import asdict, dataclass, field, replace
from datetime import UTC, datetime
from typing import Any
from urllib.parse import urlencode

import networkx as nx
import numpy as np
from sqlalchemy.orm import Session

from app.db import Database
from app.network.comembership import PROJECTION_CLIQUE_LIMIT, co_membership_graph, membership_collection_counts, mode_conventions, mode_population
from app.network.measures.cliques import CLIQUE_LIMIT
from app.network.measures import MEASURES, cliques, communities, components, compute, cuts, summarize
from app.network.measures.communities import STABILITY_RUNS
from app.network.measures.cuts import TieRecord
from app.network.measures.results import MeasureError
from app.network.measures.summary import collection_warning, concentration_note
from app.network.measures.arcs import ArcGraph
from app.network.same_as import merge_nodes, same_as_mapping
from app.network.slice import ResolvedSlice, Slice, collection_counts, node_set_of, resolve_slice
from app.network.slice_arrays import SliceArrays, TieArrays, slice_arrays, tie_arrays
from app.store.measure_results import get_stored_result, save_result
from app.store.network_labels import list_collection_names, list_collection_repositories, list_person_keys
from app.store.summary import get_data_version

__all__ = [
    "CHEAP",
    "FAMILIES",
    "LARGE_SLICE",
    "SAMPLES",
    "SAMPLE_ABOVE",
    "VISIBILITY_ALL",
    "Outcome",
    "SliceGraph",
    "compute_result",
    "get_or_compute",
    "get_or_compute_many",
    "is_expensive",
    "options_key",
    "peek_outcome",
    "slice_key",
]

VISIBILITY_ALL = "all"
"""The visibility of a viewer who may see every person."""
FAMILIES = ("summary", "components", "cut-points", "cliques", "communities")
"""The measure pages other than the centralities, by their path under /network/."""
CHEAP = frozenset({"summary", "components", "cut-points", "degree", "in_degree", "out_degree", "strength",
                   "in_strength", "out_strength", "eigenvector", "pagerank"})
"""Measures recomputed silently when the data changed; the others wait for a recompute."""
LARGE_SLICE = 3000
"""Above this many persons even a cheap measure's stale result waits for a recompute."""
SAMPLE_ABOVE = 3000
"""Above this many persons, betweenness is first estimated from sampled path sources."""
SAMPLES = 300
"""Number of sampled path sources of that estimate."""
SAMPLED = ("betweenness", "weighted_betweenness")


@dataclass(frozen=True)
class Outcome:
    """A result and how fresh it is."""

    measure: str
    """The measure or page family."""
    payload: dict[str, Any]
    """The result (persons by key)."""
    computed_at_version: int
    """The data version it was computed at."""
    current_version: int
    """The data version now."""
    computed_at: datetime
    """When it was computed (UTC)."""
    seconds: float
    """How long the computation took."""
    from_store: bool
    """True when it was read from the stored results rather than computed for this request."""

    @property
    def changes_since(self) -> int:
        """Writes to the data since the result was computed."""
        return max(0, self.current_version - self.computed_at_version)


def is_expensive(measure: str, persons: int | None = None) -> bool:
    """Return True for a measure whose stale result is shown until someone asks for a recompute.

    Paths, cliques and communities always are; on a slice of more than ``LARGE_SLICE`` persons
    every measure is (reading the evidence alone takes seconds there, and the summary's exact
    path lengths far longer).

    Examples
    --------
    >>> is_expensive("betweenness"), is_expensive("degree"), is_expensive("degree", persons=20_000)
    (True, False, True)
    """
    return measure not in CHEAP or (persons is not None and persons > LARGE_SLICE)


def slice_key(slice_: Slice) -> str:
    """Return the canonical text of a slice: its non-default parameters as a sorted query string.

    Examples
    --------
    >>> slice_key(Slice(kind=("letter", "kinship"), certainty="probable"))
    'certainty=probable&kind=kinship&kind=letter'
    """
    return urlencode(sorted(slice_.to_query()))


def options_key(options: dict[str, Any]) -> str:
    """Return the canonical JSON of a measure's options.

    Examples
    --------
    >>> options_key({"seed": 0, "method": "leiden"})
    '{"method":"leiden","seed":0}'
    """
    return json.dumps(options, sort_keys=True, separators=(",", ":"))


def get_or_compute(
    database: Database, *, measure: str, slice: Slice, options: dict[str, Any] | None = None,  # noqa: A002
    visibility: str = VISIBILITY_ALL, recompute: bool = False, progress: Callable[[float], None] | None = None,
) -> Outcome:
    """Return the stored result of the request, or compute, store and return it.

    A stored result at the current data version is returned as it is; an older one is returned
    for an expensive measure unless ``recompute``, and recomputed for a cheap one. Raises
    MeasureError for an unknown measure or option, SliceError for a slice key that names nothing.
    """
    return get_or_compute_many(database, requests=[(measure, options or {})], slice=slice, visibility=visibility,
                               recompute=recompute, progress=progress)[0]


def peek_outcome(
    database: Database, *, measure: str, slice: Slice, options: dict[str, Any] | None = None,  # noqa: A002
    visibility: str = VISIBILITY_ALL,
) -> Outcome | None:
    """Return the stored result that :func:`get_or_compute` would serve without computing, or None."""
    key = {"measure": measure, "options": options_key(options or {}), "slice_key": slice_key(slice), "visibility": visibility}
    with database.read() as session:
        current = get_data_version(session=session)
        stored = get_stored_result(session=session, **key)
    if stored is None or not (stored.data_version == current or is_expensive(measure, stored.payload.get("n"))):
        return None
    return Outcome(measure, stored.payload, stored.data_version, current, stored.computed_at, stored.seconds, True)


def get_or_compute_many(
    database: Database, *, requests: list[tuple[str, dict[str, Any]]], slice: Slice,  # noqa: A002
    visibility: str = VISIBILITY_ALL, recompute: bool = False, progress: Callable[[float], None] | None = None,
) -> list[Outcome]:
    """Return the outcome of each (measure, options) on one slice, as :func:`get_or_compute` does.

    The slice's graph is built once for all the measures that need computing; ``progress`` is
    told the share done (the graph counts for a fifth).
    """
    for measure, _options in requests:
        if measure not in MEASURES and measure not in FAMILIES:
            raise MeasureError("measure", measure, "one of " + ", ".join([*MEASURES, *FAMILIES]))
    keys = [{"measure": m, "options": options_key(o), "slice_key": slice_key(slice), "visibility": visibility}
            for m, o in requests]
    outcomes: list[Outcome | None] = []
    with database.read() as session:
        current = get_data_version(session=session)
        for (measure, _options), key in zip(requests, keys):
            stored = get_stored_result(session=session, **key)
            fresh_enough = stored is not None and (
                stored.data_version == current or is_expensive(measure, stored.payload.get("n")))
            outcomes.append(Outcome(measure, stored.payload, stored.data_version, current, stored.computed_at,
                                    stored.seconds, True) if fresh_enough and not recompute else None)
    pending = [i for i, outcome in enumerate(outcomes) if outcome is None]
    if not pending:
        return outcomes  # type: ignore[return-value]
    computed: dict[int, tuple[dict[str, Any], float]] = {}
    with database.read() as session:
        version = get_data_version(session=session)  # read in the same transaction as the evidence
        graph = SliceGraph.build(session, slice)
        if progress:
            progress(0.2)
        for i in pending:
            started = time.perf_counter()
            payload = compute_result(session, graph, measure=requests[i][0], options=dict(requests[i][1]))
            computed[i] = (payload, time.perf_counter() - started + (graph.seconds if i == pending[0] else 0.0))
            if progress:
                progress(0.2 + 0.8 * len(computed) / len(pending))
    computed_at = datetime.now(UTC).replace(tzinfo=None)
    with database.write() as session:
        for i, (payload, seconds) in computed.items():
            saved = save_result(session=session, **keys[i], data_version=version, payload=payload,
                                computed_at=computed_at, seconds=seconds)
            outcomes[i] = Outcome(requests[i][0], saved.payload, saved.data_version, version, saved.computed_at,
                                  saved.seconds, False)
        current = get_data_version(session=session)
    return [replace(outcome, current_version=current) for outcome in outcomes]  # type: ignore[arg-type]


@dataclass(frozen=True)
class SliceGraph:
    """The graph of a slice with what the measures need beside it.

    ``arcs`` holds the graph as arrays (built straight from the per-relation counts made in SQL),
    which the centralities and components read; ``G``, the networkx graph with each tie's
    relations and counts, is built on first use (cut points, cliques, communities, summary), so
    the pages that need only arrays never pay for it.
    """

    slice: Slice
    key_of: dict[int, str]  # person id -> key
    resolved: ResolvedSlice
    attestations: dict[int, int]  # relation id -> its attestations in the slice
    seconds: float  # time taken to read the evidence and build the graph
    arcs: ArcGraph
    make_graph: Callable[[], nx.Graph]
    relations: SliceArrays | None = None  # the relations behind the ties (None for a co-membership graph)
    ties: TieArrays | None = None  # tie k is arc k of ``arcs``, with its counts
    _built: dict[str, nx.Graph] = field(default_factory=dict, compare=False, repr=False)

    @property
    def G(self) -> nx.Graph:
        """The networkx graph of the slice (built once, on first use)."""
        if "G" not in self._built:
            self._built["G"] = self.make_graph()
        return self._built["G"]

    @classmethod
    def build(cls, session: Session, slice_: Slice) -> SliceGraph:
        """Read the slice's relations and build its graph as arrays (SliceError for an unknown key).

        One plain read of the evidence, counted in numpy (``app.network.slice_arrays``): no
        Python object per relation or per tie, and only the persons' keys, not their labels.
        """
        if slice_.mode != "relations":
            return cls.from_co_membership(session, slice_)
        started = time.perf_counter()
        resolved = resolve_slice(session, slice_)
        same_as = same_as_mapping(session, slice_.same_as)  # persons linked as possibly one, under same_as=merge
        relations = slice_arrays(session, resolved, same_as)
        ties = tie_arrays(relations, direction=slice_.direction, loops=slice_.loops)
        related = set(np.concatenate([relations.a, relations.b]).tolist())
        tied = set(np.concatenate([relations.a[ties.tied], relations.b[ties.tied]]).tolist())
        nodes = sorted(merge_nodes(node_set_of(session, resolved, related, tied), same_as))
        keys = list_person_keys(session=session, ids=nodes)
        node_array = np.asarray(nodes, dtype=np.int64)
        weight = {"attestations": ties.attestations, "none": np.ones(len(ties))}.get(slice_.weight, ties.documents)
        array_graph = ArcGraph.from_arrays(nodes, np.searchsorted(node_array, ties.u), np.searchsorted(node_array, ties.v),
                                           weight, directed=slice_.direction == "recorded")
        return cls(slice_, {node: keys[node] for node in nodes}, resolved,
                   dict(zip(relations.relation.tolist(), relations.attestations.tolist())), time.perf_counter() - started,
                   array_graph, lambda: _graph_of(array_graph, relations, ties), relations, ties)

    @classmethod
    def from_co_membership(cls, session: Session, slice_: Slice) -> SliceGraph:
        """Build the graph of ``mode=co-membership`` (persons tied by shared groups) or ``mode=both``."""
        started = time.perf_counter()
        relations = cls.build(session, slice_.with_(mode="relations")) if slice_.mode == "both" else None
        resolved = resolve_slice(session, slice_)
        G = co_membership_graph(session, resolved, relations=relations.G if relations else None)
        keys = list_person_keys(session=session, ids=list(G))
        return cls(slice_, {node: keys[node] for node in G}, resolved,
                   relations.attestations if relations else {}, time.perf_counter() - started,
                   ArcGraph.from_networkx(G), lambda: G)


def _graph_of(arcs: ArcGraph, relations: SliceArrays, ties: TieArrays) -> nx.Graph:
    """Return the networkx graph of the slice (``graph_from_evidence``'s edges, without attestation or document ids)."""
    G: nx.Graph = nx.DiGraph() if arcs.directed else nx.Graph()
    G.add_nodes_from(arcs.nodes)
    starts = np.searchsorted(ties.entry_tie, np.arange(len(ties) + 1)).tolist()
    relation_ids, kinds = relations.relation[ties.entry_relation].tolist(), relations.kind[ties.entry_relation].tolist()
    G.add_edges_from(
        (u, v, {"weight": w, "attestations": a, "documents": d, "relation_ids": sorted(relation_ids[s:e]),
                "kinds": sorted(set(kinds[s:e]))})
        for u, v, w, a, d, s, e in zip(ties.u.tolist(), ties.v.tolist(), arcs.weight.tolist(), ties.attestations.tolist(),
                                       ties.documents.tolist(), starts[:-1], starts[1:])
    )
    return G


def compute_result(session: Session, graph: SliceGraph, *, measure: str, options: dict[str, Any]) -> dict[str, Any]:
    """Return the result of one measure on the slice's graph, as JSON data with persons by key."""
    payload = _compute(session, graph, measure=measure, options=options)
    arcs = graph.arcs
    payload.setdefault("ties", int(np.count_nonzero(arcs.source != arcs.target)))  # for the small-slice warning
    return payload


def _compute(session: Session, graph: SliceGraph, *, measure: str, options: dict[str, Any]) -> dict[str, Any]:
    slice_, key_of = graph.slice, graph.key_of
    if measure == "summary":
        return _with_mode(_summary(session, graph, exact_paths=True if options.get("exact_paths") else None), slice_)
    if measure == "components":
        return _with_mode(_components(graph.arcs, slice_, key_of), slice_)
    if measure == "cut-points":
        return _with_mode(_cuts(graph, slice_, key_of), slice_)
    if measure == "cliques":
        payload = _cliques(graph.arcs, slice_, key_of, options)
    elif measure == "communities":
        payload = _communities(graph.arcs, slice_, key_of, options)
    else:
        payload = _centrality(graph.arcs, measure, slice_, key_of, options)
        payload["collection_note"] = _collection_note(session, graph)
    return _with_mode(payload, slice_)


def _with_mode(payload: dict[str, Any], slice_: Slice) -> dict[str, Any]:
    """Add to a result's conventions what a co-membership graph stands on (node set, weights)."""
    note = mode_conventions(slice_)
    if note is not None:
        payload["conventions"] = f"{mode_population(payload['conventions'], slice_)} {note}"
    return payload


# --- one function per page -------------------------------------------------------------------


def _centrality(G: nx.Graph, measure: str, slice_: Slice, key_of: dict, options: dict[str, Any]) -> dict[str, Any]:
    n = len(G)
    samples = SAMPLES if measure in SAMPLED and not options.get("exact") and n > SAMPLE_ABOVE else None
    result = compute(G, measure, loops=slice_.loops, node_set=slice_.nodes, samples=samples, seed=0)
    errors = result.sampling.standard_errors if result.sampling else {}
    rows = [
        {"key": key_of[row.node], "rank": row.rank, "value": _number(row.value), "raw": _number(row.raw),
         "standard_error": _number(errors.get(row.node)), "reason": row.reason}
        for row in result.rows()
    ]
    sampling = None
    if result.sampling is not None:
        sampling = {"samples": result.sampling.samples, "seed": result.sampling.seed, "statement": result.sampling.statement}
    return {"n": n, "directed": G.is_directed(), "engine": result.engine, "conventions": result.conventions,
            "sampling": sampling, "rows": rows}


def _summary(session: Session, graph: SliceGraph, *, exact_paths: bool | None = None) -> dict[str, Any]:
    slice_ = graph.slice
    shares = _evidence_shares(session, graph)
    measured: nx.Graph | ArcGraph = graph.arcs if graph.relations is not None else graph.G
    summary = summarize(measured, node_set=slice_.nodes, collection_counts=shares.collections,
                        repository_counts=shares.repositories, attestations=shares.attestations, exact_paths=exact_paths)
    payload = asdict(summary)
    payload["attestations"] = shares.attestations
    for field in ("degree_distribution", "in_degree_distribution", "out_degree_distribution"):
        if payload[field] is not None:
            payload[field] = [[degree, persons] for degree, persons in payload[field].items()]
    payload["collections"] = sorted(([name, count] for name, count in shares.collections.items()),
                                    key=lambda item: (-item[1], item[0]))
    payload["printed_attestations"] = shares.printed
    payload["concentration"] = concentration_note(shares.collections, repositories=shares.repositories,
                                                  total=shares.attestations)
    payload["n"] = len(measured)
    return _finite(payload)


@dataclass(frozen=True)
class EvidenceShares:
    """Where the attestations behind a slice's ties come from."""

    collections: dict[str, int]  # attestations per collection, by its label ("repository: collection")
    repositories: dict[str, int]  # attestations per repository, by its name
    printed: int  # attestations from printed sources (in no collection)
    attestations: int  # all of them (with a co-membership slice's group evidence)


def _evidence_shares(session: Session, graph: SliceGraph) -> EvidenceShares:
    """Return the attestations behind the slice's ties per collection and per repository, and in all."""
    if graph.relations is not None:  # the arrays: the relations behind the ties and their collections
        relations, ties = graph.relations, graph.ties
        behind = np.zeros(len(relations), dtype=bool)
        behind[ties.entry_relation] = True
        counted = behind[relations.collection_relation]
        ids = relations.collection[counted]
        sums = np.bincount(ids + 1, weights=relations.collection_attestations[counted]).astype(np.int64)
        per_collection: Counter = Counter({None if c == 0 else c - 1: int(n) for c, n in enumerate(sums.tolist()) if n})
        attestations = int(relations.attestations[behind].sum())
    else:
        G = graph.G
        in_graph = {r for _, _, ids in G.edges(data="relation_ids") for r in ids or ()}
        per_collection = Counter(collection_counts(session, graph.resolved, in_graph))
        memberships = G.graph.get("membership_ids", [])  # mode=co-membership or both: their evidence counts too
        per_collection.update(membership_collection_counts(session, graph.resolved, memberships))
        attestations = sum(graph.attestations[r] for r in in_graph) + G.graph.get("membership_attestations", 0)
    printed = per_collection.pop(None, 0)
    names = list_collection_names(session=session, ids=list(per_collection))
    holders = list_collection_repositories(session=session, ids=list(per_collection))
    repositories: Counter = Counter()
    for c, count in per_collection.items():
        repositories[holders[c]] += count
    return EvidenceShares({names[c]: count for c, count in per_collection.items()}, dict(repositories), printed,
                          attestations)


def _collection_note(session: Session, graph: SliceGraph) -> str | None:
    """Return the summary's warning when one repository or collection supplies most of the slice's evidence, else None."""
    shares = _evidence_shares(session, graph)
    return collection_warning(shares.collections, repositories=shares.repositories, total=shares.attestations)


def _components(G: nx.Graph, slice_: Slice, key_of: dict) -> dict[str, Any]:
    result = components(G, loops=slice_.loops, node_set=slice_.nodes)

    def listed(parts):  # noqa: ANN001, ANN202
        return [{"number": c.number, "size": c.size, "ties": c.ties, "members": _keys(c.members, key_of)} for c in parts]

    return {"n": result.n, "directed": G.is_directed(), "components": listed(result.components),
            "strong": listed(result.strong) if result.strong is not None else None,
            "isolates": _keys(result.isolates, key_of), "largest_share": result.largest_share,
            "conventions": result.conventions}


def _cuts(graph: SliceGraph, slice_: Slice, key_of: dict) -> dict[str, Any]:
    if graph.relations is None:  # a co-membership graph: its edges carry the evidence
        G = graph.G
        result = cuts(G, node_set=slice_.nodes)
    else:
        G = graph.arcs
        result = cuts(G, node_set=slice_.nodes, evidence=_tie_records(graph))
    return {
        "n": len(G), "directed": G.is_directed(), "conventions": result.conventions,
        "cut_points": [{"key": key_of[c.node], "pieces": c.pieces, "component_size": c.component_size,
                        "cut_off": c.cut_off} for c in result.cut_points],
        "bridges": [{"a": key_of[b.u], "b": key_of[b.v], "sides": list(b.sides), "weight": b.weight,
                     "documents": b.documents, "attestations": b.attestations, "relation_ids": b.relation_ids,
                     "single_document": b.single_document} for b in result.bridges],
    }  # fmt: skip


def _tie_records(graph: SliceGraph) -> Callable[[int, int], TieRecord]:
    """Return what the slice holds about the tie between two persons, both directions together.

    The relations behind the tie (or behind its two arcs on a directed slice) with their
    attestations and their documents, each document counted once: an undirected kind such as
    marriage, drawn as two arcs under ``direction=recorded``, is one relation and its documents.
    """
    relations, ties, arcs = graph.relations, graph.ties, graph.arcs
    assert relations is not None and ties is not None
    span = int(max(ties.u.max(initial=0), ties.v.max(initial=0))) + 1
    keys = ties.u * span + ties.v

    def record(u: int, v: int) -> TieRecord:
        found = [int(t) for t in np.searchsorted(keys, [u * span + v, v * span + u]) if t < len(keys)]
        found = [t for t in found if (int(ties.u[t]), int(ties.v[t])) in ((u, v), (v, u))]
        behind = np.unique(np.concatenate([ties.relations_of(t) for t in found]))
        starts = np.searchsorted(relations.pair_relation, behind)
        ends = np.searchsorted(relations.pair_relation, behind + 1)
        documents = len(set(np.concatenate([relations.pair_document[a:b] for a, b in zip(starts, ends)]).tolist()))
        return TieRecord(weight=float(max(arcs.weight[t] for t in found)), documents=documents,
                         attestations=int(relations.attestations[behind].sum()), attestation_ids=[],
                         relation_ids=relations.relation[behind].tolist(), single_document=documents == 1)

    return record


def _cliques(G: nx.Graph, slice_: Slice, key_of: dict, options: dict[str, Any]) -> dict[str, Any]:
    projection = slice_.mode != "relations"
    limit = PROJECTION_CLIQUE_LIMIT if projection else CLIQUE_LIMIT
    result = cliques(G, min_size=options.get("min_size", 3), limit=limit, node_set=slice_.nodes)
    per_person = sorted(((key_of[v], count) for v, count in result.per_node.items() if count), key=lambda item: (-item[1], item[0]))
    return {"n": len(G), "directed": G.is_directed(), "conventions": result.conventions, "min_size": result.min_size,
            "limit": result.limit, "complete": result.complete, "projection_note": _PROJECTION_CLIQUES if projection else None,
            "cliques": [{"number": c.number, "members": _keys(c.members, key_of)} for c in result.cliques],
            "per_person": [{"key": key, "cliques": count} for key, count in per_person]}  # fmt: skip


def _communities(G: nx.Graph, slice_: Slice, key_of: dict, options: dict[str, Any]) -> dict[str, Any]:
    result = communities(G, method=options.get("method", "leiden"), seed=options.get("seed", 0),
                         loops=slice_.loops, node_set=slice_.nodes, runs=options.get("runs", STABILITY_RUNS))
    stability = None
    if result.stability is not None:
        s = result.stability
        stability = {"seeds": s.seeds, "mutual_information": s.mutual_information,
                     "lowest_mutual_information": s.lowest_mutual_information, "statement": s.statement,
                     "consistency": {key_of[v]: value for v, value in s.consistency.items()}}
    return _finite({
        "n": len(G), "directed": G.is_directed(), "conventions": result.conventions, "method": result.method,
        "seed": result.seed, "engine": result.engine, "modularity": result.modularity,
        "communities": [{"number": c.number, "members": _keys(c.members, key_of), "ties": c.ties, "weight": c.weight}
                        for c in result.communities],
        "links": [{"a": link.a, "b": link.b, "ties": link.ties, "weight": link.weight} for link in result.links],
        "isolates": _keys(result.isolates, key_of), "stability": stability,
    })  # fmt: skip


_PROJECTION_CLIQUES = (
    f"Ties by shared groups make every group a clique by construction: a group of k members is a clique of k "
    f"persons, so on a projection the cliques mostly restate the groups rather than find anything. The search "
    f"is capped at {PROJECTION_CLIQUE_LIMIT:,} cliques here (instead of {CLIQUE_LIMIT:,}); max_group_size=N "
    "leaves out the largest groups."
)


# --- helpers -------------------------------------------------------------------------------


def _keys(nodes: list[Hashable], key_of: dict) -> list[str]:
    return [key_of[v] for v in nodes]


def _number(value: float | None) -> float | None:
    """JSON has no NaN or infinity: an undefined figure is null (each row gives its reason)."""
    if value is None or not math.isfinite(value):
        return None
    return float(value)


def _finite(data: Any) -> Any:
    if isinstance(data, float):
        return _number(data)
    if isinstance(data, dict):
        return {k: _finite(v) for k, v in data.items()}
    if isinstance(data, list):
        return [_finite(v) for v in data]
    return data
