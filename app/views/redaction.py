"""Restricted persons shown to readers as "restricted person": one pass over any view-model.

Every answer a reader gets (page, JSON, partial, SVG, CSV) goes through :func:`redact_for` on
its way out, after every cache, so a stored result or a kept drawing made for anyone can never
show a reader more than this pass leaves. The pass works on the shape of the view-model:

- a dataclass with a ``key`` of a restricted person and a name field (a person reference, a
  row of a list, a node of a drawing, the person page itself) keeps its numbers and flags and
  loses everything else: the key becomes "restricted", the name "restricted person", other text
  is blanked, lists (names, facts, identifiers, relations) are emptied and dates dropped;
- a record that holds such a person (a relation row, an attested tie) loses its quotes, notes,
  loci, names as written and values, down to the attestations inside it;
- a page about such a person (the person page, the ego drawing, ties and relations with them, the
  person's measures) is refused with 403 and a sentence saying why;
- any text left anywhere (captions, notes, table cells, links) has each spelling of a restricted
  person's name replaced by "restricted person" and each of their keys by "restricted".

Editors and admins see everything (``app.auth.visibility_of``).
"""

from __future__ import annotations

import dataclasses
from datetime import date, datetime
from typing import Any

from fastapi import HTTPException, Request

from app.auth import current_actor, visibility_of
from app.store.privacy import RESTRICTED_KEY, RESTRICTED_NAME, RestrictedPersons, list_restricted_persons
from app.store.summary import get_data_version
from app.views.common import request_session

__all__ = ["RESTRICTED_KEY", "RESTRICTED_NAME", "Redactor", "redact_for", "restricted_for", "restricted_persons", "without_left_out"]

NAME_FIELDS = frozenset({"name", "label", "display_name", "sort_name", "title", "ego_name"})
EVIDENCE_WORDS = frozenset({
    "quote", "note", "locus", "written", "value", "text", "date", "dates", "term", "start", "end", "role", "born",
    "died", "caption", "variant", "variants", "years", "earliest", "latest", "keys", "identifiers", "facts",
})  # a field whose name has one of these words (split at "_") says something about the person
LAYOUT_FIELDS = frozenset({"kind", "shape", "anchor", "colour", "dash", "path"})  # how a mark is drawn, not who
RESTRICTED_PAGE = ("This is a restricted person (recorded as living, or born too recently): their name, dates, "
                   "facts and evidence are shown to editors only. Elsewhere they appear as \"restricted person\".")


TEXTS_KEPT = 50_000
"""Texts whose redacted form a Redactor remembers: labels, kinds and names recur on every page."""


class Redactor:
    """Rewrites view-models for a viewer who may not see ``restricted``."""

    def __init__(self, restricted: RestrictedPersons):
        self.restricted = restricted
        self.keys = restricted.keys
        self._texts: dict[str, str] = {}
        self._fields: dict[type, tuple[str, ...] | None] = {}

    # -- text -----------------------------------------------------------------------------------

    def text(self, value: str) -> str:
        """Return ``value`` with restricted keys and names replaced."""
        found = self._texts.get(value)
        if found is None:
            if len(self._texts) >= TEXTS_KEPT:
                self._texts.clear()
            found = self._texts[value] = self.restricted.hide_in(value)
        return value if found == value else found  # unchanged: the very object, so nothing is copied

    def _field_names(self, kind: type) -> tuple[str, ...] | None:
        """The field names of a dataclass type, None for any other type (looked up once per type)."""
        try:
            return self._fields[kind]
        except KeyError:
            names = tuple(f.name for f in dataclasses.fields(kind)) if dataclasses.is_dataclass(kind) else None
            self._fields[kind] = names
            return names

    # -- structures -----------------------------------------------------------------------------

    def redact(self, value: Any) -> Any:
        """Return ``value`` rewritten; parts with nothing to hide are returned as they are."""
        return self._walk(value)[0]

    def is_about_restricted(self, view: Any) -> bool:
        """True for a page about a restricted person: the person itself, or a page whose own field is one."""
        if self._is_restricted(view):
            return True
        if not dataclasses.is_dataclass(view) or isinstance(view, type):
            return False
        return any(self._is_restricted(getattr(view, field.name)) for field in dataclasses.fields(view))

    def _is_restricted(self, value: Any) -> bool:
        if isinstance(value, type) or self._field_names(type(value)) is None:
            return False
        key = getattr(value, "key", None)
        if isinstance(key, str) and key in self.keys and any(hasattr(value, f) for f in NAME_FIELDS):
            return True
        key = getattr(value, "person_key", None)  # a name as written, a member: the person by key
        return isinstance(key, str) and key in self.keys

    def _walk(self, value: Any) -> tuple[Any, bool]:
        """Return (rewritten value, whether it is or holds a restricted person directly)."""
        if isinstance(value, str):
            new = self.text(value)
            return new, False
        if isinstance(value, (bool, int, float, date, datetime)) or value is None:
            return value, False
        names = None if isinstance(value, type) else self._field_names(type(value))
        if names is not None:
            if self._is_restricted(value):
                return self._blank_person(value), True
            changes: dict[str, Any] = {}
            holds = False
            for name in names:
                old = getattr(value, name)
                new, restricted = self._walk(old)
                # a field that is a restricted person makes this a record about them; a list of
                # persons (members, alters, rows) does not
                holds = holds or (restricted and not isinstance(old, (list, tuple, set, frozenset, dict)))
                if new is not old:
                    changes[name] = new
            if holds:  # a record about a restricted person: its evidence goes, down to its attestations
                for name in names:
                    current = changes.get(name, getattr(value, name))
                    if _says_something(name):
                        changes[name] = self._blank_value(current)
                    elif name == "attestations" or dataclasses.is_dataclass(current) or isinstance(current, list):
                        changes[name] = self._blank_evidence(current)
            return (self._replace(value, changes) if changes else value), False
        if isinstance(value, dict):
            items = [(self._walk(k)[0], self._walk(v)[0]) for k, v in value.items()]
            if all(nk is k and nv is v for (nk, nv), (k, v) in zip(items, value.items())):
                return value, False
            return type(value)(items) if not hasattr(value, "default_factory") else dict(items), False
        if isinstance(value, (list, tuple, set, frozenset)):
            walked = [self._walk(item) for item in value]
            restricted = any(flag for _, flag in walked)
            if all(new is old for (new, _), old in zip(walked, value)):
                return value, restricted
            items = [new for new, _ in walked]
            if isinstance(value, tuple) and hasattr(value, "_fields"):
                return type(value)(*items), restricted
            return type(value)(items), restricted
        return value, False

    def _blank_person(self, value: Any) -> Any:
        changes = {}
        for field in dataclasses.fields(value):
            old = getattr(value, field.name)
            if field.name == "key":
                changes[field.name] = RESTRICTED_KEY
            elif field.name in NAME_FIELDS and isinstance(old, str):
                changes[field.name] = RESTRICTED_NAME
            elif field.name in LAYOUT_FIELDS:
                continue
            else:
                changes[field.name] = self._blank_value(old)
        return self._replace(value, changes)

    def _blank_evidence(self, value: Any) -> Any:
        """Return ``value`` with every field that says something about a person blanked, at every depth."""
        if isinstance(value, list):
            return [self._blank_evidence(item) for item in value]
        if dataclasses.is_dataclass(value) and not isinstance(value, type):
            changes = {}
            for field in dataclasses.fields(value):
                current = getattr(value, field.name)
                changes[field.name] = (self._blank_value(current) if _says_something(field.name)
                                       else self._blank_evidence(current))
            return self._replace(value, changes)
        return value

    def _blank_value(self, value: Any) -> Any:
        """Return ``value`` with its text blanked, lists emptied and dates dropped; numbers and flags stay."""
        if isinstance(value, str):
            return ""
        if isinstance(value, (bool, int, float)) or value is None:
            return value
        if isinstance(value, (date, datetime)):
            return None
        if isinstance(value, (list, set, frozenset, dict)) or (isinstance(value, tuple) and not hasattr(value, "_fields")):
            return type(value)()
        if dataclasses.is_dataclass(value) and not isinstance(value, type):
            return self._replace(value, {f.name: self._blank_value(getattr(value, f.name)) for f in dataclasses.fields(value)})
        return self._walk(value)[0]

    @staticmethod
    def _replace(value: Any, changes: dict[str, Any]) -> Any:
        """Copy a dataclass with ``changes`` without running its checks again (the copy only hides things)."""
        copy = object.__new__(type(value))
        for field in dataclasses.fields(value):
            object.__setattr__(copy, field.name, changes.get(field.name, getattr(value, field.name)))
        for name, attribute in getattr(value, "__dict__", {}).items():
            if name not in changes and not hasattr(copy, name):
                object.__setattr__(copy, name, attribute)
        return copy


def _says_something(field_name: str) -> bool:
    return any(word in EVIDENCE_WORDS for word in field_name.lower().split("_"))


def restricted_for(request: Request) -> RestrictedPersons | None:
    """Return the persons the request's actor may not see, or None when they may see everyone."""
    if visibility_of(current_actor(request)) == "all":
        return None
    return restricted_persons(request) or None


def restricted_persons(request: Request) -> RestrictedPersons:
    """Return the restricted persons of the dataset today (kept per data version), whoever asks."""
    state = request.app.state
    today = date.today()
    session = request_session(request)
    if session is not None:  # the page's own transaction: the persons restricted in what it read
        return _restricted_at(state, session, today)
    with state.database.read() as session:
        return _restricted_at(state, session, today)


def _restricted_at(state: Any, session: Any, today: date) -> RestrictedPersons:
    living_years = state.settings.living_years
    key = (get_data_version(session=session), today, living_years)
    cached = getattr(state, "restricted_persons", None)
    if cached is None or cached[0] != key:
        found = list_restricted_persons(session=session, living_years=living_years, today=today)
        if cached is not None and cached[1] == found:
            found = cached[1]  # most writes touch no restricted person: keep its compiled pattern and redactor
        cached = (key, found)
        state.restricted_persons = cached
    return cached[1]


def without_left_out(view: Any, leave_out: RestrictedPersons) -> Any | None:
    """Return ``view`` for a file that leaves ``leave_out`` out: those persons read "restricted person";
    None when the view is about one of them (a file centred on them is refused)."""
    redactor = Redactor(leave_out)
    return None if redactor.is_about_restricted(view) else redactor.redact(view)


def redact_for(request: Request, view: Any) -> Any:
    """Return ``view`` as the request's actor may see it (unchanged for editors and admins)."""
    restricted = restricted_for(request)
    if restricted is None:
        return view
    state = request.app.state
    redactor = getattr(state, "redactor", None)
    if redactor is None or redactor.restricted is not restricted:
        redactor = state.redactor = Redactor(restricted)
    if redactor.is_about_restricted(view):
        raise HTTPException(403, RESTRICTED_PAGE)
    return redactor.redact(view)
