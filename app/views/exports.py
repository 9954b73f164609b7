"""Exports of the current slice (GraphML, tables, matrix, sources as CSL-JSON, the ego drawing as PNG) and snapshots.

``/export`` shows the dataset version (content hash and counts) and links every file of the
slice; each file route takes the slice from its query string. A snapshot is made by a POST
(with CSRF token) and answered with the .zip.

Every file leaves out the restricted persons (recorded as living, or born too recently) and
whatever names them, for every role, unless an admin asks for them with ``restricted=include``
(the choice on the export page); anyone else asking so is refused with 403.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field

from typing import Annotated

from fastapi import APIRouter, Depends, HTTPException, Query, Request
from fastapi.responses import HTMLResponse, Response
from sqlalchemy.orm import Session

from app.auth import CsrfChecked, CurrentActor, current_actor
from app.exchange.csl import csl_items
from app.exchange.drawing_png import png_of
from app.exchange.network_export import adjacency_csv, edges_csv, nodes_csv, slice_export, to_graphml
from app.exchange.snapshot import DatasetVersion, snapshot_bytes
from app.network.slice import Slice
from app.views.common import BadParameter, SessionDep, SliceDep, render, urls_for
from app.views.dataset_version import cached_dataset_version
from app.store.privacy import RestrictedPersons
from app.views.ego import ego_download
from app.views.redaction import Redactor, restricted_persons

__all__ = ["router"]



def relations_only(slice_: SliceDep) -> None:
    """Refuse ``mode=co-membership|both`` for the slice's files: they hold relations and their evidence only.

    The export page, the drawings (which show the slice as its page does) and the snapshot take any mode.
    """
    if slice_.mode != "relations":
        raise BadParameter("mode", slice_.mode, "relations for exports (the co-membership matrices download from "
                           "/network/two-mode)")


router = APIRouter(tags=["exports"])
RELATIONS_ONLY = [Depends(relations_only)]

RESTRICTED_CHOICES = ("leave-out", "include")
INCLUDE_REFUSED = ("Only an admin may export restricted persons (recorded as living, or born too recently); "
                   "leave out restricted=include to get the files without them.")


def left_out(request: Request, restricted: str = Query(
        "leave-out", description="`leave-out` (the default): the files leave out restricted persons (recorded as living, "
                                 "or born too recently) and every relation, membership and fact naming them; "
                                 "`include`: an admin asks for them (403 for anyone else).")) -> RestrictedPersons | None:
    """Return the restricted persons the files leave out (None: an admin asked for everything)."""
    if restricted not in RESTRICTED_CHOICES:
        raise BadParameter("restricted", restricted, " or ".join(RESTRICTED_CHOICES))
    if restricted == "include":
        if not current_actor(request).can("admin"):
            raise HTTPException(403, INCLUDE_REFUSED)
        return None
    return restricted_persons(request) or None


LeftOut = Annotated[RestrictedPersons | None, Depends(left_out)]


@dataclass(frozen=True)
class ExportLink:
    """One file of the slice to download."""

    label: str
    href: str
    description: str


@dataclass(frozen=True)
class ExportPage:
    """The dataset version to cite and the files of the slice."""

    slice: Slice
    """The slice of every file."""
    slice_summary: str
    """The slice in words."""
    version: DatasetVersion
    """Content hash and counts of the whole dataset."""
    files: list[ExportLink]
    """The downloads of the slice."""
    snapshot_action: str
    """Where the snapshot button posts to (with the slice)."""
    restricted: str = "leave-out"
    """Whether the files leave out restricted persons (``leave-out``) or hold them (``include``, admins only)."""
    restricted_count: int = 0
    """How many restricted persons the dataset has (a number only)."""
    may_include: bool = False
    """True for an admin, who may ask for the restricted persons."""
    include_action: str = ""
    """The export page itself, where the admin's choice is made."""
    drawing_svg: str = ""
    """Where the drawing form sends for an ego drawing as SVG (person and radius as form fields)."""
    drawing_png: str = ""
    """The same, as PNG."""
    slice_fields: list[tuple[str, str]] = field(default_factory=list)
    """The slice (and the restricted-persons choice) as (name, value) pairs, carried by the drawing form."""
    person: str | None = None
    """The person whose ego drawing the form offers first (the page's ``person`` parameter)."""
    shared_groups: list[ExportLink] = field(default_factory=list)
    """Under ``mode=co-membership|both``: the two-mode page's matrices of the ties by shared groups (the files above
    hold the slice's relations only)."""


def export_links(request: Request, slice_: Slice, restricted: str = "leave-out") -> list[ExportLink]:
    """Return the downloads of a slice, shared by the export page and the export section of the network pages.

    The files hold relations and their evidence: under ``mode=co-membership|both`` they are those of the
    same slice's relations (the ties by shared groups download as matrices from the two-mode page).
    """
    urls = urls_for(request)
    extra = {"restricted": "include"} if restricted == "include" else {}
    slice_ = slice_.with_(mode="relations")
    return [
        ExportLink("GraphML", urls.export("graphml", slice_, **extra), "persons and ties with their attributes, for network software"),
        ExportLink("Persons (CSV)", urls.export("nodes.csv", slice_, **extra), "one row per person: names, life dates, identifiers, stored measures"),
        ExportLink("Ties (CSV)", urls.export("edges.csv", slice_, **extra), "one row per tie: kinds, weight, attestations, documents, source keys"),
        ExportLink("Adjacency matrix (CSV)", urls.export("matrix.csv", slice_, **extra), "tie weights, row person to column person"),
        ExportLink("Sources (CSL-JSON)", urls.export("sources.json", slice_, **extra), "the documents behind the slice's ties, for a reference manager"),
        ExportLink("Workbook (zip)", urls.export("workbook.zip", **extra), "the whole dataset as a workbook"),
    ]


def export_view(request: Request, session: Session, slice_: Slice, leave_out: RestrictedPersons | None,
                person: str | None = None) -> ExportPage:
    restricted = "include" if request.query_params.get("restricted") == "include" else "leave-out"  # checked by left_out
    extra = {"restricted": "include"} if restricted == "include" else {}
    urls = urls_for(request)
    return ExportPage(slice=slice_, slice_summary=slice_.describe(), version=cached_dataset_version(request, session),
                      files=export_links(request, slice_, restricted),
                      snapshot_action=urls.export("snapshot", slice_, **extra), restricted=restricted,
                      restricted_count=len(restricted_persons(request).ids),
                      may_include=current_actor(request).can("admin"), include_action=urls.export("", slice_),
                      drawing_svg=urls.export("ego.svg"), drawing_png=urls.export("ego.png"),
                      slice_fields=slice_.to_query() + list(extra.items()), person=(person or "").strip() or None,
                      shared_groups=shared_group_links(request, slice_))


def shared_group_links(request: Request, slice_: Slice) -> list[ExportLink]:
    """Return, for a slice with ties by shared groups, the two-mode page's CSV matrices of them (else nothing)."""
    if slice_.mode == "relations":
        return []
    urls = urls_for(request)
    return [
        ExportLink("Person × group matrix (CSV)", urls.network("two-mode", slice_, format="csv", table="incidence"),
                   "the memberships the slice keeps, 1 or 0"),
        ExportLink("Person × person matrix (CSV)", urls.network("two-mode", slice_, format="csv", table="person_projection"),
                   "the ties by shared groups, weighted as the slice says"),
    ]


_PERSON = Query(None, description="A person key: the drawing form offers this person's ego drawing.")
_SLICE = " The slice is given by the query string, as on every network page."


@router.get("/export", response_class=HTMLResponse, summary="Exports and the dataset version (page)",
            description="The content hash and counts of the dataset (cite it as 'dataset version <hash>'), the files "
                        "of the slice to download, a form for a person's ego drawing as SVG or PNG, and the snapshot "
                        "button." + _SLICE)
def export_page(request: Request, session: SessionDep, slice_: SliceDep, leave_out: LeftOut,
                person: str | None = _PERSON) -> Response:
    return render(request, export_view(request, session, slice_, leave_out, person), template="export.html")


@router.get("/api/export", response_model=ExportPage, summary="Exports and the dataset version (JSON)",
            description="The JSON twin of `/export`: content hash, counts and the download links." + _SLICE)
def export_api(request: Request, session: SessionDep, slice_: SliceDep, leave_out: LeftOut,
                person: str | None = _PERSON) -> Response:
    return render(request, export_view(request, session, slice_, leave_out, person), template="export.html")


def _download(data: bytes | str, media_type: str, filename: str) -> Response:
    return Response(data, media_type=media_type, headers={"Content-Disposition": f'attachment; filename="{filename}"'})


@router.get("/export/graphml", response_class=Response, dependencies=RELATIONS_ONLY,
            summary="The slice as GraphML",
            description="Persons (id = key; name, kind, life dates, identifiers, stored centralities) and ties (kind, "
                        "weight, attestations, documents, source keys) as GraphML." + _SLICE,
            responses={200: {"content": {"application/graphml+xml": {}}}})
def export_graphml(session: SessionDep, slice_: SliceDep, leave_out: LeftOut) -> Response:
    return _download(to_graphml(slice_export(session, slice_, leave_out=leave_out)), "application/graphml+xml", "slice.graphml")


@router.get("/export/nodes.csv", response_class=Response, dependencies=RELATIONS_ONLY,
            summary="The slice's persons as CSV",
            description="One row per person of the slice with its attributes and stored centralities." + _SLICE)
def export_nodes(session: SessionDep, slice_: SliceDep, leave_out: LeftOut) -> Response:
    return _download(nodes_csv(slice_export(session, slice_, leave_out=leave_out)), "text/csv; charset=utf-8", "slice-persons.csv")


@router.get("/export/edges.csv", response_class=Response, dependencies=RELATIONS_ONLY,
            summary="The slice's ties as CSV",
            description="One row per tie of the slice: kinds, weight, attestations, documents and source keys." + _SLICE)
def export_edges(session: SessionDep, slice_: SliceDep, leave_out: LeftOut) -> Response:
    return _download(edges_csv(slice_export(session, slice_, leave_out=leave_out)), "text/csv; charset=utf-8", "slice-ties.csv")


@router.get("/export/matrix.csv", response_class=Response, dependencies=RELATIONS_ONLY,
            summary="The slice's adjacency matrix as CSV",
            description="Tie weights from the row person to the column person, persons in key order." + _SLICE)
def export_matrix(session: SessionDep, slice_: SliceDep, leave_out: LeftOut) -> Response:
    return _download(adjacency_csv(slice_export(session, slice_, leave_out=leave_out)), "text/csv; charset=utf-8", "slice-matrix.csv")


@router.get("/export/sources.json", response_class=Response, dependencies=RELATIONS_ONLY,
            summary="The slice's sources as CSL-JSON",
            description="The documents that attest the slice's ties as CSL-JSON items: archival ones as `manuscript` "
                        "with archive, archive_location and call-number, printed ones as `book` with author, title, "
                        "publisher and issued." + _SLICE)
def export_sources(session: SessionDep, slice_: SliceDep, leave_out: LeftOut) -> Response:
    keys = {k for e in slice_export(session, slice_, leave_out=leave_out).edges for k in e.source_keys}
    items = csl_items(session, keys=keys)
    if leave_out is not None:  # a restricted person's name in a title or as an author
        items = Redactor(leave_out).redact(items)
    return _download(json.dumps(items, indent=2, ensure_ascii=False),
                     "application/vnd.citationstyles.csl+json", "slice-sources.json")


@router.get("/export/workbook.zip", response_class=Response, summary="The whole dataset as a workbook (.zip)",
            description="Every workbook file with keys filled in, as `attesta export` writes them; `attesta import` reads it back.")
def export_workbook_zip(session: SessionDep, leave_out: LeftOut) -> Response:
    import io
    import zipfile

    from app.exchange.snapshot import _workbook_files

    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
        for name, data in _workbook_files(session, leave_out=leave_out).items():
            archive.writestr(f"workbook/{name}", data)
    return _download(buffer.getvalue(), "application/zip", "workbook.zip")


_KEY = Query(..., description="The key of the person at the centre.")
_RADIUS = Query("1", description="1 or 2, as on the ego page.")


@router.get("/export/ego.svg", response_class=Response, summary="An ego drawing as SVG",
            description="The ego drawing of `person` with its legend and a caption naming the slice and the data version." + _SLICE,
            responses={200: {"content": {"image/svg+xml": {}}}})
def export_ego_svg(request: Request, session: SessionDep, slice_: SliceDep, leave_out: LeftOut, person: str = _KEY,
                   radius: str = _RADIUS) -> Response:
    svg, name = ego_svg_text(request, session, slice_, person, radius, leave_out)
    return _download(svg, "image/svg+xml", f"{name}.svg")


@router.get("/export/ego.png", response_class=Response, summary="An ego drawing as PNG",
            description="The same drawing as `/export/ego.svg`, rendered to PNG at twice its size (cairosvg)." + _SLICE,
            responses={200: {"content": {"image/png": {}}}})
def export_ego_png(request: Request, session: SessionDep, slice_: SliceDep, leave_out: LeftOut, person: str = _KEY,
                   radius: str = _RADIUS) -> Response:
    svg, name = ego_svg_text(request, session, slice_, person, radius, leave_out)
    return _download(png_of(svg, label_class=".ego-svg .ego-label"), "image/png", f"{name}.png")


@router.get("/export/two-mode.svg", response_class=Response, summary="The two-mode drawing as SVG",
            description="The drawing of the two-mode page (persons and the groups they belong to) with a caption naming "
                        "the slice and the dataset version." + _SLICE,
            responses={200: {"content": {"image/svg+xml": {}}}})
def export_two_mode_svg(request: Request, session: SessionDep, slice_: SliceDep, leave_out: LeftOut) -> Response:
    return _download(_two_mode_svg(request, session, slice_, leave_out), "image/svg+xml", "two-mode.svg")


@router.get("/export/two-mode.png", response_class=Response, summary="The two-mode drawing as PNG",
            description="The same drawing as `/export/two-mode.svg`, rendered to PNG at twice its size (cairosvg)." + _SLICE,
            responses={200: {"content": {"image/png": {}}}})
def export_two_mode_png(request: Request, session: SessionDep, slice_: SliceDep, leave_out: LeftOut) -> Response:
    svg = _two_mode_svg(request, session, slice_, leave_out)
    return _download(png_of(svg, label_class=".two-mode-svg .tm-label"), "image/png", "two-mode.png")


def _two_mode_svg(request: Request, session: Session, slice_: Slice, leave_out: RestrictedPersons | None) -> str:
    from app.views.twomode import two_mode_download

    return two_mode_download(request, session, slice_, cached_dataset_version(request, session).sha256, leave_out)


def ego_svg_text(request: Request, session: Session, slice_: Slice, person: str, radius: str,
                 leave_out: RestrictedPersons | None = None) -> tuple[str, str]:
    """Return the standalone SVG of an ego drawing, with its caption, and a file name for it."""
    return ego_download(request, session, slice_, person, radius, leave_out)


@router.post("/export/snapshot", response_class=Response, summary="Make a citable snapshot (.zip)",
             description="Answers a .zip with the whole workbook, the slice definition, every measure result stored for "
                         "the slice, a README (dataset name, date, counts, software version) and the content hash. "
                         "Needs the form's CSRF token." + _SLICE,
             responses={200: {"content": {"application/zip": {}}}})
def export_snapshot(request: Request, _: CsrfChecked, actor: CurrentActor, session: SessionDep, slice_: SliceDep,
                    leave_out: LeftOut) -> Response:
    data, cited = snapshot_bytes(session, slice_, dataset_name=request.app.state.settings.dataset_name,
                                 leave_out=leave_out)
    response = _download(data, "application/zip", f"snapshot-{cited.sha256[:12]}.zip")
    response.headers["X-Dataset-Version"] = cited.sha256
    return response
