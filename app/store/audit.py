"""The audit trail and the data version: every write records who changed what, in its own transaction.

Call :func:`record_change` inside the write session of the change itself (``database.write()``),
so the entry and the change are committed together or not at all. It also bumps the data
version, which tells stored results and kept drawings that the data moved on.
"""

from __future__ import annotations

import json
from datetime import datetime, timezone
from typing import Any

from sqlalchemy import select, update
from sqlalchemy.orm import Session

from app.models import AuditEntry, DataVersion

__all__ = ["bump_data_version", "record_change"]


def bump_data_version(*, session: Session) -> int:
    """Count one more write and return the new data version."""
    now = _now()
    session.execute(update(DataVersion).values(version=DataVersion.version + 1, changed_at=now))
    return session.scalar(select(DataVersion.version)) or 0


def record_change(
    *,
    session: Session,
    actor: str,
    action: str,
    table: str | None = None,
    key: str | None = None,
    before: Any = None,
    after: Any = None,
    summary: str | None = None,
    user_id: int | None = None,
) -> AuditEntry:
    """Write one audit entry (before and after as JSON) and bump the data version; return the entry."""
    bump_data_version(session=session)
    entry = AuditEntry(
        at=_now(), user_id=user_id, actor=actor, action=action, table_name=table, record_key=key,
        before_json=None if before is None else json.dumps(before, sort_keys=True, default=str),
        after_json=None if after is None else json.dumps(after, sort_keys=True, default=str),
        summary=summary,
    )
    session.add(entry)
    session.flush()
    return entry


def _now() -> datetime:
    return datetime.now(timezone.utc).replace(tzinfo=None)
