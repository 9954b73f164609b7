"""Ties with their evidence: every relation between two persons, or one relation, with its citations."""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Collection
from dataclasses import dataclass

from sqlalchemy import and_, func, or_, select
from sqlalchemy.orm import Session

from app.documented import DOCUMENTED
from app.models import Attestation, Relation, RelationKind
from app.store.attestations import CitedAttestation, EvidenceCounts, count_evidence, get_cited_attestations
from app.store.persons import PersonRef, person_refs

__all__ = ["RelationDetail", "RelationEvidence", "TiesBetween", "get_relation", "get_ties"]


@dataclass(frozen=True)
class RelationEvidence:
    """One relation with the attestations shown for it."""

    __pydantic_config__ = DOCUMENTED

    relation_id: int
    """Id of the relation."""
    kind_key: str
    """Key of its kind."""
    label: str
    """Label of its kind."""
    directed: bool
    """True when the kind has a direction; person_a is then the first end (the sender)."""
    self_loop: bool
    """True when both ends are the same person."""
    person_a: PersonRef
    """First end (for undirected kinds, the ends carry no order)."""
    person_b: PersonRef
    """Second end."""
    role_a: str | None
    """Role of the first end in a directed kind (sender)."""
    role_b: str | None
    """Role of the second end (recipient)."""
    attestations: list[CitedAttestation]
    """The attestations shown, in date order."""
    counts: EvidenceCounts
    """Documents, copies, mentions, collections and years of those attestations."""


@dataclass(frozen=True)
class TiesBetween:
    """Every relation between two persons, with the attestations a slice keeps."""

    __pydantic_config__ = DOCUMENTED

    relations: list[RelationEvidence]
    """Relations with at least one attestation kept, by kind, the first person's direction first."""
    counts: EvidenceCounts
    """Counts of all the attestations kept."""
    total: int
    """Attestations (not deleted) of every relation between the two, kept or not."""
    left_out: int
    """How many of them the slice leaves out."""


@dataclass(frozen=True)
class RelationDetail:
    """One relation with all its attestations that are not deleted."""

    __pydantic_config__ = DOCUMENTED

    relation: RelationEvidence
    """The relation and its attestations."""
    deleted: int
    """Deleted attestations of the relation (not shown, never counted)."""


def get_ties(*, session: Session, a_id: int, b_id: int, kept: Collection[int] | None = None) -> TiesBetween:
    """Return every relation between persons ``a_id`` and ``b_id`` (a self-loop when they are equal).

    Only attestations whose id is in ``kept`` are shown (all live ones when ``kept`` is None);
    the rest are counted as left out.
    """
    pair = or_(
        and_(Relation.person_a_id == a_id, Relation.person_b_id == b_id),
        and_(Relation.person_a_id == b_id, Relation.person_b_id == a_id),
    )
    rows = session.execute(
        select(Relation, Attestation.id)
        .join(Attestation, Attestation.relation_id == Relation.id)
        .where(pair, Attestation.deleted_at.is_(None))
    ).all()
    shown = {att_id for _, att_id in rows if kept is None or att_id in kept}
    relations = {relation.id: relation for relation, att_id in rows if att_id in shown}
    cited = get_cited_attestations(session=session, attestation_ids=shown)
    evidence = _with_evidence(session, list(relations.values()), cited)
    # The first person's side first: a -> b before b -> a, then by kind.
    evidence.sort(key=lambda r: (r.label.casefold(), r.kind_key, r.directed and _id_of(relations, r) != a_id))
    return TiesBetween(relations=evidence, counts=count_evidence(cited), total=len(rows), left_out=len(rows) - len(shown))


def _id_of(relations: dict[int, Relation], evidence: RelationEvidence) -> int:
    return relations[evidence.relation_id].person_a_id


def get_relation(*, session: Session, relation_id: int) -> RelationDetail | None:
    """Return the relation with its attestations (not deleted); None when there is no such relation."""
    relation = session.get(Relation, relation_id)
    if relation is None:
        return None
    live = list(session.scalars(select(Attestation.id).where(Attestation.relation_id == relation_id, Attestation.deleted_at.is_(None))))
    deleted = session.scalar(
        select(func.count()).select_from(Attestation).where(Attestation.relation_id == relation_id, Attestation.deleted_at.is_not(None))
    )
    cited = get_cited_attestations(session=session, attestation_ids=live)
    return RelationDetail(relation=_with_evidence(session, [relation], cited)[0], deleted=deleted or 0)


def _with_evidence(session: Session, relations: list[Relation], cited: list[CitedAttestation]) -> list[RelationEvidence]:
    if not relations:
        return []
    refs = person_refs(session=session, person_ids={p for r in relations for p in (r.person_a_id, r.person_b_id)})
    kinds = {k.id: k for k in session.scalars(select(RelationKind).where(RelationKind.id.in_({r.kind_id for r in relations})))}
    by_relation: dict[int, list[CitedAttestation]] = defaultdict(list)
    for att in cited:
        by_relation[att.relation_id].append(att)
    result = []
    for relation in relations:
        kind = kinds[relation.kind_id]
        atts = by_relation[relation.id]
        result.append(RelationEvidence(
            relation_id=relation.id, kind_key=kind.key, label=kind.label, directed=kind.directed,
            self_loop=relation.person_a_id == relation.person_b_id,
            person_a=refs[relation.person_a_id], person_b=refs[relation.person_b_id],
            role_a=kind.role_a if kind.directed else None, role_b=kind.role_b if kind.directed else None,
            attestations=atts, counts=count_evidence(atts),
        ))  # fmt: skip
    return result
