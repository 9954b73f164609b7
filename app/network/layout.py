"""Positions for drawing an ego network: the ego at the centre, alters on rings by distance.

The layout is a pure function of the network: no randomness, every order broken by key, and
coordinates rounded, so the same data and slice always give the same picture. Alters that are
tied to each other sit next to each other on their ring (fewer crossing lines), and persons two
steps away sit near the radius-1 alters they are tied to.
"""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import dataclass

from app.documented import DOCUMENTED
from app.network.ego import EgoNetwork

__all__ = ["HEIGHT", "WIDTH", "Placement", "ego_layout"]

WIDTH = 1000
HEIGHT = 1000
MARGIN = 8
RINGS = {1: (280.0,), 2: (205.0, 350.0)}  # ring radii with one ring and with two


@dataclass(frozen=True)
class Placement:
    """Where one person is drawn."""

    __pydantic_config__ = DOCUMENTED

    x: float
    """Horizontal position in the drawing's coordinates (0 to WIDTH)."""
    y: float
    """Vertical position (0 to HEIGHT, downwards)."""
    angle: float | None
    """Direction from the centre in radians (0 to the right, clockwise); None for the ego."""
    ring: int
    """0 for the ego, 1 or 2 for the ring of its distance."""
    ring_size: int
    """How many persons share the ring (labels turn along the radius on crowded rings)."""
    label_room: float
    """Room for a label outward from the centre of the mark, to the next ring or the margin."""
    crowded: bool
    """True when labels should run along the radius: more than 20 on the ring (10 on an inner ring)."""


def ego_layout(network: EgoNetwork) -> dict[str, Placement]:
    """Return the position of every node of ``network``, by key.

    The ego sits at the centre. Radius-1 alters go round the first ring, starting at the top,
    in the order of a depth-first walk through their ties to each other (largest cluster
    first), so tied alters are neighbours. Radius-2 alters go round the outer ring, ordered by
    the mean direction of the radius-1 alters they are tied to, evenly spaced.
    """
    cx, cy = WIDTH / 2, HEIGHT / 2
    by_ring: dict[int, list[str]] = defaultdict(list)
    for node in network.nodes:
        by_ring[node.distance].append(node.key)
    radii = RINGS[2] if by_ring.get(2) else RINGS[1]
    weights = _pair_weights(network)

    placed = {network.ego: Placement(x=cx, y=cy, angle=None, ring=0, ring_size=1, label_room=radii[0], crowded=False)}
    first = _walk_order(sorted(by_ring.get(1, [])), weights)
    angles = {key: -math.pi / 2 + 2 * math.pi * i / len(first) for i, key in enumerate(first)}
    second = sorted(by_ring.get(2, []))
    if second:
        angles.update(_outer_angles(second, angles, weights))
    for ring, keys in ((1, first), (2, second)):
        outside = radii[ring] if ring < len(radii) else WIDTH / 2 - MARGIN
        for key in keys:
            a = angles[key]
            placed[key] = Placement(
                x=round(cx + radii[ring - 1] * math.cos(a), 1), y=round(cy + radii[ring - 1] * math.sin(a), 1),
                angle=round(a, 4), ring=ring, ring_size=len(keys), label_room=outside - radii[ring - 1],
                crowded=len(keys) > (10 if ring < len(radii) else 20),
            )  # fmt: skip
    return placed


def _pair_weights(network: EgoNetwork) -> dict[str, dict[str, float]]:
    """Return the summed weight of the ties between each pair (either direction), loops left out."""
    weights: dict[str, dict[str, float]] = defaultdict(lambda: defaultdict(float))
    for edge in network.edges:
        if edge.source != edge.target:
            weights[edge.source][edge.target] += edge.weight
            weights[edge.target][edge.source] += edge.weight
    return weights


def _walk_order(keys: list[str], weights: dict[str, dict[str, float]]) -> list[str]:
    """Order ``keys`` by depth-first walks through their ties to each other.

    Clusters come largest first; each walk starts at its best-connected member and follows
    the strongest tie first. Alters tied only to the ego come last, by key.
    """
    members = set(keys)
    seen: set[str] = set()
    clusters: list[list[str]] = []
    for key in keys:
        if key in seen:
            continue
        cluster, stack = [], [key]
        seen.add(key)
        while stack:
            current = stack.pop()
            cluster.append(current)
            for other in weights.get(current, {}):
                if other in members and other not in seen:
                    seen.add(other)
                    stack.append(other)
        clusters.append(sorted(cluster))
    clusters.sort(key=lambda c: (-len(c), c[0]))
    order: list[str] = []
    for cluster in clusters:
        inside = set(cluster)
        degree = {k: sum(1 for o in weights.get(k, {}) if o in inside) for k in cluster}
        start = min(cluster, key=lambda k: (-degree[k], k))
        visited: set[str] = set()
        stack = [start]
        while stack:
            current = stack.pop()
            if current in visited:
                continue
            visited.add(current)
            order.append(current)
            nexts = sorted((o for o in weights.get(current, {}) if o in inside and o not in visited),
                           key=lambda o: (-weights[current][o], o))  # fmt: skip
            stack.extend(reversed(nexts))  # the strongest tie is walked first
    return order


def _outer_angles(keys: list[str], inner: dict[str, float], weights: dict[str, dict[str, float]]) -> dict[str, float]:
    """Return evenly spaced angles for the outer ring, in the order of each key's inner neighbours."""
    target: dict[str, float] = {}
    for key in keys:
        x = sum(w * math.cos(inner[o]) for o, w in weights.get(key, {}).items() if o in inner)
        y = sum(w * math.sin(inner[o]) for o, w in weights.get(key, {}).items() if o in inner)
        target[key] = math.atan2(y, x) % (2 * math.pi)
    order = sorted(keys, key=lambda k: (round(target[k], 6), k))
    step = 2 * math.pi / len(order)
    # Turn the evenly spaced ring as a whole so that each key lies as near its target as possible.
    sx = sum(math.cos(target[k] - i * step) for i, k in enumerate(order))
    sy = sum(math.sin(target[k] - i * step) for i, k in enumerate(order))
    offset = math.atan2(sy, sx) if (sx or sy) else 0.0
    return {k: offset + i * step for i, k in enumerate(order)}
