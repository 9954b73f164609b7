"""The demo scenario: reproducible, and holding the features it promises (sample_data/README.md)."""

from __future__ import annotations

import filecmp
import subprocess
import sys

import networkx as nx
import pytest

from app.exchange.workbook import import_workbook
from app.network.slice import Slice, build_graph
from app.models import Person
from sqlalchemy import select
from conftest import DEMO_WORKBOOK, ROOT


def test_generator_reproduces_the_committed_workbook(tmp_path):
    subprocess.run([sys.executable, str(ROOT / "sample_data" / "generate_demo.py"), str(tmp_path)], check=True,
                   capture_output=True)
    names = sorted(p.name for p in DEMO_WORKBOOK.glob("*.csv"))
    assert names == sorted(p.name for p in tmp_path.glob("*.csv"))
    _, mismatch, errors = filecmp.cmpfiles(DEMO_WORKBOOK, tmp_path, names, shallow=False)
    assert mismatch == [] and errors == []


pytestmark = pytest.mark.both_databases


@pytest.fixture(scope="module")
def demo(module_database_urls, demo_sqlite, db_kind, tmp_path_factory):
    from app.db import Database
    from app.config import database_url

    if db_kind == "sqlite":  # the session's demo file, imported the same way (tests/conftest.py)
        database = Database(database_url(demo_sqlite(tmp_path_factory.mktemp("demo") / "demo.db")))
    else:
        database = Database(module_database_urls.new("demo"))
        import_workbook(database, DEMO_WORKBOOK, size_limit=10**9)
    yield database
    database.dispose()


def keyed(database, G):
    with database.read() as session:
        keys = dict(session.execute(select(Person.id, Person.key)).all())
    return nx.relabel_nodes(G, keys)


def test_the_broker_is_the_only_link_between_two_clusters(demo):
    with demo.read() as session:
        G = keyed(demo, build_graph(session, Slice(direction="undirected")))
    assert "p-jehan-marteau" in set(nx.articulation_points(G))
    H = G.copy()
    H.remove_node("p-jehan-marteau")
    big = sorted((len(c) for c in nx.connected_components(H)), reverse=True)[:2]
    assert big[1] > 50  # two sizeable clusters fall apart without him


def test_a_separate_component_and_isolates(demo):
    with demo.read() as session:
        G = keyed(demo, build_graph(session, Slice(direction="undirected")))
    components = [set(c) for c in nx.connected_components(G)]
    assert {"p-ambrosius-kelterer", "p-ottilie-kelterer", "p-valentin-grunholt", "p-walburga-reisacher"} in components
    assert sum(1 for c in components if len(c) == 1) >= 3  # persons known only from a membership or a fact


def test_the_family_archive_owner_is_central_only_while_his_papers_count(demo):
    with demo.read() as session:
        everything = keyed(demo, build_graph(session, Slice(direction="undirected")))
        without = keyed(demo, build_graph(session, Slice(direction="undirected", omit_collection=("col-afp", "col-afp-lb"))))
    owner = "p-matthias-aldersloh"
    assert max(everything.degree, key=lambda item: item[1])[0] == owner
    assert without.degree(owner) < everything.degree(owner) / 1.5
    assert max(without.degree, key=lambda item: item[1])[0] != owner
