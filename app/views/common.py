"""What every page shares: the read session, the templates, the URL builder and the one renderer.

A view builds one view-model (a dataclass) and hands it to :func:`render`, which answers
with JSON under ``/api/``, with the page's partial to an htmx request, and with the whole
page otherwise. The page and its JSON twin therefore always show the same figures.
"""

from __future__ import annotations

import json
import re
from collections.abc import Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any
from urllib.parse import quote, urlencode

import orjson
from fastapi import Depends, HTTPException, Request
from fastapi.responses import HTMLResponse, Response
from jinja2 import Environment, FileSystemLoader, StrictUndefined
from markupsafe import Markup, escape
from sqlalchemy.exc import SQLAlchemyError
from sqlalchemy.orm import Session

from app.auth import csrf_token, current_actor
from app.config import Settings
from app.dates import season_words
from app.documented import DOCUMENTED
from app.network.slice import Slice, SliceError
from app.store.summary import get_data_version

__all__ = [
    "STATIC_DIR",
    "TEMPLATES_DIR",
    "BadParameter",
    "ErrorPage",
    "Layout",
    "SessionDep",
    "SliceDep",
    "SettingsDep",
    "Urls",
    "is_api_request",
    "page_number",
    "render",
    "render_error",
    "templates",
    "json_bytes",
    "urls_for",
]

PROJECT_DIR = Path(__file__).resolve().parents[2]
TEMPLATES_DIR = PROJECT_DIR / "templates"
STATIC_DIR = PROJECT_DIR / "static"


# --- dependencies ------------------------------------------------------------------------


def read_session(request: Request) -> Iterator[Session]:
    """Yield a read session on the app's database for the length of one request.

    The frame of the page and the redaction read from it too (``request_session``): one
    transaction, so the data version in the frame is the one the page was read at.
    """
    with request.app.state.database.read() as session:
        request.state.read_session = session
        try:
            yield session
        finally:
            del request.state.read_session


def request_session(request: Request) -> Session | None:
    """Return the request's read session while its route runs, else None."""
    return getattr(request.state, "read_session", None)


def current_settings(request: Request) -> Settings:
    """Return the settings the app was created with."""
    return request.app.state.settings


def slice_from_request(request: Request) -> Slice:
    """Return the slice of the request's query string; a bad value is a 400 naming the parameter."""
    try:
        return Slice.from_query(request.query_params.multi_items())
    except SliceError as error:
        raise BadParameter(error.parameter, error.value, error.accepted) from error


SessionDep = Annotated[Session, Depends(read_session)]
SliceDep = Annotated[Slice, Depends(slice_from_request)]
SettingsDep = Annotated[Settings, Depends(current_settings)]


# --- URLs --------------------------------------------------------------------------------


class Urls:
    """Builds every path a page links to, so that templates never write one by hand.

    Paths to network views take the current slice, so the slice survives every link.
    """

    def __init__(self, root: str = ""):
        self.root = root.rstrip("/")  # where the app is mounted, "" at the top of the site
        # The query string of each slice, written once: a hub's drawing links thousands of ties.
        self._slice_queries: dict[Slice, tuple[list[tuple[str, str]], str]] = {}
        self._last_slice: Slice | None = None
        self._last_query: tuple[list[tuple[str, str]], str] = ([], "")

    def home(self) -> str:
        return self._path("/")

    def persons(self, *, q: str | None = None, sort: str | None = None, page: int | None = None) -> str:
        return self._path("/persons", q=q, sort=sort, page=None if page in (None, 1) else str(page))

    def person(self, key: str, slice: Slice | None = None, **extra: str | None) -> str:
        return self._path(f"/persons/{_seg(key)}", slice, **extra)

    def ego(self, key: str, slice: Slice | None = None, **extra: str | None) -> str:
        return self._path(f"/persons/{_seg(key)}/ego", slice, **extra)

    def ego_svg(self, key: str, slice: Slice | None = None, **extra: str | None) -> str:
        return self._path(f"/persons/{_seg(key)}/ego.svg", slice, **extra)

    def ego_api(self, key: str, slice: Slice | None = None, **extra: str | None) -> str:
        return self._path(f"/api/persons/{_seg(key)}/ego", slice, **extra)

    def ties(self, a: str, b: str, slice: Slice | None = None) -> str:
        return self._path(f"/ties/{_seg(a)}/{_seg(b)}", slice)

    def relation(self, relation_id: int) -> str:
        return self._path(f"/relations/{int(relation_id)}")

    def sources(
        self, *, q: str | None = None, kind: str | None = None, period_from: str | None = None,
        period_to: str | None = None, place_from: str | None = None, place_to: str | None = None,
        sort: str | None = None, page: int | None = None,
    ) -> str:
        """The index of sources; ``period_from`` and ``period_to`` are its ``from`` and ``to`` years."""
        filters = {"q": q, "kind": kind, "from": period_from, "to": period_to, "place_from": place_from,
                   "place_to": place_to, "sort": None if sort == "date" else sort}  # fmt: skip
        return self._path("/sources", **{n: v for n, v in filters.items() if v}, page=None if page in (None, 1) else str(page))

    def source(self, key: str, slice: Slice | None = None) -> str:
        return self._path(f"/sources/{_seg(key)}", slice)

    def repositories(self) -> str:
        return self._path("/repositories")

    def repository(self, key: str) -> str:
        return self._path(f"/repositories/{_seg(key)}")

    def collection(self, key: str, *, sort: str | None = None, page: int | None = None) -> str:
        return self._path(
            f"/collections/{_seg(key)}", sort=None if sort == "date" else sort, page=None if page in (None, 1) else str(page)
        )

    def place(self, key: str, slice: Slice | None = None) -> str:
        return self._path(f"/places/{_seg(key)}", slice)

    def groups(self, *, q: str | None = None, kind: str | None = None) -> str:
        return self._path("/groups", q=q or None, kind=kind or None)

    def group(self, key: str, slice: Slice | None = None) -> str:
        """One group; with a slice, its drawing shows the slice's memberships and its links keep it."""
        return self._path(f"/groups/{_seg(key)}", slice)

    def group_members_csv(self, key: str) -> str:
        return self._path(f"/groups/{_seg(key)}/members.csv")

    def network(self, view: str = "", slice: Slice | None = None, **extra: str | None) -> str:
        """A measure page (``network("centrality", slice, measure="degree")``), or the landing page."""
        return self._path("/network" + (f"/{quote(view, safe='/:')}" if view else ""), slice, **extra)

    def network_api(self, view: str = "", slice: Slice | None = None, **extra: str | None) -> str:
        return self._path("/api/network" + (f"/{_seg(view)}" if view else ""), slice, **extra)

    def network_job(self, job_id: int) -> str:
        """The status of a background job (polled by a page that waits for a heavy measure)."""
        return self._path(f"/network/jobs/{int(job_id)}")

    def network_recompute(self, view: str, slice: Slice | None = None, **extra: str | None) -> str:
        """Where the recompute button of a measure page posts to."""
        return self._path(f"/network/{_seg(view)}/recompute", slice, **extra)

    def import_start(self) -> str:
        """The upload page of workbooks (editors and admins)."""
        return self._path("/import")

    def import_upload(self, token: str, step: str = "") -> str:
        """One upload: its mapping step, preview and result (``step``: progress, mapping, mapping.json, confirm)."""
        return self._path(f"/import/{_seg(token)}" + (f"/{step}" if step else ""))

    def person_measures(self, key: str, slice: Slice | None = None) -> str:
        return self._path(f"/persons/{_seg(key)}/measures", slice)

    # -- editing and the audit trail --

    def new(self, what: str, **query: str | None) -> str:
        """The form for a new ``person``, ``source``, ``group``, ``relation`` or ``membership`` (query fills fields)."""
        return self._path(f"/new/{_seg(what)}", **query)

    def edit_person(self, key: str) -> str:
        return self._path(f"/persons/{_seg(key)}/edit")

    def edit_group(self, key: str) -> str:
        return self._path(f"/groups/{_seg(key)}/edit")

    def edit_source(self, key: str) -> str:
        return self._path(f"/sources/{_seg(key)}/edit")

    def relation_attestations(self, relation_id: int) -> str:
        return self._path(f"/relations/{int(relation_id)}/attestations")

    def membership(self, membership_id: int) -> str:
        return self._path(f"/memberships/{int(membership_id)}")

    def edit_membership(self, membership_id: int) -> str:
        return self._path(f"/memberships/{int(membership_id)}/edit")

    def membership_attestations(self, membership_id: int) -> str:
        return self._path(f"/memberships/{int(membership_id)}/attestations")

    def edit_attestation(self, key: str) -> str:
        return self._path(f"/attestations/{_seg(key)}/edit")

    def delete_attestation(self, key: str) -> str:
        return self._path(f"/attestations/{_seg(key)}/delete")

    def restore_attestation(self, key: str) -> str:
        return self._path(f"/attestations/{_seg(key)}/restore")

    def merge(self, *, kept: str | None = None, absorbed: str | None = None) -> str:
        return self._path("/merge", kept=kept or None, absorbed=absorbed or None)

    def split(self, key: str) -> str:
        return self._path(f"/persons/{_seg(key)}/split")

    def person_links(self, key: str) -> str:
        return self._path(f"/persons/{_seg(key)}/links")

    def delete_person_link(self, link_id: int) -> str:
        return self._path(f"/person-links/{int(link_id)}/delete")

    def audit(self, *, user: str | None = None, table: str | None = None, key: str | None = None,
              period_from: str | None = None, period_to: str | None = None, page: int | None = None) -> str:
        """The audit trail; ``table`` and ``key`` give one record's history."""
        filters = {"user": user, "table": table, "key": key, "from": period_from, "to": period_to}
        return self._path("/audit", **{n: v for n, v in filters.items() if v},
                          page=None if page in (None, 1) else str(page))

    def audit_entry(self, entry_id: int) -> str:
        return self._path(f"/audit/{int(entry_id)}")

    def redact(self, entry_id: int) -> str:
        return self._path(f"/audit/{int(entry_id)}/redact")
    def export(self, name: str = "", slice: Slice | None = None, **extra: str | None) -> str:
        """A file of the slice under ``/export/`` (``export("graphml", slice)``), or the export page."""
        return self._path("/export" + (f"/{quote(name)}" if name else ""), slice, **extra)

    def login(self, next: str | None = None) -> str:  # noqa: A002
        return self._path("/login", next=next)

    def logout(self) -> str:
        return self._path("/logout")

    def admin_users(self) -> str:
        return self._path("/admin/users")

    def admin_user_disable(self, name: str) -> str:
        return self._path(f"/admin/users/{_seg(name)}/disable")

    def static(self, path: str) -> str:
        return self._path(f"/static/{path.lstrip('/')}")

    def api(self, path: str) -> str:
        return self._path(f"/api/{path.lstrip('/')}")

    def _path(self, path: str, slice: Slice | None = None, **query: str | None) -> str:
        pairs, encoded = [], ""
        if slice is not None:
            if slice is self._last_slice:  # the same object again: not even hashed (a slice hashes all its fields)
                pairs, encoded = self._last_query
            else:
                if slice not in self._slice_queries:
                    found = slice.to_query()
                    self._slice_queries[slice] = (found, urlencode(found))
                pairs, encoded = self._last_query = self._slice_queries[slice]
                self._last_slice = slice
        extra = [(name, str(value)) for name, value in query.items() if value is not None]
        if extra:
            encoded = urlencode(pairs + extra)
        return self.root + path + (f"?{encoded}" if encoded else "")


_PLAIN_SEGMENT = re.compile(r"[A-Za-z0-9._~:-]*")  # what ``quote(key, safe=":")`` leaves as it is


def _seg(key: str) -> str:
    """Quote a key for use as one path segment (keys hold only letters, digits and ._:-)."""
    key = str(key)
    return key if _PLAIN_SEGMENT.fullmatch(key) else quote(key, safe=":")


def urls_for(request: Request) -> Urls:
    """Return the URL builder for the site the request came to."""
    return Urls(request.scope.get("root_path", ""))


# --- templates ---------------------------------------------------------------------------


def _count(number: int) -> str:
    """Group digits by thousands with a thin space, which reads the same in every language."""
    return f"{number:,}".replace(",", "\u2009")


def _share(part: int, whole: int) -> int:
    """Return ``part`` as a whole percentage of ``whole`` (0 when ``whole`` is 0)."""
    return round(100 * part / whole) if whole else 0


def _season_note(text: str | None) -> Markup:
    """Return, for a date as written with EDTF season codes, those in words to show beside it: " (summer 1662)"."""
    words = season_words(str(text)) if text else None
    if words is None:
        return Markup("")
    return Markup(' <span class="date-words">(') + escape(words) + Markup(")</span>")


templates = Environment(
    loader=FileSystemLoader(TEMPLATES_DIR),
    autoescape=True,
    undefined=StrictUndefined,  # a misspelt field fails loudly instead of printing nothing
    trim_blocks=True,
    lstrip_blocks=True,
)
templates.filters["count"] = _count
templates.filters["share"] = _share
templates.filters["season_note"] = _season_note
templates.filters["pretty_json"] = lambda value: json.dumps(value, indent=2, ensure_ascii=False, sort_keys=True, default=str)


@dataclass(frozen=True)
class Layout:
    """What the frame around every page shows."""

    dataset_name: str
    data_version: int | None  # None when the database could not be read (an error page)


def page_layout(request: Request) -> Layout:
    """Return the frame of a full page: the dataset's name and its data version."""
    try:
        session = request_session(request)
        if session is not None:
            version = get_data_version(session=session)
        else:
            with request.app.state.database.read() as session:
                version = get_data_version(session=session)
    except SQLAlchemyError:
        version = None
    return Layout(dataset_name=request.app.state.settings.dataset_name, data_version=version)


# --- rendering ---------------------------------------------------------------------------


def is_api_request(request: Request) -> bool:
    """Return True for requests under ``/api/``, which are answered in JSON."""
    path = request.url.path
    root = request.scope.get("root_path", "")
    if root and path.startswith(root):
        path = path[len(root) :]
    return path == "/api" or path.startswith("/api/")


def wants_partial(request: Request) -> bool:
    """Return True when htmx asks for a piece of a page rather than a whole page."""
    headers = request.headers
    return (
        "HX-Request" in headers
        and "HX-Boosted" not in headers  # a boosted link replaces the whole page
        and "HX-History-Restore-Request" not in headers  # so does going back in history
    )


def json_bytes(view: Any) -> bytes:
    """Return a view-model as JSON: dataclasses as objects, dates as ISO strings, sets as lists.

    orjson walks dataclasses, dates and tuples natively, in C: a hub's ego network (thousands
    of ties, each drawn) is written in a few milliseconds instead of a few hundred.
    """
    return orjson.dumps(view, default=_json_default, option=orjson.OPT_NON_STR_KEYS)


def _json_default(value: Any) -> Any:
    if isinstance(value, (set, frozenset)):
        return list(value)
    raise TypeError(f"cannot write {type(value).__name__} as JSON")


def render(
    request: Request,
    view: Any,
    *,
    template: str,
    partial: str | None = None,
    status_code: int = 200,
    headers: dict[str, str] | None = None,
) -> Response:
    """Return the view-model as JSON under ``/api/``, as its partial to htmx, else as the full page.

    ``template`` is the full page, which includes ``partial``; both see the view-model as
    ``page`` and the URL builder as ``urls``, and the full page also sees ``layout``.
    """
    from app.views.redaction import redact_for  # imports app.auth and the store, as this module does

    view = redact_for(request, view)  # after every cache: a reader never sees a restricted person
    if is_api_request(request):
        return Response(json_bytes(view), status_code=status_code, headers=headers, media_type="application/json")
    context = {"page": view, "urls": urls_for(request), "csrf_token": csrf_token(request),
               "actor": current_actor(request)}
    if partial is not None and wants_partial(request):
        html = templates.get_template(partial).render(context)
    else:
        html = templates.get_template(template).render(context, layout=page_layout(request))
    # The same URL answers a whole page or a piece of one, so caches must tell them apart.
    return HTMLResponse(html, status_code=status_code, headers={**(headers or {}), "Vary": "HX-Request"})


# --- errors ------------------------------------------------------------------------------


@dataclass(frozen=True)
class ErrorPage:
    """A request that could not be answered, and why."""

    __pydantic_config__ = DOCUMENTED

    error: str
    """What went wrong, in a few words ("not found", "bad parameter")."""
    detail: str
    """What exactly was not found or is wrong, and what would be accepted."""


class BadParameter(HTTPException):
    """A parameter whose value a page does not accept; answered with 400 and the accepted values."""

    def __init__(self, name: str, value: object, accepted: str | Iterable[str]):
        if not isinstance(accepted, str):
            accepted = "one of " + ", ".join(str(item) for item in accepted)
        self.parameter = name
        self.accepted = accepted
        super().__init__(status_code=400, detail=f"{name}={value!s} is not accepted; accepted: {accepted}")


MAX_PAGE = 1_000_000  # far beyond any real list, well inside what the database takes as an offset


def page_number(value: str | None) -> int:
    """Return the number of ``?page=``; anything but a whole number of 1 or more is a 400."""
    if value is None or not value.strip():
        return 1
    try:
        number = int(value)
    except ValueError:
        number = 0
    if number < 1:
        raise BadParameter("page", value, "a whole number of 1 or more")
    if number > MAX_PAGE:
        raise BadParameter("page", value, f"a whole number no larger than {MAX_PAGE}")
    return number


def render_error(
    request: Request, status_code: int, error: str, detail: str, *, headers: dict[str, str] | None = None
) -> Response:
    """Return an error as JSON ``{"error", "detail"}`` under ``/api/``, else as a page in the site's style."""
    return render(
        request,
        ErrorPage(error=error, detail=detail),
        template="error.html",
        partial="_error.html",
        status_code=status_code,
        headers=headers,
    )

