"""Names and keys that network views put on nodes, edges and slice controls.

The graph code works on integer ids; these queries turn ids back into what a reader sees
(person names and kinds, relation kind labels) and list what a slice can choose from
(relation kinds as a tree, repositories with their collections).
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Iterable
from dataclasses import dataclass

from sqlalchemy import select
from sqlalchemy.orm import Session, aliased

from app.dates import season_words
from app.documented import DOCUMENTED
from app.models import Collection, Person, PersonAlias, RelationKind, Repository

__all__ = [
    "ArchiveLabel",
    "CollectionLabel",
    "KindLabel",
    "PersonLabel",
    "get_person_label",
    "list_archives",
    "list_person_keys",
    "list_collection_names",
    "list_collection_repositories",
    "list_person_labels",
    "list_person_labels_by_key",
    "list_relation_kinds",
]


@dataclass(frozen=True)
class PersonLabel:
    """What a drawing shows of one person."""

    __pydantic_config__ = DOCUMENTED

    id: int
    """Internal id (not stable across databases; links use the key)."""
    key: str
    """The person's key."""
    name: str
    """Display name."""
    kind: str
    """individual or corporate."""
    unidentified: bool
    """True for a person known only by a description ("the widow of the printer")."""


@dataclass(frozen=True)
class KindLabel:
    """One relation kind, with its parent for the tree of kinds."""

    __pydantic_config__ = DOCUMENTED

    id: int
    """Internal id."""
    key: str
    """The kind's key, as used in `kind=` of the slice."""
    label: str
    """The kind's label."""
    directed: bool
    """True when the kind has a direction (sender and recipient, patron and client)."""
    parent_key: str | None
    """Key of the parent kind (kinship for sibling), or None."""


@dataclass(frozen=True)
class CollectionLabel:
    """One collection of a repository."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The collection's key, as used in `keep_collection=` and `omit_collection=`."""
    name: str
    """The collection's name."""


@dataclass(frozen=True)
class ArchiveLabel:
    """One repository with its collections."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The repository's key, as used in `keep_repository=` and `omit_repository=`."""
    name: str
    """The repository's name."""
    collections: list[CollectionLabel]
    """Its collections, by name."""


def get_person_label(*, session: Session, key: str) -> PersonLabel | None:
    """Return the person of ``key`` (an old key kept after a merge also finds it), or None."""
    columns = (Person.id, Person.key, Person.name, Person.kind, Person.unidentified)
    row = session.execute(select(*columns).where(Person.key == key)).first()
    if row is None:
        row = session.execute(select(*columns).join(PersonAlias, PersonAlias.person_id == Person.id).where(PersonAlias.key == key)).first()
    return PersonLabel(*row) if row is not None else None


def list_person_labels(*, session: Session, ids: Iterable[int]) -> dict[int, PersonLabel]:
    """Return the persons of ``ids``, keyed by id."""
    wanted = sorted(set(ids))
    found: dict[int, PersonLabel] = {}
    for start in range(0, len(wanted), 500):  # stays under SQLite's limit of bound parameters
        query = select(*_LABEL_COLUMNS).where(Person.id.in_(wanted[start : start + 500]))
        found.update((row.id, row) for row in session.execute(query))
    return _told_apart(found)


def list_person_keys(*, session: Session, ids: Iterable[int]) -> dict[int, str]:
    """Return the key of every person of ``ids``, keyed by id (a large set is read in one pass over the persons)."""
    wanted = set(ids)
    if len(wanted) > 5000:
        return {ident: key for ident, key in session.execute(select(Person.id, Person.key)) if ident in wanted}
    found: dict[int, str] = {}
    ordered = sorted(wanted)
    for start in range(0, len(ordered), 500):  # stays under SQLite's limit of bound parameters
        found.update(session.execute(select(Person.id, Person.key).where(Person.id.in_(ordered[start : start + 500]))).all())
    return found


def list_person_labels_by_key(*, session: Session, keys: Iterable[str]) -> dict[str, PersonLabel]:
    """Return the persons of ``keys`` (current keys only), keyed by key; unknown keys are left out."""
    wanted = sorted(set(keys))
    found: dict[str, PersonLabel] = {}
    for start in range(0, len(wanted), 500):  # stays under SQLite's limit of bound parameters
        query = select(*_LABEL_COLUMNS).where(Person.key.in_(wanted[start : start + 500]))
        found.update((row.key, row) for row in session.execute(query))
    return _told_apart(found)


_LABEL_COLUMNS = (Person.id, Person.key, Person.name, Person.kind, Person.unidentified, Person.born_text, Person.died_text)


def _told_apart(rows: dict) -> dict:
    """Return labels in which persons of the same name are told apart by their life dates (or keys).

    A table or drawing of several "Pieter Schuttelaer"s would otherwise let a reader take two
    persons for one; a name shared within the same set of labels gets "(born–died)", and where
    even those agree, the key.
    """
    names = Counter(row.name for row in rows.values())
    labels = {}
    for ident, row in rows.items():
        name = row.name
        if names[row.name] > 1:
            name = f"{row.name} ({_life(row.born_text)}–{_life(row.died_text)})"
        labels[ident] = (name, row)
    shown = Counter(name for name, _row in labels.values())
    return {
        ident: PersonLabel(row.id, row.key, f"{name[:-1]}, {row.key})" if shown[name] > 1 else name, row.kind, row.unidentified)
        for ident, (name, row) in labels.items()
    }


def _life(text: str | None) -> str:
    """A life date as a label shows it: "?" when unknown, an EDTF season in words ("autumn 1705")."""
    return (season_words(text) or text) if text else "?"


def list_collection_names(*, session: Session, ids: Iterable[int]) -> dict[int, str]:
    """Return a label of each collection of ``ids``, keyed by id: "repository: collection", unique.

    Two archives may each hold a collection of the same name; a label that would repeat gets the
    collection's key, so counts keyed by label never merge two collections.
    """
    wanted = sorted(set(ids))
    if not wanted:
        return {}
    rows = session.execute(
        select(Collection.id, Collection.key, Collection.name, Repository.name)
        .join(Repository, Collection.repository_id == Repository.id)
        .where(Collection.id.in_(wanted))
    ).all()
    return _keyed_where_repeated({cid: (f"{repository}: {name}", key) for cid, key, name, repository in rows})


def list_collection_repositories(*, session: Session, ids: Iterable[int]) -> dict[int, str]:
    """Return the name of the repository holding each collection of ``ids``, keyed by collection id.

    Two repositories of the same name are told apart by their keys, so counts keyed by name never
    merge two archives.
    """
    wanted = sorted(set(ids))
    if not wanted:
        return {}
    rows = session.execute(
        select(Collection.id, Repository.id, Repository.key, Repository.name)
        .join(Repository, Collection.repository_id == Repository.id)
        .where(Collection.id.in_(wanted))
    ).all()
    names = _keyed_where_repeated({rid: (name, key) for _cid, rid, key, name in rows})
    return {cid: names[rid] for cid, rid, _key, _name in rows}


def _keyed_where_repeated(labels: dict[int, tuple[str, str]]) -> dict[int, str]:
    """Return each id's label, followed by its key where the same label stands for more than one id."""
    uses = Counter(label for label, _key in labels.values())
    return {id_: f"{label} ({key})" if uses[label] > 1 else label for id_, (label, key) in labels.items()}


def list_relation_kinds(*, session: Session) -> list[KindLabel]:
    """Return every relation kind, in the order they were defined (parents before their sub-kinds)."""
    parent = aliased(RelationKind)
    query = (
        select(RelationKind.id, RelationKind.key, RelationKind.label, RelationKind.directed, parent.key)
        .outerjoin(parent, RelationKind.parent_id == parent.id)
        .order_by(RelationKind.id)
    )
    return [KindLabel(*row) for row in session.execute(query)]


def list_archives(*, session: Session) -> list[ArchiveLabel]:
    """Return every repository (by name) with its collections (by name)."""
    repositories = session.execute(select(Repository.id, Repository.key, Repository.name).order_by(Repository.name, Repository.key)).all()
    collections: dict[int, list[CollectionLabel]] = {r.id: [] for r in repositories}
    query = select(Collection.repository_id, Collection.key, Collection.name).order_by(Collection.name, Collection.key)
    for repository_id, key, name in session.execute(query):
        collections[repository_id].append(CollectionLabel(key=key, name=name))
    return [ArchiveLabel(key=r.key, name=r.name, collections=collections[r.id]) for r in repositories]
