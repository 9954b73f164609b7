"""Backup and restore of an SQLite database file.

A backup is taken with SQLite's online backup API (``sqlite3.Connection.backup``) in one step:
it reads one snapshot of the database, so it is consistent while the server keeps writing
(in WAL mode a reader never blocks a writer). The copy is checked (``PRAGMA integrity_check``,
an Attesta schema revision) before it is moved into place, so a half-written copy never
carries the backup's name.

A restore checks the file first (an SQLite file, integrity ok, an Attesta database at a
revision this version knows) and refuses while a server has the database open: every server
process holds a shared lock on ``<database>.serving`` (``fcntl.flock``, released by the
operating system even when the process is killed), and the restore needs it exclusively. The
database as it was is first saved beside it (``<database>.before-restore-<time>``); the restore
itself is again the backup API, writing through SQLite's own locking.

PostgreSQL has its own tools for this (``pg_dump`` and ``pg_restore``); both commands say so.
"""

from __future__ import annotations

import fcntl
import os
import sqlite3
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path

from alembic.script import ScriptDirectory

from app.db import DatabaseBusy, DatabaseError, SchemaError, alembic_config, head_revision

__all__ = ["BackupInfo", "backup_database", "is_newest", "restore_database", "serving_lock", "sqlite_file", "verify_backup"]

SQLITE_HEADER = b"SQLite format 3\x00"
COUNTED = ("person", "relation", "attestation", "source", "audit_entry")


@dataclass(frozen=True)
class BackupInfo:
    """What a checked database file holds."""

    path: Path
    revision: str
    data_version: int
    counts: dict[str, int]

    def describe(self) -> str:
        counted = ", ".join(f"{n} {table}" for table, n in self.counts.items())
        return f"{self.path}: schema {self.revision}, data version {self.data_version}, {counted}; integrity ok"


def sqlite_file(url: str) -> Path:
    """Return the file of an SQLite database URL; other databases get a message naming their tools."""
    if url.startswith("postgresql"):
        raise DatabaseError(
            "backup and restore here work on SQLite files; for PostgreSQL use its own tools "
            "(pg_dump -Fc DATABASE > FILE, and pg_restore --clean -d DATABASE FILE)"
        )
    if not url.startswith("sqlite:///") or url.endswith(":memory:"):
        raise DatabaseError(f"not a database file: {url}")
    return Path(url.removeprefix("sqlite:///"))


def _serving_lock_path(database: Path) -> Path:
    return database.with_name(database.name + ".serving")


@contextmanager
def serving_lock(url: str) -> Iterator[None]:
    """Hold a shared lock on ``<database>.serving`` while a server serves an SQLite file.

    Several server processes may hold it at once; a restore needs it alone and so is refused
    while any of them runs. Nothing happens for other databases.
    """
    if not url.startswith("sqlite:///") or url.endswith(":memory:"):
        yield
        return
    path = _serving_lock_path(Path(url.removeprefix("sqlite:///")))
    with open(path, "a+") as handle:
        fcntl.flock(handle, fcntl.LOCK_SH)
        try:
            yield
        finally:
            fcntl.flock(handle, fcntl.LOCK_UN)


def verify_backup(path: Path) -> BackupInfo:
    """Check that ``path`` is a sound Attesta database file and say what it holds; raise DatabaseError otherwise."""
    if not path.is_file():
        raise DatabaseError(f"no such file: {path}")
    with open(path, "rb") as handle:
        if handle.read(16) != SQLITE_HEADER:
            raise DatabaseError(f"{path} is not an SQLite database file")
    try:
        connection = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    except sqlite3.Error as error:
        raise DatabaseError(f"cannot open {path}: {error}") from error
    try:
        return _describe(connection, path)
    except sqlite3.DatabaseError as error:
        raise DatabaseError(f"{path} is damaged: {error}") from error
    finally:
        connection.close()


def _describe(connection: sqlite3.Connection, path: Path) -> BackupInfo:
    problems = [row[0] for row in connection.execute("PRAGMA integrity_check(20)")]
    if problems != ["ok"]:
        raise DatabaseError(f"{path} fails the integrity check: " + "; ".join(problems[:5]))
    tables = {row[0] for row in connection.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
    if "alembic_version" not in tables or "data_version" not in tables:
        raise SchemaError(f"{path} is not an Attesta database (it has no schema revision)")
    revision = connection.execute("SELECT version_num FROM alembic_version").fetchone()
    known = {script.revision for script in ScriptDirectory.from_config(alembic_config("sqlite://")).walk_revisions()}
    if revision is None or revision[0] not in known:
        raise SchemaError(
            f"{path} has schema revision {revision[0] if revision else 'none'}, which this version of Attesta "
            "does not know (made by a newer Attesta?); refusing it"
        )
    data_version = connection.execute("SELECT version FROM data_version WHERE id = 1").fetchone()
    counts = {table: connection.execute(f'SELECT count(*) FROM "{table}"').fetchone()[0] for table in COUNTED if table in tables}
    return BackupInfo(path=path, revision=revision[0], data_version=data_version[0] if data_version else 0, counts=counts)


def backup_database(url: str, target: Path, *, busy_timeout_ms: int = 10_000) -> BackupInfo:
    """Write a checked, consistent copy of the SQLite database at ``url`` to ``target`` (a file, or a folder).

    In a folder the copy is named ``<database name>-<UTC time>.db``. An existing file is never
    overwritten.
    """
    source = sqlite_file(url)
    if not source.is_file():
        raise DatabaseError(f"no database at {source}")
    if target.is_dir():
        target = target / f"{source.stem}-{_stamp()}.db"
    if target.exists():
        raise DatabaseError(f"{target} exists already; give a new file name or a folder")
    if not target.parent.is_dir():
        raise DatabaseError(f"no such folder for the backup: {target.parent}")
    partial = target.with_name(f".{target.name}.partial")
    partial.unlink(missing_ok=True)
    _copy(source, partial, busy_timeout_ms=busy_timeout_ms)
    try:
        with sqlite3.connect(partial) as check:
            check.execute("PRAGMA journal_mode = DELETE")  # one self-contained file, no -wal beside it
        verify_backup(partial)
        os.replace(partial, target)
    finally:
        partial.unlink(missing_ok=True)
    return verify_backup(target)


def restore_database(url: str, backup: Path, *, busy_timeout_ms: int = 10_000) -> tuple[BackupInfo, Path | None]:
    """Replace the SQLite database at ``url`` with the checked file ``backup``; no server may have it open.

    Returns what was restored and where the database as it was has been saved (None if there was none).
    """
    target = sqlite_file(url)
    info = verify_backup(backup)
    if not target.parent.is_dir():
        raise DatabaseError(f"no such folder for the database file: {target.parent}")
    if target.resolve() == backup.resolve():
        raise DatabaseError("the backup is the database itself; nothing to restore")
    with open(_serving_lock_path(target), "a+") as lock:
        try:
            fcntl.flock(lock, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            raise DatabaseBusy(
                f"a server has {target} open; stop it (and its worker) first, then restore; nothing was changed"
            ) from None
        saved = None
        if target.exists():
            saved = target.with_name(f"{target.name}.before-restore-{_stamp()}")
            _copy(target, saved, busy_timeout_ms=busy_timeout_ms)
        _copy(backup, target, busy_timeout_ms=busy_timeout_ms)
        with sqlite3.connect(target, timeout=busy_timeout_ms / 1000) as connection:
            connection.execute("PRAGMA journal_mode = WAL")
    return info, saved


def _copy(source: Path, target: Path, *, busy_timeout_ms: int) -> None:
    """Copy one SQLite database into another with the online backup API, in one step (one snapshot)."""
    reader = sqlite3.connect(source, timeout=busy_timeout_ms / 1000)
    writer = sqlite3.connect(target, timeout=busy_timeout_ms / 1000)
    try:
        reader.backup(writer)
    except sqlite3.OperationalError as error:
        if "locked" in str(error) or "busy" in str(error):
            raise DatabaseBusy(f"{target} is locked by another process (an import?); nothing was changed, try again") from error
        raise DatabaseError(f"copying {source} to {target} failed: {error}") from error
    finally:
        writer.close()
        reader.close()


def _stamp() -> str:
    return datetime.now(timezone.utc).strftime("%Y%m%d-%H%M%S")


def is_newest(info: BackupInfo) -> bool:
    """Whether the file is at the newest schema this Attesta knows (else `attesta init` upgrades it)."""
    return info.revision == head_revision()
