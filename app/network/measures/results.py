"""What every measure gives back: a value per person, the raw figure, the conventions, ranks.

A measure never returns a bare dict: the pages show each number beside the rules that made it
(node set, normalization, loops, tie rule), so the result carries them as plain sentences.
"""

from __future__ import annotations

import math
from collections.abc import Hashable, Mapping
from dataclasses import dataclass, field

__all__ = ["RANK_TOLERANCE", "MeasureError", "MeasureResult", "RankedRow", "Sampling", "node_key", "rank_rows"]

RANK_TOLERANCE = 1e-9
"""Values that agree within this relative tolerance share a rank."""

ABSOLUTE_TOLERANCE = 1e-12
"""Values this close to each other tie whatever their size (0 and a rounding residue of 1e-17)."""


class MeasureError(ValueError):
    """A measure asked for with an option it does not accept (the pages turn it into a 400)."""

    def __init__(self, parameter: str, value: object, accepted: str):
        self.parameter = parameter
        self.value = value
        self.accepted = accepted
        super().__init__(f"{parameter}={value} is not accepted; accepted: {accepted}")


@dataclass(frozen=True)
class Sampling:
    """How a sampled estimate was made and how far it may be off."""

    samples: int
    """Number of persons taken at random as path sources (k)."""
    seed: int
    """Seed of the random choice: the same seed gives the same estimate."""
    standard_errors: dict[Hashable, float | None]
    """Standard error of each person's value (None where too few samples to tell)."""
    statement: str
    """The expected error in one plain sentence."""


@dataclass(frozen=True)
class RankedRow:
    """One person's line in a ranked table."""

    node: Hashable
    """The person (its id in graphs built from a slice)."""
    value: float | None
    """The normalized figure (None when undefined; see reason)."""
    rank: int | None
    """Competition rank (1, 2, 2, 4); None for an undefined value."""
    raw: float | None = None
    """The raw figure."""
    reason: str | None = None
    """Why the value is None, 0 by convention, or otherwise special."""


@dataclass(frozen=True)
class MeasureResult:
    """A measure of every person of a graph, with the conventions that made it."""

    measure: str
    """The measure's name as in URLs (``betweenness``, ``weighted_closeness``...)."""
    values: dict[Hashable, float | None]
    """The normalized figure of every node of the graph (None where undefined)."""
    raw: dict[Hashable, float | None]
    """The raw figure of every node (equal to ``values`` where the measure has no normalization)."""
    conventions: str
    """Plain sentences: node set and n, direction, loops, normalization, path ties, engine."""
    reasons: dict[Hashable, str] = field(default_factory=dict)
    """For some nodes, why their value is None or 0 by convention."""
    engine: str = "networkx"
    """Which library computed the figures (``networkx`` or ``igraph``)."""
    sampling: Sampling | None = None
    """Set when the figures are an estimate from sampled path sources."""

    def rows(self, tolerance: float = RANK_TOLERANCE) -> list[RankedRow]:
        """Return the ranked table: highest value first, ties within ``tolerance`` sharing a rank."""
        return rank_rows(self.values, tolerance, raw=self.raw, reasons=self.reasons)


def rank_rows(
    values: Mapping[Hashable, float | None], tolerance: float = RANK_TOLERANCE, *,
    raw: Mapping[Hashable, float | None] | None = None, reasons: Mapping[Hashable, str] | None = None,
) -> list[RankedRow]:
    """Return the nodes ranked by value, highest first, with competition ranks and ties.

    A node's rank is one more than the number of nodes whose value is clearly greater, that is
    greater by more than ``tolerance`` times the larger of the two (or by more than 1e-12).
    Values within the tolerance therefore share a rank and the next rank skips (1, 2, 2, 4);
    the rule never chains: 1.0, 1.0 + 0.6 t and 1.0 + 1.2 t do not all tie. Nodes with an
    undefined value (None or NaN) come last without a rank. Rows of one rank are ordered by
    node so that the table is the same on every run.

    Parameters
    ----------
    values : mapping
        The value of each node.
    tolerance : float, optional (default 1e-9)
        Relative tolerance within which two values tie.
    raw, reasons : mapping, optional
        Each node's raw figure and reason, carried into its row.

    Returns
    -------
    list of RankedRow

    Examples
    --------
    >>> [(row.node, row.rank) for row in rank_rows({"a": 3.0, "b": 5.0, "c": 5.0 + 1e-13, "d": None, "e": 1.0})]
    [('b', 1), ('c', 1), ('a', 3), ('e', 4), ('d', None)]
    """
    if not 0 <= tolerance < 1:
        raise MeasureError("tolerance", tolerance, "a number from 0 up to (not including) 1")
    raw, reasons = raw or {}, reasons or {}
    keys = {node: node_key(node) for node in values}
    defined = [(node, v) for node, v in values.items() if v is not None and not math.isnan(v)]
    undefined = [node for node, v in values.items() if v is None or math.isnan(v)]
    defined.sort(key=lambda item: (-item[1], keys[item[0]]))
    ranked: list[tuple[int, Hashable, float]] = []
    greater = 0  # defined[:greater] are clearly greater than the current value
    for index, (node, value) in enumerate(defined):
        while greater < index and _clearly_greater(defined[greater][1], value, tolerance):
            greater += 1
        ranked.append((greater + 1, node, value))
    ranked.sort(key=lambda item: (item[0], keys[item[1]]))
    rows = [RankedRow(node, value, rank, raw.get(node), reasons.get(node)) for rank, node, value in ranked]
    rows.extend(RankedRow(node, None, None, raw.get(node), reasons.get(node)) for node in sorted(undefined, key=keys.__getitem__))
    return rows


def node_key(node: Hashable) -> tuple[int, object]:
    """Return a sort key that orders ids numerically and other nodes by their text."""
    if isinstance(node, int) and not isinstance(node, bool):
        return (0, node)
    if isinstance(node, str):
        return (1, node)
    return (2, repr(node))


def _clearly_greater(a: float, b: float, tolerance: float) -> bool:
    return a - b > max(tolerance * max(abs(a), abs(b)), ABSOLUTE_TOLERANCE)
