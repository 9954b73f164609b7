"""Accounts: users, their roles, failed sign-ins and locks, kept in the database.

The failed-login count and the lock live in the ``user`` row, so every server process of an
instance sees the same ones. Password hashes are made and checked by ``app.auth``; this module
only stores them. Every change records an audit entry in its own write transaction.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta, timezone

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from app.models import ROLES, User
from app.store.audit import record_change

__all__ = [
    "UserError",
    "UserInfo",
    "UserSecret",
    "count_users",
    "create_user",
    "disable_user",
    "get_user",
    "get_user_secret",
    "list_users",
    "record_failed_login",
    "record_login",
]

MAX_LOCK = timedelta(days=1)
NAME_CHARACTERS = "abcdefghijklmnopqrstuvwxyz0123456789._-@"


class UserError(ValueError):
    """A user that cannot be created or changed as asked; the message says why."""


@dataclass(frozen=True)
class UserInfo:
    """A user as lists and pages show them (never the password hash)."""

    id: int
    name: str
    role: str
    disabled: bool
    created_at: datetime
    locked_until: datetime | None
    """Until when sign-ins under this name are refused after repeated failures (UTC), or None."""
    failed_logins: int


@dataclass(frozen=True)
class UserSecret:
    """What signing in and session checks need: the hash, the lock and the session epoch."""

    id: int
    name: str
    role: str
    disabled: bool
    password_hash: str | None
    locked_until: datetime | None
    failed_logins: int
    session_epoch: int


def _now() -> datetime:
    return datetime.now(timezone.utc).replace(tzinfo=None)


def _info(user: User) -> UserInfo:
    return UserInfo(user.id, user.name, user.role, user.disabled, user.created_at, user.locked_until,
                    user.failed_logins)


def _secret(user: User) -> UserSecret:
    return UserSecret(user.id, user.name, user.role, user.disabled, user.password_hash, user.locked_until,
                      user.failed_logins, user.session_epoch)


def check_user_name(name: str) -> str:
    """Return the name as stored (lower case); raise UserError for an empty or odd one."""
    folded = name.strip().lower()
    if not folded or len(folded) > 100 or any(ch not in NAME_CHARACTERS for ch in folded):
        raise UserError(f"user name {name!r} is not accepted: use 1 to 100 letters a-z, digits and ._-@")
    return folded


def count_users(*, session: Session, role: str | None = None, enabled_only: bool = True) -> int:
    """Return how many users exist (with ``role``; enabled ones only unless told otherwise)."""
    query = select(func.count()).select_from(User)
    if role is not None:
        query = query.where(User.role == role)
    if enabled_only:
        query = query.where(User.disabled.is_(False))
    return session.scalar(query) or 0


def list_users(*, session: Session) -> list[UserInfo]:
    """Return every user, by name."""
    return [_info(user) for user in session.scalars(select(User).order_by(User.name))]


def get_user(*, session: Session, name: str) -> UserInfo | None:
    """Return the user of that name, or None."""
    user = session.scalar(select(User).where(User.name == name.strip().lower()))
    return None if user is None else _info(user)


def get_user_secret(*, session: Session, name: str | None = None, user_id: int | None = None) -> UserSecret | None:
    """Return what a sign-in or a session check needs about a user, found by name or id."""
    if user_id is not None:
        user = session.get(User, user_id)
    else:
        user = session.scalar(select(User).where(User.name == (name or "").strip().lower()))
    return None if user is None else _secret(user)


def create_user(*, session: Session, name: str, role: str, password_hash: str, actor: str,
                actor_id: int | None = None) -> UserInfo:
    """Add a user; raise UserError for a bad name, an unknown role or a name already taken."""
    stored = check_user_name(name)
    if role not in ROLES:
        raise UserError(f"role {role!r} is not accepted; accepted: {', '.join(ROLES)}")
    if session.scalar(select(User.id).where(User.name == stored)) is not None:
        raise UserError(f"a user named {stored!r} exists already")
    user = User(name=stored, role=role, password_hash=password_hash, disabled=False, created_at=_now(),
                failed_logins=0, session_epoch=0)
    session.add(user)
    session.flush()
    record_change(session=session, actor=actor, user_id=actor_id, action="create", table="user", key=stored,
                  after={"name": stored, "role": role}, summary=f"user {stored} added as {role}")
    return _info(user)


def disable_user(*, session: Session, name: str, actor: str, actor_id: int | None = None) -> UserInfo:
    """Disable a user and end their sessions; raise UserError for an unknown name or the last admin."""
    user = session.scalar(select(User).where(User.name == name.strip().lower()))
    if user is None:
        raise UserError(f"there is no user named {name!r}")
    if user.disabled:
        return _info(user)
    if user.role == "admin" and count_users(session=session, role="admin") <= 1:
        raise UserError(f"{user.name} is the last admin who is not disabled; add another admin first")
    user.disabled = True
    user.session_epoch += 1
    record_change(session=session, actor=actor, user_id=actor_id, action="update", table="user", key=user.name,
                  before={"disabled": False}, after={"disabled": True}, summary=f"user {user.name} disabled")
    return _info(user)


def record_failed_login(*, session: Session, user_id: int, attempts: int, lockout: timedelta) -> datetime | None:
    """Count a failed sign-in; from the ``attempts``-th in a row on, lock the name (doubling each time).

    Returns the end of the lock, or None while the name is not locked.
    """
    user = session.get(User, user_id)
    user.failed_logins += 1
    beyond = user.failed_logins - attempts
    if beyond >= 0:
        user.locked_until = _now() + min(lockout * (2 ** min(beyond, 20)), MAX_LOCK)
    return user.locked_until


def record_login(*, session: Session, user_id: int) -> None:
    """A successful sign-in clears the failure count and the lock."""
    user = session.get(User, user_id)
    user.failed_logins = 0
    user.locked_until = None
