"""Attestations read as full citations: the document, where in it, what kind of witness, when, how sure.

Pages that show evidence (a person's facts, the ties between two persons, one relation) all
list attestations the same way, so they read them here, in one query plus one for citations.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from datetime import date

from sqlalchemy import select
from sqlalchemy.orm import Session, aliased, joinedload

from app.dates import DateInterval, format_interval
from app.documented import DOCUMENTED
from app.models import Attestation, Person, Relation
from app.store.citations import SourceCitation, get_citations

__all__ = [
    "CitedAttestation",
    "EvidenceCounts",
    "WrittenName",
    "count_evidence",
    "get_cited_attestations",
    "year_span",
]


@dataclass(frozen=True)
class WrittenName:
    """How a document writes the name of one party."""

    __pydantic_config__ = DOCUMENTED

    person_key: str
    """Key of the person meant."""
    person: str
    """Display name of the person meant."""
    text: str
    """The name as the document writes it."""


@dataclass(frozen=True)
class CitedAttestation:
    """One attestation with everything needed to find the evidence again and weigh it."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The attestation's key."""
    relation_id: int | None
    """The relation it attests (None for a membership or a fact)."""
    source: SourceCitation
    """The document: repository, collection and shelfmark, or the printed edition."""
    copy_of: str | None
    """When the document is a copy, the citation of its original (its key is source.copy_of_key)."""
    locus: str | None
    """Where in the document: folio, page, line, entry."""
    evidence: str
    """Kind of witness: original, copy, draft, mention, register or edition."""
    date_text: str | None
    """Date as written (EDTF): the attestation's own, else its document's."""
    calendar: str | None
    """Calendar the date is written in."""
    date_from_source: bool
    """True when the attestation has no date of its own and takes its document's."""
    earliest: date | None
    """First Gregorian day the date can mean (None: undated or open)."""
    latest: date | None
    """Last Gregorian day the date can mean (None: undated or open)."""
    interval: str | None
    """The Gregorian interval as text ("1703-06-12", "1703-01-01 – 1705-12-31"); None when undated."""
    place_key: str | None
    """Key of the place the attestation names."""
    place: str | None
    """Name of that place."""
    certainty: str
    """How certain the tie or fact is in this document: certain, probable or possible."""
    identification: str
    """How certain it is that the persons named are the persons meant."""
    names_as_written: list[WrittenName]
    """Names of the parties as the document writes them (only those recorded)."""
    quote: str | None
    """The words of the document."""
    note: str | None
    """A note of whoever entered the attestation."""


@dataclass(frozen=True)
class EvidenceCounts:
    """How much evidence a set of attestations is: documents, witnesses, collections, period."""

    __pydantic_config__ = DOCUMENTED

    attestations: int
    """Attestations counted."""
    documents: int
    """Distinct documents; a copy and its original count once."""
    copies: int
    """Attestations whose evidence is a copy."""
    mentions: int
    """Attestations known only from a mention in another document."""
    collections: int
    """Distinct archival collections the documents belong to."""
    printed: int
    """Distinct documents outside any collection (printed sources)."""
    earliest: date | None
    """First day any of the attestations may fall on."""
    latest: date | None
    """Last day any of the attestations may fall on."""
    span: str | None
    """The period as years ("1703–1705"); None when nothing is dated."""


def get_cited_attestations(*, session: Session, attestation_ids: Iterable[int]) -> list[CitedAttestation]:
    """Return the attestations with the given ids as citations, in date order (undated last)."""
    ids = set(attestation_ids)
    if not ids:
        return []
    person_a, person_b = aliased(Person), aliased(Person)
    rows = session.execute(
        select(Attestation, person_a.key, person_a.name, person_b.key, person_b.name)
        .options(joinedload(Attestation.source), joinedload(Attestation.place))
        .outerjoin(Relation, Attestation.relation_id == Relation.id)
        .outerjoin(person_a, Relation.person_a_id == person_a.id)
        .outerjoin(person_b, Relation.person_b_id == person_b.id)
        .where(Attestation.id.in_(ids))
    ).all()
    source_ids = {row[0].source_id for row in rows} | {row[0].source.copy_of_id for row in rows if row[0].source.copy_of_id}
    citations = get_citations(session=session, source_ids=list(source_ids))
    cited = [_cite(row[0], citations, row[1:]) for row in rows]
    return sorted(cited, key=_date_order)


def _cite(att: Attestation, citations: dict[int, SourceCitation], ends: tuple) -> CitedAttestation:
    original = citations.get(att.source.copy_of_id) if att.source.copy_of_id else None
    a_key, a_name, b_key, b_name = ends
    written = [
        WrittenName(person_key=key, person=name, text=text)
        for key, name, text in ((a_key, a_name, att.name_a_as_written), (b_key, b_name, att.name_b_as_written))
        if key is not None and text
    ]
    own_date = att.date_text is not None
    dated = att.earliest is not None or att.latest is not None
    return CitedAttestation(
        key=att.key, relation_id=att.relation_id, source=citations[att.source_id],
        copy_of=original.text if original else None, locus=att.locus, evidence=att.evidence,
        date_text=att.date_text if own_date else att.source.date_text,
        calendar=(att.calendar or att.source.calendar) if own_date else att.source.calendar,
        date_from_source=not own_date, earliest=att.earliest, latest=att.latest,
        interval=format_interval(DateInterval(att.earliest, att.latest)) if dated else None,
        place_key=att.place.key if att.place else None, place=att.place.name if att.place else None,
        certainty=att.certainty, identification=att.identification, names_as_written=written,
        quote=att.quote, note=att.note,
    )


def _date_order(att: CitedAttestation) -> tuple:
    undated = att.earliest is None and att.latest is None
    return (undated, att.earliest or date.min, att.latest or date.max, att.source.key, att.locus or "", att.key)


def count_evidence(attestations: list[CitedAttestation]) -> EvidenceCounts:
    """Return the counts of a list of cited attestations; a copy counts as the document it copies."""
    sources = {att.source.key: att.source for att in attestations}
    documents = {s.copy_of_key or s.key for s in sources.values()}
    dated = [a for a in attestations if a.earliest or a.latest]
    earliest = min((a.earliest or a.latest for a in dated), default=None)
    latest = max((a.latest or a.earliest for a in dated), default=None)
    return EvidenceCounts(
        attestations=len(attestations),
        documents=len(documents),
        copies=sum(a.evidence == "copy" for a in attestations),
        mentions=sum(a.evidence == "mention" for a in attestations),
        collections=len({s.collection_key for s in sources.values() if s.collection_key}),
        printed=len({s.copy_of_key or s.key for s in sources.values() if not s.collection_key}),
        earliest=earliest,
        latest=latest,
        span=year_span(earliest, latest),
    )


def year_span(earliest: date | None, latest: date | None) -> str | None:
    """Return a period as years: "1703", "1703–1711", "…–1711"; None when both ends are open."""
    if earliest is None and latest is None:
        return None
    low = str(earliest.year) if earliest else "…"
    high = str(latest.year) if latest else "…"
    return low if low == high else f"{low}–{high}"
