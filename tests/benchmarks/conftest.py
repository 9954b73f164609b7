"""Benchmarks: generated networks, timings written to tests/benchmarks/results/ and printed."""

from __future__ import annotations

import json
import math
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))
sys.path.insert(0, str(Path(__file__).parent.parent))

RESULTS = Path(__file__).parent / "results"
CACHE = Path(__file__).parent / "cache"  # generated databases, reused between runs (not in git)


def timings(call: Callable[[], object], *, repeat: int, warmup: int = 2) -> dict[str, float]:
    """Return the median and 95th percentile of ``call`` in milliseconds."""
    for _ in range(warmup):
        call()
    samples = []
    for _ in range(repeat):
        started = time.perf_counter()
        call()
        samples.append((time.perf_counter() - started) * 1000)
    return {"median_ms": round(statistics.median(samples), 1), "p95_ms": round(p95(samples), 1), "runs": repeat}


def p95(samples: list[float]) -> float:
    """Return the 95th percentile of ``samples`` by the nearest-rank method (common practice): the
    ceil(0.95 n)-th smallest, so the 19th of 20 (the 20th, the slowest, is reported as ``max_ms``)."""
    ordered = sorted(samples)
    return ordered[math.ceil(0.95 * len(ordered)) - 1]


def report(name: str, figures: dict) -> None:
    """Write figures to results/<name>.json and print them."""
    RESULTS.mkdir(exist_ok=True)
    (RESULTS / f"{name}.json").write_text(json.dumps(figures, indent=2) + "\n")
    print(f"\n== {name} (written to {RESULTS / (name + '.json')})")
    print(json.dumps(figures, indent=2))


@pytest.fixture(scope="session")
def cache_dir() -> Path:
    CACHE.mkdir(exist_ok=True)
    return CACHE
