"""Signing in and out, and the admin page of users (``/login``, ``/logout``, ``/admin/users``).

Who may do what is decided in ``app.auth``; this module only shows the forms and passes what
they send to ``app.auth`` (passwords, sessions) and ``app.store.users`` (the accounts).
"""

from __future__ import annotations

import secrets
from dataclasses import dataclass

from fastapi import APIRouter, Form, HTTPException, Request
from fastapi.responses import HTMLResponse, RedirectResponse, Response

from app.auth import (
    AdminActor,
    CsrfChecked,
    CurrentActor,
    LoginRefused,
    end_session,
    hash_password,
    sign_in,
    start_session,
)
from app.documented import DOCUMENTED
from app.models import ROLES
from app.store.users import UserError, UserInfo, count_users, create_user, disable_user, list_users
from app.views.common import SessionDep, is_api_request, render, urls_for

__all__ = ["LoginPage", "UsersPage", "router", "safe_next"]

router = APIRouter(tags=["accounts"])
GENERATED_PASSWORD_BYTES = 15  # 20 characters of URL-safe base64


@dataclass(frozen=True)
class LoginPage:
    """The sign-in form, and who is signed in now."""

    __pydantic_config__ = DOCUMENTED

    signed_in_as: str | None
    """Name of the signed-in user ("local" for the local user of a laptop instance), or null."""
    role: str | None
    """Role of the signed-in user, or null."""
    accounts_exist: bool
    """False on an instance without accounts (create the first with `attesta user add`)."""
    next: str
    """Where the form leads after signing in (a path of this site)."""
    message: str | None
    """Why the last attempt was refused, or null."""
    csrf_token: str
    """The token the sign-in form must send back (field `csrf_token` or header `X-CSRF-Token`)."""


@dataclass(frozen=True)
class CreatedUser:
    """A user just added on the admin page, with the generated password shown this once."""

    name: str
    role: str
    generated_password: str | None


@dataclass(frozen=True)
class UsersPage:
    """Every user with role and state, and the forms to add and disable users."""

    __pydantic_config__ = DOCUMENTED

    users: list[UserInfo]
    """Every user by name (never a password hash)."""
    roles: list[str]
    """The roles: reader (browse and export), editor (change evidence), admin (users and the rest)."""
    created: CreatedUser | None
    """The user just added, with the generated password when one was generated (shown only here, once)."""
    message: str | None
    """What the last change did, or why it was refused."""


def safe_next(value: str | None) -> str:
    """Return ``value`` when it is a path of this site, else "/" (a sign-in never leads elsewhere)."""
    if value and value.startswith("/") and not value.startswith("//") and "\\" not in value:
        return value
    return "/"


def _login_view(request: Request, session, actor, *, next_path: str | None, message: str | None) -> LoginPage:  # noqa: ANN001
    from app.auth import csrf_token

    return LoginPage(
        signed_in_as=actor.name if actor.signed_in else None, role=actor.role if actor.signed_in else None,
        accounts_exist=count_users(session=session, enabled_only=False) > 0, next=safe_next(next_path),
        message=message, csrf_token=csrf_token(request),
    )


_LOGIN = ("The sign-in form: user name and password. After `ATTESTA_LOGIN_ATTEMPTS` failed sign-ins in a row a "
          "user name is locked for `ATTESTA_LOCKOUT_MINUTES`, doubled by each further failure; the session "
          "lasts `ATTESTA_SESSION_HOURS`.")


@router.get("/login", response_class=HTMLResponse, summary="Sign in (page)", description=_LOGIN + " JSON twin: `/api/login`.")
def login_page(request: Request, session: SessionDep, actor: CurrentActor, next: str | None = None) -> Response:  # noqa: A002
    return render(request, _login_view(request, session, actor, next_path=next, message=None), template="login.html")


@router.get("/api/login", response_model=LoginPage, summary="Who is signed in (JSON)",
            description=_LOGIN + " Gives the CSRF token a `POST /api/login` must send. The page: `/login`.")
def login_api(request: Request, session: SessionDep, actor: CurrentActor, next: str | None = None) -> Response:  # noqa: A002
    return render(request, _login_view(request, session, actor, next_path=next, message=None), template="login.html")


def _sign_in(request: Request, session, actor, name: str, password: str, next_path: str | None) -> Response:  # noqa: ANN001
    try:
        signed = sign_in(request, name, password)
    except LoginRefused as refusal:
        status = 429 if refusal.locked else 401
        view = _login_view(request, session, actor, next_path=next_path, message=str(refusal))
        return render(request, view, template="login.html", status_code=status)
    if is_api_request(request):
        response: Response = render(request, LoginPage(signed.name, signed.role, True, safe_next(next_path), None, ""),
                                    template="login.html")
    else:
        response = RedirectResponse(safe_next(next_path), status_code=303)
    start_session(request, response, signed)
    return response


@router.post("/login", response_class=RedirectResponse, status_code=303, summary="Sign in",
             description=_LOGIN + " Form fields `name`, `password`, `next`, `csrf_token`. Success: a redirect (303) "
             "to `next` with the session cookie; a refusal: the form again, 401 (429 while the name is locked).")
def login_post(request: Request, _: CsrfChecked, session: SessionDep, actor: CurrentActor, name: str = Form(""),
               password: str = Form(""), next: str | None = Form(None)) -> Response:  # noqa: A002
    return _sign_in(request, session, actor, name, password, next)


@router.post("/api/login", response_model=LoginPage, summary="Sign in (JSON)",
             description=_LOGIN + " Form fields `name`, `password`; header `X-CSRF-Token` from `GET /api/login`. "
             "Success: who is signed in, with the session cookie; a refusal: 401 (429 while the name is locked).")
def login_post_api(request: Request, _: CsrfChecked, session: SessionDep, actor: CurrentActor, name: str = Form(""),
                   password: str = Form("")) -> Response:
    return _sign_in(request, session, actor, name, password, None)


_LOGOUT = "Sign out: ends every session of the signed-in user and drops the session cookie. Needs the CSRF token."


@router.post("/logout", response_class=RedirectResponse, status_code=303, summary="Sign out",
             description=_LOGOUT + " Answers with a redirect (303) to the sign-in page.")
def logout(request: Request, _: CsrfChecked) -> Response:
    response = RedirectResponse(urls_for(request).login(), status_code=303)
    end_session(request, response)
    return response


@router.post("/api/logout", summary="Sign out (JSON)", description=_LOGOUT + ' Answers `{"signed_out": true}`.')
def logout_api(request: Request, _: CsrfChecked) -> Response:
    from fastapi.responses import JSONResponse

    response = JSONResponse({"signed_out": True})
    end_session(request, response)
    return response


# --- the admin page of users ---------------------------------------------------------------------


_USERS = ("Every user with role, state and lock; an admin adds users (a password given, or generated and shown "
          "once) and disables them (which ends their sessions; the last admin cannot be disabled). Admins only.")


def _users_view(session, *, created: CreatedUser | None = None, message: str | None = None) -> UsersPage:  # noqa: ANN001
    return UsersPage(users=list_users(session=session), roles=list(ROLES), created=created, message=message)


@router.get("/admin/users", response_class=HTMLResponse, summary="Users (page)", description=_USERS + " JSON twin: `/api/admin/users`.")
def users_page(request: Request, session: SessionDep, actor: AdminActor) -> Response:  # noqa: ARG001
    return render(request, _users_view(session), template="admin_users.html")


@router.get("/api/admin/users", response_model=UsersPage, summary="Users (JSON)", description=_USERS + " The page: `/admin/users`.")
def users_api(request: Request, session: SessionDep, actor: AdminActor) -> Response:  # noqa: ARG001
    return render(request, _users_view(session), template="admin_users.html")


def _add_user(request: Request, actor, name: str, role: str, password: str) -> Response:  # noqa: ANN001
    generated = None
    if not password:
        password = generated = secrets.token_urlsafe(GENERATED_PASSWORD_BYTES)
    database = request.app.state.database
    try:
        with database.write() as session:
            user = create_user(session=session, name=name, role=role, password_hash=hash_password(password),
                               actor=actor.name, actor_id=actor.user_id)
    except UserError as error:
        raise HTTPException(400, str(error)) from error
    with database.read() as session:
        view = _users_view(session, created=CreatedUser(user.name, user.role, generated),
                           message=f"{user.name} added as {user.role}")
    return render(request, view, template="admin_users.html", status_code=201 if is_api_request(request) else 200)


_ADD = (" Form fields `name`, `role` (reader, editor or admin), `password` (blank: one is generated and shown once), "
        "`csrf_token`. A bad name, an unknown role or a name already taken is a 400 and changes nothing.")


@router.post("/admin/users", response_class=HTMLResponse, summary="Add a user", description="Adds a user." + _ADD + " Admins only; answers with the page.")
def add_user_page(request: Request, _: CsrfChecked, actor: AdminActor, name: str = Form(""), role: str = Form("reader"),
                  password: str = Form("")) -> Response:
    return _add_user(request, actor, name, role, password)


@router.post("/api/admin/users", response_model=UsersPage, status_code=201, summary="Add a user (JSON)",
             description="Adds a user." + _ADD + " Admins only; answers 201 with the users.")
def add_user_api(request: Request, _: CsrfChecked, actor: AdminActor, name: str = Form(""), role: str = Form("reader"),
                 password: str = Form("")) -> Response:
    return _add_user(request, actor, name, role, password)


def _disable(request: Request, actor, name: str) -> Response:  # noqa: ANN001
    database = request.app.state.database
    try:
        with database.write() as session:
            user = disable_user(session=session, name=name, actor=actor.name, actor_id=actor.user_id)
    except UserError as error:
        status = 404 if "no user named" in str(error) else 400
        raise HTTPException(status, str(error)) from error
    if not is_api_request(request):
        return RedirectResponse(urls_for(request).admin_users(), status_code=303)
    with database.read() as session:
        return render(request, _users_view(session, message=f"{user.name} disabled"), template="admin_users.html")


_DISABLE = ("Disables a user: they can no longer sign in and their sessions end. An unknown name is a 404; the "
            "last admin who is not disabled cannot be (400). Needs the CSRF token; admins only.")


@router.post("/admin/users/{name}/disable", response_class=RedirectResponse, status_code=303, summary="Disable a user",
             description=_DISABLE + " Answers with a redirect (303) to `/admin/users`.")
def disable_user_page(request: Request, name: str, _: CsrfChecked, actor: AdminActor) -> Response:
    return _disable(request, actor, name)


@router.post("/api/admin/users/{name}/disable", response_model=UsersPage, summary="Disable a user (JSON)",
             description=_DISABLE + " Answers with the users.")
def disable_user_api(request: Request, name: str, _: CsrfChecked, actor: AdminActor) -> Response:
    return _disable(request, actor, name)
