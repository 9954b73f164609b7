"""The front page: the dataset at a glance, and its JSON twin ``/api/summary``."""

from __future__ import annotations

from dataclasses import dataclass

from fastapi import APIRouter, Request
from fastapi.responses import HTMLResponse, Response
from sqlalchemy.orm import Session

from app.config import Settings
from app.documented import DOCUMENTED
from app.store.summary import DatasetSummary, get_summary
from app.views.common import SessionDep, SettingsDep, render

router = APIRouter(tags=["dataset"])


@dataclass(frozen=True)
class HomePage:
    """The dataset at a glance."""

    __pydantic_config__ = DOCUMENTED

    dataset_name: str
    """Name of the dataset, as configured for this instance."""
    empty: bool
    """True while no attestation is recorded (nothing imported yet, or every attestation deleted)."""
    summary: DatasetSummary
    """Counts, period covered, attestations by certainty and data version."""


def home_view(*, session: Session, settings: Settings) -> HomePage:
    """Return the view-model of the front page."""
    summary = get_summary(session=session)
    return HomePage(dataset_name=settings.dataset_name, empty=summary.attestations == 0, summary=summary)


_DESCRIPTION = (
    "How many persons, relations, attestations, sources, repositories, collections, groups and "
    "memberships the dataset holds, the period its attestations cover, how many attestations there "
    "are of each certainty grade, and the data version. Deleted attestations are not counted, nor "
    "relations and memberships left without an attestation."
)


@router.get(
    "/",
    response_class=HTMLResponse,
    summary="The dataset at a glance (page)",
    description=_DESCRIPTION + " An htmx request (header `HX-Request`) gets only the figures. "
    "The same figures in JSON: `/api/summary`.",
)
def home_page(request: Request, session: SessionDep, settings: SettingsDep) -> Response:
    return render(request, home_view(session=session, settings=settings), template="home.html", partial="_summary.html")


@router.get(
    "/api/summary",
    response_model=HomePage,
    summary="The dataset at a glance (JSON)",
    description=_DESCRIPTION + " Dates are ISO days; `earliest` and `latest` are null when no "
    "attestation is dated. The page with the same figures: `/`.",
)
def summary_api(request: Request, session: SessionDep, settings: SettingsDep) -> Response:
    return render(request, home_view(session=session, settings=settings), template="home.html", partial="_summary.html")
