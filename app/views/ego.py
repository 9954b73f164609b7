"""The ego network of one person: the drawing with the slice form, its JSON twin, and an SVG file.

``/persons/{key}/ego`` shows the drawing beside a panel where a clicked tie shows its
documents; ``/api/persons/{key}/ego`` gives the same nodes and edges as JSON;
``/persons/{key}/ego.svg`` is the drawing as a file to put in a paper, with the slice written
under it. The person page includes the same panel (``_ego_panel.html``, view-model EgoPanel).
"""

from __future__ import annotations

import textwrap
import threading
from collections import OrderedDict
from dataclasses import dataclass

from fastapi import APIRouter, HTTPException, Query, Request
from fastapi.responses import HTMLResponse, Response
from sqlalchemy.orm import Session

from app.auth import request_visibility
from app.documented import DOCUMENTED
from app.network.drawing import Drawing, ego_drawing
from app.network.ego import EgoEdge, EgoNetwork, EgoNode
from app.network.ego_memberships import ego_network_in_mode
from app.network.slice import Slice, resolve_slice
from app.store.network_labels import get_person_label, list_relation_kinds
from app.store.summary import get_data_version
from app.views.common import BadParameter, SessionDep, SliceDep, Urls, render, templates, urls_for
from app.store.privacy import RestrictedPersons
from app.views.redaction import redact_for, without_left_out
from app.views.slicing import SliceControls, slice_controls

__all__ = ["EgoPanel", "ego_panel", "router", "standalone_ego_svg"]

router = APIRouter(tags=["network"])
RADII = ("1", "2")


@dataclass(frozen=True)
class EgoPanel:
    """The ego network of one person in one slice, drawn and listed."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """Key of the ego."""
    name: str
    """Display name of the ego."""
    radius: int
    """1: the ego's alters and the ties among them; 2: also the alters' alters."""
    slice: Slice
    """The slice the network is built from."""
    summary: str
    """The slice in one line of plain words."""
    nodes: list[EgoNode]
    """The ego first, then the alters by distance and key."""
    edges: list[EgoEdge]
    """Every tie among the persons drawn: one per relation kind and pair, with the relation ids."""
    max_alters: int
    """At most this many alters are drawn."""
    left_out: dict[int, int]
    """Alters found but not drawn because of that cap, by distance (keys "1" and "2" in JSON)."""
    drawing: Drawing
    """Positions, sizes, paths and the legend of relation kinds."""
    notes: list[str]
    """What the reader should know about this drawing (left-out alters, loops, empty slices)."""
    controls: SliceControls
    """The slice form."""
    data_version: int
    """Data version the network was read at (cite it with the drawing)."""


_PANELS: OrderedDict[tuple, EgoPanel] = OrderedDict()
_PANELS_LOCK = threading.Lock()
PANEL_CACHE_SIZE = 128
"""Ego panels kept in memory per server process, keyed by database, data version, visibility, slice, person and radius."""


def ego_panel(*, session: Session, person_key: str, slice: Slice, radius: int) -> EgoPanel:  # noqa: A002
    """Return the ego network panel of the person ``person_key``; 404 when there is none.

    A panel depends only on the data and the slice, so it is kept until the data version changes:
    a hub's neighbourhood is read once, not on every visit.
    """
    person = get_person_label(session=session, key=person_key)
    if person is None:
        raise HTTPException(status_code=404, detail=f"There is no person with the key {person_key}.")
    # Keyed by the viewer's visibility too: a panel kept for an editor is never handed to a reader.
    key = (str(session.get_bind().url), get_data_version(session=session), request_visibility(), slice, person.id, radius)
    with _PANELS_LOCK:
        if key in _PANELS:
            _PANELS.move_to_end(key)
            return _PANELS[key]
    panel = _build_panel(session, person, slice, radius)
    with _PANELS_LOCK:
        _PANELS[key] = panel
        while len(_PANELS) > PANEL_CACHE_SIZE:
            _PANELS.popitem(last=False)
    return panel


def _build_panel(session: Session, person, slice: Slice, radius: int) -> EgoPanel:  # noqa: A002, ANN001
    resolved = resolve_slice(session, slice)
    network = ego_network_in_mode(session, resolved, person.id, radius=radius)
    kinds = list_relation_kinds(session=session)
    drawing = ego_drawing(network, kinds, weight=slice.weight, direction=slice.direction)
    return EgoPanel(
        key=person.key, name=person.name, radius=radius, slice=slice, summary=slice.describe(), nodes=network.nodes,
        edges=network.edges, max_alters=network.max_alters, left_out=network.left_out, drawing=drawing,
        notes=_notes(person.name, person.unidentified, slice, network),
        controls=slice_controls(session=session, slice=slice), data_version=get_data_version(session=session),
    )  # fmt: skip


def _notes(name: str, unidentified: bool, slice: Slice, network: EgoNetwork) -> list[str]:  # noqa: A002
    notes = []
    if unidentified and slice.unidentified == "drop":
        notes.append(f"{name} is unidentified, and this slice leaves unidentified persons out: no tie is drawn.")
    elif not network.edges:
        notes.append(f"No tie of {name} is in this slice.")
    first, second = network.left_out.get(1, 0), network.left_out.get(2, 0)
    if first:
        notes.append(f"{first} more person{'s are' if first != 1 else ' is'} tied to {name} but not drawn: "
                     f"at most {network.max_alters} alters are drawn, those with the strongest ties first.")  # fmt: skip
        if network.radius == 2:
            notes.append("Persons two steps away only through an alter not drawn are not looked for.")
    if second:
        notes.append(f"{second} more person{'s' if second != 1 else ''} two steps away "
                     f"{'are' if second != 1 else 'is'} not drawn (the cap of {network.max_alters} alters).")  # fmt: skip
    if network.co_members_left_out:
        n = network.co_members_left_out
        notes.append(f"{n} more person{'s share' if n != 1 else ' shares'} a group with {name if network.radius == 1 else 'the persons drawn'} "
                     f"but {'are' if n != 1 else 'is'} not drawn: at most {network.max_alters} alters are drawn, "
                     "those with the strongest ties first.")  # fmt: skip
    if slice.mode != "relations":
        notes.append("Ties by shared groups are drawn in their own line (see the legend); each opens the groups "
                     "the two share, with the documents of both memberships. They have no direction"
                     + (", and relation ties between the same two persons are drawn beside them." if slice.mode == "both" else "."))
    if slice.loops == "drop" and any(e.source == e.target for e in network.edges):
        notes.append("Ties of a person with themself are drawn as small loops; measures leave them out "
                     "unless the slice counts loops.")  # fmt: skip
    return notes


def _radius(value: str) -> int:
    if value not in RADII:
        raise BadParameter("radius", value, RADII)
    return int(value)


_RADIUS = Query("1", description="1: the ego's alters and the ties among them; 2: also the alters' alters.")
_DESCRIPTION = (
    "The ego network of one person in the slice given by the query string: the person, everyone "
    "tied to them (and, with radius=2, everyone tied to those), and every tie among them, one per "
    "relation kind and pair, each with its counts of attestations and documents and its relation "
    "ids. Hubs are capped at 60 alters (150 at radius 2), the strongest ties first; `left_out` "
    "says how many were not drawn. A bad radius or slice parameter is a 400, an unknown person a 404."
)


@router.get(
    "/persons/{key}/ego",
    response_class=HTMLResponse,
    summary="Ego network of a person (page)",
    description=_DESCRIPTION + " The page draws it, with the slice form and a panel that shows the "
    "documents behind a clicked tie; an htmx request gets only the panel. JSON: `/api/persons/{key}/ego`.",
)
def ego_page(request: Request, key: str, session: SessionDep, slice: SliceDep, radius: str = _RADIUS) -> Response:  # noqa: A002
    view = ego_panel(session=session, person_key=key, slice=slice, radius=_radius(radius))
    return render(request, view, template="ego.html", partial="_ego_panel.html")


@router.get(
    "/api/persons/{key}/ego",
    response_model=EgoPanel,
    summary="Ego network of a person (JSON)",
    description=_DESCRIPTION + " `drawing` holds the positions and paths of the picture. "
    "The page: `/persons/{key}/ego`; the picture as a file: `/persons/{key}/ego.svg`.",
)
def ego_api(request: Request, key: str, session: SessionDep, slice: SliceDep, radius: str = _RADIUS) -> Response:  # noqa: A002
    view = ego_panel(session=session, person_key=key, slice=slice, radius=_radius(radius))
    return render(request, view, template="ego.html", partial="_ego_panel.html")


@router.get(
    "/persons/{key}/ego.svg",
    response_class=Response,
    summary="Ego network of a person (SVG file)",
    description="The drawing of `/persons/{key}/ego` as a standalone SVG file to download, with its "
    "legend and a caption giving the person, the radius, the slice and the data version.",
    responses={200: {"content": {"image/svg+xml": {}}}},
)
def ego_svg(request: Request, key: str, session: SessionDep, slice: SliceDep, radius: str = _RADIUS) -> Response:  # noqa: A002
    svg, name = ego_download(request, session, slice, key, radius)
    return Response(svg, media_type="image/svg+xml", headers={"Content-Disposition": f'attachment; filename="{name}.svg"'})


def ego_download(request: Request, session: Session, slice: Slice, key: str, radius: str,  # noqa: A002
                 leave_out: RestrictedPersons | None = None) -> tuple[str, str]:
    """Return the standalone SVG of an ego drawing, as the viewer may see it, and a file name for it.

    A drawing about a restricted person is refused to a reader (403), as the page is. With
    ``leave_out`` (the export page's files, for every role unless an admin asks for everyone) those
    persons read "restricted person" and a drawing centred on one is refused.
    """
    view = redact_for(request, ego_panel(session=session, person_key=key, slice=slice, radius=_radius(radius)))
    if leave_out is not None:
        view = without_left_out(view, leave_out)
        if view is None:
            raise HTTPException(403, "This is a restricted person: their ego drawing is exported only when an admin "
                                     "asks for restricted persons (restricted=include).")
    return standalone_ego_svg(view, urls=urls_for(request), dataset_sha256=cited_sha(request, session))


def cited_sha(request: Request, session: Session) -> str:
    """Return the content hash the export page cites, kept between writes."""
    from app.views.dataset_version import cached_dataset_version  # snapshot code, needed for downloads only

    return cached_dataset_version(request, session).sha256


def standalone_ego_svg(view: EgoPanel, *, urls: Urls, dataset_sha256: str) -> tuple[str, str]:
    """Return the drawing of ``view`` as a standalone SVG file, and a file name for it (web and command line).

    The caption names the person, the radius, the slice and the dataset version (the first 16
    hex digits of the content hash the export page cites) with the data version.
    """
    caption = (f"Ego network of {view.name} ({view.key}), radius {view.radius}. Slice: {view.summary}. "
               f"Attesta, dataset version {dataset_sha256[:16]} (data version {view.data_version}).")  # fmt: skip
    svg = templates.get_template("ego_download.svg").render(page=view, urls=urls, caption_lines=textwrap.wrap(caption, 120))
    return svg, f"ego-{view.key.replace(':', '_')}-radius{view.radius}"
