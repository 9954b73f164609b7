"""Engine, sessions and migrations, on SQLite or PostgreSQL.

SQLite is opened with WAL, foreign keys on and a busy timeout. Python's sqlite3 module
would otherwise begin transactions on its own and late; we take control and begin every
write transaction with ``BEGIN IMMEDIATE`` so two writers queue at the start instead of
failing half-way with "database is locked".

PostgreSQL gets the same rules: every write transaction first takes one transaction-level
advisory lock (writers queue at the start, as with ``BEGIN IMMEDIATE``, waiting at most the
busy timeout), and runs at READ COMMITTED so it sees what the writer before it committed;
read sessions run at REPEATABLE READ, so the queries of one page see one state of the data,
as an SQLite read transaction does. ``fold()`` is a SQL function made by a migration there.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Engine, create_engine, event, inspect
from sqlalchemy.exc import OperationalError
from sqlalchemy.orm import Session, sessionmaker

from app.names import fold

MIGRATIONS_DIR = Path(__file__).resolve().parent.parent / "migrations"


class DatabaseError(Exception):
    """A database problem explained in words a user can act on."""


class DatabaseBusy(DatabaseError):
    """Another process holds the write lock longer than the busy timeout."""


class SchemaError(DatabaseError):
    """The database is missing its tables, or was made by a newer Attesta."""


# The key of the advisory lock every PostgreSQL write transaction holds ("attesta" in ASCII).
WRITE_LOCK_KEY = 0x617474657374


def make_engine(url: str, *, busy_timeout_ms: int = 10_000) -> Engine:
    """Return an engine for ``url``; SQLite files get WAL, foreign keys and IMMEDIATE writes."""
    if url.startswith("postgresql"):
        return _postgresql_engine(url, busy_timeout_ms=busy_timeout_ms)
    if not url.startswith("sqlite"):
        raise DatabaseError(f"not a database Attesta can use: {url.split('://', 1)[0]}:// (give an SQLite file path or a postgresql:// URL)")
    path = url.split("///", 1)[-1]
    if path and path != ":memory:" and not Path(path).parent.is_dir():
        raise DatabaseError(f"no such folder for the database file: {Path(path).parent}")
    engine = create_engine(url, connect_args={"timeout": busy_timeout_ms / 1000})

    @event.listens_for(engine, "connect")
    def _on_connect(dbapi_connection, _record):  # noqa: ANN001
        dbapi_connection.isolation_level = None  # we issue BEGIN ourselves
        # fold(text): case- and accent-free text in SQL, the same folding as Python's search
        dbapi_connection.create_function("fold", 1, _fold_or_none, deterministic=True)
        cursor = dbapi_connection.cursor()
        cursor.execute(f"PRAGMA busy_timeout = {int(busy_timeout_ms)}")
        cursor.execute("PRAGMA foreign_keys = ON")
        cursor.execute("PRAGMA journal_mode = WAL")
        cursor.execute("PRAGMA synchronous = NORMAL")
        cursor.close()

    @event.listens_for(engine, "begin")
    def _on_begin(connection):  # noqa: ANN001
        write = connection.get_execution_options().get("attesta_write", False)
        connection.exec_driver_sql("BEGIN IMMEDIATE" if write else "BEGIN")

    return engine


def _postgresql_engine(url: str, *, busy_timeout_ms: int) -> Engine:
    """Return a PostgreSQL engine whose write transactions queue on one advisory lock."""
    engine = create_engine(url, pool_pre_ping=True, isolation_level="READ COMMITTED")

    @event.listens_for(engine, "begin")
    def _on_begin(connection):  # noqa: ANN001
        if connection.get_execution_options().get("attesta_write", False):
            connection.exec_driver_sql(f"SET LOCAL lock_timeout = {int(busy_timeout_ms)}")
            connection.exec_driver_sql(f"SELECT pg_advisory_xact_lock({WRITE_LOCK_KEY})")

    return engine


class Database:
    """One database: an engine and the two kinds of session (read and write)."""

    def __init__(self, url: str, *, busy_timeout_ms: int = 10_000):
        self.url = url
        self.engine = make_engine(url, busy_timeout_ms=busy_timeout_ms)
        reading = self.engine
        if self.engine.dialect.name == "postgresql":  # one snapshot per read session, as on SQLite
            reading = self.engine.execution_options(isolation_level="REPEATABLE READ")
        self._reader = sessionmaker(reading, expire_on_commit=False)
        self._writer = sessionmaker(
            self.engine.execution_options(attesta_write=True), expire_on_commit=False
        )

    @contextmanager
    def read(self) -> Iterator[Session]:
        """Yield a session for reading; nothing it does is committed."""
        with self._reader() as session:  # closing ends the transaction and detaches what was loaded
            yield session

    @contextmanager
    def write(self) -> Iterator[Session]:
        """Yield a session whose work is committed at the end, or rolled back whole on error."""
        session = self._writer()
        try:
            yield session
            session.commit()
        except OperationalError as error:
            session.rollback()
            if any(word in str(error.orig) for word in ("locked", "busy", "lock timeout")):
                raise DatabaseBusy(
                    "the database is locked by another process (an import or a backup?); "
                    "nothing was changed, try again when it has finished"
                ) from error
            raise
        except BaseException:
            session.rollback()
            raise
        finally:
            session.close()

    def dispose(self) -> None:
        self.engine.dispose()


def _fold_or_none(text: str | None) -> str | None:
    return None if text is None else fold(str(text))


# --- migrations -------------------------------------------------------------------------


def alembic_config(url: str) -> Config:
    """Return an Alembic configuration for ``url`` that finds our migrations from anywhere."""
    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS_DIR))
    config.set_main_option("sqlalchemy.url", url.replace("%", "%%"))
    return config


def head_revision() -> str:
    """Return the newest schema revision this version of Attesta knows."""
    return ScriptDirectory.from_config(alembic_config("sqlite://")).get_current_head()


def current_revision(engine: Engine) -> str | None:
    """Return the schema revision stored in the database, or None for an empty database."""
    with engine.connect() as connection:
        return MigrationContext.configure(connection).get_current_revision()


def upgrade(database: Database) -> None:
    """Create or upgrade the schema to the newest revision (refuses a newer database)."""
    revision = current_revision(database.engine)
    known = {script.revision for script in ScriptDirectory.from_config(alembic_config(database.url)).walk_revisions()}
    if revision is not None and revision not in known:
        raise SchemaError(_too_new(revision))
    if revision is None and _has_foreign_tables(database.engine):
        raise SchemaError("this file holds tables that are not an Attesta database; refusing to touch it")
    config = alembic_config(database.url)
    sqlite = database.engine.dialect.name == "sqlite"
    with database.engine.connect() as connection:
        raw = connection.connection.driver_connection
        if sqlite:
            # A migration may rebuild a table that other rows point to; SQLite only lets foreign
            # keys be switched off outside a transaction, so they are checked once at the end instead.
            raw.execute("PRAGMA foreign_keys = OFF")
        try:
            with connection.execution_options(attesta_write=True).begin():
                config.attributes["connection"] = connection
                command.upgrade(config, "head")
                if sqlite:
                    broken = connection.exec_driver_sql("PRAGMA foreign_key_check").fetchall()
                    if broken:
                        raise SchemaError(f"the upgrade would break {len(broken)} reference(s), e.g. {broken[0]}; nothing was changed")
        finally:
            if sqlite:
                raw.execute("PRAGMA foreign_keys = ON")


def check_schema(database: Database) -> None:
    """Raise SchemaError unless the database is at the newest revision this Attesta knows."""
    try:
        revision = current_revision(database.engine)
    except OperationalError as error:
        raise DatabaseError(f"cannot open the database {database.url}: {error.orig}") from error
    head = head_revision()
    if revision == head:
        return
    if revision is None:
        raise SchemaError("the database has no Attesta tables yet: run `attesta init` (or `attesta demo`) first")
    known = {script.revision for script in ScriptDirectory.from_config(alembic_config(database.url)).walk_revisions()}
    if revision not in known:
        raise SchemaError(_too_new(revision))
    raise SchemaError(f"the database is at schema {revision}, older than {head}: run `attesta init` to upgrade it")


def _too_new(revision: str) -> str:
    return (
        f"the database has schema revision {revision}, which this version of Attesta does not know; "
        "it was made by a newer Attesta: upgrade Attesta instead of touching the database"
    )


def _has_foreign_tables(engine: Engine) -> bool:
    names = set(inspect(engine).get_table_names())
    return bool(names - {"alembic_version"})
