"""Persons: the index with its search, and everything recorded about one person.

Search works on the folded name variants (``person_name.normalized``, see ``app.names.fold``),
so case, accents and spacing never matter. Exact, prefix and substring matches come first;
after them, typo-tolerant matches found with rapidfuzz, labelled as such. Counts of the index
(attestations, degree) come from GROUP BY queries, never one query per row.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from datetime import date
from functools import lru_cache

from rapidfuzz import fuzz, process
from sqlalchemy import case, func, or_, select, union, union_all
from sqlalchemy.orm import Session

from app.dates import DateInterval, format_interval
from app.documented import DOCUMENTED
from app.models import (
    CERTAINTIES,
    Attestation,
    Group,
    Membership,
    Person,
    PersonAlias,
    PersonFact,
    PersonName,
    Place,
    Relation,
    RelationKind,
)
from app.names import fold
from app.store.attestations import CitedAttestation, get_cited_attestations, year_span

__all__ = [
    "FUZZY_CUTOFF",
    "PER_PAGE",
    "PERSON_SORTS",
    "Identifier",
    "LifeDate",
    "PersonDetail",
    "PersonFactRow",
    "PersonList",
    "PersonListRow",
    "PersonMembership",
    "PersonRef",
    "PersonRelation",
    "RelationKindGroup",
    "attestation_counts",
    "degree_counts",
    "get_person",
    "get_person_ref",
    "identifier_url",
    "person_id",
    "person_refs",
    "search_persons",
]

PER_PAGE = 50
PERSON_SORTS = ("match", "name", "attestations", "degree")
FUZZY_CUTOFF = 80  # rapidfuzz similarity (0-100) a near spelling needs to be offered
FUZZY_MIN_LENGTH = 3  # shorter queries are too ambiguous to guess at
IDENTIFIER_URLS = {
    "wikidata": "https://www.wikidata.org/wiki/{value}",
    "viaf": "https://viaf.org/viaf/{value}",
    "gnd": "https://d-nb.info/gnd/{value}",
    "isni": "https://isni.org/isni/{value}",
}
CERTAINTY_RANK = case(*((Attestation.certainty == grade, rank) for rank, grade in enumerate(CERTAINTIES)))  # index in CERTAINTIES
_LIVE = Attestation.deleted_at.is_(None)
# Sorting the index folds every name on every request; names change rarely, so remember them.
_sort_fold = lru_cache(maxsize=100_000)(fold)


# --- shapes ---------------------------------------------------------------------------------


@dataclass(frozen=True)
class PersonRef:
    """Enough about a person to name and link them."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The person's key (the current one, after any merge)."""
    name: str
    """Display name."""
    kind: str
    """individual or corporate."""
    unidentified: bool
    """True for a person known only by description ("the widow of the printer")."""


@dataclass(frozen=True)
class PersonListRow:
    """One person in the index."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The person's key."""
    name: str
    """Display name."""
    sort_name: str | None
    """Name the index sorts by, when it differs from the display name."""
    kind: str
    """individual or corporate."""
    unidentified: bool
    """True for a person known only by description."""
    born: str | None
    """Birth as written (EDTF)."""
    died: str | None
    """Death as written (EDTF)."""
    attestations: int
    """Attestations (not deleted) of the person's relations, memberships and facts."""
    degree: int
    """Distinct other persons the person has a relation with (at least one attestation not deleted)."""
    match: str | None
    """How the search matched: exact, prefix, word, contains, words or fuzzy (None without a search)."""
    matched_variant: str | None
    """The name variant that matched, when it is not the display name."""
    score: float | None
    """Similarity (0-100) of a fuzzy match; None for the others."""


@dataclass(frozen=True)
class PersonList:
    """One page of the index, searched and sorted."""

    __pydantic_config__ = DOCUMENTED

    q: str
    """The search as typed ("" for none)."""
    sort: str
    """Sort order: match (best match first), name, attestations or degree (most first)."""
    page: int
    """Page number, from 1."""
    pages: int
    """Number of pages (at least 1)."""
    per_page: int
    """Persons per page."""
    total: int
    """Persons found (all persons without a search)."""
    fuzzy: int
    """How many of them are only near spellings of the search."""
    rows: list[PersonListRow]
    """The persons of this page."""


@dataclass(frozen=True)
class LifeDate:
    """A birth or death date: as written, and as the Gregorian days it can mean."""

    __pydantic_config__ = DOCUMENTED

    text: str
    """As written (EDTF)."""
    calendar: str
    """Calendar it is written in."""
    earliest: date | None
    """First Gregorian day it can mean."""
    latest: date | None
    """Last Gregorian day it can mean."""
    interval: str
    """Those days as text ("1679-01-01 – 1681-12-31")."""


@dataclass(frozen=True)
class Identifier:
    """An authority identifier, with the address of its record where the scheme has one."""

    __pydantic_config__ = DOCUMENTED

    scheme: str
    """wikidata, viaf, gnd, isni, local or another scheme."""
    value: str
    """The identifier in that scheme."""
    url: str | None
    """Address of the authority record (None for local and unknown schemes)."""


@dataclass(frozen=True)
class PersonMembership:
    """A person's membership of a group, with how much evidence it has."""

    __pydantic_config__ = DOCUMENTED

    group_key: str
    """Key of the group."""
    group: str
    """Name of the group."""
    role: str
    """Role in the group ("" when none is recorded)."""
    start: str | None
    """Start of the term as written (EDTF)."""
    end: str | None
    """End of the term as written (EDTF)."""
    attestations: int
    """Attestations (not deleted)."""
    span: str | None
    """Years the attestations cover."""
    membership_id: int | None = None
    """Id of the membership (its page is /memberships/{id})."""


@dataclass(frozen=True)
class PersonFactRow:
    """A cited fact about the person, with its sources."""

    __pydantic_config__ = DOCUMENTED

    kind: str
    """birth, death, occupation, title, residence, gender or other."""
    value: str
    """What the sources say ("printer")."""
    place_key: str | None
    """Key of the place of the fact."""
    place: str | None
    """Name of that place."""
    date_text: str | None
    """Date of the fact as written (EDTF)."""
    interval: str | None
    """That date as Gregorian days."""
    attestations: list[CitedAttestation]
    """The sources that state it (not deleted), in date order."""


@dataclass(frozen=True)
class PersonRelation:
    """One relation of the person, seen from the person."""

    __pydantic_config__ = DOCUMENTED

    relation_id: int
    """Id of the relation (its page is /relations/{id})."""
    other: PersonRef
    """The person at the other end (the person themself for a self-loop)."""
    direction: str | None
    """to (the person is the first end), from (the second end), self (a self-loop), None for undirected kinds."""
    own_role: str | None
    """The person's role in a directed kind (sender)."""
    other_role: str | None
    """The other end's role in a directed kind (recipient)."""
    attestations: int
    """Attestations (not deleted)."""
    in_slice: int | None
    """How many of them the current slice keeps (None when no slice is given)."""
    earliest: date | None
    """First day of the attestations."""
    latest: date | None
    """Last day of the attestations."""
    span: str | None
    """Those days as years ("1703–1705")."""
    certainty: str
    """The strongest certainty among the attestations."""


@dataclass(frozen=True)
class RelationKindGroup:
    """The person's relations of one kind."""

    __pydantic_config__ = DOCUMENTED

    kind_key: str
    """Key of the relation kind."""
    label: str
    """Its label."""
    directed: bool
    """True when the kind has a direction (letter: sender to recipient)."""
    role_a: str | None
    """Role of the first end of a directed kind."""
    role_b: str | None
    """Role of the second end."""
    relations: list[PersonRelation]
    """The relations, by the other person's name (with a limit, only the strongest; see ``total``)."""
    total: int
    """How many relations of this kind the person has (also those not listed)."""


@dataclass(frozen=True)
class PersonDetail:
    """Everything recorded about one person."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The person's key."""
    name: str
    """Display name."""
    sort_name: str | None
    """Name the index sorts by."""
    kind: str
    """individual or corporate."""
    unidentified: bool
    """True for a person known only by description."""
    living: bool
    """True for a person recorded as living."""
    note: str | None
    """A note on the person."""
    variants: list[str]
    """Other spellings of the name."""
    born: LifeDate | None
    """Birth, when recorded."""
    died: LifeDate | None
    """Death, when recorded."""
    identifiers: list[Identifier]
    """Authority identifiers."""
    attestations: int
    """Attestations (not deleted) of the person's relations, memberships and facts."""
    degree: int
    """Distinct other persons the person has a relation with."""
    memberships: list[PersonMembership]
    """Memberships of groups with at least one attestation."""
    facts: list[PersonFactRow]
    """Cited facts with at least one attestation."""
    relations: list[RelationKindGroup]
    """Relations with at least one attestation, by kind."""


# --- the index ------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Match:
    rank: int  # 0 exact, 1 prefix, 2 word, 3 contains, 4 words, 5 fuzzy
    score: float
    variant: str


MATCH_NAMES = ("exact", "prefix", "word", "contains", "words", "fuzzy")


def search_persons(
    *, session: Session, q: str = "", sort: str = "match", page: int = 1, per_page: int = PER_PAGE,
    hidden_ids: frozenset[int] = frozenset(),
) -> PersonList:
    """Return one page of the persons matching ``q`` (all persons when it is blank), sorted.

    Persons found by exact, prefix or substring matches of a name variant come before those
    found only as near spellings, whatever the sort; within each part the sort decides
    (``match``: closest first; ``name``; ``attestations`` and ``degree``: most first).
    A page past the last gives no rows. ``hidden_ids`` (persons the viewer may not see by name)
    are never found by a search and come last in the whole list, so neither reveals their names.
    """
    if sort not in PERSON_SORTS:
        raise ValueError(f"sort must be one of {PERSON_SORTS}")
    persons = {row.id: row for row in session.execute(
        select(Person.id, Person.key, Person.name, Person.sort_name, Person.kind, Person.unidentified,
               Person.born_text, Person.died_text)
    )}  # fmt: skip
    folded = q.strip() and fold(q)
    matches = _match(session, folded, {pid: p.name for pid, p in persons.items()}) if folded else {}
    found = [pid for pid in matches if pid not in hidden_ids] if folded else list(persons)

    def name_key(pid: int) -> tuple[str, str]:
        if pid in hidden_ids:
            return ("", str(pid))
        person = persons[pid]
        return _sort_fold(person.sort_name or person.name), person.key

    def part(pid: int) -> int:
        if pid in hidden_ids:
            return 2
        return 1 if folded and matches[pid].rank == 5 else 0

    counts: dict[int, int] = {}
    degrees: dict[int, int] = {}
    if sort == "attestations":
        counts = attestation_counts(session=session)
        found.sort(key=lambda pid: (part(pid), -counts.get(pid, 0), name_key(pid)))
    elif sort == "degree":
        degrees = degree_counts(session=session)
        found.sort(key=lambda pid: (part(pid), -degrees.get(pid, 0), name_key(pid)))
    elif sort == "match" and folded:
        found.sort(key=lambda pid: (matches[pid].rank, -matches[pid].score, name_key(pid)))
    else:
        found.sort(key=lambda pid: (part(pid), name_key(pid)))

    pages = max(1, -(-len(found) // per_page))
    shown = found[(page - 1) * per_page : page * per_page]
    counts = counts or attestation_counts(session=session, person_ids=shown)
    degrees = degrees or degree_counts(session=session, person_ids=shown)
    rows = []
    for pid in shown:
        person, match = persons[pid], matches.get(pid)
        rows.append(PersonListRow(
            key=person.key, name=person.name,
            sort_name=person.sort_name if person.sort_name and person.sort_name != person.name else None,
            kind=person.kind, unidentified=person.unidentified, born=person.born_text, died=person.died_text,
            attestations=counts.get(pid, 0), degree=degrees.get(pid, 0),
            match=MATCH_NAMES[match.rank] if match else None,
            matched_variant=match.variant if match and match.variant != person.name else None,
            score=round(match.score, 1) if match and match.rank == 5 else None,
        ))  # fmt: skip
    return PersonList(
        q=q.strip(), sort=sort, page=page, pages=pages, per_page=per_page, total=len(found),
        fuzzy=sum(1 for pid in found if part(pid) == 1), rows=rows,
    )


def _match(session: Session, query: str, display: Mapping[int, str]) -> dict[int, _Match]:
    """Return the best match of each person whose name variants match the folded ``query``.

    ``display`` maps every person id to the display name; a person without recorded variants
    is searched by that name.
    """
    variants: list[tuple[int, str, str]] = list(session.execute(select(PersonName.person_id, PersonName.name, PersonName.normalized)))
    named = {pid for pid, _, _ in variants}
    variants += [(pid, name, fold(name)) for pid, name in display.items() if pid not in named]
    words = query.split()
    best: dict[int, _Match] = {}

    def offer(pid: int, match: _Match) -> None:
        current = best.get(pid)
        # better rank, then higher score, then the display name rather than a variant
        if current is None or (match.rank, -match.score, match.variant != display[pid]) < (
            current.rank, -current.score, current.variant != display[pid]
        ):
            best[pid] = match

    unmatched: list[tuple[int, str, str]] = []
    for pid, name, normalized in variants:
        if normalized == query:
            rank = 0
        elif normalized.startswith(query):
            rank = 1
        elif f" {query}" in f" {normalized}":
            rank = 2
        elif query in normalized:
            rank = 3
        elif len(words) > 1 and all(word in normalized for word in words):
            rank = 4
        else:
            unmatched.append((pid, name, normalized))
            continue
        offer(pid, _Match(rank, 100.0, name))

    if len(query) >= FUZZY_MIN_LENGTH:
        # Compare the query with every run of as many words in each variant, so that "brener"
        # finds "jost brenner" and "vel ana" finds "anna vell" (token_sort_ratio ignores order).
        choices: list[str] = []
        owners: list[int] = []
        for index, (pid, _, normalized) in enumerate(unmatched):
            if pid in best:
                continue
            parts = normalized.split()
            for start in range(max(1, len(parts) - len(words) + 1)):
                choices.append(" ".join(parts[start : start + len(words)]))
                owners.append(index)
        for _, score, position in process.extract(
            query, choices, scorer=fuzz.token_sort_ratio, score_cutoff=FUZZY_CUTOFF, limit=None
        ):
            pid, name, _ = unmatched[owners[position]]
            offer(pid, _Match(5, float(score), name))
    return best


def attestation_counts(*, session: Session, person_ids: Iterable[int] | None = None) -> dict[int, int]:
    """Return, per person id, the attestations (not deleted) of their relations, memberships and facts.

    An attestation of a self-loop counts once. With ``person_ids``, only those persons are counted.
    """
    ids = None if person_ids is None else list(person_ids)
    if ids == []:
        return {}
    parts = [
        select(Relation.person_a_id.label("person_id"), Attestation.id)
        .join(Attestation, Attestation.relation_id == Relation.id).where(_LIVE),
        select(Relation.person_b_id.label("person_id"), Attestation.id)
        .join(Attestation, Attestation.relation_id == Relation.id)
        .where(_LIVE, Relation.person_a_id != Relation.person_b_id),
        select(Membership.person_id.label("person_id"), Attestation.id)
        .join(Attestation, Attestation.membership_id == Membership.id).where(_LIVE),
        select(PersonFact.person_id.label("person_id"), Attestation.id)
        .join(Attestation, Attestation.fact_id == PersonFact.id).where(_LIVE),
    ]  # fmt: skip
    if ids is not None:
        parts[0] = parts[0].where(Relation.person_a_id.in_(ids))
        parts[1] = parts[1].where(Relation.person_b_id.in_(ids))
        parts[2] = parts[2].where(Membership.person_id.in_(ids))
        parts[3] = parts[3].where(PersonFact.person_id.in_(ids))
    every = union_all(*parts).subquery()
    return dict(session.execute(select(every.c.person_id, func.count()).group_by(every.c.person_id)).all())


def degree_counts(*, session: Session, person_ids: Iterable[int] | None = None) -> dict[int, int]:
    """Return, per person id, how many other persons they have a live relation with (any kind, any direction)."""
    ids = None if person_ids is None else list(person_ids)
    if ids == []:
        return {}
    live = select(Relation.person_a_id, Relation.person_b_id).where(
        Relation.person_a_id != Relation.person_b_id,
        select(Attestation.id).where(Attestation.relation_id == Relation.id, _LIVE).exists(),
    )
    if ids is not None:
        live = live.where(or_(Relation.person_a_id.in_(ids), Relation.person_b_id.in_(ids)))
    live = live.subquery()
    pairs = union(
        select(live.c.person_a_id.label("person_id"), live.c.person_b_id.label("other_id")),
        select(live.c.person_b_id.label("person_id"), live.c.person_a_id.label("other_id")),
    ).subquery()  # UNION, not UNION ALL: a letter each way and a kinship are one neighbour
    query = select(pairs.c.person_id, func.count()).group_by(pairs.c.person_id)
    if ids is not None:
        query = query.where(pairs.c.person_id.in_(ids))
    return dict(session.execute(query).all())


# --- one person -----------------------------------------------------------------------------


def get_person_ref(*, session: Session, key: str) -> PersonRef | None:
    """Return the person with ``key``, following the old keys of merged persons; None if unknown.

    The ref carries the current key: a caller given an old key sees that the two differ.
    """
    person = session.scalar(select(Person).where(Person.key == key))
    if person is None:
        person = session.scalar(select(Person).join(PersonAlias, PersonAlias.person_id == Person.id).where(PersonAlias.key == key))
    return _ref(person) if person is not None else None


def person_refs(*, session: Session, person_ids: Iterable[int]) -> dict[int, PersonRef]:
    """Return refs of the given persons, keyed by id."""
    ids = set(person_ids)
    if not ids:
        return {}
    columns = (Person.id, Person.key, Person.name, Person.kind, Person.unidentified)
    wanted = sorted(ids)
    refs: dict[int, PersonRef] = {}
    for start in range(0, len(wanted), 500):  # stays under SQLite's limit of bound parameters
        rows = session.connection().execute(select(*columns).where(Person.id.in_(wanted[start : start + 500])))  # Core: no ORM rows
        for pid, key, name, kind, unidentified in rows:
            refs[pid] = PersonRef(key=key, name=name, kind=kind, unidentified=unidentified)
    return refs


def person_id(*, session: Session, key: str) -> int | None:
    """Return the id of the person whose current key is ``key``."""
    return session.scalar(select(Person.id).where(Person.key == key))


def _ref(person: Person) -> PersonRef:
    return PersonRef(key=person.key, name=person.name, kind=person.kind, unidentified=person.unidentified)


def identifier_url(scheme: str, value: str) -> str | None:
    """Return the address of an authority record (spaces taken out, as ISNIs are often written)."""
    pattern = IDENTIFIER_URLS.get(scheme.lower())
    return pattern.format(value="".join(value.split())) if pattern else None


def get_person(
    *, session: Session, key: str, in_slice: Mapping[int, int] | None = None, relation_limit: int | None = None
) -> PersonDetail | None:
    """Return everything recorded about the person whose current key is ``key`` (None if unknown).

    ``in_slice`` maps relation ids to how many of their attestations the current slice keeps;
    when given, each relation says so. Deleted attestations never count, and relations,
    memberships and facts left without a live attestation are not listed. With
    ``relation_limit``, each kind lists only that many relations, those with the most
    attestations (ties at the cut by the other person's name, as the page orders them), and says
    how many it has: a hub's thousands of relations are counted in SQL, not loaded.
    """
    person = session.scalar(select(Person).where(Person.key == key))
    if person is None:
        return None
    rows = _relation_rows(session, person.id)
    # The relation rows give the degree and the relations' share of the attestations (a self-loop's once),
    # as degree_counts and attestation_counts count them, without reading a hub's relations twice more.
    pid = person.id  # read once: an ORM attribute costs a call on each of a hub's rows
    degree = len({row[3] if row[2] == pid else row[2] for row in rows if row[2] != row[3]})
    attested = sum(row[4] for row in rows) + _membership_and_fact_attestations(session, person.id)
    return PersonDetail(
        key=person.key, name=person.name, sort_name=person.sort_name, kind=person.kind,
        unidentified=person.unidentified, living=person.living, note=person.note,
        variants=[n.name for n in person.names if n.name != person.name],
        born=_life_date(person.born_text, person.calendar, person.born_earliest, person.born_latest),
        died=_life_date(person.died_text, person.calendar, person.died_earliest, person.died_latest),
        identifiers=[Identifier(scheme=i.scheme, value=i.value, url=identifier_url(i.scheme, i.value)) for i in person.identifiers],
        attestations=attested, degree=degree,
        memberships=_memberships(session, person.id),
        facts=_facts(session, person.id),
        relations=_relations(session, person, rows, in_slice, relation_limit),
    )  # fmt: skip


def _life_date(text: str | None, calendar: str, earliest: date | None, latest: date | None) -> LifeDate | None:
    if not text:
        return None
    return LifeDate(text=text, calendar=calendar, earliest=earliest, latest=latest,
                    interval=format_interval(DateInterval(earliest, latest)))  # fmt: skip


def _first_day() -> object:
    return func.min(func.coalesce(Attestation.earliest, Attestation.latest))


def _last_day() -> object:
    return func.max(func.coalesce(Attestation.latest, Attestation.earliest))


def _memberships(session: Session, pid: int) -> list[PersonMembership]:
    rows = session.execute(
        select(Membership, Group.key, Group.name, func.count(Attestation.id), _first_day(), _last_day())
        .join(Group, Membership.group_id == Group.id)
        .join(Attestation, Attestation.membership_id == Membership.id)
        .where(Membership.person_id == pid, _LIVE)
        .group_by(Membership.id, Group.id)  # PostgreSQL wants the joined key too
        .order_by(func.coalesce(Membership.start_earliest, _first_day()), Group.name, Membership.role)
    ).all()
    return [
        PersonMembership(group_key=key, group=name, role=m.role, start=m.start_text, end=m.end_text,
                         attestations=count, span=year_span(first, last), membership_id=m.id)
        for m, key, name, count, first, last in rows
    ]  # fmt: skip


def _facts(session: Session, pid: int) -> list[PersonFactRow]:
    rows = session.execute(
        select(PersonFact, Place.key, Place.name, Attestation.id, Attestation.key)
        .outerjoin(Place, PersonFact.place_id == Place.id)
        .join(Attestation, Attestation.fact_id == PersonFact.id)
        .where(PersonFact.person_id == pid, _LIVE)
    ).all()
    fact_of = {att_key: fact.id for fact, _, _, _, att_key in rows}
    facts = {fact.id: (fact, place_key, place_name) for fact, place_key, place_name, _, _ in rows}
    by_fact: dict[int, list[CitedAttestation]] = defaultdict(list)
    for att in get_cited_attestations(session=session, attestation_ids=[row[3] for row in rows]):  # in date order
        by_fact[fact_of[att.key]].append(att)
    result = []
    for fact_id, (fact, place_key, place_name) in facts.items():
        dated = fact.earliest is not None or fact.latest is not None
        result.append(PersonFactRow(
            kind=fact.kind, value=fact.value, place_key=place_key, place=place_name, date_text=fact.date_text,
            interval=format_interval(DateInterval(fact.earliest, fact.latest)) if dated else None,
            attestations=by_fact[fact_id],
        ))  # fmt: skip
    result.sort(key=lambda f: (FACT_ORDER.get(f.kind, len(FACT_ORDER)), f.attestations[0].earliest or date.max, f.value))
    return result


FACT_ORDER = {kind: n for n, kind in enumerate(("birth", "death", "gender", "title", "occupation", "residence", "other"))}


def _relation_rows(session: Session, pid: int) -> list:
    """Return each relation of the person with a live attestation: id, kind, ends, attestations, days, best grade."""
    columns = (Relation.id, Relation.kind_id, Relation.person_a_id, Relation.person_b_id,
               func.count(Attestation.id), _first_day(), _last_day(), func.min(CERTAINTY_RANK))  # fmt: skip
    # The relations are found first, from either end, and then read in order of id: SQLite then
    # groups them as it goes (an OR of the two ends would sort a hub's thousands of groups).
    ids = select(Relation.id).where(Relation.person_a_id == pid).union_all(select(Relation.id).where(Relation.person_b_id == pid))
    return list(session.connection().execute(  # Core execution: the ORM's row processing costs more on a hub
        select(*columns).join(Attestation, Attestation.relation_id == Relation.id)
        .where(Relation.id.in_(ids), _LIVE).group_by(Relation.id)
    ).all())  # fmt: skip


def _membership_and_fact_attestations(session: Session, pid: int) -> int:
    """Return the live attestations of the person's memberships and facts."""
    memberships = select(func.count(Attestation.id)).join(Membership, Attestation.membership_id == Membership.id)
    facts = select(func.count(Attestation.id)).join(PersonFact, Attestation.fact_id == PersonFact.id)
    return (session.scalar(memberships.where(Membership.person_id == pid, _LIVE)) or 0) + (
        session.scalar(facts.where(PersonFact.person_id == pid, _LIVE)) or 0)  # fmt: skip


def _relations(
    session: Session, person: Person, rows: list, in_slice: Mapping[int, int] | None, limit: int | None
) -> list[RelationKindGroup]:
    if not rows:
        return []
    pid = person.id
    by_kind: dict[int, list] = defaultdict(list)
    for row in rows:
        by_kind[row[1]].append(row)
    totals = {kind_id: len(found) for kind_id, found in by_kind.items()}
    kinds = {k.id: k for k in session.scalars(select(RelationKind).where(RelationKind.id.in_(set(by_kind))))}
    if limit is not None:
        by_kind = {kind_id: _strongest_rows(session, pid, found, limit, directed=kinds[kind_id].directed)
                   for kind_id, found in by_kind.items()}  # fmt: skip
    listed = [row for found in by_kind.values() for row in found]
    others = person_refs(session=session, person_ids=[r[2] if r[3] == pid else r[3] for r in listed])
    grouped: dict[int, list[PersonRelation]] = defaultdict(list)
    for relation_id, kind_id, a, b, count, first, last, grade in listed:
        kind = kinds[kind_id]
        other = others[b if a == pid else a]
        grouped[kind_id].append(PersonRelation(
            relation_id=relation_id, other=other, direction=_direction(a, b, pid, kind.directed),
            own_role=(kind.role_a if a == pid else kind.role_b) if kind.directed else None,
            other_role=(kind.role_b if a == pid else kind.role_a) if kind.directed else None,
            attestations=count, in_slice=None if in_slice is None else in_slice.get(relation_id, 0),
            earliest=first, latest=last, span=year_span(first, last), certainty=CERTAINTIES[grade],
        ))  # fmt: skip
    return [
        RelationKindGroup(
            kind_key=kinds[kind_id].key, label=kinds[kind_id].label, directed=kinds[kind_id].directed,
            role_a=kinds[kind_id].role_a, role_b=kinds[kind_id].role_b,
            relations=sorted(relations, key=_by_name), total=totals[kind_id],
        )
        for kind_id, relations in sorted(grouped.items(), key=lambda item: (kinds[item[0]].label.casefold(), item[0]))
    ]  # fmt: skip


_DIRECTION_ORDER = {"self": 0, "to": 1, None: 1, "from": 2}


def _direction(a: int, b: int, pid: int, directed: bool) -> str | None:
    if a == b:
        return "self"
    if directed:
        return "to" if a == pid else "from"
    return None


def _by_name(relation: PersonRelation) -> tuple:
    return fold(relation.other.name), relation.other.key, _DIRECTION_ORDER[relation.direction]


def _strongest_rows(session: Session, pid: int, rows: list, limit: int, *, directed: bool) -> list:
    """Return the ``limit`` rows with the most attestations; those equal at the cut by the other's name.

    The same choice as sorting every relation by name and then, stably, by attestations: only
    the persons tied at the cut are read to break the tie.
    """
    if len(rows) <= limit:
        return rows
    cut = sorted((row[4] for row in rows), reverse=True)[limit - 1]
    kept = [row for row in rows if row[4] > cut]
    tied = [row for row in rows if row[4] == cut]
    refs = person_refs(session=session, person_ids=[r[2] if r[3] == pid else r[3] for r in tied])

    def order(row) -> tuple:  # noqa: ANN001
        ref = refs[row[3] if row[2] == pid else row[2]]
        return fold(ref.name), ref.key, _DIRECTION_ORDER[_direction(row[2], row[3], pid, directed)]

    return kept + sorted(tied, key=order)[: limit - len(kept)]
