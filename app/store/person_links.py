"""Links made by an import between person records that may be one person ("possibly the same as").

The links are listed, made and removed by hand in ``app.store.merging``; this is the id-based
form the import preview uses inside its own write transaction.
"""

from __future__ import annotations

from datetime import datetime, timezone

from sqlalchemy import select
from sqlalchemy.orm import Session

from app.models import PersonLink

__all__ = ["create_person_link"]


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

