"""Heavy measures off the request path: one background worker process fed from the ``job`` table.

On a slice of more than ``INLINE_UP_TO`` persons, exact betweenness and closeness (weighted or
not) and harmonic closeness are not computed by the request that asks for them: :func:`outcome_or_job`
queues a job (a second request for the same result joins it; a requester has at most
``QUEUE_CAP`` queued) and the page shows a "computing" state that polls the job's status. One
worker process, niced below the server, takes the jobs oldest first, computes them with
:func:`app.network.results.get_or_compute` and stores the result where every page finds it.
A process, not a thread: compiled graph kernels can hold the interpreter lock for minutes.
"""

from __future__ import annotations

import fcntl
import hashlib
import json
import multiprocessing
import os
import socket
import tempfile
import threading
import time
import traceback
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from urllib.parse import parse_qsl

from app.db import Database
from app.network.results import VISIBILITY_ALL, Outcome, get_or_compute, options_key, peek_outcome, slice_key
from app.network.slice import Slice
from app.store.jobs import (
    JobInfo,
    claim_next_job,
    fail_orphaned_job,
    finish_job,
    get_job,
    get_job_by_id,
    request_job,
    requeue_running_jobs,
    set_job_progress,
    worker_alive,
)
from app.store.measure_results import get_slice_size

__all__ = ["HEAVY", "INLINE_UP_TO", "QUEUE_CAP", "Pending", "Worker", "current_job", "needs_worker", "outcome_or_job",
           "queue_recompute", "run_next_job", "slice_size", "worker_loop"]

HEAVY = frozenset({"closeness", "weighted_closeness", "harmonic", "betweenness", "weighted_betweenness", "communities",
                   "summary"})
"""Measures computed in the background on a large slice: betweenness only when exact, communities with
their stability across seeds (one seed is computed at once), the summary with exact path lengths."""
INLINE_UP_TO = 3000
"""Slices of at most this many persons are computed by the request itself."""
QUEUE_CAP = 3
"""Queued jobs one requester may have at a time."""
POLL_SECONDS = 1.0


@dataclass(frozen=True)
class Pending:
    """A result that is being computed in the background, or could not be queued."""

    job: JobInfo | None
    refused: str | None = None


def needs_worker(measure: str, options: dict, persons: int, inline_up_to: int = INLINE_UP_TO) -> bool:
    """Return True when this measure on a slice of ``persons`` persons goes to the worker.

    Examples
    --------
    >>> needs_worker("closeness", {}, 20_000), needs_worker("betweenness", {}, 20_000), needs_worker("degree", {}, 20_000)
    (True, False, False)
    >>> needs_worker("betweenness", {"exact": True}, 20_000), needs_worker("closeness", {}, 500)
    (True, False)
    >>> needs_worker("communities", {"seed": 0}, 20_000), needs_worker("communities", {"runs": 1}, 20_000)
    (True, False)
    >>> needs_worker("summary", {}, 20_000), needs_worker("summary", {"exact_paths": True}, 20_000)
    (False, True)
    """
    if measure not in HEAVY or persons <= inline_up_to:
        return False
    if measure == "communities":
        return options.get("runs") != 1
    if measure == "summary":
        return bool(options.get("exact_paths"))
    return measure not in ("betweenness", "weighted_betweenness") or bool(options.get("exact"))


def outcome_or_job(
    database: Database, worker: Worker | None, *, measure: str, options: dict, slice: Slice,  # noqa: A002
    requested_by: str, inline_up_to: int = INLINE_UP_TO, visibility: str = VISIBILITY_ALL,
) -> Outcome | Pending:
    """Return the stored or inline result of a request, or the background job that computes it.

    A stored result is always served; otherwise a small slice is computed at once and a large
    one's heavy measure is queued (and the worker woken). A reload finds the same job.
    """
    stored = peek_outcome(database, measure=measure, slice=slice, options=options, visibility=visibility)
    if stored is not None:
        return stored
    key = slice_key(slice)
    with database.read() as session:
        persons = get_slice_size(session=session, slice_key=key, visibility=visibility)
    if not needs_worker(measure, options, persons, inline_up_to):
        return get_or_compute(database, measure=measure, slice=slice, options=options, visibility=visibility)
    return queue_recompute(database, worker, measure=measure, options=options, slice=slice, requested_by=requested_by,
                           visibility=visibility)


def queue_recompute(
    database: Database, worker: Worker | None, *, measure: str, options: dict, slice: Slice,  # noqa: A002
    requested_by: str, visibility: str = VISIBILITY_ALL,
) -> Pending:
    """Queue (or join) the job that recomputes a result, whatever is stored: the recompute button on a large slice."""
    with database.write() as session:
        from app.store.summary import get_data_version

        request = request_job(session=session, measure=measure, options=options_key(options), slice_key=slice_key(slice),
                              visibility=visibility, data_version=get_data_version(session=session),
                              requested_by=requested_by, cap=QUEUE_CAP)
    if worker is not None and request.job is not None:
        worker.ensure_running()
    return Pending(request.job, request.refused)


def slice_size(database: Database, slice: Slice, visibility: str = VISIBILITY_ALL) -> int:  # noqa: A002
    """Return the persons of a slice as its latest stored result says, else every person (an upper bound)."""
    with database.read() as session:
        return get_slice_size(session=session, slice_key=slice_key(slice), visibility=visibility)


def latest_job(database: Database, *, measure: str, options: dict, slice: Slice, visibility: str = VISIBILITY_ALL) -> JobInfo | None:  # noqa: A002
    """Return the latest job for this result, or None."""
    with database.read() as session:
        return get_job(session=session, measure=measure, options=options_key(options), slice_key=slice_key(slice),
                       visibility=visibility)


def current_job(database: Database, job_id: int) -> JobInfo | None:
    """Return a job as a polling page should see it: a running job whose worker is gone is marked failed."""
    with database.read() as session:
        job = get_job_by_id(session=session, job_id=job_id)
    if job is not None and job.state == "running" and not worker_alive(job):
        with database.write() as session:
            job = fail_orphaned_job(session=session, job_id=job_id)
    return job


def run_next_job(database: Database) -> JobInfo | None:
    """Claim the oldest queued job, compute and store its result, mark it done or failed; return it."""
    with database.write() as session:
        job = claim_next_job(session=session)
    if job is None:
        return None
    try:
        slice_ = Slice.from_query(parse_qsl(job.slice_key, keep_blank_values=True))

        def progress(share: float) -> None:
            with database.write() as session:
                set_job_progress(session=session, job_id=job.id, progress=share)

        get_or_compute(database, measure=job.measure, slice=slice_, options=json.loads(job.options),
                       visibility=job.visibility, recompute=True, progress=progress)
        error = None
    except Exception as exc:  # noqa: BLE001 - any failure is shown on the page, the worker goes on
        error = f"{type(exc).__name__}: {exc}" or traceback.format_exc(limit=1)
    with database.write() as session:
        finish_job(session=session, job_id=job.id, error=error)
    return job


def worker_loop(database_url: str, stop: multiprocessing.synchronize.Event | None = None, *, nice: int = 10) -> None:
    """Run jobs until ``stop`` is set: the body of the worker process (niced below the server)."""
    if nice:
        os.nice(nice)
    database = Database(database_url)
    try:
        while stop is None or not stop.is_set():
            if run_next_job(database) is None:
                if stop is None:
                    return
                stop.wait(POLL_SECONDS)
    finally:
        database.dispose()


def worker_lock_path(url: str) -> Path:
    """The file whose exclusive lock elects the server process that runs the worker: beside an SQLite
    file, else in the temporary folder under a hash of the URL (server processes share one machine)."""
    if url.startswith("sqlite:///"):
        path = Path(url.removeprefix("sqlite:///"))
        return path.with_name(path.name + ".worker")
    return Path(tempfile.gettempdir()) / f"attesta-{hashlib.sha256(url.encode()).hexdigest()[:16]}.worker"


def _take_worker_lock(url: str) -> object | None:
    """Return the open, exclusively locked worker lock file, or None when another process holds it."""
    handle = open(worker_lock_path(url), "a+")  # noqa: SIM115 - kept open while the lock is held
    try:
        fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        handle.close()
        return None
    return handle


class Worker:
    """The one background worker process of a server, started when the first job is queued.

    Only between :meth:`start` and :meth:`stop` (the server's lifespan): an app used without
    its lifespan queues jobs and leaves them for the next server that runs.
    """

    def __init__(self, database: Database, *, shared: bool = False):
        self.database = database
        self.shared = shared  # True: one of several server processes on this database (``attesta serve --workers``)
        self._context = multiprocessing.get_context("spawn")  # a fresh interpreter: no inherited connections
        self._stop = self._context.Event()
        self._process: multiprocessing.process.BaseProcess | None = None
        self._running = False  # between start() and stop(), the server's lifespan
        self._start_lock = threading.Lock()
        self._elected: object | None = None  # the open lock file, for the server process that runs the worker
        self._watch_stop = threading.Event()

    def start(self) -> None:
        """Requeue jobs whose worker is gone (not those another live server's worker runs), and start
        the process if any job waits.

        Among several server processes (``shared``) only the one holding the lock on
        ``worker_lock_path`` runs the worker; it also watches the queue, since jobs queued by the
        other processes do not wake it.
        """
        if self.shared:
            self._elected = _take_worker_lock(self.database.url)
            if self._elected is None:
                return  # another server process of this database runs the worker
            threading.Thread(target=self._watch, name="attesta-job-watch", daemon=True).start()
        self._running = True
        with self.database.write() as session:
            requeue_running_jobs(session=session)
            from sqlalchemy import select

            from app.models import Job

            waiting = session.scalars(select(Job.id).where(Job.state == "queued").limit(1)).first()
        if waiting is not None:
            self.ensure_running()

    def ensure_running(self) -> None:
        """Start the worker process unless it runs; a job left by a crashed process is marked failed."""
        with self._start_lock:  # requests run in a thread pool: two first requests must not start two workers
            self._ensure_running()

    def _ensure_running(self) -> None:
        if not self._running or (self._process is not None and self._process.is_alive()):
            return
        if self._process is not None:  # it died: what it held can not be trusted to finish
            from sqlalchemy import update

            from app.models import Job

            with self.database.write() as session:  # only what this server's own worker held
                session.execute(update(Job).where(
                    Job.state == "running", Job.worker_pid == self._process.pid, Job.worker_host == socket.gethostname(),
                ).values(state="failed", finished_at=datetime.now(UTC).replace(tzinfo=None),
                         error=f"the worker process stopped (exit code {self._process.exitcode}); recompute to try again"))
        self._stop.clear()
        self._process = self._context.Process(target=worker_loop, args=(self.database.url, self._stop),
                                              name="attesta-measures", daemon=True)
        self._process.start()

    def _watch(self) -> None:
        """Start the worker process when a job waits (jobs queued by other server processes)."""
        from sqlalchemy import select

        from app.models import Job

        while not self._watch_stop.wait(POLL_SECONDS):
            if self._process is not None and self._process.is_alive():
                continue
            try:
                with self.database.read() as session:
                    waiting = session.scalars(select(Job.id).where(Job.state == "queued").limit(1)).first()
            except Exception:  # noqa: BLE001 - a busy or closing database: look again next time
                continue
            if waiting is not None:
                self.ensure_running()

    def stop(self, timeout: float = 5.0) -> None:
        """Ask the process to stop after its current job; end it if it does not within ``timeout``."""
        self._watch_stop.set()
        self._running = False
        if self._elected is not None:
            self._elected.close()  # releases the lock for a server process started later
            self._elected = None
        if self._process is None:
            return
        self._stop.set()
        self._process.join(timeout)
        if self._process.is_alive():
            self._process.terminate()
            self._process.join(timeout)
        self._process = None
