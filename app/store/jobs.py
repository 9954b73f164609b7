"""The queue of heavy measures: request (merging duplicates), claim, progress, finish, requeue."""

from __future__ import annotations

import os
import socket
from dataclasses import dataclass
from datetime import UTC, datetime

from sqlalchemy import func, select, update
from sqlalchemy.orm import Session

from app.models import Job

__all__ = ["JobInfo", "JobRequest", "claim_next_job", "fail_orphaned_job", "finish_job", "get_job", "get_job_by_id", "request_job",
           "requeue_running_jobs", "set_job_progress", "worker_alive"]

LIVE = ("queued", "running")


@dataclass(frozen=True)
class JobInfo:
    """One job as the pages show it."""

    id: int
    measure: str
    options: str
    slice_key: str
    visibility: str
    data_version: int
    state: str
    progress: float
    requested_by: str
    created_at: datetime
    started_at: datetime | None
    finished_at: datetime | None
    error: str | None
    worker_host: str | None = None
    worker_pid: int | None = None


@dataclass(frozen=True)
class JobRequest:
    """What became of a request: the job it made or joined, or a refusal (``job`` is None)."""

    job: JobInfo | None
    created: bool
    refused: str | None = None


def _info(job: Job) -> JobInfo:
    return JobInfo(job.id, job.measure, job.options, job.slice_key, job.visibility, job.data_version, job.state,
                   job.progress, job.requested_by, job.created_at, job.started_at, job.finished_at, job.error,
                   job.worker_host, job.worker_pid)


def _now() -> datetime:
    return datetime.now(UTC).replace(tzinfo=None)


def get_job(*, session: Session, measure: str, options: str, slice_key: str, visibility: str) -> JobInfo | None:
    """Return the latest job for this result (any state), or None."""
    job = session.scalars(
        select(Job).where(Job.measure == measure, Job.options == options, Job.slice_key == slice_key,
                          Job.visibility == visibility).order_by(Job.id.desc()).limit(1)
    ).first()
    return _info(job) if job else None


def get_job_by_id(*, session: Session, job_id: int) -> JobInfo | None:
    """Return one job by its number, or None."""
    job = session.get(Job, job_id)
    return _info(job) if job else None


def request_job(
    *, session: Session, measure: str, options: str, slice_key: str, visibility: str, data_version: int,
    requested_by: str, cap: int,
) -> JobRequest:
    """Queue a job for this result, or join the live one; refuse when the requester has ``cap`` queued."""
    live = session.scalars(
        select(Job).where(Job.measure == measure, Job.options == options, Job.slice_key == slice_key,
                          Job.visibility == visibility, Job.data_version == data_version, Job.state.in_(LIVE))
    ).first()
    if live is not None:
        return JobRequest(_info(live), created=False)
    queued = session.scalar(select(func.count()).select_from(Job).where(Job.requested_by == requested_by, Job.state == "queued"))
    if queued >= cap:
        return JobRequest(None, created=False, refused=(
            f"You already have {queued} measures waiting for the background worker (at most {cap}); "
            "this one will be queued when one of them is done."))
    job = Job(measure=measure, options=options, slice_key=slice_key, visibility=visibility, data_version=data_version,
              state="queued", progress=0.0, requested_by=requested_by, created_at=_now())
    session.add(job)
    session.flush()
    return JobRequest(_info(job), created=True)


def claim_next_job(*, session: Session) -> JobInfo | None:
    """Mark the oldest queued job running, held by this process, and return it (None when the queue is empty)."""
    job = session.scalars(select(Job).where(Job.state == "queued").order_by(Job.created_at, Job.id).limit(1)).first()
    if job is None:
        return None
    job.state, job.started_at, job.progress = "running", _now(), 0.0
    job.worker_host, job.worker_pid = socket.gethostname(), os.getpid()
    session.flush()
    return _info(job)


def set_job_progress(*, session: Session, job_id: int, progress: float) -> None:
    """Record how far a running job has come (0 to 1)."""
    session.execute(update(Job).where(Job.id == job_id).values(progress=min(1.0, max(0.0, progress))))


def finish_job(*, session: Session, job_id: int, error: str | None = None) -> None:
    """Mark a job done, or failed with ``error``."""
    values = {"state": "failed" if error else "done", "finished_at": _now(), "error": error}
    if not error:
        values["progress"] = 1.0
    session.execute(update(Job).where(Job.id == job_id).values(**values))


def requeue_running_jobs(*, session: Session) -> int:
    """Put jobs whose worker process is gone back in the queue; return how many.

    A job held by a live process (another server's worker on this machine) is left alone; a job
    of another machine is judged only by that machine's servers.
    """
    dead = [job.id for job in session.scalars(select(Job).where(Job.state == "running")) if not worker_alive(job)]
    if not dead:
        return 0
    return session.execute(
        update(Job).where(Job.id.in_(dead)).values(state="queued", started_at=None, progress=0.0, worker_host=None, worker_pid=None)
    ).rowcount


def fail_orphaned_job(*, session: Session, job_id: int) -> JobInfo | None:
    """Mark a running job failed when its worker process is gone, saying so; return the job as it is now.

    A polling page calls this, so that a worker killed in the middle of a job never leaves the
    page waiting.
    """
    job = session.get(Job, job_id)
    if job is None:
        return None
    if job.state == "running" and not worker_alive(job):
        job.state, job.finished_at = "failed", _now()
        job.error = (f"the background process computing it (process {job.worker_pid} on {job.worker_host}) stopped "
                     "before it finished; recompute to try again")
        session.flush()
    return _info(job)


def worker_alive(job: Job | JobInfo) -> bool:
    """Return True unless the job's worker process is known to be gone (True for another machine's)."""
    if job.worker_pid is None or job.worker_host is None:
        return False  # claimed before workers were named: nothing holds it
    if job.worker_host != socket.gethostname():
        return True
    try:
        os.kill(job.worker_pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True  # a process of another user holds the number
    return _not_a_zombie(job.worker_pid)


def _not_a_zombie(pid: int) -> bool:
    """A process that ended but was not yet waited for still has its number: read its state where /proc exists."""
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as stat:
            return stat.read().rsplit(")", 1)[1].split()[0] != "Z"
    except (OSError, IndexError):
        return True
