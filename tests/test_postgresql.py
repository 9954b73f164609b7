"""Attesta on PostgreSQL: the schema, the SQL fold(), the command, and the pages and measures over HTTP.

The store, workbook, demo and slice modules run on both databases already (``both_databases``);
this module checks what is PostgreSQL's own and compares the JSON of the demo's pages on the
two databases: the same workbook imported into SQLite and into PostgreSQL must give the same
answers.
"""

from __future__ import annotations

import csv

import httpx
import pytest
from alembic import command
from sqlalchemy import func, literal, select, text

from app.config import database_url
from app.db import Database, alembic_config, check_schema, current_revision, head_revision, upgrade
from app.exchange.workbook import import_workbook
from app.models import RelationKind
from app.names import fold
from tests.conftest import DEMO_WORKBOOK
from tests.helpers import run_module, running_server

# Names beyond the demo's: letters Unicode decomposes (accents), those it does not (ø, ł, ß, æ),
# compatibility forms (ligature, full-width, superscript), upper case of each, odd white space.
TRICKY_NAMES = [
    "José  Ørsted", "ÅSA ØSTERGÅRD", "Łucja Wałęsa", "Straße", "STRASSE", "Æbelø", "Œuvre", "Þórður Guðmundsson",
    "ﬁnch", "Ｆｕｌｌ", "x²", "  leading and trailing  ", "tab\tand\nnewline", "Ελένη Σοφοκλέους", "Ἀθῆναι",
    "Ёлка Йошкар", "Çağlar İnönü", "ĐorĐe", "Ñandú", "Zoë Brontë", "Dvořák", "Ġużè", "",
]


@pytest.fixture
def pg_url(postgres) -> str:  # noqa: ANN001
    url = postgres.new_database()
    yield url
    postgres.release(url)


def demo_names() -> list[str]:
    names = []
    for file, columns in (("persons.csv", ("name", "sort_name", "variants")), ("groups.csv", ("name",)),
                          ("places.csv", ("name", "variants"))):  # fmt: skip
        with open(DEMO_WORKBOOK / file, encoding="utf-8") as handle:
            for row in csv.DictReader(handle):
                for column in columns:
                    names += [n for n in (row.get(column) or "").split("|") if n]
    return names


def test_the_sql_fold_gives_what_the_python_fold_gives(pg_url: str) -> None:
    names = demo_names() + TRICKY_NAMES
    assert len(names) > 300
    database = Database(pg_url)
    try:
        with database.engine.connect() as connection:
            folded = [connection.execute(text("SELECT fold(:name)"), {"name": name}).scalar() for name in names]
            assert connection.execute(text("SELECT fold(NULL)")).scalar() is None
    finally:
        database.dispose()
    differ = [(name, sql, fold(name)) for name, sql in zip(names, folded) if sql != fold(name)]
    assert differ == []


@pytest.mark.parametrize("url_of", ["sqlite", "postgresql"])
def test_json_integer_reads_a_top_level_number_on_both_databases(url_of: str, pg_url: str, db_url: str) -> None:
    from app.sql import json_integer

    database = Database(pg_url if url_of == "postgresql" else db_url)
    try:
        with database.engine.connect() as connection:
            def read(document: str) -> int | None:
                return connection.execute(select(json_integer(literal(document), "n"))).scalar()

            assert read('{"rows": [{"n": 3}], "n": 19943}') == 19943
            assert read('{"rows": []}') is None
    finally:
        database.dispose()


def test_migrations_build_exactly_the_models_on_postgresql(postgres) -> None:  # noqa: ANN001
    url = postgres.new_database(migrated=False)
    database = Database(url)
    try:
        assert current_revision(database.engine) is None
        upgrade(database)
        check_schema(database)
        assert current_revision(database.engine) == head_revision()
        with database.engine.connect() as connection:
            config = alembic_config(url)
            config.attributes["connection"] = connection
            command.check(config)  # raises when models and migrations differ
        upgrade(database)  # a second run changes nothing
    finally:
        database.dispose()
        postgres.release(url)


def test_a_new_relation_kind_gets_an_id_past_the_seeded_ones(pg_url: str) -> None:
    database = Database(pg_url)
    try:
        with database.write() as session:
            session.add(RelationKind(key="credit", label="credit", directed=True))
        with database.read() as session:
            assert session.scalar(select(func.count()).select_from(RelationKind)) == 9
            assert session.scalar(select(RelationKind.id).where(RelationKind.key == "credit")) == 9
    finally:
        database.dispose()


def test_the_command_initialises_and_imports_into_a_postgresql_url(postgres, tmp_path) -> None:  # noqa: ANN001
    url = postgres.new_database(migrated=False)
    try:
        # each command in its own process, forked from the preloaded interpreter (tests/helpers.py)
        done = run_module(["app.cli", "init", "--db", url])
        assert done.returncode == 0, done.stderr
        # the demo has namesakes told apart by their dates: the command names them and stops, until told
        done = run_module(["app.cli", "import", "--db", url, str(DEMO_WORKBOOK)])
        assert done.returncode == 1 and "likely duplicate" in done.stderr
        done = run_module(["app.cli", "import", "--db", url, "--duplicates", "apart", str(DEMO_WORKBOOK)])
        assert done.returncode == 0, done.stderr
        assert "data version 1" in done.stdout
        done = run_module(["app.cli", "export", "--db", url, str(tmp_path / "out")])
        assert done.returncode == 0, done.stderr
        assert (tmp_path / "out" / "relations.csv").read_text(encoding="utf-8").count("\n") > 100
    finally:
        postgres.release(url)


# --- the demo's pages over HTTP, on both databases ---------------------------------------------------

# Pages and their JSON twins, chosen to cross every store module and every measure family.
PAGES = [
    "/", "/persons", "/persons?q=amelie", "/persons/p-gerrit-aldersloh", "/persons/p-gerrit-aldersloh/ego?radius=2",
    "/groups", "/groups?q=walburg", "/sources?q=1703", "/sources?sort=reference", "/repositories",
    "/network/summary", "/network/centrality?measure=betweenness", "/network/centrality?measure=eigenvector",
    "/network/components", "/network/cut-points", "/network/cliques", "/network/communities?method=louvain&seed=0",
    "/network/two-mode", "/network/summary?from=1700&to=1720&certainty=probable&min_collections=2",
]
JSON_PAGES = [
    "/api/summary", "/api/persons?q=amelie", "/api/persons/p-gerrit-aldersloh", "/api/groups?q=walburg",
    "/api/sources?q=1703", "/api/network/centrality?measure=betweenness", "/api/network/components",
    "/api/network/cut-points", "/api/network/communities?method=louvain&seed=0", "/api/network/two-mode",
    "/api/network/summary?from=1700&to=1720&certainty=probable&min_collections=2",
]
VOLATILE = {"computed_at", "seconds", "changed_at", "csrf_token", "entered_at"}


def _without_volatile(value):  # noqa: ANN001, ANN202
    """The answer less clock times; floats to 12 significant digits (sums in another node order)."""
    if isinstance(value, float):
        return float(f"{value:.12g}")
    if isinstance(value, dict):
        return {k: _without_volatile(v) for k, v in value.items() if k not in VOLATILE}
    if isinstance(value, list):
        return [_without_volatile(v) for v in value]
    return value


@pytest.fixture(scope="module")
def demo_servers(postgres, tmp_path_factory, demo_sqlite):  # noqa: ANN001
    """The demo imported into an SQLite file and into PostgreSQL, each served by real uvicorn."""
    sqlite_url = database_url(demo_sqlite(tmp_path_factory.mktemp("demo-sqlite") / "demo.db", actor="demo"))
    pg_url = postgres.new_database()
    database = Database(pg_url)
    upgrade(database)
    import_workbook(database, DEMO_WORKBOOK, size_limit=10**9, actor="demo")
    database.dispose()
    try:
        with running_server(sqlite_url) as on_sqlite, running_server(pg_url) as on_postgresql:
            yield on_sqlite, on_postgresql
    finally:
        postgres.release(pg_url)


@pytest.mark.parametrize("page", PAGES)
def test_the_demo_pages_answer_on_postgresql(demo_servers, page: str) -> None:  # noqa: ANN001
    for base in demo_servers:  # both, so that both keep the same stored results for the JSON below
        response = httpx.get(base + page, timeout=60)
        assert response.status_code == 200, response.text[:2000]
        assert "<main" in response.text


@pytest.mark.parametrize("page", JSON_PAGES)
def test_the_demo_json_is_the_same_on_both_databases(demo_servers, page: str) -> None:  # noqa: ANN001
    on_sqlite, on_postgresql = demo_servers
    answers = [httpx.get(base + page, timeout=60) for base in (on_sqlite, on_postgresql)]
    assert [a.status_code for a in answers] == [200, 200], answers[1].text[:2000]
    sqlite_json, postgresql_json = (_without_volatile(a.json()) for a in answers)
    assert postgresql_json == sqlite_json
