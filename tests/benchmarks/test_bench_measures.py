"""Measure pages on generated networks of 1,000, 5,000 and 20,000 persons (10 attestations each).

For each page: the cold time (first request, nothing stored) and the warm time (the stored
result), as a user meets them: on a slice above the inline threshold (3,000 persons) the heavy
parts (exact closeness, harmonic closeness, the stability of communities across seeds, exact path
lengths of the summary) are queued for the background worker, and the page answers at once with
what it can show (an estimate, one seed's partition, the computing state). Those background jobs
are then run one by one, as the worker runs them, and timed ("background"). Beside each heavy
kernel, plain networkx on the same graph in the same run, as a ratio; skipped above 5,000 persons,
where networkx takes over 5 minutes. Exact betweenness is timed cold at every size.

The background jobs run in a process of their own, as the server's worker runs them. The machine
may be shared: beside each elapsed time, the CPU time of the process doing the work (and of the
processes it forks: exact betweenness of a large graph searches paths in one process per core),
and the load average at the start and the end of the run.

Targets at 20,000 persons: degree, strength, PageRank, eigenvector, components, cut points,
cliques and communities cold under 2 s, sampled betweenness under 3 s, every table warm under
100 ms; at 5,000 persons exact betweenness cold under 3 s.
"""

from __future__ import annotations

import multiprocessing
import os
import resource
import time
from concurrent.futures import ProcessPoolExecutor

import networkx as nx
import pytest
from conftest import report, timings
from fastapi.testclient import TestClient
from generate import generate
from sqlalchemy import text

from app.config import Settings
from app.db import Database, upgrade
from app.main import create_app
from app.network import jobs
from app.network.measures import kernels
from app.network.results import SliceGraph
from app.network.slice import Slice

PAGES = [("summary", {}), ("components", {}), ("cut-points", {}), ("cliques", {}), ("communities", {})] + [
    ("centrality", {"measure": m}) for m in ("degree", "strength", "pagerank", "eigenvector", "betweenness", "closeness")]
NETWORKX_UP_TO = 5000
TARGETS = {"cold_s": {"centrality degree": 2, "centrality strength": 2, "centrality pagerank": 2,
                      "centrality eigenvector": 2, "components": 2, "cut-points": 2, "cliques": 2, "communities": 2,
                      "centrality betweenness": 3},
           "warm median_ms": 100, "exact betweenness cold_s at 5000": 3}


@pytest.mark.parametrize("persons", [1000, 5000, 20_000])
def test_bench_measure_pages(cache_dir, persons):
    path = cache_dir / f"measures-{persons}-{persons * 10}.db"
    database = generate(path, persons=persons, attestations=persons * 10) if not path.exists() else Database(f"sqlite:///{path}")
    upgrade(database)
    with database.write() as session:  # cold means cold: no stored result, no job
        session.execute(text("DELETE FROM measure_result"))
        session.execute(text("DELETE FROM job"))
    client = TestClient(create_app(Settings(database_url=f"sqlite:///{path}")))  # no lifespan: jobs wait for us
    # The jobs run in a process of their own, as the server's background worker runs them (a spawned
    # process with no other thread: exact betweenness forks its path searches there, never in a server).
    worker = ProcessPoolExecutor(max_workers=1, mp_context=multiprocessing.get_context("spawn"))
    figures: dict = {"persons": persons, "attestations": persons * 10, "targets at 20000": TARGETS,
                     "load average at start (1, 5, 15 min)": [round(x, 2) for x in os.getloadavg()]}
    started, cpu = time.perf_counter(), cpu_seconds()
    client.get("/api/network")  # the first request of the process: templates, connections, response schemas
    figures["first request of the process"] = {"s": round(time.perf_counter() - started, 2),
                                               "cpu_s": round(cpu_seconds() - cpu, 2)}
    for view, params in PAGES:
        label = view + (f" {params['measure']}" if params else "")
        started, cpu = time.perf_counter(), cpu_seconds()
        answer = client.get(f"/api/network/{view}", params=params)
        assert answer.status_code == 200, label
        figures[f"{label} cold_s"] = round(time.perf_counter() - started, 2)
        figures[f"{label} cold cpu_s"] = round(cpu_seconds() - cpu, 2)
        if answer.json().get("job"):
            figures[f"{label} cold"] = f"answered at once; {answer.json()['job']['measure']} queued for the background worker"
        figures[f"{label} warm"] = timings(lambda: client.get(f"/api/network/{view}", params=params), repeat=5, warmup=1)
        while True:  # the background worker's jobs, one by one (as it would while the next page is visited)
            started = time.perf_counter()
            ran = worker.submit(run_one_job, f"sqlite:///{path}").result()
            if ran is None:
                break
            name, cpu = ran
            figures[f"background {name}"] = {"s": round(time.perf_counter() - started, 2), "cpu_s": round(cpu, 2)}
    for view, params in PAGES:  # the pages once the background results are stored
        label = view + (f" {params['measure']}" if params else "")
        figures[f"{label} warm after background"] = timings(lambda: client.get(f"/api/network/{view}", params=params),
                                                            repeat=3, warmup=1)
    started = time.perf_counter()
    assert client.get("/api/network/centrality", params={"measure": "betweenness", "exact": "yes"}).status_code == 200
    figures["centrality betweenness exact=yes (stored by the worker, or computed inline up to 3000) cold_s"] = round(
        time.perf_counter() - started, 2)
    with database.read() as session:
        G = SliceGraph.build(session, Slice(direction="undirected")).G
    figures["graph"] = f"{G.number_of_nodes()} persons, {G.number_of_edges()} ties (undirected view)"
    for name, ours, reference in (
        ("exact betweenness", lambda: kernels.betweenness(G), lambda: nx.betweenness_centrality(G, normalized=False)),
        ("closeness", lambda: kernels.closeness(G), lambda: nx.closeness_centrality(G)),
        ("transitivity", lambda: kernels.transitivity(G), lambda: (nx.transitivity(G), nx.average_clustering(G))),
    ):
        started, cpu = time.perf_counter(), cpu_seconds()
        ours()
        ours_s = time.perf_counter() - started
        entry = {"igraph_s": round(ours_s, 3), "igraph_cpu_s": round(cpu_seconds() - cpu, 3)}
        if persons <= NETWORKX_UP_TO:
            started = time.perf_counter()
            reference()
            entry["networkx_s"] = round(time.perf_counter() - started, 3)
            entry["networkx / igraph"] = round(entry["networkx_s"] / max(ours_s, 1e-9), 1)
        else:
            entry["networkx_s"] = f"skipped: above {NETWORKX_UP_TO} persons networkx would take over 5 minutes"
        figures[f"kernel {name}"] = entry
    worker.shutdown()
    figures["load average at end (1, 5, 15 min)"] = [round(x, 2) for x in os.getloadavg()]
    report(f"measures-{persons}", figures)
    database.dispose()


def cpu_seconds() -> float:
    """Return the CPU time of this process and of its finished child processes (forked path searches)."""
    children = resource.getrusage(resource.RUSAGE_CHILDREN)
    return time.process_time() + children.ru_utime + children.ru_stime


def run_one_job(database_url: str) -> tuple[str, float] | None:
    """Run the oldest queued job here (the worker's process); return its name and the CPU it took, or None."""
    database = Database(database_url)
    try:
        cpu = cpu_seconds()
        job = jobs.run_next_job(database)
        return None if job is None else (f"{job.measure} {job.options}", cpu_seconds() - cpu)
    finally:
        database.dispose()
