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

    @classmethod
    def from_env(cls, database: str | None = None) -> "Settings":
        """Return settings from ``ATTESTA_*`` environment variables, with ``database`` winning."""
        limit = os.environ.get("ATTESTA_UPLOAD_LIMIT_MB")
        return cls(
            database_url=database_url(database),
            upload_limit_bytes=int(float(limit) * 1024 * 1024) if limit else DEFAULT_UPLOAD_LIMIT,
            busy_timeout_ms=int(os.environ.get("ATTESTA_BUSY_TIMEOUT_MS", "10000")),
            dataset_name=os.environ.get("ATTESTA_DATASET_NAME", "Attesta dataset"),
        )
