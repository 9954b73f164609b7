"""Ties with their evidence: everything between two persons in a slice (``/ties/{a}/{b}``), one relation (``/relations/{id}``)."""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import date

from fastapi import APIRouter, HTTPException, Request
from fastapi.responses import HTMLResponse, Response
from sqlalchemy.orm import Session

from app.documented import DOCUMENTED
from app.network.slice import Slice, relation_evidence, resolve_slice
from app.network.twomode import MembershipEvidence, describe_term, groups_in_common, membership_evidence
from app.store.attestations import CitedAttestation, get_cited_attestations
from app.store.editing import DeletedAttestation, list_deleted_attestations
from app.store.groups import GroupRef, group_refs
from app.store.persons import PersonRef, person_id
from app.store.ties import RelationEvidence, TiesBetween, get_relation, get_ties
from app.views.common import SessionDep, SliceDep, render
from app.views.persons import person_or_redirect

__all__ = ["RelationPage", "GroupInCommon", "MembershipInCommon", "TiesPage", "relation_view", "router", "shared_groups", "ties_view"]

router = APIRouter(tags=["ties"])


@dataclass(frozen=True)
class MembershipInCommon:
    """One person's membership of a shared group, with its term and its evidence."""

    __pydantic_config__ = DOCUMENTED

    role: str
    """Role in the group ("" when none is recorded)."""
    start: date | None
    """First day of the term (None when nothing about the membership is dated)."""
    end: date | None
    """Last day of the term."""
    term_from: str
    """Where the term comes from, in words ("term as recorded", "span of the attestation dates", ...)."""
    attestations: list[CitedAttestation]
    """The attestations the slice keeps, as full citations in date order."""


@dataclass(frozen=True)
class GroupInCommon:
    """A group both persons belong to, with the memberships of each and whether their terms overlap."""

    __pydantic_config__ = DOCUMENTED

    group: GroupRef
    """The group."""
    first: list[MembershipInCommon]
    """Memberships of the first person (one per role)."""
    second: list[MembershipInCommon]
    """Memberships of the second person."""
    overlap: bool | None
    """True when a term of one overlaps a term of the other, False when none does, None when undated."""
    counted: bool
    """True when the group counts for the co-membership tie under the slice's overlap rule."""


@dataclass(frozen=True)
class TiesPage:
    """Everything between two persons that the slice keeps, with every citation."""

    __pydantic_config__ = DOCUMENTED

    a: PersonRef
    """The first person (as in the address)."""
    b: PersonRef
    """The second person (the same as the first for self-loops)."""
    self_loop: bool
    """True when both are the same person."""
    slice: Slice
    """The slice of the query string."""
    slice_description: str
    """The slice in plain words."""
    sliced: bool
    """True when the slice is not the default one."""
    ties: TiesBetween | None
    """The relations between the two with the attestations the slice keeps, their counts, and how many it
    leaves out (None under ``mode=co-membership``)."""
    shared_groups: list[GroupInCommon] | None
    """Under ``mode=co-membership`` or ``both``: the groups both belong to in the slice, each with both
    persons' memberships and citations, and whether the terms overlap (None under ``mode=relations``)."""


@dataclass(frozen=True)
class RelationPage:
    """One relation with all its attestations, whatever the slice."""

    __pydantic_config__ = DOCUMENTED

    relation: RelationEvidence
    """The relation, its ends and roles, and its attestations (not deleted) in date order."""
    deleted: int
    """Deleted attestations of the relation: not shown, never counted."""
    deleted_attestations: list[DeletedAttestation] = field(default_factory=list)
    """Those deleted attestations with the reason, newest deletion first (editors can restore them)."""


def ties_view(*, session: Session, a: PersonRef, b: PersonRef, slice_: Slice) -> TiesPage:
    """Return the view-model of the ties between two persons (current keys) in the slice."""
    resolved = resolve_slice(session, slice_)
    a_id, b_id = person_id(session=session, key=a.key), person_id(session=session, key=b.key)
    ties = shared = None
    if slice_.mode != "co-membership":
        # The evidence also holds the self-loops of either person; get_ties looks only at the pair.
        kept = {row.attestation_id for row in relation_evidence(session, resolved, persons=[a_id, b_id], both_ends=True)}
        ties = get_ties(session=session, a_id=a_id, b_id=b_id, kept=kept)
    if slice_.mode != "relations":
        evidence = membership_evidence(session, resolved, persons=[a_id, b_id])
        shared = shared_groups(session=session, evidence=evidence, a_id=a_id, b_id=b_id, overlap=slice_.overlap)
    return TiesPage(a=a, b=b, self_loop=a_id == b_id, slice=slice_, slice_description=slice_.describe(),
                    sliced=slice_ != Slice(), ties=ties, shared_groups=shared)  # fmt: skip


def shared_groups(
    *, session: Session, evidence: list[MembershipEvidence], a_id: int, b_id: int, overlap: str
) -> list[GroupInCommon]:
    """Return the groups persons ``a_id`` and ``b_id`` share in ``evidence``, by group name, with citations."""
    if a_id == b_id:
        return []
    common = groups_in_common(evidence, a_id, b_id)
    refs = group_refs(session=session, group_ids=[c.group for c in common])

    def membership(m: MembershipEvidence) -> MembershipInCommon:
        cited = get_cited_attestations(session=session, attestation_ids=m.attestation_ids)
        return MembershipInCommon(role=m.role, start=m.start, end=m.end, term_from=describe_term(m), attestations=cited)

    found = [
        GroupInCommon(group=refs[c.group], first=[membership(m) for m in c.first], second=[membership(m) for m in c.second],
                    overlap=c.overlap, counted=overlap == "any" or c.overlap is True)
        for c in common
    ]  # fmt: skip
    return sorted(found, key=lambda g: (g.group.name.casefold(), g.group.key))


def relation_view(*, session: Session, relation_id: int) -> RelationPage:
    """Return the view-model of one relation; 404 when there is no relation with that id."""
    detail = get_relation(session=session, relation_id=relation_id)
    if detail is None:
        raise HTTPException(status_code=404, detail=f"no relation with id {relation_id}")
    return RelationPage(relation=detail.relation, deleted=detail.deleted,
                        deleted_attestations=list_deleted_attestations(session=session, relation_id=relation_id))


def _ties_response(request: Request, session: Session, a: str, b: str, slice_: Slice) -> Response:
    refs = []
    for parameter, key in (("a", a), ("b", b)):
        current = person_or_redirect(request, session, key, parameter)
        if isinstance(current, Response):
            return current
        refs.append(current)
    view = ties_view(session=session, a=refs[0], b=refs[1], slice_=slice_)
    return render(request, view, template="ties.html", partial="_ties.html")


# --- routes -----------------------------------------------------------------------------------

_TIES = (
    "Everything between persons `a` and `b` (keys; the same key twice for self-loops) that the slice "
    "keeps: each relation of each kind, in both directions, with the roles of its ends, and every "
    "attestation as a full citation (repository, collection and shelfmark or the printed edition, "
    "locus, evidence, date as written with its calendar and as Gregorian days, place, certainty, "
    "names as written and how certain the identification is, quote and note) in date order. The "
    "counts say how many documents attest the ties (a copy and its original count once), how many "
    "attestations are copies or known from mentions, in how many collections, over which years, and "
    "how many attestations the slice leaves out. Slice parameters: `kind`, `from`, `to`, `dates`, "
    "`undated`, `certainty`, `evidence`, `keep_collection`, `omit_collection`, `keep_repository`, "
    "`omit_repository`, `min_collections`, `unidentified`. `mode=co-membership` shows instead the groups both "
    "belong to (the evidence of a co-membership tie), each with both persons' memberships, their terms (recorded "
    "start and end, else the span of the attestation dates, and which) and citations, and whether the terms "
    "overlap in time; `mode=both` shows relations and shared groups; `overlap=required` says which shared groups "
    "count for the tie, and `max_group_size` leaves out large groups."
)
_RELATION = (
    "One relation (a tie of one kind between two persons) with all its attestations that are not "
    "deleted, whatever the slice, each as a full citation in date order, and the count of its "
    "documents, copies, mentions, collections and years."
)


@router.get("/ties/{a}/{b}", response_class=HTMLResponse, summary="Ties between two persons (page)",
            description=_TIES + " An htmx request (header `HX-Request`) gets only the panel of evidence, "
            "as the ego drawing loads it beside itself. The same data in JSON: `/api/ties/{a}/{b}`.")  # fmt: skip
def ties_page(request: Request, a: str, b: str, session: SessionDep, slice_: SliceDep) -> Response:
    return _ties_response(request, session, a, b, slice_)


@router.get("/api/ties/{a}/{b}", response_model=TiesPage, summary="Ties between two persons (JSON)",
            description=_TIES + " The page with the same data: `/ties/{a}/{b}`.")  # fmt: skip
def ties_api(request: Request, a: str, b: str, session: SessionDep, slice_: SliceDep) -> Response:
    return _ties_response(request, session, a, b, slice_)


@router.get("/relations/{relation_id}", response_class=HTMLResponse, summary="One relation (page)",
            description=_RELATION + " The same data in JSON: `/api/relations/{relation_id}`.")  # fmt: skip
def relation_page(request: Request, relation_id: int, session: SessionDep) -> Response:
    return render(request, relation_view(session=session, relation_id=relation_id), template="relation.html")


@router.get("/api/relations/{relation_id}", response_model=RelationPage, summary="One relation (JSON)",
            description=_RELATION + " The page with the same data: `/relations/{relation_id}`.")  # fmt: skip
def relation_api(request: Request, relation_id: int, session: SessionDep) -> Response:
    return render(request, relation_view(session=session, relation_id=relation_id), template="relation.html")
