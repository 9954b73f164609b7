"""How a served process answers: its routes built before it accepts connections, and connections
spread over the processes of ``attesta serve --workers N``.

Each server process answers its requests in threads that share one interpreter lock, so one
process uses at most one core. Two things keep several processes from sharing the work unless
they are set up for it:

- FastAPI builds the routes of an included router when the first request is matched against
  them (the response schemas of every view-model: pydantic reads each dataclass's source for
  its field docs), some 2 s of CPU on the event loop, during which every connection of that
  process waits. :func:`prepare_routes` builds them when the process starts.
- A kept-alive connection stays with the process that accepted it, and a process accepts every
  connection waiting when it wakes: a handful of browsers can all end up on one process while
  the other is idle. :class:`SpreadConnections` closes a connection after an answer while the
  process is busy with other requests, so the client's next request is accepted by whichever
  process gets to it first, which is the idle one.
"""

from __future__ import annotations

from fastapi import FastAPI
from starlette.types import ASGIApp, Message, Receive, Scope, Send

__all__ = ["SpreadConnections", "prepare_routes"]


def prepare_routes(app: FastAPI) -> FastAPI:
    """Build every route's request and response handling now, before the process serves (returns ``app``).

    Apps made by ``create_app`` alone (the tests) keep FastAPI's lazy build; the served ones
    (``app_from_env``, ``attesta serve``) call this.
    """

    def build(routes: list) -> None:
        for route in routes:
            if hasattr(route, "effective_candidates"):  # an included router, built lazily by FastAPI 0.16x
                build(route.effective_candidates())
                route.effective_low_priority_routes()

    build(app.router.routes)
    return app


class SpreadConnections:
    """ASGI middleware: while this process answers other requests too, an answer closes its connection.

    Used only with several server processes. An idle process keeps connections alive as usual.
    """

    def __init__(self, app: ASGIApp):
        self.app = app
        self.answering = 0  # HTTP requests of this process under way (one event loop: no lock needed)

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        self.answering += 1

        async def send_closing_when_busy(message: Message) -> None:
            if message["type"] == "http.response.start" and self.answering > 1:
                headers = [(k, v) for k, v in message.get("headers", []) if k.lower() != b"connection"]
                message["headers"] = [*headers, (b"connection", b"close")]
            await send(message)

        try:
            await self.app(scope, receive, send_closing_when_busy)
        finally:
            self.answering -= 1
