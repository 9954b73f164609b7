"""The page of one place (``/places/{key}``) and its JSON twin."""

from __future__ import annotations

from dataclasses import dataclass

from fastapi import APIRouter, HTTPException, Request
from fastapi.responses import HTMLResponse, Response
from sqlalchemy.orm import Session

from app.documented import DOCUMENTED
from app.network.slice import Slice
from app.store.places import PlaceDetail, get_place
from app.store.sources import SourceList, search_sources
from app.views.common import SessionDep, SliceDep, render

__all__ = ["PlacePage", "place_view", "router"]

router = APIRouter(tags=["documents"])


@dataclass(frozen=True)
class PlacePage:
    """One place and what points to it: documents, facts, groups and repositories."""

    __pydantic_config__ = DOCUMENTED

    place: PlaceDetail
    """Name, variants, coordinates, gazetteer identifier, and the facts, groups and repositories there."""
    written: SourceList
    """Documents written there, by date (the first 50; the index of sources lists them all)."""
    received: SourceList
    """Documents received there, by date (the first 50; the index of sources lists them all)."""
    slice: Slice
    """The slice of the query string; links to persons keep it."""


def place_view(*, session: Session, key: str, slice_: Slice) -> PlacePage:
    """Return the view-model of one place's page; an unknown key is a 404."""
    place = get_place(session=session, key=key)
    if place is None:
        raise HTTPException(status_code=404, detail=f"No place has the key '{key}'.")
    return PlacePage(
        place=place,
        written=search_sources(session=session, place_from=key),
        received=search_sources(session=session, place_to=key),
        slice=slice_,
    )


_PLACE = (
    "One place: its name and other spellings, its coordinates as numbers (no map is fetched), its "
    "gazetteer identifier as text, the documents written there and received there (the first 50 of "
    "each by date, with their number in all; `/sources?place_from={key}` and `?place_to={key}` list "
    "them all), the facts about persons located there with the documents that attest them, the groups "
    "and the repositories located there. Slice parameters are kept in the links to persons. An unknown "
    "key is a 404."
)


@router.get("/api/places/{key}", response_model=PlacePage, summary="One place (JSON)",
            description=_PLACE + " The page with the same data: `/places/{key}`.")  # fmt: skip
@router.get("/places/{key}", response_class=HTMLResponse, summary="One place (page)",
            description=_PLACE + " The same data in JSON: `/api/places/{key}`.")  # fmt: skip
def place_page(request: Request, key: str, session: SessionDep, slice_: SliceDep) -> Response:
    return render(request, place_view(session=session, key=key, slice_=slice_), template="place.html")
