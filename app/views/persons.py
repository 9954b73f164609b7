"""The persons index with its search (``/persons``) and the page of one person (``/persons/{key}``)."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, ClassVar

from fastapi import APIRouter, HTTPException, Request
from fastapi.responses import HTMLResponse, RedirectResponse, Response
from sqlalchemy.orm import Session

from app.documented import DOCUMENTED
from app.network.slice import Slice, relation_totals, resolve_slice
from app.store.persons import (
    PERSON_SORTS,
    PersonDetail,
    PersonList,
    PersonRef,
    get_person,
    get_person_ref,
    person_id,
    search_persons,
)
from app.store.merging import LinkedPerson, list_person_links
from app.views.common import BadParameter, SessionDep, SliceDep, page_number, render
from app.views.ego import ego_panel
from app.views.redaction import restricted_for


def _hidden(request: Request) -> frozenset[int]:
    """The persons the request's actor may not see (none for editors and admins)."""
    restricted = restricted_for(request)
    return restricted.ids if restricted is not None else frozenset()

__all__ = ["PersonPage", "PersonsPage", "person_or_redirect", "person_view", "persons_view", "router"]

router = APIRouter(tags=["persons"])


@dataclass(frozen=True)
class PersonsPage:
    """The index of persons: a search, a sort and one page of results."""

    __pydantic_config__ = DOCUMENTED

    result: PersonList
    """The persons found, this page of them, and how they are sorted."""
    sorts: list[str]
    """The sort orders offered."""


RELATION_LIMIT = 50
"""Relations of one kind listed on a person's page before "show all": a hub has thousands."""


@dataclass(frozen=True)
class PersonPage:
    """Everything recorded about one person, and the slice that links to ties keep."""

    __pydantic_config__ = DOCUMENTED

    person: PersonDetail
    """Names, dates, identifiers, memberships, cited facts and relations."""
    slice: Slice
    """The slice of the query string; links to ties pages keep it."""
    slice_description: str
    """The slice in plain words."""
    sliced: bool
    """True when the slice is not the default one (each relation then says how much of it the slice keeps)."""
    ego: Any | None = None
    """The ego network panel drawn around the person (filled in by the ego view; None when not drawn)."""
    tie_list_limit: ClassVar[int] = 100
    """Ties drawn above which the page lists only the strongest of each kind (the ego page lists every one)."""
    tie_kind_limit: ClassVar[int] = 20
    """Ties of each kind listed then: those with the most documents, then attestations."""
    relation_limit: int | None = RELATION_LIMIT
    """How many relations of each kind are listed at most (those with most attestations); None: all. The JSON lists all."""
    same_as: list[LinkedPerson] = field(default_factory=list)
    """Persons recorded as possibly the same as this one (short of a merge), with the note."""


def persons_view(*, session: Session, q: str = "", sort: str | None = None, page: str | None = None,
                 hidden_ids: frozenset[int] = frozenset()) -> PersonsPage:
    """Return the view-model of the index: best matches first when searching, else by name.

    ``hidden_ids`` are persons the viewer may not see: a search never finds them, the list puts them last.
    """
    sort = (sort or "").strip().lower() or ("match" if q.strip() else "name")
    if sort not in PERSON_SORTS:
        raise BadParameter("sort", sort, PERSON_SORTS)
    number = page_number(page)
    result = search_persons(session=session, q=q, sort=sort, page=number, hidden_ids=hidden_ids)
    if number > result.pages:
        raise BadParameter("page", page, f"a whole number from 1 to {result.pages}")
    return PersonsPage(result=result, sorts=list(PERSON_SORTS))


def person_view(
    *, session: Session, key: str, slice_: Slice, relations: str | None = None, every_relation: bool = False
) -> PersonPage:
    """Return the view-model of one person's page (the key must be current: see person_or_redirect).

    The page lists ``RELATION_LIMIT`` relations of each kind unless ``relations=all``; the JSON
    twin (``every_relation``) lists every one. Only the listed relations are read in full.
    """
    if relations not in (None, "", "all"):
        raise BadParameter("relations", relations, "all (list every relation of each kind)")
    limit = None if every_relation or relations == "all" else RELATION_LIMIT
    resolved = resolve_slice(session, slice_)
    sliced = slice_ != Slice()
    in_slice = None
    if sliced:
        pid = person_id(session=session, key=key)
        in_slice = {row.relation_id: row.attestations for row in relation_totals(session, resolved, persons=[pid])}
    person = get_person(session=session, key=key, in_slice=in_slice, relation_limit=limit)
    if person is None:
        raise HTTPException(status_code=404, detail=f"no person with key '{key}'")
    ego = ego_panel(session=session, person_key=key, slice=slice_, radius=1)
    return PersonPage(person=person, slice=slice_, slice_description=slice_.describe(), sliced=sliced, ego=ego,
                      relation_limit=limit, same_as=list_person_links(session=session, key=key))


def person_or_redirect(request: Request, session: Session, key: str, parameter: str = "key") -> PersonRef | Response:
    """Return person ``key``; a redirect when ``key`` is an old key of a merged person; 404 when unknown.

    ``parameter`` names the path part that holds the key, so that the redirect goes to the same
    route with the current key in its place and the query string unchanged.
    """
    ref = get_person_ref(session=session, key=key)
    if ref is None:
        raise HTTPException(status_code=404, detail=f"no person with key '{key}'")
    if ref.key == key:
        return ref
    # A path, not a full URL: a full URL would be built from the request's Host header.
    path = request.app.url_path_for(request.scope["route"].name, **{**request.path_params, parameter: ref.key})
    target = request.scope.get("root_path", "") + str(path)
    query = request.url.query
    return RedirectResponse(f"{target}?{query}" if query else str(target), status_code=308)


# --- routes -----------------------------------------------------------------------------------

_INDEX = (
    "Every person, searched by any variant of their name: case and accents do not matter (`jose` "
    "finds `José`), and near spellings are offered after the exact, prefix and substring matches, "
    "marked `fuzzy`. When a variant other than the display name matched, it is named. Parameters: "
    "`q` (the search), `sort` (`match`: best match first, the default when searching; `name`, the "
    "default otherwise; `attestations` or `degree`: most first), `page` (50 persons per page). "
    "`attestations` counts the attestations (not deleted) of a person's relations, memberships and "
    "facts; `degree` the distinct other persons they have a relation with."
)
_PERSON = (
    "Everything recorded about one person: names and variants, sort name, kind, birth and death as "
    "written and as Gregorian days, authority identifiers with links to their records, memberships, "
    "cited facts with their sources, and relations by kind with the other person, the direction and "
    "roles, the number of attestations, the years they cover and the strongest certainty. Deleted "
    "attestations never count. The slice parameters (`kind`, `from`, `to`, `certainty`, ...) are kept "
    "in links to the ties pages, and each relation then says how many attestations the slice keeps. "
    "The ego network of the slice (radius 1) comes with it, as on `/persons/{key}/ego`. The page lists "
    "at most 50 relations of each kind (those with the most attestations; `relations=all` lists every one); "
    "the JSON always lists every one. "
    "An old key of a merged person redirects (308) to the current one; an unknown key is a 404."
)


@router.get("/persons", response_class=HTMLResponse, summary="Persons: index and search (page)",
            description=_INDEX + " An htmx request (header `HX-Request`) gets only the result rows. "
            "The same data in JSON: `/api/persons`.")  # fmt: skip
def persons_page(request: Request, session: SessionDep, q: str = "", sort: str | None = None, page: str | None = None) -> Response:
    view = persons_view(session=session, q=q, sort=sort, page=page, hidden_ids=_hidden(request))
    return render(request, view, template="persons.html", partial="_person_rows.html")


@router.get("/api/persons", response_model=PersonsPage, summary="Persons: index and search (JSON)",
            description=_INDEX + " The page with the same data: `/persons`.")  # fmt: skip
def persons_api(request: Request, session: SessionDep, q: str = "", sort: str | None = None, page: str | None = None) -> Response:
    view = persons_view(session=session, q=q, sort=sort, page=page, hidden_ids=_hidden(request))
    return render(request, view, template="persons.html", partial="_person_rows.html")


@router.get("/persons/{key}", response_class=HTMLResponse, summary="One person (page)",
            description=_PERSON + " The same data in JSON: `/api/persons/{key}`.")  # fmt: skip
def person_page(request: Request, key: str, session: SessionDep, slice_: SliceDep, relations: str | None = None) -> Response:
    current = person_or_redirect(request, session, key)
    if isinstance(current, Response):
        return current
    return render(request, person_view(session=session, key=current.key, slice_=slice_, relations=relations), template="person.html")


@router.get("/api/persons/{key}", response_model=PersonPage, summary="One person (JSON)",
            description=_PERSON + " The page with the same data: `/persons/{key}`.")  # fmt: skip
def person_api(request: Request, key: str, session: SessionDep, slice_: SliceDep, relations: str | None = None) -> Response:
    current = person_or_redirect(request, session, key)
    if isinstance(current, Response):
        return current
    return render(request, person_view(session=session, key=current.key, slice_=slice_, relations=relations,
                                         every_relation=True), template="person.html")
