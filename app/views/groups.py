"""Groups, the second mode: the index (``/groups``), one group (``/groups/{key}``), their JSON twins
and the members of a group as CSV (``/groups/{key}/members.csv``)."""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass

from fastapi import APIRouter, HTTPException, Request
from fastapi.responses import HTMLResponse, Response
from sqlalchemy.orm import Session

from app.documented import DOCUMENTED
from app.network.group_drawing import GroupNeighbourhood, neighbourhood_of_group
from app.network.slice import Slice, resolve_slice
from app.store.groups import GroupDetail, GroupList, TermDate, get_group, list_group_kinds, search_groups
from app.views.redaction import redact_for
from app.views.common import BadParameter, SessionDep, SliceDep, render
from app.views.tables import spreadsheet_safe

__all__ = ["GroupPage", "GroupsPage", "group_view", "groups_view", "members_csv", "router"]

router = APIRouter(tags=["groups"])


@dataclass(frozen=True)
class GroupsPage:
    """The index of groups: a search, a kind filter and the groups found, as a tree."""

    __pydantic_config__ = DOCUMENTED

    result: GroupList
    """The groups found with their member counts, each parent before its sub-groups."""


@dataclass(frozen=True)
class GroupPage:
    """Everything recorded about one group, and its members with the other groups they share."""

    __pydantic_config__ = DOCUMENTED

    group: GroupDetail
    """Place, dates, parent and sub-groups, and every live membership with its citations."""
    neighbourhood: GroupNeighbourhood
    """The group, its members in the slice and the other groups they share, drawn and listed."""
    slice: Slice
    """The slice of the query string: it builds the drawing, and links to persons and groups keep it."""
    slice_summary: str
    """The slice in plain words."""


def groups_view(*, session: Session, q: str = "", kind: str | None = None) -> GroupsPage:
    """Return the view-model of the index; a kind that no group has is a 400 naming the kinds."""
    kind = (kind or "").strip() or None
    if kind is not None:
        kinds = [k.kind for k in list_group_kinds(session=session)]
        if kind not in kinds:
            raise BadParameter("kind", kind, kinds or "no kind: no group has a kind recorded")
    return GroupsPage(result=search_groups(session=session, q=q, kind=kind))


def group_view(*, session: Session, key: str, slice_: Slice) -> GroupPage:
    """Return the view-model of one group's page; an unknown key is a 404."""
    group = get_group(session=session, key=key)
    if group is None:
        raise HTTPException(status_code=404, detail=f"No group has the key '{key}'.")
    neighbourhood = neighbourhood_of_group(session, resolve_slice(session, slice_), group.id)
    return GroupPage(group=group, neighbourhood=neighbourhood, slice=slice_, slice_summary=slice_.describe())


MEMBER_COLUMNS = [
    "person_key", "person", "role", "start", "start_earliest", "start_latest", "end", "end_earliest", "end_latest",
    "attested_from", "attested_to", "attestation_dates", "attestations", "documents", "sources",
]  # fmt: skip


def members_csv(group: GroupDetail) -> str:
    """Return the members of a group as CSV text: one row per membership, terms beside attestation dates."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow(MEMBER_COLUMNS)
    for m in group.members:
        writer.writerow([spreadsheet_safe(cell) for cell in [
            m.person.key, m.person.name, m.role, *_term_cells(m.start), *_term_cells(m.end),
            m.attested_from, m.attested_to, "|".join(m.attestation_dates), m.counts.attestations, m.counts.documents,
            "|".join(dict.fromkeys(att.source.key for att in m.attestations)),
        ]])  # fmt: skip
    return out.getvalue()


def _term_cells(term: TermDate | None) -> list[object]:
    """Return a start or end as three cells: as written, first and last Gregorian day."""
    return [term.text, term.earliest, term.latest] if term else [None, None, None]


# --- routes -----------------------------------------------------------------------------------

_INDEX = (
    "Every group (society, parish, guild, company, council, household, ...), parents before their "
    "sub-groups, each with its kind, place, start and end as written, and its members: the persons "
    "with a membership that has at least one attestation not deleted. Parameters: `q` finds words of "
    "the name whatever their case and accents; `kind` keeps one kind of group (a kind no group has is "
    "a 400 listing the kinds). A group whose parent is not in the result names its parent."
)
_GROUP = (
    "One group: kind, place, start and end as written and as Gregorian days, its parent groups and "
    "sub-groups, and every membership with a live attestation: the member, the role, the term as "
    "recorded beside the dates of the attestations themselves (a register entry proves membership at "
    "its date, not a term), and each attestation as a full citation. With it, the group's "
    "neighbourhood in the slice: its members and the other groups at least two of them belong to, "
    "drawn as SVG (groups as hexagons, persons as circles, corporate bodies as rounded squares; each "
    "mark links to its page) and listed. Slice parameters (`from`, `to`, `certainty`, `evidence`, "
    "archives, `unidentified`, `max_group_size`) choose the memberships drawn and are kept in the links. "
    "An unknown key is a 404."
)


@router.get("/groups", response_class=HTMLResponse, summary="Groups: index and search (page)",
            description=_INDEX + " An htmx request (header `HX-Request`) gets only the result rows. "
            "The same data in JSON: `/api/groups`.")  # fmt: skip
def groups_page(request: Request, session: SessionDep, q: str = "", kind: str | None = None) -> Response:
    return render(request, groups_view(session=session, q=q, kind=kind), template="groups.html", partial="_group_rows.html")


@router.get("/api/groups", response_model=GroupsPage, summary="Groups: index and search (JSON)",
            description=_INDEX + " The page with the same data: `/groups`.")  # fmt: skip
def groups_api(request: Request, session: SessionDep, q: str = "", kind: str | None = None) -> Response:
    return render(request, groups_view(session=session, q=q, kind=kind), template="groups.html", partial="_group_rows.html")


@router.get("/groups/{key}", response_class=HTMLResponse, summary="One group (page)",
            description=_GROUP + " The same data in JSON: `/api/groups/{key}`; the members as CSV: "
            "`/groups/{key}/members.csv`.")  # fmt: skip
def group_page(request: Request, key: str, session: SessionDep, slice_: SliceDep) -> Response:
    return render(request, group_view(session=session, key=key, slice_=slice_), template="group.html")


@router.get("/api/groups/{key}", response_model=GroupPage, summary="One group (JSON)",
            description=_GROUP + " The page with the same data: `/groups/{key}`.")  # fmt: skip
def group_api(request: Request, key: str, session: SessionDep, slice_: SliceDep) -> Response:
    return render(request, group_view(session=session, key=key, slice_=slice_), template="group.html")


@router.get("/groups/{key}/members.csv", summary="The members of one group (CSV)",
            description="One row per live membership of the group: person key and name, role, start and end "
            "of the term as written and as Gregorian days, first and last day of its attestations, their "
            "dates as written (`|`-separated), counts of attestations and documents, and the source keys. "
            "The same members as on `/groups/{key}`. An unknown key is a 404.")  # fmt: skip
def group_members_csv(request: Request, key: str, session: SessionDep) -> Response:
    group = get_group(session=session, key=key)
    if group is None:
        raise HTTPException(status_code=404, detail=f"No group has the key '{key}'.")
    group = redact_for(request, group)
    return Response(members_csv(group), media_type="text/csv; charset=utf-8",
                    headers={"Content-Disposition": f'attachment; filename="{group.key}-members.csv"'})  # fmt: skip
