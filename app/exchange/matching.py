"""Rows converted from another format meet the stored data: persons and places found by key or identifier.

A TEI letter or a GraphML graph names persons by its own keys and authority URIs. Before its
rows go to the workbook importer, :func:`match_existing` renames every row's person or place to
the stored one that has the same identifier, and makes sure that a stored record keeps what it
has: its name (the new spelling becomes a variant), kind and identifier. Identifiers already
stored are not sent again, so importing the same file twice changes nothing.

A TEI file names its archive only by name (``msIdentifier/repository`` and ``collection``), so a
repository is the stored one of the same name (case, accents and spacing aside), and a collection
the stored one of the same name in that repository, rather than a second record of the same archive.
"""

from __future__ import annotations

from sqlalchemy import select
from sqlalchemy.orm import Session

from app.exchange.workbook import Row
from app.models import Collection, Person, PersonIdentifier, PersonName, Place, Repository
from app.names import fold

__all__ = ["match_existing"]

_PERSON_COLUMNS = {"relations.csv": ("person", "other"), "memberships.csv": ("person",), "facts.csv": ("person",)}
_PLACE_COLUMNS = {"sources.csv": ("place_from", "place_to"), "relations.csv": ("place",), "facts.csv": ("place",),
                  "repositories.csv": ("place",), "groups.csv": ("place",)}
_REPOSITORY_COLUMNS = {"sources.csv": ("repository",), "collections.csv": ("repository",)}
_COLLECTION_COLUMNS = {"sources.csv": ("collection",)}


def _same_name(name: str | None) -> str:
    """The form under which two names of an archive are the same: folded, spaces collapsed."""
    return " ".join(fold(name or "").split())


def match_existing(session: Session, tables: dict[str, list[Row]]) -> dict[str, list[Row]]:
    """Return the tables with persons and places renamed to the stored ones they identify."""
    stored_persons = {key: (pid, name, kind) for pid, key, name, kind in session.execute(
        select(Person.id, Person.key, Person.name, Person.kind))}
    by_identifier = {f"{scheme}:{value}": key for scheme, value, key in session.execute(
        select(PersonIdentifier.scheme, PersonIdentifier.value, Person.key).join(Person))}
    renamed_persons: dict[str, str] = {}
    persons: dict[str, Row] = {}
    for row in tables.get("persons.csv", []):
        ids = [i for i in (row.values.get("identifiers") or "").split("|") if i]
        key = next((by_identifier[i] for i in ids if i in by_identifier), row.values["key"])
        if key != row.values["key"]:
            renamed_persons[row.values["key"]] = key
        values = dict(row.values, key=key)
        if key in stored_persons:
            pid, name, _kind = stored_persons[key]
            spellings = set(session.scalars(select(PersonName.name).where(PersonName.person_id == pid)))
            new_names = [n for n in [values.get("name"), *(values.get("variants") or "").split("|")] if n and n not in spellings]
            values = {"key": key, "name": name, "variants": "|".join(dict.fromkeys(new_names)),
                      "identifiers": "|".join(i for i in ids if by_identifier.get(i) != key)}
        if key in persons:  # two rows of the file turned out to be one stored person
            merged = persons[key].values
            merged["variants"] = "|".join(dict.fromkeys(v for v in (merged.get("variants", "") + "|" + values.get("variants", "")).split("|") if v))
            merged["identifiers"] = "|".join(dict.fromkeys(v for v in (merged.get("identifiers", "") + "|" + values.get("identifiers", "")).split("|") if v))
            continue
        persons[key] = Row(row.file, row.line, values)

    stored_places = {key: (name, identifier) for key, name, identifier in session.execute(
        select(Place.key, Place.name, Place.identifier))}
    place_by_identifier = {identifier: key for key, (_name, identifier) in stored_places.items() if identifier}
    renamed_places: dict[str, str] = {}
    places: dict[str, Row] = {}
    for row in tables.get("places.csv", []):
        identifier = row.values.get("identifier") or ""
        key = place_by_identifier.get(identifier, row.values["key"]) if identifier else row.values["key"]
        if key != row.values["key"]:
            renamed_places[row.values["key"]] = key
        values = dict(row.values, key=key)
        if key in stored_places:
            name, stored_identifier = stored_places[key]
            values = {"key": key, "name": name}
            if stored_identifier is None and identifier:
                values["identifier"] = identifier
        places.setdefault(key, Row(row.file, row.line, values))

    renamed_repositories, repositories = _match_repositories(session, tables.get("repositories.csv", []))
    renamed_collections, collections = _match_collections(session, tables.get("collections.csv", []),
                                                          renamed_repositories)

    out = {name: list(rows) for name, rows in tables.items()}
    out["persons.csv"] = list(persons.values())
    out["places.csv"] = list(places.values())
    out["repositories.csv"] = repositories
    out["collections.csv"] = collections
    for renamed, columns_of in ((renamed_persons, _PERSON_COLUMNS), (renamed_places, _PLACE_COLUMNS),
                                (renamed_repositories, _REPOSITORY_COLUMNS), (renamed_collections, _COLLECTION_COLUMNS)):
        if not renamed:
            continue
        for name, columns in columns_of.items():
            out[name] = [Row(r.file, r.line, {c: renamed.get(v, v) if c in columns else v for c, v in r.values.items()})
                         for r in out.get(name, [])]
    return {name: rows for name, rows in out.items() if rows}


def _match_repositories(session: Session, rows: list[Row]) -> tuple[dict[str, str], list[Row]]:
    """Rename each repository row to the stored repository of its key or, failing that, of its name."""
    stored = {key: name for key, name in session.execute(select(Repository.key, Repository.name).order_by(Repository.id))}
    by_name: dict[str, str] = {}
    for key, name in stored.items():
        by_name.setdefault(_same_name(name), key)  # the oldest of several of one name
    renamed: dict[str, str] = {}
    out: dict[str, Row] = {}
    for row in rows:
        given = row.values["key"]
        key = given if given in stored else by_name.get(_same_name(row.values.get("name")), given)
        if key != given:
            renamed[given] = key
        values = {"key": key, "name": stored[key]} if key in stored and key != given else dict(row.values)
        out.setdefault(key, Row(row.file, row.line, values))
    return renamed, list(out.values())


def _match_collections(session: Session, rows: list[Row], renamed_repositories: dict[str, str]) -> tuple[dict[str, str], list[Row]]:
    """Rename each collection row to the stored collection of its key or of its name in its repository."""
    stored = {key: (repository, name) for key, repository, name in session.execute(
        select(Collection.key, Repository.key, Collection.name).join(Repository).order_by(Collection.id))}
    by_name: dict[tuple[str, str], str] = {}
    for key, (repository, name) in stored.items():
        by_name.setdefault((repository, _same_name(name)), key)
    renamed: dict[str, str] = {}
    out: dict[str, Row] = {}
    for row in rows:
        given = row.values["key"]
        repository = renamed_repositories.get(row.values.get("repository") or "", row.values.get("repository") or "")
        key = given if given in stored else by_name.get((repository, _same_name(row.values.get("name"))), given)
        if key != given:
            renamed[given] = key
            values = {"key": key, "name": stored[key][1], "repository": stored[key][0]}
        else:
            values = dict(row.values, repository=repository)
        out.setdefault(key, Row(row.file, row.line, values))
    return renamed, list(out.values())
