"""The two-mode network of a slice (``/network/two-mode``): persons, groups and their memberships,
degree and clustering of each mode, the group-to-group and person-to-person projections, and the
incidence and projected matrices as CSV (``?format=csv&table=...``), all from one view-model."""

from __future__ import annotations

import textwrap
from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from fastapi import APIRouter, Request
from fastapi.responses import HTMLResponse, Response
from sqlalchemy.orm import Session

from app.documented import DOCUMENTED
from app.network.bipartite_drawing import TwoModeDrawing, two_mode_drawing
from app.network.slice import Slice, resolve_slice
from app.network.twomode import (
    WEIGHTINGS,
    Projection,
    adjacency_csv,
    bipartite_graph,
    incidence,
    incidence_csv,
    membership_evidence,
    project,
    two_mode_summary,
)
from app.store.groups import GroupRef, group_refs
from app.store.network_labels import list_person_labels
from app.store.persons import PersonRef
from app.store.privacy import RestrictedPersons
from app.store.summary import get_data_version
from app.views.common import BadParameter, SessionDep, SliceDep, page_number, render, templates, urls_for
from app.views.redaction import Redactor, redact_for
from app.views.slicing import SliceControls, slice_controls
from app.views.tables import Table, csv_response

__all__ = ["PAGED", "TABLES", "TablePage", "TwoModePage", "two_mode_csv", "two_mode_download", "two_mode_view", "router"]

router = APIRouter(tags=["network"])

TABLES = ("incidence", "persons", "groups", "group_projection", "person_projection")
ROWS_PER_PAGE = 100
"""Rows of each long table per page (the CSV downloads hold them all)."""
PAGED = {"person_pairs": "person_pairs_page", "group_pairs": "group_pairs_page", "persons": "persons_page",
         "groups": "groups_page"}  # fmt: skip
"""The paged tables of the page, with the query parameter giving each one's page."""
WEIGHTING_WORDS = {
    "shared": "the number of groups two persons share (members two groups share)",
    "newman": "Newman's collaboration weighting (Newman 2001): each shared group of n members adds 1/(n − 1), "
              "so a large group ties each pair weakly",
    "jaccard": "overlap (Jaccard): the shared groups (members) divided by the groups (members) of either",
}  # fmt: skip


@dataclass(frozen=True)
class PersonDegree:
    """One person of the two-mode graph."""

    __pydantic_config__ = DOCUMENTED

    person: PersonRef
    """The person."""
    groups: int
    """Groups the person belongs to in the slice."""
    clustering: float
    """Bipartite clustering (Latapy, Magnien & Del Vecchio 2008, shared / union)."""


@dataclass(frozen=True)
class GroupDegree:
    """One group of the two-mode graph."""

    __pydantic_config__ = DOCUMENTED

    group: GroupRef
    """The group."""
    members: int
    """Members of the group in the slice."""
    clustering: float
    """Bipartite clustering (Latapy, Magnien & Del Vecchio 2008, shared / union)."""


@dataclass(frozen=True)
class GroupPair:
    """Two groups tied in the group-to-group projection."""

    __pydantic_config__ = DOCUMENTED

    a: GroupRef
    """The first group (by name)."""
    b: GroupRef
    """The second group."""
    weight: float
    """The weight of the tie under the page's weighting."""
    shared: int
    """Members the two share (under ``overlap=required`` only those whose terms overlap)."""
    members: list[PersonRef]
    """Those members, by name."""


@dataclass(frozen=True)
class PersonPair:
    """Two persons tied in the person-to-person (co-membership) projection."""

    __pydantic_config__ = DOCUMENTED

    a: PersonRef
    """The first person (by name)."""
    b: PersonRef
    """The second person."""
    weight: float
    """The weight of the tie under the page's weighting."""
    shared: int
    """Groups the two share (under ``overlap=required`` only those where their terms overlap)."""
    groups: list[GroupRef]
    """Every group both belong to in the slice, by name (the ties page says which overlap in time)."""


@dataclass(frozen=True)
class TablePage:
    """Which page of a long table is shown."""

    __pydantic_config__ = DOCUMENTED

    parameter: str
    """The query parameter of its page number."""
    page: int
    """The page shown (from 1)."""
    pages: int
    """Pages in all (at least 1)."""
    total: int
    """Rows in all."""
    first: int
    """Number of the first row shown (from 1; 0 when there is none)."""
    last: int
    """Number of the last row shown."""


@dataclass(frozen=True)
class TwoModePage:
    """The two-mode network of a slice and its two projections."""

    __pydantic_config__ = DOCUMENTED

    slice: Slice
    """The slice of the query string."""
    slice_summary: str
    """The slice in plain words."""
    weighting: str
    """Weighting of both projections: shared, newman or jaccard."""
    weightings: list[str]
    """The weightings offered."""
    conventions: str
    """Node sets, density, clustering, weighting, overlap rule and term source, in words."""
    persons: int
    """Persons with at least one membership in the slice."""
    groups: int
    """Groups with at least one member in the slice."""
    memberships: int
    """Person-group ties (several roles in one group count once)."""
    density: float | None
    """Memberships divided by persons × groups; None when a mode is empty."""
    mean_person_degree: float | None
    """Mean number of groups per person."""
    mean_group_degree: float | None
    """Mean number of members per group."""
    mean_person_clustering: float | None
    """Mean bipartite clustering of the persons."""
    mean_group_clustering: float | None
    """Mean bipartite clustering of the groups."""
    person_degrees: list[PersonDegree]
    """Persons by number of groups, most first, then by name (one page of 100)."""
    group_degrees: list[GroupDegree]
    """Groups by number of members, most first, then by name (one page of 100)."""
    group_pairs: list[GroupPair]
    """Pairs of groups with shared members, heaviest first (one page of 100)."""
    group_pairs_total: int
    """Pairs of groups with shared members in all."""
    person_pairs: list[PersonPair]
    """Pairs of the co-membership projection, heaviest first (one page of 100)."""
    person_pairs_total: int
    """Pairs of persons sharing a group in all."""
    paging: dict[str, TablePage]
    """The page shown of each long table: person_pairs, group_pairs, persons, groups."""
    page_parameters: list[tuple[str, str]]
    """The page numbers other than 1, as query parameters, kept by the links of the page."""
    drawing: TwoModeDrawing
    """Persons and groups drawn in two columns, memberships between (capped on large data)."""
    controls: SliceControls
    """The slice form shared by the network pages."""


def _weighting(value: str | None) -> str:
    weighting = value or "shared"
    if weighting not in WEIGHTINGS:
        raise BadParameter("weighting", value, WEIGHTINGS)
    return weighting


def _conventions(slice_: Slice, weighting: str) -> str:
    overlap = (
        "only memberships whose terms overlap in time tie two persons (or link two groups through a member); "
        "an undated membership overlaps nothing"
        if slice_.overlap == "required" else "every shared group counts, whenever the memberships were held"
    )  # fmt: skip
    size = f"groups of more than {slice_.max_group_size} members in the slice are left out; " if slice_.max_group_size else ""
    return (
        "Persons: everyone with a membership the slice keeps; groups: every group with such a member (relation "
        "kinds and min_collections do not apply to memberships). Density is memberships over persons × groups. "
        "Clustering is the bipartite clustering of Latapy, Magnien & Del Vecchio (2008): the mean overlap "
        "(shared / union) of a node's neighbourhood with those of the nodes of its own mode two steps away. "
        f"Projections are weighted by {WEIGHTING_WORDS[weighting]}; overlap={slice_.overlap}: {overlap}; {size}"
        "a membership's term is its recorded start and end where given, otherwise the span of the dates of its "
        "kept attestations."
    )


def _pairs(projection: Projection) -> _Pairs:
    """Return (i, j, weight, shared) for every pair i < j of the projection, heaviest first (sorted in numpy)."""
    return _Pairs(projection)


class _Pairs:
    """The pairs of a projection sorted heaviest first, as arrays; slicing gives (i, j, weight, shared) rows."""

    def __init__(self, projection: Projection):
        upper = sp.triu(projection.matrix, k=1, format="csr")
        counted = sp.triu(projection.shared, k=1, format="csr")
        upper.sort_indices()
        counted.sort_indices()
        if not (np.array_equal(upper.indptr, counted.indptr) and np.array_equal(upper.indices, counted.indices)):
            raise AssertionError("the weights and the shared counts are not on the same pairs")
        coo = upper.tocoo()
        order = np.lexsort((coo.col, coo.row, -counted.data, -coo.data))
        self.i, self.j = coo.row[order], coo.col[order]
        self.w, self.s = coo.data[order], counted.data[order]

    def __len__(self) -> int:
        return len(self.w)

    def __getitem__(self, part: slice) -> list[tuple[int, int, float, int]]:
        return list(zip(self.i[part].tolist(), self.j[part].tolist(), self.w[part].tolist(), self.s[part].tolist()))


def _evidence(session: Session, slice_: Slice):  # noqa: ANN202
    return membership_evidence(session, resolve_slice(session, slice_))


def _page_of(parameter: str, value: str | None, total: int, size: int) -> TablePage:
    pages = max(1, -(-total // size))
    page = page_number(value)
    if page > pages:
        raise BadParameter(parameter, value, f"a page from 1 to {pages}")
    first = (page - 1) * size
    return TablePage(parameter, page, pages, total, first + 1 if total else 0, min(first + size, total))


def _shown(rows: list, paging: TablePage) -> list:
    return rows[paging.first - 1 : paging.last] if paging.total else []


def two_mode_view(
    *, session: Session, slice_: Slice, weighting: str | None = None, pages: dict[str, str | None] | None = None,
    all_rows: bool = False,
) -> TwoModePage:
    """Return the view-model of the two-mode page; a bad ``weighting`` or page number is a 400.

    ``pages`` gives the page of each long table by its query parameter (``persons_page``, ...);
    ``all_rows`` puts every row on one page (for the CSV downloads).
    """
    weighting = _weighting(weighting or slice_.weighting)
    pages = {} if all_rows else (pages or {})

    def _paging(parameter: str, value: str | None, total: int) -> TablePage:
        return _page_of(parameter, value, total, max(total, 1) if all_rows else ROWS_PER_PAGE)
    evidence = _evidence(session, slice_)
    summary = two_mode_summary(bipartite_graph(evidence, weight=slice_.weight))
    people = _person_refs(session, summary.person_degree)
    groups = group_refs(session=session, group_ids=summary.group_degree)
    by_name_p = lambda pid: (people[pid].name.casefold(), people[pid].key)  # noqa: E731
    by_name_g = lambda gid: (groups[gid].name.casefold(), groups[gid].key)  # noqa: E731
    paging: dict[str, TablePage] = {}
    persons_sorted = sorted(summary.person_degree.items(), key=lambda item: (-item[1], by_name_p(item[0])))
    paging["persons"] = _paging(PAGED["persons"], pages.get(PAGED["persons"]), len(persons_sorted))
    person_degrees = [PersonDegree(people[p], d, summary.person_clustering[p]) for p, d in _shown(persons_sorted, paging["persons"])]
    groups_sorted = sorted(summary.group_degree.items(), key=lambda item: (-item[1], by_name_g(item[0])))
    paging["groups"] = _paging(PAGED["groups"], pages.get(PAGED["groups"]), len(groups_sorted))
    group_degrees = [GroupDegree(groups[g], d, summary.group_clustering[g]) for g, d in _shown(groups_sorted, paging["groups"])]
    members_of: dict[int, set[int]] = {}
    groups_of: dict[int, set[int]] = {}
    for m in evidence:
        members_of.setdefault(m.group, set()).add(m.person)
        groups_of.setdefault(m.person, set()).add(m.group)

    onto_groups = project(evidence, onto="groups", weighting=weighting, overlap=slice_.overlap)
    all_group_pairs = _pairs(onto_groups)
    paging["group_pairs"] = _paging(PAGED["group_pairs"], pages.get(PAGED["group_pairs"]), len(all_group_pairs))
    group_pairs = []
    for i, j, w, s in _shown(all_group_pairs, paging["group_pairs"]):
        a, b = sorted((onto_groups.nodes[i], onto_groups.nodes[j]), key=by_name_g)
        shared = sorted(members_of[a] & members_of[b], key=by_name_p)
        group_pairs.append(GroupPair(groups[a], groups[b], w, s, [people[p] for p in shared]))

    onto_persons = project(evidence, onto="persons", weighting=weighting, overlap=slice_.overlap)
    all_person_pairs = _pairs(onto_persons)
    paging["person_pairs"] = _paging(PAGED["person_pairs"], pages.get(PAGED["person_pairs"]), len(all_person_pairs))
    person_pairs = []
    for i, j, w, s in _shown(all_person_pairs, paging["person_pairs"]):
        a, b = sorted((onto_persons.nodes[i], onto_persons.nodes[j]), key=by_name_p)
        shared = sorted(groups_of[a] & groups_of[b], key=by_name_g)
        person_pairs.append(PersonPair(people[a], people[b], w, s, [groups[g] for g in shared]))

    return TwoModePage(
        slice=slice_, slice_summary=slice_.describe(), weighting=weighting, weightings=list(WEIGHTINGS),
        conventions=_conventions(slice_, weighting), persons=summary.persons, groups=summary.groups,
        memberships=summary.memberships, density=summary.density, mean_person_degree=summary.mean_person_degree,
        mean_group_degree=summary.mean_group_degree, mean_person_clustering=summary.mean_person_clustering,
        mean_group_clustering=summary.mean_group_clustering, person_degrees=person_degrees, group_degrees=group_degrees,
        group_pairs=group_pairs, group_pairs_total=len(all_group_pairs), person_pairs=person_pairs,
        person_pairs_total=len(all_person_pairs), paging=paging,
        page_parameters=[(t.parameter, str(t.page)) for t in paging.values() if t.page != 1],
        drawing=two_mode_drawing(evidence, persons=people, groups=groups),
        controls=slice_controls(session=session, slice=slice_),
    )  # fmt: skip


def _person_refs(session: Session, person_ids: Iterable[int]) -> dict[int, PersonRef]:
    """Refs of the persons, persons of one name told apart by life dates or key (as in the measure tables)."""
    labels = list_person_labels(session=session, ids=list(person_ids))
    return {pid: PersonRef(key=label.key, name=label.name, kind=label.kind, unidentified=label.unidentified)
            for pid, label in labels.items()}


def two_mode_csv(*, session: Session, slice_: Slice, table: str | None, weighting: str | None = None) -> tuple[str, str]:
    """Return (CSV text, file name) of one table of the two-mode page; a bad ``table`` or ``weighting`` is a 400.

    ``incidence`` is the person-by-group matrix (1 or 0); ``group_projection`` and
    ``person_projection`` the projected adjacency matrices under the weighting and overlap rule;
    ``persons`` and ``groups`` the degree tables. Rows and columns are labelled "key (name)".
    """
    if table not in TABLES:
        raise BadParameter("table", table, TABLES)
    weighting = _weighting(weighting)
    if table in ("persons", "groups"):
        page = two_mode_view(session=session, slice_=slice_, weighting=weighting, all_rows=True)
        if table == "persons":
            data = Table(["person_key", "person", "groups", "clustering"],
                         [[r.person.key, r.person.name, r.groups, r.clustering] for r in page.person_degrees])  # fmt: skip
        else:
            data = Table(["group_key", "group", "members", "clustering"],
                         [[r.group.key, r.group.name, r.members, r.clustering] for r in page.group_degrees])  # fmt: skip
        return _table_text(data), f"two-mode-{table}.csv"
    evidence = _evidence(session, slice_)
    inc = incidence(evidence)
    people = {p: (r.key, r.name) for p, r in _person_refs(session, inc.persons).items()}
    groups = {g: (r.key, r.name) for g, r in group_refs(session=session, group_ids=inc.groups).items()}
    if table == "incidence":
        text = incidence_csv(inc, person_labels=people, group_labels=groups)
    else:
        onto = "groups" if table == "group_projection" else "persons"
        projection = project(evidence, onto=onto, weighting=weighting, overlap=slice_.overlap)
        text = adjacency_csv(projection, labels=groups if onto == "groups" else people)
    return text, f"two-mode-{table}-{weighting}.csv" if table.endswith("projection") else "two-mode-incidence.csv"


def two_mode_download(request: Request, session: Session, slice_: Slice, cited: str,
                      leave_out: RestrictedPersons | None = None) -> str:
    """Return the two-mode drawing of the page as a standalone SVG, with a caption naming the slice and the dataset
    version ``cited`` (its first 16 hex digits, as the ego drawings give it) and the data version.

    Restricted persons are redacted as on the page; with ``leave_out`` (the export files' rule) they read
    "restricted person" for every role.
    """
    evidence = _evidence(session, slice_)
    summary = two_mode_summary(bipartite_graph(evidence, weight=slice_.weight))
    people = _person_refs(session, summary.person_degree)
    groups = group_refs(session=session, group_ids=summary.group_degree)
    drawing = redact_for(request, two_mode_drawing(evidence, persons=people, groups=groups))
    if leave_out is not None:
        drawing = Redactor(leave_out).redact(drawing)
    notes = " ".join(drawing.notes)
    caption = (f"Persons (left) and the groups they belong to (right): {summary.persons} persons, {summary.groups} "
               f"groups, {summary.memberships} memberships. {notes + ' ' if notes else ''}Slice: {slice_.describe()}. "
               f"Attesta, dataset version {cited[:16]} (data version {get_data_version(session=session)}).")
    return templates.get_template("two_mode_download.svg").render(
        drawing=drawing, slice=slice_, urls=urls_for(request), caption_lines=textwrap.wrap(caption, 110))


def _table_text(table: Table) -> str:
    return csv_response(table, "t.csv").body.decode("utf-8")


# --- routes -----------------------------------------------------------------------------------

_TWO_MODE = (
    "The two-mode (bipartite) network of the slice: persons joined to the groups they belong to by the "
    "memberships the slice keeps. Gives the number of persons, groups and memberships, the density "
    "(memberships over persons × groups), the degree of each mode (persons by number of groups, groups by "
    "number of members) with their bipartite clustering (Latapy, Magnien & Del Vecchio 2008), the "
    "group-to-group projection (pairs of groups with shared members) and the heaviest pairs of the "
    "person-to-person co-membership projection, each linked to the ties page that shows the shared groups. "
    "`weighting=shared|newman|jaccard` weights both projections (shared count; Newman 2001; Jaccard overlap). "
    "Slice parameters choose the memberships (`from`, `to`, `dates`, `undated`, `certainty`, `evidence`, "
    "archives, `unidentified`), `overlap=any|required` says whether shared groups count only where the terms "
    "overlap in time, and `max_group_size=N` leaves out groups of more than N members. `format=csv` with "
    "`table=incidence|persons|groups|group_projection|person_projection` downloads the incidence matrix, the "
    "degree tables or a projected adjacency matrix, rows and columns labelled by key and name. The long tables "
    "show 100 rows a page: `person_pairs_page`, `group_pairs_page`, `persons_page` and `groups_page` choose the "
    "page of each. A drawing puts persons in one column and groups in the other, memberships between (at most "
    "40 groups, those with most members, and 120 persons, those in most of them; the page says what is left out)."
)


def _respond(request: Request, session: Session, slice_: Slice, weighting: str | None, fmt: str | None,
             table: str | None, pages: dict[str, str | None]) -> Response:  # fmt: skip
    if fmt not in (None, "", "csv"):
        raise BadParameter("format", fmt, "csv (or no format, for the page)")
    if fmt == "csv":
        text, name = two_mode_csv(session=session, slice_=slice_, table=table, weighting=weighting)
        text = redact_for(request, text)  # names and keys of restricted persons, cell by cell
        return Response(text, media_type="text/csv; charset=utf-8",
                        headers={"Content-Disposition": f'attachment; filename="{name}"'})  # fmt: skip
    return render(request, two_mode_view(session=session, slice_=slice_, weighting=weighting, pages=pages),
                  template="network_two_mode.html")


@router.get("/network/two-mode", response_class=HTMLResponse, summary="The two-mode network of a slice (page)",
            description=_TWO_MODE + " The same data in JSON: `/api/network/two-mode`.")  # fmt: skip
def two_mode_page(request: Request, session: SessionDep, slice_: SliceDep, weighting: str | None = None,
                  format: str | None = None, table: str | None = None, person_pairs_page: str | None = None,
                  group_pairs_page: str | None = None, persons_page: str | None = None,
                  groups_page: str | None = None) -> Response:  # noqa: A002  # fmt: skip
    return _respond(request, session, slice_, weighting, format, table, _pages(locals()))


@router.get("/api/network/two-mode", response_model=TwoModePage, summary="The two-mode network of a slice (JSON)",
            description=_TWO_MODE + " The page with the same data: `/network/two-mode`.")  # fmt: skip
def two_mode_api(request: Request, session: SessionDep, slice_: SliceDep, weighting: str | None = None,
                 format: str | None = None, table: str | None = None, person_pairs_page: str | None = None,
                 group_pairs_page: str | None = None, persons_page: str | None = None,
                 groups_page: str | None = None) -> Response:  # noqa: A002  # fmt: skip
    return _respond(request, session, slice_, weighting, format, table, _pages(locals()))


def _pages(given: dict) -> dict[str, str | None]:
    return {parameter: given[parameter] for parameter in PAGED.values()}
