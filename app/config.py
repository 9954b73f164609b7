"""Settings of one Attesta instance, read from the environment or the command line.

One typed object, passed to ``create_app`` and to the CLI, so that every test can build an
app on its own database and no module reads the environment behind our back.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

DEFAULT_DATABASE = "attesta.db"
DEFAULT_UPLOAD_LIMIT = 200 * 1024 * 1024  # 200 MB, the one size limit of every import


def database_url(value: str | os.PathLike[str] | None = None) -> str:
    """Return an SQLAlchemy URL for a path or URL given on the command line or in the environment.

    A plain path becomes an SQLite file URL; a value with ``://`` is taken as a URL.
    With nothing given, ``ATTESTA_DATABASE_URL`` or ``./attesta.db`` is used.
    """
    if value is None:
        value = os.environ.get("ATTESTA_DATABASE_URL") or DEFAULT_DATABASE
    text = os.fspath(value)
    if "://" in text:
        return text
    return f"sqlite:///{Path(text).expanduser().resolve()}"


@dataclass(frozen=True)
class Settings:
    """Everything an instance is configured with."""

    database_url: str = field(default_factory=database_url)
    upload_limit_bytes: int = DEFAULT_UPLOAD_LIMIT
    busy_timeout_ms: int = 10_000
    dataset_name: str = "Attesta dataset"
    secret_key: str | None = None  # signs session cookies; a served team instance must set one
    session_hours: float = 12.0  # a sign-in lasts this long, then the session cookie is refused
    allowed_hosts: tuple[str, ...] = ()  # Host names answered besides 127.0.0.1, localhost and [::1]
    trusted_proxies: tuple[str, ...] = ()  # addresses whose X-Forwarded-* headers are believed
    anonymous_read: bool = False  # once accounts exist, may visitors who are not signed in read?
    login_attempts: int = 5  # failed sign-ins in a row before a user name is locked
    lockout_minutes: float = 15.0  # first lock; each further failure doubles it (at most a day)
    living_years: int = 110  # born less than this many years ago and no death date: treated as living (0: off)
    server_processes: int = 1  # server processes on this database (`attesta serve --workers N` sets it)

    @classmethod
    def from_env(cls, database: str | None = None) -> "Settings":
        """Return settings from ``ATTESTA_*`` environment variables, with ``database`` winning."""
        limit = os.environ.get("ATTESTA_UPLOAD_LIMIT_MB")
        return cls(
            database_url=database_url(database),
            upload_limit_bytes=int(float(limit) * 1024 * 1024) if limit else DEFAULT_UPLOAD_LIMIT,
            busy_timeout_ms=int(os.environ.get("ATTESTA_BUSY_TIMEOUT_MS", "10000")),
            dataset_name=os.environ.get("ATTESTA_DATASET_NAME", "Attesta dataset"),
            secret_key=os.environ.get("ATTESTA_SECRET_KEY") or None,
            session_hours=float(os.environ.get("ATTESTA_SESSION_HOURS", "12")),
            allowed_hosts=_names(os.environ.get("ATTESTA_ALLOWED_HOSTS")),
            trusted_proxies=_names(os.environ.get("ATTESTA_TRUSTED_PROXIES")),
            anonymous_read=_yes(os.environ.get("ATTESTA_ANONYMOUS_READ")),
            login_attempts=int(os.environ.get("ATTESTA_LOGIN_ATTEMPTS", "5")),
            lockout_minutes=float(os.environ.get("ATTESTA_LOCKOUT_MINUTES", "15")),
            living_years=int(os.environ.get("ATTESTA_LIVING_YEARS", "110")),
            server_processes=max(1, int(os.environ.get("ATTESTA_SERVER_PROCESSES", "1"))),
        )


def _names(text: str | None) -> tuple[str, ...]:
    """Split a comma- or space-separated list of host names or addresses."""
    return tuple(part.strip().lower() for part in (text or "").replace(",", " ").split() if part.strip())


def _yes(text: str | None) -> bool:
    return (text or "").strip().lower() in ("1", "yes", "true", "on")
