"""A shared instance under load: 8 readers browsing person pages and 2 editors adding attestations,
against real uvicorn on 127.0.0.1, on the generated network of 20,000 persons / 200,000 attestations.

A bounded loop (each client makes a fixed number of requests). Reported: throughput and median and
95th-percentile latency of readers and editors, and every failed request. Target: readers' p95
under 300 ms, no failed request. ``BENCH_SHARED_PERSONS`` runs it on a smaller network;
``BENCH_SHARED_WORKERS`` (default 1 and 2, one run each) is the number of server processes
(``attesta serve --workers N`` above 1).

No accounts exist on the benchmark's database, so every client is the local user of a laptop
instance (full rights, nothing redacted). Beside the elapsed times, the CPU seconds the server
processes and this process (the clients) spent during the loop are reported, with the load
average: on a machine shared with other work, the server gets less than its cores. The clients
never pause between requests, so with every client waiting on the server a reader's time is
roughly the number of clients times the CPU time of a request, divided by the cores the server
processes get.
"""

from __future__ import annotations

import os
import random
import re
import statistics
import threading
import time

import httpx
import pytest
from conftest import report
from generate import generate
from sqlalchemy import text

from app.db import Database, upgrade
from helpers import running_server

PERSONS = int(os.environ.get("BENCH_SHARED_PERSONS", "20000"))
ATTESTATIONS = PERSONS * 10
READERS, EDITORS = 8, int(os.environ.get("BENCH_SHARED_EDITORS", "2"))  # 0: readers alone, for comparison
READS, EDITS = 60, 40  # requests per reader, per editor
TARGET_READER_P95_MS = 300
WORKERS = [int(n) for n in os.environ.get("BENCH_SHARED_WORKERS", "1,2").split(",")]


def _descendants(pid: int) -> list[int]:
    found = []
    for task in os.listdir(f"/proc/{pid}/task"):
        try:
            children = [int(c) for c in open(f"/proc/{pid}/task/{task}/children").read().split()]
        except OSError:
            continue
        for child in children:
            found += [child, *_descendants(child)]
    return found


def _server_cpu_seconds() -> float:
    """CPU seconds (user and system) spent so far by the processes this one started: the server's (Linux /proc)."""
    ticks = os.sysconf("SC_CLK_TCK")
    total = 0
    for pid in _descendants(os.getpid()):
        try:
            fields = open(f"/proc/{pid}/stat").read().rsplit(")", 1)[1].split()
        except OSError:
            continue
        total += int(fields[11]) + int(fields[12])  # utime, stime (proc(5), fields 14 and 15)
    return total / ticks


def _percentile(samples: list[float], share: float) -> float:
    ordered = sorted(samples)
    return round(ordered[min(len(ordered) - 1, int(share * len(ordered)))], 1)


@pytest.mark.parametrize("workers", WORKERS)
def test_readers_and_editors_at_once(cache_dir, workers):
    path = cache_dir / f"browse-{PERSONS}-{ATTESTATIONS}.db"  # the browse benchmark's network, shared
    database = generate(path, persons=PERSONS, attestations=ATTESTATIONS) if not path.exists() else Database(f"sqlite:///{path}")
    upgrade(database)
    with database.read() as session:
        keys = [k for (k,) in session.execute(text("SELECT key FROM person ORDER BY id"))]
        relations = [r for (r,) in session.execute(text("SELECT id FROM relation ORDER BY id LIMIT 2000"))]
        sources = [s for (s,) in session.execute(text("SELECT key FROM source ORDER BY id LIMIT 2000"))]
    database.dispose()
    rng_warm = random.Random("warm")
    latencies: dict[str, list[float]] = {"reader": [], "editor": []}
    failures: list[str] = []
    lock = threading.Lock()

    def client_loop(role: str, number: int, base_url: str) -> None:
        rng = random.Random(f"{role}{number}")
        with httpx.Client(base_url=base_url, timeout=60) as client:
            token = re.search(r'name="csrf_token" value="([^"]+)"', client.get("/new/person").text).group(1)
            for n in range(READS if role == "reader" else EDITS):
                started = time.perf_counter()
                if role == "reader":
                    answer = client.get(f"/persons/{rng.choice(keys)}")
                    ok = answer.status_code == 200
                else:
                    answer = client.post(f"/relations/{rng.choice(relations)}/attestations", data={
                        "csrf_token": token, "source": rng.choice(sources), "locus": f"bench {number}-{n}"})
                    ok = answer.status_code == 303
                elapsed = (time.perf_counter() - started) * 1000
                with lock:
                    latencies[role].append(elapsed)
                    if not ok or "locked" in answer.text:
                        failures.append(f"{role} {number}: {answer.status_code} {answer.text[:120]}")

    with running_server(f"sqlite:///{path}", timeout=180, workers=workers) as base_url:
        for _ in range(4 * workers):  # first requests of each process (routes are built at its start): templates
            httpx.get(f"{base_url}/persons/{rng_warm.choice(keys)}", timeout=60)
        httpx.get(f"{base_url}/persons/{keys[0]}", timeout=60)  # first request: templates and caches
        threads = [threading.Thread(target=client_loop, args=(role, n, base_url))
                   for role, count in (("reader", READERS), ("editor", EDITORS)) for n in range(count)]
        started, server_cpu, client_cpu = time.perf_counter(), _server_cpu_seconds(), time.process_time()
        for thread in threads:
            thread.start()
        for thread in threads:
            thread.join()
        seconds = time.perf_counter() - started
        server_cpu, client_cpu = _server_cpu_seconds() - server_cpu, time.process_time() - client_cpu
    load = os.getloadavg()
    figures = {"persons": PERSONS, "attestations": ATTESTATIONS, "readers": READERS, "editors": EDITORS,
               "server_processes": workers, "cpus": os.cpu_count(),
               "load_average_at_end": [round(x, 2) for x in load],
               "machine": "shared with other developers' tests while measured (see load_average_at_end)",
               "seconds": round(seconds, 1), "server_cpu_seconds": round(server_cpu, 1),
               "client_cpu_seconds": round(client_cpu, 1),
               "failed_requests": len(failures), "failures": failures[:10],
               "target": {"reader p95_ms": TARGET_READER_P95_MS}}
    for role, samples in latencies.items():
        if not samples:
            continue
        figures[role] = {"requests": len(samples), "per_second": round(len(samples) / seconds, 1),
                         "median_ms": round(statistics.median(samples), 1), "p95_ms": _percentile(samples, 0.95)}
    figures["reader p95 target met"] = figures["reader"]["p95_ms"] < TARGET_READER_P95_MS
    report(f"shared-{PERSONS}" + ("" if EDITORS == 2 else f"-{EDITORS}-editors") + f"-{workers}-processes", figures)
    assert not failures, failures[:5]
