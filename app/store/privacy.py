"""Persons whose data is restricted: recorded as living, or born recently with no death recorded.

Data about living people falls under data-protection law. A person is restricted when marked
``living``, or, by the configurable rule, born less than ``living_years`` years ago (the latest
day their birth date can mean) with no death date. Who may see restricted persons is decided
in ``app.auth``; this module only finds them.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from datetime import date
from functools import cached_property

from sqlalchemy import and_, or_, select
from sqlalchemy.orm import Session

from app.models import Person, PersonAlias, PersonName

__all__ = ["RESTRICTED_KEY", "RESTRICTED_NAME", "RestrictedPersons", "list_restricted_persons"]

RESTRICTED_KEY = "restricted"
RESTRICTED_NAME = "restricted person"
KEY_CHARACTERS = r"[\w.:-]"


@dataclass(frozen=True)
class RestrictedPersons:
    """The restricted persons of the dataset: their ids, keys (old ones too) and every spelling of their names."""

    ids: frozenset[int]
    keys: frozenset[str]
    names: tuple[str, ...]
    """Display names and variants, longest first (so a longer spelling is matched before its part)."""

    def __bool__(self) -> bool:
        return bool(self.ids)

    @cached_property
    def _pattern(self) -> re.Pattern | None:
        keys = "|".join(re.escape(key) for key in sorted(self.keys, key=len, reverse=True))
        names = "|".join(re.escape(name) for name in self.names)
        parts = ([rf"(?<!{KEY_CHARACTERS})(?:{keys})(?!{KEY_CHARACTERS})"] if keys else []) + (
            [rf"(?<!\w)(?:{names})(?!\w)"] if names else [])
        return re.compile("|".join(parts), re.I) if parts else None

    @cached_property
    def _lower_keys(self) -> frozenset[str]:
        return frozenset(key.lower() for key in self.keys)

    def hide_in(self, value: str) -> str:
        """Return ``value`` with each key of a restricted person replaced by "restricted" and each spelling of their
        names by "restricted person" (whole words, any case)."""
        if value in self.keys:
            return RESTRICTED_KEY
        if self._pattern is None:
            return value
        return self._pattern.sub(
            lambda m: RESTRICTED_KEY if m.group(0).lower() in self._lower_keys else RESTRICTED_NAME, value)


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
