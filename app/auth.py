"""Who is asking and what they may do: the actor of a request, roles, sessions and CSRF tokens.

This module is the one place that decides access. Views never look at cookies or users
themselves; they declare what they need with the annotated dependencies below:

- ``CurrentActor``: the actor of the request (a signed-in user, the single local user of a
  laptop instance that has no accounts yet, or an anonymous visitor);
- ``EditorActor`` / ``AdminActor``: the same, refused with 401 (not signed in) or 403 (role too
  low) unless the role suffices;
- ``CsrfChecked``: put on every write route; refuses a request without a valid CSRF token
  (hidden form field ``csrf_token`` or header ``X-CSRF-Token``) with 403.

Templates get ``csrf_token`` and ``actor`` in their context from ``views.common.render``.

Sessions are cookies signed with the instance's secret key (itsdangerous), holding the user's id,
the user's session epoch (raised when the user is disabled or signs out, which ends every
session of theirs) and the session's CSRF token; they expire after ``Settings.session_hours``.
Without a session, the CSRF token lives in a cookie of its own, signed the same way (the local
user of a laptop instance, and the sign-in form). :class:`AccessGate` refuses requests whose
Host header is not on the allow-list (DNS rebinding) and, once accounts exist, sends visitors
who are not signed in to the sign-in page unless anonymous reading is allowed.
"""

from __future__ import annotations

import hmac
import ipaddress
from contextvars import ContextVar
import secrets
from dataclasses import dataclass
from datetime import datetime, timedelta, timezone
from typing import Annotated, Any
from urllib.parse import quote

from argon2 import PasswordHasher
from argon2.exceptions import InvalidHashError, VerificationError
from fastapi import Depends, HTTPException, Request
from itsdangerous import BadSignature, URLSafeTimedSerializer
from starlette.responses import JSONResponse, PlainTextResponse, RedirectResponse, Response
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from app.models import ROLES
from app.store.users import count_users, get_user_secret, record_failed_login, record_login

__all__ = [
    "ANONYMOUS_ACTOR",
    "ROLES",
    "AccessGate",
    "Actor",
    "AdminActor",
    "CsrfChecked",
    "CurrentActor",
    "EditorActor",
    "LOCAL_ACTOR",
    "LoginRefused",
    "ReaderActor",
    "LOOPBACK_HOSTS",
    "check_csrf",
    "csrf_token",
    "current_actor",
    "end_session",
    "hash_password",
    "request_visibility",
    "require_role",
    "sign_in",
    "start_session",
    "visibility_of",
]

CSRF_FIELD = "csrf_token"
CSRF_HEADER = "X-CSRF-Token"
SESSION_COOKIE = "attesta_session"
CSRF_COOKIE = "attesta_csrf"
LOOPBACK_HOSTS = ("127.0.0.1", "localhost", "[::1]")
# Paths a visitor who is not signed in may open on an instance with accounts (and no anonymous reading).
OPEN_PATHS = ("/login", "/api/login", "/static/", "/openapi.json")

_hasher = PasswordHasher()  # argon2id with the library's recommended parameters (RFC 9106)
_DUMMY_HASH = _hasher.hash("an unused password, to spend the same time on unknown names")


@dataclass(frozen=True)
class Actor:
    """Who makes a request: a user of the instance, or the one local user of a laptop instance."""

    name: str  # the user's name, or "local", or "anonymous"
    role: str  # one of ROLES
    user_id: int | None = None  # None for the local user and anonymous visitors
    local: bool = False  # True: no accounts exist, the instance runs for one person on this machine

    def can(self, role: str) -> bool:
        """Return True when this actor's role is ``role`` or above it (reader < editor < admin)."""
        return ROLES.index(self.role) >= ROLES.index(role)

    @property
    def signed_in(self) -> bool:
        """True for a signed-in user and for the local user (who needs no sign-in)."""
        return self.user_id is not None or self.local


LOCAL_ACTOR = Actor(name="local", role="admin", user_id=None, local=True)
ANONYMOUS_ACTOR = Actor(name="anonymous", role="reader", user_id=None, local=False)


# --- passwords -------------------------------------------------------------------------------


def hash_password(password: str) -> str:
    """Return the argon2id hash of a password (argon2-cffi, RFC 9106 parameters)."""
    return _hasher.hash(password)


def _password_matches(password_hash: str | None, password: str) -> bool:
    try:
        return _hasher.verify(password_hash or _DUMMY_HASH, password) and password_hash is not None
    except (VerificationError, InvalidHashError):
        return False


class LoginRefused(Exception):
    """A sign-in that did not succeed; ``str()`` is the message for the sign-in page."""

    def __init__(self, message: str, *, locked: bool = False):
        super().__init__(message)
        self.locked = locked


def sign_in(request: Request, name: str, password: str) -> Actor:
    """Check a name and password against the database; return the actor or raise LoginRefused.

    After ``login_attempts`` failures in a row the name is locked for ``lockout_minutes``,
    doubled by each further failure; the count and lock are stored in the user's row.
    """
    settings = request.app.state.settings
    database = request.app.state.database
    wrong = LoginRefused("the user name or the password is wrong")
    with database.write() as session:
        user = get_user_secret(session=session, name=name)
        if user is None:
            _password_matches(None, password)  # the same work as for a real name
            raise wrong
        now = _now()
        if user.locked_until is not None and user.locked_until > now:
            raise LoginRefused(f"too many failed sign-ins for {user.name}: try again after "
                               f"{user.locked_until:%Y-%m-%d %H:%M} UTC", locked=True)
        if user.disabled or not _password_matches(user.password_hash, password):
            if user.disabled:
                raise wrong
            record_failed_login(session=session, user_id=user.id, attempts=settings.login_attempts,
                                lockout=timedelta(minutes=settings.lockout_minutes))
            # The count must survive the refusal: commit it before raising.
            session.commit()
            raise wrong
        record_login(session=session, user_id=user.id)
        if _hasher.check_needs_rehash(user.password_hash):
            from app.models import User  # the only place a hash is renewed

            session.get(User, user.id).password_hash = _hasher.hash(password)
        return Actor(name=user.name, role=user.role, user_id=user.id)


def _now() -> datetime:
    return datetime.now(timezone.utc).replace(tzinfo=None)


# --- sessions --------------------------------------------------------------------------------


def _serializer(request: Request | Any, salt: str) -> URLSafeTimedSerializer:
    return URLSafeTimedSerializer(request.app.state.secret_key, salt=salt)


def _is_https(request: Request) -> bool:
    return request.url.scheme == "https"


def _cookie_path(request: Request) -> str:
    return (request.scope.get("root_path", "") or "") + "/"


def start_session(request: Request, response: Response, actor: Actor) -> None:
    """Set the signed session cookie of a user who has just signed in."""
    with request.app.state.database.read() as session:
        user = get_user_secret(session=session, user_id=actor.user_id)
    token = secrets.token_urlsafe(32)
    value = _serializer(request, "session").dumps({"u": user.id, "e": user.session_epoch, "t": token})
    hours = request.app.state.settings.session_hours
    response.set_cookie(SESSION_COOKIE, value, max_age=int(hours * 3600), path=_cookie_path(request),
                        httponly=True, samesite="lax", secure=_is_https(request))


def end_session(request: Request, response: Response) -> None:
    """Sign out: raise the user's session epoch (ending their sessions everywhere) and drop the cookie."""
    actor = current_actor(request)
    if actor.user_id is not None:
        from app.models import User

        with request.app.state.database.write() as session:
            user = session.get(User, actor.user_id)
            if user is not None:
                user.session_epoch += 1
    response.delete_cookie(SESSION_COOKIE, path=_cookie_path(request), httponly=True, samesite="lax",
                           secure=_is_https(request))


def _session_of(request: Request) -> tuple[Actor, str] | None:
    """Return the actor and CSRF token of a valid session cookie, or None."""
    cookie = request.cookies.get(SESSION_COOKIE)
    if not cookie:
        return None
    hours = request.app.state.settings.session_hours
    try:
        payload = _serializer(request, "session").loads(cookie, max_age=int(hours * 3600))
        user_id, epoch, token = int(payload["u"]), int(payload["e"]), str(payload["t"])
    except (BadSignature, KeyError, TypeError, ValueError):
        return None
    with request.app.state.database.read() as session:
        user = get_user_secret(session=session, user_id=user_id)
    if user is None or user.disabled or user.session_epoch != epoch:
        return None
    return Actor(name=user.name, role=user.role, user_id=user.id), token


def _has_accounts(request: Request) -> bool:
    """True once any user exists (even a disabled one): the laptop's local user is then gone."""
    state = request.app.state
    if getattr(state, "has_accounts", False):
        return True  # accounts are never all deleted, so a True is kept
    with state.database.read() as session:
        found = count_users(session=session, enabled_only=False) > 0
    if found:
        state.has_accounts = True
    return found


def _is_loopback(address: str | None) -> bool:
    try:
        return address is not None and ipaddress.ip_address(address).is_loopback
    except ValueError:
        return False


def _identify(request: Request) -> tuple[Actor, str | None]:
    cached = request.scope.get("attesta.actor")
    if cached is not None:
        return cached
    found = _session_of(request)
    if found is not None:
        result: tuple[Actor, str | None] = found
    elif not _has_accounts(request) and _is_loopback(request.client.host if request.client else None):
        result = (LOCAL_ACTOR, None)
    else:
        result = (ANONYMOUS_ACTOR, None)
    request.scope["attesta.actor"] = result
    return result


def current_actor(request: Request) -> Actor:
    """Return the actor of the request: the session's user, the local user, or an anonymous visitor."""
    return _identify(request)[0]


def visibility_of(actor: Actor) -> str:
    """Return the visibility key of what ``actor`` may see: "all" for editors and admins, else "public".

    Stored results and kept drawings are keyed by it, so a reader never gets an editor's copy.
    """
    return "all" if actor.can("editor") else "public"


_visibility: ContextVar[str] = ContextVar("attesta_visibility", default="all")


def request_visibility() -> str:
    """Return the visibility of the request being answered ("all" outside a request: the CLI, the worker).

    :class:`AccessGate` sets it from the request's actor before any route runs, so stored results
    and kept drawings are looked up and stored under the viewer's visibility.
    """
    return _visibility.get()


def require_role(role: str):
    """Return a dependency that gives the actor, or answers 401/403 unless their role is ``role`` or above."""

    def dependency(actor: Annotated[Actor, Depends(current_actor)]) -> Actor:
        if not actor.signed_in:
            raise HTTPException(401, f"this needs the {role} role: sign in first")
        if not actor.can(role):
            raise HTTPException(403, f"this needs the {role} role; you are signed in as {actor.name} ({actor.role})")
        return actor

    return dependency


# --- CSRF ------------------------------------------------------------------------------------


def csrf_token(request: Request) -> str:
    """Return the CSRF token that forms of this request's pages must send back.

    With a session it is the session's token; otherwise the token of this browser's CSRF cookie,
    made (and set on the response by :class:`AccessGate`) when the browser has none yet.
    """
    _, token = _identify(request)
    if token is not None:
        return token
    own = _cookie_token(request)
    if own is None:
        own = request.scope.get("attesta.new_csrf")
        if own is None:
            own = request.scope["attesta.new_csrf"] = secrets.token_urlsafe(32)
    return own


def _cookie_token(request: Request) -> str | None:
    cookie = request.cookies.get(CSRF_COOKIE)
    if not cookie:
        return None
    try:
        return str(_serializer(request, "csrf").loads(cookie))
    except BadSignature:
        return None


async def check_csrf(request: Request) -> None:
    """Refuse (403) a write whose CSRF token is missing or wrong; the form field or the header carries it."""
    sent = request.headers.get(CSRF_HEADER)
    if sent is None and request.headers.get("content-type", "").startswith(
        ("application/x-www-form-urlencoded", "multipart/form-data")
    ):
        form = await request.form()  # Starlette keeps the parsed form, so Form(...) parameters still work
        value = form.get(CSRF_FIELD)
        sent = value if isinstance(value, str) else None
    _, session_token = _identify(request)
    expected = session_token if session_token is not None else _cookie_token(request)
    if not sent or expected is None or not hmac.compare_digest(sent, expected):
        raise HTTPException(403, "this form has expired or did not come from this site (CSRF token missing or "
                                 "wrong): reload the page and try again")


CurrentActor = Annotated[Actor, Depends(current_actor)]
ReaderActor = Annotated[Actor, Depends(require_role("reader"))]  # signed in (or the local user)
EditorActor = Annotated[Actor, Depends(require_role("editor"))]
AdminActor = Annotated[Actor, Depends(require_role("admin"))]
CsrfChecked = Annotated[None, Depends(check_csrf)]


# --- the gate in front of every request -----------------------------------------------------------


def _host_name(host_header: str) -> str:
    """Return the host of a Host header without its port, lower case ("[::1]" keeps its brackets)."""
    host = host_header.strip().lower()
    if host.startswith("["):
        return host[: host.find("]") + 1] if "]" in host else host
    return host.rsplit(":", 1)[0] if host.count(":") == 1 else host


class AccessGate:
    """ASGI middleware: the Host allow-list, the sign-in requirement, and the CSRF cookie.

    - A request whose Host is not 127.0.0.1, localhost, [::1] or one of ``allowed_hosts`` is
      answered 421 (400 without a Host header): a page elsewhere cannot reach this instance by
      pointing a name of its own at 127.0.0.1 (DNS rebinding).
    - Once accounts exist, a visitor who is not signed in is sent to ``/login`` (401 under
      ``/api/``) unless ``anonymous_read`` is on.
    - A CSRF token made for a browser without one is set as a signed cookie on the answer.
    """

    def __init__(self, app: ASGIApp, *, allowed_hosts: tuple[str, ...] = ()):
        self.app = app
        self.allowed = {*LOOPBACK_HOSTS, *(_host_name(name) for name in allowed_hosts)}

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        request = Request(scope)
        host = request.headers.get("host")
        if not host:
            await PlainTextResponse("bad request: the request has no Host header", status_code=400)(scope, receive, send)
            return
        if _host_name(host) not in self.allowed:
            message = (f"misdirected request: this Attesta instance does not answer to the host name {_host_name(host)!r}. "
                       "It answers to 127.0.0.1, localhost and [::1], and to the names listed in ATTESTA_ALLOWED_HOSTS.")
            await PlainTextResponse(message, status_code=421)(scope, receive, send)
            return
        refusal = self._refusal(request)
        if refusal is not None:
            await refusal(scope, receive, send)
            return
        visibility = _visibility.set(visibility_of(current_actor(request)))

        async def send_with_cookie(message: Message) -> None:
            if message["type"] == "http.response.start" and scope.get("attesta.new_csrf"):
                cookie = Response()
                cookie.set_cookie(CSRF_COOKIE, _serializer(request, "csrf").dumps(scope["attesta.new_csrf"]),
                                  path=_cookie_path(request), httponly=True, samesite="strict",
                                  secure=_is_https(request))
                message["headers"] = [*message.get("headers", []),
                                      *((k, v) for k, v in cookie.raw_headers if k == b"set-cookie")]
            await send(message)

        try:
            await self.app(scope, receive, send_with_cookie)
        finally:
            _visibility.reset(visibility)

    def _refusal(self, request: Request) -> Response | None:
        settings = request.app.state.settings
        path = request.url.path
        root = request.scope.get("root_path", "")
        if root and path.startswith(root):
            path = path[len(root):]
        if settings.anonymous_read or any(path == p or (p.endswith("/") and path.startswith(p)) for p in OPEN_PATHS):
            return None
        actor = current_actor(request)
        if actor.signed_in:
            return None
        if path == "/api" or path.startswith("/api/"):
            return JSONResponse({"error": "unauthorized", "detail": "sign in first: POST /api/login with name and password"},
                                status_code=401)
        target = path + (f"?{request.url.query}" if request.url.query else "")
        return RedirectResponse(f"{root}/login?next={quote(target, safe='/')}", status_code=303)
