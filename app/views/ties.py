"""Ties with their evidence: everything between two persons in a slice (``/ties/{a}/{b}``), one relation (``/relations/{id}``)."""

from __future__ import annotations

from dataclasses import dataclass

from fastapi import APIRouter, HTTPException, Request
from fastapi.responses import HTMLResponse, Response
from sqlalchemy.orm import Session

from app.network.slice import Slice, relation_evidence, resolve_slice
from app.store.persons import PersonRef, person_id
from app.store.ties import RelationEvidence, TiesBetween, get_relation, get_ties
from app.views.common import SessionDep, SliceDep, render
from app.views.persons import person_or_redirect

__all__ = ["RelationPage", "TiesPage", "relation_view", "router", "ties_view"]

router = APIRouter(tags=["ties"])


@dataclass(frozen=True)
class TiesPage:
    """Everything between two persons that the slice keeps, with every citation."""

    __pydantic_config__ = {"use_attribute_docstrings": True}

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
    ties: TiesBetween
    """The relations between the two with the attestations the slice keeps, their counts, and how many it leaves out."""


@dataclass(frozen=True)
class RelationPage:
    """One relation with all its attestations, whatever the slice."""

    __pydantic_config__ = {"use_attribute_docstrings": True}

    relation: RelationEvidence
    """The relation, its ends and roles, and its attestations (not deleted) in date order."""
    deleted: int
    """Deleted attestations of the relation: not shown, never counted."""


def ties_view(*, session: Session, a: PersonRef, b: PersonRef, slice_: Slice) -> TiesPage:
    """Return the view-model of the ties between two persons (current keys) in the slice."""
    resolved = resolve_slice(session, slice_)
    a_id, b_id = person_id(session=session, key=a.key), person_id(session=session, key=b.key)
    # The evidence also holds the self-loops of either person; get_ties looks only at the pair.
    kept = {row.attestation_id for row in relation_evidence(session, resolved, persons=[a_id, b_id], both_ends=True)}
    ties = get_ties(session=session, a_id=a_id, b_id=b_id, kept=kept)
    return TiesPage(a=a, b=b, self_loop=a_id == b_id, slice=slice_, slice_description=slice_.describe(),
                    sliced=slice_ != Slice(), ties=ties)  # fmt: skip


def relation_view(*, session: Session, relation_id: int) -> RelationPage:
    """Return the view-model of one relation; 404 when there is no relation with that id."""
    detail = get_relation(session=session, relation_id=relation_id)
    if detail is None:
        raise HTTPException(status_code=404, detail=f"no relation with id {relation_id}")
    return RelationPage(relation=detail.relation, deleted=detail.deleted)


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
    "`omit_repository`, `min_collections`, `unidentified`."
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
