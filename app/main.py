"""The web application: ``create_app(settings)`` builds one instance on one database.

Serve it with ``uvicorn app.main:app_from_env --factory`` (settings from ``ATTESTA_*``).
"""

from __future__ import annotations

import gc
import secrets
from collections.abc import AsyncIterator
from contextlib import asynccontextmanager
from http import HTTPStatus

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import Response
from fastapi.staticfiles import StaticFiles
from starlette.exceptions import HTTPException as StarletteHTTPException

from app.backup import serving_lock
from app.auth import AccessGate
from app.config import Settings
from app.db import Database, DatabaseError, check_schema
from app.network.jobs import Worker
from app.network.slice import SliceError
from app.serving import SpreadConnections, prepare_routes
from app.views import audit as audit_views
from app.views import accounts as accounts_views
from app.views import ego as ego_views
from app.views import editing as editing_views
from app.views import exports as export_views
from app.views import groups as groups_views
from app.views import home
from app.views import imports as import_views
from app.views import network as network_views
from app.views import persons as persons_views
from app.views import places as places_views
from app.views import records as records_views
from app.views import sources as sources_views
from app.views import ties as ties_views
from app.views import twomode as twomode_views
from app.views.common import STATIC_DIR, render_error

__all__ = ["app_from_env", "create_app"]

DESCRIPTION = (
    "Persons, documents and the ties the documents attest. Every page `/X` has a JSON twin "
    "`/api/X` built from the same view-model. Errors under `/api/` are JSON objects "
    '`{"error": ..., "detail": ...}`.'
)


GC_THRESHOLDS = (50_000, 20, 100)
"""Python's cycle collector runs after this many new objects (and every 20th, 100th run on older ones).

The default (700, 10, 10) makes a page that builds a hub's ego network (some 300,000 short-lived
objects) walk every object of the server two or three times, a few hundred milliseconds in all;
the app makes few reference cycles, so collecting less often costs little memory."""


def create_app(settings: Settings) -> FastAPI:
    """Return the web app for ``settings``; raises SchemaError if the database is missing or too new."""
    gc.set_threshold(*GC_THRESHOLDS)
    database = Database(settings.database_url, busy_timeout_ms=settings.busy_timeout_ms)
    try:
        check_schema(database)
    except DatabaseError:
        database.dispose()
        raise

    # heavy measures run in one background process, started when needed (by one of several server processes)
    worker = Worker(database, shared=settings.server_processes > 1)

    @asynccontextmanager
    async def lifespan(_app: FastAPI) -> AsyncIterator[None]:
        with serving_lock(settings.database_url):  # `attesta restore` refuses while it is held
            worker.start()  # requeues jobs a killed server left running
            yield
            worker.stop()
            database.dispose()

    # The interactive API pages would load their scripts from a CDN; the site makes no
    # outside request of any kind, so only the OpenAPI document itself is served.
    app = FastAPI(title="Attesta", description=DESCRIPTION, docs_url=None, redoc_url=None, lifespan=lifespan)
    app.state.settings = settings
    app.state.database = database
    app.state.worker = worker
    # Signs session and CSRF cookies. Without a configured key a random one serves this process
    # only (a laptop instance; `attesta serve` on another address demands ATTESTA_SECRET_KEY).
    app.state.secret_key = settings.secret_key or secrets.token_urlsafe(32)
    app.add_middleware(AccessGate, allowed_hosts=settings.allowed_hosts)

    app.mount("/static", StaticFiles(directory=STATIC_DIR), name="static")
    app.include_router(home.router)
    app.include_router(editing_views.router)  # before persons: /persons/{key}/edit is not a person's page
    app.include_router(records_views.router)
    app.include_router(audit_views.router)
    app.include_router(accounts_views.router)
    app.include_router(persons_views.router)
    app.include_router(groups_views.router)
    app.include_router(sources_views.router)
    app.include_router(places_views.router)
    app.include_router(ties_views.router)
    app.include_router(ego_views.router)
    app.include_router(network_views.router)
    app.include_router(twomode_views.router)
    app.include_router(import_views.router)
    app.add_middleware(import_views.UploadLimit, limit=settings.upload_limit_bytes)
    if settings.server_processes > 1:  # outermost: a busy process hands the client's next request to another
        app.add_middleware(SpreadConnections)
    app.include_router(export_views.router)

    app.add_exception_handler(StarletteHTTPException, _http_error)
    app.add_exception_handler(RequestValidationError, _invalid_request)
    app.add_exception_handler(SliceError, _bad_slice)
    app.add_exception_handler(OverflowError, _number_too_large)
    return app


def app_from_env() -> FastAPI:
    """Return the app configured from ``ATTESTA_*`` environment variables (a uvicorn factory), ready to serve."""
    return prepare_routes(create_app(Settings.from_env()))


def _http_error(request: Request, exc: StarletteHTTPException) -> Response:
    phrase = HTTPStatus(exc.status_code).phrase
    detail = exc.detail
    if detail == phrase:  # raised by routing itself, with no word of what was asked
        if exc.status_code == 404:
            detail = f"There is nothing at {request.url.path}."
        elif exc.status_code == 405:
            detail = f"{request.url.path} does not answer {request.method} requests."
    error = "bad parameter" if exc.status_code == 400 else phrase.lower()
    return render_error(request, exc.status_code, error, str(detail), headers=exc.headers)


def _number_too_large(request: Request, exc: OverflowError) -> Response:
    """A number in the path or query string too large for the database to look up."""
    return render_error(request, 400, "bad parameter", f"a number in {request.url.path} is too large to look up")


def _bad_slice(request: Request, exc: SliceError) -> Response:
    """A slice key found unknown only when resolved against the data (a kind, a collection)."""
    return render_error(request, 400, "bad parameter", str(exc))


def _invalid_request(request: Request, exc: RequestValidationError) -> Response:
    problems = [_describe(problem) for problem in exc.errors()]
    return render_error(request, 400, "bad parameter", "; ".join(problems))


def _describe(problem: dict) -> str:
    """Say which parameter is wrong and what it accepts, from one validation problem."""
    location = [str(part) for part in problem.get("loc", ())]
    where, name = (location[0], ".".join(location[1:])) if len(location) > 1 else ("request", "".join(location))
    where = {"query": "query parameter", "path": "path part", "body": "form field"}.get(where, where)
    if problem.get("type") == "missing":
        return f"the {where} {name} is required"
    message = str(problem.get("msg", "not a value this route accepts"))
    return f"the {where} {name}={problem.get('input')!s} is not accepted: {message[:1].lower()}{message[1:]}"
