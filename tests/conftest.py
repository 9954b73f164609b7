"""Shared fixtures: every test gets a fresh database migrated by Alembic, never a mock.

By default that is an SQLite file. A module marked ``pytestmark = pytest.mark.both_databases``
runs each test that uses ``database`` (or ``db_url``, ``settings``, ``database_urls``,
``module_database_urls``) twice: on SQLite and on a real PostgreSQL server started once per
session (tests/postgres.py). ``@pytest.mark.sqlite_only`` keeps one test of such a module on
SQLite (PRAGMAs, file locks). Without PostgreSQL's binaries the PostgreSQL runs are skipped
loudly, except under ``CI``, where they fail.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path
from typing import TYPE_CHECKING

import pytest
from fastapi.testclient import TestClient

from app.config import Settings, database_url
from app.db import Database, upgrade
from tests.postgres import PostgresServer, postgres_bin_dir

if TYPE_CHECKING:
    from playwright.sync_api import Browser, Page

ROOT = Path(__file__).resolve().parent.parent

# The app answers only loopback Host names (and names configured in ATTESTA_ALLOWED_HOSTS) and
# treats only a loopback client as the local user of a laptop instance; by default the test
# client talks to it as a browser on the same machine does, at http://127.0.0.1 from 127.0.0.1.
_test_client_init = TestClient.__init__


def _laptop_test_client(self, app, *args, **kwargs):  # noqa: ANN001, ANN002, ANN003
    if not args:
        kwargs.setdefault("base_url", "http://127.0.0.1")
    kwargs.setdefault("client", ("127.0.0.1", 50000))
    _test_client_init(self, app, *args, **kwargs)


TestClient.__init__ = _laptop_test_client
DEMO_WORKBOOK = ROOT / "sample_data" / "demo"
ARTIFACTS = ROOT / "test-artifacts"


DATABASE_KINDS = ("sqlite", "postgresql")


def pytest_generate_tests(metafunc):  # noqa: ANN001
    """Run the tests of a ``both_databases`` module on SQLite and on PostgreSQL."""
    definition = metafunc.definition
    if "db_kind" not in metafunc.fixturenames or definition.get_closest_marker("sqlite_only"):
        return
    if definition.get_closest_marker("both_databases"):
        metafunc.parametrize("db_kind", DATABASE_KINDS, indirect=True, scope="module")


@pytest.fixture(scope="module")
def db_kind(request) -> str:  # noqa: ANN001
    """Which database the test runs on: "sqlite", or "postgresql" in a ``both_databases`` module."""
    return getattr(request, "param", "sqlite")


@pytest.fixture(scope="session")
def postgres():
    """One real PostgreSQL server on a loopback port for the whole session (tests/postgres.py)."""
    bin_dir = postgres_bin_dir()
    if bin_dir is None:
        message = "PostgreSQL is not installed (apt-get install postgresql, or run ./run.sh test)"
        if os.environ.get("CI"):
            pytest.fail(f"{message}: CI must test PostgreSQL")
        pytest.skip(f"{message}: NOT tested on PostgreSQL")
    server = PostgresServer(bin_dir).start()
    try:
        server.create_template(_migrate)
        yield server
    finally:
        server.stop()


def _migrate(url: str) -> None:
    db = Database(url)
    try:
        upgrade(db)
    finally:
        db.dispose()


@pytest.fixture(scope="session")
def migrated_sqlite(tmp_path_factory) -> Path:  # noqa: ANN001
    """One SQLite file migrated by Alembic for the session; a test's fresh SQLite database is a copy of it.

    Copying the file is a millisecond, migrating it again a tenth of a second; the copy is the
    same bytes (tests/test_migrations.py runs the migrations themselves).
    """
    path = tmp_path_factory.mktemp("migrated") / "attesta.db"
    _migrate(database_url(path))
    leftovers = [p.name for p in path.parent.iterdir() if p != path]
    assert not leftovers, f"the migrated file left {leftovers} behind (an open connection?)"
    return path


@pytest.fixture(scope="session")
def demo_sqlite(migrated_sqlite: Path, tmp_path_factory):  # noqa: ANN001
    """``demo_sqlite(path, actor=...)`` writes a copy of the demo imported into SQLite and returns ``path``.

    The demo workbook is imported once per session for each audit ``actor`` (import_workbook's
    own default when None) into a copy of the migrated file; each test gets a file copy of
    that, as if it had imported the demo itself.
    """
    from app.exchange.workbook import import_workbook  # noqa: PLC0415 - only the tests that ask for the demo

    built: dict[str | None, Path] = {}

    def copy(path: Path, *, actor: str | None = None) -> Path:
        if actor not in built:
            source = tmp_path_factory.mktemp("demo") / "demo.db"
            shutil.copyfile(migrated_sqlite, source)
            database = Database(database_url(source))
            try:
                import_workbook(database, DEMO_WORKBOOK, size_limit=10**9, **({"actor": actor} if actor else {}))
            finally:
                database.dispose()
            leftovers = [p.name for p in source.parent.iterdir() if p != source]
            assert not leftovers, f"the demo file left {leftovers} behind (an open connection?)"
            built[actor] = source
        shutil.copyfile(built[actor], path)
        return path

    return copy


def _migrated_copy(request, path: Path) -> str:  # noqa: ANN001
    """Copy the session's migrated SQLite file to ``path``; return its URL."""
    shutil.copyfile(request.getfixturevalue("migrated_sqlite"), path)
    return database_url(path)


class DatabaseUrls:
    """Hands out fresh migrated databases of one kind and gives them back at the end."""

    def __init__(self, kind: str, folder: Path, request):  # noqa: ANN001
        self.kind = kind
        self.folder = folder
        self.server: PostgresServer | None = request.getfixturevalue("postgres") if kind == "postgresql" else None
        self._request = request
        self._made: list[str] = []

    def new(self, name: str = "attesta", *, migrated: bool = True) -> str:
        """Return the URL of a new database (empty, or with the newest schema)."""
        if self.server is not None:
            url = self.server.new_database(migrated=migrated)
        else:
            path = self.folder / f"{name}-{len(self._made)}.db"
            url = _migrated_copy(self._request, path) if migrated else database_url(path)
        self._made.append(url)
        return url

    def close(self) -> None:
        if self.server is not None:
            for url in self._made:
                self.server.release(url)
        self._made.clear()


@pytest.fixture
def database_urls(db_kind: str, tmp_path: Path, request):  # noqa: ANN001
    """``database_urls.new(name)``: the URL of one more fresh database of the test's kind."""
    urls = DatabaseUrls(db_kind, tmp_path, request)
    yield urls
    urls.close()


@pytest.fixture(scope="module")
def module_database_urls(db_kind: str, tmp_path_factory, request):  # noqa: ANN001
    """The same for module-scoped fixtures (a dataset imported once for a module's tests)."""
    urls = DatabaseUrls(db_kind, tmp_path_factory.mktemp("databases"), request)
    yield urls
    urls.close()


@pytest.fixture
def db_path(tmp_path: Path) -> Path:
    """The SQLite file of ``database`` (SQLite tests only)."""
    return tmp_path / "attesta.db"


@pytest.fixture
def db_url(db_kind: str, db_path: Path, database_urls: DatabaseUrls, request) -> str:  # noqa: ANN001
    """URL of a migrated, empty database: the file ``db_path`` on SQLite."""
    if db_kind == "sqlite":
        return _migrated_copy(request, db_path)
    return database_urls.new()


@pytest.fixture
def database(db_url: str):
    """A migrated, empty database (a temporary SQLite file, or a PostgreSQL database)."""
    db = Database(db_url)
    yield db
    db.dispose()


@pytest.fixture
def settings(db_url: str, database) -> Settings:  # noqa: ARG001 - the same database as the test's
    return Settings(database_url=db_url)


def chromium_path() -> str | None:
    """Path of Debian's chromium, or None (browser tests are then skipped, or fail under CI)."""
    for candidate in ("/usr/bin/chromium", "/usr/bin/chromium-browser"):
        if os.path.exists(candidate):
            return candidate
    return shutil.which("chromium")


# Debian's chromium in headless mode with nothing of its own talking to the network.
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]


@pytest.fixture(scope="module")
def browser():
    """One real headless Chromium per test module, launched with ``CHROMIUM_ARGS``.

    Each launch runs on a fresh profile: Playwright makes a new temporary folder and passes it
    as ``--user-data-dir`` (it refuses that flag among the arguments), and each ``new_page``
    opens in its own context, so tests share no cookies. Playwright is imported here so that
    tests without a browser do not need it.
    """
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        chromium = playwright.chromium.launch(executable_path=chromium_path(), args=CHROMIUM_ARGS)
        yield chromium
        chromium.close()


def open_page(browser: Browser, base_url: str, *, width: int = 1280, height: int = 900) -> tuple[Page, list[str]]:
    """Open a new page; return it and the list that collects every request leaving the site."""
    page = browser.new_page(viewport={"width": width, "height": height})
    outside: list[str] = []
    page.on("request", lambda request: None if request.url.startswith(base_url) else outside.append(request.url))
    return page, outside


def pytest_collection_modifyitems(config, items):  # noqa: ANN001
    """Browser tests are mandatory under CI; elsewhere they are skipped loudly when chromium is missing."""
    if chromium_path() is not None:
        return
    if os.environ.get("CI"):
        return  # let them run and fail: CI must test the pages
    skip = pytest.mark.skip(reason="chromium not installed: pages were NOT tested in a browser (apt-get install chromium, or run ./run.sh test)")
    for item in items:
        if "browser" in item.keywords:
            item.add_marker(skip)


def pytest_terminal_summary(terminalreporter, exitstatus, config):  # noqa: ANN001, ARG001
    if chromium_path() is None and not os.environ.get("CI"):
        terminalreporter.write_line(
            "WARNING: chromium is missing, so the browser tests were skipped and the pages were not tested "
            "in a real browser. Install Debian's chromium package or run ./run.sh test.",
            red=True,
            bold=True,
        )
