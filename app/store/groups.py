"""Groups, the second mode: the index with its tree of parent groups, and everything about one group.

A group's members are the persons with a live membership of it (at least one attestation not
deleted). Each membership is shown with its term as recorded (start and end, as written and as
Gregorian days) beside the dates of its attestations, which are evidence of membership at
those dates and not of a term: a register entry of 1712 proves membership in 1712.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable
from dataclasses import dataclass
from datetime import date

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from app.dates import DateInterval, format_interval
from app.documented import DOCUMENTED
from app.models import Attestation, Group, Membership, Person, Place
from app.names import fold
from app.store.attestations import CitedAttestation, EvidenceCounts, count_evidence, get_cited_attestations, year_span
from app.store.persons import PersonRef

__all__ = [
    "GroupDetail",
    "GroupKind",
    "GroupList",
    "GroupListRow",
    "GroupMember",
    "GroupRef",
    "SubGroup",
    "TermDate",
    "get_group",
    "group_refs",
    "list_group_kinds",
    "search_groups",
]

_LIVE = Attestation.deleted_at.is_(None)


@dataclass(frozen=True)
class TermDate:
    """A start or end date: as written, and as the Gregorian days it can mean."""

    __pydantic_config__ = DOCUMENTED

    text: str
    """As written (EDTF)."""
    earliest: date | None
    """First Gregorian day it can mean."""
    latest: date | None
    """Last Gregorian day it can mean."""
    interval: str
    """Those days as text ("1702-01-01 – 1702-12-31")."""


@dataclass(frozen=True)
class GroupRef:
    """Enough about a group to name and link it."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The group's key."""
    name: str
    """Its name."""
    kind: str | None
    """Society, parish, guild, household, ... (None when not recorded)."""


@dataclass(frozen=True)
class GroupKind:
    """A kind of group and how many groups have it."""

    __pydantic_config__ = DOCUMENTED

    kind: str
    """The kind as recorded."""
    groups: int
    """Groups of that kind."""


@dataclass(frozen=True)
class GroupListRow:
    """One group in the index."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The group's key."""
    name: str
    """Its name."""
    kind: str | None
    """Its kind."""
    place_key: str | None
    """Key of its place."""
    place: str | None
    """Name of its place."""
    start: str | None
    """When it began, as written (EDTF)."""
    end: str | None
    """When it ended, as written (EDTF)."""
    parent_key: str | None
    """Key of its parent group."""
    parent: str | None
    """Name of its parent group."""
    depth: int
    """Nesting under the groups listed above it: 0 for a group whose parent is not in the list."""
    members: int
    """Persons with a live membership (at least one attestation not deleted)."""
    sub_groups: int
    """Groups whose parent it is."""


@dataclass(frozen=True)
class GroupList:
    """The index of groups, searched and filtered, in the order of the tree of parent groups."""

    __pydantic_config__ = DOCUMENTED

    q: str
    """The search as typed ("" for none)."""
    kind: str | None
    """The kind filter (None for every kind)."""
    total: int
    """Groups found."""
    all_groups: int
    """Groups in the dataset."""
    kinds: list[GroupKind]
    """Every kind recorded, for the filter."""
    rows: list[GroupListRow]
    """The groups found: each parent before its sub-groups, siblings by name."""


@dataclass(frozen=True)
class GroupMember:
    """One membership of the group: who, in what role, for what term, on what evidence."""

    __pydantic_config__ = DOCUMENTED

    person: PersonRef
    """The member."""
    role: str
    """Role in the group ("" when none is recorded)."""
    start: TermDate | None
    """Start of the term as recorded (None when not)."""
    end: TermDate | None
    """End of the term as recorded (None when not)."""
    attested_from: date | None
    """First day any attestation of the membership may fall on."""
    attested_to: date | None
    """Last day any attestation may fall on."""
    attested: str | None
    """Those days as years ("1712", "1703–1711"); None when no attestation is dated."""
    attestation_dates: list[str]
    """The date of each attestation as written, in date order ("undated" for none): evidence of
    membership at those dates, not of a term."""
    attestations: list[CitedAttestation]
    """The attestations (not deleted), in date order."""
    counts: EvidenceCounts
    """Documents, copies, mentions, collections and years of those attestations."""
    membership_id: int | None = None
    """Id of the membership (its page is /memberships/{id})."""


@dataclass(frozen=True)
class SubGroup:
    """A group whose parent is this group."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The sub-group's key."""
    name: str
    """Its name."""
    kind: str | None
    """Its kind."""
    members: int
    """Persons with a live membership of it."""


@dataclass(frozen=True)
class GroupDetail:
    """Everything recorded about one group."""

    __pydantic_config__ = DOCUMENTED

    id: int
    """Internal id (not stable across databases; links use the key)."""
    key: str
    """The group's key."""
    name: str
    """Its name."""
    kind: str | None
    """Society, parish, guild, household, ..."""
    note: str | None
    """A note on the group."""
    place_key: str | None
    """Key of its place."""
    place: str | None
    """Name of its place."""
    start: TermDate | None
    """When it began."""
    end: TermDate | None
    """When it ended."""
    ancestors: list[GroupRef]
    """Its parent group, the parent's parent and so on, the outermost first."""
    sub_groups: list[SubGroup]
    """Groups whose parent it is, by name."""
    persons: int
    """Persons with a live membership."""
    attestations: int
    """Attestations (not deleted) of its memberships."""
    members: list[GroupMember]
    """Live memberships, by member's name, then start of the term and role."""


# --- the index ------------------------------------------------------------------------------


def list_group_kinds(*, session: Session) -> list[GroupKind]:
    """Return every recorded kind of group with its number of groups, by kind."""
    rows = session.execute(
        select(Group.kind, func.count()).where(Group.kind.is_not(None)).group_by(Group.kind).order_by(Group.kind)
    )
    return [GroupKind(kind=kind, groups=count) for kind, count in rows]


def search_groups(*, session: Session, q: str = "", kind: str | None = None) -> GroupList:
    """Return the groups whose name contains ``q`` (case and accents aside) and of ``kind``, as a tree.

    Rows come parent first, sub-groups under it, siblings by folded name. A group whose parent
    is not among the rows found starts at depth 0 and names its parent.
    """
    folded = fold(q) if q.strip() else ""
    query = select(Group.id)
    if folded:
        query = query.where(func.fold(Group.name).contains(folded, autoescape=True))
    if kind:
        query = query.where(Group.kind == kind)
    found = set(session.scalars(query))
    groups = {g.id: g for g in session.execute(
        select(Group.id, Group.key, Group.name, Group.kind, Group.parent_id, Group.start_text, Group.end_text,
               Place.key.label("place_key"), Place.name.label("place"))
        .outerjoin(Place, Group.place_id == Place.id)
    )}  # fmt: skip
    members = _member_counts(session)
    children: dict[int | None, list[int]] = defaultdict(list)
    for g in groups.values():
        children[g.parent_id].append(g.id)
    for ids in children.values():
        ids.sort(key=lambda gid: (fold(groups[gid].name), groups[gid].key))

    rows: list[GroupListRow] = []

    def visit(gid: int, depth: int, seen: set[int]) -> None:
        if gid in seen:  # a loop of parents is a data error; show each group once
            return
        seen.add(gid)
        shown = gid in found
        if shown:
            g = groups[gid]
            parent = groups.get(g.parent_id)
            rows.append(GroupListRow(
                key=g.key, name=g.name, kind=g.kind, place_key=g.place_key, place=g.place, start=g.start_text,
                end=g.end_text, parent_key=parent.key if parent else None, parent=parent.name if parent else None,
                depth=depth, members=members.get(gid, 0), sub_groups=len(children.get(gid, [])),
            ))  # fmt: skip
        for child in children.get(gid, []):
            visit(child, depth + 1 if shown else depth, seen)

    seen: set[int] = set()
    for root in children.get(None, []):
        visit(root, 0, seen)
    for gid in sorted(set(groups) - seen, key=lambda gid: groups[gid].key):  # parents in a loop
        visit(gid, 0, seen)
    return GroupList(q=q.strip(), kind=kind, total=len(rows), all_groups=len(groups),
                     kinds=list_group_kinds(session=session), rows=rows)  # fmt: skip


def _member_counts(session: Session, group_ids: Iterable[int] | None = None) -> dict[int, int]:
    """Return the persons with a live membership of each group, by group id."""
    query = (
        select(Membership.group_id, func.count(Membership.person_id.distinct()))
        .join(Attestation, Attestation.membership_id == Membership.id)
        .where(_LIVE)
        .group_by(Membership.group_id)
    )
    if group_ids is not None:
        query = query.where(Membership.group_id.in_(set(group_ids)))
    return dict(session.execute(query).all())


def group_refs(*, session: Session, group_ids: Iterable[int]) -> dict[int, GroupRef]:
    """Return refs of the given groups, keyed by id."""
    ids = sorted(set(group_ids))
    found: dict[int, GroupRef] = {}
    for start in range(0, len(ids), 500):  # stays under SQLite's limit of bound parameters
        rows = session.execute(select(Group.id, Group.key, Group.name, Group.kind).where(Group.id.in_(ids[start : start + 500])))
        found.update((gid, GroupRef(key=key, name=name, kind=kind)) for gid, key, name, kind in rows)
    return found


# --- one group ------------------------------------------------------------------------------


def get_group(*, session: Session, key: str) -> GroupDetail | None:
    """Return one group with its place, dates, parents, sub-groups and cited members, or None."""
    group = session.scalars(select(Group).where(Group.key == key)).one_or_none()
    if group is None:
        return None
    ancestors: list[GroupRef] = []
    parent, seen = group.parent, {group.id}
    while parent is not None and parent.id not in seen:
        seen.add(parent.id)
        ancestors.insert(0, GroupRef(key=parent.key, name=parent.name, kind=parent.kind))
        parent = parent.parent
    subs = list(session.scalars(select(Group).where(Group.parent_id == group.id)))
    counts = _member_counts(session, [group.id, *(s.id for s in subs)])
    subs.sort(key=lambda s: (fold(s.name), s.key))
    members = _members(session, group.id)
    return GroupDetail(
        id=group.id, key=group.key, name=group.name, kind=group.kind, note=group.note,
        place_key=group.place.key if group.place else None, place=group.place.name if group.place else None,
        start=_term_date(group.start_text, group.start_earliest, group.start_latest),
        end=_term_date(group.end_text, group.end_earliest, group.end_latest),
        ancestors=ancestors,
        sub_groups=[SubGroup(key=s.key, name=s.name, kind=s.kind, members=counts.get(s.id, 0)) for s in subs],
        persons=counts.get(group.id, 0), attestations=sum(m.counts.attestations for m in members), members=members,
    )  # fmt: skip


def _members(session: Session, group_id: int) -> list[GroupMember]:
    """Return the live memberships of a group with their cited attestations."""
    rows = session.execute(
        select(Membership, Person, Attestation.id, Attestation.key)
        .join(Person, Membership.person_id == Person.id)
        .join(Attestation, Attestation.membership_id == Membership.id)
        .where(Membership.group_id == group_id, _LIVE)
    ).all()
    memberships: dict[int, tuple[Membership, Person]] = {}
    membership_of: dict[str, int] = {}
    for membership, person, _att_id, att_key in rows:
        memberships[membership.id] = (membership, person)
        membership_of[att_key] = membership.id
    cited: dict[int, list[CitedAttestation]] = defaultdict(list)
    for att in get_cited_attestations(session=session, attestation_ids=[row[2] for row in rows]):  # in date order
        cited[membership_of[att.key]].append(att)
    members = []
    for mid, (m, person) in memberships.items():
        atts = cited[mid]
        counts = count_evidence(atts)
        members.append(GroupMember(
            person=PersonRef(key=person.key, name=person.name, kind=person.kind, unidentified=person.unidentified),
            role=m.role, start=_term_date(m.start_text, m.start_earliest, m.start_latest),
            end=_term_date(m.end_text, m.end_earliest, m.end_latest), attested_from=counts.earliest,
            attested_to=counts.latest, attested=year_span(counts.earliest, counts.latest),
            attestation_dates=[att.date_text or "undated" for att in atts], attestations=atts, counts=counts,
            membership_id=m.id,
        ))  # fmt: skip
    sort_name = {mid: fold(p.sort_name or p.name) for mid, (_, p) in memberships.items()}
    order = sorted(memberships, key=lambda mid: (
        sort_name[mid], memberships[mid][1].key, memberships[mid][0].start_earliest or date.max, memberships[mid][0].role,
    ))  # fmt: skip
    by_id = dict(zip(memberships, members))
    return [by_id[mid] for mid in order]


def _term_date(text: str | None, earliest: date | None, latest: date | None) -> TermDate | None:
    if not text:
        return None
    return TermDate(text=text, earliest=earliest, latest=latest, interval=format_interval(DateInterval(earliest, latest)))
