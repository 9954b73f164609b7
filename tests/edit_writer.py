"""One editing client for the concurrency test, in its own light module: a spawned process imports
only httpx, not the app."""

from __future__ import annotations

import multiprocessing
import re

import httpx

EDITS = 50


def edit(base_url: str, writer: int, results: multiprocessing.Queue) -> None:
    """Make EDITS edits: new persons and new attestations of the one shared relation, alternately."""
    problems = []
    with httpx.Client(base_url=base_url, timeout=60) as client:
        token = re.search(r'name="csrf_token" value="([^"]+)"', client.get("/new/person").text).group(1)
        for n in range(EDITS):
            if n % 2:
                answer = client.post("/relations/1/attestations", data={
                    "csrf_token": token, "source": "S1", "locus": f"w{writer}-{n}"})
            else:
                answer = client.post("/new/person", data={"csrf_token": token, "key": f"W{writer}-{n}", "name": f"Writer {writer} {n}"})
            if answer.status_code != 303 or "locked" in answer.text:
                problems.append(f"{n}: {answer.status_code} {answer.text[:200]}")
    results.put((writer, problems))
