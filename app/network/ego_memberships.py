"""The ego network under ``mode=co-membership`` or ``mode=both``: ties by shared groups around one person.

Under ``mode=co-membership`` the alters are the persons who share a group with the ego (and,
at radius 2, with those), the strongest ties first up to the same cap as for relations; under
``mode=both`` the relation ego network (``app.network.ego``) is drawn and the ego's co-members
fill the room left under the cap. Every tie by shared groups among the persons drawn is an
edge of kind ``co-membership``, weighted as the person projection of ``app.network.twomode``
weighs it (the slice's ``weighting``, ``overlap`` and ``max_group_size``), so the drawing
agrees with the measure pages. Only the memberships of the persons concerned are read, never
the whole projection.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable
from dataclasses import dataclass, field, replace

from sqlalchemy.orm import Session

from app.network.ego import DEFAULT_MAX_ALTERS, EgoEdge, EgoNetwork, EgoNode, ego_network
from app.network.slice import ResolvedSlice
from app.network.twomode import MembershipEvidence, membership_evidence, overlapping
from app.store.network_labels import PersonLabel, list_person_labels, list_person_labels_by_key

__all__ = ["CO_MEMBERSHIP", "CO_MEMBERSHIP_LABEL", "GroupTie", "co_membership_ties", "ego_network_in_mode"]

CO_MEMBERSHIP = "co-membership"
"""The kind of an ego edge that stands for shared groups."""
CO_MEMBERSHIP_LABEL = "shared groups"
"""Its label in the legend and the list of ties."""
CHUNK = 400  # persons per query, under SQLite's limit of bound parameters


@dataclass
class GroupTie:
    """Two persons tied by the groups they share in the slice."""

    a: int
    b: int
    weight: float = 0.0
    """Weight under the slice's weighting (as in ``twomode.project``)."""
    groups: list[int] = field(default_factory=list)
    """The shared groups counted (under ``overlap=required`` only those where the terms overlap)."""
    attestation_ids: set[int] = field(default_factory=set)
    """Attestations of both persons' memberships in those groups."""
    documents: set[int] = field(default_factory=set)
    """Their distinct documents."""


def co_membership_ties(session: Session, resolved: ResolvedSlice, persons: Iterable[int], *, among: bool) -> dict[tuple[int, int], GroupTie]:
    """Return the ties by shared groups of ``persons``, keyed by the sorted pair of ids.

    With ``among``, only ties between two of ``persons``; otherwise every tie from one of them
    to anyone. Weights are those of ``twomode.project`` on the whole slice: a shared group of
    n members adds 1 (``shared``) or 1/(n − 1) (``newman``, Newman 2001); ``jaccard`` divides
    the shared groups counted by the union of both persons' groups. Under ``overlap=required``
    a group counts only where a term of one overlaps a term of the other.
    """
    s = resolved.slice
    anchors = set(persons)
    own = _evidence(session, resolved, persons=anchors)
    groups = {m.group for m in own}
    everyone = membership_evidence(session, resolved, groups=groups) if groups else []
    by_group: dict[int, dict[int, list[MembershipEvidence]]] = defaultdict(lambda: defaultdict(list))
    for m in everyone:
        by_group[m.group][m.person].append(m)
    ties: dict[tuple[int, int], GroupTie] = {}
    union_shared: dict[tuple[int, int], int] = defaultdict(int)  # every shared group, for Jaccard
    for group, members in by_group.items():
        size = len(members)
        for a in members.keys() & anchors:
            for b, theirs in members.items():
                if b == a or (among and (b not in anchors or b < a)):
                    continue
                pair = (min(a, b), max(a, b))
                if not among and b in anchors and b < a:
                    continue  # a pair of two anchors is met from its lower end only
                union_shared[pair] += 1
                if s.overlap == "required" and not any(overlapping(x, y) for x in members[a] for y in theirs):
                    continue
                tie = ties.get(pair) or ties.setdefault(pair, GroupTie(*pair))
                tie.groups.append(group)
                tie.weight += 1.0 if s.weighting != "newman" else 1.0 / (size - 1)
                for m in (*members[a], *theirs):
                    tie.attestation_ids.update(m.attestation_ids)
                    tie.documents.update(m.document_ids)
    if s.weighting == "jaccard" and ties:
        degree = _degrees(session, resolved, {p for pair in ties for p in pair}, own)
        for pair, tie in ties.items():
            tie.weight = len(tie.groups) / (degree[pair[0]] + degree[pair[1]] - union_shared[pair])
    for tie in ties.values():
        tie.groups.sort()
    return ties


def ego_network_in_mode(
    session: Session, resolved: ResolvedSlice, ego_id: int, *, radius: int = 1, max_alters: int | None = None
) -> EgoNetwork:
    """Return the ego network of ``ego_id`` under the slice's mode (``ego_network`` under ``mode=relations``).

    ``co-membership``: alters by shared groups, strongest first (weight, then groups shared,
    then key), at most ``max_alters`` (60 at radius 1, 150 at radius 2); ``both``: the
    relation ego network, then the ego's co-members not yet drawn, strongest first, in the
    room left under the cap. Co-members not drawn are counted in ``co_members_left_out``.
    """
    s = resolved.slice
    if s.mode == "relations":
        return ego_network(session, resolved, ego_id, radius=radius, max_alters=max_alters)
    if radius not in (1, 2):
        raise ValueError(f"radius must be 1 or 2, not {radius}")
    cap = DEFAULT_MAX_ALTERS[radius] if max_alters is None else max_alters
    distance: dict[int, int] = {ego_id: 0}
    left_out = {1: 0, 2: 0} if radius == 2 else {1: 0}
    edges: list[EgoEdge] = []
    if s.mode == "both":
        base = ego_network(session, replace(resolved, slice=s.with_(mode="relations")), ego_id, radius=radius, max_alters=cap)
        ids = {label.key: label.id for label in list_person_labels_by_key(session=session, keys=[n.key for n in base.nodes]).values()}
        distance.update({ids[n.key]: n.distance for n in base.nodes})
        left_out = dict(base.left_out)
        edges = list(base.edges)
    first = _strengths(co_membership_ties(session, resolved, [ego_id], among=False), {ego_id})
    candidates = set(first) - set(distance)
    room = max(cap - (len(distance) - 1), 0)
    kept = _choose(session, first, candidates, room)
    distance.update(dict.fromkeys(kept, 1))
    co_left_out = len(candidates) - len(kept)
    if radius == 2 and s.mode == "co-membership":
        anchors = set(kept)
        second = _strengths(co_membership_ties(session, resolved, anchors, among=False), anchors) if anchors else {}
        further = set(second) - set(distance) - set(first)
        chosen = _choose(session, second, further, max(cap - len(kept), 0))
        distance.update(dict.fromkeys(chosen, 2))
        co_left_out += len(further) - len(chosen)

    labels = list_person_labels(session=session, ids=distance)
    among = co_membership_ties(session, resolved, distance, among=True)
    edges += [_edge(tie, labels) for tie in among.values()]
    edges.sort(key=lambda e: (e.source, e.target, e.kind))
    neighbours: dict[str, set[str]] = defaultdict(set)
    for edge in edges:
        if edge.source != edge.target or s.loops == "keep":
            neighbours[edge.source].add(edge.target)
            neighbours[edge.target].add(edge.source)
    nodes = [
        EgoNode(key=labels[p].key, name=labels[p].name, kind=labels[p].kind, unidentified=labels[p].unidentified,
                degree=len(neighbours.get(labels[p].key, ())), distance=d)
        for p, d in distance.items()
    ]  # fmt: skip
    nodes.sort(key=lambda n: (n.distance, n.key))
    return EgoNetwork(ego=labels[ego_id].key, radius=radius, nodes=nodes, edges=edges, max_alters=cap,
                      left_out=left_out, co_members_left_out=co_left_out)  # fmt: skip


# --- helpers -------------------------------------------------------------------------------


def _evidence(session: Session, resolved: ResolvedSlice, *, persons: set[int]) -> list[MembershipEvidence]:
    found: list[MembershipEvidence] = []
    ordered = sorted(persons)
    for start in range(0, len(ordered), CHUNK):
        found += membership_evidence(session, resolved, persons=ordered[start : start + CHUNK])
    return found


def _degrees(session: Session, resolved: ResolvedSlice, persons: set[int], known: list[MembershipEvidence]) -> dict[int, int]:
    """Return the number of groups of each person in the slice (read only for those not in ``known``)."""
    groups: dict[int, set[int]] = defaultdict(set)
    for m in known:
        groups[m.person].add(m.group)
    missing = persons - set(groups)
    for m in _evidence(session, resolved, persons=missing) if missing else []:
        groups[m.person].add(m.group)
    return {p: len(groups[p]) for p in persons}


def _strengths(ties: dict[tuple[int, int], GroupTie], anchors: set[int]) -> dict[int, tuple[float, int]]:
    """Return (summed weight, groups shared) of every person tied to one of ``anchors``, by id."""
    strength: dict[int, list[float]] = defaultdict(lambda: [0.0, 0])
    for (a, b), tie in ties.items():
        for person, other in ((a, b), (b, a)):
            if other in anchors and person not in anchors:
                strength[person][0] += tie.weight
                strength[person][1] += len(tie.groups)
    return {p: (w, int(n)) for p, (w, n) in strength.items()}


def _choose(session: Session, strength: dict[int, tuple[float, int]], candidates: set[int], cap: int) -> list[int]:
    """Return at most ``cap`` candidates, strongest first; equal strengths are decided by key."""
    if len(candidates) <= cap:
        return sorted(candidates)
    if cap == 0:
        return []
    ranked = sorted(candidates, key=lambda p: (-strength[p][0], -strength[p][1]))
    boundary = strength[ranked[cap - 1]]
    kept = [p for p in ranked[:cap] if strength[p] != boundary]
    tied = [p for p in candidates if strength[p] == boundary]
    keys = {p: label.key for p, label in list_person_labels(session=session, ids=tied).items()}
    return kept + sorted(tied, key=keys.__getitem__)[: cap - len(kept)]


def _edge(tie: GroupTie, labels: dict[int, PersonLabel]) -> EgoEdge:
    a, b = sorted((labels[tie.a], labels[tie.b]), key=lambda label: label.key)
    return EgoEdge(
        source=a.key, target=b.key, source_name=a.name, target_name=b.name, kind=CO_MEMBERSHIP,
        kind_label=CO_MEMBERSHIP_LABEL, directed=False, attestations=len(tie.attestation_ids),
        documents=len(tie.documents), weight=tie.weight, relation_ids=[], co_membership=True,
        shared_groups=len(tie.groups),
    )  # fmt: skip
