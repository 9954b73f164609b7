"""A real PostgreSQL server for the tests, started from Debian's binaries on a loopback port.

The server lives in a temporary folder (data directory and unix socket), listens on 127.0.0.1
only, trusts local connections and is stopped at the end of the test session. PostgreSQL
refuses to run as root, so as root it runs as the ``postgres`` user (created by Debian's
package) through ``runuser``. Durability is switched off (``fsync=off``): the tests check
transactions and constraints, not what survives a power cut.

The migrations build one template database; a test's database is a copy of it (``CREATE
DATABASE ... TEMPLATE``, about a second here), and a database a test gave back is emptied and
handed out again: every table is cleared with foreign-key triggers off, the rows the
migrations seeded are put back and the id sequences set as they were, in milliseconds.
"""

from __future__ import annotations

import glob
import itertools
import os
import shutil
import subprocess
import tempfile
import time
from pathlib import Path

import psycopg

from tests.helpers import free_port

TEMPLATE = "attesta_template"
SUPERUSER = "attesta"


def postgres_bin_dir() -> Path | None:
    """Return the folder holding ``initdb`` and ``postgres`` (Debian: /usr/lib/postgresql/N/bin), or None."""
    found = sorted(glob.glob("/usr/lib/postgresql/*/bin/initdb"), key=lambda p: int(Path(p).parts[-3]))
    if found:
        return Path(found[-1]).parent
    initdb = shutil.which("initdb")
    return Path(initdb).parent if initdb and shutil.which("postgres") else None


class PostgresServer:
    """One running PostgreSQL server; :meth:`new_database` hands out fresh migrated databases."""

    def __init__(self, bin_dir: Path):
        self.bin_dir = bin_dir
        self.folder = Path(tempfile.mkdtemp(prefix="attesta-pg-"))
        self.data = self.folder / "data"
        self.socket_dir = self.folder / "socket"
        self.log = self.folder / "server.log"
        self.port = free_port()
        self.process: subprocess.Popen | None = None
        self._numbers = itertools.count(1)
        self._free: list[str] = []  # databases given back, to be emptied and handed out again
        self._revision: list[tuple] = []
        self._seed: dict[str, tuple[list[str], list[tuple]]] = {}  # table -> columns, rows after migrating
        self._as_user: list[str] = []
        if os.geteuid() == 0:
            self._as_user = ["runuser", "-u", "postgres", "--"]

    # --- life ---------------------------------------------------------------------------

    def start(self) -> "PostgresServer":
        self.socket_dir.mkdir(parents=True)
        if self._as_user:
            shutil.chown(self.folder, "postgres")
            shutil.chown(self.socket_dir, "postgres")
        self._run([
            str(self.bin_dir / "initdb"), "-D", str(self.data), "-U", SUPERUSER, "--auth=trust",
            "--encoding=UTF8", "--locale=C.UTF-8", "--no-sync",
        ])  # fmt: skip
        command = [
            *self._as_user, str(self.bin_dir / "postgres"), "-D", str(self.data),
            "-p", str(self.port), "-h", "127.0.0.1", "-k", str(self.socket_dir),
            "-c", "fsync=off", "-c", "synchronous_commit=off", "-c", "full_page_writes=off",
            "-c", "max_connections=100", "-c", "shared_buffers=64MB",
        ]  # fmt: skip
        with open(self.log, "ab") as log:
            self.process = subprocess.Popen(command, stdout=log, stderr=subprocess.STDOUT)
        self._wait_until_ready()
        return self

    def stop(self) -> None:
        if self.process is not None and self.process.poll() is None:
            self.process.terminate()  # SIGTERM: "smart" shutdown once clients are gone; then SIGINT
            try:
                self.process.wait(timeout=5)
            except subprocess.TimeoutExpired:
                self.process.send_signal(2)  # fast shutdown: roll back open sessions
                try:
                    self.process.wait(timeout=10)
                except subprocess.TimeoutExpired:
                    self.process.kill()
                    self.process.wait()
        shutil.rmtree(self.folder, ignore_errors=True)

    def _run(self, command: list[str]) -> None:
        result = subprocess.run([*self._as_user, *command], capture_output=True, text=True)
        if result.returncode != 0:
            raise RuntimeError(f"{' '.join(command)} failed:\n{result.stdout}\n{result.stderr}")

    def _wait_until_ready(self, timeout: float = 30.0) -> None:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.process is not None and self.process.poll() is not None:
                raise RuntimeError(f"postgres stopped with code {self.process.returncode}:\n{self.log.read_text(errors='replace')}")
            try:
                with psycopg.connect(self.dsn("postgres"), connect_timeout=1):
                    return
            except psycopg.OperationalError:
                time.sleep(0.1)
        raise RuntimeError(f"postgres did not answer within {timeout} s:\n{self.log.read_text(errors='replace')}")

    # --- databases ----------------------------------------------------------------------

    def dsn(self, name: str) -> str:
        return f"host=127.0.0.1 port={self.port} user={SUPERUSER} dbname={name}"

    def url(self, name: str) -> str:
        """SQLAlchemy URL of database ``name`` (driver psycopg 3)."""
        return f"postgresql+psycopg://{SUPERUSER}@127.0.0.1:{self.port}/{name}"

    def execute(self, sql: str) -> None:
        """Run one statement outside a transaction in the maintenance database."""
        with psycopg.connect(self.dsn("postgres"), autocommit=True) as connection:
            connection.execute(sql)

    def create_template(self, migrate) -> None:  # noqa: ANN001 - migrate(url) builds the schema
        """Build the template every test database is copied from, by running ``migrate`` on it."""
        self.execute(f'CREATE DATABASE "{TEMPLATE}"')
        migrate(self.url(TEMPLATE))
        with psycopg.connect(self.dsn(TEMPLATE)) as connection:
            self._revision = connection.execute("SELECT version_num FROM alembic_version").fetchall()
            for table in self._tables(connection):
                cursor = connection.execute(f'SELECT * FROM "{table}"')
                self._seed[table] = ([c.name for c in cursor.description], cursor.fetchall())

    def new_database(self, *, migrated: bool = True) -> str:
        """Return the URL of a fresh database: migrated and empty (the seeded rows only), or bare."""
        if migrated and self._free:
            name = self._free.pop()
            self._empty(name)
            return self.url(name)
        name = f"attesta_test_{next(self._numbers)}"
        template = TEMPLATE if migrated else "template0"
        self.execute(f'CREATE DATABASE "{name}" TEMPLATE "{template}" STRATEGY FILE_COPY')
        return self.url(name)

    def release(self, url: str) -> None:
        """Take back a database a test is done with: kept for reuse when it has the schema, else dropped."""
        name = url.rsplit("/", 1)[-1]
        self.execute(f"SELECT pg_terminate_backend(pid) FROM pg_stat_activity WHERE datname = '{name}' AND pid <> pg_backend_pid()")
        with psycopg.connect(self.dsn(name)) as connection:
            revision = connection.execute(
                "SELECT to_regclass('alembic_version') IS NOT NULL AND "
                "(SELECT count(*) FROM pg_tables WHERE schemaname = 'public') = %s", (len(self._seed) + 1,)
            ).fetchone()[0]
            same = revision and connection.execute("SELECT version_num FROM alembic_version").fetchall() == self._revision
        if same:
            self._free.append(name)
        else:
            self.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')

    def _empty(self, name: str) -> None:
        with psycopg.connect(self.dsn(name)) as connection:
            connection.execute("SET LOCAL session_replication_role = replica")  # no foreign-key triggers
            for table in self._tables(connection):
                connection.execute(f'DELETE FROM "{table}"')
            for table, (columns, rows) in self._seed.items():
                if rows:
                    names = ", ".join(f'"{c}"' for c in columns)
                    marks = ", ".join(["%s"] * len(columns))
                    connection.cursor().executemany(f'INSERT INTO "{table}" ({names}) VALUES ({marks})', rows)
            for table, column, sequence in connection.execute(
                "SELECT t.relname, a.attname, pg_get_serial_sequence(quote_ident(t.relname), a.attname) "
                "FROM pg_class t JOIN pg_attribute a ON a.attrelid = t.oid "
                "WHERE t.relkind = 'r' AND t.relnamespace = 'public'::regnamespace AND a.attnum > 0 "
                "AND pg_get_serial_sequence(quote_ident(t.relname), a.attname) IS NOT NULL"
            ).fetchall():
                connection.execute(
                    f'SELECT setval(%s, coalesce((SELECT max("{column}") FROM "{table}"), 0) + 1, false)', (sequence,)
                )

    @staticmethod
    def _tables(connection) -> list[str]:  # noqa: ANN001
        rows = connection.execute(
            "SELECT tablename FROM pg_tables WHERE schemaname = 'public' AND tablename <> 'alembic_version' ORDER BY tablename"
        ).fetchall()
        return [row[0] for row in rows]
