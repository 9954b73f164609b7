"""Heavy measures in the background worker: one job per result, a cap per requester, another
process computing, failures shown, polling, and jobs left running by a killed server requeued.

The Florentine families' marriages (Padgett & Ansell 1993, as shipped with networkx) stand in
for a large slice: the inline threshold is lowered to 2 persons so that closeness goes to the worker.
"""

from __future__ import annotations

import json
import os
import subprocess
import time
from pathlib import Path

import networkx as nx
import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient
from sqlalchemy import func, select, update

from app.config import Settings
from app.db import Database
from app.exchange.workbook import import_workbook
from app.main import create_app
from app.models import Job
from app.network import jobs as network_jobs
from app.network import results as network_results
from app.store.jobs import claim_next_job, request_job
from tests.test_network_pages import FLORENTINE, family_key, florentine_tables
from tests.workbooks import write_workbook

UNDIRECTED = {"direction": "undirected"}


@pytest.fixture
def florentine_db(tmp_path: Path, database: Database) -> Database:
    import_workbook(database, write_workbook(tmp_path / "florentine", florentine_tables()), size_limit=10**9)
    return database


def small_threshold_app(settings: Settings):
    app = create_app(settings)
    app.state.inline_up_to = 2  # the 15 families count as a large slice here
    return app


def jobs_in(database: Database) -> list[Job]:
    with database.read() as session:
        return list(session.scalars(select(Job).order_by(Job.id)))


def centrality(client: TestClient, measure: str, **extra: str) -> dict:
    response = client.get("/api/network/centrality", params={"measure": measure, **UNDIRECTED, **extra})
    assert response.status_code == 200, response.text
    return response.json()


def wait_for(client: TestClient, job_id: int, seconds: float = 60.0) -> dict:
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        status = client.get(f"/api/network/jobs/{job_id}").json()
        if status["state"] in ("done", "failed"):
            return status
        time.sleep(0.2)
    raise AssertionError(f"job {job_id} did not finish in {seconds} s")


def test_duplicate_requests_make_one_job_and_the_cap_refuses_a_fourth(florentine_db: Database, settings: Settings):
    client = TestClient(small_threshold_app(settings))  # no lifespan: nothing runs the jobs
    first = centrality(client, "closeness")
    assert first["job"]["state"] == "queued" and first["rows"] == []
    again = centrality(client, "closeness")  # a reload joins the same job
    assert again["job"]["id"] == first["job"]["id"]
    assert len(jobs_in(florentine_db)) == 1
    for measure in ("harmonic", "weighted_closeness"):
        assert centrality(client, measure)["job"]["state"] == "queued"
    refused = centrality(client, "weighted_betweenness", exact="yes")
    assert refused["job"]["state"] == "refused" and refused["job"]["id"] is None
    assert "at most 3" in refused["job"]["message"]
    assert len(jobs_in(florentine_db)) == 3
    page = BeautifulSoup(client.get("/network/centrality", params={"measure": "weighted_betweenness", "exact": "yes",
                                                                   **UNDIRECTED}).text, "lxml")
    assert "at most 3" in page.select_one("#job-status").get_text(" ", strip=True)


def test_polling_shows_the_computing_state_then_the_result(florentine_db: Database, settings: Settings):
    client = TestClient(small_threshold_app(settings))
    job_id = centrality(client, "closeness")["job"]["id"]
    waiting = client.get(f"/network/jobs/{job_id}", headers={"HX-Request": "true"})
    box = BeautifulSoup(waiting.text, "lxml").select_one("#job-status")
    assert box["data-state"] == "queued" and box["hx-get"] == f"/network/jobs/{job_id}" and box["hx-trigger"] == "every 2s"
    assert "HX-Refresh" not in waiting.headers
    assert network_jobs.run_next_job(florentine_db).id == job_id  # the worker's step, called directly
    done = client.get(f"/network/jobs/{job_id}", headers={"HX-Request": "true"})
    assert done.headers["HX-Refresh"] == "true"
    assert BeautifulSoup(done.text, "lxml").select_one("#job-status")["data-state"] == "done"
    assert not BeautifulSoup(done.text, "lxml").select_one("#job-status").has_attr("hx-get")
    body = centrality(client, "closeness")
    assert body["job"] is None and len(body["rows"]) == 15
    # Wasserman-Faust closeness, networkx as the reference
    expected = nx.closeness_centrality(FLORENTINE, wf_improved=True)
    for name, value in expected.items():
        row = next(r for r in body["rows"] if r["key"] == family_key(name))
        assert row["value"] == pytest.approx(value, abs=1e-12)
    assert len(jobs_in(florentine_db)) == 1  # the result is stored: no new job
    assert client.get("/api/network/jobs/999").status_code == 404


def test_a_failing_job_is_marked_failed_with_its_error(florentine_db: Database, settings: Settings):
    client = TestClient(small_threshold_app(settings))
    with florentine_db.write() as session:  # a job for a measure that does not exist
        job_id = request_job(session=session, measure="no-such-measure", options="{}", slice_key="direction=undirected",
                             visibility="all", data_version=0, requested_by="test", cap=3).job.id
    network_jobs.run_next_job(florentine_db)
    status = client.get(f"/api/network/jobs/{job_id}").json()
    assert status["state"] == "failed" and status["error"]
    page = BeautifulSoup(client.get(f"/network/jobs/{job_id}").text, "lxml")
    assert status["error"] in page.select_one(".job-error").get_text(" ", strip=True)


def test_a_job_runs_in_another_process_and_the_page_then_shows_the_exact_result(
    florentine_db: Database, settings: Settings, monkeypatch: pytest.MonkeyPatch,
):
    monkeypatch.setattr(network_results, "SAMPLE_ABOVE", 2)  # the estimate is shown meanwhile
    monkeypatch.setattr(network_results, "SAMPLES", 3)
    with TestClient(small_threshold_app(settings)) as client:
        first = centrality(client, "betweenness")
        assert first["estimate"] is True and first["job"]["state"] in ("queued", "running")
        worker = client.app.state.worker._process
        assert worker is not None and worker.pid != os.getpid()
        assert wait_for(client, first["job"]["id"])["state"] == "done"
        exact = centrality(client, "betweenness")
        assert exact["estimate"] is False and exact["job"] is None
        medici = next(r for r in exact["rows"] if r["key"] == "fam-medici")
        assert medici["raw"] == pytest.approx(47.5)  # networkx betweenness_centrality(normalized=False) gives 47.5
    assert len(jobs_in(florentine_db)) == 1


def dead_pid() -> int:
    """The process id of a process that has ended (and been waited for)."""
    process = subprocess.Popen(["true"])  # noqa: S603, S607
    assert process.wait() == 0
    return process.pid


def hold_job(database: Database, job_id: int, pid: int) -> None:
    """Claim the job as the worker process ``pid`` of this machine would."""
    with database.write() as session:
        assert claim_next_job(session=session).id == job_id
        session.execute(update(Job).where(Job.id == job_id).values(worker_pid=pid))


def test_a_job_left_running_by_a_killed_server_is_requeued_and_run(florentine_db: Database, settings: Settings):
    client = TestClient(small_threshold_app(settings))
    job_id = centrality(client, "harmonic")["job"]["id"]
    hold_job(florentine_db, job_id, dead_pid())  # "running", and then the server and its worker died
    with TestClient(small_threshold_app(settings)) as restarted:
        assert wait_for(restarted, job_id)["state"] == "done"
        assert len(centrality(restarted, "harmonic")["rows"]) == 15
    with florentine_db.read() as session:
        assert session.scalar(select(func.count()).select_from(Job)) == 1


def test_a_starting_server_leaves_alone_a_job_another_live_worker_runs(florentine_db: Database, settings: Settings):
    """Another server's worker on this machine (here: this very process) holds the job: no requeue, no second run."""
    client = TestClient(small_threshold_app(settings))
    job_id = centrality(client, "harmonic")["job"]["id"]
    hold_job(florentine_db, job_id, os.getpid())
    with TestClient(small_threshold_app(settings)) as second:
        status = second.get(f"/api/network/jobs/{job_id}").json()
        assert status["state"] == "running"
        assert second.app.state.worker._process is None  # nothing queued, so no worker started
    (job,) = jobs_in(florentine_db)
    assert job.state == "running" and job.worker_pid == os.getpid()


def test_a_polling_page_learns_that_the_worker_was_killed(florentine_db: Database, settings: Settings):
    """A running job whose worker process is gone is failed at the next poll, with a sentence saying so."""
    client = TestClient(small_threshold_app(settings))
    job_id = centrality(client, "harmonic")["job"]["id"]
    pid = dead_pid()
    hold_job(florentine_db, job_id, pid)
    status = client.get(f"/api/network/jobs/{job_id}").json()
    assert status["state"] == "failed"
    assert f"process {pid}" in status["error"] and "stopped before it finished" in status["error"]
    fragment = BeautifulSoup(client.get(f"/network/jobs/{job_id}").text, "html.parser")
    status_box = fragment.select_one("#job-status")
    assert status_box["data-state"] == "failed" and not status_box.has_attr("hx-get")  # the polling stops


def test_needs_worker_only_for_heavy_measures_on_large_slices():
    assert network_jobs.needs_worker("closeness", {}, 5000, 3000)
    assert not network_jobs.needs_worker("closeness", {}, 3000, 3000)
    assert not network_jobs.needs_worker("pagerank", {}, 10**6, 3000)
    assert not network_jobs.needs_worker("betweenness", {}, 5000, 3000)  # the estimate is inline
    assert network_jobs.needs_worker("betweenness", {"exact": True}, 5000, 3000)


def test_a_large_slice_shows_one_seed_at_once_and_its_stability_from_the_worker(florentine_db: Database, settings: Settings):
    client = TestClient(small_threshold_app(settings))
    client.get("/api/network/centrality", params={"measure": "degree", **UNDIRECTED})  # the slice's size is now known
    first = client.get("/api/network/communities", params=UNDIRECTED).json()
    assert first["stability"] is None and first["job"]["state"] == "queued" and first["job"]["measure"] == "communities"
    assert sum(c["size"] for c in first["communities"]) == 15 and first["modularity"] > 0
    assert client.get("/api/network/communities", params=UNDIRECTED).json()["job"]["id"] == first["job"]["id"]  # a reload
    page = BeautifulSoup(client.get("/network/communities", params=UNDIRECTED).text, "lxml")
    assert "Stability across seeds: waiting" in page.select_one("#job-status").get_text(" ", strip=True)
    assert network_jobs.run_next_job(florentine_db).id == first["job"]["id"]
    done = client.get("/api/network/communities", params=UNDIRECTED).json()
    assert done["job"] is None and done["stability"]["seeds"] == list(range(10))
    # the partition of seed 0 is the same in both (Florentine families, Padgett & Ansell 1993, as shipped with networkx)
    def keys(body: dict) -> list[list[str]]:
        return [[m["person"]["key"] for m in c["members"]] for c in body["communities"]]

    assert keys(done) == keys(first)
    groups = [{name for name in FLORENTINE if family_key(name) in members} for members in map(set, keys(done))]
    assert done["modularity"] == pytest.approx(nx.community.modularity(FLORENTINE, groups), abs=1e-12)


def test_a_large_slice_estimates_path_lengths_and_the_worker_makes_them_exact(
    florentine_db: Database, settings: Settings, monkeypatch,
):
    from app.network.measures import summary as summary_module

    monkeypatch.setattr(summary_module, "EXACT_PATHS_UP_TO", 2)  # the 15 families count as a large component here
    client = TestClient(small_threshold_app(settings))
    client.get("/api/network/centrality", params={"measure": "degree", **UNDIRECTED})
    estimate = client.get("/api/network/summary", params=UNDIRECTED).json()
    assert "estimated" in estimate["conventions"] and estimate["job"]["measure"] == "summary"
    network_jobs.run_next_job(florentine_db)
    exact = client.get("/api/network/summary", params=UNDIRECTED).json()
    assert exact["job"] is None and "estimated" not in exact["conventions"]
    # networkx as the reference, on the Florentine marriages (Padgett & Ansell 1993, shipped with networkx)
    assert exact["diameter"] == nx.diameter(FLORENTINE)
    assert exact["average_path_length"] == pytest.approx(nx.average_shortest_path_length(FLORENTINE), abs=1e-12)


def test_the_person_page_and_the_recompute_button_leave_heavy_measures_to_the_worker(
    florentine_db: Database, settings: Settings,
):
    client = TestClient(small_threshold_app(settings))
    key = family_key("Medici")
    lazy = client.get(f"/api/persons/{key}/measures", params=UNDIRECTED).json()
    assert {row["measure"] for row in lazy["measures"]} >= {"degree", "pagerank", "eigenvector"}
    assert not {row["measure"] for row in lazy["measures"]} & {"closeness", "harmonic", "betweenness"}
    assert "Closeness" in ", ".join(lazy["computing"])
    queued = {job.measure for job in jobs_in(florentine_db)}
    assert queued and queued <= network_jobs.HEAVY
    fragment = BeautifulSoup(client.get(f"/persons/{key}/measures", params=UNDIRECTED, headers={"HX-Request": "true"}).text, "lxml")
    assert fragment.select_one(".job-status")["hx-trigger"] == "every 3s"
    while network_jobs.run_next_job(florentine_db) is not None:
        pass
    while (ready := client.get(f"/api/persons/{key}/measures", params=UNDIRECTED).json())["computing"]:
        assert network_jobs.run_next_job(florentine_db) is not None  # the cap queued the rest on this visit
    medici = {row["measure"]: row for row in ready["measures"]}
    assert medici["betweenness"]["raw"] == pytest.approx(47.5)  # Wasserman & Faust 1994 (from memory), networkx 3.6
    # the recompute button: closeness goes to the worker again, the stored figures stay on the page meanwhile
    before = len(jobs_in(florentine_db))
    token = client.get("/api/login").json()["csrf_token"]
    answer = client.post("/api/network/centrality/recompute", params={"measure": "closeness", **UNDIRECTED},
                         headers={"X-CSRF-Token": token})
    assert answer.status_code == 200, answer.text
    body = answer.json()
    assert body["job"]["state"] == "queued" and len(body["rows"]) == 15
    assert len(jobs_in(florentine_db)) == before + 1


def test_a_result_kept_in_memory_reads_as_its_stored_json_and_the_slice_size_comes_from_the_database(
    florentine_db: Database,
):
    # The computing process keeps what it stored for the next request (no parse); another process
    # parses the stored JSON: both must be the same data. The size of a slice is read in SQL.
    from app.models import StoredMeasure
    from app.network.slice import Slice
    from app.store import measure_results

    slice_ = Slice(direction="undirected")
    for measure, options in (("summary", {}), ("components", {}), ("cut-points", {}), ("cliques", {"min_size": 3}),
                             ("communities", {"method": "leiden", "seed": 0}), ("betweenness", {}), ("closeness", {})):
        outcome = network_results.get_or_compute(florentine_db, measure=measure, slice=slice_, options=options)
        with florentine_db.read() as session:
            stored = session.scalar(select(StoredMeasure.result_json).where(StoredMeasure.measure == measure))
        assert outcome.payload == json.loads(stored), measure
    measure_results._SIZES.clear()
    measure_results._PARSED.clear()
    with florentine_db.read() as session:
        assert measure_results.get_slice_size(session=session, slice_key=network_results.slice_key(slice_),
                                              visibility=network_results.VISIBILITY_ALL) == 15
    assert not measure_results._PARSED  # the size alone was read, not the result
