"""The geometry of an ego network drawing: shapes, sizes, line styles and paths, ready for SVG.

The markup itself is the template ``_ego_svg.html`` (autoescaped, so names with markup stay
text). Here every number is decided: node size grows with degree, line width with the tie's
weight; each relation kind has its own colour and dash pattern (colours chosen to stay apart
for the common forms of colour blindness, dashes so that the kinds differ even in grey);
directed kinds end in an arrow; parallel kinds between one pair bend apart; self-loops are
small loops on the outside of their node.
"""

from __future__ import annotations

import math
import re
from collections import defaultdict
from dataclasses import dataclass

from app.documented import DOCUMENTED
from app.network.ego import EgoEdge, EgoNetwork
from app.network.layout import HEIGHT, WIDTH, Placement, ego_layout
from app.store.network_labels import KindLabel

__all__ = ["CO_MEMBERSHIP_STYLE", "DASHES", "PALETTE", "Drawing", "DrawnEdge", "DrawnNode", "KindStyle", "ego_drawing", "kind_styles", "short_label"]

PALETTE = ("#1f5fa8", "#c4511f", "#0f8a6a", "#a3418f", "#9a6c00", "#3f93c9", "#6b4f2a", "#5f5f5f")
DASHES = ("", "9 4", "2 3", "12 3 2 3", "5 5", "1 4 6 4")
LABEL_LENGTH = 22
PARALLEL_GAP = 22.0  # how far apart parallel kinds between one pair bend
EGO_CLEARANCE = 34.0  # how far beyond the ego's mark a tie between two alters passes (its label sits below it)
CROWDED = 60  # persons drawn above which a drawing counts as crowded
FAR_WIDTH = 0.6  # share of the width of a tie between alters in a crowded drawing
WIDTH_MEANS = {
    "documents": "documents attesting the tie (a copy and its original count once)",
    "attestations": "attestations of the tie",
    "none": "the same for every tie (the slice weighs no tie above another)",
}


@dataclass(frozen=True)
class KindStyle:
    """How one relation kind is drawn."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The kind's key."""
    label: str
    """The kind's label."""
    colour: str
    """Line colour (#rrggbb)."""
    dash: str
    """SVG dash pattern ("" for a solid line)."""
    directed: bool
    """True when its lines end in an arrow in this drawing."""
    marker: str
    """Id of its arrowhead marker ("" when undirected)."""


CO_MEMBERSHIP_STYLE = KindStyle(key="co-membership", label="shared groups (co-membership)", colour="#3d8a78",
                                dash="7 2 1.5 2 1.5 2", directed=False, marker="")
"""Ties by shared groups: the green of the groups in the group drawings, dash-dot-dot, never an arrow."""


@dataclass(frozen=True)
class DrawnNode:
    """One person as drawn."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The person's key."""
    name: str
    """Full display name (hover text)."""
    label: str
    """The name as written beside the mark, shortened with … when long."""
    x: float
    """Centre, horizontal."""
    y: float
    """Centre, vertical."""
    size: float
    """Radius of the circle (half the side of the square)."""
    shape: str
    """circle (individual) or square (corporate body)."""
    unidentified: bool
    """Drawn hollow with a dashed outline."""
    ego: bool
    """The person at the centre."""
    distance: int
    """Steps from the ego."""
    label_x: float
    """Where the label starts, horizontal."""
    label_y: float
    """Where the label starts, vertical."""
    anchor: str
    """SVG text-anchor of the label: start, middle or end."""
    rotate: float
    """Rotation of the label in degrees about its start (0 on uncrowded rings)."""
    font_size: float
    """Size of the label's letters; smaller on crowded rings so that labels do not overlap."""
    title: str
    """Hover text: name and counts."""


@dataclass(frozen=True)
class DrawnEdge:
    """One tie as drawn."""

    __pydantic_config__ = DOCUMENTED

    source: str
    """Key of the first person."""
    target: str
    """Key of the second person."""
    kind: str
    """Key of the relation kind."""
    path: str
    """SVG path data."""
    colour: str
    """Line colour."""
    dash: str
    """SVG dash pattern ("" for solid)."""
    width: float
    """Line width, growing with the tie's weight."""
    marker: str
    """Id of the arrowhead marker at its end ("" for none)."""
    title: str
    """Hover text: the pair, the kind and the counts."""
    co_membership: bool = False
    """True for a tie by shared groups, which opens the ties page under mode=co-membership."""
    far: bool = False
    """True for a tie between two alters (neither end is the ego): drawn fainter in a crowded drawing."""


@dataclass(frozen=True)
class Drawing:
    """Everything the SVG template needs, in the drawing's own coordinates."""

    __pydantic_config__ = DOCUMENTED

    width: int
    """Width of the view box."""
    height: int
    """Height of the view box."""
    nodes: list[DrawnNode]
    """Persons, the ego last so it is drawn on top."""
    edges: list[DrawnEdge]
    """Ties, drawn below the persons."""
    kinds: list[KindStyle]
    """The relation kinds present, in the order of the legend."""
    width_means: str
    """What the width of a line shows, in words."""
    crowded: bool = False
    """True for a drawing of more than CROWDED persons: ties between alters are drawn fainter and thinner,
    and the page gives the drawing the whole width."""


def kind_styles(kinds: list[KindLabel], *, directed_view: bool = True) -> dict[str, KindStyle]:
    """Return the style of every relation kind, by key.

    A kind keeps its colour and dash in every drawing of the dataset: they follow the kind's
    place among all kinds, not among those drawn.
    """
    styles = {}
    for i, kind in enumerate(kinds):
        directed = kind.directed and directed_view
        styles[kind.key] = KindStyle(
            key=kind.key, label=kind.label, colour=PALETTE[i % len(PALETTE)], dash=DASHES[i % len(DASHES)],
            directed=directed, marker=f"ego-arrow-{i}" if directed else "",
        )  # fmt: skip
    return styles


def short_label(name: str, length: int = LABEL_LENGTH) -> str:
    """Return ``name`` cut to ``length`` characters with an ellipsis, for a label beside a mark.

    A name told apart from another by its life dates ("Pieter Schuttelaer (1650-09-30–1708-05-09)",
    see ``network_labels``) keeps what tells it apart: the years, and the key when there is one;
    the name itself is cut first.

    >>> short_label("Pieter Schuttelaer (1650-09-30–1708-05-09)")
    'Pieter Sc… (1650–1708)'
    >>> short_label("Jan Smit (?–?, p-jan-2)", 16)
    'Jan… (?–?, p-jan-2)'
    >>> short_label("Cornelia Wyntjes van der Hoeven")
    'Cornelia Wyntjes van…'
    """
    name = " ".join(name.split())
    if len(name) <= length:
        return name
    told_apart = _TOLD_APART.fullmatch(name)
    if told_apart:
        life, _, key = told_apart.group(2).partition(", ")
        years = "–".join((re.search(r"\d{4}", part) or re.search(r"\?", part) or re.search(r".+", part or "?")).group(0)
                         for part in life.split("–"))
        suffix = f" ({years}{', ' + key if key else ''})"
        room = max(length - len(suffix) - 1, 3)
        main = told_apart.group(1)
        return (main if len(main) <= room + 1 else main[:room].rstrip() + "…") + suffix
    return name[: length - 1].rstrip() + "…"


_TOLD_APART = re.compile(r"(.+?) \(([^()]*[\d?][^()]*)\)")


def ego_drawing(network: EgoNetwork, kinds: list[KindLabel], *, weight: str = "documents", direction: str = "recorded") -> Drawing:
    """Return the drawing of ``network``: positions from ``ego_layout``, sizes, styles and paths."""
    places = ego_layout(network)
    styles = kind_styles(kinds, directed_view=direction == "recorded")
    names = {node.key: node.name for node in network.nodes}
    attested: dict[str, int] = defaultdict(int)
    for edge in network.edges:
        attested[edge.source] += edge.attestations
        if edge.target != edge.source:
            attested[edge.target] += edge.attestations

    nodes = [_node(node, places[node.key], node.key == network.ego, attested[node.key], network) for node in network.nodes]
    nodes.sort(key=lambda n: (n.ego, -n.distance, n.key))  # outer rings first, the ego on top
    sizes = {n.key: n.size for n in nodes}

    edges: list[DrawnEdge] = []
    pairs: dict[tuple[str, str], list[EgoEdge]] = defaultdict(list)
    for edge in network.edges:
        pairs[(edge.source, edge.target) if edge.source <= edge.target else (edge.target, edge.source)].append(edge)
    order = {key: i for i, key in enumerate(styles)}
    widths: dict[tuple[float, bool], float] = {}  # a hub's thousands of ties have a few dozen weights
    crowded = len(network.nodes) > CROWDED
    centre = places[network.ego]
    clearance = sizes[network.ego] + EGO_CLEARANCE
    for (a, b), group in sorted(pairs.items()):
        if len(group) > 1:
            group.sort(key=lambda e: (e.co_membership, order.get(e.kind, 0), e.source))
        middle = (len(group) - 1) / 2
        far = network.ego not in (a, b)
        place_a, place_b, size_a, size_b = places[a], places[b], sizes[a], sizes[b]
        # a tie between two alters goes round the ego's mark and label rather than across its own ties
        detour = _detour(place_a, place_b, centre, clearance, len(group)) if far and a != b else 0.0
        for i, edge in enumerate(group):
            style = CO_MEMBERSHIP_STYLE if edge.co_membership else styles[edge.kind]
            if a == b:
                path = _loop_path(place_a, size_a, i)
            else:
                bend = (i - middle) * PARALLEL_GAP + detour
                if edge.source == a:
                    path = _tie_path(place_a, place_b, size_a, size_b, bend, style.directed)
                else:
                    path = _tie_path(place_b, place_a, size_b, size_a, -bend, style.directed)
            thin = far and crowded
            width = widths.get((edge.weight, thin))
            if width is None:
                width = _width(edge.weight, weight)
                width = widths[(edge.weight, thin)] = round(width * FAR_WIDTH, 2) if thin else width
            edges.append(DrawnEdge(
                edge.source, edge.target, edge.kind, path, style.colour, style.dash, width,
                style.marker if edge.directed else "", _edge_title(edge, names), edge.co_membership, far,
            ))  # fmt: skip
    present = {edge.kind for edge in network.edges if not edge.co_membership}
    legend = [s for k, s in styles.items() if k in present]
    width_means = WIDTH_MEANS[weight]
    if any(edge.co_membership for edge in network.edges):
        legend.append(CO_MEMBERSHIP_STYLE)
        width_means += "; for shared groups, their weight (the slice's weighting)"
    return Drawing(width=WIDTH, height=HEIGHT, nodes=nodes, edges=edges, kinds=legend, width_means=width_means,
                   crowded=crowded)


# --- helpers -------------------------------------------------------------------------------


def _size(degree: int, ego: bool) -> float:
    size = min(5.0 + 2.4 * math.sqrt(degree), 20.0)
    return round(max(size, 12.0) if ego else size, 1)


def _width(weight_value: float, weight: str) -> float:
    if weight == "none":
        return 1.6
    return round(min(1.2 + 1.5 * math.log2(max(weight_value, 1.0)), 7.0), 2)


def _node(node, place: Placement, ego: bool, attestations: int, network: EgoNetwork) -> DrawnNode:  # noqa: ANN001
    size = _size(node.degree, ego)
    font_size = 18.0 if ego else 16.0
    if place.crowded:  # letters no taller than the room along the ring for each label
        radius = math.hypot(place.x - WIDTH / 2, place.y - HEIGHT / 2)
        font_size = round(min(15.0, max(9.0, 0.8 * 2 * math.pi * radius / place.ring_size)), 1)
    length = LABEL_LENGTH
    if ego or place.angle is None:
        label_x, label_y, anchor, rotate = place.x, place.y + size + 16, "middle", 0.0
    else:
        a = place.angle
        gap = size + 5
        lx, ly = place.x + gap * math.cos(a), place.y + gap * math.sin(a)
        # A letter is about 0.56 of the font size wide: the label stops before the next ring.
        length = max(6, min(LABEL_LENGTH, int((place.label_room - gap - 6) / (0.56 * font_size))))
        if place.crowded:  # labels run along the radius
            degrees = math.degrees(a)
            left = math.cos(a) < 0
            label_x, label_y, anchor, rotate = lx, ly, "end" if left else "start", degrees + 180 if left else degrees
        else:
            c = math.cos(a)
            anchor = "start" if c > 0.15 else "end" if c < -0.15 else "middle"
            if anchor == "middle":  # a centred label must fit between its neighbours on the ring
                radius = math.hypot(place.x - WIDTH / 2, place.y - HEIGHT / 2)
                chord = 2 * radius * math.sin(math.pi / max(place.ring_size, 2))
                length = max(6, min(length, int((chord - 12) / (0.56 * font_size))))
            push = 8 if anchor == "middle" else 0  # labels above or below a node need a little more room
            label_x, label_y, rotate = lx, ly + push * math.copysign(1, math.sin(a)), 0.0
    where = "the ego" if ego else f"{node.distance} step{'s' if node.distance > 1 else ''} from the ego"
    marks = ", unidentified" if node.unidentified else ""
    marks += ", corporate body" if node.kind == "corporate" else ""
    title = (f"{node.name} ({where}{marks}): tied to {node.degree} person{'s' if node.degree != 1 else ''} here, "
             f"{attestations} attestation{'s' if attestations != 1 else ''} on the ties drawn")  # fmt: skip
    return DrawnNode(
        key=node.key, name=node.name, label=short_label(node.name, length), x=place.x, y=place.y, size=size,
        shape="square" if node.kind == "corporate" else "circle", unidentified=node.unidentified, ego=ego,
        distance=node.distance, label_x=round(label_x, 1), label_y=round(label_y, 1), anchor=anchor,
        rotate=round(rotate % 360, 2) if rotate else 0.0, font_size=font_size, title=title,
    )  # fmt: skip


def _edge_title(edge: EgoEdge, names: dict[str, str]) -> str:
    if edge.co_membership:
        groups = edge.shared_groups or 0
        return (f"{names[edge.source]} – {names[edge.target]}: {groups} shared group{'s' if groups != 1 else ''} "
                f"(weight {edge.weight:.3g}), {edge.documents} document{'s' if edge.documents != 1 else ''} "
                "of their memberships")  # fmt: skip
    arrow = "→" if edge.directed else "–"
    return (f"{names[edge.source]} {arrow} {names[edge.target]}: {edge.kind_label}, "
            f"{edge.documents} document{'s' if edge.documents != 1 else ''}, "
            f"{edge.attestations} attestation{'s' if edge.attestations != 1 else ''}")  # fmt: skip


def _tie_path(p: Placement, q: Placement, rp: float, rq: float, bend: float, arrow: bool) -> str:
    """Return a line (or, with ``bend``, a gentle curve) from the edge of one mark to the other's."""
    dx, dy = q.x - p.x, q.y - p.y
    length = math.hypot(dx, dy) or 1.0
    ux, uy = dx / length, dy / length
    gap = 3.0 if arrow else 1.0
    if not bend:
        x1, y1 = p.x + ux * (rp + 1), p.y + uy * (rp + 1)
        x2, y2 = q.x - ux * (rq + gap), q.y - uy * (rq + gap)
        return f"M{x1:.1f},{y1:.1f} L{x2:.1f},{y2:.1f}"
    # The control point lies off the midpoint, at right angles to the line.
    mx, my = (p.x + q.x) / 2 - uy * bend * 2, (p.y + q.y) / 2 + ux * bend * 2
    x1, y1 = _towards(p.x, p.y, mx, my, rp + 1)
    x2, y2 = _towards(q.x, q.y, mx, my, rq + gap)
    return f"M{x1:.1f},{y1:.1f} Q{mx:.1f},{my:.1f} {x2:.1f},{y2:.1f}"


def _detour(p: Placement, q: Placement, centre: Placement, clearance: float, parallel: int) -> float:
    """Return the bend (as ``_tie_path`` takes it, from ``p`` to ``q``) that keeps a line ``clearance`` from the centre.

    A quadratic curve's midpoint lies halfway between the chord's midpoint and its control
    point, so a bend of b moves the middle of the line b across it. A line that passes
    nearer the centre than ``clearance`` (two alters on opposite sides of the ego) is moved
    away on the side it already leans to (a line through the centre itself: to the left of
    its direction, a fixed rule so that the picture does not change), the outermost of
    ``parallel`` lines included. A line clear of the centre keeps its course (0).
    """
    dx, dy = q.x - p.x, q.y - p.y
    length = math.hypot(dx, dy) or 1.0
    nx_, ny_ = -dy / length, dx / length  # the side the control point moves to for a positive bend
    off = ((p.x + q.x) / 2 - centre.x) * nx_ + ((p.y + q.y) / 2 - centre.y) * ny_
    # the ends must lie beyond the centre along the line for it to pass the centre at all
    along = ((centre.x - p.x) * dx + (centre.y - p.y) * dy) / (length * length)
    if not 0.0 < along < 1.0 or abs(off) >= clearance + (parallel - 1) / 2 * PARALLEL_GAP:
        return 0.0
    spread = (parallel - 1) / 2 * PARALLEL_GAP
    side = 1.0 if off >= 0 else -1.0
    return side * (clearance + spread) - off


def _towards(x: float, y: float, tx: float, ty: float, distance: float) -> tuple[float, float]:
    dx, dy = tx - x, ty - y
    length = math.hypot(dx, dy) or 1.0
    return x + dx / length * distance, y + dy / length * distance


def _loop_path(place: Placement, size: float, index: int) -> str:
    """Return a small loop on the outside of a mark (upwards for the ego); later loops are wider."""
    a = place.angle if place.angle is not None else -math.pi / 2
    reach = size + 26 + 12 * index
    spread = 0.5
    x1, y1 = place.x + size * math.cos(a - spread), place.y + size * math.sin(a - spread)
    x2, y2 = place.x + (size + 3) * math.cos(a + spread), place.y + (size + 3) * math.sin(a + spread)
    c1x, c1y = place.x + reach * math.cos(a - spread - 0.2), place.y + reach * math.sin(a - spread - 0.2)
    c2x, c2y = place.x + reach * math.cos(a + spread + 0.2), place.y + reach * math.sin(a + spread + 0.2)
    return f"M{x1:.1f},{y1:.1f} C{c1x:.1f},{c1y:.1f} {c2x:.1f},{c2y:.1f} {x2:.1f},{y2:.1f}"
