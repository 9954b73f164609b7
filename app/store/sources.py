"""Documents and the archives that keep them: sources, repositories and collections.

A historian comes to a document from a tie ("which letter says so?") and wants everything the
document says at once: every relation, membership and fact it attests. Deleted attestations
are never listed, only counted, so that nothing seems to be missing without a word.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from datetime import date

from sqlalchemy import ColumnElement, and_, distinct, func, or_, select, union
from sqlalchemy.orm import Session, aliased, joinedload

from app.dates import DateError, parse_interval
from app.documented import DOCUMENTED
from app.models import (
    Attestation,
    Collection,
    Group,
    Membership,
    Person,
    PersonFact,
    Place,
    Relation,
    RelationKind,
    Repository,
    Source,
)
from app.store.citations import SourceCitation, get_citations, source_citation
from app.store.persons import PersonRef

__all__ = [
    "PER_PAGE",
    "SOURCE_SORTS",
    "AttestedFact",
    "AttestedMembership",
    "AttestedRelation",
    "CollectionDetail",
    "CollectionRow",
    "EvidenceTotals",
    "PlaceRef",
    "RepositoryDetail",
    "RepositoryRow",
    "SourceDetail",
    "SourceList",
    "SourceRef",
    "SourceRow",
    "count_printed_sources",
    "get_collection",
    "get_repository",
    "get_place_ref",
    "get_source",
    "list_repositories",
    "list_source_kinds",
    "search_sources",
]

PER_PAGE = 50
SOURCE_SORTS = ("date", "reference")

_LIVE = Attestation.deleted_at.is_(None)
_DATE_WORD = re.compile(r"\d{3,4}|\d{4}\S+")  # a year, or what may be an EDTF date


# --- small references ----------------------------------------------------------------------


@dataclass(frozen=True)
class PlaceRef:
    """A place named on a page, with the key its page is found under."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The place's key."""
    name: str
    """The place's name."""


@dataclass(frozen=True)
class SourceRef:
    """Another document named on a page (an original, a copy)."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The source's key."""
    citation: str
    """Its citation as one line of text."""
    date_text: str | None
    """Its date as written (EDTF)."""


# --- the index of sources --------------------------------------------------------------------


@dataclass(frozen=True)
class SourceRow:
    """One document in a list of documents."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The source's key."""
    kind: str | None
    """Letter, register, deed, edition, ..."""
    reference: str | None
    """Shelfmark or call number."""
    citation: str
    """The whole citation as one line of text."""
    date_text: str | None
    """Date of the document as written (EDTF)."""
    calendar: str
    """Calendar the date is written in."""
    earliest: date | None
    """First Gregorian day the date can mean (None: undated or open)."""
    latest: date | None
    """Last Gregorian day the date can mean (None: undated or open)."""
    copy_of_key: str | None
    """Key of the original when this document is a copy."""
    attestations: int
    """Attestations the document holds that are not deleted."""


@dataclass(frozen=True)
class SourceList:
    """One page of a list of documents, and how many there are in all."""

    __pydantic_config__ = DOCUMENTED

    rows: list[SourceRow]
    """The documents of this page."""
    total: int
    """Documents matching, on all pages."""
    page: int
    """Number of this page, from 1."""
    pages: int
    """Number of pages (at least 1, even when nothing matches)."""
    per_page: int
    """Documents per page."""


def list_source_kinds(*, session: Session) -> list[str]:
    """Return the kinds of document the dataset holds (letter, register, ...), sorted."""
    return list(session.scalars(select(Source.kind).distinct().where(Source.kind.is_not(None)).order_by(Source.kind)))


def search_sources(
    *,
    session: Session,
    q: str | None = None,
    kind: str | None = None,
    start: date | None = None,
    end: date | None = None,
    collection: str | None = None,
    place_from: str | None = None,
    place_to: str | None = None,
    sort: str = "date",
    page: int = 1,
    per_page: int = PER_PAGE,
) -> SourceList:
    """Return one page of the documents that match every filter given.

    ``q`` is split into words and each word must match: as text in the key, shelfmark, title,
    author, publisher, collection or repository (case does not matter), or, for a word that
    reads as a date (``1703``, ``1703-05``, ``1704?``), also by date: the document's interval
    overlaps the word's. ``start`` and ``end`` keep dated documents whose interval overlaps
    them. ``collection``, ``place_from`` (written at) and ``place_to`` (received at) are keys.
    ``sort`` is ``date`` (undated last) or ``reference`` (repository, collection,
    shelfmark with its numbers in numeric order; printed sources by author and title).
    """
    if sort not in SOURCE_SORTS:
        raise ValueError(f"sort must be one of {SOURCE_SORTS}, not {sort!r}")
    live = (
        select(Attestation.source_id, func.count().label("n"))
        .where(_LIVE)
        .group_by(Attestation.source_id)
        .subquery()
    )
    count = func.coalesce(live.c.n, 0)
    conditions = _search_conditions(q)
    if kind:
        conditions.append(Source.kind == kind)
    if start or end:
        conditions.append(_overlaps(Source.earliest, Source.latest, start, end))
    for column, model, key in ((Source.collection_id, Collection, collection), (Source.place_from_id, Place, place_from),
                               (Source.place_to_id, Place, place_to)):  # fmt: skip
        if key is not None:
            conditions.append(column == select(model.id).where(model.key == key).scalar_subquery())

    def matching(*columns: object):  # noqa: ANN202
        return (
            select(*columns)
            .outerjoin(Collection, Source.collection_id == Collection.id)
            .outerjoin(Repository, Collection.repository_id == Repository.id)
            .where(*conditions)
        )

    total = session.scalar(select(func.count()).select_from(matching(Source.id).subquery())) or 0
    pages = max(1, -(-total // per_page))
    offset = (page - 1) * per_page
    if sort == "date":
        ordered = matching(Source.id).order_by(
            Source.earliest.is_(None), Source.earliest, Source.latest, Source.key
        )
        ids = list(session.scalars(ordered.limit(per_page).offset(offset)))
    else:  # numbers inside shelfmarks sort as numbers, which SQL cannot do
        keys = session.execute(
            matching(Source.id, Repository.name, Collection.name, Source.reference, Source.author, Source.title, Source.key)
        ).all()
        keys.sort(key=lambda row: tuple(_natural(part) for part in row[1:]))
        ids = [row[0] for row in keys[offset : offset + per_page]]

    if not ids:
        return SourceList(rows=[], total=total, page=page, pages=pages, per_page=per_page)
    details = {
        row.id: row
        for row in session.execute(
            select(Source.id, Source.earliest, Source.latest, count.label("attestations"))
            .outerjoin(live, live.c.source_id == Source.id)
            .where(Source.id.in_(ids))
        )
    }
    citations = get_citations(session=session, source_ids=ids)
    rows = [_row(citations[i], details[i].earliest, details[i].latest, details[i].attestations) for i in ids]
    return SourceList(rows=rows, total=total, page=page, pages=pages, per_page=per_page)


def _row(citation: SourceCitation, earliest: date | None, latest: date | None, attestations: int) -> SourceRow:
    return SourceRow(
        key=citation.key, kind=citation.kind, reference=citation.reference, citation=citation.text,
        date_text=citation.date_text, calendar=citation.calendar, earliest=earliest, latest=latest,
        copy_of_key=citation.copy_of_key, attestations=attestations,
    )


def _search_conditions(q: str | None) -> list[ColumnElement[bool]]:
    """Return one condition per word of ``q``: found in the text fields, or (dates) overlapping."""
    texts = (Source.key, Source.reference, Source.title, Source.author, Source.publisher,
             Collection.name, Collection.reference_code, Repository.name)  # fmt: skip
    conditions = []
    for word in (q or "").split():
        matches = [column.icontains(word, autoescape=True) for column in texts]
        if _DATE_WORD.fullmatch(word):
            try:
                interval = parse_interval(word.zfill(4) if word.isdigit() else word)
            except DateError:
                interval = None
            if interval is not None:
                matches.append(_overlaps(Source.earliest, Source.latest, interval.earliest, interval.latest))
        conditions.append(or_(*matches))
    return conditions


def _overlaps(earliest, latest, start: date | None, end: date | None) -> ColumnElement[bool]:  # noqa: ANN001
    """SQL: the dated interval [earliest, latest] (None = open end) overlaps [start, end]."""
    parts = [or_(earliest.is_not(None), latest.is_not(None))]  # an undated document matches no date
    if start is not None:
        parts.append(or_(latest.is_(None), latest >= start))
    if end is not None:
        parts.append(or_(earliest.is_(None), earliest <= end))
    return and_(*parts)


_NUMBERS = re.compile(r"(\d+)")


def _natural(text: str | None) -> tuple:
    """Sort key that puts "VFP 1/2" before "VFP 1/10", and blanks last."""
    if text is None or text == "":
        return (1,)
    parts = _NUMBERS.split(text.casefold())
    return (0, *((0, int(p), "") if p.isdigit() else (1, 0, p) for p in parts if p != ""))


# --- one source ------------------------------------------------------------------------------


@dataclass(frozen=True)
class AttestedRelation:
    """A relation as one document attests it."""

    __pydantic_config__ = DOCUMENTED

    attestation_key: str
    """Key of the attestation."""
    relation_id: int
    """Id of the relation (its page is /relations/{id})."""
    kind_key: str
    """Key of the relation kind."""
    kind: str
    """Label of the relation kind."""
    directed: bool
    """True when the relation runs from person_a to person_b (a letter from a to b)."""
    role_a: str | None
    """Role of person_a in a directed kind (sender, patron)."""
    role_b: str | None
    """Role of person_b in a directed kind (recipient, client)."""
    person_a: PersonRef
    """First person: the one the relation runs from, for directed kinds."""
    person_b: PersonRef
    """Second person: the one the relation runs to, for directed kinds."""
    name_a_as_written: str | None
    """The name of person_a as the document writes it."""
    name_b_as_written: str | None
    """The name of person_b as the document writes it."""
    locus: str | None
    """Where in the document: folio, page, line, entry."""
    evidence: str
    """Kind of witness: original, copy, draft, mention, register or edition."""
    date_text: str | None
    """Date of the attestation as written when it has its own (else the document's applies)."""
    place: PlaceRef | None
    """The place the attestation names."""
    certainty: str
    """How certain the tie is in this document."""
    identification: str
    """How certain it is that the persons named are the persons meant."""
    quote: str | None
    """The words of the document."""
    note: str | None
    """A note of whoever entered the attestation."""


@dataclass(frozen=True)
class AttestedMembership:
    """A membership of a group as one document attests it."""

    __pydantic_config__ = DOCUMENTED

    attestation_key: str
    """Key of the attestation."""
    person: PersonRef
    """The member."""
    group_key: str
    """Key of the group."""
    group: str
    """Name of the group."""
    role: str
    """Role in the group ("" when none is recorded)."""
    start_text: str | None
    """Start of the membership as written (EDTF)."""
    end_text: str | None
    """End of the membership as written (EDTF)."""
    locus: str | None
    """Where in the document."""
    evidence: str
    """Kind of witness."""
    certainty: str
    """How certain the membership is in this document."""
    identification: str
    """How certain it is that the person named is the person meant."""
    quote: str | None
    """The words of the document."""
    note: str | None
    """A note of whoever entered the attestation."""


@dataclass(frozen=True)
class AttestedFact:
    """A statement about one person as one document attests it."""

    __pydantic_config__ = DOCUMENTED

    attestation_key: str
    """Key of the attestation."""
    person: PersonRef
    """The person the fact is about."""
    fact: str
    """Kind of fact: birth, death, occupation, title, residence, gender or other."""
    value: str
    """What the document says (an occupation, a title)."""
    date_text: str | None
    """Date of the fact as written (EDTF): born 1690, not the date of the register."""
    place: PlaceRef | None
    """Place of the fact (residence, place of birth)."""
    locus: str | None
    """Where in the document."""
    evidence: str
    """Kind of witness."""
    certainty: str
    """How certain the fact is in this document."""
    quote: str | None
    """The words of the document."""
    note: str | None
    """A note of whoever entered the attestation."""


@dataclass(frozen=True)
class SourceDetail:
    """One document: how to cite it, when and where it was written, and everything it attests."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The source's key."""
    citation: SourceCitation
    """Archival (repository, collection, shelfmark) and bibliographic (author, title, ...) parts."""
    date_text: str | None
    """Date of the document as written (EDTF)."""
    calendar: str
    """Calendar the date is written in: gregorian, julian, julian-march (year from 25 March) or unknown."""
    earliest: date | None
    """First Gregorian day the date can mean (None: undated or open)."""
    latest: date | None
    """Last Gregorian day the date can mean (None: undated or open)."""
    place_from: PlaceRef | None
    """Place of writing."""
    place_to: PlaceRef | None
    """Place of receipt."""
    received_text: str | None
    """Date received as written (EDTF)."""
    received_earliest: date | None
    """First Gregorian day of the date received."""
    received_latest: date | None
    """Last Gregorian day of the date received."""
    copy_of: SourceRef | None
    """The original, when this document is a copy of another."""
    copies: list[SourceRef]
    """Documents that are copies of this one."""
    note: str | None
    """A note on the document."""
    relations: list[AttestedRelation]
    """Relations the document attests (attestations not deleted), by locus (fol. 9 before fol. 10; none last)."""
    memberships: list[AttestedMembership]
    """Memberships the document attests (attestations not deleted)."""
    facts: list[AttestedFact]
    """Facts about persons the document attests (attestations not deleted)."""
    deleted_attestations: int
    """Attestations of this document that are deleted, and therefore not listed."""


def get_source(*, session: Session, key: str) -> SourceDetail | None:
    """Return one document with everything it attests, or None when no source has ``key``."""
    source = session.scalars(
        select(Source)
        .options(
            joinedload(Source.collection).joinedload(Collection.repository),
            joinedload(Source.copy_of),
            joinedload(Source.place_from),
            joinedload(Source.place_to),
        )
        .where(Source.key == key)
    ).unique().one_or_none()
    if source is None:
        return None
    copy_ids = list(session.scalars(select(Source.id).where(Source.copy_of_id == source.id)))
    related = get_citations(session=session, source_ids=[*copy_ids, *([source.copy_of_id] if source.copy_of_id else [])])
    deleted = session.scalar(
        select(func.count()).select_from(Attestation).where(Attestation.source_id == source.id, ~_LIVE)
    )
    return SourceDetail(
        key=source.key,
        citation=source_citation(source),
        date_text=source.date_text,
        calendar=source.calendar,
        earliest=source.earliest,
        latest=source.latest,
        place_from=_place(source.place_from),
        place_to=_place(source.place_to),
        received_text=source.received_text,
        received_earliest=source.received_earliest,
        received_latest=source.received_latest,
        copy_of=_ref(related[source.copy_of_id]) if source.copy_of_id else None,
        copies=sorted((_ref(related[i]) for i in copy_ids), key=lambda r: (r.date_text or "", r.key)),
        note=source.note,
        relations=_relations(session, source.id),
        memberships=_memberships(session, source.id),
        facts=_facts(session, source.id),
        deleted_attestations=deleted or 0,
    )


def get_place_ref(*, session: Session, key: str) -> PlaceRef | None:
    """Return the key and name of the place with ``key``, or None."""
    row = session.execute(select(Place.key, Place.name).where(Place.key == key)).one_or_none()
    return PlaceRef(key=row.key, name=row.name) if row else None


def _place(place: Place | None) -> PlaceRef | None:
    return PlaceRef(key=place.key, name=place.name) if place is not None else None


def _ref(citation: SourceCitation) -> SourceRef:
    return SourceRef(key=citation.key, citation=citation.text, date_text=citation.date_text)


def _person(person: Person) -> PersonRef:
    return PersonRef(key=person.key, name=person.name, kind=person.kind, unidentified=person.unidentified)


def _in_document_order(session: Session, query):  # noqa: ANN001, ANN202
    """Return the rows of ``query`` (an Attestation first) by locus, folio 9 before folio 10, then as entered."""
    rows = session.execute(query).all()
    return sorted(rows, key=lambda row: (_natural(row[0].locus), row[0].id))


def _relations(session: Session, source_id: int) -> list[AttestedRelation]:
    person_a, person_b = aliased(Person), aliased(Person)
    rows = _in_document_order(
        session,
        select(Attestation, RelationKind, person_a, person_b, Place.key, Place.name)
        .join(Relation, Attestation.relation_id == Relation.id)
        .join(RelationKind, Relation.kind_id == RelationKind.id)
        .join(person_a, Relation.person_a_id == person_a.id)
        .join(person_b, Relation.person_b_id == person_b.id)
        .outerjoin(Place, Attestation.place_id == Place.id)
        .where(Attestation.source_id == source_id, _LIVE),
    )
    return [
        AttestedRelation(
            attestation_key=att.key, relation_id=att.relation_id, kind_key=kind.key, kind=kind.label,
            directed=kind.directed, role_a=kind.role_a, role_b=kind.role_b,
            person_a=_person(a), person_b=_person(b),
            name_a_as_written=att.name_a_as_written, name_b_as_written=att.name_b_as_written, locus=att.locus,
            evidence=att.evidence, date_text=att.date_text, place=PlaceRef(key=p_key, name=p_name) if p_key else None,
            certainty=att.certainty, identification=att.identification, quote=att.quote, note=att.note,
        )
        for att, kind, a, b, p_key, p_name in rows
    ]


def _memberships(session: Session, source_id: int) -> list[AttestedMembership]:
    rows = _in_document_order(
        session,
        select(Attestation, Membership, Person, Group.key, Group.name)
        .join(Membership, Attestation.membership_id == Membership.id)
        .join(Person, Membership.person_id == Person.id)
        .join(Group, Membership.group_id == Group.id)
        .where(Attestation.source_id == source_id, _LIVE),
    )
    return [
        AttestedMembership(
            attestation_key=att.key, person=_person(person), group_key=g_key, group=g_name,
            role=m.role, start_text=m.start_text, end_text=m.end_text, locus=att.locus, evidence=att.evidence,
            certainty=att.certainty, identification=att.identification, quote=att.quote, note=att.note,
        )
        for att, m, person, g_key, g_name in rows
    ]


def _facts(session: Session, source_id: int) -> list[AttestedFact]:
    rows = _in_document_order(
        session,
        select(Attestation, PersonFact, Person, Place.key, Place.name)
        .join(PersonFact, Attestation.fact_id == PersonFact.id)
        .join(Person, PersonFact.person_id == Person.id)
        .outerjoin(Place, PersonFact.place_id == Place.id)
        .where(Attestation.source_id == source_id, _LIVE),
    )
    return [
        AttestedFact(
            attestation_key=att.key, person=_person(person), fact=f.kind, value=f.value,
            date_text=f.date_text, place=PlaceRef(key=pl_key, name=pl_name) if pl_key else None, locus=att.locus,
            evidence=att.evidence, certainty=att.certainty, quote=att.quote, note=att.note,
        )
        for att, f, person, pl_key, pl_name in rows
    ]


# --- repositories and collections ----------------------------------------------------------


@dataclass(frozen=True)
class RepositoryRow:
    """One archive or library in the list of repositories."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The repository's key."""
    name: str
    """Its name."""
    place: PlaceRef | None
    """Where it is."""
    collections: int
    """Collections it holds."""
    sources: int
    """Documents in those collections."""


@dataclass(frozen=True)
class CollectionRow:
    """One collection of a repository, with how many documents it holds and over which years."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The collection's key."""
    name: str
    """Its name."""
    reference_code: str | None
    """Its reference code in the repository."""
    sources: int
    """Documents in it."""
    attestations: int
    """Attestations of its documents that are not deleted."""
    earliest: date | None
    """First day any of its dated documents may fall on."""
    latest: date | None
    """Last day any of its dated documents may fall on."""


@dataclass(frozen=True)
class RepositoryDetail:
    """One archive or library and its collections."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The repository's key."""
    name: str
    """Its name."""
    place: PlaceRef | None
    """Where it is."""
    note: str | None
    """A note on the repository."""
    collections: list[CollectionRow]
    """Its collections, by name."""
    sources: int
    """Documents in all its collections."""


@dataclass(frozen=True)
class EvidenceTotals:
    """What a set of documents attests (attestations that are not deleted)."""

    __pydantic_config__ = DOCUMENTED

    attestations: int
    """Attestations."""
    relations: int
    """Distinct relations attested."""
    memberships: int
    """Distinct memberships attested."""
    facts: int
    """Distinct facts about persons attested."""
    persons: int
    """Distinct persons involved: either end of a relation, a member, the subject of a fact."""


@dataclass(frozen=True)
class CollectionDetail:
    """One collection: where it is kept and what its documents attest."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The collection's key."""
    name: str
    """Its name."""
    reference_code: str | None
    """Its reference code in the repository."""
    note: str | None
    """A note on the collection."""
    repository_key: str
    """Key of the repository that holds it."""
    repository: str
    """Name of that repository."""
    sources: int
    """Documents in the collection."""
    earliest: date | None
    """First day any of its dated documents may fall on."""
    latest: date | None
    """Last day any of its dated documents may fall on."""
    attested: EvidenceTotals
    """What its documents attest."""


def list_repositories(*, session: Session) -> list[RepositoryRow]:
    """Return every repository by name, with its place and counts of collections and documents."""
    collections = (
        select(func.count()).select_from(Collection).where(Collection.repository_id == Repository.id).scalar_subquery()
    )
    sources = (
        select(func.count())
        .select_from(Source)
        .join(Collection, Source.collection_id == Collection.id)
        .where(Collection.repository_id == Repository.id)
        .scalar_subquery()
    )
    rows = session.execute(
        select(Repository.key, Repository.name, Place.key, Place.name, collections, sources)
        .outerjoin(Place, Repository.place_id == Place.id)
        .order_by(Repository.name, Repository.key)
    ).all()
    return [
        RepositoryRow(key=key, name=name, place=PlaceRef(key=p_key, name=p_name) if p_key else None,
                      collections=n_collections, sources=n_sources)  # fmt: skip
        for key, name, p_key, p_name, n_collections, n_sources in rows
    ]


def count_printed_sources(*, session: Session) -> int:
    """Return the number of documents outside any collection (printed sources)."""
    return session.scalar(select(func.count()).select_from(Source).where(Source.collection_id.is_(None))) or 0


def get_repository(*, session: Session, key: str) -> RepositoryDetail | None:
    """Return one repository with its collections, or None when no repository has ``key``."""
    repository = session.scalars(
        select(Repository).options(joinedload(Repository.place)).where(Repository.key == key)
    ).one_or_none()
    if repository is None:
        return None
    live = (
        select(Attestation.source_id, func.count().label("n")).where(_LIVE).group_by(Attestation.source_id).subquery()
    )
    rows = session.execute(
        select(
            Collection.key, Collection.name, Collection.reference_code, func.count(Source.id),
            func.coalesce(func.sum(live.c.n), 0),
            func.min(func.coalesce(Source.earliest, Source.latest)), func.max(func.coalesce(Source.latest, Source.earliest)),
        )
        .outerjoin(Source, Source.collection_id == Collection.id)
        .outerjoin(live, live.c.source_id == Source.id)
        .where(Collection.repository_id == repository.id)
        .group_by(Collection.id)
        .order_by(Collection.name, Collection.key)
    ).all()
    collections = [
        CollectionRow(key=c_key, name=name, reference_code=code, sources=n, attestations=atts,
                      earliest=_day(first), latest=_day(last))  # fmt: skip
        for c_key, name, code, n, atts, first, last in rows
    ]
    return RepositoryDetail(
        key=repository.key, name=repository.name, place=_place(repository.place), note=repository.note,
        collections=collections, sources=sum(c.sources for c in collections),
    )


def get_collection(*, session: Session, key: str) -> CollectionDetail | None:
    """Return one collection with what its documents attest, or None when no collection has ``key``."""
    collection = session.scalars(
        select(Collection).options(joinedload(Collection.repository)).where(Collection.key == key)
    ).one_or_none()
    if collection is None:
        return None
    n_sources, first, last = session.execute(
        select(func.count(), func.min(func.coalesce(Source.earliest, Source.latest)),
               func.max(func.coalesce(Source.latest, Source.earliest)))  # fmt: skip
        .where(Source.collection_id == collection.id)
    ).one()
    return CollectionDetail(
        key=collection.key, name=collection.name, reference_code=collection.reference_code,
        note=collection.note, repository_key=collection.repository.key, repository=collection.repository.name,
        sources=n_sources, earliest=_day(first), latest=_day(last),
        attested=_attested_by(session, Source.collection_id == collection.id),
    )


def _attested_by(session: Session, documents: ColumnElement[bool]) -> EvidenceTotals:
    """Return what the live attestations of the documents matching ``documents`` attest."""
    evidence = (
        select(Attestation.relation_id, Attestation.membership_id, Attestation.fact_id)
        .join(Source, Attestation.source_id == Source.id)
        .where(documents, _LIVE)
        .subquery()
    )
    attestations, relations, memberships, facts = session.execute(
        select(func.count(), func.count(distinct(evidence.c.relation_id)), func.count(distinct(evidence.c.membership_id)),
               func.count(distinct(evidence.c.fact_id)))  # fmt: skip
    ).one()
    persons = union(
        select(Relation.person_a_id).join(evidence, evidence.c.relation_id == Relation.id),
        select(Relation.person_b_id).join(evidence, evidence.c.relation_id == Relation.id),
        select(Membership.person_id).join(evidence, evidence.c.membership_id == Membership.id),
        select(PersonFact.person_id).join(evidence, evidence.c.fact_id == PersonFact.id),
    ).subquery()
    n_persons = session.scalar(select(func.count()).select_from(persons))
    return EvidenceTotals(
        attestations=attestations, relations=relations, memberships=memberships, facts=facts, persons=n_persons or 0
    )


def _day(value: date | str | None) -> date | None:
    """Dates computed by min()/max() come back from SQLite as text; give them back as dates."""
    if value is None or isinstance(value, date):
        return value
    return date.fromisoformat(value)
