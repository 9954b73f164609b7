"""Places: what is known of a place, and what the evidence ties to it.

A place page gathers what points to one place from every side: documents written or received
there (listed by ``store.sources.search_sources``), facts located there, groups and
repositories that are there. Coordinates are kept as numbers; no map is drawn from outside.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from app.documented import DOCUMENTED
from app.models import Attestation, Group, Person, PersonFact, Place, Repository, Source
from app.store.persons import PersonRef

__all__ = ["GroupAtPlace", "LocatedFact", "PlaceDetail", "RepositoryAtPlace", "get_place"]


@dataclass(frozen=True)
class LocatedFact:
    """A fact about a person located at the place (residence, place of birth, ...)."""

    __pydantic_config__ = DOCUMENTED

    person: PersonRef
    """The person the fact is about."""
    fact: str
    """Kind of fact: birth, death, occupation, title, residence, gender or other."""
    value: str
    """What the documents say."""
    date_text: str | None
    """Date of the fact as written (EDTF)."""
    sources: list[str]
    """Keys of the documents that attest it (attestations not deleted)."""


@dataclass(frozen=True)
class GroupAtPlace:
    """A group located at the place."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The group's key."""
    name: str
    """Its name."""
    kind: str | None
    """Society, parish, household, ..."""
    start_text: str | None
    """When it began, as written (EDTF)."""
    end_text: str | None
    """When it ended, as written (EDTF)."""


@dataclass(frozen=True)
class RepositoryAtPlace:
    """A repository located at the place."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The repository's key."""
    name: str
    """Its name."""


@dataclass(frozen=True)
class PlaceDetail:
    """One place and what the dataset locates there."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The place's key."""
    name: str
    """Its name."""
    variants: list[str]
    """Other spellings of its name."""
    latitude: float | None
    """Latitude in decimal degrees (WGS 84), when known."""
    longitude: float | None
    """Longitude in decimal degrees (WGS 84), when known."""
    identifier: str | None
    """Gazetteer identifier as recorded (scheme:value)."""
    facts: list[LocatedFact]
    """Facts about persons located there, each attested by at least one document."""
    groups: list[GroupAtPlace]
    """Groups located there."""
    repositories: list[RepositoryAtPlace]
    """Repositories located there."""
    attestations: int
    """Attestations of relations that name this place (not deleted)."""


def get_place(*, session: Session, key: str) -> PlaceDetail | None:
    """Return one place with the facts, groups and repositories located there, or None."""
    place = session.scalars(select(Place).where(Place.key == key)).one_or_none()
    if place is None:
        return None
    return PlaceDetail(
        key=place.key,
        name=place.name,
        variants=[v.strip() for v in (place.variants or "").split("|") if v.strip()],
        latitude=place.latitude,
        longitude=place.longitude,
        identifier=place.identifier,
        facts=_facts(session, place.id),
        groups=[
            GroupAtPlace(key=g.key, name=g.name, kind=g.kind, start_text=g.start_text, end_text=g.end_text)
            for g in session.scalars(select(Group).where(Group.place_id == place.id).order_by(Group.name, Group.key))
        ],
        repositories=[
            RepositoryAtPlace(key=r_key, name=r_name)
            for r_key, r_name in session.execute(
                select(Repository.key, Repository.name).where(Repository.place_id == place.id).order_by(Repository.name)
            )
        ],
        attestations=session.scalar(
            select(func.count()).select_from(Attestation)
            .where(Attestation.place_id == place.id, Attestation.deleted_at.is_(None))
        ) or 0,
    )


def _facts(session: Session, place_id: int) -> list[LocatedFact]:
    """Facts located at the place that live (at least one attestation not deleted), by person."""
    rows = session.execute(
        select(PersonFact.id, Person, PersonFact.kind, PersonFact.value, PersonFact.date_text, Source.key)
        .join(Person, PersonFact.person_id == Person.id)
        .join(Attestation, Attestation.fact_id == PersonFact.id)
        .join(Source, Attestation.source_id == Source.id)
        .where(PersonFact.place_id == place_id, Attestation.deleted_at.is_(None))
        .order_by(Person.sort_name.is_(None), Person.sort_name, Person.name, PersonFact.earliest, PersonFact.id, Source.key)
    ).all()
    sources: dict[int, list[str]] = defaultdict(list)
    facts: dict[int, tuple] = {}
    for fact_id, person, kind, value, date_text, source_key in rows:
        ref = PersonRef(key=person.key, name=person.name, kind=person.kind, unidentified=person.unidentified)
        facts.setdefault(fact_id, (ref, kind, value, date_text))
        if source_key not in sources[fact_id]:
            sources[fact_id].append(source_key)
    return [
        LocatedFact(person=ref, fact=kind, value=value, date_text=date_text, sources=sources[fact_id])
        for fact_id, (ref, kind, value, date_text) in facts.items()
    ]
