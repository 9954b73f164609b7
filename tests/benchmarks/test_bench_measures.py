"""Measure pages on generated networks of 1,000, 5,000 and 20,000 persons (10 attestations each).

For each page: the cold time (first request, nothing stored, computed in the request: the
inline threshold is raised so that the figures are those of the computation itself) and the
warm time (the stored result). Beside each heavy kernel, plain networkx on the same graph in the
same run, as a ratio; skipped above 5,000 persons, where networkx takes over 5 minutes.
Targets at 20,000 persons: cheap measures cold under 2 s, sampled betweenness under 3 s, warm under 100 ms.
"""

from __future__ import annotations

import time

import networkx as nx
import pytest
from conftest import report, timings
from fastapi.testclient import TestClient
from generate import generate

from app.config import Settings
from app.db import Database, upgrade
from app.main import create_app
from app.network.measures import kernels
from app.network.results import SliceGraph
from app.network.slice import Slice

PAGES = [("summary", {}), ("components", {}), ("cut-points", {}), ("cliques", {}), ("communities", {})] + [
    ("centrality", {"measure": m}) for m in ("degree", "strength", "pagerank", "eigenvector", "betweenness", "closeness")]
NETWORKX_UP_TO = 5000


@pytest.mark.parametrize("persons", [1000, 5000, 20_000])
def test_bench_measure_pages(cache_dir, persons):
    path = cache_dir / f"measures-{persons}-{persons * 10}.db"
    database = generate(path, persons=persons, attestations=persons * 10) if not path.exists() else Database(f"sqlite:///{path}")
    upgrade(database)
    with database.write() as session:  # cold means cold: no stored result, no job
        from sqlalchemy import text

        session.execute(text("DELETE FROM measure_result"))
        session.execute(text("DELETE FROM job"))
    client = TestClient(create_app(Settings(database_url=f"sqlite:///{path}")))
    client.app.state.inline_up_to = 10**9
    figures: dict = {"persons": persons, "attestations": persons * 10}
    for view, params in PAGES:
        label = view + (f" {params['measure']}" if params else "")
        started = time.perf_counter()
        assert client.get(f"/api/network/{view}", params=params).status_code == 200, label
        figures[f"{label} cold_s"] = round(time.perf_counter() - started, 2)
        figures[f"{label} warm"] = timings(lambda: client.get(f"/api/network/{view}", params=params), repeat=5, warmup=1)
    with database.read() as session:
        G = SliceGraph.build(session, Slice(direction="undirected")).G
    figures["graph"] = f"{G.number_of_nodes()} persons, {G.number_of_edges()} ties (undirected view)"
    for name, ours, reference in (
        ("exact betweenness", lambda: kernels.betweenness(G), lambda: nx.betweenness_centrality(G, normalized=False)),
        ("closeness", lambda: kernels.closeness(G), lambda: nx.closeness_centrality(G)),
        ("transitivity", lambda: kernels.transitivity(G), lambda: (nx.transitivity(G), nx.average_clustering(G))),
    ):
        started = time.perf_counter()
        ours()
        ours_s = time.perf_counter() - started
        entry = {"igraph_s": round(ours_s, 3)}
        if persons <= NETWORKX_UP_TO:
            started = time.perf_counter()
            reference()
            entry["networkx_s"] = round(time.perf_counter() - started, 3)
            entry["networkx / igraph"] = round(entry["networkx_s"] / max(ours_s, 1e-9), 1)
        else:
            entry["networkx_s"] = f"skipped: above {NETWORKX_UP_TO} persons networkx would take over 5 minutes"
        figures[f"kernel {name}"] = entry
    report(f"measures-{persons}", figures)
    database.dispose()
