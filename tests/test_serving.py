"""A served process: routes built before it serves, connections spread over several server processes."""

from __future__ import annotations

import asyncio
from dataclasses import replace

import httpx
from starlette.applications import Starlette
from starlette.responses import PlainTextResponse
from starlette.routing import Route

from app.main import create_app
from app.serving import SpreadConnections, prepare_routes


def _included_routers(routes: list) -> list:
    found = []
    for route in routes:
        if hasattr(route, "effective_candidates"):
            found.append(route)
            found += _included_routers(route.original_router.routes)
    return found


def test_a_served_app_has_built_every_route_before_its_first_request(settings):
    app = create_app(settings)
    routers = _included_routers(app.router.routes)
    if not routers:  # a FastAPI that builds routes when they are included: nothing is left for the first request
        return
    assert all(router._effective_candidates_version is None for router in routers)  # built lazily otherwise
    prepare_routes(app)
    built = [router for router in _included_routers(app.router.routes)
             if router._effective_candidates_version == router.original_router._get_routes_version()]
    assert len(built) == len(routers)


def _overlapping_app() -> tuple[Starlette, asyncio.Event]:
    """A real ASGI app whose /wait answers only once /go has been asked."""
    go = asyncio.Event()

    async def wait(_request):  # noqa: ANN001
        await go.wait()
        return PlainTextResponse("waited")

    async def release(_request):  # noqa: ANN001
        go.set()
        return PlainTextResponse("released")

    return Starlette(routes=[Route("/wait", wait), Route("/go", release)]), go


def test_a_busy_process_closes_the_connection_after_its_answer():
    async def scenario() -> tuple[httpx.Response, httpx.Response, httpx.Response]:
        app, _ = _overlapping_app()
        transport = httpx.ASGITransport(app=SpreadConnections(app))
        async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as client:
            waiting = asyncio.create_task(client.get("/wait"))
            await asyncio.sleep(0.05)  # /wait is under way
            released = await client.get("/go")  # answered while /wait still is: the process is busy
            waited = await waiting  # answered alone
            alone = await client.get("/go")
        return released, waited, alone

    released, waited, alone = asyncio.run(scenario())
    assert released.text == "released" and released.headers.get("connection") == "close"
    assert waited.text == "waited" and "connection" not in waited.headers
    assert "connection" not in alone.headers


def test_only_several_server_processes_spread_connections(settings):
    def spreads(app) -> bool:  # noqa: ANN001
        return any(middleware.cls is SpreadConnections for middleware in app.user_middleware)

    assert not spreads(create_app(settings))
    assert spreads(create_app(replace(settings, server_processes=2)))
