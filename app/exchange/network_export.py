"""The current slice as files for other tools: GraphML, node and edge tables, the adjacency matrix.

:func:`slice_export` reads the slice once (persons with their names, life dates and
identifiers; ties with kinds, weight, attestation and document counts and the keys of the
sources behind them; centralities stored for this slice at the current data version) and the
writers turn it into GraphML (valid against the published GraphML schema), CSV tables and a
matrix. Every file says which slice and which data version it holds.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field

import networkx as nx
from sqlalchemy import select
from sqlalchemy.orm import Session

from app.models import Attestation, Person, PersonIdentifier, RelationKind, Source
from app.network.measures import MEASURES
from app.network.slice import Slice, build_graph
from app.store.measure_results import list_stored_results
from app.store.summary import get_data_version

__all__ = ["NodeRow", "EdgeRow", "SliceExport", "adjacency_csv", "edges_csv", "nodes_csv", "slice_export", "to_graphml",
           "with_persons_hidden"]

VISIBILITY_ALL = "all"


@dataclass(frozen=True)
class NodeRow:
    """One person of the slice."""

    key: str
    name: str
    kind: str
    unidentified: bool
    born: str | None
    died: str | None
    identifiers: list[str]
    measures: dict[str, float | None]


@dataclass(frozen=True)
class EdgeRow:
    """One tie of the slice's graph (several relation kinds between a pair are one tie, as on the measure pages)."""

    source: str
    target: str
    kinds: list[str]
    weight: float
    attestations: int
    documents: int
    source_keys: list[str]


@dataclass(frozen=True)
class SliceExport:
    """Everything a file of the slice holds."""

    slice: Slice
    slice_text: str
    query: str
    data_version: int
    directed: bool
    weight: str
    nodes: list[NodeRow]
    edges: list[EdgeRow]
    measures: list[str] = field(default_factory=list)


def slice_export(session: Session, slice_: Slice) -> SliceExport:
    """Return the persons and ties of the slice with their attributes, in key order."""
    from app.network.results import slice_key  # results imports the measure machinery; keep it lazy

    G = build_graph(session, slice_)
    people = {p.id: p for p in session.scalars(select(Person).where(Person.id.in_(list(G)))) } if len(G) < 30000 else {
        p.id: p for p in session.scalars(select(Person))}
    identifiers: dict[int, list[str]] = {}
    for pid, scheme, value in session.execute(
        select(PersonIdentifier.person_id, PersonIdentifier.scheme, PersonIdentifier.value).order_by(PersonIdentifier.id)
    ):
        if pid in G:
            identifiers.setdefault(pid, []).append(f"{scheme}:{value}")
    kind_key = dict(session.execute(select(RelationKind.id, RelationKind.key)).all())
    attestation_ids = sorted({a for _, _, ids in G.edges(data="attestation_ids") for a in ids})
    source_of: dict[int, str] = {}
    for start in range(0, len(attestation_ids), 500):
        chunk = attestation_ids[start : start + 500]
        source_of.update(session.execute(
            select(Attestation.id, Source.key).join(Source, Attestation.source_id == Source.id).where(Attestation.id.in_(chunk))
        ).all())
    version = get_data_version(session=session)
    measures: dict[str, dict[str, float | None]] = {}
    for stored in list_stored_results(session=session, slice_key=slice_key(slice_), visibility=VISIBILITY_ALL):
        if stored.measure in MEASURES and stored.data_version == version and stored.measure not in measures:
            measures[stored.measure] = {row["key"]: row["value"] for row in stored.payload.get("rows", [])}
    key = {pid: people[pid].key for pid in G}
    nodes = sorted((NodeRow(
        key=key[pid], name=people[pid].name, kind=people[pid].kind, unidentified=people[pid].unidentified,
        born=people[pid].born_text, died=people[pid].died_text, identifiers=identifiers.get(pid, []),
        measures={m: values.get(key[pid]) for m, values in measures.items()},
    ) for pid in G), key=lambda n: n.key)
    edges = sorted((EdgeRow(
        source=key[u], target=key[v], kinds=sorted(kind_key[k] for k in data["kinds"]), weight=data["weight"],
        attestations=data["attestations"], documents=data["documents"],
        source_keys=sorted({source_of[a] for a in data["attestation_ids"]}),
    ) for u, v, data in G.edges(data=True)), key=lambda e: (e.source, e.target))
    return SliceExport(slice=slice_, slice_text=slice_.describe(), query=slice_key(slice_), data_version=version,
                       directed=G.is_directed(), weight=slice_.weight, nodes=nodes, edges=edges, measures=sorted(measures))


def with_persons_hidden(export: SliceExport, keys: set[str] | frozenset[str], *, name: str) -> SliceExport:
    """Return the export with the persons of ``keys`` as ``restricted-1``, ``restricted-2``, ... named ``name``.

    Their ties, counts and measures stay (so the structure and the figures are those of the
    slice); their names, life dates and identifiers go. Each hidden person keeps one id within
    the file, numbered in the order of their keys, so two of them are never merged into one.
    """
    hidden = {n.key: f"restricted-{i}" for i, n in enumerate((n for n in export.nodes if n.key in keys), start=1)}
    if not hidden:
        return export
    nodes = sorted((NodeRow(key=hidden[n.key], name=name, kind=n.kind, unidentified=n.unidentified, born=None, died=None,
                            identifiers=[], measures=n.measures) if n.key in hidden else n for n in export.nodes),
                   key=lambda n: n.key)
    edges = sorted((EdgeRow(source=hidden.get(e.source, e.source), target=hidden.get(e.target, e.target), kinds=e.kinds,
                            weight=e.weight, attestations=e.attestations, documents=e.documents, source_keys=e.source_keys)
                    for e in export.edges), key=lambda e: (e.source, e.target))
    return SliceExport(slice=export.slice, slice_text=export.slice_text, query=export.query,
                       data_version=export.data_version, directed=export.directed, weight=export.weight,
                       nodes=nodes, edges=edges, measures=export.measures)


def to_graphml(export: SliceExport) -> bytes:
    """Return the slice as GraphML: persons as nodes (id = key), ties as edges, attributes as typed keys.

    Lists (kinds, identifiers, source keys) are written as ``|``-separated text, since GraphML
    attributes are single values; absent values are left out rather than written empty.
    """
    G: nx.Graph = nx.DiGraph() if export.directed else nx.Graph()
    G.graph.update({"slice": export.slice_text, "slice_query": export.query, "data_version": export.data_version,
                    "weight_means": export.weight, "made_by": "Attesta"})
    for node in export.nodes:
        attributes = {"name": node.name, "kind": node.kind, "unidentified": node.unidentified, "born": node.born,
                      "died": node.died, "identifiers": "|".join(node.identifiers) or None,
                      **{m: v for m, v in node.measures.items()}}
        G.add_node(node.key, **{k: v for k, v in attributes.items() if v is not None})
    for edge in export.edges:
        G.add_edge(edge.source, edge.target, kind="|".join(edge.kinds), weight=float(edge.weight),
                   attestations=edge.attestations, documents=edge.documents, source_keys="|".join(edge.source_keys))
    buffer = io.BytesIO()
    nx.write_graphml_xml(G, buffer, encoding="utf-8", prettyprint=True, named_key_ids=False)
    return buffer.getvalue()


NODE_HEADER = ["key", "name", "kind", "unidentified", "born", "died", "identifiers"]
EDGE_HEADER = ["source", "target", "kind", "weight", "attestations", "documents", "source_keys"]


def nodes_csv(export: SliceExport) -> str:
    """Return the persons of the slice as CSV, one column per stored measure after the attributes."""
    rows = [[n.key, n.name, n.kind, "yes" if n.unidentified else "no", n.born, n.died, "|".join(n.identifiers),
             *[n.measures.get(m) for m in export.measures]] for n in export.nodes]
    return _csv([*NODE_HEADER, *export.measures], rows)


def edges_csv(export: SliceExport) -> str:
    """Return the ties of the slice as CSV (for an undirected slice, each tie once)."""
    rows = [[e.source, e.target, "|".join(e.kinds), e.weight, e.attestations, e.documents, "|".join(e.source_keys)]
            for e in export.edges]
    return _csv(EDGE_HEADER, rows)


def adjacency_csv(export: SliceExport) -> str:
    """Return the weighted adjacency matrix: row person to column person, in key order (0: no tie).

    An undirected slice gives a symmetric matrix; a directed one reads row -> column.
    """
    keys = [n.key for n in export.nodes]
    index = {k: i for i, k in enumerate(keys)}
    matrix = [[0.0] * len(keys) for _ in keys]
    for e in export.edges:
        matrix[index[e.source]][index[e.target]] = e.weight
        if not export.directed:
            matrix[index[e.target]][index[e.source]] = e.weight
    return _csv(["", *keys], [[k, *row] for k, row in zip(keys, matrix)])


def _csv(header: list[str], rows: list[list[object]]) -> str:
    from app.views.tables import spreadsheet_safe  # one rule for formula-like cells in every download

    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\r\n")
    writer.writerow(header)
    for row in rows:
        writer.writerow(["" if v is None else repr(v) if isinstance(v, float) else spreadsheet_safe(v) for v in row])
    return buffer.getvalue()
