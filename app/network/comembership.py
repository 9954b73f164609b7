"""The graph of a slice under ``mode=co-membership`` or ``mode=both``, for the measure pages.

A projection is a graph like any other: under ``mode=co-membership`` two persons are tied when
they share a group in the slice (the person-to-person projection of ``app.network.twomode``,
weighted by the slice's ``weighting`` and restricted by ``overlap`` and ``max_group_size``);
under ``mode=both`` those ties are added to the relation ties of the slice. The conventions
(node set, how weights combine) are stated in words by :func:`mode_conventions`, and every
measure page shows them.
"""

from __future__ import annotations

from collections import defaultdict

import networkx as nx
import numpy as np
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from app.models import Attestation, Collection, Membership, Person, Source
from app.network.slice import ResolvedSlice, Slice, attestation_conditions
from app.network.measures.conventions import NODE_SETS
from app.network.measures.results import MeasureError
from app.network.twomode import incidence, membership_evidence, project, projected_graph

__all__ = [
    "MAX_PROJECTED_TIES",
    "PROJECTION_CLIQUE_LIMIT",
    "co_membership_graph",
    "membership_collection_counts",
    "mode_conventions",
    "mode_population",
]

MAX_PROJECTED_TIES = 500_000
"""Ties by shared groups the measure pages build a graph of, at most (``max_group_size`` narrows it)."""
PROJECTION_CLIQUE_LIMIT = 1_000
"""Cliques enumerated on a projection: every group of k members is a k-clique by construction."""

WEIGHTING_WORDS = {
    "shared": "the number of groups the two share",
    "newman": "Newman's collaboration weighting (each shared group of n members adds 1/(n − 1))",
    "jaccard": "the Jaccard overlap of their groups (shared groups over the groups of either)",
}


def co_membership_graph(session: Session, resolved: ResolvedSlice, *, relations: nx.Graph | None = None) -> nx.Graph:
    """Return the co-membership graph of the slice, or (given ``relations``) its union with the relation graph.

    Nodes are person ids. A co-membership edge carries ``weight`` (the slice's ``weighting``),
    ``shared`` (groups counted), ``co_membership_weight`` and empty ``relation_ids`` and
    ``kinds``; it has no documents of its own (the ties page lists the memberships behind it).
    Combined with ``relations`` (``mode=both``), a pair tied both ways becomes one edge whose
    ``weight`` is the relation weight plus the co-membership weight, keeping the relation's
    counts; on a directed relation graph a co-membership tie runs both ways. The node set is
    the persons with a kept membership (``nodes=evidence``), only those with a tie
    (``nodes=ties``) or every person (``nodes=all``), joined to the relation graph's own.
    The graph's ``graph`` dict holds ``membership_ids`` and ``membership_attestations``, for the summary.
    """
    s = resolved.slice
    evidence = membership_evidence(session, resolved)
    _check_size(evidence, s)
    P = projected_graph(evidence, onto="persons", weighting=s.weighting, overlap=s.overlap, shared_ids=False)
    G: nx.Graph = nx.Graph() if relations is None else relations.copy()
    directed = G.is_directed()
    for u, v, data in P.edges(data=True):
        for a, b in ((u, v), (v, u)) if directed else ((u, v),):
            if G.has_edge(a, b):
                edge = G[a][b]
                edge["relation_weight"] = edge["weight"]
                edge["weight"] = edge["weight"] + data["weight"]
            else:
                G.add_edge(a, b, weight=data["weight"], relation_ids=[], kinds=[])
                edge = G[a][b]
            edge["co_membership_weight"] = data["weight"]
            edge["shared"] = data["shared"]
    if s.nodes == "all":
        query = select(Person.id)
        if s.unidentified == "drop":
            query = query.where(Person.unidentified.is_(False))
        G.add_nodes_from(session.scalars(query))
    elif s.nodes == "evidence":
        G.add_nodes_from(P.nodes)
    G.graph["membership_ids"] = sorted(m.membership_id for m in evidence)
    G.graph["membership_attestations"] = sum(len(m.attestation_ids) for m in evidence)
    return G


def _check_size(evidence: list, slice_: Slice, limit: int | None = None) -> None:
    """Refuse a projection of more than ``MAX_PROJECTED_TIES`` ties, naming the largest groups.

    A graph object per tie costs about 30 µs to build and measure, so three million ties (one
    20,000-person slice without ``max_group_size``) would hold a page for minutes.
    """
    limit = MAX_PROJECTED_TIES if limit is None else limit
    if not evidence:
        return
    ties = project(evidence, onto="persons", overlap=slice_.overlap).shared.nnz // 2
    if ties <= limit:
        return
    sizes = sorted(np.asarray(incidence(evidence).matrix.sum(axis=0)).ravel().tolist(), reverse=True)[:3]
    raise MeasureError(
        "max_group_size", slice_.max_group_size if slice_.max_group_size is not None else "none",
        f"a limit that leaves at most {limit:,} ties by shared groups, or a narrower slice: this slice's projection "
        f"ties {ties:,} pairs of persons (its largest groups have {', '.join(f'{int(n):,}' for n in sizes)} members "
        "in the slice); the two-mode page shows it without building a graph of it",
    )


def membership_collection_counts(session: Session, resolved: ResolvedSlice, membership_ids: list[int]) -> dict[int | None, int]:
    """Return the slice's attestations of the given memberships per collection (None: printed sources)."""
    wanted = set(membership_ids)
    if not wanted:
        return {}
    query = (
        select(Membership.id, Source.collection_id, func.count(Attestation.id))
        .join(Membership, Attestation.membership_id == Membership.id)
        .join(Source, Attestation.source_id == Source.id)
        .outerjoin(Collection, Source.collection_id == Collection.id)
        .where(*attestation_conditions(resolved))
        .group_by(Membership.id, Source.collection_id)
    )
    counts: dict[int | None, int] = defaultdict(int)
    for membership_id, collection_id, count in session.connection().execute(query).all():
        if membership_id in wanted:
            counts[collection_id] += count
    return dict(counts)


def mode_conventions(slice_: Slice) -> str | None:
    """Return in words what a measure computed under the slice's mode stands on; None under ``mode=relations``.

    Examples
    --------
    >>> print(mode_conventions(Slice(mode="co-membership")))  # doctest: +ELLIPSIS
    Ties by shared groups (co-membership): two persons are tied when both belong to a group...
    """
    if slice_.mode == "relations":
        return None
    overlap = (" only where their terms in it overlap in time (an undated membership overlaps nothing)"
               if slice_.overlap == "required" else ", whenever the memberships were held")
    size = (f" Groups of more than {slice_.max_group_size} members in the slice are left out."
            if slice_.max_group_size is not None else
            " Every group counts, however large: a group of k members ties k(k − 1)/2 pairs (max_group_size=N leaves "
            "large groups out).")
    nodes = {"evidence": "the persons with a membership the slice keeps", "ties": "only the persons with a tie",
             "all": "every person in the dataset"}[slice_.nodes]
    text = (f"Ties by shared groups (co-membership): two persons are tied when both belong to a group{overlap}; "
            f"the weight of such a tie is {WEIGHTING_WORDS[slice_.weighting]}.{size} Relation kinds and "
            "min_collections do not apply to memberships. A co-membership tie has no direction.")
    if slice_.mode == "co-membership":
        return text + f" The node set is {nodes}, so n differs from the n of the same slice's relations."
    relation_nodes = {"evidence": "the persons with evidence in the slice", "ties": "the persons with a tie",
                      "all": "every person in the dataset"}[slice_.nodes]
    return (text + " Relations and shared groups together (mode=both): a pair tied both by relations and by shared "
            f"groups is one tie whose weight is the sum of the two weights (the relation's {slice_.weight} plus the "
            "co-membership weight), so the two kinds of weight are added as they are; on a directed slice the "
            f"co-membership tie runs both ways. The node set is {relation_nodes} and the persons with a membership, "
            "so n is at least the n of the relations alone.")


def mode_population(text: str, slice_: Slice) -> str:
    """Return a sentence or text naming the node set (``population_sentence``) in the words of the slice's mode.

    Under ``mode=co-membership`` the evidence node set is the persons with a kept membership,
    not everyone with evidence of any kind.

    Examples
    --------
    >>> mode_population("n = 4 persons (node set: evidence, every person with at least one attestation of any kind "
    ...                 "in the slice).", Slice(mode="co-membership"))
    'n = 4 persons (node set: evidence, every person with a membership the slice keeps).'
    """
    if slice_.mode != "co-membership" or slice_.nodes != "evidence":
        return text
    return text.replace(NODE_SETS["evidence"], "every person with a membership the slice keeps")
