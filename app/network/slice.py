"""The slice: which evidence builds the graph, and the graph it builds.

A slice is the same query string on every network view (DESIGN.md, "URLs"): relation kinds,
period, certainty, evidence kinds, archives kept or left out, unidentified persons, node set,
self-loops, direction and weight. ``Slice.from_query`` parses it (a bad value raises
``SliceError`` naming the parameter and what is accepted); ``relation_evidence`` selects the
attestations it keeps straight from SQL; ``build_graph`` turns them into a networkx graph whose
edges carry ``weight``, ``attestations``, ``documents`` and the attestation ids.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field, fields, replace
from datetime import date
from typing import Any, NamedTuple

import networkx as nx
from sqlalchemy import ColumnElement, and_, case, func, literal_column, or_, select
from sqlalchemy.orm import Session, aliased

from app.dates import DateError, parse_interval
from app.models import CERTAINTIES, EVIDENCE_KINDS, Attestation, Collection, Person, Relation, RelationKind, Repository, Source
from app.network.same_as import merge_nodes, merge_rows, same_as_mapping
from app.sql import distinct_list

__all__ = [
    "EvidenceRow",
    "NeighbourTotal",
    "RelationTotal",
    "ResolvedSlice",
    "Slice",
    "SliceError",
    "SliceTotal",
    "TieEvidence",
    "build_graph",
    "evidence_query",
    "collection_counts",
    "node_set",
    "needs_sources",
    "node_set_of",
    "neighbour_totals",
    "neighbours",
    "relation_evidence",
    "relation_totals",
    "resolve_slice",
    "slice_totals",
    "ties_from_evidence",
]

DEFAULT_EVIDENCE = tuple(e for e in EVIDENCE_KINDS if e != "draft")
CHOICES: dict[str, tuple[str, ...]] = {
    "dates": ("overlap", "inside"),
    "undated": ("keep", "drop"),
    "certainty": CERTAINTIES,
    "unidentified": ("keep", "drop"),
    "nodes": ("evidence", "ties", "all"),
    "loops": ("drop", "keep"),
    "direction": ("recorded", "undirected", "reciprocal"),
    "weight": ("documents", "attestations", "none"),
    "mode": ("relations", "co-membership", "both"),
    "overlap": ("any", "required"),
    "same_as": ("apart", "merge"),
    "weighting": ("shared", "newman", "jaccard"),
}
REPEATABLE = ("kind", "evidence", "keep_collection", "omit_collection", "keep_repository", "omit_repository")
NUMBERS = ("min_collections", "max_group_size")


class SliceError(ValueError):
    """A slice parameter with a value that is not accepted."""

    def __init__(self, parameter: str, value: object, accepted: str):
        self.parameter = parameter
        self.value = value
        self.accepted = accepted
        super().__init__(f"{parameter}={value} is not accepted; accepted: {accepted}")


@dataclass(frozen=True)
class Slice:
    """The filters that say which evidence builds the graph; defaults keep everything but drafts."""

    kind: tuple[str, ...] = ()
    period_from: str | None = None  # `from` in the query string
    period_to: str | None = None  # `to`
    dates: str = "overlap"
    undated: str = "keep"
    certainty: str = "possible"
    evidence: tuple[str, ...] = DEFAULT_EVIDENCE
    keep_collection: tuple[str, ...] = ()
    omit_collection: tuple[str, ...] = ()
    keep_repository: tuple[str, ...] = ()
    omit_repository: tuple[str, ...] = ()
    min_collections: int = 1
    unidentified: str = "keep"
    nodes: str = "evidence"
    loops: str = "drop"
    direction: str = "recorded"
    weight: str = "documents"
    mode: str = "relations"
    overlap: str = "any"
    max_group_size: int | None = None
    same_as: str = "apart"  # merge: persons linked as possibly the same count as one (app/network/same_as.py)
    weighting: str = "shared"  # of co-membership ties: shared groups, Newman (2001) or Jaccard

    @classmethod
    def from_query(cls, query: Mapping[str, Sequence[str]] | Iterable[tuple[str, str]]) -> Slice:
        """Return the slice of a query string (``{name: [values]}`` or ``[(name, value)]``).

        Parameters that are not slice parameters are ignored; a bad value raises SliceError.
        """
        items = query.items() if isinstance(query, Mapping) else _group(query).items()
        given: dict[str, Any] = {}
        for name, values in items:
            values = [v.strip() for v in values if v is not None and v.strip() != ""]
            if not values:
                continue
            if name in REPEATABLE:
                # One canonical order, so the same slice always has the same URL and cache key.
                chosen = {v.strip() for value in values for v in value.split(",") if v.strip()}
                order = EVIDENCE_KINDS.index if name == "evidence" and chosen <= set(EVIDENCE_KINDS) else None
                given[name] = tuple(sorted(chosen, key=order))
            elif name in ("from", "to"):
                given["period_" + name] = values[-1]
            elif name in CHOICES:
                value = values[-1].lower()
                if value not in CHOICES[name]:
                    raise SliceError(name, values[-1], "one of " + ", ".join(CHOICES[name]))
                given[name] = value
            elif name in NUMBERS:
                given[name] = _positive_int(name, values[-1])
        if "evidence" in given:
            unknown = [e for e in given["evidence"] if e not in EVIDENCE_KINDS]
            if unknown:
                raise SliceError("evidence", unknown[0], "one or more of " + ", ".join(EVIDENCE_KINDS))
        result = cls(**given)
        result.period()  # checks the dates now, so a bad year is a 400 wherever the slice is used
        return result

    def period(self) -> tuple[date | None, date | None]:
        """Return the first and last day of the period (None where open)."""
        start = end = None
        try:
            if self.period_from:
                start = parse_interval(_year_or_edtf(self.period_from)).earliest
        except DateError as error:
            raise SliceError("from", self.period_from, f"a year (1703) or an EDTF date ({error})") from error
        try:
            if self.period_to:
                end = parse_interval(_year_or_edtf(self.period_to)).latest
        except DateError as error:
            raise SliceError("to", self.period_to, f"a year (1711) or an EDTF date ({error})") from error
        if start and end and start > end:
            raise SliceError("from", self.period_from, f"a start no later than to={self.period_to}")
        return start, end

    def to_query(self) -> list[tuple[str, str]]:
        """Return the non-default parameters as (name, value) pairs, for links that keep the slice."""
        default = Slice()
        pairs: list[tuple[str, str]] = []
        for f in fields(self):
            value = getattr(self, f.name)
            if value == getattr(default, f.name):
                continue
            name = f.name.removeprefix("period_")
            if isinstance(value, tuple):
                pairs.extend((name, v) for v in value)
            elif value is not None:
                pairs.append((name, str(value)))
        return pairs

    def describe(self) -> str:
        """Return a one-line plain summary of the slice, shown above every drawing and table."""
        parts = [("kinds: " + ", ".join(self.kind)) if self.kind else "all relation kinds"]
        if self.period_from or self.period_to:
            rule = "inside" if self.dates == "inside" else "overlapping"
            parts.append(f"dated {rule} {self.period_from or '…'}–{self.period_to or '…'}")
        if self.undated == "drop":
            parts.append("undated evidence dropped")
        parts.append({"certain": "certain evidence only", "probable": "certain and probable evidence",
                      "possible": "every certainty grade"}[self.certainty])
        parts.append("evidence: " + ", ".join(self.evidence) if set(self.evidence) != set(DEFAULT_EVIDENCE)
                     else "all evidence but drafts")
        for label, keys in (("only collections", self.keep_collection), ("without collections", self.omit_collection),
                            ("only repositories", self.keep_repository), ("without repositories", self.omit_repository)):
            if keys:
                parts.append(f"{label} {', '.join(keys)}")
        if self.min_collections > 1:
            parts.append(f"ties attested in at least {self.min_collections} collections")
        if self.unidentified == "drop":
            parts.append("unidentified persons dropped")
        parts.append({"recorded": "direction as recorded", "undirected": "undirected",
                      "reciprocal": "reciprocated ties only"}[self.direction])
        if self.same_as == "merge":
            parts.append("persons linked as possibly the same counted as one")
        if self.mode != "relations":
            parts.append({"co-membership": "ties by shared groups", "both": "relations and ties by shared groups"}[self.mode])
            if self.overlap == "required":
                parts.append("shared groups only where the terms overlap")
            if self.max_group_size is not None:
                parts.append(f"groups of at most {self.max_group_size} members")
            if self.weighting != "shared":
                parts.append({"newman": "Newman's weighting of shared groups", "jaccard": "Jaccard overlap of groups"}[self.weighting])
        return "; ".join(parts)

    def with_(self, **changes: Any) -> Slice:
        return replace(self, **changes)


def _group(pairs: Iterable[tuple[str, str]]) -> dict[str, list[str]]:
    grouped: dict[str, list[str]] = defaultdict(list)
    for name, value in pairs:
        grouped[name].append(value)
    return grouped


def _positive_int(name: str, value: str) -> int:
    try:
        number = int(value)
    except ValueError:
        raise SliceError(name, value, "a whole number of 1 or more") from None
    if number < 1:
        raise SliceError(name, value, "a whole number of 1 or more")
    return number


def _year_or_edtf(text: str) -> str:
    """A bare year of fewer than four digits (e.g. 980) is padded so that EDTF reads it."""
    return text.zfill(4) if text.isdigit() else text


# --- resolving keys to ids -----------------------------------------------------------------


@dataclass(frozen=True)
class ResolvedSlice:
    """A slice with its keys turned into ids and its period into days."""

    slice: Slice
    kind_ids: frozenset[int] | None  # None: every kind
    start: date | None
    end: date | None
    keep_collection_ids: frozenset[int] = frozenset()
    omit_collection_ids: frozenset[int] = frozenset()
    keep_repository_ids: frozenset[int] = frozenset()
    omit_repository_ids: frozenset[int] = frozenset()
    directed_kinds: frozenset[int] = field(default_factory=frozenset)


def resolve_slice(session: Session, slice_: Slice) -> ResolvedSlice:
    """Return the slice with ids for its keys; an unknown key raises SliceError listing the known ones."""
    kinds = session.execute(select(RelationKind.id, RelationKind.key, RelationKind.parent_id, RelationKind.directed)).all()
    by_key = {k.key: k.id for k in kinds}
    children: dict[int | None, list[int]] = defaultdict(list)
    for k in kinds:
        children[k.parent_id].append(k.id)
    kind_ids: set[int] | None = None
    if slice_.kind:
        kind_ids = set()
        for key in slice_.kind:
            if key not in by_key:
                raise SliceError("kind", key, "one or more of " + ", ".join(sorted(by_key)))
            stack = [by_key[key]]  # a parent kind selects all its sub-kinds
            while stack:
                current = stack.pop()
                if current not in kind_ids:
                    kind_ids.add(current)
                    stack.extend(children.get(current, []))
    start, end = slice_.period()
    return ResolvedSlice(
        slice=slice_,
        kind_ids=frozenset(kind_ids) if kind_ids is not None else None,
        start=start,
        end=end,
        keep_collection_ids=_ids(session, Collection, "keep_collection", slice_.keep_collection),
        omit_collection_ids=_ids(session, Collection, "omit_collection", slice_.omit_collection),
        keep_repository_ids=_ids(session, Repository, "keep_repository", slice_.keep_repository),
        omit_repository_ids=_ids(session, Repository, "omit_repository", slice_.omit_repository),
        directed_kinds=frozenset(k.id for k in kinds if k.directed),
    )


def _ids(session: Session, model: type, parameter: str, keys: tuple[str, ...]) -> frozenset[int]:
    if not keys:
        return frozenset()
    found = dict(session.execute(select(model.key, model.id).where(model.key.in_(keys))).all())
    missing = [k for k in keys if k not in found]
    if missing:
        raise SliceError(parameter, missing[0], f"the key of a {model.__tablename__}")
    return frozenset(found.values())


# --- the evidence of a slice -----------------------------------------------------------------


class EvidenceRow(NamedTuple):
    """One attestation of a relation kept by the slice, with what the graph needs to know."""

    attestation_id: int
    relation_id: int
    kind_id: int
    directed: bool
    person_a: int
    person_b: int
    document: int  # the source, or the original it is a copy of: a copy and its original count once
    collection_id: int | None


def attestation_conditions(resolved: ResolvedSlice, source: Any = Source, collection: Any = Collection) -> list[ColumnElement[bool]]:
    """Return the SQL conditions on attestation, source and collection that the slice sets."""
    s = resolved.slice
    grades = CERTAINTIES[: CERTAINTIES.index(s.certainty) + 1]
    conditions: list[ColumnElement[bool]] = [
        Attestation.deleted_at.is_(None),
        Attestation.evidence.in_(s.evidence),
    ]
    if s.certainty != "possible":
        conditions += [Attestation.certainty.in_(grades), Attestation.identification.in_(grades)]
    undated = and_(Attestation.earliest.is_(None), Attestation.latest.is_(None))
    if s.undated == "drop":
        conditions.append(~undated)
    if resolved.start or resolved.end:
        if s.dates == "inside":
            inside = []
            if resolved.start:
                inside.append(and_(Attestation.earliest.is_not(None), Attestation.earliest >= resolved.start))
            if resolved.end:
                inside.append(and_(Attestation.latest.is_not(None), Attestation.latest <= resolved.end))
            period = and_(*inside)
        else:
            overlap = []
            if resolved.start:
                overlap.append(or_(Attestation.latest.is_(None), Attestation.latest >= resolved.start))
            if resolved.end:
                overlap.append(or_(Attestation.earliest.is_(None), Attestation.earliest <= resolved.end))
            period = and_(*overlap)
        conditions.append(or_(period, undated) if s.undated == "keep" else period)
    if resolved.keep_collection_ids:
        conditions.append(source.collection_id.in_(resolved.keep_collection_ids))
    if resolved.omit_collection_ids:
        conditions.append(or_(source.collection_id.is_(None), source.collection_id.not_in(resolved.omit_collection_ids)))
    if resolved.keep_repository_ids:
        conditions.append(collection.repository_id.in_(resolved.keep_repository_ids))
    if resolved.omit_repository_ids:
        conditions.append(or_(collection.repository_id.is_(None), collection.repository_id.not_in(resolved.omit_repository_ids)))
    return conditions


def needs_sources(resolved: ResolvedSlice) -> bool:
    """Return True when the slice filters attestations by their source (collection, repository)."""
    return bool(resolved.keep_collection_ids or resolved.omit_collection_ids or resolved.keep_repository_ids
                or resolved.omit_repository_ids or resolved.slice.min_collections > 1)  # fmt: skip


def _document(resolved: ResolvedSlice) -> Any:
    """Return the document an attestation counts for: its source, or the original its source copies.

    Where the query joins the source anyway it is read from there; otherwise only the sources
    that are copies are looked up (a small set, made once per query), and every other
    attestation's document is its ``source_id`` from the attestations' index: a hub's thousands
    of attestations are counted without reading their sources.
    """
    if needs_sources(resolved):
        return func.coalesce(Source.copy_of_id, Source.id)
    copy = aliased(Source)
    copies = select(copy.id).where(copy.copy_of_id.is_not(None))
    original = select(copy.copy_of_id).where(copy.id == Attestation.source_id).scalar_subquery()
    return case((Attestation.source_id.in_(copies), original), else_=Attestation.source_id)


def evidence_query(
    resolved: ResolvedSlice, columns: list[Any], persons: Iterable[int] | None, both_ends: bool, *, sources: bool = True
) -> Any:
    """Return the SELECT of relation attestations kept by the slice, with the given columns.

    ``sources=False`` leaves the source out when neither the columns nor the slice need it
    (documents counted with ``_document``): a hub's ties are then counted from the indexes.
    """
    s = resolved.slice
    person_a, person_b = aliased(Person), aliased(Person)
    query = (
        select(*columns)
        .select_from(Attestation)
        .join(Relation, Attestation.relation_id == Relation.id)
        .where(*attestation_conditions(resolved))
    )
    if sources or needs_sources(resolved):
        query = query.join(Source, Attestation.source_id == Source.id)
    if resolved.keep_repository_ids or resolved.omit_repository_ids:  # the only conditions on collection
        query = query.outerjoin(Collection, Source.collection_id == Collection.id)
    if resolved.kind_ids is not None:
        query = query.where(Relation.kind_id.in_(resolved.kind_ids))
    if s.unidentified == "drop":
        query = (
            query.join(person_a, Relation.person_a_id == person_a.id)
            .join(person_b, Relation.person_b_id == person_b.id)
            .where(person_a.unidentified.is_(False), person_b.unidentified.is_(False))
        )
    if persons is not None:
        ids = list(set(persons))
        # The relations are found first, through the indexes on each end; a plain OR on the
        # joined rows would read every attestation of the dataset.
        by_a = select(Relation.id).where(Relation.person_a_id.in_(ids))
        if both_ends:
            query = query.where(Relation.id.in_(by_a.where(Relation.person_b_id.in_(ids))))
        else:
            by_b = select(Relation.id).where(Relation.person_b_id.in_(ids))
            query = query.where(Relation.id.in_(by_a.union_all(by_b)))
    return query


def relation_evidence(
    session: Session, resolved: ResolvedSlice, *, persons: Iterable[int] | None = None, both_ends: bool = False
) -> list[EvidenceRow]:
    """Return every attestation of a relation that the slice keeps.

    With ``persons``, only relations touching one of them (or, with ``both_ends``, with both ends
    among them): the ego network reads its neighbourhood without loading the whole graph.
    """
    columns = [
        Attestation.id, Relation.id, Relation.kind_id, Relation.kind_directed, Relation.person_a_id,
        Relation.person_b_id, func.coalesce(Source.copy_of_id, Source.id), Source.collection_id,
    ]
    query = evidence_query(resolved, columns, persons, both_ends)
    # Core execution: the ORM's row processing costs a third more on large neighbourhoods.
    rows = [EvidenceRow(*row) for row in session.connection().execute(query).all()]
    if resolved.slice.min_collections > 1:
        rows = _attested_in_enough_collections(rows, resolved.slice.min_collections)
    return rows


class RelationTotal(NamedTuple):
    """What the slice holds about one relation, counted in SQL: for choosing among many ties."""

    relation_id: int
    kind_id: int
    directed: bool
    person_a: int
    person_b: int
    attestations: int
    documents: int


def relation_totals(session: Session, resolved: ResolvedSlice, *, persons: Iterable[int]) -> list[RelationTotal]:
    """Return, for every relation touching ``persons``, its attestations and documents in the slice.

    The same filters as ``relation_evidence``, but counted by the database, so a hub's thousands
    of attestations cost one row per relation.
    """
    document = _document(resolved)
    columns = [
        Relation.id, Relation.kind_id, Relation.kind_directed, Relation.person_a_id, Relation.person_b_id,
        func.count(Attestation.id), func.count(document.distinct()),
    ]
    query = evidence_query(resolved, columns, persons, False, sources=False).group_by(Relation.id)
    if resolved.slice.min_collections > 1:
        query = query.having(func.count(Source.collection_id.distinct()) >= resolved.slice.min_collections)
    return [RelationTotal(*row) for row in session.connection().execute(query).all()]


class NeighbourTotal(NamedTuple):
    """The ties of one person to a set of persons in the slice, summed in SQL over relations."""

    person: int
    relations: int
    attestations: int  # summed over the relations
    documents: int  # each relation's distinct documents, summed over the relations


def neighbour_totals(session: Session, resolved: ResolvedSlice, *, persons: Iterable[int]) -> list[NeighbourTotal]:
    """Return every person tied to one of ``persons`` (either way) with the sums of those ties.

    Each relation between the person and one of ``persons`` counts once, with its attestations
    and distinct documents in the slice, as ``relation_totals`` counts them; the sums are made
    by the database (grouped by the other person), so a set of hubs with 90,000 relations costs
    one row per neighbour. ``persons`` themselves may appear too (tied to each other or to
    themselves, counted for one end only); callers leave them out.
    """
    ids = sorted(set(persons))
    columns = [Relation.person_a_id.label("a"), Relation.person_b_id.label("b"),
               func.count(Attestation.id).label("attestations"), func.count(_document(resolved).distinct()).label("documents")]
    per_relation = evidence_query(resolved, columns, ids, False, sources=False).group_by(Relation.id)
    if resolved.slice.min_collections > 1:
        per_relation = per_relation.having(func.count(Source.collection_id.distinct()) >= resolved.slice.min_collections)
    r = per_relation.subquery()
    # One pass over the relations (a UNION of two selects would count them twice): a relation
    # between two of ``persons`` is counted for one of its ends only, and callers leave those out.
    other = case((r.c.a.in_(ids), r.c.b), else_=r.c.a).label("other")
    query = select(other, func.count(), func.sum(r.c.attestations), func.sum(r.c.documents)).group_by(other)
    return [NeighbourTotal(*row) for row in session.connection().execute(query).all()]


KNOWN_IN_SQL = 10_000
"""Known persons that ``neighbours`` leaves out in SQL (twice bound, under SQLite's limit of 32,766 parameters); beyond, after."""


def neighbours(
    session: Session, resolved: ResolvedSlice, *, persons: Iterable[int], known: Iterable[int] = ()
) -> set[int]:
    """Return the persons tied to one of ``persons`` (either way) in the slice, as ``neighbour_totals`` finds them.

    Only who they are, not how strongly tied: the attestations are read from their index, neither
    their sources nor a count per relation (unless the slice asks for ties attested in several
    collections), so the persons two steps from a hub are found at a fraction of the cost.
    ``known`` persons (found already, such as the ego's alters) are left out, and so are the
    attestations of the relations to them: they are not read at all.
    """
    ids, skip = sorted(set(persons)), sorted(set(known))
    if resolved.slice.min_collections > 1:  # counted per relation
        return {row.person for row in neighbour_totals(session, resolved, persons=ids)} - set(skip)
    other = case((Relation.person_a_id.in_(ids), Relation.person_b_id), else_=Relation.person_a_id)
    if not skip or len(skip) > KNOWN_IN_SQL:
        query = evidence_query(resolved, [other], ids, False, sources=False)
    else:  # the relations are chosen from the indexes on their two ends before any attestation is looked up
        by_a = select(Relation.id).where(Relation.person_a_id.in_(ids), Relation.person_b_id.not_in(skip))
        by_b = select(Relation.id).where(Relation.person_b_id.in_(ids), Relation.person_a_id.not_in(skip))
        query = evidence_query(resolved, [other], None, False, sources=False).where(Relation.id.in_(by_a.union_all(by_b)))
    return set(session.connection().execute(query.distinct()).scalars().all()) - set(skip)


class SliceTotal(NamedTuple):
    """One relation kept by the slice, counted in SQL, with its documents as comma-separated ids."""

    relation_id: int
    kind_id: int
    directed: bool
    person_a: int
    person_b: int
    attestations: int
    documents: int
    document_list: str  # read only where one tie holds several relations


def slice_totals(
    session: Session, resolved: ResolvedSlice, *, persons: Iterable[int] | None = None, both_ends: bool = False,
    document_lists: bool = True,
) -> list[SliceTotal]:
    """Return every relation the slice keeps with its counts, one row per relation.

    The ego network reads its neighbourhood from these: one row per relation, attestation ids
    fetched later only where a page shows them (the measure pages count the whole slice in
    numpy instead, see ``app.network.slice_arrays``). ``persons`` and ``both_ends`` narrow the
    relations as in ``relation_evidence``. ``document_lists=False`` leaves
    ``document_list`` empty, for callers whose ties never join two relations.
    """
    document = _document(resolved)
    columns = [
        Relation.id, Relation.kind_id, Relation.kind_directed, Relation.person_a_id, Relation.person_b_id,
        func.count(Attestation.id), func.count(document.distinct()), distinct_list(document) if document_lists else literal_column("''"),
    ]
    query = evidence_query(resolved, columns, persons, both_ends, sources=False).group_by(Relation.id)
    if resolved.slice.min_collections > 1:
        query = query.having(func.count(Source.collection_id.distinct()) >= resolved.slice.min_collections)
    return [SliceTotal(*row) for row in session.connection().execute(query).all()]


def collection_counts(session: Session, resolved: ResolvedSlice, relation_ids: set[int]) -> dict[int | None, int]:
    """Return the slice's attestations of the given relations per collection (None: printed sources)."""
    columns = [Relation.id, Source.collection_id, func.count(Attestation.id)]
    query = evidence_query(resolved, columns, None, False).group_by(Relation.id, Source.collection_id)
    counts: dict[int | None, int] = defaultdict(int)
    for relation_id, collection_id, count in session.connection().execute(query).all():
        if relation_id in relation_ids:
            counts[collection_id] += count
    return dict(counts)


def _attested_in_enough_collections(rows: list[EvidenceRow], minimum: int) -> list[EvidenceRow]:
    collections: dict[int, set[int]] = defaultdict(set)
    for row in rows:
        if row.collection_id is not None:
            collections[row.relation_id].add(row.collection_id)
    return [row for row in rows if len(collections[row.relation_id]) >= minimum]


# --- ties and graphs -------------------------------------------------------------------------


@dataclass
class TieEvidence:
    """What the slice holds about one relation: its attestations and distinct documents."""

    relation_id: int
    kind_id: int
    directed: bool
    person_a: int
    person_b: int
    attestation_ids: list[int] = field(default_factory=list)
    documents: set[int] = field(default_factory=set)
    collections: set[int] = field(default_factory=set)


def ties_from_evidence(rows: Iterable[EvidenceRow]) -> dict[int, TieEvidence]:
    """Return the relations of the evidence rows, keyed by relation id."""
    ties: dict[int, TieEvidence] = {}
    for row in rows:
        tie = ties.get(row.relation_id)
        if tie is None:
            tie = ties[row.relation_id] = TieEvidence(row.relation_id, row.kind_id, row.directed, row.person_a, row.person_b)
        tie.attestation_ids.append(row.attestation_id)
        tie.documents.add(row.document)
        if row.collection_id is not None:
            tie.collections.add(row.collection_id)
    return ties


def tie_weight(attestations: int, documents: int, weight: str) -> float:
    """Return the weight of a tie under the slice's weight mode."""
    if weight == "attestations":
        return float(attestations)
    if weight == "none":
        return 1.0
    return float(documents)


def build_graph(session: Session, slice_: Slice) -> nx.Graph | nx.DiGraph:
    """Return the graph of the slice: persons as nodes (by id), ties as edges with their evidence.

    ``direction=recorded`` gives a DiGraph in which an undirected kind counts both ways;
    ``undirected`` and ``reciprocal`` give a Graph (``reciprocal`` keeps a directed tie only when
    the other direction is attested by the same kind; undirected kinds are reciprocal by nature). Several kinds
    between one pair are one edge. Self-loops stay in the graph unless ``loops=drop``.
    """
    resolved = resolve_slice(session, slice_)
    rows = relation_evidence(session, resolved)
    return graph_from_evidence(session, resolved, rows)


def graph_from_evidence(session: Session, resolved: ResolvedSlice, rows: list[EvidenceRow]) -> nx.Graph | nx.DiGraph:
    """Return the graph of already selected evidence rows (see ``build_graph``)."""
    s = resolved.slice
    same_as = same_as_mapping(session, s.same_as)
    rows = merge_rows(rows, same_as)
    directed_view = s.direction == "recorded"
    G: nx.Graph = nx.DiGraph() if directed_view else nx.Graph()
    arcs: dict[tuple[int, int], dict[str, Any]] = {}

    def add(u: int, v: int, row: EvidenceRow) -> None:
        key = (u, v) if directed_view or u <= v else (v, u)
        arc = arcs.setdefault(key, {"attestation_ids": [], "documents": set(), "relation_ids": set(), "kinds": set()})
        arc["attestation_ids"].append(row.attestation_id)
        arc["documents"].add(row.document)
        arc["relation_ids"].add(row.relation_id)
        arc["kinds"].add(row.kind_id)

    tied = rows
    if s.direction == "reciprocal":
        # Judged kind by kind: a letter tie is reciprocated by letters the other way, not by kinship.
        # Persons whose only ties are one-way stay in the node set (their evidence is in the slice).
        directed = {(r.kind_id, r.person_a, r.person_b) for r in rows if r.directed}
        tied = [r for r in rows if not r.directed or r.person_a == r.person_b or (r.kind_id, r.person_b, r.person_a) in directed]
    for row in tied:
        if row.person_a == row.person_b and s.loops == "drop":
            continue
        add(row.person_a, row.person_b, row)
        if directed_view and not row.directed and row.person_a != row.person_b:
            add(row.person_b, row.person_a, row)

    for (u, v), arc in arcs.items():
        attestations = len(arc["attestation_ids"])
        documents = len(arc["documents"])
        G.add_edge(
            u, v, weight=tie_weight(attestations, documents, s.weight), attestations=attestations, documents=documents,
            attestation_ids=sorted(arc["attestation_ids"]), relation_ids=sorted(arc["relation_ids"]), kinds=sorted(arc["kinds"]),
            document_ids=sorted(arc["documents"]),
        )
    for node in merge_nodes(node_set(session, resolved, rows, tied), same_as):
        G.add_node(node)
    return G


def node_set(session: Session, resolved: ResolvedSlice, rows: Sequence[Any], tied: Sequence[Any]) -> set[int]:
    """Return the persons of the node set: with a tie drawn, with any evidence in the slice, or all."""
    return node_set_of(session, resolved, {p for r in rows for p in (r.person_a, r.person_b)},
                       {p for r in tied for p in (r.person_a, r.person_b)})


def node_set_of(session: Session, resolved: ResolvedSlice, related: set[int], tied: set[int]) -> set[int]:
    """Return the node set from the persons of the slice's relations and those of the relations kept as ties."""
    s = resolved.slice
    if s.nodes == "ties":
        return tied
    with_ties = related
    if s.nodes == "all":
        query = select(Person.id)
        if s.unidentified == "drop":
            query = query.where(Person.unidentified.is_(False))
        return set(session.scalars(query))
    from app.models import Membership, PersonFact  # evidence of memberships and facts

    conditions = attestation_conditions(resolved)
    members = (
        select(Membership.person_id)
        .join(Attestation, Attestation.membership_id == Membership.id)
        .join(Source, Attestation.source_id == Source.id)
        .outerjoin(Collection, Source.collection_id == Collection.id)
        .where(*conditions)
    )
    facts = (
        select(PersonFact.person_id)
        .join(Attestation, Attestation.fact_id == PersonFact.id)
        .join(Source, Attestation.source_id == Source.id)
        .outerjoin(Collection, Source.collection_id == Collection.id)
        .where(*conditions)
    )
    others = set(session.scalars(members.union(facts)))
    if s.unidentified == "drop" and others:
        unidentified = set(session.scalars(select(Person.id).where(Person.unidentified.is_(True))))
        others -= unidentified
    return with_ties | others
