"""Citations of sources: the archival shelfmark, the printed edition, or both."""

from __future__ import annotations

from dataclasses import dataclass

from sqlalchemy import select
from sqlalchemy.orm import Session, joinedload

from app.documented import DOCUMENTED
from app.models import Collection, Source

__all__ = ["SourceCitation", "get_citations", "source_citation", "web_address"]


@dataclass(frozen=True)
class SourceCitation:
    """How to find one document again."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The source's key."""
    kind: str | None
    """Letter, register, deed, edition, ..."""
    repository_key: str | None
    """Key of the archive or library holding it (None for a printed source)."""
    repository: str | None
    """Name of that archive or library."""
    collection_key: str | None
    """Key of its collection (fonds, series)."""
    collection: str | None
    """Name of its collection."""
    reference: str | None
    """Shelfmark or call number inside the collection."""
    title: str | None
    """Title (of a printed source, or a descriptive title)."""
    author: str | None
    """Author or editor of a printed source."""
    publisher: str | None
    """Publisher of a printed source."""
    year: str | None
    """Year of publication."""
    pages: str | None
    """Pages of a printed source."""
    date_text: str | None
    """Date of the document as written (EDTF)."""
    calendar: str
    """Calendar in which the date is written."""
    copy_of_key: str | None
    """Key of the original, when this source is a copy."""
    url: str | None
    """Address of a digital copy or catalogue entry, as recorded."""
    link: str | None
    """The same address when it is a web address (http or https), the only kind offered as a link."""
    text: str
    """The whole citation as one line of text."""


def source_citation(source: Source) -> SourceCitation:
    """Return the citation of a source whose collection and repository are loaded."""
    collection = source.collection
    repository = collection.repository if collection else None
    archival = ", ".join(p for p in (repository and repository.name, collection and collection.name, source.reference) if p)
    printed = ", ".join(p for p in (source.author, source.title and f"“{source.title}”", source.publisher, source.year) if p)
    if source.pages:
        printed += f", pp. {source.pages}" if printed else f"pp. {source.pages}"
    text = "; ".join(p for p in (archival, printed) if p) or source.title or source.key
    return SourceCitation(
        key=source.key, kind=source.kind, repository_key=repository and repository.key,
        repository=repository and repository.name, collection_key=collection and collection.key,
        collection=collection and collection.name, reference=source.reference, title=source.title,
        author=source.author, publisher=source.publisher, year=source.year, pages=source.pages,
        date_text=source.date_text, calendar=source.calendar, copy_of_key=source.copy_of.key if source.copy_of else None,
        url=source.url, link=web_address(source.url), text=text,
    )


def web_address(url: str | None) -> str | None:
    """Return ``url`` when it is an http(s) address that may be offered as a link, else None.

    A stored url is data from a workbook: a ``javascript:`` or ``data:`` address must never become a link.
    """
    if url and url.strip().lower().startswith(("http://", "https://")):
        return url.strip()
    return None


def get_citations(*, session: Session, source_ids: list[int]) -> dict[int, SourceCitation]:
    """Return the citations of the given sources, keyed by source id, in one query."""
    if not source_ids:
        return {}
    sources = session.scalars(
        select(Source)
        .options(joinedload(Source.collection).joinedload(Collection.repository), joinedload(Source.copy_of))
        .where(Source.id.in_(set(source_ids)))
    ).unique()
    return {s.id: source_citation(s) for s in sources}
