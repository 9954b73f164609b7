"""The slice option same_as=merge: persons linked as possibly the same count as one in the measures."""

from __future__ import annotations

import re

import networkx as nx
import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select

from app.main import create_app
from app.models import Person
from app.network.results import SliceGraph
from app.network.slice import Slice, SliceError, build_graph
from helpers import add_tiny_dataset


@pytest.fixture
def client(settings, database):
    """The tiny dataset plus P4 (possibly P2) who writes to P3 and to P2, and P5 (possibly P4) who writes to P1."""
    add_tiny_dataset(database)
    with TestClient(create_app(settings)) as test_client:
        token = re.search(r'name="csrf_token" value="([^"]+)"', test_client.get("/new/person").text).group(1)

        def post(path: str, /, **data: str) -> None:
            assert test_client.post(path, data={"csrf_token": token, **data}, follow_redirects=False).status_code == 303

        post("/new/person", key="P4", name="Person 2 again")
        post("/new/person", key="P5", name="Person 2 once more")
        post("/new/relation", person="P4", other="P3", kind="letter", source="S1")
        post("/new/relation", person="P4", other="P2", kind="letter", source="S1")
        post("/new/relation", person="P5", other="P1", kind="letter", source="S2")
        post("/persons/P2/links", other="P4", note="same hand")
        post("/persons/P4/links", other="P5")
        yield test_client


def ids(database) -> dict[str, int]:
    with database.read() as s:
        return dict(s.execute(select(Person.key, Person.id)).all())


def test_the_option_is_parsed_kept_in_links_and_described():
    assert Slice.from_query([("same_as", "merge")]).same_as == "merge"
    assert Slice().same_as == "apart" and ("same_as", "merge") in Slice(same_as="merge").to_query()
    assert "possibly the same" in Slice(same_as="merge").describe()
    with pytest.raises(SliceError, match="same_as"):
        Slice.from_query([("same_as", "maybe")])


def test_merged_graph_is_the_networkx_contraction_of_the_linked_persons(client, database):
    key = ids(database)
    with database.read() as s:
        apart = build_graph(s, Slice(loops="keep"))
        merged = build_graph(s, Slice(loops="keep", same_as="merge"))
        merged_totals = SliceGraph.build(s, Slice(loops="keep", same_as="merge")).G
    # reference: networkx.contracted_nodes merges P4 and P5 into P2 (lowest id of the linked group)
    reference = nx.contracted_nodes(apart, key["P2"], key["P4"], self_loops=True, copy=True)
    reference = nx.contracted_nodes(reference, key["P2"], key["P5"], self_loops=True, copy=False)
    assert set(merged.nodes) == set(reference.nodes) == set(merged_totals.nodes)
    assert set(merged.edges) == set(reference.edges) == set(merged_totals.edges)
    # P4 -> P2 became a self-loop of P2; P1 -> P2 and P5 -> P1 stay two arcs, with their own documents
    assert merged.has_edge(key["P2"], key["P2"])
    assert merged[key["P1"]][key["P2"]]["documents"] == 2 and merged[key["P2"]][key["P1"]]["documents"] == 1
    assert merged_totals[key["P2"]][key["P3"]]["attestations"] == 1


def test_the_measure_pages_count_the_linked_persons_once(client):
    apart = client.get("/api/network/summary").json()
    merged = client.get("/api/network/summary", params={"same_as": "merge"}).json()
    assert apart["persons"] == 5 and merged["persons"] == 3
    assert "same_as=merge" in client.get("/network/summary", params={"same_as": "merge"}).text
