"""The view-models of the measure pages: one dataclass per page, and the pieces they share.

Every field has a docstring, which the OpenAPI description of the JSON twins shows.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime

from app.documented import DOCUMENTED
from app.network.definitions import Definition
from app.network.slice import Slice
from app.store.persons import PersonRef
from app.views.slicing import SliceControls

__all__ = [
    "BackgroundJob",
    "BridgeRow",
    "CentralityPage",
    "CentralityRow",
    "CliqueRow",
    "CliquesPage",
    "CollectionShare",
    "CommunitiesPage",
    "CommunityLinkRow",
    "CommunityMember",
    "CommunityRow",
    "ComponentRow",
    "ComponentsPage",
    "CutPointRow",
    "CutPointsPage",
    "DegreeCount",
    "Freshness",
    "MeasureChoice",
    "NetworkIndex",
    "PageContext",
    "PageLink",
    "PersonCount",
    "PersonMeasureRow",
    "PersonMeasures",
    "StabilityInfo",
    "SummaryPage",
]


# --- what every measure page holds ------------------------------------------------------------


@dataclass(frozen=True)
class Freshness:
    """When a result was computed, and how many writes the data has seen since."""

    __pydantic_config__ = DOCUMENTED

    computed_at_version: int
    """The data version the result was computed at."""
    current_version: int
    """The data version now."""
    changes_since: int
    """Writes since the result was computed (0: it is current)."""
    stale: bool
    """True when the data changed since; the page then offers to recompute."""
    computed_at: datetime
    """When the result was computed (UTC)."""
    seconds: float
    """How long the computation took, in seconds."""
    from_store: bool
    """True when the result was read from the stored results rather than computed for this request."""
    note: str | None
    """The staleness in words ("computed at version 3, 1 change since"), None when current."""


@dataclass(frozen=True)
class PageContext:
    """What every measure page shows around its results."""

    __pydantic_config__ = DOCUMENTED

    view: str
    """The page's path under /network/ (``centrality``)."""
    title: str
    """The page's heading."""
    definition: Definition
    """What the page measures, in plain words, and its reference."""
    slice_summary: str
    """The slice in one line of plain words."""
    population: str
    """The node set and n, in one sentence."""
    n: int
    """Number of persons in the slice's graph (the n of every normalization)."""
    empty_note: str | None
    """A sentence when the slice holds no person, else None."""
    small_note: str | None
    """A warning when the slice has so few persons or ties that its measures say little (else None)."""
    collection_note: str | None
    """The summary's warning when one collection holds most of the slice's evidence (centrality; else None)."""
    mode_note: str | None
    """Under mode=co-membership or both: what the ties are, how weights combine, which node set (else None)."""
    freshness: Freshness
    """When the result was computed and whether the data changed since."""
    parameters: list[tuple[str, str]]
    """The page's own parameters (besides the slice), kept by its links and forms."""
    tables: list[str]
    """Names of the tables this page gives as CSV (``?format=csv&table=NAME``)."""
    controls: SliceControls
    """The slice form."""


@dataclass(frozen=True)
class PageLink:
    """One measure page offered on the landing page."""

    __pydantic_config__ = DOCUMENTED

    view: str
    """Its path under /network/."""
    label: str
    """Its title."""
    description: str
    """What it shows, in plain words."""


@dataclass(frozen=True)
class NetworkIndex:
    """The landing page of the measures: every measure page, for the current slice."""

    __pydantic_config__ = DOCUMENTED

    slice: Slice
    """The slice the pages will measure."""
    slice_summary: str
    """The slice in one line of plain words."""
    pages: list[PageLink]
    """The measure pages."""
    measures: list[Definition]
    """The centralities offered on the centrality page."""
    controls: SliceControls
    """The slice form."""


# --- summary -----------------------------------------------------------------------------------


@dataclass(frozen=True)
class DegreeCount:
    """How many persons have one degree."""

    __pydantic_config__ = DOCUMENTED

    degree: int
    """The number of ties."""
    persons: int
    """Persons with that many."""


@dataclass(frozen=True)
class CollectionShare:
    """The attestations of the slice's ties that one collection holds."""

    __pydantic_config__ = DOCUMENTED

    name: str
    """The collection's name."""
    attestations: int
    """Its attestations behind the slice's ties."""
    share: float
    """Their share of the attestations held in collections."""


@dataclass(frozen=True)
class SummaryPage:
    """The slice at a glance."""

    __pydantic_config__ = DOCUMENTED

    slice: Slice
    """The slice measured."""
    conventions: str
    """Plain sentences: node set and n, loops, the views used, the component of the path lengths."""
    computed_at_version: int
    """The data version the figures were computed at."""
    persons: int
    """n, the persons of the slice."""
    ties: int
    """Ties between two different persons (arcs on a directed slice)."""
    loops: int
    """Ties of a person with themself, counted apart."""
    attestations: int | None
    """Distinct attestations behind the ties."""
    directed: bool
    """True for a directed slice (direction=recorded)."""
    density: float | None
    """Ties ÷ possible ties (None below two persons)."""
    reciprocity: float | None
    """Share of arcs whose opposite arc exists too (directed slices only)."""
    transitivity: float
    """Share of connected triples that close into triangles."""
    average_clustering: float
    """Mean local clustering over all persons."""
    components: int
    """Number of components, isolates included."""
    largest_component: int
    """Persons in the largest component."""
    largest_share: float | None
    """Their share of all persons."""
    diameter: int | None
    """Longest shortest path in the largest component, in ties."""
    average_path_length: float | None
    """Mean shortest path length in the largest component, in ties."""
    path_component: str
    """Which component the diameter and average distance are those of, in words."""
    degree_distribution: list[DegreeCount]
    """Persons per degree (undirected view), degrees ascending."""
    in_degree_distribution: list[DegreeCount] | None
    """Persons per in-degree (directed slices only)."""
    out_degree_distribution: list[DegreeCount] | None
    """Persons per out-degree (directed slices only)."""
    warnings: list[str]
    """What limits the figures: a small slice, evidence concentrated in one repository or one collection."""
    concentration: str | None
    """The largest repository's and the largest collection's shares of the attestations, and the warning's threshold."""
    collections: list[CollectionShare]
    """Attestations behind the ties per collection, most first."""
    printed_attestations: int
    """Attestations behind the ties from printed sources (outside any collection, not in the shares)."""
    context: PageContext
    """Slice, node set, freshness and the slice form."""
    job: BackgroundJob | None = None
    """The background job computing the exact path lengths of a large slice, while it runs or when it failed."""


# --- centrality --------------------------------------------------------------------------------


@dataclass(frozen=True)
class CentralityRow:
    """One person's line in the ranked table."""

    __pydantic_config__ = DOCUMENTED

    rank: int | None
    """Competition rank (1, 2, 2, 4): equal values share a rank; None for an undefined value."""
    key: str
    """The person's key."""
    name: str
    """The person's display name."""
    kind: str
    """individual or corporate."""
    unidentified: bool
    """True for a person known only by a description."""
    value: float | None
    """The normalized figure (None when undefined; see reason)."""
    raw: float | None
    """The raw figure."""
    standard_error: float | None
    """Standard error of an estimated value (sampled betweenness only)."""
    reason: str | None
    """Why the value is undefined or 0 by convention."""


@dataclass(frozen=True)
class MeasureChoice:
    """One measure in the chooser."""

    __pydantic_config__ = DOCUMENTED

    name: str
    """Its name in URLs."""
    label: str
    """Its name on screen."""
    available: bool
    """False when the slice cannot give it (a directed measure on an undirected slice)."""
    note: str | None
    """Why it is not available."""


@dataclass(frozen=True)
class BackgroundJob:
    """A heavy measure computed by the background worker, as a page shows it while it waits."""

    __pydantic_config__ = DOCUMENTED

    id: int | None
    """The job's number (None when it could not be queued)."""
    state: str
    """queued, running, done, failed, or refused (the requester's queue is full)."""
    progress: float
    """Share done, 0 to 1."""
    measure: str
    """The measure being computed."""
    message: str
    """What is happening, in plain words."""
    error: str | None
    """Why it failed, for a failed job."""
    status_url: str | None
    """Where its status is polled."""


@dataclass(frozen=True)
class CentralityPage:
    """Persons ranked by one centrality."""

    __pydantic_config__ = DOCUMENTED

    measure: str
    """The measure's name in URLs."""
    slice: Slice
    """The slice measured."""
    conventions: str
    """Plain sentences: node set and n, direction, loops, normalization, path ties, library, rank ties."""
    computed_at_version: int
    """The data version the figures were computed at."""
    rows: list[CentralityRow]
    """The rows of this page of the table, in the order asked for."""
    definition: Definition
    """What the measure says, in plain words, and its reference."""
    measures: list[MeasureChoice]
    """Every measure, for the chooser."""
    sort: str
    """The column sorted on: rank, name, value or raw."""
    order: str
    """asc or desc."""
    page: int
    """This page of the table (1 for the first)."""
    pages: int
    """Number of pages."""
    total: int
    """Rows in the whole table (one per person)."""
    page_size: int
    """Rows per page (the CSV download holds every row)."""
    engine: str
    """The library that computed the figures (networkx or igraph)."""
    estimate: bool
    """True when the figures are estimated from sampled path sources."""
    samples: int | None
    """Number of sampled path sources of an estimate."""
    sampling_statement: str | None
    """How the estimate was made and its expected error, in words."""
    exact: bool
    """True when exact figures were asked for (``exact=yes``) on a slice large enough to be sampled."""
    context: PageContext
    """Slice, node set, freshness and the slice form."""
    job: BackgroundJob | None = None
    """The background job computing the exact figures, while it runs or when it failed."""


# --- components, cut points, cliques, communities --------------------------------------------


@dataclass(frozen=True)
class ComponentRow:
    """One component and its members."""

    __pydantic_config__ = DOCUMENTED

    number: int
    """1 for the largest."""
    size: int
    """Persons in it."""
    ties: int
    """Ties among its members."""
    members: list[PersonRef]
    """Its persons."""


@dataclass(frozen=True)
class ComponentsPage:
    """Every component of the slice, largest first, isolates included."""

    __pydantic_config__ = DOCUMENTED

    slice: Slice
    """The slice measured."""
    conventions: str
    """Plain sentences: node set and n, direction, loops, what is listed."""
    computed_at_version: int
    """The data version the components were computed at."""
    components: list[ComponentRow]
    """Connected components (weakly connected on a directed slice), largest first."""
    strong: list[ComponentRow] | None
    """Strongly connected components of a directed slice (every member reaches every other along the arcs)."""
    isolates: list[PersonRef]
    """Persons without a tie to anyone else (the first ``rows_shown``; the CSV holds all)."""
    largest_share: float | None
    """Share of the persons in the largest component."""
    component_count: int
    """Number of components (only the first ``rows_shown`` are listed; the CSV holds all)."""
    strong_count: int | None
    """Number of strongly connected components of a directed slice."""
    isolate_count: int
    """Number of persons without ties."""
    members_shown: int | None
    """At most this many members of each component are listed (None: all, as in the CSV); ``size`` counts them all."""
    rows_shown: int | None
    """At most this many components and isolates are listed (None: all)."""
    context: PageContext
    """Slice, node set, freshness and the slice form."""


@dataclass(frozen=True)
class CutPointRow:
    """A person whose removal splits their component."""

    __pydantic_config__ = DOCUMENTED

    person: PersonRef
    """The person."""
    pieces: list[int]
    """Sizes of the pieces their removal leaves, largest first."""
    component_size: int
    """Size of their component, the person included."""
    cut_off: int
    """Persons separated from the largest remaining piece."""


@dataclass(frozen=True)
class BridgeRow:
    """A tie whose removal splits its component."""

    __pydantic_config__ = DOCUMENTED

    a: PersonRef
    """One end."""
    b: PersonRef
    """The other end."""
    sides: list[int]
    """Persons on a's side and on b's side once the tie is gone; a is the end on the larger side."""
    weight: float
    """The tie's weight in the slice."""
    documents: int | None
    """Distinct documents attesting it."""
    attestations: int | None
    """Its attestations."""
    single_document: bool
    """True when one document alone attests it: one lost or misread document would change the picture."""
    relation_ids: list[int]
    """The relations (one per kind) between the two."""


@dataclass(frozen=True)
class CutPointsPage:
    """Cut points and bridges of the slice."""

    __pydantic_config__ = DOCUMENTED

    slice: Slice
    """The slice measured."""
    conventions: str
    """Plain sentences: node set and n, the view used, orderings, the single-document flag."""
    computed_at_version: int
    """The data version they were computed at."""
    cut_points: list[CutPointRow]
    """Cut points, those that separate most persons first."""
    bridges: list[BridgeRow]
    """Bridges, those that separate most persons first."""
    single_document_bridges: int
    """Bridges attested by a single document."""
    context: PageContext
    """Slice, node set, freshness and the slice form."""


@dataclass(frozen=True)
class CliqueRow:
    """One maximal clique."""

    __pydantic_config__ = DOCUMENTED

    number: int
    """1 for the first listed (a largest one)."""
    size: int
    """Persons in it."""
    members: list[PersonRef]
    """Its persons."""


@dataclass(frozen=True)
class PersonCount:
    """How many listed cliques one person is in."""

    __pydantic_config__ = DOCUMENTED

    person: PersonRef
    """The person."""
    cliques: int
    """The number of listed cliques they belong to."""


@dataclass(frozen=True)
class CliquesPage:
    """The maximal cliques of at least min_size persons."""

    __pydantic_config__ = DOCUMENTED

    slice: Slice
    """The slice measured."""
    conventions: str
    """Plain sentences: node set and n, the view used, the cap."""
    computed_at_version: int
    """The data version they were computed at."""
    min_size: int
    """The smallest clique size listed."""
    limit: int
    """The cap on the number of cliques enumerated."""
    complete: bool
    """False when the cap was reached and more cliques exist."""
    projection_note: str | None
    """On a co-membership graph: why the search is capped lower (a group is a clique by construction)."""
    cliques: list[CliqueRow]
    """The cliques, largest first (the first ``rows_shown``; the CSV holds all)."""
    per_person: list[PersonCount]
    """Persons in at least one listed clique, most cliques first (the first ``rows_shown``)."""
    clique_count: int
    """Number of cliques found."""
    per_person_count: int
    """Number of persons in at least one clique."""
    members_shown: int | None
    """At most this many members of each clique are listed (None: all); ``size`` counts them all."""
    rows_shown: int | None
    """At most this many cliques and persons are listed (None: all, as in the CSV)."""
    context: PageContext
    """Slice, node set, freshness and the slice form."""


@dataclass(frozen=True)
class CommunityMember:
    """A person in a community, with how stably they fall there."""

    __pydantic_config__ = DOCUMENTED

    person: PersonRef
    """The person."""
    consistency: float | None
    """Mean overlap (Jaccard) of their communities in two runs with different seeds: 1, always with the same persons."""


@dataclass(frozen=True)
class CommunityRow:
    """One community."""

    __pydantic_config__ = DOCUMENTED

    number: int
    """1 for the largest."""
    size: int
    """Persons in it."""
    ties: int
    """Ties among its members."""
    weight: float
    """Sum of the weights of those ties."""
    members: list[CommunityMember]
    """Its persons."""


@dataclass(frozen=True)
class CommunityLinkRow:
    """The ties between two communities."""

    __pydantic_config__ = DOCUMENTED

    a: int
    """The first community's number."""
    b: int
    """The second community's number."""
    ties: int
    """Ties between a member of one and a member of the other."""
    weight: float
    """Sum of their weights."""


@dataclass(frozen=True)
class StabilityInfo:
    """How far runs with other seeds agree with each other."""

    __pydantic_config__ = DOCUMENTED

    seeds: list[int]
    """The seeds of the runs compared."""
    mutual_information: float
    """Mean normalized mutual information over all pairs of runs (1: identical partitions)."""
    lowest_mutual_information: float
    """The lowest over all pairs."""
    statement: str
    """The stability in plain words."""


@dataclass(frozen=True)
class CommunitiesPage:
    """Communities of the slice found by one method and seed, and their stability."""

    __pydantic_config__ = DOCUMENTED

    slice: Slice
    """The slice measured."""
    conventions: str
    """Plain sentences: node set and n, the view, method, seed, modularity, stability."""
    computed_at_version: int
    """The data version they were computed at."""
    method: str
    """louvain or leiden."""
    methods: list[str]
    """The methods offered."""
    seed: int
    """The seed of the partition shown."""
    engine: str
    """The library that found the communities."""
    modularity: float | None
    """Modularity of the partition (None without ties)."""
    communities: list[CommunityRow]
    """The communities, largest first."""
    links: list[CommunityLinkRow]
    """Ties between communities, heaviest first."""
    isolates: list[PersonRef]
    """Persons without ties: in no community (the first ``rows_shown``; the CSV holds all)."""
    isolate_count: int
    """Number of persons without ties."""
    members_shown: int | None
    """At most this many members of each community are listed (None: all, as in the CSV); ``size`` counts them all."""
    rows_shown: int | None
    """At most this many isolates are listed (None: all)."""
    stability: StabilityInfo | None
    """Agreement across seeds (None without ties)."""
    caution: str
    """Why one seed's partition is not a finding."""
    context: PageContext
    """Slice, node set, freshness and the slice form."""
    job: BackgroundJob | None = None
    """The background job comparing the seeds of a large slice, while it runs or when it failed."""


# --- one person's measures ------------------------------------------------------------------


@dataclass(frozen=True)
class PersonMeasureRow:
    """One person's figure for one centrality."""

    __pydantic_config__ = DOCUMENTED

    measure: str
    """The measure's name in URLs."""
    label: str
    """The measure's name on screen."""
    value: float | None
    """The normalized figure."""
    raw: float | None
    """The raw figure."""
    rank: int | None
    """The person's rank (ties share one)."""
    ranked: int
    """How many persons have a rank for this measure."""
    standard_error: float | None
    """Standard error of an estimate."""
    estimate: bool
    """True when the figure is estimated from sampled path sources."""
    reason: str | None
    """Why the value is undefined or 0 by convention."""
    computed_at_version: int
    """The data version the figure was computed at."""
    changes_since: int
    """Writes since then (0: current)."""


@dataclass(frozen=True)
class PersonMeasures:
    """One person's value and rank for each centrality in the slice."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The person's key."""
    name: str
    """The person's display name."""
    slice: Slice
    """The slice measured."""
    slice_summary: str
    """The slice in one line of plain words."""
    population: str
    """The node set and n, in one sentence."""
    in_slice: bool
    """False when the person is not among the slice's persons (no figures then)."""
    note: str | None
    """Why there are no figures, or what to know about them."""
    measures: list[PersonMeasureRow]
    """One row per centrality the slice gives."""
    computing: list[str] = field(default_factory=list)
    """Measures of a large slice still being computed in the background (their rows come when they are ready)."""
