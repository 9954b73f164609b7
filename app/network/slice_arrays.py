"""The slice's relations and ties as arrays, counted in numpy from one plain read of the evidence.

On a slice of 200,000 attestations, grouping and counting distinct documents in SQL (and
making a Python object per relation and per tie) took over two seconds of every measure page's
first visit. Here the database returns one small row per attestation (relation, kind, ends,
document, collection) and numpy does the counting: attestations and distinct documents per
relation, the slice's rules for ties (``graph_from_evidence`` states them: an arc per
direction under ``direction=recorded``, an undirected kind both ways; a tie per pair
otherwise; ``reciprocal`` keeps a directed relation only when its kind is attested the other
way; loops unless ``loops=drop``; ``min_collections``; ``same_as=merge``), and the distinct
documents of a tie that holds several relations (the union of their documents).
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np
from sqlalchemy import func
from sqlalchemy.orm import Session

from app.models import Attestation, Relation, Source
from app.network.slice import ResolvedSlice, evidence_query

__all__ = ["SliceArrays", "TieArrays", "slice_arrays", "tie_arrays"]

_COLUMNS = 7  # relation, kind, directed, a, b, document, collection (-1 for none)


@dataclass(frozen=True)
class SliceArrays:
    """The relations the slice keeps, ids ascending, with their counts (one entry per relation)."""

    relation: np.ndarray
    kind: np.ndarray
    directed: np.ndarray  # bool
    a: np.ndarray  # person ids, after same_as=merge
    b: np.ndarray
    attestations: np.ndarray
    documents: np.ndarray  # distinct documents (copies folded into their originals)
    pair_relation: np.ndarray  # each distinct (relation, document): the relation's position
    pair_document: np.ndarray
    collection_relation: np.ndarray  # each (relation, collection) with attestations: the relation's position
    collection: np.ndarray  # the collection id (-1: a printed source, in no collection)
    collection_attestations: np.ndarray  # the relation's attestations from that collection

    def __len__(self) -> int:
        return len(self.relation)


@dataclass(frozen=True)
class TieArrays:
    """The ties of the slice's graph: tie k joins ``u[k]`` and ``v[k]`` (person ids), in (u, v) order.

    ``entry_tie`` and ``entry_relation`` list which relation (its position in the SliceArrays)
    lies behind which tie, sorted by tie; ``tied`` marks the relations kept by the tie rules.
    """

    u: np.ndarray
    v: np.ndarray
    attestations: np.ndarray
    documents: np.ndarray
    entry_tie: np.ndarray
    entry_relation: np.ndarray
    tied: np.ndarray

    def __len__(self) -> int:
        return len(self.u)

    def relations_of(self, tie: int) -> np.ndarray:
        """Return the positions (in the SliceArrays) of the relations behind one tie."""
        start, end = np.searchsorted(self.entry_tie, [tie, tie + 1])
        return self.entry_relation[start:end]


def slice_arrays(session: Session, resolved: ResolvedSlice, same_as: dict[int, int]) -> SliceArrays:
    """Return the relations the slice keeps, counted from one row per attestation."""
    document = func.coalesce(Source.copy_of_id, Source.id)
    columns = [Attestation.relation_id, Relation.kind_id, Relation.kind_directed, Relation.person_a_id,
               Relation.person_b_id, document, func.coalesce(Source.collection_id, -1)]
    result = session.connection().execute(evidence_query(resolved, columns, None, False))
    rows = np.fromiter(itertools.chain.from_iterable(result), dtype=np.int64).reshape(-1, _COLUMNS)
    relation, first, inverse = np.unique(rows[:, 0], return_index=True, return_inverse=True)
    inverse = inverse.reshape(-1)
    count = len(relation)
    attestations = np.bincount(inverse, minlength=count)
    keep = np.ones(count, dtype=bool)
    minimum = resolved.slice.min_collections
    if minimum > 1:
        collected = rows[:, 6] >= 0
        cells = _distinct(inverse[collected] * (int(rows[:, 6].max(initial=0)) + 1) + rows[collected, 6])
        per_relation = np.bincount(cells // (int(rows[:, 6].max(initial=0)) + 1), minlength=count)
        keep = per_relation >= minimum
    span = int(rows[:, 5].max(initial=0)) + 1
    pairs = _distinct(inverse * span + rows[:, 5])
    pair_relation, pair_document = pairs // span, pairs % span
    documents = np.bincount(pair_relation, minlength=count)
    collection_span = int(rows[:, 6].max(initial=0)) + 2
    cells, per_cell = np.unique(inverse * collection_span + rows[:, 6] + 1, return_counts=True)
    a, b = rows[first, 3], rows[first, 4]
    if same_as:
        a, b = _mapped(a, same_as), _mapped(b, same_as)
    arrays = SliceArrays(relation, rows[first, 1], rows[first, 2].astype(bool), a, b, attestations, documents,
                         pair_relation, pair_document, cells // collection_span, cells % collection_span - 1, per_cell)
    return _kept(arrays, keep) if not keep.all() else arrays


def tie_arrays(arrays: SliceArrays, *, direction: str, loops: str) -> TieArrays:
    """Return the ties of the slice's graph under its direction and loops rules, with their counts."""
    a, b, directed = arrays.a, arrays.b, arrays.directed
    tied = np.ones(len(arrays), dtype=bool)
    span = int(max(a.max(initial=0), b.max(initial=0))) + 1
    if direction == "reciprocal":
        key = (arrays.kind * span + a) * span + b
        back = (arrays.kind * span + b) * span + a
        tied = ~directed | (a == b) | np.isin(back, key[directed])
    positions = np.flatnonzero(tied & ((a != b) | (loops != "drop")))
    recorded = direction == "recorded"
    if recorded:
        both = positions[~directed[positions] & (a[positions] != b[positions])]
        entry_relation = np.concatenate([positions, both])
        u = np.concatenate([a[positions], b[both]])
        v = np.concatenate([b[positions], a[both]])
    else:
        entry_relation = positions
        u, v = np.minimum(a[positions], b[positions]), np.maximum(a[positions], b[positions])
    keys, entry_tie = np.unique(u * span + v, return_inverse=True)
    entry_tie = entry_tie.reshape(-1)
    ties = len(keys)
    attestations = np.bincount(entry_tie, weights=arrays.attestations[entry_relation], minlength=ties).astype(np.int64)
    # Distinct documents of each tie: the (tie, document) pairs of all its relations, counted once.
    tie_of = np.full((2 if recorded else 1, len(arrays)), -1, dtype=np.int64)
    tie_of[0, entry_relation[: len(positions)]] = entry_tie[: len(positions)]
    if recorded:
        tie_of[1, entry_relation[len(positions):]] = entry_tie[len(positions):]
    pair_ties = tie_of[:, arrays.pair_relation].reshape(-1)
    pair_documents = np.tile(arrays.pair_document, tie_of.shape[0])
    found = pair_ties >= 0
    document_span = int(arrays.pair_document.max(initial=0)) + 1
    cells = _distinct(pair_ties[found] * document_span + pair_documents[found])
    documents = np.bincount(cells // document_span, minlength=ties)
    order = np.argsort(entry_tie, kind="stable")
    return TieArrays(keys // span, keys % span, attestations, documents, entry_tie[order], entry_relation[order], tied)


def _distinct(values: np.ndarray) -> np.ndarray:
    """Return the distinct values, ascending (as ``np.unique``, whose hashing is far slower here than a sort)."""
    ordered = np.sort(values)
    return ordered[np.concatenate(([True], ordered[1:] != ordered[:-1]))] if len(ordered) else ordered


def _mapped(ids: np.ndarray, mapping: dict[int, int]) -> np.ndarray:
    """Return ids with each linked person replaced by the one standing for them."""
    linked = np.fromiter(mapping, dtype=np.int64, count=len(mapping))
    standing = np.fromiter(mapping.values(), dtype=np.int64, count=len(mapping))
    order = np.argsort(linked)
    linked, standing = linked[order], standing[order]
    at = np.clip(np.searchsorted(linked, ids), 0, len(linked) - 1)
    return np.where(linked[at] == ids, standing[at], ids)


def _kept(arrays: SliceArrays, keep: np.ndarray) -> SliceArrays:
    """Return the relations where ``keep`` is true (``min_collections``), pairs renumbered."""
    position = np.cumsum(keep) - 1
    inside = keep[arrays.pair_relation]
    counted = keep[arrays.collection_relation]
    return SliceArrays(arrays.relation[keep], arrays.kind[keep], arrays.directed[keep], arrays.a[keep], arrays.b[keep],
                       arrays.attestations[keep], arrays.documents[keep], position[arrays.pair_relation[inside]],
                       arrays.pair_document[inside], position[arrays.collection_relation[counted]],
                       arrays.collection[counted], arrays.collection_attestations[counted])
