"""The ego network of one person in a slice: the ego, the persons within one or two steps, and
every tie among them (not only the ties to the ego).

It is read from the neighbourhood alone (the ego's ties, then the ties of the persons one step
away), never from the whole graph, so it stays quick on large datasets. A hub keeps only its
strongest alters up to a cap, and says how many it left out.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

from sqlalchemy.orm import Session

from app.documented import DOCUMENTED
from app.network.slice import (
    NeighbourTotal,
    RelationTotal,
    ResolvedSlice,
    SliceTotal,
    neighbour_totals,
    neighbours,
    relation_totals,
    slice_totals,
    tie_weight,
)
from app.store.network_labels import KindLabel, PersonLabel, list_person_labels, list_relation_kinds

__all__ = ["DEFAULT_MAX_ALTERS", "EgoEdge", "EgoNetwork", "EgoNode", "ego_network"]

DEFAULT_MAX_ALTERS = {1: 60, 2: 150}
"""How many alters are drawn at most, by radius (the ego is not counted)."""


@dataclass(frozen=True)
class EgoNode:
    """One person of the ego network."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The person's key."""
    name: str
    """Display name."""
    kind: str
    """individual or corporate."""
    unidentified: bool
    """True for a person known only by a description."""
    degree: int
    """Persons it is tied to in this ego network (itself counted only when the slice keeps loops)."""
    distance: int
    """Steps from the ego: 0 for the ego, 1 or 2 for alters."""


@dataclass(frozen=True)
class EgoEdge:
    """One tie of the ego network: one relation kind between one pair of persons."""

    __pydantic_config__ = DOCUMENTED

    source: str
    """Key of the first person (for a directed tie, the sender, patron, parent...)."""
    target: str
    """Key of the second person."""
    source_name: str
    """Display name of the first person."""
    target_name: str
    """Display name of the second person."""
    kind: str
    """Key of the relation kind."""
    kind_label: str
    """Label of the relation kind."""
    directed: bool
    """True when drawn with an arrow (a directed kind under `direction=recorded`)."""
    attestations: int
    """Attestations of the tie in the slice."""
    documents: int
    """Distinct documents attesting it in the slice (a copy and its original count once)."""
    weight: float
    """Weight under the slice's weight mode (documents, attestations, or 1 for none)."""
    relation_ids: list[int]
    """The relations behind the edge (two when both directions are merged)."""
    co_membership: bool = False
    """True for a tie by shared groups (mode=co-membership or both): no relation, no direction."""
    shared_groups: int | None = None
    """For a tie by shared groups, the groups counted (None for a relation)."""


@dataclass(frozen=True)
class EgoNetwork:
    """The ego, its alters within the radius and all ties among them, in one slice."""

    __pydantic_config__ = DOCUMENTED

    ego: str
    """Key of the ego."""
    radius: int
    """1 (the ego's alters) or 2 (also the alters' alters)."""
    nodes: list[EgoNode]
    """The ego first, then alters by distance and key."""
    edges: list[EgoEdge]
    """Every tie among the drawn persons, by pair and kind; self-loops included."""
    max_alters: int
    """The cap on drawn alters."""
    left_out: dict[int, int] = field(default_factory=dict)
    """Alters found but not drawn because of the cap, by distance (1, 2)."""
    co_members_left_out: int = 0
    """Under mode=co-membership or both: persons sharing a group who were not drawn (the cap)."""


def ego_network(
    session: Session, resolved: ResolvedSlice, ego_id: int, *, radius: int = 1, max_alters: int | None = None
) -> EgoNetwork:
    """Return the ego network of the person ``ego_id`` within ``radius`` steps in the slice.

    The slice's ``direction`` decides what a tie is: ``recorded`` draws each relation with its
    own direction; ``undirected`` merges the two directions of a kind between one pair into one
    tie; ``reciprocal`` keeps a directed kind only where it is attested both ways (merged into
    one undirected tie), and undirected kinds as they are. A step follows a tie either way.

    Self-loops are always drawn, even though measures leave them out unless ``loops=keep``;
    ``loops`` only decides whether a loop adds to the node's degree. The node set
    (``nodes=``) only decides who counts as an isolate, and every alter has a tie, so it
    changes nothing here: the ego is drawn even when the slice leaves it without a tie.

    At most ``max_alters`` alters are drawn (default: 60 at radius 1, 150 at radius 2): those
    with the strongest ties to the ego first, then, at radius 2, those with the strongest ties
    to the drawn radius-1 alters. Strength is the summed weight, then documents, then
    attestations; ties of strength are broken by key, so the same data gives the same network.
    Persons two steps away only through a left-out alter are not looked for.
    """
    if radius not in (1, 2):
        raise ValueError(f"radius must be 1 or 2, not {radius}")
    cap = DEFAULT_MAX_ALTERS[radius] if max_alters is None else max_alters
    direction, weight = resolved.slice.direction, resolved.slice.weight
    def totals(persons: Iterable[int]) -> dict[int, Sequence[float]]:
        """Return the strength of each person's ties to ``persons``: (weight, documents, attestations)."""
        persons = sorted(persons)
        if direction == "reciprocal":  # whether a tie counts depends on the other direction: per relation
            found: list[RelationTotal] = []
            for start in range(0, len(persons), 400):  # chunks stay under SQLite's limit of bound parameters
                found += relation_totals(session, resolved, persons=persons[start : start + 400])
            return _strength_to(_strengths(found, direction, weight), set(persons))
        strength: dict[int, Sequence[float]] = {}  # tuples: a hub's thousands of alters make no lists for the collector
        for start in range(0, len(persons), 200):
            for row in neighbour_totals(session, resolved, persons=persons[start : start + 200]):
                earlier = strength.get(row.person)  # met again from another chunk of persons
                w, d, a = _summed_weight(row, weight), row.documents, row.attestations
                strength[row.person] = (w, d, a) if earlier is None else (earlier[0] + w, earlier[1] + d, earlier[2] + a)
        return strength

    def tied_to(persons: Iterable[int], known: set[int]) -> set[int]:
        """Return the persons tied to ``persons`` in the slice but not ``known``, without the strength of the ties."""
        persons = sorted(persons)
        return {person for start in range(0, len(persons), 200)
                for person in neighbours(session, resolved, persons=persons[start : start + 200], known=known)}  # fmt: skip

    # Alters are chosen on sums made by the database; evidence rows are read only for the drawn.
    first = totals([ego_id])
    found_first = set(first) - {ego_id}
    kept_first = _strongest(session, first, found_first, cap)
    kept_second: set[int] = set()
    left_out = {1: len(found_first) - len(kept_first)}
    if radius == 2:
        room = max(cap - len(kept_first), 0)
        if room == 0 and direction != "reciprocal":  # none can be drawn: who they are is enough, not how strong
            found_second = tied_to(kept_first, found_first | {ego_id})  # the ties to those already found are not read
        else:
            second = totals(kept_first)
            found_second = set(second) - found_first - {ego_id}
            kept_second = _strongest(session, second, found_second, room)
        left_out[2] = len(found_second) - len(kept_second)

    drawn = {ego_id} | kept_first | kept_second
    labels = list_person_labels(session=session, ids=drawn)
    # As recorded, a tie is one relation (one per kind and ordered pair): its documents need no list.
    inside = slice_totals(session, resolved, persons=sorted(drawn), both_ends=True, document_lists=direction != "recorded")
    kinds = {k.id: k for k in list_relation_kinds(session=session)}
    edges = [_edge(tie, labels, kinds, weight) for tie in _ties(inside, direction).values()]
    edges.sort(key=lambda e: (e.source, e.target, e.kind))
    degree = _degrees(edges, keep_loops=resolved.slice.loops == "keep")
    distance = {ego_id: 0, **{p: 1 for p in kept_first}, **{p: 2 for p in kept_second}}
    nodes = [
        EgoNode(key=labels[p].key, name=labels[p].name, kind=labels[p].kind, unidentified=labels[p].unidentified,
                degree=degree.get(labels[p].key, 0), distance=distance[p])
        for p in drawn
    ]  # fmt: skip
    nodes.sort(key=lambda n: (n.distance, n.key))
    return EgoNetwork(ego=labels[ego_id].key, radius=radius, nodes=nodes, edges=edges, max_alters=cap, left_out=left_out)


# --- helpers -------------------------------------------------------------------------------


@dataclass
class _Tie:
    person_a: int
    person_b: int
    kind_id: int
    directed: bool
    relations: list[SliceTotal] = field(default_factory=list)

    @property
    def attestations(self) -> int:
        if len(self.relations) == 1:
            return self.relations[0].attestations
        return sum(r.attestations for r in self.relations)  # an attestation belongs to one relation

    @property
    def documents(self) -> int:
        if len(self.relations) == 1:
            return self.relations[0].documents
        return len({d for r in self.relations for d in r.document_list.split(",")})  # a document may attest both


def _ties(rows: Iterable[SliceTotal], direction: str) -> dict[tuple, _Tie]:
    """Return the ties of the slice's relations under the direction mode, keyed by pair and kind."""
    ties: dict[tuple, _Tie] = {}
    directions: dict[tuple, set[tuple[int, int]]] = defaultdict(set)
    for row in rows:
        a, b, directed = row.person_a, row.person_b, row.directed
        if direction != "recorded" and directed:
            directions[(min(a, b), max(a, b), row.kind_id)].add((a, b))
            a, b, directed = min(a, b), max(a, b), False
        tie = ties.get((a, b, row.kind_id))
        if tie is None:
            tie = ties[(a, b, row.kind_id)] = _Tie(a, b, row.kind_id, directed)
        tie.relations.append(row)
    if direction == "reciprocal":
        for key, seen in directions.items():
            a, b, _kind = key
            if a != b and len(seen) < 2:  # a directed kind attested one way only
                del ties[key]
    return ties


def _strengths(totals: Iterable[RelationTotal], direction: str, weight: str) -> dict[tuple, list[float]]:
    """Return [weight, documents, attestations] of each tie (pair and kind) under the direction mode.

    Used to choose alters: where two directions merge into one tie their counts are added.
    """
    strengths: dict[tuple, list[float]] = {}
    directions: dict[tuple, set[tuple[int, int]]] = defaultdict(set)
    for total in totals:
        a, b = total.person_a, total.person_b
        if direction != "recorded" and total.directed:
            directions[(min(a, b), max(a, b), total.kind_id)].add((a, b))
            a, b = min(a, b), max(a, b)
        s = strengths.setdefault((a, b, total.kind_id), [0.0, 0, 0])
        s[0] += tie_weight(total.attestations, total.documents, weight)
        s[1] += total.documents
        s[2] += total.attestations
    if direction == "reciprocal":
        for key, seen in directions.items():
            if key[0] != key[1] and len(seen) < 2:  # a directed kind attested one way only
                del strengths[key]
    return strengths


def _strength_to(ties: dict[tuple, list[float]], anchors: set[int]) -> dict[int, list[float]]:
    """Return, for every person tied to one of ``anchors``, the summed strength of those ties."""
    strength: dict[int, list[float]] = defaultdict(lambda: [0.0, 0, 0])
    for (a, b, _kind), tie in ties.items():
        for person, other in ((a, b), (b, a)):
            if other in anchors:
                s = strength[person]
                s[0] += tie[0]
                s[1] += tie[1]
                s[2] += tie[2]
            if a == b:
                break
    return dict(strength)


def _summed_weight(row: NeighbourTotal, weight: str) -> float:
    """Return the sum over the row's relations of each relation's weight (see ``tie_weight``)."""
    if weight == "none":
        return float(row.relations)
    return tie_weight(row.attestations, row.documents, weight)


def _strongest(session: Session, strength: dict[int, Sequence[float]], candidates: set[int], cap: int) -> set[int]:
    """Return at most ``cap`` candidates, those with the strongest ties first.

    Strength is (summed weight, documents, attestations); equal strengths at the cut are
    decided by key, which is read only for them.
    """
    if len(candidates) <= cap:
        return set(candidates)
    if cap == 0:
        return set()
    ranked = sorted(candidates, key=strength.__getitem__, reverse=True)  # stable, as an ascending sort of negated keys
    boundary = strength[ranked[cap - 1]]
    kept = {p for p in ranked[:cap] if strength[p] != boundary}
    tied = [p for p in candidates if strength[p] == boundary]
    keys = {p: label.key for p, label in list_person_labels(session=session, ids=tied).items()}
    return kept | set(sorted(tied, key=keys.__getitem__)[: cap - len(kept)])


def _edge(tie: _Tie, labels: dict[int, PersonLabel], kinds: dict[int, KindLabel], weight: str) -> EgoEdge:
    attestations, documents = tie.attestations, tie.documents
    return EgoEdge(
        source=labels[tie.person_a].key, target=labels[tie.person_b].key, source_name=labels[tie.person_a].name,
        target_name=labels[tie.person_b].name, kind=kinds[tie.kind_id].key,
        kind_label=kinds[tie.kind_id].label, directed=tie.directed, attestations=attestations, documents=documents,
        weight=tie_weight(attestations, documents, weight),
        relation_ids=[tie.relations[0].relation_id] if len(tie.relations) == 1 else sorted(r.relation_id for r in tie.relations),
    )  # fmt: skip


def _degrees(edges: list[EgoEdge], *, keep_loops: bool) -> dict[str, int]:
    """Return, by key, how many distinct persons each person is tied to."""
    neighbours: dict[str, set[str]] = defaultdict(set)
    for edge in edges:
        if edge.source == edge.target and not keep_loops:
            continue
        neighbours[edge.source].add(edge.target)
        neighbours[edge.target].add(edge.source)
    return {key: len(others) for key, others in neighbours.items()}
