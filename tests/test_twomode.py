"""Two-mode networks: memberships of a slice, the bipartite graph, its projections and matrices.

The published reference is the Southern Women data of Davis, Gardner & Gardner (1941), shipped
with networkx as ``davis_southern_women_graph`` and imported here through the workbook. Its
projections are checked against Breiger (1974), "The Duality of Persons and Groups" (the
person-by-person matrix is B Bᵀ, its diagonal each woman's number of events), and against the
networkx implementations of the three weightings (networkx.algorithms.bipartite.projection).
"""

from __future__ import annotations

import csv
import doctest
import filecmp
import io
from datetime import date

import networkx as nx
import numpy as np
import pytest
from networkx.algorithms import bipartite
from sqlalchemy import select, update

import app.network.twomode as twomode
from app.db import Database, upgrade
from app.exchange.workbook import WorkbookError, export_workbook, import_workbook
from app.models import Attestation, Group, Person
from app.network.slice import Slice, resolve_slice
from app.network.twomode import (
    adjacency_csv,
    bipartite_graph,
    describe_term,
    groups_in_common,
    incidence,
    incidence_csv,
    membership_evidence,
    overlapping,
    project,
    projected_graph,
    two_mode_summary,
)
from tests.twomode_world import DAVIS, EVENTS, WOMEN, davis_workbook, event_key, parish_workbook, woman_key
from tests.workbooks import small_world, write_workbook

LIMIT = 10**9


def load(database: Database, tmp_path, tables) -> None:  # noqa: ANN001
    import_workbook(database, write_workbook(tmp_path / "wb", tables), size_limit=LIMIT)


def evidence_of(database: Database, **query: str):  # noqa: ANN201
    """Return the membership evidence of a slice, and the keys of persons and groups by id."""
    with database.read() as session:
        resolved = resolve_slice(session, Slice.from_query({k: [v] for k, v in query.items()}))
        evidence = membership_evidence(session, resolved)
        persons = dict(session.execute(select(Person.id, Person.key)).all())
        groups = dict(session.execute(select(Group.id, Group.key)).all())
    return evidence, persons, groups


@pytest.fixture
def davis(database: Database, tmp_path):
    load(database, tmp_path, davis_workbook())
    evidence, persons, groups = evidence_of(database)
    name_of_person = {pid: w for pid, key in persons.items() for w in WOMEN if woman_key(w) == key}
    name_of_group = {gid: e for gid, key in groups.items() for e in EVENTS if event_key(e) == key}
    return evidence, name_of_person, name_of_group


def named_weights(G: nx.Graph, names: dict[int, str]) -> dict[frozenset, float]:
    return {frozenset((names[u], names[v])): w for u, v, w in G.edges(data="weight")}


def reference_weights(G: nx.Graph) -> dict[frozenset, float]:
    return {frozenset((u, v)): w for u, v, w in G.edges(data="weight")}


# --- the Southern Women, through the workbook ----------------------------------------------------


def test_davis_imports_as_18_women_14_events_89_attested_memberships(davis):
    evidence, persons, groups = davis
    assert len(evidence) == 89
    assert len({m.person for m in evidence}) == 18 and len({m.group for m in evidence}) == 14
    assert all(len(m.attestation_ids) == 1 and len(m.document_ids) == 1 for m in evidence)
    assert len({m.document_ids[0] for m in evidence}) == 89  # each attendance its own source
    B = bipartite_graph(evidence)
    assert nx.is_bipartite(B)
    assert {d for _, d in B.nodes(data="bipartite")} == {0, 1}
    assert sum(1 for n in B if n[0] == "p") == 18 and B.number_of_edges() == 89
    reference = {(w, e) if w in WOMEN else (e, w) for w, e in DAVIS.edges()}
    edges = {tuple(sorted((u, v), key=lambda n: n[0] != "p")) for u, v in B.edges()}  # person first
    assert {(persons[p[1]], groups[g[1]]) for p, g in edges} == reference
    assert all(w == 1.0 for _, _, w in B.edges(data="weight"))


def test_person_projection_is_breiger_b_times_b_transposed(davis):
    """Breiger (1974): persons x persons = B Bᵀ, whose diagonal is each woman's number of events."""
    evidence, persons, groups = davis
    inc = incidence(evidence)
    women = [persons[p] for p in inc.persons]
    events = [groups[g] for g in inc.groups]
    reference_B = bipartite.biadjacency_matrix(DAVIS, row_order=women, column_order=events).toarray()
    assert np.array_equal(inc.matrix.toarray(), reference_B)
    P = project(evidence, weighting="shared")
    assert P.nodes == inc.persons
    breiger = reference_B @ reference_B.T
    assert np.array_equal(P.matrix.toarray() + np.diag(P.diagonal), breiger)
    assert P.diagonal.tolist() == [DAVIS.degree(w) for w in women]
    assert np.array_equal(P.shared.toarray(), breiger - np.diag(np.diag(breiger)))

    G = project(evidence, onto="groups")
    duality = reference_B.T @ reference_B
    assert np.array_equal(G.matrix.toarray() + np.diag(G.diagonal), duality)
    assert G.diagonal.tolist() == [DAVIS.degree(e) for e in events]


@pytest.mark.parametrize(
    "weighting, reference",
    [
        ("shared", lambda B, nodes: bipartite.weighted_projected_graph(B, nodes)),
        ("newman", lambda B, nodes: bipartite.collaboration_weighted_projected_graph(B, nodes)),
        ("jaccard", lambda B, nodes: bipartite.overlap_weighted_projected_graph(B, nodes, jaccard=True)),
    ],
)
def test_weightings_equal_the_networkx_projections(davis, weighting, reference):
    """networkx.algorithms.bipartite: weighted (shared), collaboration (Newman 2001) and overlap (Jaccard)."""
    evidence, persons, groups = davis
    for onto, names, nodes in (("persons", persons, WOMEN), ("groups", groups, EVENTS)):
        G = projected_graph(evidence, onto=onto, weighting=weighting)
        assert sorted(names[n] for n in G) == sorted(nodes)
        assert nx.number_of_selfloops(G) == 0
        ours, theirs = named_weights(G, names), reference_weights(reference(DAVIS, nodes))
        assert ours.keys() == theirs.keys()
        for pair, weight in theirs.items():
            assert ours[pair] == pytest.approx(weight, rel=1e-12), (onto, pair)
        # the matrix and the graph say the same
        P = project(evidence, onto=onto, weighting=weighting)
        index = {n: i for i, n in enumerate(P.nodes)}
        assert all(P.matrix[index[u], index[v]] == w for u, v, w in G.edges(data="weight"))


def test_each_projected_tie_names_what_it_rests_on(davis):
    evidence, persons, groups = davis
    by_person = projected_graph(evidence, weighting="newman")
    for u, v, data in by_person.edges(data=True):
        common = set(nx.common_neighbors(DAVIS, persons[u], persons[v]))
        assert {groups[g] for g in data["groups"]} == common
        assert data["shared"] == len(common) == len(data["groups"])
        assert data["groups"] == sorted(data["groups"])
    by_group = projected_graph(evidence, onto="groups", weighting="jaccard")
    for u, v, data in by_group.edges(data=True):
        assert {persons[p] for p in data["persons"]} == set(nx.common_neighbors(DAVIS, groups[u], groups[v]))
    assert "groups" not in next(iter(projected_graph(evidence, shared_ids=False).edges(data=True)))[2]


def test_two_mode_figures_of_the_southern_women(davis):
    """Density over persons x groups; clustering as networkx.algorithms.bipartite.latapy_clustering
    (Latapy, Magnien & Del Vecchio 2008)."""
    evidence, persons, groups = davis
    summary = two_mode_summary(bipartite_graph(evidence))
    assert (summary.persons, summary.groups, summary.memberships) == (18, 14, 89)
    assert summary.density == pytest.approx(89 / (18 * 14))
    assert {persons[p]: d for p, d in summary.person_degree.items()} == {w: DAVIS.degree(w) for w in WOMEN}
    assert {groups[g]: d for g, d in summary.group_degree.items()} == {e: DAVIS.degree(e) for e in EVENTS}
    assert summary.mean_person_degree == pytest.approx(89 / 18)
    reference = bipartite.latapy_clustering(DAVIS)
    for pid, value in summary.person_clustering.items():
        assert value == pytest.approx(reference[persons[pid]])
    for gid, value in summary.group_clustering.items():
        assert value == pytest.approx(reference[groups[gid]])
    assert summary.mean_group_clustering == pytest.approx(bipartite.average_clustering(DAVIS, EVENTS))


def test_matrices_as_csv_are_labelled_and_read_back(davis):
    evidence, persons, groups = davis
    person_labels = {pid: (woman_key(name), name) for pid, name in persons.items()}
    group_labels = {gid: (event_key(name), f"Event {name[1:]}") for gid, name in groups.items()}
    rows = list(csv.reader(io.StringIO(incidence_csv(incidence(evidence), person_labels=person_labels, group_labels=group_labels))))
    assert rows[0][0] == "person \\ group" and len(rows) == 19 and len(rows[0]) == 15
    assert rows[0][1:] == sorted(rows[0][1:])  # columns by key
    for row in rows[1:]:
        key, name = row[0].split(" ", 1)
        woman = name[1:-1]
        assert woman_key(woman) == key
        attended = {EVENTS[[event_key(e) for e in EVENTS].index(label.split(" ")[0])] for label, cell in zip(rows[0][1:], row[1:]) if cell == "1"}
        assert attended == set(DAVIS[woman])
        assert set(row[1:]) <= {"0", "1"}

    P = project(evidence, weighting="newman")
    matrix = list(csv.reader(io.StringIO(adjacency_csv(P, labels=person_labels))))
    assert matrix[0][0] == "person \\ person" and len(matrix) == 19
    reference = bipartite.collaboration_weighted_projected_graph(DAVIS, WOMEN)
    header = [label.split(" ", 1)[1][1:-1] for label in matrix[0][1:]]
    for row in matrix[1:]:
        woman = row[0].split(" ", 1)[1][1:-1]
        for other, cell in zip(header, row[1:]):
            expected = reference[woman][other]["weight"] if reference.has_edge(woman, other) else 0.0
            assert float(cell) == pytest.approx(expected, rel=1e-11)
    with pytest.raises(ValueError, match="more than 100 cells"):
        adjacency_csv(P, labels=person_labels, max_cells=100)


# --- time overlap, on paper -------------------------------------------------------------------------


@pytest.fixture
def parish(database: Database, tmp_path):
    load(database, tmp_path, parish_workbook())
    return database


def keyed(evidence, persons, groups):  # noqa: ANN001, ANN201
    return {(persons[m.person], groups[m.group]): m for m in evidence}


def test_terms_come_from_the_record_else_from_the_attestations(parish):
    evidence, persons, groups = evidence_of(parish)
    m = keyed(evidence, persons, groups)
    aart = m[("p-aart", "g-parish")]
    assert (aart.start, aart.end, aart.start_from, aart.end_from) == (date(1650, 1, 1), date(1660, 12, 31), "term", "term")
    assert (aart.attested_from, aart.attested_to) == (date(1655, 1, 1), date(1655, 12, 31))
    bette = m[("p-bette", "g-parish")]  # a register entry of 1712 proves membership in 1712, not a term
    assert (bette.start, bette.end) == (date(1712, 1, 1), date(1712, 12, 31))
    assert describe_term(bette) == "span of the attestation dates"
    cas = m[("p-cas", "g-parish")]
    assert (cas.start, cas.end, cas.role) == (date(1705, 1, 1), date(1715, 3, 2), "churchwarden")
    assert describe_term(cas) == "recorded start, end from the attestation dates"
    dirk = m[("p-dirk", "g-parish")]
    assert (dirk.start, dirk.end, describe_term(dirk)) == (None, None, "undated")
    assert overlapping(aart, bette) is False and overlapping(bette, cas) is True and overlapping(cas, dirk) is None


def pairs(G: nx.Graph, persons: dict[int, str]) -> dict[tuple[str, str], dict]:
    return {tuple(sorted((persons[u], persons[v]))): d for u, v, d in G.edges(data=True)}


def test_overlap_required_ties_only_members_at_the_same_time(parish):
    evidence, persons, groups = evidence_of(parish)
    parish_id, guild_id = (next(g for g, k in groups.items() if k == key) for key in ("g-parish", "g-guild"))
    every = pairs(projected_graph(evidence, overlap="any"), persons)
    assert set(every) == {("p-aart", "p-bette"), ("p-aart", "p-cas"), ("p-aart", "p-dirk"), ("p-bette", "p-cas"),
                          ("p-bette", "p-dirk"), ("p-cas", "p-dirk")}  # fmt: skip
    assert every[("p-aart", "p-bette")]["groups"] == sorted([parish_id, guild_id])

    # Aart (1650-1660) and Bette (1712) were not parishioners together; they were guild brothers
    # (1655 within 1650-1700). Bette (1712) and Cas (1705-1715) overlap; Dirk is undated.
    required = pairs(projected_graph(evidence, overlap="required"), persons)
    assert set(required) == {("p-aart", "p-bette"), ("p-bette", "p-cas")}
    assert required[("p-aart", "p-bette")]["groups"] == [guild_id]
    assert required[("p-bette", "p-cas")]["groups"] == [parish_id]
    assert all(d["weight"] == 1.0 and d["shared"] == 1 for d in required.values())

    newman = pairs(projected_graph(evidence, weighting="newman", overlap="required"), persons)
    assert newman[("p-aart", "p-bette")]["weight"] == pytest.approx(1 / (2 - 1))  # the guild has 2 members
    assert newman[("p-bette", "p-cas")]["weight"] == pytest.approx(1 / (4 - 1))  # the parish has 4
    jaccard = pairs(projected_graph(evidence, weighting="jaccard", overlap="required"), persons)
    assert jaccard[("p-aart", "p-bette")]["weight"] == pytest.approx(1 / 2)  # 1 overlapping of 2 groups
    assert jaccard[("p-bette", "p-cas")]["weight"] == pytest.approx(1 / 2)
    jaccard_any = pairs(projected_graph(evidence, weighting="jaccard"), persons)
    assert jaccard_any[("p-aart", "p-bette")]["weight"] == 1.0 and jaccard_any[("p-cas", "p-dirk")]["weight"] == 1.0
    assert jaccard_any[("p-aart", "p-cas")]["weight"] == pytest.approx(1 / 2)

    # Group by group: Aart was in both at once (1655); Bette's guild term ended before her 1712 entry.
    by_group = projected_graph(evidence, onto="groups", overlap="required")
    assert [d["persons"] for _, _, d in by_group.edges(data=True)] == [[next(p for p, k in persons.items() if k == "p-aart")]]
    assert next(iter(projected_graph(evidence, onto="groups").edges(data="shared")))[2] == 2
    # what the tie of Aart and Bette rests on, group by group
    aart, bette = (next(p for p, k in persons.items() if k == key) for key in ("p-aart", "p-bette"))
    common = groups_in_common(evidence, aart, bette)
    assert [(c.group, c.overlap) for c in common] == sorted([(parish_id, False), (guild_id, True)])
    assert [m.role for c in common for m in c.second if c.group == guild_id] == ["master"]
    dirk = next(p for p, k in persons.items() if k == "p-dirk")
    assert [(c.group, c.overlap) for c in groups_in_common(evidence, aart, dirk)] == [(parish_id, None)]
    matrix = project(evidence, overlap="required").matrix
    assert (matrix != matrix.T).nnz == 0 and matrix.diagonal().sum() == 0


def test_the_slice_chooses_the_memberships(parish):
    def members(**query: str) -> set[tuple[str, str]]:
        evidence, persons, groups = evidence_of(parish, **query)
        return set(keyed(evidence, persons, groups))

    everyone = members()
    assert len(everyone) == 6
    # period: kept by the dates of the attestations, not by terms (Bette's guild term runs to 1700,
    # its roll is of 1690); the undated list stays while undated=keep
    assert members(**{"from": "1700"}) == {("p-bette", "g-parish"), ("p-cas", "g-parish"), ("p-dirk", "g-parish")}
    assert ("p-dirk", "g-parish") not in members(**{"from": "1700", "undated": "drop"})
    assert ("p-dirk", "g-parish") not in members(unidentified="drop")
    assert members(max_group_size="3") == {("p-aart", "g-guild"), ("p-bette", "g-guild")}  # the parish has 4
    assert members(max_group_size="4") == everyone
    assert members(evidence="original") == set()  # every membership here rests on a register
    with parish.write() as session:
        session.execute(update(Attestation).where(Attestation.key == "m-p1").values(
            deleted_at=date(2026, 1, 1), deleted_reason="misread"))  # fmt: skip
    assert ("p-aart", "g-parish") not in members()


def test_doctests_of_the_two_mode_module():
    failures, tried = doctest.testmod(twomode, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert failures == 0 and tried > 0


def test_an_empty_slice_gives_empty_graphs(parish):
    evidence, _, _ = evidence_of(parish, evidence="original")
    assert evidence == []
    assert projected_graph([]).number_of_nodes() == 0
    assert project([], weighting="jaccard", overlap="required").matrix.shape == (0, 0)
    summary = two_mode_summary(bipartite_graph([]))
    assert summary.density is None and summary.mean_person_clustering is None
    with pytest.raises(ValueError, match="weighting='count'"):
        project([], weighting="count")


# --- the workbook ------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "column, value, reason",
    [
        ("group", "p-anna", "unknown group 'p-anna' ('p-anna' is a person, not a group)"),
        ("person", "g-society", "unknown person 'g-society' ('g-society' is a group, not a person)"),
    ],
)
def test_a_membership_mixing_persons_and_groups_is_refused_with_file_and_line(database, tmp_path, column, value, reason):
    world = small_world()
    world["memberships.csv"][1] = {**world["memberships.csv"][1], column: value}
    with pytest.raises(WorkbookError) as caught:
        load(database, tmp_path, world)
    assert [str(p) for p in caught.value.problems] == [f"memberships.csv:3: {column}: {reason}"]
    with database.read() as session:
        assert session.scalar(select(Person.id)) is None  # all or nothing


def test_groups_and_memberships_round_trip_with_the_two_mode_data(database, tmp_path):
    world = parish_workbook()
    davis = davis_workbook()
    for name, rows in davis.items():
        world[name] = world.get(name, []) + rows
    load(database, tmp_path, world)
    exported = tmp_path / "exported"
    with database.read() as session:
        export_workbook(session, exported)
    for name in ("groups.csv", "memberships.csv"):
        with open(exported / name, encoding="utf-8") as handle:
            back = {row["key"]: row for row in csv.DictReader(handle)}
        for row in world[name]:
            assert {c: back[row["key"]][c] for c in row} == row, (name, row["key"])
        assert len(back) == len(world[name])

    fresh = Database(f"sqlite:///{tmp_path / 'fresh.db'}")
    upgrade(fresh)
    import_workbook(fresh, exported, size_limit=LIMIT)
    again = tmp_path / "again"
    with fresh.read() as session:
        export_workbook(session, again)
    match, mismatch, errors = filecmp.cmpfiles(exported, again, ["groups.csv", "memberships.csv"], shallow=False)
    assert match == ["groups.csv", "memberships.csv"] and not mismatch and not errors

    # and the two-mode network read from the copy is the same network
    def network(db: Database) -> dict:
        evidence, persons, groups = evidence_of(db)
        return {(persons[m.person], groups[m.group], m.role): (m.start, m.end, m.start_from, m.end_from,
                                                               len(m.attestation_ids)) for m in evidence}  # fmt: skip

    before, after = network(database), network(fresh)
    fresh.dispose()
    assert len(before) == 89 + 6 and before == after
