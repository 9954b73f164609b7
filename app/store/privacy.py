"""Persons whose data is restricted: recorded as living, or born recently with no death recorded.

Data about living people falls under data-protection law. A person is restricted when marked
``living``, or, by the configurable rule, born less than ``living_years`` years ago (the latest
day their birth date can mean) with no death date. Who may see restricted persons is decided
in ``app.auth``; this module only finds them.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date

from sqlalchemy import and_, or_, select
from sqlalchemy.orm import Session

from app.models import Person, PersonAlias, PersonName

__all__ = ["RestrictedPersons", "list_restricted_persons"]


@dataclass(frozen=True)
class RestrictedPersons:
    """The restricted persons of the dataset: their ids, keys (old ones too) and every spelling of their names."""

    ids: frozenset[int]
    keys: frozenset[str]
    names: tuple[str, ...]
    """Display names and variants, longest first (so a longer spelling is matched before its part)."""

    def __bool__(self) -> bool:
        return bool(self.ids)


def list_restricted_persons(*, session: Session, living_years: int, today: date | None = None) -> RestrictedPersons:
    """Return the persons marked living, and (``living_years`` > 0) those born less than that many years ago with no death."""
    today = today or date.today()
    rule = Person.living.is_(True)
    if living_years > 0:
        try:
            cutoff = today.replace(year=today.year - living_years)
        except ValueError:  # 29 February
            cutoff = today.replace(year=today.year - living_years, day=28)
        recent = and_(Person.born_latest.is_not(None), Person.born_latest > cutoff,
                      Person.died_text.is_(None), Person.died_earliest.is_(None))
        rule = or_(rule, recent)
    rows = session.execute(select(Person.id, Person.key, Person.name).where(rule)).all()
    if not rows:
        return RestrictedPersons(frozenset(), frozenset(), ())
    ids = frozenset(row.id for row in rows)
    keys = {row.key for row in rows}
    keys.update(session.scalars(select(PersonAlias.key).where(PersonAlias.person_id.in_(ids))))
    names = {row.name for row in rows}
    names.update(session.scalars(select(PersonName.name).where(PersonName.person_id.in_(ids))))
    spelled = sorted((n.strip() for n in names if n and len(n.strip()) >= 2), key=lambda n: (-len(n), n))
    return RestrictedPersons(ids, frozenset(keys), tuple(spelled))
