"""The measures on graphs built from a real database by the slice, as the pages will call them.

The small world of tests/workbooks.py, read by hand: Anna and Jost write to each other and are
siblings, the Council writes to Anna; the widow's only evidence is a draft letter to herself.
"""

from __future__ import annotations

import pytest
from sqlalchemy import select

from app.exchange.workbook import import_workbook
from app.models import EVIDENCE_KINDS, Person
from app.network.measures import DIRECTED_MEASURES, MEASURES, components, compute, cuts, summarize
from app.network.slice import Slice, build_graph
from tests.workbooks import small_world, write_workbook


@pytest.fixture
def world(database, tmp_path):
    import_workbook(database, write_workbook(tmp_path / "wb", small_world()), size_limit=10**9)
    with database.read() as session:
        ids = dict(session.execute(select(Person.key, Person.id)).all())
        yield session, ids


@pytest.mark.parametrize("direction", ["recorded", "undirected", "reciprocal"])
@pytest.mark.parametrize("loops", ["drop", "keep"])
def test_every_measure_covers_the_node_set(world, direction, loops):
    session, _ = world
    G = build_graph(session, Slice(direction=direction, loops=loops, evidence=EVIDENCE_KINDS))
    for name in MEASURES:
        if name in DIRECTED_MEASURES and not G.is_directed():
            continue
        result = compute(G, name, loops=loops, node_set="evidence")
        assert set(result.values) == set(result.raw) == set(G), name
        assert "n = 4 persons (node set: evidence" in result.conventions
        assert len(result.rows()) == 4


def test_directed_slice_read_by_hand(world):
    session, ids = world
    anna, jost, council = ids["p-anna"], ids["p-jost"], ids["p-council"]
    G = build_graph(session, Slice())
    assert compute(G, "in_degree").raw == {anna: 2, jost: 1, council: 0}
    assert compute(G, "out_degree").raw == {anna: 1, jost: 1, council: 1}
    # Anna's letters weigh 2 documents, Jost's 3 (the copy counts with its original), the Council's 1
    assert compute(G, "in_strength").raw == {anna: 3 + 1, jost: 2, council: 0}
    assert compute(G, "strength").raw == {anna: 3 + 1, jost: 3, council: 1}  # the larger of two opposite arcs
    betweenness = compute(G, "betweenness")
    assert betweenness.raw == {anna: 1, jost: 0, council: 0}  # on the Council's path to Jost
    assert betweenness.values[anna] == pytest.approx(1 / 2)
    assert compute(G, "closeness").values == pytest.approx({anna: 1, jost: 2 / 3, council: 0})
    summary = summarize(G, node_set="evidence")
    assert (summary.persons, summary.ties, summary.attestations) == (3, 3, 6)
    assert summary.reciprocity == pytest.approx(2 / 3) and summary.density == pytest.approx(3 / 6)
    result = cuts(G)
    assert [(c.node, c.pieces) for c in result.cut_points] == [(anna, [1, 1])]
    council_tie = next(b for b in result.bridges if council in (b.u, b.v))
    assert council_tie.single_document and len(council_tie.attestation_ids) == 1
    sibling_and_letters = next(b for b in result.bridges if jost in (b.u, b.v))
    assert not sibling_and_letters.single_document and len(sibling_and_letters.attestation_ids) == 5


def test_kept_self_loop_and_its_isolate(world):
    session, ids = world
    widow = ids["p-widow"]
    G = build_graph(session, Slice(loops="keep", evidence=EVIDENCE_KINDS))
    parts = components(G, loops="keep")
    assert [c.members for c in parts.components][-1] == [widow] and parts.isolates == [widow]
    assert parts.components[-1].ties == 1  # her letter to herself, kept
    assert compute(G, "degree", loops="keep").raw[widow] == 2
    assert compute(G, "degree").raw[widow] == 0
    summary = summarize(G)
    assert (summary.loops, summary.ties, summary.attestations) == (1, 3, 7)
