"""Shared fixtures: every test gets a fresh SQLite file migrated by Alembic, never a mock."""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest
from fastapi.testclient import TestClient

from app.config import Settings, database_url
from app.db import Database, upgrade

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


@pytest.fixture
def db_path(tmp_path: Path) -> Path:
    return tmp_path / "attesta.db"


@pytest.fixture
def database(db_path: Path):
    """A migrated, empty database in a temporary file."""
    db = Database(database_url(db_path))
    upgrade(db)
    yield db
    db.dispose()


@pytest.fixture
def settings(db_path: Path, database) -> Settings:  # noqa: ARG001 - database migrates the file
    return Settings(database_url=database_url(db_path))


def chromium_path() -> str | None:
    """Path of Debian's chromium, or None (browser tests are then skipped, or fail under CI)."""
    for candidate in ("/usr/bin/chromium", "/usr/bin/chromium-browser"):
        if os.path.exists(candidate):
            return candidate
    return shutil.which("chromium")


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
