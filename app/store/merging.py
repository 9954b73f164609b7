"""Merging two persons found to be one, splitting a wrongly merged one, and "possibly the same as" links.

A merge moves everything of the absorbed person to the kept one: spellings, identifiers, facts,
memberships (two memberships of the same group and role fuse into one) and relations (two ties of
the same kind and pair fuse into one, and a tie between the two becomes a self-loop); the absorbed
key keeps resolving as an alias. :func:`preview_merge` says all this before anything moves.
A split is the inverse: the chosen attestations move to a new person, with their ties.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass
from datetime import datetime, timezone

from sqlalchemy import delete, or_, select, update
from sqlalchemy.orm import Session

from app.auth import Actor
from app.models import (
    Attestation,
    Group,
    Membership,
    Person,
    PersonAlias,
    PersonFact,
    PersonIdentifier,
    PersonLink,
    PersonName,
    Relation,
    RelationKind,
)
from app.store.audit import record_change
from app.store.editing import EditError, create_person, person_snapshot

__all__ = [
    "LinkedPerson",
    "MergePreview",
    "SplitChoice",
    "create_person_link",
    "delete_person_link",
    "list_person_links",
    "list_split_choices",
    "merge_persons",
    "preview_merge",
    "split_person",
]


@dataclass(frozen=True)
class MovedRelation:
    """A relation of the absorbed person and what the merge does to it."""

    relation_id: int
    kind: str
    other: str  # the other end's key after the merge (the kept key for a self-loop)
    attestations: int
    outcome: str  # "moves", "fuses" (with relation ``into``), "self-loop"
    into: int | None = None


@dataclass(frozen=True)
class MergePreview:
    """What merging ``absorbed`` into ``kept`` would move, fuse and turn into self-loops."""

    kept: str
    kept_name: str
    absorbed: str
    absorbed_name: str
    names: list[str]  # spellings that move (the kept person lacks them)
    identifiers: list[str]
    facts: int
    attestations: int  # of the absorbed person's relations, memberships and facts (deleted ones too)
    memberships: list[str]  # "group (role): moves" / "...: fuses"
    relations: list[MovedRelation]
    self_loops: int
    fused: int


def _now() -> datetime:
    return datetime.now(timezone.utc).replace(tzinfo=None)


def _get(session: Session, key: str, field: str) -> Person:
    person = session.scalar(select(Person).where(Person.key == (key or "").strip()))
    if person is None:
        raise EditError({field: f"no person with key {key!r}" if (key or "").strip() else "the key of a person is required"})
    return person


def _pair(kind_directed: bool, a: int, b: int) -> tuple[int, int]:
    return (a, b) if kind_directed or a <= b else (b, a)


def preview_merge(*, session: Session, kept: str, absorbed: str) -> MergePreview:
    """Return what :func:`merge_persons` would do, changing nothing."""
    keep, gone = _get(session, kept, "kept"), _get(session, absorbed, "absorbed")
    if keep.id == gone.id:
        raise EditError({"absorbed": "pick two different persons"})
    kept_names = set(session.scalars(select(PersonName.name).where(PersonName.person_id == keep.id)))
    names = [n for n in session.scalars(select(PersonName.name).where(PersonName.person_id == gone.id).order_by(PersonName.id))
             if n not in kept_names]
    identifiers = [f"{s}:{v}" for s, v in session.execute(
        select(PersonIdentifier.scheme, PersonIdentifier.value).where(PersonIdentifier.person_id == gone.id))]
    facts = session.scalars(select(PersonFact.id).where(PersonFact.person_id == gone.id)).all()
    memberships = []
    membership_ids = []
    for m, group_key in session.execute(select(Membership, Group.key).join(Group, Group.id == Membership.group_id)
                                        .where(Membership.person_id == gone.id)):
        membership_ids.append(m.id)
        twin = session.scalar(select(Membership.id).where(Membership.person_id == keep.id, Membership.group_id == m.group_id,
                                                          Membership.role == m.role))
        memberships.append(f"{group_key}{f' ({m.role})' if m.role else ''}: {'fuses with the kept membership' if twin else 'moves'}")
    relations = []
    relation_ids = []
    keys = {keep.id: keep.key, gone.id: keep.key}
    for rel, kind_key in session.execute(select(Relation, RelationKind.key).join(RelationKind, RelationKind.id == Relation.kind_id)
                                         .where(or_(Relation.person_a_id == gone.id, Relation.person_b_id == gone.id))):
        relation_ids.append(rel.id)
        a = keep.id if rel.person_a_id == gone.id else rel.person_a_id
        b = keep.id if rel.person_b_id == gone.id else rel.person_b_id
        a, b = _pair(rel.kind_directed, a, b)
        count = session.query(Attestation).filter(Attestation.relation_id == rel.id).count()
        twin = session.scalar(select(Relation.id).where(Relation.kind_id == rel.kind_id, Relation.person_a_id == a,
                                                        Relation.person_b_id == b, Relation.id != rel.id))
        other_id = b if a == keep.id else a
        other = keys.get(other_id) or session.scalar(select(Person.key).where(Person.id == other_id))
        outcome = "fuses" if twin else ("self-loop" if a == b else "moves")
        relations.append(MovedRelation(rel.id, kind_key, other, count, outcome, twin))
    attestations = session.query(Attestation).filter(or_(
        Attestation.relation_id.in_(relation_ids or [-1]), Attestation.membership_id.in_(membership_ids or [-1]),
        Attestation.fact_id.in_(facts or [-1]))).count()
    return MergePreview(
        kept=keep.key, kept_name=keep.name, absorbed=gone.key, absorbed_name=gone.name, names=names,
        identifiers=identifiers, facts=len(facts), attestations=attestations, memberships=memberships,
        relations=sorted(relations, key=lambda r: (r.outcome, r.kind, r.other)),
        self_loops=sum(r.outcome == "self-loop" for r in relations), fused=sum(r.outcome == "fuses" for r in relations),
    )


def merge_persons(*, session: Session, actor: Actor, kept: str, absorbed: str) -> MergePreview:
    """Merge person ``absorbed`` into ``kept`` (see the module); return the preview of what was done."""
    preview = preview_merge(session=session, kept=kept, absorbed=absorbed)
    keep, gone = _get(session, kept, "kept"), _get(session, absorbed, "absorbed")
    before = {"kept": person_snapshot(session, keep), "absorbed": person_snapshot(session, gone)}
    kept_names = set(session.scalars(select(PersonName.name).where(PersonName.person_id == keep.id)))
    for name in session.scalars(select(PersonName).where(PersonName.person_id == gone.id)).all():
        if name.name in kept_names:
            session.delete(name)
        else:
            name.person_id = keep.id
    session.execute(update(PersonIdentifier).where(PersonIdentifier.person_id == gone.id).values(person_id=keep.id))
    session.execute(update(PersonFact).where(PersonFact.person_id == gone.id).values(person_id=keep.id))
    for m in session.scalars(select(Membership).where(Membership.person_id == gone.id)).all():
        twin = session.scalar(select(Membership).where(Membership.person_id == keep.id, Membership.group_id == m.group_id,
                                                       Membership.role == m.role))
        if twin is None:
            m.person_id = keep.id
            m.version += 1
        else:
            session.execute(update(Attestation).where(Attestation.membership_id == m.id).values(membership_id=twin.id))
            for column in ("start_text", "start_earliest", "start_latest", "end_text", "end_earliest", "end_latest"):
                if getattr(twin, column) is None:
                    setattr(twin, column, getattr(m, column))
            twin.version += 1
            session.flush()
            session.delete(m)
    session.flush()
    for rel in session.scalars(select(Relation).where(or_(Relation.person_a_id == gone.id, Relation.person_b_id == gone.id))).all():
        a = keep.id if rel.person_a_id == gone.id else rel.person_a_id
        b = keep.id if rel.person_b_id == gone.id else rel.person_b_id
        a, b = _pair(rel.kind_directed, a, b)
        twin = session.scalar(select(Relation).where(Relation.kind_id == rel.kind_id, Relation.person_a_id == a,
                                                     Relation.person_b_id == b, Relation.id != rel.id))
        if twin is None:
            rel.person_a_id, rel.person_b_id = a, b
            rel.version += 1
        else:
            session.execute(update(Attestation).where(Attestation.relation_id == rel.id).values(relation_id=twin.id))
            twin.version += 1
            session.flush()
            session.delete(rel)
        session.flush()
    for link in session.scalars(select(PersonLink).where(or_(PersonLink.person_a_id == gone.id, PersonLink.person_b_id == gone.id))).all():
        other = link.person_b_id if link.person_a_id == gone.id else link.person_a_id
        exists = session.scalar(select(PersonLink.id).where(PersonLink.person_a_id == min(other, keep.id),
                                                            PersonLink.person_b_id == max(other, keep.id)))
        if other == keep.id or exists:
            session.delete(link)
        else:
            link.person_a_id, link.person_b_id = min(other, keep.id), max(other, keep.id)
    session.execute(update(PersonAlias).where(PersonAlias.person_id == gone.id).values(person_id=keep.id))
    session.flush()
    session.delete(gone)
    session.flush()
    session.add(PersonAlias(key=preview.absorbed, person_id=keep.id))
    keep.version += 1
    session.flush()
    record_change(session=session, actor=actor.name, user_id=actor.user_id, action="merge", table="person", key=keep.key,
                  before=before, after={"kept": person_snapshot(session, keep), "alias": preview.absorbed,
                                        "fused_relations": preview.fused, "self_loops": preview.self_loops},
                  summary=f"merged {preview.absorbed} into {keep.key}")
    return preview


# --- split -----------------------------------------------------------------------------------


@dataclass(frozen=True)
class SplitChoice:
    """One attestation of a person that a split may move to the new person."""

    key: str
    what: str  # "letter to P2", "member of G1 (master)", "occupation: printer"
    source: str
    locus: str | None
    deleted: bool


def list_split_choices(*, session: Session, key: str) -> list[SplitChoice]:
    """Return every attestation of the person's relations, memberships and facts, for the split form."""
    person = _get(session, key, "key")
    keys: dict[int, str] = {}
    choices = []
    for att, rel, kind_key in session.execute(
        select(Attestation, Relation, RelationKind.key).join(Relation, Relation.id == Attestation.relation_id)
        .join(RelationKind, RelationKind.id == Relation.kind_id)
        .where(or_(Relation.person_a_id == person.id, Relation.person_b_id == person.id)).order_by(Attestation.id)
    ):
        other_id = rel.person_b_id if rel.person_a_id == person.id else rel.person_a_id
        if other_id not in keys:
            keys[other_id] = session.scalar(select(Person.key).where(Person.id == other_id))
        direction = "with themself" if rel.person_a_id == rel.person_b_id else (
            f"to {keys[other_id]}" if rel.person_a_id == person.id else f"from {keys[other_id]}") if rel.kind_directed else f"with {keys[other_id]}"
        choices.append(SplitChoice(att.key, f"{kind_key} {direction}", att.source.key, att.locus, att.deleted_at is not None))
    for att, m, group_key in session.execute(
        select(Attestation, Membership, Group.key).join(Membership, Membership.id == Attestation.membership_id)
        .join(Group, Group.id == Membership.group_id).where(Membership.person_id == person.id).order_by(Attestation.id)
    ):
        choices.append(SplitChoice(att.key, f"member of {group_key}{f' ({m.role})' if m.role else ''}", att.source.key,
                                   att.locus, att.deleted_at is not None))
    for att, fact in session.execute(
        select(Attestation, PersonFact).join(PersonFact, PersonFact.id == Attestation.fact_id)
        .where(PersonFact.person_id == person.id).order_by(Attestation.id)
    ):
        choices.append(SplitChoice(att.key, f"{fact.kind}: {fact.value}", att.source.key, att.locus, att.deleted_at is not None))
    return choices


def split_person(*, session: Session, actor: Actor, key: str, new_key: str, new_name: str, attestations: list[str],
                 names: list[str] | None = None) -> str:
    """Move the chosen attestations (and spellings) of person ``key`` to a new person; return the new key.

    Each moved attestation takes its tie along: a relation with the same kind and other end, a
    membership of the same group and role, a copy of the fact, created for the new person where
    missing. A relation of the person with themself becomes a tie from the person to the new one.
    Ties and facts left with no attestation are removed.
    """
    person = _get(session, key, "key")
    chosen = set(attestations)
    if not chosen:
        raise EditError({"attestations": "choose at least one attestation to move to the new person"})
    known = {c.key for c in list_split_choices(session=session, key=key)}
    strange = sorted(chosen - known)
    if strange:
        raise EditError({"attestations": f"not attestations of {key}: {', '.join(strange[:5])}"})
    if chosen == known:
        raise EditError({"attestations": "leave at least one attestation with the person (else edit the person instead)"})
    before = person_snapshot(session, person)
    new_key = create_person(session=session, actor=actor, key=new_key, name=new_name)
    new = session.scalar(select(Person).where(Person.key == new_key))
    moved_names = [n for n in (names or []) if n != person.name]
    for name in session.scalars(select(PersonName).where(PersonName.person_id == person.id, PersonName.name.in_(moved_names))).all():
        if name.name == new.name:
            session.delete(name)
        else:
            name.person_id = new.id
    emptied: dict[type, set[int]] = defaultdict(set)
    for att in session.scalars(select(Attestation).where(Attestation.key.in_(chosen))).all():
        if att.relation_id is not None:
            rel = session.get(Relation, att.relation_id)
            if rel.person_a_id == rel.person_b_id:
                a, b = person.id, new.id
            else:
                a = new.id if rel.person_a_id == person.id else rel.person_a_id
                b = new.id if rel.person_b_id == person.id else rel.person_b_id
            a, b = _pair(rel.kind_directed, a, b)
            target = session.scalar(select(Relation).where(Relation.kind_id == rel.kind_id, Relation.person_a_id == a,
                                                           Relation.person_b_id == b))
            if target is None:
                target = Relation(kind_id=rel.kind_id, kind_directed=rel.kind_directed, person_a_id=a, person_b_id=b, version=1)
                session.add(target)
                session.flush()
            att.relation_id = target.id
            emptied[Relation].add(rel.id)
        elif att.membership_id is not None:
            m = session.get(Membership, att.membership_id)
            target = session.scalar(select(Membership).where(Membership.person_id == new.id, Membership.group_id == m.group_id,
                                                             Membership.role == m.role))
            if target is None:
                target = Membership(person_id=new.id, group_id=m.group_id, role=m.role, start_text=m.start_text,
                                    start_earliest=m.start_earliest, start_latest=m.start_latest, end_text=m.end_text,
                                    end_earliest=m.end_earliest, end_latest=m.end_latest, version=1)
                session.add(target)
                session.flush()
            att.membership_id = target.id
            emptied[Membership].add(m.id)
        else:
            fact = session.get(PersonFact, att.fact_id)
            target = session.scalar(select(PersonFact).where(
                PersonFact.person_id == new.id, PersonFact.kind == fact.kind, PersonFact.value == fact.value,
                PersonFact.date_text.is_(fact.date_text) if fact.date_text is None else PersonFact.date_text == fact.date_text))
            if target is None:
                target = PersonFact(person_id=new.id, kind=fact.kind, value=fact.value, place_id=fact.place_id,
                                    date_text=fact.date_text, calendar=fact.calendar, earliest=fact.earliest, latest=fact.latest)
                session.add(target)
                session.flush()
            att.fact_id = target.id
            emptied[PersonFact].add(fact.id)
        att.version += 1
    session.flush()
    column = {Relation: Attestation.relation_id, Membership: Attestation.membership_id, PersonFact: Attestation.fact_id}
    for model, ids in emptied.items():
        for record_id in ids:
            if session.scalar(select(Attestation.id).where(column[model] == record_id).limit(1)) is None:
                session.execute(delete(model).where(model.id == record_id))
    person.version += 1
    session.flush()
    record_change(session=session, actor=actor.name, user_id=actor.user_id, action="split", table="person", key=person.key,
                  before=before, after={"kept": person_snapshot(session, person), "new": person_snapshot(session, new),
                                        "moved_attestations": sorted(chosen)},
                  summary=f"split {new_key} off {person.key} ({len(chosen)} attestations)")
    return new_key


# --- possibly the same as --------------------------------------------------------------------


@dataclass(frozen=True)
class LinkedPerson:
    """A person recorded as possibly the same as the one whose page shows it."""

    link_id: int
    key: str
    name: str
    note: str | None
    created_by: str
    created_at: datetime


def list_person_links(*, session: Session, key: str) -> list[LinkedPerson]:
    """Return the persons linked to ``key`` as possibly the same, by name."""
    pid = session.scalar(select(Person.id).where(Person.key == key))
    found = []
    for link in session.scalars(select(PersonLink).where(or_(PersonLink.person_a_id == pid, PersonLink.person_b_id == pid))):
        other = session.get(Person, link.person_b_id if link.person_a_id == pid else link.person_a_id)
        found.append(LinkedPerson(link.id, other.key, other.name, link.note, link.created_by, link.created_at))
    return sorted(found, key=lambda p: (p.name.casefold(), p.key))


def create_person_link(*, session: Session, actor: Actor, key: str, other: str, note: str = "") -> int:
    """Record that persons ``key`` and ``other`` may be the same; return the link's id."""
    a = _get(session, key, "key")
    problems = {}
    b = session.scalar(select(Person).where(Person.key == (other or "").strip()))
    if b is None:
        problems["other"] = f"no person with key {other!r}" if (other or "").strip() else "the key of the other person is required"
    elif b.id == a.id:
        problems["other"] = "a person is the same as themself: pick another person"
    elif session.scalar(select(PersonLink.id).where(PersonLink.person_a_id == min(a.id, b.id), PersonLink.person_b_id == max(a.id, b.id))):
        problems["other"] = f"{a.key} and {b.key} are linked already"
    if problems:
        raise EditError(problems)
    link = PersonLink(person_a_id=min(a.id, b.id), person_b_id=max(a.id, b.id), note=(note or "").strip() or None,
                      created_by=actor.name, created_at=_now())
    session.add(link)
    session.flush()
    record_change(session=session, actor=actor.name, user_id=actor.user_id, action="create", table="person_link",
                  key=str(link.id), after={"persons": sorted([a.key, b.key]), "note": link.note},
                  summary=f"linked {a.key} and {b.key} as possibly the same")
    return link.id


def delete_person_link(*, session: Session, actor: Actor, link_id: int) -> None:
    """Remove a "possibly the same as" link (the audit trail keeps it)."""
    link = session.get(PersonLink, link_id)
    if link is None:
        raise LookupError(f"no link with id {link_id}")
    keys = sorted(session.scalars(select(Person.key).where(Person.id.in_([link.person_a_id, link.person_b_id]))))
    before = {"persons": keys, "note": link.note}
    session.delete(link)
    session.flush()
    record_change(session=session, actor=actor.name, user_id=actor.user_id, action="delete", table="person_link",
                  key=str(link_id), before=before, summary=f"unlinked {keys[0]} and {keys[-1]}")
