"""The two-mode network of a slice, drawn: persons in one column, groups in another, memberships between.

Persons and groups differ in shape and colour as on the group pages (pale circles, or rounded
squares for corporate bodies, against green hexagons). The order down each column is found by
a few sweeps of the barycentre rule (each person placed at the mean position of its groups,
then each group at the mean of its members), which keeps most lines short and few crossings;
ties are broken by key, so the same data always gives the same picture. On large data only
the groups with most members and the persons in most of them are drawn, and the drawing says
how many it leaves out. The markup is ``_two_mode_svg.html`` (autoescaped).

References
----------
Sugiyama, K., Tagawa, S., & Toda, M. (1981). Methods for visual understanding of hierarchical
system structures. IEEE Transactions on Systems, Man, and Cybernetics 11(2), 109-125 (the
barycentre ordering of two layers).
"""

from __future__ import annotations

import math
from collections import defaultdict
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from app.documented import DOCUMENTED
from app.network.group_drawing import GroupDrawnNode, _count, _kind, _line, _mark, _view_box
from app.network.twomode import MembershipEvidence

__all__ = ["MAX_GROUPS", "MAX_PERSONS", "TwoModeDrawing", "TwoModeDrawnEdge", "two_mode_drawing"]

MAX_GROUPS = 40
"""Groups drawn at most: those with most members in the slice."""
MAX_PERSONS = 120
"""Persons drawn at most: those in most of the drawn groups."""
PERSON_STEP = 20.0  # vertical room of one person
GROUP_STEP = 30.0  # least vertical room of one group
COLUMN_GAP = 560.0  # from the persons' column to the groups' column
SWEEPS = 4


@dataclass(frozen=True)
class TwoModeDrawnEdge:
    """One membership as drawn: a line from a person to a group."""

    __pydantic_config__ = DOCUMENTED

    person: str
    """Key of the person."""
    group: str
    """Key of the group."""
    path: str
    """SVG path data."""
    width: float
    """Line width, growing with the documents attesting the membership."""
    title: str
    """Hover text: person, group, roles and documents."""


@dataclass(frozen=True)
class TwoModeDrawing:
    """The bipartite drawing of a slice, in its own coordinates, with what it leaves out."""

    __pydantic_config__ = DOCUMENTED

    left: float
    """Left edge of the view box (cropped to the marks and their labels)."""
    top: float
    """Top edge of the view box."""
    width: float
    """Width of the view box."""
    height: float
    """Height of the view box."""
    nodes: list[GroupDrawnNode]
    """Persons (mode "person") and groups (mode "group")."""
    edges: list[TwoModeDrawnEdge]
    """Memberships among the marks drawn, below them."""
    persons_drawn: int
    """Persons drawn."""
    persons_left_out: int
    """Persons with a membership in the slice who are not drawn."""
    groups_drawn: int
    """Groups drawn."""
    groups_left_out: int
    """Groups with a member in the slice that are not drawn."""
    notes: list[str]
    """What the reader should know: what was left out and how the marks were chosen."""


def two_mode_drawing(
    evidence: Sequence[MembershipEvidence],
    *,
    persons: Mapping[int, object],
    groups: Mapping[int, object],
    max_persons: int = MAX_PERSONS,
    max_groups: int = MAX_GROUPS,
) -> TwoModeDrawing:
    """Return the drawing of the memberships ``evidence``; ``persons`` and ``groups`` label the ids.

    Labels need ``key``, ``name`` and ``kind`` (and ``unidentified`` for persons). At most
    ``max_groups`` groups are drawn, those with most members first, and at most
    ``max_persons`` persons, those in most of the drawn groups first (then by key).

    Examples
    --------
    >>> from types import SimpleNamespace as L
    >>> m = lambda p, g: MembershipEvidence(0, p, g, "", None, None, None, None, None, None, (1,), (1,))
    >>> people = {1: L(key="p-a", name="A", kind="individual", unidentified=False),
    ...           2: L(key="p-b", name="B", kind="corporate", unidentified=False)}
    >>> d = two_mode_drawing([m(1, 9), m(2, 9)], persons=people, groups={9: L(key="g-x", name="X", kind=None)})
    >>> [(n.key, n.shape) for n in d.nodes], len(d.edges), d.persons_left_out
    ([('p-a', 'circle'), ('p-b', 'square'), ('g-x', 'hexagon')], 2, 0)
    """
    members: dict[int, set[int]] = defaultdict(set)
    documents: dict[tuple[int, int], set[int]] = defaultdict(set)
    roles: dict[tuple[int, int], set[str]] = defaultdict(set)
    for m in evidence:
        members[m.group].add(m.person)
        documents[(m.person, m.group)].update(m.document_ids)
        if m.role:
            roles[(m.person, m.group)].add(m.role)
    groups_of: dict[int, set[int]] = defaultdict(set)
    for g, ps in members.items():
        for p in ps:
            groups_of[p].add(g)

    ranked_groups = sorted(members, key=lambda g: (-len(members[g]), groups[g].key))
    drawn_groups = ranked_groups[:max_groups]
    chosen = set(drawn_groups)
    in_drawn = {p: groups_of[p] & chosen for p in groups_of}
    candidates = [p for p in groups_of if in_drawn[p]]
    drawn_persons = sorted(candidates, key=lambda p: (-len(in_drawn[p]), persons[p].key))[:max_persons]

    group_order, person_order = _order(drawn_groups, drawn_persons, in_drawn, persons, groups)
    top = 0.0
    person_y = {p: top + i * PERSON_STEP for i, p in enumerate(person_order)}
    span = max(PERSON_STEP * (len(person_order) - 1), GROUP_STEP * (len(group_order) - 1))
    step = span / (len(group_order) - 1) if len(group_order) > 1 else 0.0
    offset = (PERSON_STEP * max(len(person_order) - 1, 0) - step * max(len(group_order) - 1, 0)) / 2
    group_y = {g: top + offset + j * step for j, g in enumerate(group_order)}

    nodes: list[GroupDrawnNode] = []
    place: dict[tuple[str, int], tuple[float, float, float]] = {}
    for p in person_order:
        label = persons[p]
        size = round(min(5.0 + 1.5 * math.sqrt(len(groups_of[p])), 9.0), 1)
        marks = ", unidentified" if label.unidentified else ""
        marks += ", corporate body" if label.kind == "corporate" else ""
        title = f"{label.name}{marks}: in {_count(len(groups_of[p]), 'group')}"
        if len(in_drawn[p]) < len(groups_of[p]):
            title += f" ({len(in_drawn[p])} drawn)"
        nodes.append(_mark(label, "person", 0.0, person_y[p], math.pi, size, 1, title=title, length=26))
        place[("p", p)] = (0.0, person_y[p], size)
    drawn_set = set(person_order)
    for g in group_order:
        label = groups[g]
        size = round(min(8.0 + 1.6 * math.sqrt(len(members[g])), 16.0), 1)
        shown = len(members[g] & drawn_set)
        title = f"{label.name}{_kind(label.kind)}: {_count(len(members[g]), 'member')}"
        if shown < len(members[g]):
            title += f" ({shown} drawn)"
        nodes.append(_mark(label, "group", COLUMN_GAP, group_y[g], 0.0, size, 1, title=title, length=30))
        place[("g", g)] = (COLUMN_GAP, group_y[g], size)

    edges = []
    for p in person_order:
        for g in sorted(in_drawn[p], key=group_order.index):
            (x1, y1, r1), (x2, y2, r2) = place[("p", p)], place[("g", g)]
            docs = len(documents[(p, g)])
            role = ", ".join(sorted(roles.get((p, g), ()))) or "member"
            edges.append(TwoModeDrawnEdge(
                person=persons[p].key, group=groups[g].key, path=_line(x1, y1, r1, x2, y2, r2),
                width=round(min(1.0 + 1.0 * math.log2(max(docs, 1)), 4.0), 2),
                title=f"{persons[p].name} – {groups[g].name}: {role}, {_count(docs, 'document')}",
            ))  # fmt: skip

    persons_left_out, groups_left_out = len(groups_of) - len(person_order), len(members) - len(group_order)
    notes = []
    if groups_left_out:
        notes.append(f"{groups_left_out} of {len(members)} groups are not drawn: the {len(group_order)} with most "
                     "members in the slice are.")  # fmt: skip
    if persons_left_out:
        notes.append(f"{persons_left_out} of {len(groups_of)} persons are not drawn: the {len(person_order)} in most "
                     "of the groups drawn are. The tables below list everyone.")  # fmt: skip
    left, top_, width, height = _view_box(nodes)
    return TwoModeDrawing(
        left=left, top=top_, width=width, height=height, nodes=nodes, edges=edges, persons_drawn=len(person_order),
        persons_left_out=persons_left_out, groups_drawn=len(group_order), groups_left_out=groups_left_out, notes=notes,
    )  # fmt: skip


def _order(
    drawn_groups: list[int], drawn_persons: list[int], in_drawn: Mapping[int, set[int]], persons: Mapping, groups: Mapping
) -> tuple[list[int], list[int]]:
    """Return the groups and the persons in column order, by barycentre sweeps (Sugiyama et al. 1981)."""
    group_rank = {g: i for i, g in enumerate(drawn_groups)}
    person_rank: dict[int, float] = {}
    members_drawn: dict[int, list[int]] = defaultdict(list)
    for p in drawn_persons:
        for g in in_drawn[p]:
            members_drawn[g].append(p)
    person_order = list(drawn_persons)
    group_order = list(drawn_groups)
    for _ in range(SWEEPS):
        person_order = sorted(drawn_persons, key=lambda p: (
            sum(group_rank[g] for g in in_drawn[p]) / len(in_drawn[p]), persons[p].key))  # fmt: skip
        person_rank = {p: i for i, p in enumerate(person_order)}
        group_order = sorted(drawn_groups, key=lambda g: (
            sum(person_rank[p] for p in members_drawn[g]) / len(members_drawn[g]) if members_drawn[g] else math.inf,
            groups[g].key))  # fmt: skip
        group_rank = {g: i * max(len(person_order), 1) / max(len(group_order), 1) for i, g in enumerate(group_order)}
    return group_order, person_order
