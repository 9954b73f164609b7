"""Persons recorded as "possibly the same as" one another, treated as one under ``same_as=merge``.

The historian who links two records short of a merge can see what the identification changes:
with ``same_as=merge`` the slice counts each group of linked persons (linked directly or through
others) as one person, the one with the lowest id standing for all. Their ties are then one tie
per pair and kind, with documents counted once, and a tie between two of them becomes a self-loop
(left out unless ``loops=keep``). The default, ``same_as=apart``, keeps every record apart.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import NamedTuple, TypeVar

from sqlalchemy import select
from sqlalchemy.orm import Session

from app.models import PersonLink

__all__ = ["merge_nodes", "merge_rows", "same_as_mapping"]

Row = TypeVar("Row", bound=NamedTuple)


def same_as_mapping(session: Session, same_as: str) -> dict[int, int]:
    """Return {person id: the id standing for it} for every linked person under ``same_as=merge``, else {}."""
    if same_as != "merge":
        return {}
    parent: dict[int, int] = {}

    def root(p: int) -> int:
        while parent.setdefault(p, p) != p:
            parent[p] = parent[parent[p]]
            p = parent[p]
        return p

    for a, b in session.execute(select(PersonLink.person_a_id, PersonLink.person_b_id)):
        ra, rb = root(a), root(b)
        if ra != rb:
            parent[max(ra, rb)] = min(ra, rb)
    return {p: root(p) for p in list(parent) if root(p) != p}


def merge_rows(rows: list[Row], mapping: dict[int, int]) -> list[Row]:
    """Return evidence or total rows with linked persons replaced by the one standing for them."""
    if not mapping:
        return rows
    return [
        row._replace(person_a=mapping.get(row.person_a, row.person_a), person_b=mapping.get(row.person_b, row.person_b))
        if row.person_a in mapping or row.person_b in mapping else row
        for row in rows
    ]


def merge_nodes(nodes: Iterable[int], mapping: dict[int, int]) -> set[int]:
    """Return a node set with linked persons replaced by the one standing for them."""
    return {mapping.get(n, n) for n in nodes}
