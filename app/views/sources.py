"""The documents: the index of sources, one source, the repositories and their collections.

Each page is served as HTML and, under ``/api/``, as JSON from the same view-model.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from typing import Annotated

from fastapi import APIRouter, HTTPException, Query, Request
from fastapi.responses import HTMLResponse, Response
from sqlalchemy.orm import Session

from app.dates import DateError, parse_interval
from app.documented import DOCUMENTED
from app.network.slice import Slice
from app.store.sources import (
    SOURCE_SORTS,
    CollectionDetail,
    PlaceRef,
    RepositoryDetail,
    RepositoryRow,
    SourceDetail,
    SourceList,
    count_printed_sources,
    get_collection,
    get_place_ref,
    get_repository,
    get_source,
    list_repositories,
    list_source_kinds,
    search_sources,
)
from app.views.common import BadParameter, SessionDep, SliceDep, page_number, render

__all__ = [
    "CollectionPage",
    "RepositoriesPage",
    "RepositoryPage",
    "SourcePage",
    "SourcesPage",
    "collection_view",
    "repositories_view",
    "repository_view",
    "router",
    "source_view",
    "sources_view",
]

router = APIRouter(tags=["documents"])


# --- parameters ------------------------------------------------------------------------------


def _check_last_page(value: str | None, listed: SourceList) -> None:
    if listed.page > listed.pages:
        raise BadParameter("page", value, f"a whole number from 1 to {listed.pages}")


def _sort(value: str | None) -> str:
    sort = (value or "").strip().lower() or "date"
    if sort not in SOURCE_SORTS:
        raise BadParameter("sort", value, SOURCE_SORTS)
    return sort


def _year(name: str, value: str | None, *, end: bool) -> date | None:
    """Return the first (or, with ``end``, the last) day of a year or EDTF date given as ``name``."""
    if value is None or not value.strip():
        return None
    text = value.strip()
    try:
        interval = parse_interval(text.zfill(4) if text.isdigit() else text)
    except DateError:
        raise BadParameter(name, value, "a year (1703) or an EDTF date (1703-05, 1704?, 1701/1705)") from None
    return interval.latest if end else interval.earliest


def _place(session: Session, name: str, key: str | None) -> PlaceRef | None:
    if not key:
        return None
    place = get_place_ref(session=session, key=key)
    if place is None:
        raise BadParameter(name, key, "the key of a place")
    return place


# --- the index of sources --------------------------------------------------------------------


@dataclass(frozen=True)
class SourcesPage:
    """The index of sources: the filters as given, and one page of the documents that match."""

    __pydantic_config__ = DOCUMENTED

    q: str
    """The search: shelfmark, title, author or collection words, and years or EDTF dates."""
    kind: str
    """Kind of document kept ("" for every kind)."""
    period_from: str
    """The `from` year or EDTF date: dated documents that end on or after it ("" when not set)."""
    period_to: str
    """The `to` year or EDTF date: dated documents that begin on or before it ("" when not set)."""
    place_from: PlaceRef | None
    """Only documents written at this place."""
    place_to: PlaceRef | None
    """Only documents received at this place."""
    sort: str
    """Order of the list: date or reference."""
    kinds: list[str]
    """The kinds of document in the dataset, offered as a filter."""
    sorts: list[str]
    """The orders offered."""
    results: SourceList
    """The documents found: this page of them, and how many in all."""


def sources_view(
    *,
    session: Session,
    q: str | None = None,
    kind: str | None = None,
    period_from: str | None = None,
    period_to: str | None = None,
    place_from: str | None = None,
    place_to: str | None = None,
    sort: str | None = None,
    page: str | None = None,
) -> SourcesPage:
    """Return the view-model of the sources index; a bad parameter is a 400 naming it."""
    sort_by = _sort(sort)
    number = page_number(page)
    start, end = _year("from", period_from, end=False), _year("to", period_to, end=True)
    if start and end and start > end:
        raise BadParameter("from", period_from, f"a start no later than to={period_to}")
    kinds = list_source_kinds(session=session)
    kind = (kind or "").strip()
    if kind and kind not in kinds:
        raise BadParameter("kind", kind, kinds or "no kind: no source has one")
    written, received = _place(session, "place_from", place_from), _place(session, "place_to", place_to)
    results = search_sources(
        session=session, q=q, kind=kind or None, start=start, end=end, place_from=written and written.key,
        place_to=received and received.key, sort=sort_by, page=number,
    )
    _check_last_page(page, results)
    return SourcesPage(
        q=(q or "").strip(), kind=kind, period_from=(period_from or "").strip(), period_to=(period_to or "").strip(),
        place_from=written, place_to=received, sort=sort_by, kinds=kinds, sorts=list(SOURCE_SORTS), results=results,
    )


_SOURCES = (
    "The documents, 50 to a page, each with its date, citation, kind and number of attestations "
    "(deleted ones not counted). Parameters: `q` searches words in the key, shelfmark, title, author, "
    "publisher, collection and repository (every word must match, case does not matter); a word that "
    "is a year or an EDTF date (`1703`, `1703-05`, `1704?`) also matches the documents whose dates "
    "overlap it. `kind` keeps one kind of document, `from` and `to` (a year or an EDTF date) keep dated "
    "documents overlapping that period, `place_from` and `place_to` (place keys) keep documents written "
    "or received there, `sort` is `date` (the default; undated last) or `reference` (repository, "
    "collection, then shelfmark with its numbers in numeric order), `page` counts from 1."
)


@router.get("/api/sources", response_model=SourcesPage, summary="Sources: index and search (JSON)",
            description=_SOURCES + " The page with the same data: `/sources`.")  # fmt: skip
@router.get("/sources", response_class=HTMLResponse, summary="Sources: index and search (page)",
            description=_SOURCES + " An htmx request (header `HX-Request`) gets only the results. "
            "The same data in JSON: `/api/sources`.")  # fmt: skip
def sources_page(
    request: Request,
    session: SessionDep,
    q: str | None = None,
    kind: str | None = None,
    period_from: Annotated[str | None, Query(alias="from")] = None,
    period_to: Annotated[str | None, Query(alias="to")] = None,
    place_from: str | None = None,
    place_to: str | None = None,
    sort: str | None = None,
    page: str | None = None,
) -> Response:
    view = sources_view(
        session=session, q=q, kind=kind, period_from=period_from, period_to=period_to, place_from=place_from,
        place_to=place_to, sort=sort, page=page,
    )
    return render(request, view, template="sources.html", partial="_source_rows.html")


# --- one source ------------------------------------------------------------------------------


@dataclass(frozen=True)
class SourcePage:
    """One document and everything it attests."""

    __pydantic_config__ = DOCUMENTED

    source: SourceDetail
    """The document: citation, dates, places, copies and its live attestations."""
    link_out: str | None
    """The document's url when it is a web address (http or https) that can be offered as a link."""
    slice: Slice
    """The slice of the query string; links to persons and ties keep it."""


def source_view(*, session: Session, key: str, slice_: Slice) -> SourcePage:
    """Return the view-model of one source's page; an unknown key is a 404."""
    source = get_source(session=session, key=key)
    if source is None:
        raise HTTPException(status_code=404, detail=f"No source has the key '{key}'.")
    # Only web addresses become links: a javascript: or data: url would run in the page.
    return SourcePage(source=source, link_out=source.citation.link, slice=slice_)


_SOURCE = (
    "One document: its full citation (archival and bibliographic parts), the date as written with its "
    "calendar and its Gregorian days, places of writing and receipt, date received, the original it "
    "copies and the copies of it, and everything it attests: relations (kind, the two persons and the "
    "direction, locus, evidence, certainty, names as written, quote), memberships and facts. Deleted "
    "attestations are not listed but counted. Slice parameters are kept in the links to persons and "
    "ties. An unknown key is a 404."
)


@router.get("/api/sources/{key}", response_model=SourcePage, summary="One source (JSON)",
            description=_SOURCE + " The page with the same data: `/sources/{key}`.")  # fmt: skip
@router.get("/sources/{key}", response_class=HTMLResponse, summary="One source (page)",
            description=_SOURCE + " The same data in JSON: `/api/sources/{key}`.")  # fmt: skip
def source_page(request: Request, key: str, session: SessionDep, slice_: SliceDep) -> Response:
    return render(request, source_view(session=session, key=key, slice_=slice_), template="source.html")


# --- repositories and collections ------------------------------------------------------------


@dataclass(frozen=True)
class RepositoriesPage:
    """Every archive and library that holds documents."""

    __pydantic_config__ = DOCUMENTED

    repositories: list[RepositoryRow]
    """The repositories by name, with counts of their collections and documents."""
    printed_sources: int
    """Documents outside any collection (printed sources), listed in the index of sources."""


def repositories_view(*, session: Session) -> RepositoriesPage:
    """Return the view-model of the list of repositories."""
    return RepositoriesPage(
        repositories=list_repositories(session=session), printed_sources=count_printed_sources(session=session)
    )


@dataclass(frozen=True)
class RepositoryPage:
    """One archive or library and its collections."""

    __pydantic_config__ = DOCUMENTED

    repository: RepositoryDetail
    """The repository, its place and note, and its collections with counts and date spans."""


def repository_view(*, session: Session, key: str) -> RepositoryPage:
    """Return the view-model of one repository's page; an unknown key is a 404."""
    repository = get_repository(session=session, key=key)
    if repository is None:
        raise HTTPException(status_code=404, detail=f"No repository has the key '{key}'.")
    return RepositoryPage(repository=repository)


@dataclass(frozen=True)
class CollectionPage:
    """One collection: its repository, what its documents attest, and one page of its documents."""

    __pydantic_config__ = DOCUMENTED

    collection: CollectionDetail
    """The collection with counts of what its documents attest."""
    sort: str
    """Order of its documents: date or reference."""
    sorts: list[str]
    """The orders offered."""
    sources: SourceList
    """This page of its documents."""


def collection_view(*, session: Session, key: str, sort: str | None = None, page: str | None = None) -> CollectionPage:
    """Return the view-model of one collection's page; an unknown key is a 404, a bad page or sort a 400."""
    sort_by, number = _sort(sort), page_number(page)
    collection = get_collection(session=session, key=key)
    if collection is None:
        raise HTTPException(status_code=404, detail=f"No collection has the key '{key}'.")
    sources = search_sources(session=session, collection=key, sort=sort_by, page=number)
    _check_last_page(page, sources)
    return CollectionPage(collection=collection, sort=sort_by, sorts=list(SOURCE_SORTS), sources=sources)


_REPOSITORIES = (
    "Every archive and library, by name, with its place and the number of its collections and of the "
    "documents in them, and the number of printed sources outside any collection."
)
_REPOSITORY = (
    "One archive or library: name, place, note, and its collections with their reference codes, the "
    "number of their documents and live attestations, and the days their dated documents span. An "
    "unknown key is a 404."
)
_COLLECTION = (
    "One collection: name, reference code, repository, the days its dated documents span, counts of "
    "what its documents attest (live attestations, distinct relations, memberships, facts and persons "
    "involved), and its documents, 50 to a page (`page`), sorted by `date` or `reference` (`sort`). An "
    "unknown key is a 404."
)


@router.get("/api/repositories", response_model=RepositoriesPage, summary="Repositories (JSON)",
            description=_REPOSITORIES + " The page with the same data: `/repositories`.")  # fmt: skip
@router.get("/repositories", response_class=HTMLResponse, summary="Repositories (page)",
            description=_REPOSITORIES + " The same data in JSON: `/api/repositories`.")  # fmt: skip
def repositories_page(request: Request, session: SessionDep) -> Response:
    return render(request, repositories_view(session=session), template="repositories.html")


@router.get("/api/repositories/{key}", response_model=RepositoryPage, summary="One repository (JSON)",
            description=_REPOSITORY + " The page with the same data: `/repositories/{key}`.")  # fmt: skip
@router.get("/repositories/{key}", response_class=HTMLResponse, summary="One repository (page)",
            description=_REPOSITORY + " The same data in JSON: `/api/repositories/{key}`.")  # fmt: skip
def repository_page(request: Request, key: str, session: SessionDep) -> Response:
    return render(request, repository_view(session=session, key=key), template="repository.html")


@router.get("/api/collections/{key}", response_model=CollectionPage, summary="One collection (JSON)",
            description=_COLLECTION + " The page with the same data: `/collections/{key}`.")  # fmt: skip
@router.get("/collections/{key}", response_class=HTMLResponse, summary="One collection (page)",
            description=_COLLECTION + " An htmx request (header `HX-Request`) gets only the list of documents. "
            "The same data in JSON: `/api/collections/{key}`.")  # fmt: skip
def collection_page(request: Request, key: str, session: SessionDep, sort: str | None = None, page: str | None = None) -> Response:
    view = collection_view(session=session, key=key, sort=sort, page=page)
    return render(request, view, template="collection.html", partial="_collection_sources.html")
