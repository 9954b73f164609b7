"""Stored results of measures: read the newest one for a request, and replace it with a new one.

A result is stored per measure, options, slice and viewer visibility, with the data version it
was computed at. It is never thrown away when the data change: the page shows it as "computed at
version N" until someone recomputes it, which replaces the row.
"""

from __future__ import annotations

import json
import threading
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlalchemy import delete, func, select
from sqlalchemy.orm import Session

from app.models import StoredMeasure
from app.sql import json_integer

__all__ = ["StoredResult", "count_stored_results", "get_slice_size", "get_stored_result", "list_stored_results", "save_result"]


@dataclass(frozen=True)
class StoredResult:
    """One stored result and when it was made."""

    measure: str
    """The measure or page family (``betweenness``, ``summary``, ``communities``...)."""
    options: str
    """Its options as canonical JSON."""
    slice_key: str
    """The slice's query string with its pairs sorted."""
    visibility: str
    """Which persons the viewer may see ("all")."""
    data_version: int
    """The data version the result was computed at."""
    payload: dict[str, Any]
    """The result itself (persons named by key)."""
    computed_at: datetime
    """When it was computed (UTC)."""
    seconds: float
    """How long the computation took."""


def get_stored_result(*, session: Session, measure: str, options: str, slice_key: str, visibility: str) -> StoredResult | None:
    """Return the stored result of this request, whatever its data version, or None.

    The row is read without its result first: a result this process has already parsed (the same
    row, version and time) is taken from memory, since parsing 20,000 ranked rows costs more than
    the rest of a warm page. Callers must not change the payload they get.
    """
    row = session.execute(
        select(StoredMeasure.id, StoredMeasure.data_version, StoredMeasure.computed_at, StoredMeasure.seconds).where(
            StoredMeasure.measure == measure,
            StoredMeasure.options == options,
            StoredMeasure.slice_key == slice_key,
            StoredMeasure.visibility == visibility,
        )
    ).first()
    if row is None:
        return None
    payload = _payload(session, row)
    if payload is None:  # replaced in between
        return None
    return StoredResult(measure=measure, options=options, slice_key=slice_key, visibility=visibility,
                        data_version=row.data_version, payload=payload, computed_at=row.computed_at, seconds=row.seconds)


def _payload(session: Session, row: Any) -> dict[str, Any] | None:
    """Return the parsed result of a stored row (id, data_version, computed_at), from memory when parsed before."""
    identity = (session.get_bind().url.render_as_string(), row.id, row.data_version, row.computed_at)
    with _PARSED_LOCK:
        payload = _PARSED.pop(identity, None)
        if payload is not None:
            _PARSED[identity] = payload  # most recently used last
            return payload
    text = session.scalar(select(StoredMeasure.result_json).where(StoredMeasure.id == row.id))
    if text is None:
        return None
    payload = json.loads(text)
    _remember(identity, payload)
    return payload


def _remember(identity: tuple, payload: dict[str, Any]) -> None:
    """Keep a parsed result (and the slice's size it states) in memory for the next requests."""
    with _PARSED_LOCK:
        _PARSED[identity] = payload
        while len(_PARSED) > _PARSED_KEPT:
            _PARSED.pop(next(iter(_PARSED)))
        if isinstance(payload.get("n"), int):
            _SIZES[identity] = payload["n"]
            while len(_SIZES) > _SIZES_KEPT:
                _SIZES.pop(next(iter(_SIZES)))


_PARSED: dict[tuple, dict[str, Any]] = {}
"""Parsed results by (database, row id, data version, computed at), least recently used first."""
_PARSED_KEPT = 24
_PARSED_LOCK = threading.Lock()
_SIZES: dict[tuple, int] = {}
"""The persons of a stored result's slice, by the same identity as ``_PARSED`` (kept longer: a number each)."""
_SIZES_KEPT = 4096


def save_result(
    *, session: Session, measure: str, options: str, slice_key: str, visibility: str, data_version: int,
    payload: dict[str, Any], computed_at: datetime, seconds: float,
) -> StoredResult:
    """Store a result in place of the one of the same request; return what is stored now.

    A row computed at a newer data version (by another process, after this computation read
    the data) is kept, and returned, rather than replaced by an older result.
    """
    conditions = (
        StoredMeasure.measure == measure,
        StoredMeasure.options == options,
        StoredMeasure.slice_key == slice_key,
        StoredMeasure.visibility == visibility,
    )
    newer = session.scalars(select(StoredMeasure).where(*conditions, StoredMeasure.data_version > data_version)).first()
    if newer is not None:
        return _stored(newer)
    session.execute(delete(StoredMeasure).where(*conditions))
    row = StoredMeasure(
        measure=measure, options=options, slice_key=slice_key, visibility=visibility, data_version=data_version,
        result_json=json.dumps(payload, allow_nan=False, separators=(",", ":")), computed_at=computed_at,
        seconds=max(0.0, seconds),
    )
    session.add(row)
    session.flush()
    # The next request reads this row: it finds the payload in memory rather than parsing it again.
    _remember((session.get_bind().url.render_as_string(), row.id, data_version, computed_at), payload)
    return _stored(row, payload)


def count_stored_results(*, session: Session, measure: str | None = None) -> int:
    """Return how many results are stored (of one measure, if given)."""
    query = select(func.count()).select_from(StoredMeasure)
    if measure is not None:
        query = query.where(StoredMeasure.measure == measure)
    return session.scalar(query) or 0


def list_stored_results(*, session: Session, slice_key: str, visibility: str) -> list[StoredResult]:
    """Return every result stored for one slice, by measure and options (for exports and snapshots)."""
    rows = session.scalars(
        select(StoredMeasure).where(StoredMeasure.slice_key == slice_key, StoredMeasure.visibility == visibility)
        .order_by(StoredMeasure.measure, StoredMeasure.options)
    )
    return [_stored(row) for row in rows]


def _stored(row: StoredMeasure, payload: dict[str, Any] | None = None) -> StoredResult:
    return StoredResult(
        measure=row.measure, options=row.options, slice_key=row.slice_key, visibility=row.visibility,
        data_version=row.data_version, payload=payload if payload is not None else json.loads(row.result_json),
        computed_at=row.computed_at, seconds=row.seconds,
    )


def get_slice_size(*, session: Session, slice_key: str, visibility: str) -> int:
    """Return the persons of a slice as its latest stored result says, else every person of the dataset.

    An upper bound good enough to decide whether a heavy measure runs inline or in the background.
    """
    from app.models import Person

    latest = session.execute(
        select(StoredMeasure.id, StoredMeasure.data_version, StoredMeasure.computed_at)
        .where(StoredMeasure.slice_key == slice_key, StoredMeasure.visibility == visibility)
        .order_by(StoredMeasure.computed_at.desc()).limit(1)
    ).first()
    if latest is not None:
        # The size alone: from memory, else read by the database; parsing a ranked result of
        # 20,000 persons for one number cost more than the rest of a warm page.
        identity = (session.get_bind().url.render_as_string(), latest.id, latest.data_version, latest.computed_at)
        with _PARSED_LOCK:
            n = _SIZES.get(identity)
        if n is None:
            n = session.scalar(select(json_integer(StoredMeasure.result_json, "n")).where(StoredMeasure.id == latest.id))
            if n is not None:
                with _PARSED_LOCK:
                    _SIZES[identity] = n
        if isinstance(n, int):
            return n
    return session.scalar(select(func.count()).select_from(Person)) or 0
