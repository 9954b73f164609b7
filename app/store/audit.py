"""The audit trail and the data version: every write records who changed what, in its own transaction.

Call :func:`record_change` inside the write session of the change itself (``database.write()``),
so the entry and the change are committed together or not at all. It also bumps the data
version, which tells stored results and kept drawings that the data moved on.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from datetime import date, datetime, timedelta, timezone
from typing import Any

from sqlalchemy import func, or_, select, update
from sqlalchemy.orm import Session

from app.models import AuditEntry, DataVersion

__all__ = [
    "AUDITED_TABLES",
    "AuditList",
    "AuditRow",
    "REDACTED",
    "bump_data_version",
    "ChangeNote",
    "get_change",
    "list_changes",
    "list_changes_after",
    "latest_entry_id",
    "record_change",
    "redact_change",
]

REDACTED = "[redacted]"
AUDITED_TABLES = ("person", "person_link", "source", "repository", "collection", "attestation", "relation",
                  "membership", "group", "user", "audit_entry")
"""The tables the entries name (an import is an entry of its own, without a table)."""
PAGE_SIZE = 100


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


@dataclass(frozen=True)
class ChangeNote:
    """What one write touched, as far as its entry says: the table, the action and the record's key before and after."""

    entry_id: int
    table: str | None
    action: str
    key_before: str | None
    key_after: str | None


def list_changes_after(*, session: Session, entry_id: int) -> list[ChangeNote]:
    """Return the entries written after entry ``entry_id``, oldest first (0: every entry)."""
    notes = []
    for id_, table, action, before, after in session.execute(
        select(AuditEntry.id, AuditEntry.table_name, AuditEntry.action, AuditEntry.before_json, AuditEntry.after_json)
        .where(AuditEntry.id > entry_id).order_by(AuditEntry.id)
    ):
        notes.append(ChangeNote(id_, table, action, _key_in(before), _key_in(after)))
    return notes


def latest_entry_id(*, session: Session) -> int:
    """Return the id of the newest audit entry (0 when there is none)."""
    return session.scalar(select(func.max(AuditEntry.id))) or 0


def _key_in(snapshot: str | None) -> str | None:
    try:
        value = json.loads(snapshot) if snapshot else None
    except ValueError:
        return None
    return value.get("key") if isinstance(value, dict) and isinstance(value.get("key"), str) else None


def _now() -> datetime:
    return datetime.now(timezone.utc).replace(tzinfo=None)


@dataclass(frozen=True)
class AuditRow:
    """One entry of the audit trail as pages show it."""

    id: int
    at: datetime
    actor: str
    action: str
    table: str | None
    key: str | None
    summary: str | None
    before: Any
    after: Any
    redacted_at: datetime | None


@dataclass(frozen=True)
class AuditList:
    """One page of audit entries, newest first, and the filters that chose them."""

    rows: list[AuditRow]
    total: int
    page: int
    pages: int
    user: str | None
    table: str | None
    key: str | None
    date_from: date | None
    date_to: date | None


def _row(entry: AuditEntry) -> AuditRow:
    return AuditRow(
        id=entry.id, at=entry.at, actor=entry.actor, action=entry.action, table=entry.table_name, key=entry.record_key,
        summary=entry.summary, before=json.loads(entry.before_json) if entry.before_json else None,
        after=json.loads(entry.after_json) if entry.after_json else None, redacted_at=entry.redacted_at,
    )


def list_changes(
    *, session: Session, user: str | None = None, table: str | None = None, key: str | None = None,
    date_from: date | None = None, date_to: date | None = None, page: int = 1,
) -> AuditList:
    """Return audit entries, newest first, filtered by actor name, record (table and key) and day (UTC)."""
    conditions = []
    if user:
        conditions.append(AuditEntry.actor == user)
    if table:
        conditions.append(AuditEntry.table_name == table)
    if key:
        # a record's own entries, and those of merges and splits that name it
        conditions.append(or_(AuditEntry.record_key == key, AuditEntry.after_json.contains(json.dumps(key))))
    if date_from:
        conditions.append(AuditEntry.at >= datetime.combine(date_from, datetime.min.time()))
    if date_to:
        conditions.append(AuditEntry.at < datetime.combine(date_to + timedelta(days=1), datetime.min.time()))
    total = session.scalar(select(func.count()).select_from(AuditEntry).where(*conditions)) or 0
    pages = max(1, -(-total // PAGE_SIZE))
    entries = session.scalars(select(AuditEntry).where(*conditions).order_by(AuditEntry.id.desc())
                              .offset((page - 1) * PAGE_SIZE).limit(PAGE_SIZE))
    return AuditList(rows=[_row(e) for e in entries], total=total, page=page, pages=pages, user=user, table=table,
                     key=key, date_from=date_from, date_to=date_to)


def get_change(*, session: Session, entry_id: int) -> AuditRow | None:
    """Return one audit entry, or None."""
    entry = session.get(AuditEntry, entry_id)
    return _row(entry) if entry is not None else None


def _scrub(value: Any, text: str | None) -> Any:
    """``value`` with every string holding ``text`` (every string, when ``text`` is None) replaced by REDACTED."""
    if isinstance(value, dict):
        return {k: _scrub(v, text) for k, v in value.items()}
    if isinstance(value, list):
        return [_scrub(v, text) for v in value]
    if isinstance(value, str) and (text is None or text.casefold() in value.casefold()):
        return REDACTED
    return value


def redact_change(*, session: Session, actor: str, user_id: int | None, entry_id: int, reason: str,
                  text: str | None = None) -> int:
    """Take personal data out of a past audit entry and record the redaction itself; return its entry id.

    With ``text``, every value holding it (in before, after and the summary) becomes "[redacted]";
    without, every text value does. The redaction entry says who, when and why, never what was taken out.
    """
    entry = session.get(AuditEntry, entry_id)
    if entry is None:
        raise LookupError(f"no audit entry {entry_id}")
    reason = (reason or "").strip()
    if not reason:
        raise ValueError("say why this entry is redacted (the reason is recorded)")
    if entry.action == "redact":
        raise ValueError("a redaction entry holds no personal data and cannot itself be redacted")
    text = (text or "").strip() or None
    for column in ("before_json", "after_json"):
        raw = getattr(entry, column)
        if raw:
            setattr(entry, column, json.dumps(_scrub(json.loads(raw), text), sort_keys=True))
    if entry.summary and (text is None or text.casefold() in entry.summary.casefold()):
        entry.summary = f"{entry.action} {entry.table_name or ''} {entry.record_key or ''} ({REDACTED})".replace("  ", " ")
    entry.redacted_at = _now()
    redaction = record_change(session=session, actor=actor, user_id=user_id, action="redact", table="audit_entry",
                              key=str(entry_id), after={"entry": entry_id, "reason": reason,
                                                        "scope": "matching values" if text else "every text value"},
                              summary=f"redacted audit entry {entry_id}: {reason}")
    return redaction.id
