"""The audit trail: ``/audit`` lists who changed what and when; one entry at ``/audit/{id}``.

Entries cannot be edited through the app. The one exception is a data-protection duty: an admin
can redact personal data from a past entry (``POST /audit/{id}/redact`` with a reason), and the
redaction is itself an entry saying who, when and why.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date

from fastapi import APIRouter, HTTPException, Request
from fastapi.responses import HTMLResponse, RedirectResponse, Response

from app.auth import AdminActor, CsrfChecked, EditorActor
from app.dates import DateError, interval_or_none
from app.documented import DOCUMENTED
from app.store.audit import AUDITED_TABLES, AuditList, AuditRow, get_change, list_changes, redact_change
from app.store.network_labels import list_person_labels_by_key
from app.views.common import BadParameter, SessionDep, page_number, render, urls_for
from app.views.editing import form_values, save

__all__ = ["AuditEntryPage", "AuditPage", "router"]

router = APIRouter(tags=["audit"])


@dataclass(frozen=True)
class AuditPage:
    """One page of the audit trail, newest first, with its filters."""

    __pydantic_config__ = DOCUMENTED

    changes: AuditList
    """The entries of this page, how many match, and the filters."""
    person_names: dict[str, str]
    """The current name of each person an entry of this page is about, by key (a deleted or merged key is left out)."""
    tables: list[str]
    """The tables an entry can be about, for the filter."""


@dataclass(frozen=True)
class AuditEntryPage:
    """One audit entry with its record before and after."""

    __pydantic_config__ = DOCUMENTED

    entry: AuditRow
    """Who, when, what table and record, before and after."""
    problem: str | None = None
    """Why the last redaction was refused."""


def _day(name: str, value: str | None) -> date | None:
    if not (value or "").strip():
        return None
    try:
        interval = interval_or_none(value.strip())
    except DateError as error:
        raise BadParameter(name, value, "a day, month or year (2026-12-02, 2026-12, 2026)") from error
    return interval.earliest if name == "from" else interval.latest


def audit_view(*, session: SessionDep, user: str | None = None, table: str | None = None, key: str | None = None,
               date_from: str | None = None, date_to: str | None = None, page: str | None = None) -> AuditPage:
    """Return one page of the audit trail filtered by user, record (table and key) and period."""
    number = page_number(page)
    changes = list_changes(session=session, user=(user or "").strip() or None, table=(table or "").strip() or None,
                           key=(key or "").strip() or None, date_from=_day("from", date_from), date_to=_day("to", date_to),
                           page=number)
    if number > changes.pages:
        raise BadParameter("page", page, f"a whole number from 1 to {changes.pages}")
    keys = [row.key for row in changes.rows if row.table == "person" and row.key]
    names = {key: label.name for key, label in list_person_labels_by_key(session=session, keys=keys).items()}
    return AuditPage(changes, names, list(AUDITED_TABLES))


def entry_view(*, session: SessionDep, entry_id: int, problem: str | None = None) -> AuditEntryPage:
    """Return one audit entry; 404 when there is none."""
    entry = get_change(session=session, entry_id=entry_id)
    if entry is None:
        raise HTTPException(404, f"no audit entry {entry_id}")
    return AuditEntryPage(entry, problem)


_AUDIT = ("Every change, newest first, 100 to a page: when (UTC), who, what (create, update, delete, restore, merge, "
          "split, import, redact), the table and record key, a summary, and the record before and after as JSON. An "
          "import is one entry with its counts and the file's hash. Filters: `user` (the actor's name), `table` and "
          "`key` (one record's history: its own entries and the merges and splits that name it), `from` and `to` "
          "(days, months or years, UTC), `page`. Entries cannot be edited. Editors and admins only (403 for readers).")


@router.get("/audit", response_class=HTMLResponse, summary="Audit trail (page)",
            description=_AUDIT + " The same data in JSON: `/api/audit`.")
def audit_page(request: Request, session: SessionDep, _: EditorActor, user: str | None = None, table: str | None = None,
               key: str | None = None, page: str | None = None) -> Response:
    q = request.query_params
    view = audit_view(session=session, user=user, table=table, key=key, date_from=q.get("from"), date_to=q.get("to"), page=page)
    return render(request, view, template="audit.html")


@router.get("/api/audit", response_model=AuditPage, summary="Audit trail (JSON)",
            description=_AUDIT + " The page with the same data: `/audit`.")
def audit_api(request: Request, session: SessionDep, _: EditorActor, user: str | None = None, table: str | None = None,
              key: str | None = None, page: str | None = None) -> Response:
    q = request.query_params
    view = audit_view(session=session, user=user, table=table, key=key, date_from=q.get("from"), date_to=q.get("to"), page=page)
    return render(request, view, template="audit.html")


_ENTRY = ("One audit entry: when, who, what, the record, and the record before and after. Admins see the form that "
          "redacts personal data from it.")


@router.get("/audit/{entry_id}", response_class=HTMLResponse, summary="One audit entry (page)",
            description=_ENTRY + " The same data in JSON: `/api/audit/{entry_id}`.")
def entry_page(request: Request, entry_id: int, session: SessionDep, _: EditorActor) -> Response:
    return render(request, entry_view(session=session, entry_id=entry_id), template="audit_entry.html")


@router.get("/api/audit/{entry_id}", response_model=AuditEntryPage, summary="One audit entry (JSON)",
            description=_ENTRY + " The page with the same data: `/audit/{entry_id}`.")
def entry_api(request: Request, entry_id: int, session: SessionDep, _: EditorActor) -> Response:
    return render(request, entry_view(session=session, entry_id=entry_id), template="audit_entry.html")


@router.post("/audit/{entry_id}/redact", response_class=RedirectResponse, summary="Redact personal data from an audit entry",
             description="Admins only. Replaces with \"[redacted]\" every value of the entry that holds `text` (form "
             "field; blank: every text value) and records the redaction as an entry of its own with who, when and the "
             "`reason` (required), never what was taken out. Answers 303 to the entry, or the entry page with the "
             "problem (422).")
async def redact(request: Request, entry_id: int, session: SessionDep, _: CsrfChecked, actor: AdminActor) -> Response:
    values = await form_values(request)
    try:
        await save(request, lambda s: redact_change(session=s, actor=actor.name, user_id=actor.user_id, entry_id=entry_id,
                                                    reason=str(values.get("reason") or ""), text=str(values.get("text") or "")))
    except LookupError as missing:
        raise HTTPException(404, str(missing)) from missing
    except ValueError as problem:
        return render(request, entry_view(session=session, entry_id=entry_id, problem=str(problem)),
                      template="audit_entry.html", status_code=422)
    return RedirectResponse(urls_for(request).audit_entry(entry_id), status_code=303)
