"""The queue of heavy measures: request (merging duplicates), claim, progress, finish, requeue."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime

from sqlalchemy import func, select, update
from sqlalchemy.orm import Session

from app.models import Job

__all__ = ["JobInfo", "JobRequest", "claim_next_job", "finish_job", "get_job", "get_job_by_id", "request_job", "requeue_running_jobs",
           "set_job_progress"]

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


@dataclass(frozen=True)
class JobRequest:
    """What became of a request: the job it made or joined, or a refusal (``job`` is None)."""

    job: JobInfo | None
    created: bool
    refused: str | None = None


def _info(job: Job) -> JobInfo:
    return JobInfo(job.id, job.measure, job.options, job.slice_key, job.visibility, job.data_version, job.state,
                   job.progress, job.requested_by, job.created_at, job.started_at, job.finished_at, job.error)


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
    """Mark the oldest queued job running and return it (None when the queue is empty)."""
    job = session.scalars(select(Job).where(Job.state == "queued").order_by(Job.created_at, Job.id).limit(1)).first()
    if job is None:
        return None
    job.state, job.started_at, job.progress = "running", _now(), 0.0
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
    """Put jobs left running (by a server that was killed) back in the queue; return how many."""
    return session.execute(
        update(Job).where(Job.state == "running").values(state="queued", started_at=None, progress=0.0)
    ).rowcount
