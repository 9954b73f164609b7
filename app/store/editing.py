"""Writes of the editing forms: persons, sources, relations, memberships and their attestations.

Every function here runs inside one write session (``database.write()``) that the caller opens,
checks every field before it changes anything, records its audit entry with
:func:`app.store.audit.record_change` in that same session, and raises:

- :class:`EditError` with a message per form field when the input is wrong (nothing written);
- :class:`StaleEdit` when the form was loaded at an older ``version`` of the record than the
  stored one (optimistic concurrency), with the fields that changed meanwhile.

A new relation or membership is never written without its first attestation.
"""

from __future__ import annotations

import json
import re
import secrets
from dataclasses import dataclass, field
from datetime import date, datetime, timezone
from typing import Any

from sqlalchemy import delete, select, update
from sqlalchemy.orm import Session

from app.auth import Actor
from app.dates import DateError, check_calendar, interval_or_none
from app.models import (
    CERTAINTIES,
    EVIDENCE_KINDS,
    KEY_PATTERN,
    PERSON_KINDS,
    Attestation,
    AuditEntry,
    Collection,
    Group,
    Membership,
    Person,
    PersonAlias,
    PersonIdentifier,
    PersonName,
    Place,
    Relation,
    RelationKind,
    Repository,
    Source,
)
from app.names import fold, key_from_name
from app.store.audit import record_change

__all__ = [
    "AttestationInput",
    "DeletedAttestation",
    "MembershipDetail",
    "get_membership",
    "get_attestation_values",
    "get_membership_values",
    "get_person_values",
    "get_source_values",
    "list_deleted_attestations",
    "list_holders",
    "list_relation_kinds",
    "EditError",
    "FieldChange",
    "StaleEdit",
    "create_attestation",
    "create_membership",
    "create_person",
    "suggest_person_key",
    "create_relation",
    "create_source",
    "delete_attestation",
    "person_snapshot",
    "restore_attestation",
    "source_snapshot",
    "update_attestation",
    "update_membership",
    "update_person",
    "update_source",
]

_KEY = re.compile(KEY_PATTERN)
_LISTS = re.compile(r"[|\n]")


class EditError(Exception):
    """Input a form cannot save: one message per field name; nothing was written."""

    def __init__(self, problems: dict[str, str]):
        self.problems = problems
        super().__init__("; ".join(f"{name}: {message}" for name, message in problems.items()))


@dataclass(frozen=True)
class FieldChange:
    """One field someone else changed since the form was loaded."""

    field: str
    was: Any  # the value when the form was loaded (None when not known)
    now: Any  # the value stored now


class StaleEdit(Exception):
    """The record changed since the form was loaded; the save was refused and nothing written."""

    def __init__(self, *, table: str, key: str, loaded: int, current: int, changes: list[FieldChange], by: str | None):
        self.table, self.key, self.loaded, self.current, self.changes, self.by = table, key, loaded, current, changes, by
        fields = ", ".join(c.field for c in changes) or "no field shown on this form"
        super().__init__(f"{table} {key} was changed by {by or 'someone else'} since you opened the form "
                         f"(version {loaded}, now {current}): {fields}. Nothing was saved.")


@dataclass
class AttestationInput:
    """The fields of one attestation as a form sends them (text; blank means not given)."""

    source: str = ""
    locus: str = ""
    evidence: str = "original"
    certainty: str = "certain"
    identification: str = "certain"
    date: str = ""
    calendar: str = ""
    quote: str = ""
    note: str = ""
    person_as_written: str = ""
    other_as_written: str = ""
    extra: dict[str, str] = field(default_factory=dict)


# --- small checks ----------------------------------------------------------------------------


def _now() -> datetime:
    return datetime.now(timezone.utc).replace(tzinfo=None)


def _text(value: str | None) -> str | None:
    value = (value or "").strip()
    return value or None


def _check_key(problems: dict[str, str], name: str, value: str) -> str:
    value = (value or "").strip()
    if not value:
        problems[name] = "a key is required (letters, digits and ._:-, at most 100 characters)"
    elif not _KEY.match(value):
        problems[name] = f"{value!r} is not a key: use only letters, digits and ._:- (at most 100 characters)"
    return value


def _choice(problems: dict[str, str], name: str, value: str, allowed: tuple[str, ...], default: str) -> str:
    value = (value or "").strip().lower() or default
    if value not in allowed:
        problems[name] = f"{value!r} is not one of {', '.join(allowed)}"
    return value


def _date(problems: dict[str, str], name: str, text: str, calendar: str) -> tuple[str | None, date | None, date | None]:
    text = _text(text)
    if text is None:
        return None, None, None
    try:
        interval = interval_or_none(text, calendar)
    except DateError as error:
        problems[name] = str(error)
        return text, None, None
    return text, interval.earliest, interval.latest


def _calendar(problems: dict[str, str], name: str, value: str, default: str | None = "gregorian") -> str | None:
    if not (value or "").strip():
        return default
    try:
        return check_calendar(value)
    except DateError as error:
        problems[name] = str(error)
        return default


def _split(value: str) -> list[str]:
    seen: list[str] = []
    for item in _LISTS.split(value or ""):
        item = item.strip()
        if item and item not in seen:
            seen.append(item)
    return seen


def _raise(problems: dict[str, str]) -> None:
    if problems:
        raise EditError(problems)


def _check_version(session: Session, *, table: str, key: str, stored: int, loaded: str | int | None,
                   now: dict[str, Any]) -> None:
    """Refuse a save whose form was loaded at another version than the stored one.

    The fields that changed come from the audit trail: the entry that moved the record on from
    the loaded version holds the record as it was then.
    """
    try:
        loaded_version = int(loaded) if loaded not in (None, "") else None
    except (TypeError, ValueError):
        loaded_version = None
    if loaded_version is None:
        raise EditError({"version": "the form did not say which version of the record it shows; reload it"})
    if loaded_version == stored:
        return
    was: dict[str, Any] | None = None
    by = None
    for before_json, actor in session.execute(
        select(AuditEntry.before_json, AuditEntry.actor)
        .where(AuditEntry.table_name == table, AuditEntry.record_key == key, AuditEntry.before_json.is_not(None))
        .order_by(AuditEntry.id.desc())
    ):
        before = json.loads(before_json)
        if isinstance(before, dict) and before.get("version") == loaded_version:
            was, by = before, actor
            break
    if was is None:  # moved on by a workbook import, which is one audit entry for all its rows
        importer = session.scalar(select(AuditEntry.actor).where(AuditEntry.action == "import")
                                  .order_by(AuditEntry.id.desc()).limit(1))
        by = f"an import by {importer}" if importer else None
    changes = [
        FieldChange(name, None if was is None else was.get(name), value)
        for name, value in now.items()
        if name != "version" and (was is None or _plain(was.get(name)) != _plain(value))
    ]
    raise StaleEdit(table=table, key=key, loaded=loaded_version, current=stored, changes=changes, by=by)


def _plain(value: Any) -> Any:
    return json.loads(json.dumps(value, default=str))


def _record(session: Session, actor: Actor, action: str, table: str, key: str, before: Any, after: Any, summary: str) -> None:
    record_change(session=session, actor=actor.name, user_id=actor.user_id, action=action, table=table, key=key,
                  before=before, after=after, summary=summary)


# --- persons ---------------------------------------------------------------------------------


def person_snapshot(session: Session, person: Person) -> dict[str, Any]:
    """The editable fields of a person as the audit trail and the stale-edit message show them."""
    names = list(session.scalars(select(PersonName.name).where(PersonName.person_id == person.id).order_by(PersonName.id)))
    identifiers = [f"{s}:{v}" for s, v in session.execute(
        select(PersonIdentifier.scheme, PersonIdentifier.value).where(PersonIdentifier.person_id == person.id)
        .order_by(PersonIdentifier.id))]  # fmt: skip
    return {
        "key": person.key, "name": person.name, "sort_name": person.sort_name, "kind": person.kind,
        "unidentified": person.unidentified, "living": person.living,
        "variants": [n for n in names if n != person.name], "born": person.born_text, "died": person.died_text,
        "calendar": person.calendar, "identifiers": identifiers, "note": person.note, "version": person.version,
    }


def _person_fields(session: Session, problems: dict[str, str], person_id: int | None, *, name: str, sort_name: str,
                   kind: str, unidentified: bool, living: bool, born: str, died: str, calendar: str, note: str,
                   identifiers: str) -> tuple[dict[str, Any], list[tuple[str, str]]]:
    name = (name or "").strip()
    if not name:
        problems["name"] = "a name is required (the display name; other spellings go under variants)"
    elif len(name) > 300:
        problems["name"] = "at most 300 characters"
    cal = _calendar(problems, "calendar", calendar) or "gregorian"
    born_t = _date(problems, "born", born, cal)
    died_t = _date(problems, "died", died, cal)
    pairs = []
    for item in _split(identifiers):
        scheme, sep, value = item.partition(":")
        if not sep or not scheme.strip() or not value.strip():
            problems["identifiers"] = f"{item!r} is not scheme:value (e.g. wikidata:Q1234, viaf:123, local:P7)"
            continue
        pair = (scheme.strip().lower(), value.strip())
        owner = session.scalar(select(Person.key).join(PersonIdentifier, PersonIdentifier.person_id == Person.id)
                               .where(PersonIdentifier.scheme == pair[0], PersonIdentifier.value == pair[1],
                                      Person.id != (person_id or -1)))
        if owner is not None:
            problems["identifiers"] = f"{pair[0]}:{pair[1]} already belongs to {owner}"
        pairs.append(pair)
    values = {
        "name": name, "sort_name": _text(sort_name), "kind": _choice(problems, "kind", kind, PERSON_KINDS, "individual"),
        "unidentified": bool(unidentified), "living": bool(living), "calendar": cal,
        "born_text": born_t[0], "born_earliest": born_t[1], "born_latest": born_t[2],
        "died_text": died_t[0], "died_earliest": died_t[1], "died_latest": died_t[2], "note": _text(note),
    }
    return values, pairs


def _set_names_and_identifiers(session: Session, person: Person, variants: str, identifiers: list[tuple[str, str]]) -> None:
    wanted = [person.name, *[v for v in _split(variants) if v != person.name]]
    have = dict(session.execute(select(PersonName.name, PersonName.id).where(PersonName.person_id == person.id)).all())
    gone = [name_id for name, name_id in have.items() if name not in wanted]
    if gone:
        session.execute(delete(PersonName).where(PersonName.id.in_(gone)))
    session.add_all(PersonName(person_id=person.id, name=n, normalized=fold(n)) for n in wanted if n not in have)
    current = {(i.scheme, i.value): i.id for i in session.scalars(select(PersonIdentifier).where(PersonIdentifier.person_id == person.id))}
    gone = [i for pair, i in current.items() if pair not in identifiers]
    if gone:
        session.execute(delete(PersonIdentifier).where(PersonIdentifier.id.in_(gone)))
    session.flush()
    session.add_all(PersonIdentifier(person_id=person.id, scheme=s, value=v) for s, v in identifiers if (s, v) not in current)
    session.flush()


def suggest_person_key(*, session: Session, name: str, start: str | None = None) -> str:
    """Return a free person key made from ``name`` (or from ``start``), with "-2", "-3"... when it is taken.

    Free means held by no person and by no merged person's old key (it still resolves).
    """
    base = (start if start is not None else key_from_name(name, room=4))[:96]
    number = 1 if start is None else 2
    candidate = base if start is None else f"{base}-2"
    while _key_taken_by(session, candidate) is not None:
        number += 1
        candidate = f"{base}-{number}"
    return candidate


def _key_taken_by(session: Session, key: str) -> str | None:
    """Return who holds ``key`` in words ("Griet Molenaar", "a person merged into p-x"), or None when it is free."""
    held = session.execute(select(Person.name).where(Person.key == key)).scalar()
    if held is not None:
        return held
    alias = session.execute(select(Person.key).join(PersonAlias, PersonAlias.person_id == Person.id)
                            .where(PersonAlias.key == key)).scalar()
    return None if alias is None else f"a person merged into {alias} (its old key still leads there)"


def create_person(*, session: Session, actor: Actor, key: str, name: str, sort_name: str = "", kind: str = "individual",
                  unidentified: bool = False, living: bool = False, variants: str = "", born: str = "", died: str = "",
                  calendar: str = "", identifiers: str = "", note: str = "") -> str:
    """Create a person with their spellings and identifiers; return the key."""
    problems: dict[str, str] = {}
    if not (key or "").strip() and (name or "").strip():
        key = suggest_person_key(session=session, name=name)  # a blank key is made from the name
    key = _check_key(problems, "key", key)
    if key and "key" not in problems:
        taken = _key_taken_by(session, key)
        if taken is not None:
            problems["key"] = (f"{key!r} is taken: it is already the key of {taken}; choose another, for example "
                               f"{suggest_person_key(session=session, name=name, start=key)!r}")
    values, pairs = _person_fields(session, problems, None, name=name, sort_name=sort_name, kind=kind,
                                   unidentified=unidentified, living=living, born=born, died=died,
                                   calendar=calendar, note=note, identifiers=identifiers)
    _raise(problems)
    person = Person(key=key, version=1, **values)
    session.add(person)
    session.flush()
    _set_names_and_identifiers(session, person, variants, pairs)
    _record(session, actor, "create", "person", key, None, person_snapshot(session, person), f"created person {person.name} ({key})")
    return key


def update_person(*, session: Session, actor: Actor, key: str, version: str | int | None, name: str, sort_name: str = "",
                  kind: str = "individual", unidentified: bool = False, living: bool = False, variants: str = "",
                  born: str = "", died: str = "", calendar: str = "", identifiers: str = "", note: str = "") -> int:
    """Change a person's fields, spellings and identifiers; return the new version."""
    person = session.scalar(select(Person).where(Person.key == key))
    if person is None:
        raise LookupError(f"no person with key {key!r}")
    before = person_snapshot(session, person)
    _check_version(session, table="person", key=key, stored=person.version, loaded=version, now=before)
    problems: dict[str, str] = {}
    values, pairs = _person_fields(session, problems, person.id, name=name, sort_name=sort_name, kind=kind,
                                   unidentified=unidentified, living=living, born=born, died=died,
                                   calendar=calendar, note=note, identifiers=identifiers)
    _raise(problems)
    for column, value in values.items():
        setattr(person, column, value)
    person.version += 1
    session.flush()
    _set_names_and_identifiers(session, person, variants, pairs)
    after = person_snapshot(session, person)
    _record(session, actor, "update", "person", key, before, after, f"edited person {person.name} ({key})")
    return person.version


# --- sources ---------------------------------------------------------------------------------


def source_snapshot(session: Session, source: Source) -> dict[str, Any]:
    """The editable fields of a source as the audit trail and the stale-edit message show them."""
    collection = session.get(Collection, source.collection_id) if source.collection_id else None
    repository = session.get(Repository, collection.repository_id) if collection else None
    return {
        "key": source.key, "repository": repository.key if repository else None,
        "collection": collection.key if collection else None, "reference": source.reference, "kind": source.kind,
        "title": source.title, "author": source.author, "publisher": source.publisher, "year": source.year,
        "pages": source.pages, "date": source.date_text, "calendar": source.calendar, "url": source.url,
        "note": source.note, "version": source.version,
    }


def _holder(session: Session, actor: Actor, problems: dict[str, str], *, repository: str, new_repository_key: str,
            new_repository_name: str, collection: str, new_collection_key: str, new_collection_name: str,
            create: bool) -> int | None:
    """Return the collection id a source form picked or asked to create (None for a printed source)."""
    repository, collection = (repository or "").strip(), (collection or "").strip()
    new_repository_key, new_collection_key = (new_repository_key or "").strip(), (new_collection_key or "").strip()
    repository_id = None
    if new_repository_key:
        _check_key(problems, "new_repository_key", new_repository_key)
        if session.scalar(select(Repository.id).where(Repository.key == new_repository_key)):
            problems["new_repository_key"] = f"a repository {new_repository_key!r} exists already: pick it instead"
        if not _text(new_repository_name):
            problems["new_repository_name"] = "a new repository needs a name"
    elif repository:
        repository_id = session.scalar(select(Repository.id).where(Repository.key == repository))
        if repository_id is None:
            problems["repository"] = f"no repository with key {repository!r}"
    if new_collection_key:
        _check_key(problems, "new_collection_key", new_collection_key)
        if session.scalar(select(Collection.id).where(Collection.key == new_collection_key)):
            problems["new_collection_key"] = f"a collection {new_collection_key!r} exists already: pick it instead"
        if not _text(new_collection_name):
            problems["new_collection_name"] = "a new collection needs a name"
        if not (repository or new_repository_key):
            problems["repository"] = "a new collection needs its repository (pick one or create one)"
    elif collection:
        found = session.execute(select(Collection.id, Collection.repository_id).where(Collection.key == collection)).first()
        if found is None:
            problems["collection"] = f"no collection with key {collection!r}"
        elif new_repository_key or (repository_id is not None and found.repository_id != repository_id):
            problems["collection"] = f"collection {collection!r} belongs to another repository"
        else:
            return found.id
    elif repository or new_repository_key:
        problems["collection"] = "an archival source needs its collection (pick one or create one)"
    if problems or not create or not new_collection_key:
        return None
    if new_repository_key:
        holder = Repository(key=new_repository_key, name=new_repository_name.strip())
        session.add(holder)
        session.flush()
        repository_id = holder.id
        _record(session, actor, "create", "repository", holder.key, None, {"key": holder.key, "name": holder.name},
                f"created repository {holder.key}")
    new = Collection(key=new_collection_key, name=new_collection_name.strip(), repository_id=repository_id)
    session.add(new)
    session.flush()
    _record(session, actor, "create", "collection", new.key, None, {"key": new.key, "name": new.name},
            f"created collection {new.key}")
    return new.id


def _source_fields(problems: dict[str, str], *, reference: str, kind: str, title: str, author: str, publisher: str,
                   year: str, pages: str, date_text: str, calendar: str, url: str, note: str) -> dict[str, Any]:
    cal = _calendar(problems, "calendar", calendar) or "gregorian"
    when = _date(problems, "date", date_text, cal)
    url = _text(url)
    if url and not re.match(r"^https?://\S+$", url):
        problems["url"] = "a web address starting with http:// or https://"
    return {
        "reference": _text(reference), "kind": _text(kind), "title": _text(title), "author": _text(author),
        "publisher": _text(publisher), "year": _text(year), "pages": _text(pages), "date_text": when[0],
        "earliest": when[1], "latest": when[2], "calendar": cal, "url": url, "note": _text(note),
    }


def _checked_source(session: Session, actor: Actor, problems: dict[str, str], *, holder: dict[str, str],
                    **fields: str) -> tuple[dict[str, Any], dict[str, str]]:
    """Check a source form's fields and its repository/collection choice; return the values and the choice."""
    values = _source_fields(problems, **fields)
    _holder(session, actor, problems, create=False, **holder)
    if not values["reference"] and not values["title"]:
        problems["reference"] = "give a shelfmark (archival source) or a title (printed source)"
    return values, holder


def create_source(*, session: Session, actor: Actor, key: str, repository: str = "", new_repository_key: str = "",
                  new_repository_name: str = "", collection: str = "", new_collection_key: str = "",
                  new_collection_name: str = "", reference: str = "", kind: str = "", title: str = "", author: str = "",
                  publisher: str = "", year: str = "", pages: str = "", date: str = "", calendar: str = "",
                  url: str = "", note: str = "") -> str:
    """Create a document, in a collection picked or created here, or as a printed source; return the key."""
    problems: dict[str, str] = {}
    key = _check_key(problems, "key", key)
    if key and "key" not in problems and session.scalar(select(Source.id).where(Source.key == key)):
        problems["key"] = f"a source {key!r} exists already"
    values, holder = _checked_source(
        session, actor, problems, reference=reference, kind=kind, title=title, author=author, publisher=publisher,
        year=year, pages=pages, date_text=date, calendar=calendar, url=url, note=note,
        holder=dict(repository=repository, new_repository_key=new_repository_key, new_repository_name=new_repository_name,
                    collection=collection, new_collection_key=new_collection_key, new_collection_name=new_collection_name))
    _raise(problems)
    collection_id = _holder(session, actor, problems, create=True, **holder)
    source = Source(key=key, collection_id=collection_id, version=1, **values)
    session.add(source)
    session.flush()
    _record(session, actor, "create", "source", key, None, source_snapshot(session, source), f"created source {key}")
    return key


def update_source(*, session: Session, actor: Actor, key: str, version: str | int | None, repository: str = "",
                  new_repository_key: str = "", new_repository_name: str = "", collection: str = "",
                  new_collection_key: str = "", new_collection_name: str = "", reference: str = "", kind: str = "",
                  title: str = "", author: str = "", publisher: str = "", year: str = "", pages: str = "",
                  date: str = "", calendar: str = "", url: str = "", note: str = "") -> int:
    """Change a document; its undated attestations follow its new date. Return the new version."""
    source = session.scalar(select(Source).where(Source.key == key))
    if source is None:
        raise LookupError(f"no source with key {key!r}")
    before = source_snapshot(session, source)
    _check_version(session, table="source", key=key, stored=source.version, loaded=version, now=before)
    problems: dict[str, str] = {}
    values, holder = _checked_source(
        session, actor, problems, reference=reference, kind=kind, title=title, author=author, publisher=publisher,
        year=year, pages=pages, date_text=date, calendar=calendar, url=url, note=note,
        holder=dict(repository=repository, new_repository_key=new_repository_key, new_repository_name=new_repository_name,
                    collection=collection, new_collection_key=new_collection_key, new_collection_name=new_collection_name))
    own_dates = session.execute(select(Attestation.id, Attestation.date_text).where(
        Attestation.source_id == source.id, Attestation.date_text.is_not(None), Attestation.calendar.is_(None))).all()
    redated = {}
    for att_id, text in own_dates:
        try:
            interval = interval_or_none(text, values["calendar"])
            redated[att_id] = (interval.earliest, interval.latest)
        except DateError as error:
            problems["calendar"] = f"an attestation of this source dated {text!r} cannot be read in this calendar: {error}"
    _raise(problems)
    source.collection_id = _holder(session, actor, problems, create=True, **holder)
    for column, value in values.items():
        setattr(source, column, value)
    source.version += 1
    session.flush()
    session.execute(update(Attestation).where(Attestation.source_id == source.id, Attestation.date_text.is_(None))
                    .values(earliest=source.earliest, latest=source.latest))
    for att_id, (earliest, latest) in redated.items():
        session.execute(update(Attestation).where(Attestation.id == att_id).values(earliest=earliest, latest=latest))
    _record(session, actor, "update", "source", key, before, source_snapshot(session, source), f"edited source {key}")
    return source.version


# --- attestations ----------------------------------------------------------------------------


def attestation_snapshot(att: Attestation, source_key: str) -> dict[str, Any]:
    """The fields of an attestation as the audit trail shows them."""
    target = ("relation", att.relation_id) if att.relation_id else ("membership", att.membership_id) if att.membership_id else ("fact", att.fact_id)
    return {
        "key": att.key, target[0]: target[1], "source": source_key, "locus": att.locus, "evidence": att.evidence,
        "certainty": att.certainty, "identification": att.identification, "date": att.date_text,
        "calendar": att.calendar, "quote": att.quote, "note": att.note, "person_as_written": att.name_a_as_written,
        "other_as_written": att.name_b_as_written, "deleted_at": att.deleted_at, "deleted_reason": att.deleted_reason,
        "version": att.version,
    }


def _attestation_fields(session: Session, problems: dict[str, str], given: AttestationInput) -> tuple[dict[str, Any], str]:
    source_key = (given.source or "").strip()
    source = session.execute(select(Source.id, Source.calendar, Source.earliest, Source.latest)
                             .where(Source.key == source_key)).first() if source_key else None
    if not source_key:
        problems["source"] = "an attestation needs its source: the key of the document that attests it"
    elif source is None:
        problems["source"] = f"no source with key {source_key!r} (create it first on the new source form)"
    calendar = _calendar(problems, "calendar", given.calendar, default=None)
    text, earliest, latest = _date(problems, "date", given.date, calendar or (source.calendar if source else "gregorian"))
    if text is None and source is not None:
        earliest, latest = source.earliest, source.latest
    locus = _text(given.locus)
    if locus and len(locus) > 200:
        problems["locus"] = "at most 200 characters"
    values = {
        "source_id": source.id if source else None, "locus": locus,
        "evidence": _choice(problems, "evidence", given.evidence, EVIDENCE_KINDS, "original"),
        "certainty": _choice(problems, "certainty", given.certainty, CERTAINTIES, "certain"),
        "identification": _choice(problems, "identification", given.identification, CERTAINTIES, "certain"),
        "date_text": text, "calendar": calendar, "earliest": earliest, "latest": latest,
        "quote": _text(given.quote), "note": _text(given.note),
        "name_a_as_written": _text(given.person_as_written), "name_b_as_written": _text(given.other_as_written),
    }
    return values, source_key


def _new_attestation_key(session: Session) -> str:
    while True:
        key = f"att-{secrets.token_hex(6)}"
        if session.scalar(select(Attestation.id).where(Attestation.key == key)) is None:
            return key


def _write_attestation(session: Session, actor: Actor, values: dict[str, Any], source_key: str, **target: int) -> str:
    att = Attestation(key=_new_attestation_key(session), entered_by_id=actor.user_id, entered_at=_now(), version=1,
                      **values, **target)
    session.add(att)
    session.flush()
    _record(session, actor, "create", "attestation", att.key, None, attestation_snapshot(att, source_key),
            f"added attestation {att.key}")
    return att.key


def create_attestation(*, session: Session, actor: Actor, relation_id: int | None = None, membership_id: int | None = None,
                       attestation: AttestationInput) -> str:
    """Add one more attestation to an existing relation or membership; return its key."""
    problems: dict[str, str] = {}
    if relation_id is not None:
        relation = session.get(Relation, relation_id)
        if relation is None:
            raise LookupError(f"no relation with id {relation_id}")
        target = {"relation_id": relation_id}
    else:
        if session.get(Membership, membership_id) is None:
            raise LookupError(f"no membership with id {membership_id}")
        target = {"membership_id": membership_id}
    values, source_key = _attestation_fields(session, problems, attestation)
    if membership_id is not None:
        values.update(name_a_as_written=None, name_b_as_written=None)
    _raise(problems)
    return _write_attestation(session, actor, values, source_key, **target)


def update_attestation(*, session: Session, actor: Actor, key: str, version: str | int | None,
                       attestation: AttestationInput) -> int:
    """Change the citation of one attestation (source, locus, certainty, date, quote...); return the new version."""
    att = session.scalar(select(Attestation).where(Attestation.key == key))
    if att is None:
        raise LookupError(f"no attestation with key {key!r}")
    old_source = session.scalar(select(Source.key).where(Source.id == att.source_id))
    before = attestation_snapshot(att, old_source)
    _check_version(session, table="attestation", key=key, stored=att.version, loaded=version, now=before)
    problems: dict[str, str] = {}
    values, source_key = _attestation_fields(session, problems, attestation)
    if att.relation_id is None:
        values.update(name_a_as_written=None, name_b_as_written=None)
    _raise(problems)
    for column, value in values.items():
        setattr(att, column, value)
    att.version += 1
    session.flush()
    _record(session, actor, "update", "attestation", key, before, attestation_snapshot(att, source_key), f"edited attestation {key}")
    return att.version


def delete_attestation(*, session: Session, actor: Actor, key: str, reason: str) -> None:
    """Mark an attestation deleted, with the reason (soft delete: it stays in the database and the audit trail)."""
    att = session.scalar(select(Attestation).where(Attestation.key == key))
    if att is None:
        raise LookupError(f"no attestation with key {key!r}")
    if not _text(reason):
        raise EditError({"reason": "say why this evidence is deleted (it stays in the audit trail and can be restored)"})
    if att.deleted_at is not None:
        raise EditError({"reason": f"attestation {key} is deleted already"})
    source_key = session.scalar(select(Source.key).where(Source.id == att.source_id))
    before = attestation_snapshot(att, source_key)
    att.deleted_at, att.deleted_reason = _now(), reason.strip()
    att.version += 1
    session.flush()
    _record(session, actor, "delete", "attestation", key, before, attestation_snapshot(att, source_key),
            f"deleted attestation {key}: {reason.strip()}")


def restore_attestation(*, session: Session, actor: Actor, key: str) -> None:
    """Undo the deletion of an attestation."""
    att = session.scalar(select(Attestation).where(Attestation.key == key))
    if att is None:
        raise LookupError(f"no attestation with key {key!r}")
    if att.deleted_at is None:
        raise EditError({"key": f"attestation {key} is not deleted"})
    source_key = session.scalar(select(Source.key).where(Source.id == att.source_id))
    before = attestation_snapshot(att, source_key)
    att.deleted_at, att.deleted_reason = None, None
    att.version += 1
    session.flush()
    _record(session, actor, "restore", "attestation", key, before, attestation_snapshot(att, source_key),
            f"restored attestation {key}")


# --- relations and memberships ---------------------------------------------------------------


def _person(session: Session, problems: dict[str, str], name: str, key: str) -> Person | None:
    key = (key or "").strip()
    if not key:
        problems[name] = "the key of a person is required"
        return None
    person = session.scalar(select(Person).where(Person.key == key))
    if person is None:
        person = session.scalar(select(Person).join(PersonAlias, PersonAlias.person_id == Person.id).where(PersonAlias.key == key))
    if person is None:
        problems[name] = f"no person with key {key!r}"
    return person


def create_relation(*, session: Session, actor: Actor, person: str, other: str, kind: str,
                    attestation: AttestationInput) -> int:
    """Record a tie with its first attestation (or one more attestation of the tie if it exists); return its id.

    For a directed kind ``person`` is the first end (sender, parent, patron); an undirected pair is
    stored sorted, and the names as written follow their person.
    """
    problems: dict[str, str] = {}
    a = _person(session, problems, "person", person)
    b = _person(session, problems, "other", other)
    relation_kind = session.scalar(select(RelationKind).where(RelationKind.key == (kind or "").strip()))
    if relation_kind is None:
        problems["kind"] = f"no relation kind {kind!r}" if (kind or "").strip() else "pick a relation kind"
    values, source_key = _attestation_fields(session, problems, attestation)
    _raise(problems)
    a_id, b_id = a.id, b.id
    if not relation_kind.directed and a_id > b_id:
        a_id, b_id = b_id, a_id
        values["name_a_as_written"], values["name_b_as_written"] = values["name_b_as_written"], values["name_a_as_written"]
    relation = session.scalar(select(Relation).where(Relation.kind_id == relation_kind.id, Relation.person_a_id == a_id,
                                                     Relation.person_b_id == b_id))
    if relation is None:
        relation = Relation(kind_id=relation_kind.id, kind_directed=relation_kind.directed, person_a_id=a_id,
                            person_b_id=b_id, version=1)
        session.add(relation)
        session.flush()
        keys = dict(session.execute(select(Person.id, Person.key).where(Person.id.in_([a_id, b_id]))).all())
        _record(session, actor, "create", "relation", str(relation.id), None,
                {"kind": relation_kind.key, "person_a": keys[a_id], "person_b": keys[b_id], "version": 1},
                f"created relation {relation_kind.key} {keys[a_id]} – {keys[b_id]}")
    _write_attestation(session, actor, values, source_key, relation_id=relation.id)
    return relation.id


def membership_snapshot(session: Session, membership: Membership) -> dict[str, Any]:
    """The editable fields of a membership as the audit trail shows them."""
    person = session.scalar(select(Person.key).where(Person.id == membership.person_id))
    group = session.scalar(select(Group.key).where(Group.id == membership.group_id))
    return {"person": person, "group": group, "role": membership.role, "start": membership.start_text,
            "end": membership.end_text, "version": membership.version}


def _term(problems: dict[str, str], start: str, end: str, calendar: str) -> dict[str, Any]:
    s = _date(problems, "start", start, calendar)
    e = _date(problems, "end", end, calendar)
    return {"start_text": s[0], "start_earliest": s[1], "start_latest": s[2],
            "end_text": e[0], "end_earliest": e[1], "end_latest": e[2]}


def create_membership(*, session: Session, actor: Actor, person: str, group: str, role: str = "", start: str = "",
                      end: str = "", attestation: AttestationInput) -> int:
    """Record a person's membership of a group with its first attestation (or one more of an existing one); return its id."""
    problems: dict[str, str] = {}
    member = _person(session, problems, "person", person)
    found = session.scalar(select(Group).where(Group.key == (group or "").strip()))
    if found is None:
        problems["group"] = f"no group with key {group!r}" if (group or "").strip() else "the key of a group is required"
    values, source_key = _attestation_fields(session, problems, attestation)
    values.update(name_a_as_written=None, name_b_as_written=None)
    source_calendar = session.scalar(select(Source.calendar).where(Source.key == source_key)) or "gregorian"
    term = _term(problems, start, end, source_calendar)
    role = (role or "").strip()
    _raise(problems)
    membership = session.scalar(select(Membership).where(Membership.person_id == member.id, Membership.group_id == found.id,
                                                         Membership.role == role))
    if membership is None:
        membership = Membership(person_id=member.id, group_id=found.id, role=role, version=1, **term)
        session.add(membership)
        session.flush()
        _record(session, actor, "create", "membership", str(membership.id), None, membership_snapshot(session, membership),
                f"created membership of {member.key} in {found.key}")
    _write_attestation(session, actor, values, source_key, membership_id=membership.id)
    return membership.id


def update_membership(*, session: Session, actor: Actor, membership_id: int, version: str | int | None, role: str = "",
                      start: str = "", end: str = "") -> int:
    """Change a membership's role and recorded term; return the new version."""
    membership = session.get(Membership, membership_id)
    if membership is None:
        raise LookupError(f"no membership with id {membership_id}")
    before = membership_snapshot(session, membership)
    _check_version(session, table="membership", key=str(membership_id), stored=membership.version, loaded=version, now=before)
    problems: dict[str, str] = {}
    role = (role or "").strip()
    if role != membership.role and session.scalar(select(Membership.id).where(
            Membership.person_id == membership.person_id, Membership.group_id == membership.group_id, Membership.role == role)):
        problems["role"] = f"this person already has a membership of this group with the role {role!r}"
    term = _term(problems, start, end, "gregorian")
    _raise(problems)
    membership.role = role
    for column, value in term.items():
        setattr(membership, column, value)
    membership.version += 1
    session.flush()
    _record(session, actor, "update", "membership", str(membership_id), before, membership_snapshot(session, membership),
            f"edited membership {membership_id}")
    return membership.version


# --- what the forms show ---------------------------------------------------------------------


@dataclass(frozen=True)
class DeletedAttestation:
    """A deleted attestation of a tie, with why and when, so that it can be restored."""

    key: str
    source: str
    locus: str | None
    deleted_at: datetime
    reason: str


def list_deleted_attestations(*, session: Session, relation_id: int | None = None,
                              membership_id: int | None = None) -> list[DeletedAttestation]:
    """Return the deleted attestations of one relation or membership, most recently deleted first."""
    target = Attestation.relation_id == relation_id if relation_id is not None else Attestation.membership_id == membership_id
    rows = session.execute(select(Attestation, Source.key).join(Source, Source.id == Attestation.source_id)
                           .where(target, Attestation.deleted_at.is_not(None)).order_by(Attestation.deleted_at.desc()))
    return [DeletedAttestation(a.key, source_key, a.locus, a.deleted_at, a.deleted_reason or "") for a, source_key in rows]


def list_relation_kinds(*, session: Session) -> list[tuple[str, str]]:
    """Return (key, label with roles) of every relation kind, for a form's choice."""
    kinds = session.scalars(select(RelationKind).order_by(RelationKind.label))
    return [(k.key, f"{k.label} ({k.role_a} → {k.role_b})" if k.directed else k.label) for k in kinds]


def list_holders(*, session: Session) -> tuple[list[tuple[str, str]], list[tuple[str, str]]]:
    """Return the repositories and the collections (key, label) a source form picks from."""
    repositories = [(r.key, r.name) for r in session.scalars(select(Repository).order_by(Repository.name))]
    collections = [(key, f"{name} ({repository})") for key, name, repository in session.execute(
        select(Collection.key, Collection.name, Repository.name).join(Repository, Repository.id == Collection.repository_id)
        .order_by(Repository.name, Collection.name))]  # fmt: skip
    return repositories, collections


# --- groups ----------------------------------------------------------------------------------


def group_snapshot(session: Session, group: Group) -> dict[str, Any]:
    """The editable fields of a group as the audit trail and the stale-edit message show them."""
    place = session.get(Place, group.place_id) if group.place_id else None
    parent = session.get(Group, group.parent_id) if group.parent_id else None
    return {"key": group.key, "name": group.name, "kind": group.kind, "place": place.key if place else None,
            "parent": parent.key if parent else None, "start": group.start_text, "end": group.end_text,
            "note": group.note, "version": group.version}


def _group_fields(session: Session, problems: dict[str, str], group_id: int | None, *, name: str, kind: str, place: str,
                  parent: str, start: str, end: str, note: str) -> dict[str, Any]:
    name = (name or "").strip()
    if not name:
        problems["name"] = "a name is required"
    elif len(name) > 300:
        problems["name"] = "at most 300 characters"
    kind_text = _text(kind)
    if kind_text is not None and len(kind_text) > 100:
        problems["kind"] = "at most 100 characters"
    place_id = None
    if _text(place):
        place_id = session.scalar(select(Place.id).where(Place.key == place.strip()))
        if place_id is None:
            problems["place"] = f"no place with key {place.strip()!r}"
    parent_id = None
    if _text(parent):
        parent_id = session.scalar(select(Group.id).where(Group.key == parent.strip()))
        if parent_id is None:
            problems["parent"] = f"no group with key {parent.strip()!r}"
        elif group_id is not None:
            seen, current = set(), parent_id  # the parent, its parent, ...: never this group
            while current is not None and current not in seen:
                if current == group_id:
                    problems["parent"] = f"{parent.strip()!r} is this group or lies inside it"
                    break
                seen.add(current)
                current = session.scalar(select(Group.parent_id).where(Group.id == current))
    start_t = _date(problems, "start", start, "gregorian")
    end_t = _date(problems, "end", end, "gregorian")
    if start_t[1] and end_t[2] and end_t[2] < start_t[1]:
        problems["end"] = "ends before it starts"
    return {"name": name, "kind": kind_text, "place_id": place_id, "parent_id": parent_id,
            "start_text": start_t[0], "start_earliest": start_t[1], "start_latest": start_t[2],
            "end_text": end_t[0], "end_earliest": end_t[1], "end_latest": end_t[2], "note": _text(note)}


def create_group(*, session: Session, actor: Actor, key: str, name: str, kind: str = "", place: str = "",
                 parent: str = "", start: str = "", end: str = "", note: str = "") -> str:
    """Create a group (institution, society, household, ...); return the key."""
    problems: dict[str, str] = {}
    key = _check_key(problems, "key", key)
    if key and "key" not in problems and session.scalar(select(Group.id).where(Group.key == key)):
        problems["key"] = f"{key!r} is taken by another group"
    values = _group_fields(session, problems, None, name=name, kind=kind, place=place, parent=parent, start=start,
                           end=end, note=note)
    _raise(problems)
    group = Group(key=key, version=1, **values)
    session.add(group)
    session.flush()
    _record(session, actor, "create", "group", key, None, group_snapshot(session, group), f"created group {key}")
    return key


def update_group(*, session: Session, actor: Actor, key: str, version: str | int | None, name: str, kind: str = "",
                 place: str = "", parent: str = "", start: str = "", end: str = "", note: str = "") -> int:
    """Change a group's fields; return the new version."""
    group = session.scalar(select(Group).where(Group.key == key))
    if group is None:
        raise LookupError(f"no group with key {key!r}")
    before = group_snapshot(session, group)
    _check_version(session, table="group", key=key, stored=group.version, loaded=version, now=before)
    problems: dict[str, str] = {}
    values = _group_fields(session, problems, group.id, name=name, kind=kind, place=place, parent=parent, start=start,
                           end=end, note=note)
    _raise(problems)
    for column, value in values.items():
        setattr(group, column, value)
    group.version += 1
    session.flush()
    _record(session, actor, "update", "group", key, before, group_snapshot(session, group), f"edited group {key}")
    return group.version


def get_group_values(*, session: Session, key: str) -> dict[str, Any] | None:
    """Return a group's editable fields (as :func:`group_snapshot`), or None."""
    group = session.scalar(select(Group).where(Group.key == key))
    return group_snapshot(session, group) if group is not None else None


def get_person_values(*, session: Session, key: str) -> dict[str, Any] | None:
    """Return a person's editable fields (as :func:`person_snapshot`), or None."""
    person = session.scalar(select(Person).where(Person.key == key))
    return person_snapshot(session, person) if person is not None else None


def get_source_values(*, session: Session, key: str) -> dict[str, Any] | None:
    """Return a source's editable fields (as :func:`source_snapshot`), or None."""
    source = session.scalar(select(Source).where(Source.key == key))
    return source_snapshot(session, source) if source is not None else None


def get_attestation_values(*, session: Session, key: str) -> dict[str, Any] | None:
    """Return an attestation's fields (as :func:`attestation_snapshot`), or None."""
    found = session.execute(select(Attestation, Source.key).join(Source, Source.id == Attestation.source_id)
                            .where(Attestation.key == key)).first()
    return attestation_snapshot(*found) if found is not None else None


def get_membership_values(*, session: Session, membership_id: int) -> dict[str, Any] | None:
    """Return a membership's fields (as :func:`membership_snapshot`), or None."""
    membership = session.get(Membership, membership_id)
    return membership_snapshot(session, membership) if membership is not None else None


@dataclass(frozen=True)
class MembershipDetail:
    """One membership with its live attestations (as citations) and its deleted ones."""

    membership_id: int
    person_key: str
    person_name: str
    group_key: str
    group_name: str
    role: str
    start: str | None
    end: str | None
    version: int
    attestation_ids: list[int]


def get_membership(*, session: Session, membership_id: int) -> MembershipDetail | None:
    """Return one membership and the ids of its attestations that are not deleted, or None."""
    found = session.execute(select(Membership, Person.key, Person.name, Group.key, Group.name)
                            .join(Person, Person.id == Membership.person_id).join(Group, Group.id == Membership.group_id)
                            .where(Membership.id == membership_id)).first()
    if found is None:
        return None
    m, person_key, person_name, group_key, group_name = found
    ids = list(session.scalars(select(Attestation.id).where(Attestation.membership_id == m.id, Attestation.deleted_at.is_(None))))
    return MembershipDetail(m.id, person_key, person_name, group_key, group_name, m.role, m.start_text, m.end_text,
                            m.version, ids)
