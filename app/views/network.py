"""The measure pages of a slice: summary, centrality, components, cut points, cliques, communities.

Each page ``/network/X`` has a JSON twin ``/api/network/X`` and gives each of its tables as CSV
(``?format=csv&table=...``), all three from one view-model. Results come from
``app.network.results.get_or_compute``, which stores them with the data version: a result made
before the latest write is shown with "computed at version N, M changes since" and a button
that posts to ``/network/X/recompute``. ``/persons/{key}/measures`` gives one person's value and
rank for every centrality; the person page loads it lazily.
"""

from __future__ import annotations

import inspect
import math
from collections.abc import Callable, Mapping
from typing import Annotated, Any

from fastapi import APIRouter, Depends, HTTPException, Query, Request
from fastapi.responses import HTMLResponse, RedirectResponse, Response
from sqlalchemy.orm import Session

from app.db import Database
from app.names import fold
from app.network.definitions import FAMILIES as PAGE_INFO
from app.network.comembership import mode_conventions, mode_population
from app.network.definitions import MEASURE_INFO
from app.network.measures import DIRECTED_MEASURES, MEASURES
from app.network.measures.cliques import CLIQUE_LIMIT
from app.network.measures.communities import METHODS
from app.network.measures.conventions import population_sentence
from app.network.measures.results import MeasureError
from app.auth import CsrfChecked, ReaderActor, request_visibility
from app.network.jobs import INLINE_UP_TO, Pending, Worker, current_job, needs_worker, outcome_or_job, queue_recompute, slice_size
from app.network.results import CHEAP, SAMPLED, Outcome, get_or_compute_many, peek_outcome
from app.network.measures.summary import small_slice_warning
from app.network.slice import Slice
from app.store.jobs import JobInfo
from app.store.network_labels import get_person_label, list_person_labels_by_key
from app.store.persons import PersonRef
from app.views.charts import degree_chart
from app.views.common import BadParameter, SessionDep, SliceDep, Urls, render, templates, urls_for
from app.views.network_models import (
    BackgroundJob,
    BridgeRow,
    CentralityPage,
    CentralityRow,
    CliqueRow,
    CliquesPage,
    CollectionShare,
    CommunitiesPage,
    CommunityLinkRow,
    CommunityMember,
    CommunityRow,
    ComponentRow,
    ComponentsPage,
    CutPointRow,
    CutPointsPage,
    DegreeCount,
    Freshness,
    MeasureChoice,
    NetworkIndex,
    PageContext,
    PageLink,
    PersonCount,
    PersonMeasureRow,
    PersonMeasures,
    StabilityInfo,
    SummaryPage,
)
from app.views.slicing import slice_controls
from app.views.redaction import redact_for, restricted_for
from app.views.tables import Table, csv_response

__all__ = [
    "BUILDERS",
    "centrality_view",
    "cliques_view",
    "communities_view",
    "components_view",
    "cut_points_view",
    "figure",
    "job_status_view",
    "job_view",
    "network_index",
    "person_measures_view",
    "router",
    "summary_view",
    "tables_of",
]

router = APIRouter(tags=["network"])

VIEWS = ("summary", "centrality", "components", "cut-points", "cliques", "communities")
SORTS = {"rank": "asc", "name": "asc", "value": "desc", "raw": "desc"}
"""Columns of the ranked table that can be sorted, with their first order."""
PAGE_SIZE = 100
"""Rows of a ranked table per page (the CSV download holds them all; ranks are those of the whole table)."""
ROWS_SHOWN = 300
"""Groups (components, cliques) and persons (isolates, per person) listed on a page; the CSV holds all."""
MEMBERS_SHOWN = 60
"""Members listed of each component, clique or community on a page; the CSV holds all."""
MAX_SEED = 2**31 - 1
EMPTY_NOTE = ("No person is in this slice, so there is nothing to measure. The slice keeps no evidence: widen it "
              "(more relation kinds, a longer period, a lower certainty, more archives) with the form above.")
ONE_SEED = ("A partition found with one seed is not a finding: another seed can group some persons differently. "
            "Read a community as meaningful only where the runs agree (high consistency), and check it against "
            "the documents.")


def figure(value: float | None, digits: int = 4) -> str:
    """Return a figure for reading: whole numbers grouped by thousands, others to ``digits`` significant digits.

    Examples
    --------
    >>> figure(47.5), figure(0.52197802), figure(12345.678), figure(6.0), figure(None)
    ('47.5', '0.522', '12\u2009345.7', '6', '—')
    """
    if value is None or not math.isfinite(value):
        return "—"
    if float(value).is_integer() and abs(value) < 1e15:
        return f"{int(value):,}".replace(",", "\u2009")
    if abs(value) >= 1000:
        return f"{value:,.1f}".replace(",", "\u2009")
    return f"{value:.{digits}g}"


templates.filters["figure"] = figure


def database_of(request: Request) -> Database:
    """Return the app's database (the measures store their results in it)."""
    return request.app.state.database


DatabaseDep = Annotated[Database, Depends(database_of)]


# --- building the view-models ---------------------------------------------------------------


def network_index(*, session: Session, slice: Slice) -> NetworkIndex:  # noqa: A002
    """Return the landing page of the measures for ``slice``."""
    pages = [PageLink(view, PAGE_INFO[view].label, PAGE_INFO[view].definition) for view in VIEWS]
    return NetworkIndex(slice=slice, slice_summary=slice.describe(), pages=pages, measures=list(MEASURE_INFO.values()),
                        controls=slice_controls(session=session, slice=slice))  # fmt: skip


def summary_view(
    *, session: Session, database: Database, slice: Slice, recompute: bool = False, worker: Worker | None = None,  # noqa: A002
    requested_by: str = "anonymous", inline_up_to: int = INLINE_UP_TO,
) -> SummaryPage:
    """Return the summary page of ``slice``.

    On a large slice the path lengths are first estimated from sampled persons; the exact ones
    are computed by the background worker and replace the estimate once stored.
    """
    outcome = _outcome(database, "summary", slice, {}, recompute)
    job = None
    if outcome.payload.get("path_sources"):
        outcome, job = _refined(database, worker, "summary", {"exact_paths": True}, slice, outcome, recompute, requested_by,
                                inline_up_to)
    p = outcome.payload
    distribution = _degrees(p["degree_distribution"])
    counted = sum(count for _, count in p["collections"])
    largest = p["largest_component"]
    path_component = (
        f"the largest component, {largest} of {p['persons']} persons (component 1 on the components page)"
        if largest else "no component: the slice holds no person"
    )
    return SummaryPage(
        slice=slice, conventions=p["conventions"], computed_at_version=outcome.computed_at_version,
        persons=p["persons"], ties=p["ties"], loops=p["loops"], attestations=p["attestations"], directed=p["directed"],
        density=p["density"], reciprocity=p["reciprocity"], transitivity=p["transitivity"],
        average_clustering=p["average_clustering"], components=p["components"], largest_component=largest,
        largest_share=p["largest_share"], diameter=p["diameter"], average_path_length=p["average_path_length"],
        path_component=path_component, degree_distribution=distribution,
        in_degree_distribution=_degrees(p["in_degree_distribution"]), out_degree_distribution=_degrees(p["out_degree_distribution"]),
        warnings=p["warnings"], concentration=p.get("concentration"),
        collections=[CollectionShare(name, count, count / counted) for name, count in p["collections"]],
        printed_attestations=p["printed_attestations"],
        context=_context(session, "summary", slice, outcome, [],
                         ["figures", "degrees", *(["in_degrees", "out_degrees"] if p["directed"] else []), "collections"]),
        job=job,
    )  # fmt: skip


def centrality_view(
    *, session: Session, database: Database, slice: Slice, measure: str | None = None, sort: str | None = None,  # noqa: A002
    order: str | None = None, page: str | None = None, exact: str | None = None, recompute: bool = False,
    all_rows: bool = False, worker: Worker | None = None, requested_by: str = "anonymous",
    inline_up_to: int = INLINE_UP_TO, hidden_keys: frozenset[str] = frozenset(),
) -> CentralityPage:
    """Return the ranked table of one centrality on ``slice`` (``all_rows``: every row, for CSV).

    ``hidden_keys`` are persons the viewer may not see by name: sorted by name, they come last (in
    rank order), as on the persons list, so their place says nothing of their names.

    On a large slice an exact path measure is left to the background worker: the page shows the
    sampled estimate meanwhile (betweenness) or only the job's state (the others).
    """
    measure = _measure(measure, slice)
    sort, order = _sort(sort, order)
    wants_exact = _yes_no("exact", exact)
    options = {"exact": True} if wants_exact and measure in SAMPLED else {}
    job: BackgroundJob | None = None
    if recompute and needs_worker(measure, options, slice_size(database, slice, request_visibility()), inline_up_to):
        job = _job_view(queue_recompute(database, worker, measure=measure, options=options, slice=slice,
                                        requested_by=requested_by, visibility=request_visibility()), measure)
        stored = peek_outcome(database, measure=measure, slice=slice, options=options, visibility=request_visibility())
        outcome = stored if stored is not None else _pending_outcome(database, measure, slice)
    elif recompute:
        outcome = _outcome(database, measure, slice, options, recompute)
    else:
        # Stored exact figures replace an estimate: look for them first, so that a process reading
        # them for the first time does not parse the estimate as well.
        exact_first = (peek_outcome(database, measure=measure, slice=slice, options={"exact": True},
                                    visibility=request_visibility()) if not options and measure in SAMPLED else None)
        if exact_first is not None and exact_first.changes_since:
            exact_first = None  # after a write the default result may be newer: as below, estimate first
        found = exact_first or _background(database, worker, measure, options, slice, requested_by, inline_up_to)
        if isinstance(found, Pending) and measure in SAMPLED:  # the estimate meanwhile
            job, outcome = _job_view(found, measure), _outcome(database, measure, slice, {}, False)
        elif isinstance(found, Pending):
            job, outcome = _job_view(found, measure), _pending_outcome(database, measure, slice)
        else:
            outcome = found
        if exact_first is None and not options and measure in SAMPLED and outcome.payload.get("sampling"):
            # An estimate: the exact figures replace it once stored; on a large slice they are queued at once.
            exact_stored = peek_outcome(database, measure=measure, slice=slice, options={"exact": True},
                                        visibility=request_visibility())
            if exact_stored is not None:
                outcome = exact_stored
            elif needs_worker(measure, {"exact": True}, outcome.payload["n"], inline_up_to):
                exact_found = _background(database, worker, measure, {"exact": True}, slice, requested_by, inline_up_to)
                job = _job_view(exact_found, measure) if isinstance(exact_found, Pending) else None
    p = outcome.payload
    payload_rows = p["rows"]
    names: dict[str, PersonRef] = {}
    if sort == "name":
        names = _people(session, [row["key"] for row in payload_rows])
        named = [row for row in payload_rows if row["key"] not in hidden_keys]
        named.sort(key=lambda row: (fold(names[row["key"]].name), row["key"]), reverse=order == "desc")
        payload_rows = named + [row for row in payload_rows if row["key"] in hidden_keys]  # rank order, last
    elif sort != "rank" or order != "asc":
        column = "value" if sort in ("rank", "value") else "raw"
        descending = (order == "desc") != (sort == "rank")
        defined = [row for row in payload_rows if row[column] is not None]
        undefined = [row for row in payload_rows if row[column] is None]
        defined.sort(key=lambda row: row[column], reverse=descending)  # stable: equal values keep rank order
        payload_rows = defined + undefined
    total = len(payload_rows)
    pages = max(1, math.ceil(total / PAGE_SIZE))
    number = 1 if all_rows else _page(page, pages)
    shown = payload_rows if all_rows else payload_rows[(number - 1) * PAGE_SIZE : number * PAGE_SIZE]
    names = names or _people(session, [row["key"] for row in shown])
    rows = [
        CentralityRow(rank=row["rank"], key=row["key"], name=names[row["key"]].name, kind=names[row["key"]].kind,
                      unidentified=names[row["key"]].unidentified, value=row["value"], raw=row["raw"],
                      standard_error=row["standard_error"], reason=row["reason"])
        for row in shown
    ]  # fmt: skip
    sampling = p["sampling"]
    parameters = [("measure", measure)] + _non_default(sort=(sort, "rank"), order=(order, SORTS[sort]),
                                                       exact=("yes" if wants_exact else "no", "no"))
    return CentralityPage(
        measure=measure, slice=slice, conventions=p["conventions"], computed_at_version=outcome.computed_at_version,
        rows=rows, definition=MEASURE_INFO[measure], measures=_choices(slice), sort=sort, order=order, page=number,
        pages=pages, total=total, page_size=PAGE_SIZE, engine=p["engine"], estimate=sampling is not None,
        samples=sampling["samples"] if sampling else None, sampling_statement=sampling["statement"] if sampling else None,
        exact=wants_exact, context=_context(session, "centrality", slice, outcome, parameters, ["ranking"]), job=job,
    )  # fmt: skip


def components_view(*, session: Session, database: Database, slice: Slice, recompute: bool = False,  # noqa: A002
                    all_rows: bool = False) -> ComponentsPage:
    """Return every component of ``slice`` (the first ``ROWS_SHOWN``, with ``MEMBERS_SHOWN`` members each, unless ``all_rows``)."""
    outcome = _outcome(database, "components", slice, {}, recompute)
    p = outcome.payload
    rows, members = (None, None) if all_rows else (ROWS_SHOWN, MEMBERS_SHOWN)
    parts = {"components": p["components"][:rows], "strong": (p["strong"] or [])[:rows]}
    isolates = p["isolates"][:rows]
    people = _people(session, [k for listed in parts.values() for c in listed for k in c["members"][:members]] + isolates)

    def listed(found: list[dict]) -> list[ComponentRow]:
        return [ComponentRow(c["number"], c["size"], c["ties"], [people[k] for k in c["members"][:members]]) for c in found]

    tables = ["components", "strong", "isolates"] if p["strong"] is not None else ["components", "isolates"]
    return ComponentsPage(
        slice=slice, conventions=p["conventions"], computed_at_version=outcome.computed_at_version,
        components=listed(parts["components"]), strong=listed(parts["strong"]) if p["strong"] is not None else None,
        isolates=[people[k] for k in isolates], largest_share=p["largest_share"], component_count=len(p["components"]),
        strong_count=len(p["strong"]) if p["strong"] is not None else None, isolate_count=len(p["isolates"]),
        members_shown=members, rows_shown=rows, context=_context(session, "components", slice, outcome, [], tables),
    )  # fmt: skip


def cut_points_view(*, session: Session, database: Database, slice: Slice, recompute: bool = False) -> CutPointsPage:  # noqa: A002
    """Return the cut points and bridges of ``slice``."""
    outcome = _outcome(database, "cut-points", slice, {}, recompute)
    p = outcome.payload
    people = _people(session, [c["key"] for c in p["cut_points"]] + [k for b in p["bridges"] for k in (b["a"], b["b"])])
    bridges = [
        BridgeRow(a=people[a], b=people[b], sides=sides, weight=row["weight"], documents=row["documents"],
                  attestations=row["attestations"], single_document=row["single_document"], relation_ids=row["relation_ids"])
        for row in p["bridges"] for a, b, sides in [_larger_side_first(row)]
    ]  # fmt: skip
    return CutPointsPage(
        slice=slice, conventions=p["conventions"], computed_at_version=outcome.computed_at_version,
        cut_points=[CutPointRow(people[c["key"]], c["pieces"], c["component_size"], c["cut_off"]) for c in p["cut_points"]],
        bridges=bridges, single_document_bridges=sum(b.single_document for b in bridges),
        context=_context(session, "cut-points", slice, outcome, [], ["cut_points", "bridges"]),
    )  # fmt: skip


def cliques_view(
    *, session: Session, database: Database, slice: Slice, min_size: str | None = None, recompute: bool = False,  # noqa: A002
    all_rows: bool = False,
) -> CliquesPage:
    """Return the maximal cliques of at least ``min_size`` persons (3 by default) of ``slice``.

    The first ``ROWS_SHOWN`` cliques and persons, ``MEMBERS_SHOWN`` members each, unless ``all_rows``.
    """
    size = _whole("min_size", min_size, default=3, low=2, high=1000)
    outcome = _outcome(database, "cliques", slice, {"min_size": size}, recompute)
    p = outcome.payload
    rows, members = (None, None) if all_rows else (ROWS_SHOWN, MEMBERS_SHOWN)
    found, per_person = p["cliques"][:rows], p["per_person"][:rows]
    people = _people(session, [k for c in found for k in c["members"][:members]] + [row["key"] for row in per_person])
    return CliquesPage(
        slice=slice, conventions=p["conventions"], computed_at_version=outcome.computed_at_version,
        min_size=p["min_size"], limit=p["limit"], complete=p["complete"], projection_note=p.get("projection_note"),
        cliques=[CliqueRow(c["number"], len(c["members"]), [people[k] for k in c["members"][:members]]) for c in found],
        per_person=[PersonCount(people[row["key"]], row["cliques"]) for row in per_person],
        clique_count=len(p["cliques"]), per_person_count=len(p["per_person"]), members_shown=members, rows_shown=rows,
        context=_context(session, "cliques", slice, outcome, _non_default(min_size=(str(size), "3")), ["cliques", "per_person"]),
    )  # fmt: skip


def communities_view(
    *, session: Session, database: Database, slice: Slice, method: str | None = None, seed: str | None = None,  # noqa: A002
    recompute: bool = False, all_rows: bool = False, worker: Worker | None = None, requested_by: str = "anonymous",
    inline_up_to: int = INLINE_UP_TO,
) -> CommunitiesPage:
    """Return the communities of ``slice`` found by ``method`` (leiden by default) with ``seed`` (0).

    ``MEMBERS_SHOWN`` members of each and the first ``ROWS_SHOWN`` isolates, unless ``all_rows``. On a
    large slice the partition of the seed is shown at once and the comparison across seeds is left
    to the background worker.
    """
    method = (method or "leiden").strip().lower()
    if method not in METHODS:
        raise BadParameter("method", method, METHODS)
    number = _whole("seed", seed, default=0, low=0, high=MAX_SEED)
    options = {"method": method, "seed": number}
    job = None
    if needs_worker("communities", options, slice_size(database, slice, request_visibility()), inline_up_to):
        # A large slice: one seed's partition at once, its stability across seeds from the background worker.
        # The full result, when stored, is looked for first: no parsing of the one-seed partition too.
        stored = None if recompute else peek_outcome(database, measure="communities", slice=slice, options=options,
                                                     visibility=request_visibility())
        if stored is not None:
            outcome = stored
        else:
            quick = _outcome(database, "communities", slice, {**options, "runs": 1}, recompute)
            outcome, job = _refined(database, worker, "communities", options, slice, quick, recompute, requested_by,
                                    inline_up_to)
    else:
        outcome = _outcome(database, "communities", slice, options, recompute)
    p = outcome.payload
    rows, members = (None, None) if all_rows else (ROWS_SHOWN, MEMBERS_SHOWN)
    isolates = p["isolates"][:rows]
    people = _people(session, [k for c in p["communities"] for k in c["members"][:members]] + isolates)
    consistency = (p["stability"] or {}).get("consistency", {})
    communities = [
        CommunityRow(c["number"], len(c["members"]), c["ties"], c["weight"],
                     [CommunityMember(people[k], consistency.get(k)) for k in c["members"][:members]])
        for c in p["communities"]
    ]  # fmt: skip
    s = p["stability"]
    stability = StabilityInfo(s["seeds"], s["mutual_information"], s["lowest_mutual_information"], s["statement"]) if s else None
    parameters = _non_default(method=(method, "leiden"), seed=(str(number), "0"))
    return CommunitiesPage(
        slice=slice, conventions=p["conventions"], computed_at_version=outcome.computed_at_version, method=method,
        methods=list(METHODS), seed=number, engine=p["engine"], modularity=p["modularity"], communities=communities,
        links=[CommunityLinkRow(**link) for link in p["links"]], isolates=[people[k] for k in isolates],
        isolate_count=len(p["isolates"]), members_shown=members, rows_shown=rows,
        stability=stability, caution=ONE_SEED,
        context=_context(session, "communities", slice, outcome, parameters, ["members", "links", "isolates"]), job=job,
    )  # fmt: skip


def person_measures_view(
    *, session: Session, database: Database, key: str, slice: Slice, worker: Worker | None = None,  # noqa: A002
    requested_by: str = "anonymous", inline_up_to: int = INLINE_UP_TO,
) -> PersonMeasures:
    """Return one person's value and rank for every centrality the slice gives; 404 for an unknown person.

    On a slice of more than ``inline_up_to`` persons only the cheap measures are computed here; the
    others are read from the stored results, or queued for the background worker (their exact
    form) and listed as computing.
    """
    person = get_person_label(session=session, key=key)
    if person is None:
        raise HTTPException(status_code=404, detail=f"There is no person with the key {key}.")
    names = [m for m in MEASURES if _directed(slice) or m not in DIRECTED_MEASURES]
    cheap = [m for m in names if m in CHEAP]
    found = dict(zip(cheap, _outcomes(database, [(m, {}) for m in cheap], slice)))
    n = found[cheap[0]].payload["n"]
    others = [m for m in names if m not in found]
    computing: list[str] = []
    if n <= inline_up_to:
        found.update(zip(others, _outcomes(database, [(m, {}) for m in others], slice)))
    for measure in (m for m in others if m not in found):
        exact = {"exact": True} if measure in SAMPLED else {}
        result = peek_outcome(database, measure=measure, slice=slice, options=exact, visibility=request_visibility())
        if result is None:
            result = _background(database, worker, measure, exact, slice, requested_by, inline_up_to)
        if isinstance(result, Pending):  # meanwhile a stored estimate, if any
            result = peek_outcome(database, measure=measure, slice=slice, options={}, visibility=request_visibility())
        if result is None:
            computing.append(MEASURE_INFO[measure].label)
        else:
            found[measure] = result
    rows: list[PersonMeasureRow] = []
    for measure, outcome in ((m, found[m]) for m in names if m in found):
        row = next((r for r in outcome.payload["rows"] if r["key"] == person.key), None)
        if row is None:
            continue
        rows.append(PersonMeasureRow(
            measure=measure, label=MEASURE_INFO[measure].label, value=row["value"], raw=row["raw"], rank=row["rank"],
            ranked=sum(r["rank"] is not None for r in outcome.payload["rows"]), standard_error=row["standard_error"],
            estimate=outcome.payload["sampling"] is not None, reason=row["reason"],
            computed_at_version=outcome.computed_at_version, changes_since=outcome.changes_since,
        ))  # fmt: skip
    note = None
    if not rows:
        note = (f"{person.name} is not among the persons of this slice (node set: {slice.nodes}), so no measure "
                "ranks them here.")
    elif any(r.changes_since for r in rows):
        note = "Some figures were computed before the latest changes to the data: each measure's page can recompute them."
    return PersonMeasures(key=person.key, name=person.name, slice=slice, slice_summary=slice.describe(),
                          population=mode_population(population_sentence(n, slice.nodes), slice), in_slice=bool(rows),
                          note=note, measures=rows, computing=computing)  # fmt: skip


# --- CSV tables --------------------------------------------------------------------------------


def tables_of(view: Any) -> dict[str, Table]:
    """Return every table of a measure page's view-model, by the name used in ``table=``."""
    if isinstance(view, SummaryPage):
        figures = ["persons", "ties", "loops", "attestations", "density", "reciprocity", "transitivity",
                   "average_clustering", "components", "largest_component", "largest_share", "diameter",
                   "average_path_length", "printed_attestations"]  # fmt: skip
        tables = {"figures": Table(["figure", "value"], [[name, getattr(view, name)] for name in figures]),
                  "degrees": _degree_table("degree", view.degree_distribution)}
        if view.directed:
            tables["in_degrees"] = _degree_table("in_degree", view.in_degree_distribution or [])
            tables["out_degrees"] = _degree_table("out_degree", view.out_degree_distribution or [])
        tables["collections"] = Table(["collection", "attestations", "share"],
                                      [[c.name, c.attestations, c.share] for c in view.collections])
        return tables
    if isinstance(view, CentralityPage):
        return {"ranking": Table(["rank", "key", "name", "value", "raw", "standard_error", "reason"],
                                 [[r.rank, r.key, r.name, r.value, r.raw, r.standard_error, r.reason] for r in view.rows])}
    if isinstance(view, ComponentsPage):
        tables = {"components": _members_table("component", view.components)}
        if view.strong is not None:
            tables["strong"] = _members_table("strong_component", view.strong)
        tables["isolates"] = Table(["key", "name"], [[p.key, p.name] for p in view.isolates])
        return tables
    if isinstance(view, CutPointsPage):
        return {
            "cut_points": Table(["key", "name", "component_size", "cut_off", "pieces"],
                                [[c.person.key, c.person.name, c.component_size, c.cut_off, "|".join(map(str, c.pieces))]
                                 for c in view.cut_points]),
            "bridges": Table(["a_key", "a_name", "b_key", "b_name", "a_side", "b_side", "weight", "documents",
                              "attestations", "single_document"],
                             [[b.a.key, b.a.name, b.b.key, b.b.name, *b.sides, b.weight, b.documents, b.attestations,
                               b.single_document] for b in view.bridges]),
        }  # fmt: skip
    if isinstance(view, CliquesPage):
        return {"cliques": Table(["clique", "size", "key", "name"],
                                 [[c.number, c.size, p.key, p.name] for c in view.cliques for p in c.members]),
                "per_person": Table(["key", "name", "cliques"], [[r.person.key, r.person.name, r.cliques] for r in view.per_person])}
    if isinstance(view, CommunitiesPage):
        return {
            "members": Table(["community", "key", "name", "consistency"],
                             [[c.number, m.person.key, m.person.name, m.consistency] for c in view.communities for m in c.members]),
            "links": Table(["a", "b", "ties", "weight"], [[link.a, link.b, link.ties, link.weight] for link in view.links]),
            "isolates": Table(["key", "name"], [[p.key, p.name] for p in view.isolates]),
        }  # fmt: skip
    raise TypeError(f"no tables in {type(view).__name__}")


def _degree_table(column: str, counts: list[DegreeCount]) -> Table:
    return Table([column, "persons"], [[c.degree, c.persons] for c in counts])


def _members_table(column: str, parts: list[ComponentRow]) -> Table:
    return Table([column, "size", "ties", "key", "name"], [[c.number, c.size, c.ties, p.key, p.name] for c in parts for p in c.members])


# --- helpers -----------------------------------------------------------------------------------


def _outcome(database: Database, measure: str, slice_: Slice, options: dict[str, Any], recompute: bool) -> Outcome:
    return _outcomes(database, [(measure, options)], slice_, recompute)[0]


def _outcomes(database: Database, requests: list[tuple[str, dict[str, Any]]], slice_: Slice, recompute: bool = False) -> list[Outcome]:
    try:
        return get_or_compute_many(database, requests=requests, slice=slice_, recompute=recompute,
                                   visibility=request_visibility())
    except MeasureError as error:
        raise BadParameter(error.parameter, error.value, error.accepted) from error


def _worker_of(request: Request) -> dict[str, Any]:
    """Return the server's background worker, the requester and the inline threshold, for a view."""
    state = request.app.state
    return {"worker": getattr(state, "worker", None), "requested_by": request.client.host if request.client else "anonymous",
            "inline_up_to": getattr(state, "inline_up_to", INLINE_UP_TO)}


def _background(database: Database, worker: Worker | None, measure: str, options: dict[str, Any], slice_: Slice,
                requested_by: str, inline_up_to: int) -> Outcome | Pending:
    try:
        return outcome_or_job(database, worker, measure=measure, options=options, slice=slice_,
                              requested_by=requested_by, inline_up_to=inline_up_to, visibility=request_visibility())
    except MeasureError as error:
        raise BadParameter(error.parameter, error.value, error.accepted) from error


def _larger_side_first(bridge: dict[str, Any]) -> tuple[str, str, list[int]]:
    """Return a bridge's ends and sides with the end on the larger side first (equal sides: as stored)."""
    a_side, b_side = bridge["sides"]
    if b_side > a_side:
        return bridge["b"], bridge["a"], [b_side, a_side]
    return bridge["a"], bridge["b"], [a_side, b_side]


def _refined(database: Database, worker: Worker | None, measure: str, options: dict[str, Any], slice_: Slice,
             quick: Outcome, recompute: bool, requested_by: str, inline_up_to: int) -> tuple[Outcome, BackgroundJob | None]:
    """Return the full result of a large slice if stored (else ``quick``), and the background job that makes it.

    A recompute queues the job again (the quick result was just recomputed); a reload joins the
    job already queued instead of starting the work again.
    """
    if not recompute:
        stored = peek_outcome(database, measure=measure, slice=slice_, options=options, visibility=request_visibility())
        if stored is not None:
            return stored, None
    if not needs_worker(measure, options, quick.payload["n"], inline_up_to):
        return _outcome(database, measure, slice_, options, recompute), None
    if recompute:
        pending = queue_recompute(database, worker, measure=measure, options=options, slice=slice_,
                                  requested_by=requested_by, visibility=request_visibility())
    else:
        found = _background(database, worker, measure, options, slice_, requested_by, inline_up_to)
        if not isinstance(found, Pending):
            return found, None
        pending = found
    return quick, _job_view(pending, measure)


def _pending_outcome(database: Database, measure: str, slice_: Slice) -> Outcome:
    """Return an empty ranking for a measure still computing; n and freshness come from degree (cheap)."""
    degree = _outcome(database, "degree", slice_, {}, False)
    payload = {"n": degree.payload["n"], "directed": degree.payload["directed"], "engine": "igraph",
               "conventions": "The figures are being computed in the background; they appear here when they are ready.",
               "sampling": None, "rows": []}
    return Outcome(measure, payload, degree.computed_at_version, degree.current_version, degree.computed_at, 0.0, False)


def job_view(job: JobInfo | None, measure: str, refused: str | None = None) -> BackgroundJob:
    """Return what a page shows of a background job."""
    if job is None:
        return BackgroundJob(None, "refused", 0.0, measure, refused or "The job could not be queued.", None, None)
    label = (MEASURE_INFO[job.measure].label if job.measure in MEASURE_INFO else
             {"summary": "Exact path lengths", "communities": "Stability across seeds"}.get(job.measure, job.measure))
    message = {
        "queued": f"{label}: waiting for the background worker.",
        "running": f"{label}: computing in the background, {job.progress:.0%} done.",
        "done": f"{label}: ready.",
        "failed": f"{label}: the computation failed.",
    }[job.state]
    return BackgroundJob(job.id, job.state, job.progress, job.measure, message, job.error, Urls().network_job(job.id))


def _job_view(pending: Pending, measure: str) -> BackgroundJob:
    return job_view(pending.job, measure, pending.refused)


def _context(session: Session, view: str, slice_: Slice, outcome: Outcome, parameters: list[tuple[str, str]],
             tables: list[str]) -> PageContext:
    n = outcome.payload["n"]
    return PageContext(
        view=view, title=PAGE_INFO[view].label, definition=PAGE_INFO[view], slice_summary=slice_.describe(),
        population=mode_population(population_sentence(n, slice_.nodes), slice_), n=n,
        empty_note=EMPTY_NOTE if n == 0 else None,
        small_note=(small_slice_warning(n, outcome.payload["ties"])
                    if n and view != "summary" and "ties" in outcome.payload else None),  # the summary lists its own warnings
        collection_note=outcome.payload.get("collection_note"),
        mode_note=mode_conventions(slice_),
        freshness=_freshness(outcome), parameters=parameters, tables=tables, controls=slice_controls(session=session, slice=slice_),
    )  # fmt: skip


def _freshness(outcome: Outcome) -> Freshness:
    changes = outcome.changes_since
    note = None
    if changes:
        note = f"computed at version {outcome.computed_at_version}, {changes} change{'s' if changes != 1 else ''} since"
    return Freshness(
        computed_at_version=outcome.computed_at_version, current_version=outcome.current_version, changes_since=changes,
        stale=changes > 0, computed_at=outcome.computed_at, seconds=outcome.seconds, from_store=outcome.from_store, note=note,
    )  # fmt: skip


def _people(session: Session, keys: list[str]) -> dict[str, PersonRef]:
    """Return a ref for every key; a key no longer in the data (a later merge) stands for its own name."""
    labels = list_person_labels_by_key(session=session, keys=keys)
    return {key: PersonRef(key, labels[key].name, labels[key].kind, labels[key].unidentified) if key in labels
            else PersonRef(key, key, "individual", False) for key in keys}  # fmt: skip


def _degrees(pairs: list[list[int]] | None) -> list[DegreeCount] | None:
    return None if pairs is None else [DegreeCount(degree, persons) for degree, persons in pairs]


def _measure(measure: str | None, slice_: Slice) -> str:
    name = (measure or "degree").strip().lower()
    if name not in MEASURES:
        raise BadParameter("measure", name, list(MEASURES))
    if name in DIRECTED_MEASURES and slice_.mode == "co-membership":
        undirected = [m for m in MEASURES if m not in DIRECTED_MEASURES]
        raise BadParameter("measure", name, f"with mode=co-membership one of {', '.join(undirected)}: ties by shared "
                           "groups have no direction (mode=both keeps the direction of the relations)")
    if name in DIRECTED_MEASURES and slice_.direction != "recorded":
        undirected = [m for m in MEASURES if m not in DIRECTED_MEASURES]
        raise BadParameter("measure", name, f"with direction={slice_.direction} one of {', '.join(undirected)}: "
                           f"{name} counts which way the ties run, and this slice sets the direction aside "
                           "(use direction=recorded)")
    return name


def _choices(slice_: Slice) -> list[MeasureChoice]:
    choices = []
    for name, info in MEASURE_INFO.items():
        available = _directed(slice_) or name not in DIRECTED_MEASURES
        note = None
        if not available:
            note = ("ties by shared groups have no direction" if slice_.mode == "co-membership"
                    else f"needs the direction of ties (direction=recorded); this slice is {slice_.direction}")
        choices.append(MeasureChoice(name, info.label, available, note))
    return choices


def _directed(slice_: Slice) -> bool:
    """True when the slice's graph keeps the direction of ties (co-membership ties have none)."""
    return slice_.direction == "recorded" and slice_.mode != "co-membership"


def _sort(sort: str | None, order: str | None) -> tuple[str, str]:
    column = (sort or "rank").strip().lower()
    if column not in SORTS:
        raise BadParameter("sort", column, list(SORTS))
    direction = (order or SORTS[column]).strip().lower()
    if direction not in ("asc", "desc"):
        raise BadParameter("order", direction, ["asc", "desc"])
    return column, direction


def _page(value: str | None, pages: int) -> int:
    return _whole("page", value, default=1, low=1, high=pages)


def _whole(name: str, value: str | None, *, default: int, low: int, high: int) -> int:
    if value is None or value.strip() == "":
        return default
    try:
        number = int(value.strip())
    except ValueError:
        number = low - 1
    if not low <= number <= high:
        raise BadParameter(name, value, f"a whole number from {low} to {high}")
    return number


def _yes_no(name: str, value: str | None) -> bool:
    text = (value or "no").strip().lower()
    if text not in ("yes", "no"):
        raise BadParameter(name, value, ["yes", "no"])
    return text == "yes"


def _non_default(**values: tuple[str, str]) -> list[tuple[str, str]]:
    return [(name, value) for name, (value, default) in values.items() if value != default]


# --- routes ------------------------------------------------------------------------------------

_FORMAT = Query(None, description="`csv` to download a table of the page (see `table`); absent for the page or JSON.")
_TABLE = Query(None, description="Which table to download as CSV; the page lists them (the first by default).")
_SLICE_NOTE = (" The slice is the same query string as on every network view (`kind`, `from`, `to`, `certainty`, "
               "`nodes`, `direction`, `weight`, ...); a bad value is a 400 naming the parameter.")
_STORED_NOTE = (" Results are stored with the data version they were computed at and shared by every server process; "
                "after a change to the data an expensive result is still shown, with `computed_at_version` and "
                "`context.freshness` saying how many changes it missed, until `POST /network/{view}/recompute` "
                "replaces it; cheap ones are recomputed at once. An empty slice gives an empty result and a sentence.")


def _respond(request: Request, view: Any, *, template: str, partial: str, fmt: str | None, table: str | None,
             filename: str) -> Response:
    """Answer the page, its partial, its JSON twin, or (``format=csv``) one of its tables."""
    if fmt is None or fmt.strip() == "":
        if table:
            raise BadParameter("table", table, "only with format=csv")
        return render(request, view, template=template, partial=partial)
    if fmt.strip().lower() != "csv":
        raise BadParameter("format", fmt, ["csv"])
    tables = tables_of(redact_for(request, view))
    name = table or next(iter(tables))
    if name not in tables:
        raise BadParameter("table", name, list(tables))
    return csv_response(tables[name], f"{filename}-{name}.csv")


@router.get("/network", response_class=HTMLResponse, summary="The measures of a slice (page)",
            description="Links to every measure page for the slice of the query string, with the slice form. "
            "JSON: `/api/network`." + _SLICE_NOTE)  # fmt: skip
def network_page(request: Request, session: SessionDep, slice: SliceDep) -> Response:  # noqa: A002
    return render(request, network_index(session=session, slice=slice), template="network.html", partial="network.html")


@router.get("/api/network", response_model=NetworkIndex, summary="The measures of a slice (JSON)",
            description="The measure pages and the centralities offered, for the slice of the query string. "
            "The page: `/network`." + _SLICE_NOTE)  # fmt: skip
def network_api(request: Request, session: SessionDep, slice: SliceDep) -> Response:  # noqa: A002
    return render(request, network_index(session=session, slice=slice), template="network.html", partial="network.html")


_SUMMARY = ("The slice at a glance: persons, ties and attestations, density, reciprocity (directed slices), "
            "transitivity and average clustering, components and the share of the largest, diameter and average "
            "distance within the largest component, the degree distribution, attestations per collection, and "
            "warnings when the slice is small or most of its evidence comes from one collection. Tables as CSV: "
            "figures, degrees, in_degrees, out_degrees, collections." + _SLICE_NOTE + _STORED_NOTE)


@router.get("/network/summary", response_class=HTMLResponse, summary="The slice at a glance (page)",
            description=_SUMMARY + " The page draws the degree distribution (`/network/summary/degrees.svg`). "
            "JSON: `/api/network/summary`.")  # fmt: skip
def summary_page(request: Request, session: SessionDep, database: DatabaseDep, slice: SliceDep,  # noqa: A002
                 format: str | None = _FORMAT, table: str | None = _TABLE) -> Response:  # noqa: A002
    view = summary_view(session=session, database=database, slice=slice, **_worker_of(request))
    return _respond(request, view, template="network_summary.html", partial="_network_summary.html", fmt=format,
                    table=table, filename="summary")


@router.get("/api/network/summary", response_model=SummaryPage, summary="The slice at a glance (JSON)",
            description=_SUMMARY + " The page: `/network/summary`.")  # fmt: skip
def summary_api(request: Request, session: SessionDep, database: DatabaseDep, slice: SliceDep,  # noqa: A002
                format: str | None = _FORMAT, table: str | None = _TABLE) -> Response:  # noqa: A002
    return summary_page(request, session, database, slice, format, table)


@router.get("/network/summary/degrees.svg", response_class=Response, summary="Degree distribution of the slice (SVG)",
            description="The degree distribution of `/network/summary` drawn as a bar chart: how many persons have "
            "each number of ties (undirected view)." + _SLICE_NOTE,
            responses={200: {"content": {"image/svg+xml": {}}}})  # fmt: skip
def degrees_svg(request: Request, session: SessionDep, database: DatabaseDep, slice: SliceDep) -> Response:  # noqa: A002
    view = summary_view(session=session, database=database, slice=slice)
    svg = degree_chart([(d.degree, d.persons) for d in view.degree_distribution],
                       caption=f"Persons by degree (n = {view.persons})")
    return Response(svg, media_type="image/svg+xml")


_MEASURE = Query(None, description="The centrality: " + ", ".join(MEASURES) + " (degree by default). "
                 + ", ".join(DIRECTED_MEASURES) + " need direction=recorded.")
_SORT = Query(None, description="Column to sort on: rank (default), name, value or raw.")
_ORDER = Query(None, description="asc or desc (rank and name ascending, value and raw descending by default).")
_PAGE = Query(None, description=f"Page of the table, {PAGE_SIZE} rows to a page (the CSV holds every row).")
_EXACT = Query(None, description="yes: exact betweenness even on a slice above 3,000 persons, where it is otherwise "
               "estimated from 300 sampled path sources.")
_CENTRALITY = ("Persons ranked by one centrality, with ranks shared by equal values, the normalized value and the raw "
               "figure, a plain definition and the reference of the measure, and the conventions (node set and n, "
               "normalization, loops, tie rule, direction). Betweenness on a slice above 3,000 persons is an estimate "
               "from sampled path sources, said so with its standard errors, unless `exact=yes`. A directed-only "
               "measure on an undirected slice is a 400 saying why; so is an unknown measure. CSV table: ranking."
               + _SLICE_NOTE + _STORED_NOTE)


@router.get("/network/centrality", response_class=HTMLResponse, summary="Persons ranked by a centrality (page)",
            description=_CENTRALITY + " JSON: `/api/network/centrality`.")  # fmt: skip
def centrality_page(
    request: Request, session: SessionDep, database: DatabaseDep, slice: SliceDep, measure: str | None = _MEASURE,  # noqa: A002
    sort: str | None = _SORT, order: str | None = _ORDER, page: str | None = _PAGE, exact: str | None = _EXACT,
    format: str | None = _FORMAT, table: str | None = _TABLE,  # noqa: A002
) -> Response:
    hidden = restricted_for(request)
    view = centrality_view(session=session, database=database, slice=slice, measure=measure, sort=sort, order=order,
                           page=page, exact=exact, all_rows=bool(format), hidden_keys=hidden.keys if hidden else frozenset(),
                           **_worker_of(request))
    return _respond(request, view, template="network_centrality.html", partial="_network_centrality.html", fmt=format,
                    table=table, filename=view.measure)


@router.get("/api/network/centrality", response_model=CentralityPage, summary="Persons ranked by a centrality (JSON)",
            description=_CENTRALITY + " The page: `/network/centrality`.")  # fmt: skip
def centrality_api(
    request: Request, session: SessionDep, database: DatabaseDep, slice: SliceDep, measure: str | None = _MEASURE,  # noqa: A002
    sort: str | None = _SORT, order: str | None = _ORDER, page: str | None = _PAGE, exact: str | None = _EXACT,
    format: str | None = _FORMAT, table: str | None = _TABLE,  # noqa: A002
) -> Response:
    return centrality_page(request, session, database, slice, measure, sort, order, page, exact, format, table)


_COMPONENTS = ("Every component of the slice with its size, ties and members, largest first, isolates included "
               "(never only the largest); on a directed slice both weakly and strongly connected components. "
               "CSV tables: components, strong, isolates." + _SLICE_NOTE + _STORED_NOTE)


@router.get("/network/components", response_class=HTMLResponse, summary="Components of the slice (page)",
            description=_COMPONENTS + " JSON: `/api/network/components`.")  # fmt: skip
def components_page(request: Request, session: SessionDep, database: DatabaseDep, slice: SliceDep,  # noqa: A002
                    format: str | None = _FORMAT, table: str | None = _TABLE) -> Response:  # noqa: A002
    view = components_view(session=session, database=database, slice=slice, all_rows=bool(format))
    return _respond(request, view, template="network_components.html", partial="_network_components.html", fmt=format,
                    table=table, filename="components")


@router.get("/api/network/components", response_model=ComponentsPage, summary="Components of the slice (JSON)",
            description=_COMPONENTS + " The page: `/network/components`.")  # fmt: skip
def components_api(request: Request, session: SessionDep, database: DatabaseDep, slice: SliceDep,  # noqa: A002
                   format: str | None = _FORMAT, table: str | None = _TABLE) -> Response:  # noqa: A002
    return components_page(request, session, database, slice, format, table)


_CUTS = ("Cut points (persons whose removal splits their component, with the sizes of the pieces) and bridges (ties "
         "whose removal does, each linked to its documents; a bridge attested by a single document is flagged), on "
         "the undirected view. CSV tables: cut_points, bridges." + _SLICE_NOTE + _STORED_NOTE)


@router.get("/network/cut-points", response_class=HTMLResponse, summary="Cut points and bridges (page)",
            description=_CUTS + " JSON: `/api/network/cut-points`.")  # fmt: skip
def cut_points_page(request: Request, session: SessionDep, database: DatabaseDep, slice: SliceDep,  # noqa: A002
                    format: str | None = _FORMAT, table: str | None = _TABLE) -> Response:  # noqa: A002
    view = cut_points_view(session=session, database=database, slice=slice)
    return _respond(request, view, template="network_cut_points.html", partial="_network_cut_points.html", fmt=format,
                    table=table, filename="cut-points")


@router.get("/api/network/cut-points", response_model=CutPointsPage, summary="Cut points and bridges (JSON)",
            description=_CUTS + " The page: `/network/cut-points`.")  # fmt: skip
def cut_points_api(request: Request, session: SessionDep, database: DatabaseDep, slice: SliceDep,  # noqa: A002
                   format: str | None = _FORMAT, table: str | None = _TABLE) -> Response:  # noqa: A002
    return cut_points_page(request, session, database, slice, format, table)


_MIN_SIZE = Query(None, description="The smallest clique listed: a whole number from 2 to 1000 (3 by default).")
_CLIQUES = (f"The maximal cliques (everyone tied to everyone) of at least `min_size` persons, largest first, with "
            f"their members and, per person, how many they are in; at most {CLIQUE_LIMIT:,} cliques are enumerated "
            "and the page says when the cap was reached. CSV tables: cliques, per_person." + _SLICE_NOTE + _STORED_NOTE)


@router.get("/network/cliques", response_class=HTMLResponse, summary="Cliques of the slice (page)",
            description=_CLIQUES + " JSON: `/api/network/cliques`.")  # fmt: skip
def cliques_page(request: Request, session: SessionDep, database: DatabaseDep, slice: SliceDep,  # noqa: A002
                 min_size: str | None = _MIN_SIZE, format: str | None = _FORMAT, table: str | None = _TABLE) -> Response:  # noqa: A002
    view = cliques_view(session=session, database=database, slice=slice, min_size=min_size, all_rows=bool(format))
    return _respond(request, view, template="network_cliques.html", partial="_network_cliques.html", fmt=format,
                    table=table, filename="cliques")


@router.get("/api/network/cliques", response_model=CliquesPage, summary="Cliques of the slice (JSON)",
            description=_CLIQUES + " The page: `/network/cliques`.")  # fmt: skip
def cliques_api(request: Request, session: SessionDep, database: DatabaseDep, slice: SliceDep,  # noqa: A002
                min_size: str | None = _MIN_SIZE, format: str | None = _FORMAT, table: str | None = _TABLE) -> Response:  # noqa: A002
    return cliques_page(request, session, database, slice, min_size, format, table)


_METHOD = Query(None, description="leiden (default) or louvain.")
_SEED = Query(None, description=f"Seed of the partition shown, a whole number from 0 to {MAX_SEED} (0 by default); "
              "the stability compares it with the next nine seeds.")
_COMMUNITIES = ("Communities found by the Leiden or Louvain method with a seed (the same slice and seed give the same "
                "communities): modularity, members, ties between communities, and how stable the partition is across "
                "10 seeds (normalized mutual information, and each person's consistency). CSV tables: members, links, "
                "isolates." + _SLICE_NOTE + _STORED_NOTE)


@router.get("/network/communities", response_class=HTMLResponse, summary="Communities of the slice (page)",
            description=_COMMUNITIES + " JSON: `/api/network/communities`.")  # fmt: skip
def communities_page(
    request: Request, session: SessionDep, database: DatabaseDep, slice: SliceDep, method: str | None = _METHOD,  # noqa: A002
    seed: str | None = _SEED, format: str | None = _FORMAT, table: str | None = _TABLE,  # noqa: A002
) -> Response:
    view = communities_view(session=session, database=database, slice=slice, method=method, seed=seed,
                            all_rows=bool(format), **_worker_of(request))
    return _respond(request, view, template="network_communities.html", partial="_network_communities.html", fmt=format,
                    table=table, filename=f"communities-{view.method}")


@router.get("/api/network/communities", response_model=CommunitiesPage, summary="Communities of the slice (JSON)",
            description=_COMMUNITIES + " The page: `/network/communities`.")  # fmt: skip
def communities_api(
    request: Request, session: SessionDep, database: DatabaseDep, slice: SliceDep, method: str | None = _METHOD,  # noqa: A002
    seed: str | None = _SEED, format: str | None = _FORMAT, table: str | None = _TABLE,  # noqa: A002
) -> Response:
    return communities_page(request, session, database, slice, method, seed, format, table)


BUILDERS: dict[str, tuple[Callable[..., Any], str]] = {
    "summary": (summary_view, "network_summary.html"), "centrality": (centrality_view, "network_centrality.html"),
    "components": (components_view, "network_components.html"), "cut-points": (cut_points_view, "network_cut_points.html"),
    "cliques": (cliques_view, "network_cliques.html"), "communities": (communities_view, "network_communities.html"),
}  # fmt: skip
_RECOMPUTE = ("Recompute the result of a measure page on the current data, replacing the stored one. The query "
              "string is that of the page (slice and the page's own parameters, such as `measure`, `min_size`, "
              "`method`, `seed`). `view` is one of " + ", ".join(VIEWS) + "; another is a 404.")


def _recomputed(request: Request, view: str, session: Session, database: Database, slice_: Slice) -> Any:
    if view not in BUILDERS:
        raise HTTPException(status_code=404, detail=f"There is no measure page {view}; the pages are {', '.join(VIEWS)}.")
    builder = BUILDERS[view][0]
    parameters = set(inspect.signature(builder).parameters)
    background = {"worker", "requested_by", "inline_up_to"}
    accepted = parameters - {"session", "database", "slice", "recompute", "all_rows"} - background
    query: Mapping[str, str] = request.query_params
    options = {name: query.get(name) for name in accepted}
    if background <= parameters:  # a large slice's heavy measure is queued for the worker, not computed here
        options.update(_worker_of(request))
    return builder(session=session, database=database, slice=slice_, recompute=True, **options)


@router.post("/network/{view}/recompute", response_class=RedirectResponse, status_code=303,
             summary="Recompute a measure page", description=_RECOMPUTE + " Answers with a redirect (303) to the page.")  # fmt: skip
def recompute_page(request: Request, view: str, _: CsrfChecked, actor: ReaderActor, session: SessionDep, database: DatabaseDep, slice: SliceDep) -> Response:  # noqa: A002
    page = _recomputed(request, view, session, database, slice)
    extra = dict(page.context.parameters)
    return RedirectResponse(urls_for(request).network(view, slice, **extra), status_code=303)


@router.post("/api/network/{view}/recompute", summary="Recompute a measure page (JSON)",
             description=_RECOMPUTE + " Answers with the page's JSON, freshly computed.")  # fmt: skip
def recompute_api(request: Request, view: str, _: CsrfChecked, actor: ReaderActor, session: SessionDep, database: DatabaseDep, slice: SliceDep) -> Response:  # noqa: A002
    page = _recomputed(request, view, session, database, slice)
    return render(request, page, template=BUILDERS[view][1])


_PERSON_MEASURES = ("One person's value and rank for every centrality the slice gives (the directed ones only on a "
                    "directed slice), out of how many persons are ranked, each from the same stored result as "
                    "`/network/centrality`. A person outside the slice's node set gets a sentence instead. An unknown "
                    "person is a 404." + _SLICE_NOTE)


_JOB = ("The state of a heavy measure computed by the background worker: queued, running (with the share done), "
        "done or failed (with the error). A page waiting for the result polls this every 2 seconds and reloads "
        "itself when the job is done; an unknown job number gives 404.")


def job_status_view(*, database: Database, job_id: int) -> BackgroundJob:
    """Return the state of one background job (HTTPException 404 when unknown); a dead worker's job is failed."""
    job = current_job(database, job_id)
    if job is None:
        raise HTTPException(404, f"There is no background job number {job_id}.")
    return job_view(job, job.measure)


@router.get("/network/jobs/{job_id}", response_class=HTMLResponse, summary="A background job's state (page fragment)",
            description=_JOB + " JSON: `/api/network/jobs/{job_id}`.")
def job_status_page(request: Request, job_id: int, database: DatabaseDep) -> Response:
    view = job_status_view(database=database, job_id=job_id)
    response = render(request, view, template="network_job.html", partial="_network_job.html")
    if view.state == "done" and request.headers.get("HX-Request"):
        response.headers["HX-Refresh"] = "true"  # the waiting page reloads and finds the stored result
    return response


@router.get("/api/network/jobs/{job_id}", response_model=BackgroundJob, summary="A background job's state (JSON)",
            description=_JOB + " The page fragment: `/network/jobs/{job_id}`.")
def job_status_api(request: Request, job_id: int, database: DatabaseDep) -> Response:
    return render(request, job_status_view(database=database, job_id=job_id), template="network_job.html",
                  partial="_network_job.html")


@router.get("/persons/{key}/measures", response_class=HTMLResponse, summary="One person's centralities (page)",
            description=_PERSON_MEASURES + " The person page loads it into itself with htmx (an htmx request gets "
            "only the table). JSON: `/api/persons/{key}/measures`.")  # fmt: skip
def person_measures_page(request: Request, key: str, session: SessionDep, database: DatabaseDep, slice: SliceDep) -> Response:  # noqa: A002
    view = person_measures_view(session=session, database=database, key=key, slice=slice, **_worker_of(request))
    return render(request, view, template="person_measures.html", partial="_person_measures.html")


@router.get("/api/persons/{key}/measures", response_model=PersonMeasures, summary="One person's centralities (JSON)",
            description=_PERSON_MEASURES + " The page: `/persons/{key}/measures`.")  # fmt: skip
def person_measures_api(request: Request, key: str, session: SessionDep, database: DatabaseDep, slice: SliceDep) -> Response:  # noqa: A002
    return person_measures_page(request, key, session, database, slice)
