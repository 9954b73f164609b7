"""Sources as CSL-JSON, the data format of the Citation Style Language, for reference managers.

Archival documents are items of type ``manuscript`` with ``archive`` (the repository),
``archive-place``, ``archive_location`` (the collection) and ``call-number`` (the shelfmark);
printed ones are ``book`` items with ``author``, ``title``, ``publisher``, ``issued`` and
``page``. Field names are those of the CSL data schema (csl-data.json); the tests validate the
items against the published schema (tests/csl/).
"""

from __future__ import annotations

from collections.abc import Iterable

from sqlalchemy import select
from sqlalchemy.orm import Session, joinedload

from app.models import Collection, Source

__all__ = ["csl_items"]


def csl_items(session: Session, *, keys: Iterable[str] | None = None) -> list[dict]:
    """Return the CSL-JSON items of the sources of ``keys`` (every source when None), in key order."""
    query = select(Source).options(joinedload(Source.collection).joinedload(Collection.repository),
                                   joinedload(Source.place_from)).order_by(Source.key)
    wanted = None if keys is None else set(keys)
    return [_item(s) for s in session.scalars(query).unique() if wanted is None or s.key in wanted]


def _item(source: Source) -> dict:
    item: dict = {"id": source.key}
    if source.collection is not None:
        repository = source.collection.repository
        item["type"] = "manuscript"
        item["archive"] = repository.name
        if repository.place is not None:
            item["archive-place"] = repository.place.name
        item["archive_location"] = source.collection.name + (
            f" ({source.collection.reference_code})" if source.collection.reference_code else "")
        if source.reference:
            item["call-number"] = source.reference
        item["title"] = source.title or _title(source)
        if source.kind:
            item["genre"] = source.kind
        if source.author:
            item["author"] = [{"literal": source.author}]
    else:
        item["type"] = "book"
        item["title"] = source.title or _title(source)
        if source.author:
            item["author"] = [{"literal": source.author}]
        if source.publisher:
            item["publisher"] = source.publisher
        if source.pages:
            item["page"] = source.pages
    issued = _date(source.year if source.collection is None and source.year else None, source)
    if issued:
        item["issued"] = issued
    if source.url:
        item["URL"] = source.url
    if source.note:
        item["note"] = source.note
    return item


def _title(source: Source) -> str:
    words = [(source.kind or "document").capitalize()]
    if source.date_text:
        words.append(source.date_text)
    return ", ".join(words)


def _date(year: str | None, source: Source) -> dict | None:
    """A CSL date: ``date-parts`` from the Gregorian days (a range when not one day), ``raw`` as written."""
    if year:
        return {"date-parts": [[int(year)]]} if year.isdigit() else {"raw": year}
    if source.earliest is None:
        return {"raw": source.date_text} if source.date_text else None
    first = source.earliest
    last = source.latest or first
    parts = [[first.year, first.month, first.day]]
    if last != first:
        parts.append([last.year, last.month, last.day])
    out: dict = {"date-parts": parts, "raw": source.date_text}
    if source.date_text and "~" in source.date_text:
        out["circa"] = True
    return out
