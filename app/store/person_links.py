"""Links between person records that may be one person ("possibly the same as"), kept without merging."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timezone

from sqlalchemy import or_, select
from sqlalchemy.orm import Session, aliased

from app.models import Person, PersonLink

__all__ = ["LinkedPerson", "create_person_link", "list_person_links"]


@dataclass(frozen=True)
class LinkedPerson:
    """Another person record that may be the same person as this one."""

    __pydantic_config__ = {"use_attribute_docstrings": True}

    key: str
    """The other person's key."""
    name: str
    """The other person's display name."""
    note: str | None
    """Why the two were linked."""
    created_by: str
    """Who linked them."""
    created_at: datetime
    """When (UTC)."""


def create_person_link(*, session: Session, a: int, b: int, note: str | None, created_by: str) -> bool:
    """Link persons ``a`` and ``b`` (ids); return False when they are one record or linked already."""
    if a == b:
        return False
    a, b = sorted((a, b))
    exists = session.scalar(select(PersonLink.id).where(PersonLink.person_a_id == a, PersonLink.person_b_id == b))
    if exists is not None:
        return False
    session.add(PersonLink(person_a_id=a, person_b_id=b, note=note, created_by=created_by,
                           created_at=datetime.now(timezone.utc).replace(tzinfo=None)))
    session.flush()
    return True


def list_person_links(*, session: Session, key: str) -> list[LinkedPerson]:
    """Return the persons linked to person ``key`` as possibly the same, by name."""
    me = aliased(Person)
    other = aliased(Person)
    rows = session.execute(
        select(other.key, other.name, PersonLink.note, PersonLink.created_by, PersonLink.created_at)
        .select_from(PersonLink)
        .join(me, or_(me.id == PersonLink.person_a_id, me.id == PersonLink.person_b_id))
        .join(other, or_(other.id == PersonLink.person_a_id, other.id == PersonLink.person_b_id))
        .where(me.key == key, other.id != me.id)
        .order_by(other.name, other.key)
    ).all()
    return [LinkedPerson(*row) for row in rows]
