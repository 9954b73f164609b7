"""Who is asking and what they may do: the actor of a request, roles, and CSRF tokens.

This module is the one place that decides access. Views never look at cookies or users
themselves; they declare what they need with the annotated dependencies below:

- ``CurrentActor``: the actor of the request (a signed-in user, or the single local user of a
  laptop instance that has no accounts yet);
- ``EditorActor`` / ``AdminActor``: the same, refused with 403 unless the role suffices;
- ``CsrfChecked``: put on every write route; refuses a request without a valid CSRF token
  (hidden form field ``csrf_token`` or header ``X-CSRF-Token``) with 403.

Templates get ``csrf_token`` and ``actor`` in their context from ``views.common.render``.
"""

from __future__ import annotations

import hmac
import secrets
from dataclasses import dataclass
from typing import Annotated

from fastapi import Depends, HTTPException, Request

from app.models import ROLES

__all__ = [
    "ROLES",
    "Actor",
    "AdminActor",
    "CsrfChecked",
    "CurrentActor",
    "EditorActor",
    "LOCAL_ACTOR",
    "check_csrf",
    "csrf_token",
    "current_actor",
    "require_role",
]

CSRF_FIELD = "csrf_token"
CSRF_HEADER = "X-CSRF-Token"


@dataclass(frozen=True)
class Actor:
    """Who makes a request: a user of the instance, or the one local user of a laptop instance."""

    name: str  # the user's name, or "local"
    role: str  # one of ROLES
    user_id: int | None = None  # None for the local user
    local: bool = False  # True: no accounts exist, the instance runs for one person on this machine

    def can(self, role: str) -> bool:
        """Return True when this actor's role is ``role`` or above it (reader < editor < admin)."""
        return ROLES.index(self.role) >= ROLES.index(role)


LOCAL_ACTOR = Actor(name="local", role="admin", user_id=None, local=True)


def current_actor(request: Request) -> Actor:
    """Return the actor of the request (for now always the local user: accounts come in auth's sessions)."""
    return LOCAL_ACTOR


def require_role(role: str):
    """Return a dependency that gives the actor, or answers 403 unless their role is ``role`` or above."""

    def dependency(actor: Annotated[Actor, Depends(current_actor)]) -> Actor:
        if not actor.can(role):
            raise HTTPException(403, f"this needs the {role} role; you are signed in as {actor.name} ({actor.role})")
        return actor

    return dependency


def csrf_token(request: Request) -> str:
    """Return the CSRF token that forms of this request's pages must send back."""
    secret = getattr(request.app.state, "csrf_secret", None)
    if secret is None:
        secret = request.app.state.csrf_secret = secrets.token_urlsafe(32)
    return secret


async def check_csrf(request: Request) -> None:
    """Refuse (403) a write whose CSRF token is missing or wrong; the form field or the header carries it."""
    sent = request.headers.get(CSRF_HEADER)
    if sent is None and request.headers.get("content-type", "").startswith(
        ("application/x-www-form-urlencoded", "multipart/form-data")
    ):
        form = await request.form()  # Starlette keeps the parsed form, so Form(...) parameters still work
        value = form.get(CSRF_FIELD)
        sent = value if isinstance(value, str) else None
    if not sent or not hmac.compare_digest(sent, csrf_token(request)):
        raise HTTPException(403, "this form has expired or did not come from this site (CSRF token missing or "
                                 "wrong): reload the page and try again")


CurrentActor = Annotated[Actor, Depends(current_actor)]
EditorActor = Annotated[Actor, Depends(require_role("editor"))]
AdminActor = Annotated[Actor, Depends(require_role("admin"))]
CsrfChecked = Annotated[None, Depends(check_csrf)]
