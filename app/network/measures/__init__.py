"""The measures of network analysis as pure functions of a slice's graph (no HTTP, no database).

One family per module, in the shape of networkx:

- ``centrality``: degree, strength (in and out), closeness, harmonic closeness, betweenness
  (exact or sampled), their weighted forms, eigenvector centrality and PageRank;
  ``compute(G, measure)`` picks one by its name in URLs.
- ``summary``: the slice at a glance, with warnings.
- ``components``, ``cuts`` (cut points and bridges), ``cliques``, ``communities``.
- ``results``: ``MeasureResult`` and ``rank_rows`` (ranks with ties); ``conventions``: the
  rules every measure follows and the sentences that state them.
- ``kernels``: the igraph adapter, which turns igraph's conventions into networkx's.

Input graphs come from ``app.network.slice.build_graph``; every result carries its
conventions as plain sentences, for the pages to show beside the numbers.
"""

from app.network.measures.centrality import DIRECTED_MEASURES, MEASURES, compute
from app.network.measures.cliques import CliquesResult, cliques
from app.network.measures.communities import CommunitiesResult, communities
from app.network.measures.components import ComponentsResult, components
from app.network.measures.cuts import CutsResult, cuts
from app.network.measures.results import MeasureError, MeasureResult, RankedRow, rank_rows
from app.network.measures.summary import NetworkSummary, collection_warning, summarize

__all__ = [
    "DIRECTED_MEASURES",
    "MEASURES",
    "CliquesResult",
    "CommunitiesResult",
    "ComponentsResult",
    "CutsResult",
    "MeasureError",
    "MeasureResult",
    "NetworkSummary",
    "RankedRow",
    "cliques",
    "collection_warning",
    "communities",
    "components",
    "compute",
    "cuts",
    "rank_rows",
    "summarize",
]
