"""The dataset at a glance: how much evidence there is, and over which period."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date

from sqlalchemy import ColumnElement, ScalarSelect, exists, func, select
from sqlalchemy.orm import Session

from app.documented import DOCUMENTED
from app.models import (
    CERTAINTIES,
    Attestation,
    Collection,
    DataVersion,
    Group,
    Membership,
    Person,
    Relation,
    Repository,
    Source,
)

__all__ = ["DatasetSummary", "get_data_version", "get_summary"]


@dataclass(frozen=True)
class DatasetSummary:
    """Counts of what the dataset holds; deleted attestations and the ties left without one are not counted."""

    # Lets the API documentation take each field's description from its docstring.
    __pydantic_config__ = DOCUMENTED

    persons: int
    """Persons, identified or not, individual or corporate."""
    relations: int
    """Relations with at least one attestation that is not deleted."""
    attestations: int
    """Attestations that are not deleted (of relations, memberships and facts)."""
    sources: int
    """Documents: archival, printed, or both."""
    repositories: int
    """Archives and libraries that hold documents."""
    collections: int
    """Fonds, series and collections inside the repositories."""
    groups: int
    """Institutions, societies, households and other groups (the second mode)."""
    memberships: int
    """Memberships with at least one attestation that is not deleted."""
    earliest: date | None
    """First day covered by an attestation that is not deleted; null when none is dated."""
    latest: date | None
    """Last day covered by an attestation that is not deleted; null when none is dated."""
    data_version: int
    """Number of writes the dataset has seen; cite it with any result."""
    attestations_by_certainty: dict[str, int]
    """Attestations that are not deleted, by certainty grade (every grade listed, most certain first)."""


def get_summary(*, session: Session) -> DatasetSummary:
    """Return the counts, the period covered, the certainty grades and the data version."""
    alive = Attestation.deleted_at.is_(None)
    relation_alive = exists().where(Attestation.relation_id == Relation.id, alive)
    membership_alive = exists().where(Attestation.membership_id == Membership.id, alive)
    # An attestation with one open end still covers its other end.
    first_day = select(func.min(func.coalesce(Attestation.earliest, Attestation.latest))).where(alive)
    last_day = select(func.max(func.coalesce(Attestation.latest, Attestation.earliest))).where(alive)

    row = session.execute(
        select(
            _count(Person).label("persons"),
            _count(Relation, relation_alive).label("relations"),
            _count(Attestation, alive).label("attestations"),
            _count(Source).label("sources"),
            _count(Repository).label("repositories"),
            _count(Collection).label("collections"),
            _count(Group).label("groups"),
            _count(Membership, membership_alive).label("memberships"),
            first_day.scalar_subquery().label("earliest"),
            last_day.scalar_subquery().label("latest"),
        )
    ).one()

    by_certainty = dict.fromkeys(CERTAINTIES, 0)
    for certainty, number in session.execute(
        select(Attestation.certainty, func.count()).where(alive).group_by(Attestation.certainty)
    ):
        by_certainty[certainty] = number

    return DatasetSummary(
        persons=row.persons,
        relations=row.relations,
        attestations=row.attestations,
        sources=row.sources,
        repositories=row.repositories,
        collections=row.collections,
        groups=row.groups,
        memberships=row.memberships,
        earliest=row.earliest,
        latest=row.latest,
        data_version=get_data_version(session=session),
        attestations_by_certainty=by_certainty,
    )


def get_data_version(*, session: Session) -> int:
    """Return the data version: the number of writes so far (0 for a new dataset)."""
    version = session.scalar(select(DataVersion.version).where(DataVersion.id == 1))
    return version or 0


def _count(model: type, *conditions: ColumnElement[bool]) -> ScalarSelect[int]:
    return select(func.count()).select_from(model).where(*conditions).scalar_subquery()

