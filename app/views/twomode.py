"""The two-mode network of a slice (``/network/two-mode``): persons, groups and their memberships,
degree and clustering of each mode, the group-to-group and person-to-person projections, and the
incidence and projected matrices as CSV (``?format=csv&table=...``), all from one view-model."""

from __future__ import annotations

from dataclasses import dataclass

import scipy.sparse as sp
from fastapi import APIRouter, Request
from fastapi.responses import HTMLResponse, Response
from sqlalchemy.orm import Session

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
from app.store.persons import PersonRef, person_refs
from app.views.common import BadParameter, SessionDep, SliceDep, render
from app.views.redaction import redact_for
from app.views.tables import Table, csv_response

__all__ = ["TABLES", "TwoModePage", "two_mode_csv", "two_mode_view", "router"]

router = APIRouter(tags=["network"])

TABLES = ("incidence", "persons", "groups", "group_projection", "person_projection")
TOP_PERSON_PAIRS = 100
"""Person pairs shown on the page (the CSV download holds the whole matrix)."""
MAX_GROUP_PAIRS = 500
"""Group pairs shown on the page."""
WEIGHTING_WORDS = {
    "shared": "the number of groups two persons share (members two groups share)",
    "newman": "Newman's collaboration weighting (Newman 2001): each shared group of n members adds 1/(n − 1), "
              "so a large group ties each pair weakly",
    "jaccard": "overlap (Jaccard): the shared groups (members) divided by the groups (members) of either",
}  # fmt: skip


@dataclass(frozen=True)
class PersonDegree:
    """One person of the two-mode graph."""

    __pydantic_config__ = {"use_attribute_docstrings": True}

    person: PersonRef
    """The person."""
    groups: int
    """Groups the person belongs to in the slice."""
    clustering: float
    """Bipartite clustering (Latapy, Magnien & Del Vecchio 2008, shared / union)."""


@dataclass(frozen=True)
class GroupDegree:
    """One group of the two-mode graph."""

    __pydantic_config__ = {"use_attribute_docstrings": True}

    group: GroupRef
    """The group."""
    members: int
    """Members of the group in the slice."""
    clustering: float
    """Bipartite clustering (Latapy, Magnien & Del Vecchio 2008, shared / union)."""


@dataclass(frozen=True)
class GroupPair:
    """Two groups tied in the group-to-group projection."""

    __pydantic_config__ = {"use_attribute_docstrings": True}

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

    __pydantic_config__ = {"use_attribute_docstrings": True}

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
class TwoModePage:
    """The two-mode network of a slice and its two projections."""

    __pydantic_config__ = {"use_attribute_docstrings": True}

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
    """Persons by number of groups, most first, then by name."""
    group_degrees: list[GroupDegree]
    """Groups by number of members, most first, then by name."""
    group_pairs: list[GroupPair]
    """Pairs of groups with shared members, heaviest first (at most 500)."""
    group_pairs_total: int
    """Pairs of groups with shared members in all."""
    person_pairs: list[PersonPair]
    """The heaviest pairs of the co-membership projection (at most 100)."""
    person_pairs_total: int
    """Pairs of persons sharing a group in all."""


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


def _pairs(projection: Projection) -> list[tuple[int, int, float, int]]:
    """Return (i, j, weight, shared) for every pair i < j of the projection, heaviest first."""
    upper = sp.triu(projection.matrix, k=1).tocoo()
    shared = projection.shared.tocsr()
    rows = [(int(i), int(j), float(w), int(shared[i, j])) for i, j, w in zip(upper.row, upper.col, upper.data)]
    rows.sort(key=lambda r: (-r[2], -r[3], r[0], r[1]))
    return rows


def _evidence(session: Session, slice_: Slice):  # noqa: ANN202
    return membership_evidence(session, resolve_slice(session, slice_))


def two_mode_view(*, session: Session, slice_: Slice, weighting: str | None = None) -> TwoModePage:
    """Return the view-model of the two-mode page; a bad ``weighting`` is a 400."""
    weighting = _weighting(weighting)
    evidence = _evidence(session, slice_)
    summary = two_mode_summary(bipartite_graph(evidence, weight=slice_.weight))
    people = person_refs(session=session, person_ids=summary.person_degree)
    groups = group_refs(session=session, group_ids=summary.group_degree)
    by_name_p = lambda pid: (people[pid].name.casefold(), people[pid].key)  # noqa: E731
    by_name_g = lambda gid: (groups[gid].name.casefold(), groups[gid].key)  # noqa: E731
    person_degrees = [
        PersonDegree(people[p], d, summary.person_clustering[p])
        for p, d in sorted(summary.person_degree.items(), key=lambda item: (-item[1], by_name_p(item[0])))
    ]
    group_degrees = [
        GroupDegree(groups[g], d, summary.group_clustering[g])
        for g, d in sorted(summary.group_degree.items(), key=lambda item: (-item[1], by_name_g(item[0])))
    ]
    members_of: dict[int, set[int]] = {}
    groups_of: dict[int, set[int]] = {}
    for m in evidence:
        members_of.setdefault(m.group, set()).add(m.person)
        groups_of.setdefault(m.person, set()).add(m.group)

    onto_groups = project(evidence, onto="groups", weighting=weighting, overlap=slice_.overlap)
    all_group_pairs = _pairs(onto_groups)
    group_pairs = []
    for i, j, w, s in all_group_pairs[:MAX_GROUP_PAIRS]:
        a, b = sorted((onto_groups.nodes[i], onto_groups.nodes[j]), key=by_name_g)
        shared = sorted(members_of[a] & members_of[b], key=by_name_p)
        group_pairs.append(GroupPair(groups[a], groups[b], w, s, [people[p] for p in shared]))

    onto_persons = project(evidence, onto="persons", weighting=weighting, overlap=slice_.overlap)
    all_person_pairs = _pairs(onto_persons)
    person_pairs = []
    for i, j, w, s in all_person_pairs[:TOP_PERSON_PAIRS]:
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
        person_pairs_total=len(all_person_pairs),
    )  # fmt: skip


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
        page = two_mode_view(session=session, slice_=slice_, weighting=weighting)
        if table == "persons":
            data = Table(["person_key", "person", "groups", "clustering"],
                         [[r.person.key, r.person.name, r.groups, r.clustering] for r in page.person_degrees])  # fmt: skip
        else:
            data = Table(["group_key", "group", "members", "clustering"],
                         [[r.group.key, r.group.name, r.members, r.clustering] for r in page.group_degrees])  # fmt: skip
        return _table_text(data), f"two-mode-{table}.csv"
    evidence = _evidence(session, slice_)
    inc = incidence(evidence)
    people = {p: (r.key, r.name) for p, r in person_refs(session=session, person_ids=inc.persons).items()}
    groups = {g: (r.key, r.name) for g, r in group_refs(session=session, group_ids=inc.groups).items()}
    if table == "incidence":
        text = incidence_csv(inc, person_labels=people, group_labels=groups)
    else:
        onto = "groups" if table == "group_projection" else "persons"
        projection = project(evidence, onto=onto, weighting=weighting, overlap=slice_.overlap)
        text = adjacency_csv(projection, labels=groups if onto == "groups" else people)
    return text, f"two-mode-{table}-{weighting}.csv" if table.endswith("projection") else "two-mode-incidence.csv"


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
    "degree tables or a projected adjacency matrix, rows and columns labelled by key and name."
)


def _respond(request: Request, session: Session, slice_: Slice, weighting: str | None, fmt: str | None,
             table: str | None) -> Response:  # fmt: skip
    if fmt not in (None, "", "csv"):
        raise BadParameter("format", fmt, "csv (or no format, for the page)")
    if fmt == "csv":
        text, name = two_mode_csv(session=session, slice_=slice_, table=table, weighting=weighting)
        text = redact_for(request, text)  # names and keys of restricted persons, cell by cell
        return Response(text, media_type="text/csv; charset=utf-8",
                        headers={"Content-Disposition": f'attachment; filename="{name}"'})  # fmt: skip
    return render(request, two_mode_view(session=session, slice_=slice_, weighting=weighting), template="network_two_mode.html")


@router.get("/network/two-mode", response_class=HTMLResponse, summary="The two-mode network of a slice (page)",
            description=_TWO_MODE + " The same data in JSON: `/api/network/two-mode`.")  # fmt: skip
def two_mode_page(request: Request, session: SessionDep, slice_: SliceDep, weighting: str | None = None,
                  format: str | None = None, table: str | None = None) -> Response:  # noqa: A002  # fmt: skip
    return _respond(request, session, slice_, weighting, format, table)


@router.get("/api/network/two-mode", response_model=TwoModePage, summary="The two-mode network of a slice (JSON)",
            description=_TWO_MODE + " The page with the same data: `/network/two-mode`.")  # fmt: skip
def two_mode_api(request: Request, session: SessionDep, slice_: SliceDep, weighting: str | None = None,
                 format: str | None = None, table: str | None = None) -> Response:  # noqa: A002  # fmt: skip
    return _respond(request, session, slice_, weighting, format, table)
