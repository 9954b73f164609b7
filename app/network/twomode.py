"""Two-mode networks: persons and the groups they belong to, and the projections of that network.

Memberships are evidence like relations: the slice keeps the attestations it trusts, and a
membership stays while one of them is kept (``membership_evidence``). The two-mode (bipartite)
graph joins persons to groups (``bipartite_graph``); the person-by-group incidence matrix B
projects it to persons (B Bᵀ: shared groups) or to groups (Bᵀ B: shared members), computed with
sparse matrix products so that large datasets stay fast (``project``, ``projected_graph``).

A membership's term is its recorded start and end where given, otherwise the span of the dates of
its kept attestations (a register entry of 1712 proves membership in 1712, not a term); each
membership says which was used. With ``overlap="required"`` two persons share a group only if
their terms in it overlap: two parishioners sixty years apart were not neighbours.
"""

from __future__ import annotations

import csv
import io
from collections import defaultdict
from collections.abc import Hashable, Iterable, Mapping, Sequence
from dataclasses import dataclass, replace
from datetime import date

import networkx as nx
import numpy as np
import scipy.sparse as sp
from networkx.algorithms import bipartite
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from app.models import Attestation, Collection, Membership, Person, Source
from app.network.slice import ResolvedSlice, attestation_conditions, tie_weight

__all__ = [
    "OVERLAPS",
    "PROJECTION_MODES",
    "WEIGHTINGS",
    "CommonGroup",
    "Incidence",
    "MembershipEvidence",
    "Projection",
    "TwoModeSummary",
    "adjacency_csv",
    "bipartite_graph",
    "describe_term",
    "groups_in_common",
    "incidence",
    "incidence_csv",
    "membership_evidence",
    "overlapping",
    "project",
    "projected_graph",
    "two_mode_summary",
    "with_slice_limits",
]

WEIGHTINGS = ("shared", "newman", "jaccard")
OVERLAPS = ("any", "required")
PROJECTION_MODES = ("persons", "groups")
MAX_CSV_CELLS = 10_000_000  # a matrix beyond this is no longer something a spreadsheet can open


@dataclass(frozen=True)
class MembershipEvidence:
    """One membership kept by a slice: who, which group, in what role, when, and on what evidence."""

    membership_id: int
    """Id of the membership (one per person, group and role)."""
    person: int
    """Id of the person."""
    group: int
    """Id of the group."""
    role: str
    """Role in the group ("" when none is recorded)."""
    start: date | None
    """First day of the term (None when nothing about the membership is dated)."""
    end: date | None
    """Last day of the term (None when nothing about the membership is dated)."""
    start_from: str | None
    """Where ``start`` comes from: "term" (the recorded start), "attestations" (the earliest
    attestation date), "other end" (only the end is known) or None (undated)."""
    end_from: str | None
    """Where ``end`` comes from, in the same words."""
    attested_from: date | None
    """First day any kept attestation may fall on."""
    attested_to: date | None
    """Last day any kept attestation may fall on."""
    attestation_ids: tuple[int, ...]
    """The kept attestations, ascending."""
    document_ids: tuple[int, ...]
    """Distinct documents of those attestations (a copy counts as its original), ascending."""


def describe_term(membership: MembershipEvidence) -> str:
    """Return in words where a membership's term comes from.

    Examples
    --------
    >>> m = MembershipEvidence(1, 1, 1, "", date(1702, 1, 1), date(1712, 12, 31), "term", "attestations",
    ...                        None, None, (), ())
    >>> describe_term(m)
    'recorded start, end from the attestation dates'
    """
    start, end = membership.start_from, membership.end_from
    if start is None:
        return "undated"
    if start == end == "term":
        return "term as recorded"
    if start == end == "attestations":
        return "span of the attestation dates"
    words = {"term": "recorded {}", "attestations": "{} from the attestation dates", "other end": "{} unknown"}
    return f"{words[start].format('start')}, {words[end].format('end')}"


def membership_evidence(
    session: Session,
    resolved: ResolvedSlice,
    *,
    persons: Iterable[int] | None = None,
    groups: Iterable[int] | None = None,
) -> list[MembershipEvidence]:
    """Return the memberships the slice keeps, with their terms and evidence, by membership id.

    Period, certainty, evidence kinds and archives filter the attestations as for relations
    (``attestation_conditions``); ``unidentified=drop`` leaves out unidentified persons; with
    ``max_group_size=N`` a group with more than N members in the slice is left out whole (its
    size is counted over the whole slice, whatever ``persons`` says). ``kind`` and
    ``min_collections`` concern relations and do not apply. ``persons`` and ``groups`` restrict
    the answer to memberships of those persons or in those groups.
    """
    s = resolved.slice
    document = func.coalesce(Source.copy_of_id, Source.id)
    query = (
        select(
            Membership.id, Membership.person_id, Membership.group_id, Membership.role, Membership.start_earliest,
            Membership.end_latest, Attestation.id, Attestation.earliest, Attestation.latest, document,
        )
        .join(Membership, Attestation.membership_id == Membership.id)
        .join(Source, Attestation.source_id == Source.id)
        .outerjoin(Collection, Source.collection_id == Collection.id)
        .where(*attestation_conditions(resolved))
    )  # fmt: skip
    if s.unidentified == "drop":
        query = query.join(Person, Membership.person_id == Person.id).where(Person.unidentified.is_(False))
    size_query = query.with_only_columns(Membership.group_id).group_by(Membership.group_id)
    if persons is not None:
        query = query.where(Membership.person_id.in_(sorted(set(persons))))
    if groups is not None:
        group_ids = sorted(set(groups))
        query = query.where(Membership.group_id.in_(group_ids))
        size_query = size_query.where(Membership.group_id.in_(group_ids))
    rows = session.connection().execute(query).all()
    too_large: set[int] = set()
    if s.max_group_size is not None:
        size_query = size_query.having(func.count(Membership.person_id.distinct()) > s.max_group_size)
        too_large = set(session.connection().execute(size_query).scalars())

    found: dict[int, list] = {}
    for membership_id, person, group, role, start, end, att_id, earliest, latest, doc in rows:
        if group in too_large:
            continue
        first, last = earliest or latest, latest or earliest  # an open end takes the other one
        entry = found.get(membership_id)
        if entry is None:
            found[membership_id] = [person, group, role or "", start, end, [att_id], {doc}, first, last]
            continue
        entry[5].append(att_id)
        entry[6].add(doc)
        if first is not None and (entry[7] is None or first < entry[7]):
            entry[7] = first
        if last is not None and (entry[8] is None or last > entry[8]):
            entry[8] = last
    return [_membership(mid, *entry) for mid, entry in sorted(found.items())]


def _membership(mid: int, person: int, group: int, role: str, start: date | None, end: date | None,
                attestations: list[int], documents: set[int], attested_from: date | None,
                attested_to: date | None) -> MembershipEvidence:  # fmt: skip
    """Return one membership with its term: recorded ends where given, else the attestation span."""
    start_from = "term" if start else ("attestations" if attested_from else None)
    end_from = "term" if end else ("attestations" if attested_to else None)
    start, end = start or attested_from, end or attested_to
    if start is None and end is not None:
        start, start_from = end, "other end"
    elif end is None and start is not None:
        end, end_from = start, "other end"
    if start is not None and end is not None and end < start:  # a term recorded after its evidence
        (start, start_from), (end, end_from) = (end, end_from), (start, start_from)
    return MembershipEvidence(
        membership_id=mid, person=person, group=group, role=role, start=start, end=end, start_from=start_from,
        end_from=end_from, attested_from=attested_from, attested_to=attested_to,
        attestation_ids=tuple(sorted(attestations)), document_ids=tuple(sorted(documents)),
    )  # fmt: skip


def overlapping(a: MembershipEvidence, b: MembershipEvidence) -> bool | None:
    """Return True when the terms of two memberships share a day, False when not, None when one is undated.

    Examples
    --------
    >>> m = lambda s, e: MembershipEvidence(1, 1, 1, "", s, e, "term", "term", None, None, (), ())
    >>> overlapping(m(date(1700, 1, 1), date(1710, 12, 31)), m(date(1710, 12, 31), date(1720, 1, 1)))
    True
    >>> overlapping(m(date(1650, 1, 1), date(1660, 1, 1)), m(date(1712, 1, 1), date(1712, 12, 31)))
    False
    """
    if a.start is None or b.start is None:
        return None
    return a.start <= b.end and b.start <= a.end


@dataclass(frozen=True)
class CommonGroup:
    """A group two persons share, with the memberships of each and whether their terms overlap."""

    group: int
    """Id of the group."""
    first: list[MembershipEvidence]
    """Memberships of the first person in it (one per role)."""
    second: list[MembershipEvidence]
    """Memberships of the second person in it."""
    overlap: bool | None
    """True when a term of one overlaps a term of the other, False when none does, None when
    every pair has an undated membership."""


def groups_in_common(evidence: Iterable[MembershipEvidence], a: int, b: int) -> list[CommonGroup]:
    """Return the groups persons ``a`` and ``b`` share, by group id: what a projected tie rests on.

    Examples
    --------
    >>> m = lambda p, g, y: MembershipEvidence(0, p, g, "", date(y, 1, 1), date(y, 12, 31), "attestations",
    ...                                        "attestations", None, None, (), ())
    >>> [(c.group, c.overlap) for c in groups_in_common([m(1, 5, 1650), m(2, 5, 1712), m(1, 6, 1700), m(2, 6, 1700)], 1, 2)]
    [(5, False), (6, True)]
    """
    of: dict[int, dict[int, list[MembershipEvidence]]] = defaultdict(lambda: {a: [], b: []})
    for m in evidence:
        if m.person in (a, b):
            of[m.group][m.person].append(m)
    common = []
    for group, by_person in sorted(of.items()):
        if by_person[a] and by_person[b]:
            verdicts = {overlapping(x, y) for x in by_person[a] for y in by_person[b]}
            overlap = True if True in verdicts else (False if False in verdicts else None)
            common.append(CommonGroup(group=group, first=by_person[a], second=by_person[b], overlap=overlap))
    return common


# --- the two-mode graph ------------------------------------------------------------------


def bipartite_graph(evidence: Iterable[MembershipEvidence], *, weight: str = "documents") -> nx.Graph:
    """Return the two-mode graph: persons ``("p", id)`` with ``bipartite=0``, groups ``("g", id)`` with ``bipartite=1``.

    One edge per person and group, whatever the number of roles; it carries ``weight`` (by
    default the distinct documents attesting any of the memberships; ``"attestations"`` or
    ``"none"`` as in the slice), ``documents``, ``attestations``, ``attestation_ids``,
    ``membership_ids`` and ``roles``.

    Examples
    --------
    >>> m = lambda mid, p, g, docs: MembershipEvidence(mid, p, g, "", None, None, None, None, None, None, docs, docs)
    >>> B = bipartite_graph([m(1, 1, 10, (5,)), m(2, 2, 10, (5, 6))])
    >>> B.nodes[("g", 10)]["bipartite"], B.edges[("p", 2), ("g", 10)]["weight"]
    (1, 2.0)
    """
    B = nx.Graph()
    pairs: dict[tuple[int, int], list[MembershipEvidence]] = defaultdict(list)
    for m in evidence:
        pairs[(m.person, m.group)].append(m)
    for person, group in sorted(pairs):
        B.add_node(("p", person), bipartite=0)
        B.add_node(("g", group), bipartite=1)
    for (person, group), ms in sorted(pairs.items()):
        documents = {d for m in ms for d in m.document_ids}
        attestations = sorted(a for m in ms for a in m.attestation_ids)
        B.add_edge(
            ("p", person), ("g", group), weight=tie_weight(len(attestations), len(documents), weight),
            documents=len(documents), attestations=len(attestations), attestation_ids=attestations,
            membership_ids=sorted(m.membership_id for m in ms), roles=sorted({m.role for m in ms}),
        )  # fmt: skip
    return B


@dataclass(frozen=True)
class TwoModeSummary:
    """The figures of a two-mode graph, for each mode apart."""

    persons: int
    """Persons with at least one membership."""
    groups: int
    """Groups with at least one member."""
    memberships: int
    """Person-group ties (several roles in one group count once)."""
    density: float | None
    """Ties divided by persons × groups, the ties a two-mode graph can have; None when a mode is empty."""
    person_degree: dict[int, int]
    """Groups of each person, by person id."""
    group_degree: dict[int, int]
    """Members of each group, by group id."""
    person_clustering: dict[int, float]
    """Bipartite clustering of each person (Latapy, Magnien & Del Vecchio 2008)."""
    group_clustering: dict[int, float]
    """Bipartite clustering of each group."""
    mean_person_degree: float | None
    """Mean number of groups per person."""
    mean_group_degree: float | None
    """Mean number of members per group."""
    mean_person_clustering: float | None
    """Mean clustering of the persons."""
    mean_group_clustering: float | None
    """Mean clustering of the groups."""


def two_mode_summary(B: nx.Graph, *, mode: str = "dot") -> TwoModeSummary:
    """Return degree of each mode, density and bipartite clustering of a graph from ``bipartite_graph``.

    Density of a two-mode graph is the ties present over the ties possible, persons × groups
    (Borgatti & Everett 1997). The clustering of a node is the mean, over the nodes of its own
    mode that share a neighbour with it, of the overlap of their neighbourhoods; ``mode`` is
    ``"dot"`` (shared / union), ``"min"`` or ``"max"`` (shared / the smaller or larger one).

    References
    ----------
    Latapy, M., Magnien, C., & Del Vecchio, N. (2008). Basic notions for the analysis of large
    two-mode networks. Social Networks 30(1), 31-48.
    Borgatti, S. P., & Everett, M. G. (1997). Network analysis of 2-mode data. Social Networks
    19(3), 243-269.

    Examples
    --------
    >>> B = nx.Graph([(("p", 1), ("g", 1)), (("p", 2), ("g", 1)), (("p", 2), ("g", 2))])
    >>> s = two_mode_summary(B)
    >>> s.density, s.person_degree, s.group_clustering
    (0.75, {1: 1, 2: 2}, {1: 0.5, 2: 0.5})
    """
    persons = sorted(n for n in B if n[0] == "p")
    groups = sorted(n for n in B if n[0] == "g")
    if mode == "dot" and len(B):
        clustering = _dot_clustering(B, persons, groups)
    else:
        clustering = bipartite.latapy_clustering(B, mode=mode) if len(B) else {}

    def mean(values: Sequence[float]) -> float | None:
        return sum(values) / len(values) if values else None

    person_degree = {n[1]: B.degree(n) for n in persons}
    group_degree = {n[1]: B.degree(n) for n in groups}
    return TwoModeSummary(
        persons=len(persons), groups=len(groups), memberships=B.number_of_edges(),
        density=B.number_of_edges() / (len(persons) * len(groups)) if persons and groups else None,
        person_degree=person_degree, group_degree=group_degree,
        person_clustering={n[1]: clustering[n] for n in persons}, group_clustering={n[1]: clustering[n] for n in groups},
        mean_person_degree=mean(list(person_degree.values())), mean_group_degree=mean(list(group_degree.values())),
        mean_person_clustering=mean([clustering[n] for n in persons]),
        mean_group_clustering=mean([clustering[n] for n in groups]),
    )  # fmt: skip


def _dot_clustering(B: nx.Graph, persons: list, groups: list) -> dict:
    """Return the "dot" clustering of every node of ``B`` from sparse matrix products.

    For the persons, with S = M Mᵀ (M the incidence matrix), the clustering of u is the mean over
    the v ≠ u with S_uv > 0 of S_uv / (S_uu + S_vv − S_uv): the same figure as networkx's
    ``latapy_clustering(mode="dot")`` (0 for a node with no other node two steps away), without
    visiting the pairs one by one in Python. The groups are done the same way with Mᵀ.
    """
    row = {n: i for i, n in enumerate(persons)}
    col = {n: j for j, n in enumerate(groups)}
    pairs = [(row[u], col[v]) if u[0] == "p" else (row[v], col[u]) for u, v in B.edges()]
    rows, cols = (np.array(x, dtype=np.int64) for x in zip(*pairs)) if pairs else (np.zeros(0, np.int64),) * 2
    M = sp.csr_array((np.ones(len(rows)), (rows, cols)), shape=(len(persons), len(groups)))
    clustering: dict = {}
    for nodes, A in ((persons, M), (groups, M.T.tocsr())):
        S = (A @ A.T).tocoo()
        d = np.zeros(len(nodes))
        on = S.row == S.col
        d[S.row[on]] = S.data[on]
        off = ~on
        i, j, shared = S.row[off], S.col[off], S.data[off]
        overlap = shared / (d[i] + d[j] - shared)
        total = np.bincount(i, weights=overlap, minlength=len(nodes))
        count = np.bincount(i, minlength=len(nodes))
        values = np.divide(total, count, out=np.zeros(len(nodes)), where=count > 0)
        clustering.update(zip(nodes, values.tolist()))
    return clustering


# --- incidence and projections --------------------------------------------------------------


@dataclass(frozen=True)
class Incidence:
    """The person-by-group incidence matrix B of a set of memberships."""

    matrix: sp.csr_array
    """B: 1 where the person has a membership of the group, else 0 (int64)."""
    persons: tuple[int, ...]
    """Person ids in the order of the rows (ascending)."""
    groups: tuple[int, ...]
    """Group ids in the order of the columns (ascending)."""


def incidence(evidence: Sequence[MembershipEvidence]) -> Incidence:
    """Return the incidence matrix of the memberships: one row per person, one column per group.

    Examples
    --------
    >>> m = lambda p, g: MembershipEvidence(0, p, g, "", None, None, None, None, None, None, (), ())
    >>> inc = incidence([m(7, 1), m(7, 2), m(9, 2), m(9, 2)])
    >>> inc.persons, inc.groups, inc.matrix.toarray().tolist()
    ((7, 9), (1, 2), [[1, 1], [0, 1]])
    """
    person_ids = np.array([m.person for m in evidence], dtype=np.int64)
    group_ids = np.array([m.group for m in evidence], dtype=np.int64)
    persons, rows = np.unique(person_ids, return_inverse=True)
    groups, cols = np.unique(group_ids, return_inverse=True)
    B = sp.csr_array((np.ones(len(rows), dtype=np.int64), (rows, cols)), shape=(len(persons), len(groups)))
    B.sum_duplicates()
    B.data[:] = 1  # several roles in one group are one membership of it
    return Incidence(matrix=B, persons=tuple(persons.tolist()), groups=tuple(groups.tolist()))


@dataclass(frozen=True)
class Projection:
    """A one-mode projection of memberships: persons tied by shared groups, or groups by shared members."""

    onto: str
    """"persons" (person by person, B Bᵀ) or "groups" (group by group, Bᵀ B)."""
    weighting: str
    """"shared", "newman" or "jaccard"."""
    overlap: str
    """"any", or "required" (only memberships whose terms overlap count)."""
    nodes: tuple[int, ...]
    """Ids of the persons (or groups), in the order of rows and columns (ascending)."""
    matrix: sp.csr_array
    """The weights: symmetric, float64, zero on the diagonal (no self-loops)."""
    shared: sp.csr_array
    """Shared groups (or members) counted for each pair: symmetric, int64, zero on the diagonal."""
    diagonal: np.ndarray
    """Groups of each person (members of each group): the diagonal of B Bᵀ (Bᵀ B)."""


def project(
    evidence: Sequence[MembershipEvidence], *, onto: str = "persons", weighting: str = "shared", overlap: str = "any"
) -> Projection:
    """Return the projection of the memberships onto persons or groups, weighted.

    With M = B (onto persons) or Bᵀ (onto groups), the shared counts are S = M Mᵀ (Breiger
    1974). Weightings of a pair i, j:

    - ``shared``: S_ij, the number of groups (or members) they share;
    - ``newman``: the sum over shared groups g of 1 / (n_g − 1), n_g the members of g, so a
      large group ties each pair weakly and a group of one contributes nothing (Newman 2001);
      in matrix form M diag(1 / (n − 1)) Mᵀ;
    - ``jaccard``: S_ij / |groups of i ∪ groups of j| = S_ij / (d_i + d_j − S_ij).

    With ``overlap="required"``, a shared group counts only when the two terms in it overlap
    (see ``MembershipEvidence``; undated memberships overlap nothing). The pairs that overlap
    are found group by group by a sweep over the terms sorted by start, in numpy; Jaccard then
    divides the overlapping shared groups by the union of all their groups.

    References
    ----------
    Breiger, R. L. (1974). The duality of persons and groups. Social Forces 53(2), 181-190.
    Newman, M. E. J. (2001). Scientific collaboration networks. II. Shortest paths, weighted
    networks, and centrality. Physical Review E 64, 016132.
    Latapy, M., Magnien, C., & Del Vecchio, N. (2008). Basic notions for the analysis of large
    two-mode networks. Social Networks 30(1), 31-48 (the overlap weighting).

    Examples
    --------
    >>> m = lambda p, g: MembershipEvidence(0, p, g, "", None, None, None, None, None, None, (), ())
    >>> P = project([m(1, 10), m(2, 10), m(2, 11), m(3, 10), m(3, 11)], weighting="newman")
    >>> P.matrix.toarray().tolist()
    [[0.0, 0.5, 0.5], [0.5, 0.0, 1.5], [0.5, 1.5, 0.0]]
    >>> P.diagonal.tolist()
    [1, 2, 2]
    """
    _check(onto=onto, weighting=weighting, overlap=overlap)
    inc = incidence(evidence)
    M = inc.matrix if onto == "persons" else inc.matrix.T.tocsr()
    nodes = inc.persons if onto == "persons" else inc.groups
    S = (M @ M.T).tocsr()
    diagonal = S.diagonal()
    S = _without_diagonal(S)
    sizes = np.asarray(M.sum(axis=0)).ravel()  # members of each group (or groups of each person)
    contribution = np.divide(1.0, sizes - 1, out=np.zeros(len(sizes)), where=sizes > 1)

    if overlap == "any":
        shared = S
        if weighting == "newman":
            W = _without_diagonal((M @ sp.diags_array(contribution) @ M.T).tocsr())
        else:
            W = S.astype(np.float64)
    else:
        i, j, c = _overlapping_pairs(evidence, onto, inc)
        n = len(nodes)
        shared = _symmetric(np.ones(len(i), dtype=np.int64), i, j, n)
        W = _symmetric(contribution[c], i, j, n) if weighting == "newman" else shared.astype(np.float64)
    if weighting == "jaccard":
        W = _jaccard(shared, S, diagonal)
    W.eliminate_zeros()
    shared.eliminate_zeros()
    return Projection(onto=onto, weighting=weighting, overlap=overlap, nodes=nodes, matrix=W.tocsr(),
                      shared=shared.tocsr(), diagonal=diagonal)  # fmt: skip


def projected_graph(
    evidence: Sequence[MembershipEvidence],
    *,
    onto: str = "persons",
    weighting: str = "shared",
    overlap: str = "any",
    shared_ids: bool = True,
) -> nx.Graph:
    """Return the projection as a graph: every person (or group) of the evidence a node, by id.

    Edges carry ``weight`` (see ``project``), ``shared`` (the number of shared groups or
    members counted) and, with ``shared_ids``, the ids of those groups (edge attribute
    ``groups`` on a person projection) or members (``persons`` on a group projection), so that
    a tie can be opened to show what it rests on. There are no self-loops. The graph's
    ``graph`` dict records ``onto``, ``weighting`` and ``overlap``.

    Examples
    --------
    >>> m = lambda p, g: MembershipEvidence(0, p, g, "", None, None, None, None, None, None, (), ())
    >>> G = projected_graph([m(1, 10), m(2, 10), m(2, 11), m(3, 11)])
    >>> sorted(G.edges(data="groups"))
    [(1, 2, [10]), (2, 3, [11])]
    """
    projection = project(evidence, onto=onto, weighting=weighting, overlap=overlap)
    G = nx.Graph(onto=onto, weighting=weighting, overlap=overlap)
    nodes = np.array(projection.nodes, dtype=np.int64)
    G.add_nodes_from(projection.nodes)
    upper, counted = (_upper(A) for A in (projection.matrix, projection.shared))
    if not (np.array_equal(upper.row, counted.row) and np.array_equal(upper.col, counted.col)):
        raise AssertionError("the weights and the shared counts are not on the same pairs")
    shared = counted.data
    us, vs = nodes[upper.row].tolist(), nodes[upper.col].tolist()
    if not shared_ids:
        G.add_edges_from(
            (u, v, {"weight": w, "shared": s}) for u, v, w, s in zip(us, vs, upper.data.tolist(), shared.tolist())
        )
        return G
    inc = incidence(evidence)
    i, j, c = _overlapping_pairs(evidence, onto, inc) if overlap == "required" else _all_pairs(onto, inc)
    other = np.array(inc.groups if onto == "persons" else inc.persons, dtype=np.int64)
    code = i * len(nodes) + j
    order = np.lexsort((other[c], code))
    code, via = code[order], other[c][order].tolist()
    starts = np.flatnonzero(np.r_[len(code) > 0, code[1:] != code[:-1]])
    if not np.array_equal(code[starts], upper.row.astype(np.int64) * len(nodes) + upper.col):
        raise AssertionError("the pairs of the shared groups and of the weights differ")
    ends = np.r_[starts[1:], len(code)].tolist()
    name = "groups" if onto == "persons" else "persons"
    G.add_edges_from(
        (u, v, {"weight": w, "shared": s, name: via[a:b]})
        for u, v, w, s, a, b in zip(us, vs, upper.data.tolist(), shared.tolist(), starts.tolist(), ends)
    )
    return G


def _upper(A: sp.csr_array) -> sp.coo_array:
    """Return the entries above the diagonal, row by row with columns ascending."""
    upper = sp.triu(A, k=1, format="csr")
    upper.sort_indices()
    return upper.tocoo()


def _check(**given: str) -> None:
    accepted = {"onto": PROJECTION_MODES, "weighting": WEIGHTINGS, "overlap": OVERLAPS}
    for name, value in given.items():
        if value not in accepted[name]:
            raise ValueError(f"{name}={value!r} is not one of {', '.join(accepted[name])}")


def _without_diagonal(A: sp.csr_array) -> sp.csr_array:
    """Return ``A`` (changed in place) without its diagonal entries."""
    rows = np.repeat(np.arange(A.shape[0]), np.diff(A.indptr))
    A.data[rows == A.indices] = 0
    A.eliminate_zeros()
    return A


def _symmetric(values: np.ndarray, i: np.ndarray, j: np.ndarray, n: int) -> sp.csr_array:
    """Return the symmetric matrix with ``values`` summed at (i, j) and (j, i)."""
    upper = sp.csr_array((values, (i, j)), shape=(n, n))
    upper.sum_duplicates()
    return (upper + upper.T).tocsr()


def _jaccard(shared: sp.csr_array, S: sp.csr_array, diagonal: np.ndarray) -> sp.csr_array:
    """Return shared_ij / (d_i + d_j − S_ij), on the pairs of ``shared`` (a subset of those of S)."""
    union = S.tocoo()
    union = sp.csr_array(
        (1.0 / (diagonal[union.row] + diagonal[union.col] - union.data), (union.row, union.col)), shape=S.shape
    )
    return shared.multiply(union).tocsr()


def _all_pairs(onto: str, inc: Incidence) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return (i, j, c), i < j: every pair of rows of M sharing column c, once."""
    M = (inc.matrix if onto == "persons" else inc.matrix.T).tocoo()
    zero = np.zeros(len(M.row), dtype=np.int64)
    return _pairs_within(M.row.astype(np.int64), M.col.astype(np.int64), zero, zero)


def _overlapping_pairs(
    evidence: Sequence[MembershipEvidence], onto: str, inc: Incidence
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return (i, j, c), i < j: the pairs of rows whose terms in column c overlap, once each."""
    person_index = {p: n for n, p in enumerate(inc.persons)}
    group_index = {g: n for n, g in enumerate(inc.groups)}
    dated = [m for m in evidence if m.start is not None]
    persons = np.array([person_index[m.person] for m in dated], dtype=np.int64)
    groups = np.array([group_index[m.group] for m in dated], dtype=np.int64)
    start = np.array([m.start.toordinal() for m in dated], dtype=np.int64)
    end = np.array([m.end.toordinal() for m in dated], dtype=np.int64)
    if onto == "persons":
        return _pairs_within(persons, groups, start, end)
    return _pairs_within(groups, persons, start, end)


def _pairs_within(
    node: np.ndarray, column: np.ndarray, start: np.ndarray, end: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return (i, j, c), i < j distinct nodes with intervals in the same column c that share a day.

    Intervals are sorted by column and start; interval k overlaps every later one in its
    column that starts no later than it ends, found at once for all k with a binary search.
    The pairs are then generated in numpy, never one by one in Python.
    """
    empty = np.zeros(0, dtype=np.int64)
    if len(node) == 0:
        return empty, empty, empty
    order = np.lexsort((start, column))
    node, column, start, end = node[order], column[order], start[order], end[order]
    span = int(max(end.max(), start.max())) + 2
    key = column * span + start
    last = np.searchsorted(key, column * span + end, side="right")  # first interval beyond reach
    counts = last - np.arange(len(node)) - 1
    first = np.repeat(np.arange(len(node)), counts)
    offsets = np.arange(int(counts.sum())) - np.repeat(np.cumsum(counts) - counts, counts)
    second = first + 1 + offsets
    a, b, c = node[first], node[second], column[first]
    keep = a != b  # two roles of one person in one group
    lo, hi, c = np.minimum(a, b)[keep], np.maximum(a, b)[keep], c[keep]
    width = int(column.max()) + 1
    nodes = int(node.max()) + 1
    code = np.unique((lo * nodes + hi) * width + c)
    pair, c = np.divmod(code, width)
    i, j = np.divmod(pair, nodes)
    return i, j, c


# --- matrices as CSV -------------------------------------------------------------------------


def incidence_csv(
    inc: Incidence,
    *,
    person_labels: Mapping[int, tuple[str, str]],
    group_labels: Mapping[int, tuple[str, str]],
    max_cells: int = MAX_CSV_CELLS,
) -> str:
    """Return the incidence matrix as CSV text: one row per person, one column per group, 1 or 0.

    Labels are ``(key, name)`` by id; rows and columns are sorted by key and labelled
    "key (name)" (keys hold no spaces, so the key is the text before the first space). The first
    cell is "person \\ group". R reads it with ``read.csv(file, row.names = 1, check.names =
    FALSE)``. More than ``max_cells`` cells raises ValueError.

    Examples
    --------
    >>> m = lambda p, g: MembershipEvidence(0, p, g, "", None, None, None, None, None, None, (), ())
    >>> text = incidence_csv(incidence([m(1, 5)]), person_labels={1: ("p-a", "Anna")}, group_labels={5: ("g-x", "Guild")})
    >>> print(text, end="")
    person \\ group,g-x (Guild)
    p-a (Anna),1
    """
    return _matrix_csv(inc.matrix, inc.persons, inc.groups, person_labels, group_labels, "person \\ group", max_cells)


def adjacency_csv(projection: Projection, *, labels: Mapping[int, tuple[str, str]], max_cells: int = MAX_CSV_CELLS) -> str:
    """Return the projected adjacency matrix as CSV text, labelled as in ``incidence_csv``.

    Cells hold the weights of the projection's weighting; the diagonal is 0 (no self-loops).
    """
    corner = "person \\ person" if projection.onto == "persons" else "group \\ group"
    return _matrix_csv(projection.matrix, projection.nodes, projection.nodes, labels, labels, corner, max_cells)


def _matrix_csv(
    A: sp.csr_array, rows: Sequence[Hashable], cols: Sequence[Hashable], row_labels: Mapping, col_labels: Mapping,
    corner: str, max_cells: int,
) -> str:  # fmt: skip
    if len(rows) * len(cols) > max_cells:
        raise ValueError(f"a matrix of {len(rows)} × {len(cols)} cells is more than {max_cells} cells")
    row_order = sorted(range(len(rows)), key=lambda n: row_labels[rows[n]][0])
    col_order = sorted(range(len(cols)), key=lambda n: col_labels[cols[n]][0])
    A = A.tocsr()[row_order][:, col_order]
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow([corner, *(_label(col_labels[cols[n]]) for n in col_order)])
    for position, n in enumerate(row_order):
        values = A[[position]].toarray().ravel()
        writer.writerow([_label(row_labels[rows[n]]), *(_number(v) for v in values)])
    return out.getvalue()


def _label(label: tuple[str, str]) -> str:
    key, name = label
    return f"{key} ({' '.join(name.split())})"


def _number(value: float) -> str:
    return str(int(value)) if float(value).is_integer() else format(float(value), ".12g")


def with_slice_limits(resolved: ResolvedSlice, **changes: object) -> ResolvedSlice:
    """Return ``resolved`` with some slice settings changed (e.g. ``max_group_size=None``)."""
    return replace(resolved, slice=resolved.slice.with_(**changes))
