"""GraphML graphs in, as workbook rows: nodes become persons, every edge a tie attested by a named source.

GraphML (the GraphML Primer and its XSD at graphml.graphdrawing.org) declares typed attributes
with ``<key id= for= attr.name= attr.type=>`` (and a ``<default>``) and gives them values in
``<data key=>`` under ``<node>`` and ``<edge>``; ``<graph edgedefault=>`` and an edge's
``directed`` say whether edges have a direction. A graph carries no documents, so the user names
one source for the whole import (``source_title``, e.g. "graph received from a colleague, file
X"): every edge becomes an attestation of that source, with the edge's id as its locus, so no
tie enters without provenance. Attributes that fit a workbook column go there (name, born,
died, kind, identifiers; an edge's kind, date, certainty, evidence, quote); the others are kept
in the note as ``name=value``. The rows feed the workbook importer (:func:`import_graphml`):
all or nothing, and the same file imported again changes nothing.
"""

from __future__ import annotations

import hashlib

from lxml import etree
from sqlalchemy import select
from sqlalchemy.orm import Session

from app.dates import DateError, interval_or_none
from app.db import Database
from app.exchange.matching import match_existing
from app.exchange.tei import labelled
from app.exchange.workbook import KEY_RE, ImportReport, Problem, Row, WorkbookError, import_tables
from app.exchange.xmlsafe import local_name, parse_untrusted
from app.models import CERTAINTIES, EVIDENCE_KINDS, PERSON_KINDS, RelationKind
from app.network.measures import MEASURES

__all__ = ["DEFAULT_KIND", "import_graphml", "prepare_graphml", "read_graphml"]

DEFAULT_KIND = "tie"
"""The relation kind of edges that name none, created on first use."""
NODE_COLUMNS = {"name": "name", "label": "name", "sort_name": "sort_name", "kind": "kind", "born": "born",
                "birth": "born", "died": "died", "death": "died", "identifiers": "identifiers",
                "unidentified": "unidentified"}
AUTHORITY_ATTRIBUTES = ("wikidata", "viaf", "gnd", "isni")
EDGE_COLUMNS = {"kind": "kind", "kinds": "kind", "date": "date", "certainty": "certainty", "evidence": "evidence",
                "quote": "quote"}
# What our own GraphML export writes and an import must not take as evidence: figures recomputed from it.
COMPUTED = set(MEASURES) | {"weight", "attestations", "documents", "sources", "source_keys", "key"}


def read_graphml(
    data: bytes, name: str, *, source_title: str, source_key: str | None = None, kind: str = DEFAULT_KIND,
    evidence: str = "mention", key_prefix: str = "",
) -> tuple[dict[str, list[Row]], list[Problem]]:
    """Return the workbook rows of a GraphML file and the problems found (nothing is written).

    ``source_title`` names the source every edge is attested by; ``kind`` is the relation kind
    of edges without a ``kind`` attribute; ``evidence`` grades them (``mention`` by default: the
    graph reports ties whose documents are not in hand); ``key_prefix`` goes before every node
    id to make the person keys (ids that are not valid keys are problems).
    """
    tables, problems, _notes = _read(data, name, source_title=source_title, source_key=source_key, kind=kind,
                                     evidence=evidence, key_prefix=key_prefix)
    for row in tables.get("relations.csv", []):
        row.values.pop("_directed", None)  # said by the edge; the importer checks it against the kind
    return tables, problems


def prepare_graphml(
    session: Session, data: bytes, name: str, *, source_title: str, source_key: str | None = None,
    kind: str = DEFAULT_KIND, evidence: str = "mention", key_prefix: str = "",
) -> tuple[dict[str, list[Row]], list[Problem], list[str]]:
    """Return the GraphML file's rows matched to the stored data (read in ``session``), its problems and notes.

    Nodes whose key is stored already keep their name and kind; a ``kind`` that is not stored is
    created only when it is ``tie`` (directed as the graph is); an undirected edge of a directed
    stored kind is a problem.
    """
    tables, problems, notes = _read(data, name, source_title=source_title, source_key=source_key, kind=kind,
                                    evidence=evidence, key_prefix=key_prefix)
    if problems:
        return {}, problems, notes
    directed_of = dict(session.execute(select(RelationKind.key, RelationKind.directed)).all())
    tables = match_existing(session, tables)
    graph_directed = any(r.values.get("_directed") == "yes" for r in tables.get("relations.csv", []))
    kinds_used = {r.values["kind"] for r in tables.get("relations.csv", [])}
    for used in sorted(kinds_used):
        if used in directed_of:
            continue
        if used == DEFAULT_KIND:
            tables.setdefault("relation_kinds.csv", []).append(Row(f"{name} [relation_kinds]", 1, {
                "key": DEFAULT_KIND, "label": "tie (from an imported graph)", "directed": "yes" if graph_directed else "no",
                "role_a": "source" if graph_directed else "", "role_b": "target" if graph_directed else ""}))
            directed_of[DEFAULT_KIND] = graph_directed
    for row in tables.get("relations.csv", []):
        edge_directed = row.values.pop("_directed") == "yes"
        kind_directed = directed_of.get(row.values["kind"])
        if kind_directed and not edge_directed:
            problems.append(Problem(row.file, row.line, "directed", f"an undirected edge cannot be a tie of the directed "
                                    f"kind {row.values['kind']!r}: which end is the sender is not known"))
        elif kind_directed is False and edge_directed:
            notes.append(f"line {row.line}: a directed edge became a tie of the undirected kind {row.values['kind']!r}")
    if problems:
        return {}, problems, notes
    return tables, [], notes


def import_graphml(
    database: Database, data: bytes, name: str, *, source_title: str, source_key: str | None = None,
    kind: str = DEFAULT_KIND, evidence: str = "mention", key_prefix: str = "", actor: str = "cli",
) -> ImportReport:
    """Import a GraphML file in one transaction; WorkbookError (nothing written) on any problem.

    The matching (:func:`prepare_graphml`) reads in its own transaction just before the write.
    """
    with database.read() as session:
        tables, problems, notes = prepare_graphml(session, data, name, source_title=source_title,
                                                  source_key=source_key, kind=kind, evidence=evidence,
                                                  key_prefix=key_prefix)
    if problems:
        raise WorkbookError(problems)
    return import_tables(database, tables, name=name, sha256=hashlib.sha256(data).hexdigest(), warnings=notes, actor=actor)


def _read(data: bytes, name: str, *, source_title: str, source_key: str | None, kind: str, evidence: str,
          key_prefix: str) -> tuple[dict[str, list[Row]], list[Problem], list[str]]:
    problems: list[Problem] = []
    notes: list[str] = []
    if not (source_title or "").strip():
        return {}, [Problem(name, 0, "(source)", "name the source the graph's ties come from (source title), "
                            "e.g. 'graph received from a colleague, file X'")], []
    if evidence not in EVIDENCE_KINDS:
        return {}, [Problem(name, 0, "(evidence)", f"{evidence!r} is not one of {', '.join(EVIDENCE_KINDS)}")], []
    tree, problems = parse_untrusted(data, name)
    if tree is None:
        return {}, problems, []
    root = tree.getroot()
    if local_name(root) != "graphml":
        return {}, [Problem(name, root.sourceline, "(graphml)", f"not a GraphML file: the root element is "
                            f"<{local_name(root)}>, not <graphml>")], []
    keys: dict[str, tuple[str, str, str, str | None]] = {}  # id -> (for, attr.name, attr.type, default)
    for el in root:
        if local_name(el) == "key":
            default = next((d.text or "" for d in el if local_name(d) == "default"), None)
            keys[el.get("id", "")] = (el.get("for", "all"), el.get("attr.name") or el.get("id", ""),
                                      el.get("attr.type", "string"), default)
    graphs = [el for el in root if local_name(el) == "graph"]
    if not graphs:
        return {}, [Problem(name, root.sourceline, "graph", "the file holds no <graph>")], []
    if len(graphs) > 1:
        notes.append(f"the file holds {len(graphs)} graphs; only the first was imported")
    graph = graphs[0]
    directed_default = graph.get("edgedefault", "directed") == "directed"
    src_key = source_key or f"graphml-{hashlib.sha256(source_title.strip().encode()).hexdigest()[:12]}"
    if not KEY_RE.match(src_key):
        problems.append(Problem(name, 0, "(source key)", f"{src_key!r} is not a valid key"))
    persons: dict[str, Row] = {}
    node_key: dict[str, str] = {}
    for node in (el for el in graph if local_name(el) == "node"):
        node_id = node.get("id", "")
        key = f"{key_prefix}{node_id}"
        if not KEY_RE.match(key):
            problems.append(Problem(name, node.sourceline, "node/@id", f"{key!r} is not a valid person key (letters, "
                                    "digits and . _ : -, at most 100); give a key prefix or rename the node"))
            continue
        if any(local_name(el) == "graph" for el in node):
            notes.append(f"line {node.sourceline}: the nested graph of node {node_id} was left out")
        values, extra = {"key": key}, []
        identifiers = []
        for attr, value in _data(node, keys, "node"):
            column = NODE_COLUMNS.get(attr.lower())
            if attr.lower() in AUTHORITY_ATTRIBUTES and value:
                identifiers.append(f"{attr.lower()}:{value}")
            elif column == "identifiers":
                identifiers += [i for i in value.split("|") if i]
            elif column == "kind" and value.lower() not in PERSON_KINDS:
                extra.append(f"{attr}={value}")
            elif column and value:
                values[column] = value
            elif attr in COMPUTED:
                continue
            elif value:
                extra.append(f"{attr}={value}")
        values.setdefault("name", node_id)
        values["identifiers"] = "|".join(dict.fromkeys(identifiers))
        values["note"] = "; ".join(extra)
        node_key[node_id] = key
        persons[key] = Row(name, node.sourceline, values)
    relations: list[Row] = []
    for number, edge in enumerate((el for el in graph if local_name(el) == "edge"), start=1):
        ends = []
        for end in ("source", "target"):
            node_id = edge.get(end, "")
            if node_id not in node_key:
                problems.append(Problem(name, edge.sourceline, f"edge/@{end}", f"{node_id!r} is not a node of the graph"))
            ends.append(node_key.get(node_id))
        directed = (edge.get("directed") or ("true" if directed_default else "false")).lower() == "true"
        kinds, values, extra = [kind], {}, []
        for attr, value in _data(edge, keys, "edge"):
            column = EDGE_COLUMNS.get(attr.lower())
            if column == "kind" and value:
                kinds = [k for k in value.split("|") if k]
            elif column == "date" and value:
                try:
                    interval_or_none(value, "gregorian")
                    values["date"] = value
                except DateError as error:
                    problems.append(Problem(name, edge.sourceline, f"data[{attr}]", str(error)))
            elif column == "certainty" and value:
                if value.lower() not in CERTAINTIES:
                    problems.append(Problem(name, edge.sourceline, f"data[{attr}]", f"{value!r} is not one of {', '.join(CERTAINTIES)}"))
                values["certainty"] = value.lower()
            elif column and value:
                values[column] = value
            elif value:
                extra.append(f"{attr}={value}")  # weights and counts of another tool stay readable in the note
        locus = f"edge {edge.get('id')}" if edge.get("id") else f"edge {number}"
        if None in ends:
            continue
        for each in kinds:
            relations.append(Row(name, edge.sourceline, {
                "person": ends[0], "other": ends[1], "kind": each, "source": src_key, "locus": locus,
                "evidence": values.get("evidence", evidence), **{c: v for c, v in values.items() if c != "evidence"},
                "note": "; ".join(extra), "_directed": "yes" if directed else "no"}))
    source = Row(name, graph.sourceline, {"key": src_key, "kind": "graph", "title": source_title.strip(),
                                          "note": f"GraphML file {name}"})
    if problems:
        return {}, problems, notes
    tables = labelled({"persons.csv": list(persons.values()), "sources.csv": [source], "relations.csv": relations})
    return tables, problems, notes


def _data(element: etree._Element, keys: dict, domain: str) -> list[tuple[str, str]]:
    """Return (attribute name, text) for every attribute of the element, defaults filled in."""
    given = {el.get("key"): "".join(el.itertext()).strip() for el in element if local_name(el) == "data"}
    out = []
    for key_id, (for_, attr, _type, default) in keys.items():
        if for_ not in (domain, "all"):
            continue
        value = given.get(key_id, default)
        if value is not None:
            out.append((attr, value))
    return out
