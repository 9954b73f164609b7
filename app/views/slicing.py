"""The slice controls shared by every network view: what ``_slice_form.html`` shows and ticks.

The form is a plain GET form over the slice parameters of the query string, so it works
without JavaScript and its result is a link that can be shared or cited.
"""

from __future__ import annotations

from dataclasses import dataclass

from sqlalchemy.orm import Session

from app.documented import DOCUMENTED
from app.models import EVIDENCE_KINDS
from app.network.slice import Slice
from app.store.network_labels import list_archives, list_relation_kinds

__all__ = ["ArchiveChoice", "Choice", "KindChoice", "SliceControls", "slice_controls"]

# Plain words for each value of the one-choice parameters; the order is the order shown.
OPTION_LABELS: dict[str, dict[str, str]] = {
    "dates": {"overlap": "overlaps the period", "inside": "lies wholly inside the period"},
    "undated": {"keep": "kept", "drop": "left out"},
    "certainty": {"certain": "certain only", "probable": "certain and probable", "possible": "every grade"},
    "unidentified": {"keep": "kept", "drop": "left out"},
    "nodes": {"evidence": "everyone with evidence in the slice", "ties": "only persons with a tie",
              "all": "every person in the dataset"},
    "loops": {"drop": "left out of measures", "keep": "counted in measures"},
    "direction": {"recorded": "as recorded", "undirected": "ignored (both ways merged)",
                  "reciprocal": "only ties attested both ways"},
    "weight": {"documents": "distinct documents", "attestations": "attestations", "none": "none (every tie counts 1)"},
    "mode": {"relations": "relations only", "co-membership": "shared groups only (co-membership)",
             "both": "relations and shared groups"},
    "overlap": {"any": "whenever the memberships were held", "required": "only where the terms overlap in time"},
    "weighting": {"shared": "number of shared groups", "newman": "Newman (a large group ties each pair weakly)",
                  "jaccard": "overlap (Jaccard)"},
}  # fmt: skip
GROUPS = {
    "kinds": ("kind",),
    "period": ("from", "to", "dates", "undated"),
    "evidence": ("certainty", "evidence", "unidentified"),
    "archives": ("keep_collection", "omit_collection", "keep_repository", "omit_repository", "min_collections"),
    "graph": ("nodes", "loops", "direction", "weight"),
    "groups": ("mode", "overlap", "weighting", "max_group_size"),
}
SHOWN = {name for names in GROUPS.values() for name in names}


@dataclass(frozen=True)
class Choice:
    """One value of a slice parameter, as a radio button or a checkbox."""

    __pydantic_config__ = DOCUMENTED

    value: str
    """The value sent in the query string."""
    label: str
    """What the control says."""
    checked: bool
    """True when the current slice has this value."""


@dataclass(frozen=True)
class KindChoice:
    """One relation kind in the tree of kinds."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The kind's key (the value of `kind=`)."""
    label: str
    """The kind's label."""
    directed: bool
    """True for a kind with a direction."""
    depth: int
    """0 for a top kind, 1 for its sub-kinds, and so on."""
    checked: bool
    """True when the slice names this kind."""
    implied: bool
    """True when the slice names a parent of this kind, which selects it too."""


@dataclass(frozen=True)
class ArchiveChoice:
    """One repository or collection, which the slice may keep alone or leave out."""

    __pydantic_config__ = DOCUMENTED

    level: str
    """repository or collection."""
    key: str
    """Its key."""
    name: str
    """Its name."""
    keep: bool
    """True when the slice keeps only this one (with the others it keeps)."""
    omit: bool
    """True when the slice leaves it out."""


@dataclass(frozen=True)
class SliceControls:
    """The slice form: every choice with what the current slice has chosen."""

    __pydantic_config__ = DOCUMENTED

    summary: str
    """The slice in one line of plain words."""
    is_default: bool
    """True when nothing is filtered beyond the defaults (every kind, every date, no drafts)."""
    kinds: list[KindChoice]
    """Relation kinds as a tree, parents before their sub-kinds."""
    period_from: str
    """Start of the period as given (a year or an EDTF date), or ""."""
    period_to: str
    """End of the period as given, or ""."""
    min_collections: int
    """Ties must be attested in at least this many collections."""
    max_group_size: int | None
    """Groups with more members than this are left out of ties by shared groups (None: none is)."""
    evidence: list[Choice]
    """Kinds of witness, ticked when kept."""
    options: dict[str, list[Choice]]
    """The one-choice parameters (dates, undated, certainty, unidentified, nodes, loops, direction, weight,
    mode, overlap, weighting)."""
    archives: list[ArchiveChoice]
    """Repositories, each followed by its collections."""
    open_groups: list[str]
    """Groups of the form that hold a value other than the default, shown open."""
    hidden: list[tuple[str, str]]
    """Slice parameters the form has no control for (they are kept as they are)."""


def slice_controls(*, session: Session, slice: Slice) -> SliceControls:  # noqa: A002 - the word of the domain
    """Return the view-model of the slice form for the current ``slice``."""
    kinds = list_relation_kinds(session=session)
    children: dict[str | None, list] = {}
    for kind in kinds:
        children.setdefault(kind.parent_key, []).append(kind)
    chosen = set(slice.kind)
    tree: list[KindChoice] = []

    def walk(parent: str | None, depth: int, implied: bool) -> None:
        for kind in children.get(parent, []):
            tree.append(KindChoice(key=kind.key, label=kind.label, directed=kind.directed, depth=depth,
                                   checked=kind.key in chosen, implied=implied))  # fmt: skip
            walk(kind.key, depth + 1, implied or kind.key in chosen)

    walk(None, 0, False)
    archives: list[ArchiveChoice] = []
    for repository in list_archives(session=session):
        archives.append(ArchiveChoice("repository", repository.key, repository.name,
                                      repository.key in slice.keep_repository, repository.key in slice.omit_repository))  # fmt: skip
        archives += [
            ArchiveChoice("collection", c.key, c.name, c.key in slice.keep_collection, c.key in slice.omit_collection)
            for c in repository.collections
        ]
    options = {
        name: [Choice(value, label, getattr(slice, name) == value) for value, label in OPTION_LABELS[name].items()]
        for name in OPTION_LABELS
    }
    changed = {name for name, _value in slice.to_query()}
    return SliceControls(
        summary=slice.describe(),
        is_default=not changed,
        kinds=tree,
        period_from=slice.period_from or "",
        period_to=slice.period_to or "",
        min_collections=slice.min_collections,
        max_group_size=slice.max_group_size,
        evidence=[Choice(e, e, e in slice.evidence) for e in EVIDENCE_KINDS],
        options=options,
        archives=archives,
        open_groups=[group for group, names in GROUPS.items() if changed & set(names)],
        hidden=[(name, value) for name, value in slice.to_query() if name not in SHOWN],
    )

