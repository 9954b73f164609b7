"""The neighbourhood of one group, drawn: the group, its members, and the other groups they share.

The group sits at the centre, its members on a ring around it and the other groups that at
least two of them belong to on an outer ring, each near the members it shares. Persons and
groups differ in shape (circles, or rounded squares for corporate bodies, against hexagons)
and in colour (the template's own palette). Members are ordered round the ring by the shared
groups they belong to, so that co-members sit together; everything else is broken by key, so
the same data always gives the same picture. The markup is ``_group_svg.html`` (autoescaped:
names with markup stay text).
"""

from __future__ import annotations

import math
import textwrap
from collections import defaultdict
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Protocol

from sqlalchemy.orm import Session

from app.documented import DOCUMENTED
from app.network.drawing import short_label
from app.network.layout import _outer_angles
from app.network.slice import ResolvedSlice
from app.network.twomode import MembershipEvidence, membership_evidence, with_slice_limits
from app.store.groups import group_refs
from app.store.network_labels import list_person_labels

__all__ = [
    "GroupDrawing",
    "GroupDrawnEdge",
    "GroupDrawnNode",
    "GroupNeighbourhood",
    "SharedGroup",
    "group_neighbourhood",
    "neighbourhood_of_group",
]

WIDTH, HEIGHT = 1240, 1000  # the canvas; the view box is cropped to what is drawn on it
MEMBER_RING = (120.0, 235.0)  # radius of the members' ring: 9 per member, within these bounds
GROUP_RING = 140.0  # how far outside the members' ring the other groups sit
MARGIN = 12.0
LONG_NAME_RING = 150.0  # the smallest members' ring around a centre group of a long name
RING_CLEARANCE = 16.0  # room kept free inside the members' ring for their marks
LINE_HEIGHT = 1.15  # of the font size, between the lines of the centre's label
MAX_MEMBERS = 60
MAX_GROUPS = 24


class _PersonLabel(Protocol):
    key: str
    name: str
    kind: str
    unidentified: bool


class _GroupLabel(Protocol):
    key: str
    name: str
    kind: str | None


@dataclass(frozen=True)
class GroupDrawnNode:
    """One person or group as drawn."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The person's or group's key."""
    mode: str
    """person or group."""
    name: str
    """Full name (hover text)."""
    label: str
    """The name beside the mark, shortened with … when long."""
    centre: bool
    """True for the group whose page this is."""
    x: float
    """Centre of the mark, horizontal."""
    y: float
    """Centre of the mark, vertical."""
    size: float
    """Radius of the circle or hexagon (half the side of the square)."""
    shape: str
    """circle (a person), square (a corporate body) or hexagon (a group)."""
    points: str
    """The hexagon's corners as SVG polygon points ("" for other shapes)."""
    unidentified: bool
    """A person known only by description: drawn hollow with a dashed outline."""
    label_x: float
    """Where the label starts, horizontal."""
    label_y: float
    """Where the label starts, vertical."""
    anchor: str
    """SVG text-anchor of the label."""
    rotate: float
    """Rotation of the label in degrees about its start (on crowded rings)."""
    font_size: float
    """Size of the label's letters."""
    title: str
    """Hover text."""
    lines: list[str] = field(default_factory=list)
    """The label broken into lines that fit inside the members' ring (the centre group only; else empty)."""


@dataclass(frozen=True)
class GroupDrawnEdge:
    """One membership as drawn: a line from a person to a group."""

    __pydantic_config__ = DOCUMENTED

    person: str
    """Key of the person."""
    group: str
    """Key of the group."""
    centre: bool
    """True for a membership of the group whose page this is."""
    path: str
    """SVG path data."""
    width: float
    """Line width, growing with the documents attesting the membership."""
    title: str
    """Hover text: person, group, roles and documents."""


@dataclass(frozen=True)
class GroupDrawing:
    """Everything the SVG template needs, in the drawing's own coordinates."""

    __pydantic_config__ = DOCUMENTED

    left: float
    """Left edge of the view box: the drawing is cropped to the marks and their labels."""
    top: float
    """Top edge of the view box."""
    width: float
    """Width of the view box."""
    height: float
    """Height of the view box."""
    nodes: list[GroupDrawnNode]
    """Groups and persons, the centre group last so it is drawn on top."""
    edges: list[GroupDrawnEdge]
    """Memberships, drawn below the marks."""


@dataclass(frozen=True)
class SharedGroup:
    """Another group that members of this group belong to."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The group's key."""
    name: str
    """Its name."""
    kind: str | None
    """Its kind."""
    members: int
    """How many members of this group belong to it (in the slice)."""
    drawn: bool
    """True when it is in the drawing (shared by at least two members, within the cap)."""


@dataclass(frozen=True)
class GroupNeighbourhood:
    """The two-mode neighbourhood of one group in one slice."""

    __pydantic_config__ = DOCUMENTED

    members: int
    """Persons with a membership of the group kept by the slice."""
    members_drawn: int
    """How many of them are drawn (at most MAX_MEMBERS)."""
    shared_groups: list[SharedGroup]
    """The other groups of those members, the most shared first."""
    drawing: GroupDrawing
    """The drawing."""
    notes: list[str]
    """What the reader should know about the drawing (caps, an empty slice)."""


def group_neighbourhood(
    centre: int,
    evidence: Sequence[MembershipEvidence],
    *,
    persons: Mapping[int, _PersonLabel],
    groups: Mapping[int, _GroupLabel],
    max_members: int = MAX_MEMBERS,
    max_groups: int = MAX_GROUPS,
) -> GroupNeighbourhood:
    """Return the neighbourhood of group ``centre`` from the memberships of its members.

    ``evidence`` holds the memberships of the centre group and the other memberships of its
    members (see ``twomode.membership_evidence``); ``persons`` and ``groups`` label the ids.
    Other groups are drawn when at least two members belong to them, the most shared first,
    at most ``max_groups``; members are drawn up to ``max_members``, those in most of the drawn
    groups first.
    """
    in_centre = [m for m in evidence if m.group == centre]
    members = sorted({m.person for m in in_centre}, key=lambda p: persons[p].key)
    member_set = set(members)
    belongs: dict[int, set[int]] = defaultdict(set)  # other group -> members in it
    for m in evidence:
        if m.group != centre and m.person in member_set:
            belongs[m.group].add(m.person)
    ranked = sorted(belongs, key=lambda g: (-len(belongs[g]), groups[g].key))
    shared = [g for g in ranked if len(belongs[g]) >= 2]
    drawn_groups = shared[:max_groups]
    notes: list[str] = []
    if not members:
        notes.append("No membership of this group is kept by the slice, so there is nothing to draw.")
    if len(shared) > max_groups:
        notes.append(f"{len(shared)} other groups are shared by at least two members; the {max_groups} shared by most are drawn.")

    group_index = {g: i for i, g in enumerate(drawn_groups)}
    of_member = {p: sorted(group_index[g] for g in drawn_groups if p in belongs[g]) for p in members}
    drawn_members = members
    if len(members) > max_members:
        drawn_members = sorted(members, key=lambda p: (-len(of_member[p]), persons[p].key))[:max_members]
        notes.append(f"{len(members)} members are in the slice; the {max_members} in most of the groups drawn are drawn. "
                     "The list below names them all.")  # fmt: skip
    ring = sorted(drawn_members, key=lambda p: (of_member[p][:1] or [len(drawn_groups)], of_member[p], persons[p].key))

    cx, cy = WIDTH / 2, HEIGHT / 2
    radius = min(max(9.0 * len(ring), MEMBER_RING[0]), MEMBER_RING[1])
    if len(groups[centre].name) > 18:  # room inside the ring for a long name of the centre group on up to 3 lines
        radius = max(radius, LONG_NAME_RING)
    angles = {p: -math.pi / 2 + 2 * math.pi * i / len(ring) for i, p in enumerate(ring)}
    weights = {g: {p: 1.0 for p in belongs[g] if p in angles} for g in drawn_groups}
    group_angles = _outer_angles(drawn_groups, angles, weights) if drawn_groups and ring else {}

    documents: dict[tuple[int, int], set[int]] = defaultdict(set)
    roles: dict[tuple[int, int], set[str]] = defaultdict(set)
    for m in evidence:
        documents[(m.person, m.group)].update(m.document_ids)
        if m.role:
            roles[(m.person, m.group)].add(m.role)

    nodes: list[GroupDrawnNode] = []
    place: dict[tuple[str, int], tuple[float, float, float]] = {}
    for g in drawn_groups:
        a = group_angles[g]
        x, y = cx + (radius + GROUP_RING) * math.cos(a), cy + (radius + GROUP_RING) * math.sin(a)
        size = round(min(9.0 + 2.5 * math.sqrt(len(belongs[g])), 20.0), 1)
        drawn_here = sum(1 for p in belongs[g] if p in angles)
        title = f"{groups[g].name}{_kind(groups[g].kind)}: {_count(len(belongs[g]), 'member')} of this group"
        if drawn_here < len(belongs[g]):
            title += f" ({drawn_here} drawn)"
        nodes.append(_mark(groups[g], "group", x, y, a, size, len(drawn_groups), title=title, length=24))
        place[("g", g)] = (x, y, size)
    for p in ring:
        a = angles[p]
        x, y = cx + radius * math.cos(a), cy + radius * math.sin(a)
        size = round(min(7.0 + 1.6 * math.sqrt(1 + len(of_member[p])), 13.0), 1)
        person = persons[p]
        marks = ", unidentified" if person.unidentified else ""
        marks += ", corporate body" if person.kind == "corporate" else ""
        own = sorted(roles.get((p, centre), ()))
        title = (f"{person.name}{marks}: {', '.join(own) if own else 'member'} of this group; "
                 f"in {_count(len(of_member[p]), 'other group')} drawn")  # fmt: skip
        nodes.append(_mark(person, "person", x, y, a, size, len(ring), title=title))
        place[("p", p)] = (x, y, size)
    if members:
        centre_label = groups[centre]
        title = f"{centre_label.name}{_kind(centre_label.kind)}: {_count(len(members), 'member')} in the slice"
        mark = _mark(centre_label, "group", cx, cy, None, 24.0, 1, title=title, centre=True, length=34)
        nodes.append(replace(mark, lines=_centre_lines(centre_label.name, radius - RING_CLEARANCE, mark.label_y - cy,
                                                       mark.font_size)))
        place[("g", centre)] = (cx, cy, 24.0)

    edges = []
    for p in ring:
        for g in [centre, *(drawn_groups[i] for i in of_member[p])]:
            (x1, y1, r1), (x2, y2, r2) = place[("p", p)], place[("g", g)]
            docs = len(documents[(p, g)])
            role = ", ".join(sorted(roles.get((p, g), ()))) or "member"
            edges.append(GroupDrawnEdge(
                person=persons[p].key, group=groups[g].key, centre=g == centre, path=_line(x1, y1, r1, x2, y2, r2),
                width=round(min(1.0 + 1.2 * math.log2(max(docs, 1)), 5.0), 2),
                title=f"{persons[p].name} – {groups[g].name}: {role}, {_count(docs, 'document')}",
            ))  # fmt: skip

    shared_rows = [
        SharedGroup(key=groups[g].key, name=groups[g].name, kind=groups[g].kind, members=len(belongs[g]), drawn=g in group_index)
        for g in ranked
    ]
    return GroupNeighbourhood(
        members=len(members), members_drawn=len(ring), shared_groups=shared_rows,
        drawing=GroupDrawing(*_view_box(nodes), nodes=nodes, edges=edges), notes=notes,
    )  # fmt: skip


# --- helpers -------------------------------------------------------------------------------


def _mark(label, mode: str, x: float, y: float, angle: float | None, size: float, ring_size: int, *,  # noqa: ANN001
          title: str, centre: bool = False, length: int = 22) -> GroupDrawnNode:  # fmt: skip
    """Return one mark with its label outside it, along the radius on crowded rings."""
    shape = "hexagon" if mode == "group" else ("square" if label.kind == "corporate" else "circle")
    points = ""
    if shape == "hexagon":
        points = " ".join(f"{x + size * math.cos(k * math.pi / 3):.1f},{y + size * math.sin(k * math.pi / 3):.1f}" for k in range(6))
    crowded = ring_size > 14
    font_size = 17.0 if centre else 15.0
    rotate = 0.0
    if angle is None:  # the centre: label below the mark
        label_x, label_y, anchor = x, y + size + 16, "middle"
    else:
        c, s = math.cos(angle), math.sin(angle)
        label_x, label_y = x + (size + 5) * c, y + (size + 5) * s
        if crowded:
            radius = math.hypot(x - WIDTH / 2, y - HEIGHT / 2)
            font_size = round(min(14.0, max(9.0, 0.8 * 2 * math.pi * radius / ring_size)), 1)
            degrees = math.degrees(angle)
            anchor = "start" if c >= 0 else "end"
            rotate = degrees if c >= 0 else degrees + 180
            length = min(length, 16)
        else:
            anchor = "start" if c > 0.3 else ("end" if c < -0.3 else "middle")
            if anchor == "middle":
                label_y += 8 * (1 if s > 0 else -1)
    return GroupDrawnNode(
        key=label.key, mode=mode, name=label.name, label=short_label(label.name, length), centre=centre,
        x=round(x, 1), y=round(y, 1), size=size, shape=shape, points=points,
        unidentified=bool(getattr(label, "unidentified", False)), label_x=round(label_x, 1), label_y=round(label_y, 1),
        anchor=anchor, rotate=round(rotate % 360, 2), font_size=font_size, title=title,
    )  # fmt: skip


def _centre_lines(name: str, inner: float, first: float, font_size: float, most: int = 3) -> list[str]:
    """Break the centre group's name into as few lines (at most ``most``) as fit inside the members' ring.

    The lines start ``first`` below the centre, each one ``LINE_HEIGHT`` font sizes lower; the
    disc of radius ``inner`` around the centre is free of the members' marks (their labels are
    outside the ring), so every line is kept within that disc at the lowest line's height. A name
    longer than the most lines hold ends in "…". Letters are taken as 0.6 of the font size wide,
    as in ``_view_box``.
    """
    name = " ".join(name.split())
    best: list[str] = [name]
    room = -1
    for count in range(1, most + 1):
        lowest = first + (count - 1) * LINE_HEIGHT * font_size + font_size / 2
        width = max(int(2 * math.sqrt(max(inner * inner - lowest * lowest, 0.0)) / (0.6 * font_size)), 6)
        lines = textwrap.wrap(name, width=width, break_long_words=True) or [name]
        if len(lines) <= count:
            return lines
        if count * width > room:
            room = count * width
            best = [*lines[: count - 1], short_label(" ".join(lines[count - 1 :]), width)]
    return best


def _view_box(nodes: list[GroupDrawnNode]) -> tuple[float, float, float, float]:
    """Return left, top, width and height of the box around the marks and their labels.

    A label's length is estimated at 0.6 of its font size per letter, enough for the common fonts.
    """
    if not nodes:
        return 0.0, 0.0, float(WIDTH), float(HEIGHT)
    xs, ys = [], []
    for n in nodes:
        xs += [n.x - n.size, n.x + n.size]
        ys += [n.y - n.size, n.y + n.size]
        length = 0.6 * n.font_size * max((len(line) for line in n.lines), default=len(n.label))
        a = math.radians(n.rotate)
        along = {"start": (0.0, length), "end": (-length, 0.0), "middle": (-length / 2, length / 2)}[n.anchor]
        for d in along:
            xs.append(n.label_x + d * math.cos(a))
            ys += [n.label_y + d * math.sin(a) - n.font_size / 2, n.label_y + d * math.sin(a) + n.font_size / 2]
    left, top = math.floor(min(xs) - MARGIN), math.floor(min(ys) - MARGIN)
    return float(left), float(top), float(math.ceil(max(xs) + MARGIN) - left), float(math.ceil(max(ys) + MARGIN) - top)


def _line(x1: float, y1: float, r1: float, x2: float, y2: float, r2: float) -> str:
    """Return a straight line from the edge of one mark to the edge of the other."""
    dx, dy = x2 - x1, y2 - y1
    length = math.hypot(dx, dy) or 1.0
    ux, uy = dx / length, dy / length
    return f"M{x1 + ux * (r1 + 1):.1f},{y1 + uy * (r1 + 1):.1f} L{x2 - ux * (r2 + 1):.1f},{y2 - uy * (r2 + 1):.1f}"


def _count(number: int, word: str) -> str:
    return f"{number} {word}{'' if number == 1 else 's'}"


def _kind(kind: str | None) -> str:
    return f" ({kind})" if kind else ""


def neighbourhood_of_group(session: Session, resolved: ResolvedSlice, group_id: int) -> GroupNeighbourhood:
    """Return the neighbourhood of one group in a slice, read from the store.

    The group's own memberships are read whatever ``max_group_size`` says (its page is about
    it); the other groups of its members are subject to it like any group of the slice.
    """
    centre = membership_evidence(session, with_slice_limits(resolved, max_group_size=None), groups=[group_id])
    members = {m.person for m in centre}
    others = [m for m in membership_evidence(session, resolved, persons=members) if m.group != group_id] if members else []
    evidence = centre + others
    persons = list_person_labels(session=session, ids=members)
    groups = group_refs(session=session, group_ids={group_id} | {m.group for m in others})
    found = group_neighbourhood(group_id, evidence, persons=persons, groups=groups)
    limit = resolved.slice.max_group_size
    if limit is not None and members:
        note = f"Other groups with more than {limit} members in the slice are left out (max_group_size={limit})."
        found = replace(found, notes=[*found.notes, note])
    return found
