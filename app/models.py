"""The tables of Attesta (SQLAlchemy 2 ORM).

Rules that protect the evidence live in the database, not only in Python: key format,
the listed values of certainty and evidence, exactly one target per attestation, one
relation per kind and pair with the pair order of directed and undirected kinds, and
RESTRICT on every foreign key so nothing disappears by cascade. Tables are created only
by the Alembic migrations in ``migrations/``.
"""

from __future__ import annotations

from datetime import date, datetime

from sqlalchemy import (
    Boolean,
    CheckConstraint,
    Date,
    DateTime,
    Float,
    ForeignKey,
    ForeignKeyConstraint,
    Index,
    Integer,
    MetaData,
    String,
    Text,
    UniqueConstraint,
)
from sqlalchemy.ext.compiler import compiles
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship
from sqlalchemy.sql.expression import ColumnElement
from sqlalchemy.types import Boolean as BooleanType

NAMING_CONVENTION = {
    "ix": "ix_%(table_name)s_%(column_0_N_name)s",
    "uq": "uq_%(table_name)s_%(column_0_N_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_N_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}

CERTAINTIES = ("certain", "probable", "possible")
EVIDENCE_KINDS = ("original", "copy", "draft", "mention", "register", "edition")
PERSON_KINDS = ("individual", "corporate")
FACT_KINDS = ("birth", "death", "occupation", "title", "residence", "gender", "other")
ROLES = ("reader", "editor", "admin")
KEY_PATTERN = r"^[A-Za-z0-9._:-]{1,100}$"


class Base(DeclarativeBase):
    metadata = MetaData(naming_convention=NAMING_CONVENTION)


class KeyIsValid(ColumnElement[bool]):
    """SQL condition "column holds a valid key" ([A-Za-z0-9._:-], 1 to 100 characters)."""

    type = BooleanType()
    inherit_cache = True

    def __init__(self, column: str):
        self.column = column


@compiles(KeyIsValid)
def _key_is_valid_sqlite(element: KeyIsValid, compiler, **kw) -> str:  # noqa: ANN001
    c = f'"{element.column}"'
    return f"length({c}) BETWEEN 1 AND 100 AND {c} NOT GLOB '*[^A-Za-z0-9._:-]*'"


@compiles(KeyIsValid, "postgresql")
def _key_is_valid_postgresql(element: KeyIsValid, compiler, **kw) -> str:  # noqa: ANN001
    return f"\"{element.column}\" ~ '{KEY_PATTERN}'"


def _in(column: str, values: tuple[str, ...]) -> str:
    return f"{column} IN ({', '.join(repr(v) for v in values)})"


def _key_column() -> Mapped[str]:
    return mapped_column(String(100), unique=True)


def _fk(target: str, **kw) -> ForeignKey:  # noqa: ANN003
    return ForeignKey(target, ondelete="RESTRICT", onupdate="RESTRICT", **kw)


# --- places and holders of documents ---------------------------------------------------


class Place(Base):
    __tablename__ = "place"
    __table_args__ = (CheckConstraint(KeyIsValid("key"), name="key_format"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    key: Mapped[str] = _key_column()
    name: Mapped[str] = mapped_column(String(300))
    variants: Mapped[str | None] = mapped_column(Text)  # "|"-separated spellings
    latitude: Mapped[float | None] = mapped_column(Float)
    longitude: Mapped[float | None] = mapped_column(Float)
    identifier: Mapped[str | None] = mapped_column(String(300))  # gazetteer, scheme:value


class Repository(Base):
    __tablename__ = "repository"
    __table_args__ = (CheckConstraint(KeyIsValid("key"), name="key_format"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    key: Mapped[str] = _key_column()
    name: Mapped[str] = mapped_column(String(300))
    place_id: Mapped[int | None] = mapped_column(_fk("place.id"), index=True)
    note: Mapped[str | None] = mapped_column(Text)

    place: Mapped[Place | None] = relationship()
    collections: Mapped[list[Collection]] = relationship(back_populates="repository")


class Collection(Base):
    __tablename__ = "collection"
    __table_args__ = (CheckConstraint(KeyIsValid("key"), name="key_format"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    key: Mapped[str] = _key_column()
    repository_id: Mapped[int] = mapped_column(_fk("repository.id"), index=True)
    name: Mapped[str] = mapped_column(String(300))
    reference_code: Mapped[str | None] = mapped_column(String(300))
    note: Mapped[str | None] = mapped_column(Text)

    repository: Mapped[Repository] = relationship(back_populates="collections")


class Source(Base):
    """One document: archival (collection + reference), bibliographic, or both."""

    __tablename__ = "source"
    __table_args__ = (
        CheckConstraint(KeyIsValid("key"), name="key_format"),
        CheckConstraint("earliest IS NULL OR latest IS NULL OR earliest <= latest", name="date_order"),
        CheckConstraint("copy_of_id IS NULL OR copy_of_id <> id", name="not_own_copy"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    key: Mapped[str] = _key_column()
    collection_id: Mapped[int | None] = mapped_column(_fk("collection.id"), index=True)
    reference: Mapped[str | None] = mapped_column(String(300))  # shelfmark / call number
    kind: Mapped[str | None] = mapped_column(String(100))
    title: Mapped[str | None] = mapped_column(Text)
    author: Mapped[str | None] = mapped_column(String(300))
    publisher: Mapped[str | None] = mapped_column(String(300))
    year: Mapped[str | None] = mapped_column(String(20))
    pages: Mapped[str | None] = mapped_column(String(100))
    date_text: Mapped[str | None] = mapped_column(String(100))  # EDTF as written
    calendar: Mapped[str] = mapped_column(String(20), default="gregorian")
    earliest: Mapped[date | None] = mapped_column(Date, index=True)
    latest: Mapped[date | None] = mapped_column(Date)
    place_from_id: Mapped[int | None] = mapped_column(_fk("place.id"), index=True)
    place_to_id: Mapped[int | None] = mapped_column(_fk("place.id"), index=True)
    received_text: Mapped[str | None] = mapped_column(String(100))
    received_earliest: Mapped[date | None] = mapped_column(Date)
    received_latest: Mapped[date | None] = mapped_column(Date)
    copy_of_id: Mapped[int | None] = mapped_column(_fk("source.id"), index=True)
    url: Mapped[str | None] = mapped_column(Text)
    note: Mapped[str | None] = mapped_column(Text)
    version: Mapped[int] = mapped_column(Integer, default=1, server_default="1")  # optimistic concurrency: +1 per edit

    collection: Mapped[Collection | None] = relationship()
    place_from: Mapped[Place | None] = relationship(foreign_keys=[place_from_id])
    place_to: Mapped[Place | None] = relationship(foreign_keys=[place_to_id])
    copy_of: Mapped[Source | None] = relationship(remote_side=[id])


# --- persons -----------------------------------------------------------------------------


class Person(Base):
    __tablename__ = "person"
    __table_args__ = (
        CheckConstraint(KeyIsValid("key"), name="key_format"),
        CheckConstraint(_in("kind", PERSON_KINDS), name="kind_listed"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    key: Mapped[str] = _key_column()
    name: Mapped[str] = mapped_column(String(300))  # display name
    sort_name: Mapped[str | None] = mapped_column(String(300), index=True)
    kind: Mapped[str] = mapped_column(String(20), default="individual")
    unidentified: Mapped[bool] = mapped_column(Boolean, default=False)
    living: Mapped[bool] = mapped_column(Boolean, default=False)
    born_text: Mapped[str | None] = mapped_column(String(100))
    born_earliest: Mapped[date | None] = mapped_column(Date)
    born_latest: Mapped[date | None] = mapped_column(Date)
    died_text: Mapped[str | None] = mapped_column(String(100))
    died_earliest: Mapped[date | None] = mapped_column(Date)
    died_latest: Mapped[date | None] = mapped_column(Date)
    calendar: Mapped[str] = mapped_column(String(20), default="gregorian")  # of born and died
    note: Mapped[str | None] = mapped_column(Text)
    version: Mapped[int] = mapped_column(Integer, default=1, server_default="1")  # optimistic concurrency: +1 per edit

    names: Mapped[list[PersonName]] = relationship(back_populates="person", order_by="PersonName.id")
    identifiers: Mapped[list[PersonIdentifier]] = relationship(
        back_populates="person", order_by="PersonIdentifier.id"
    )


class PersonName(Base):
    """A variant spelling of a person's name, with a folded form for search."""

    __tablename__ = "person_name"
    __table_args__ = (UniqueConstraint("person_id", "name"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    person_id: Mapped[int] = mapped_column(_fk("person.id"), index=True)
    name: Mapped[str] = mapped_column(String(300))
    normalized: Mapped[str] = mapped_column(String(300), index=True)

    person: Mapped[Person] = relationship(back_populates="names")


class PersonIdentifier(Base):
    """An authority identifier (wikidata, viaf, gnd, isni or local) of a person."""

    __tablename__ = "person_identifier"
    __table_args__ = (UniqueConstraint("scheme", "value"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    person_id: Mapped[int] = mapped_column(_fk("person.id"), index=True)
    scheme: Mapped[str] = mapped_column(String(50))
    value: Mapped[str] = mapped_column(String(300))

    person: Mapped[Person] = relationship(back_populates="identifiers")


class PersonAlias(Base):
    """An old key of a merged person; it keeps resolving to the person."""

    __tablename__ = "person_alias"
    __table_args__ = (CheckConstraint(KeyIsValid("key"), name="key_format"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    key: Mapped[str] = _key_column()
    person_id: Mapped[int] = mapped_column(_fk("person.id"), index=True)


class PersonLink(Base):
    """Two person records that may be one person, linked without merging ("possibly the same as")."""

    __tablename__ = "person_link"
    __table_args__ = (
        UniqueConstraint("person_a_id", "person_b_id"),
        CheckConstraint("person_a_id < person_b_id", name="pair_sorted"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    person_a_id: Mapped[int] = mapped_column(_fk("person.id"), index=True)
    person_b_id: Mapped[int] = mapped_column(_fk("person.id"), index=True)
    note: Mapped[str | None] = mapped_column(Text)
    created_by: Mapped[str] = mapped_column(String(100))
    created_at: Mapped[datetime] = mapped_column(DateTime)


class PersonFact(Base):
    """An attested statement about one person (occupation, residence, birth, ...)."""

    __tablename__ = "person_fact"
    __table_args__ = (
        CheckConstraint(_in("kind", FACT_KINDS), name="kind_listed"),
        CheckConstraint("earliest IS NULL OR latest IS NULL OR earliest <= latest", name="date_order"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    person_id: Mapped[int] = mapped_column(_fk("person.id"), index=True)
    kind: Mapped[str] = mapped_column(String(20))
    value: Mapped[str] = mapped_column(Text, default="")
    place_id: Mapped[int | None] = mapped_column(_fk("place.id"), index=True)
    date_text: Mapped[str | None] = mapped_column(String(100))
    calendar: Mapped[str] = mapped_column(String(20), default="gregorian")
    earliest: Mapped[date | None] = mapped_column(Date)
    latest: Mapped[date | None] = mapped_column(Date)

    person: Mapped[Person] = relationship()
    place: Mapped[Place | None] = relationship()


# --- relations ---------------------------------------------------------------------------


class RelationKind(Base):
    __tablename__ = "relation_kind"
    __table_args__ = (
        CheckConstraint(KeyIsValid("key"), name="key_format"),
        # target of the (kind, directed) foreign key from relation: `directed` cannot
        # change while the kind is in use.
        UniqueConstraint("id", "directed", name="uq_relation_kind_id_directed"),
        CheckConstraint("parent_id IS NULL OR parent_id <> id", name="not_own_parent"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    key: Mapped[str] = _key_column()
    label: Mapped[str] = mapped_column(String(200))
    directed: Mapped[bool] = mapped_column(Boolean, default=False)
    role_a: Mapped[str | None] = mapped_column(String(100))
    role_b: Mapped[str | None] = mapped_column(String(100))
    parent_id: Mapped[int | None] = mapped_column(_fk("relation_kind.id"), index=True)

    parent: Mapped[RelationKind | None] = relationship(remote_side=[id])


class Relation(Base):
    """One tie of one kind between two persons (ordered for directed kinds, sorted otherwise)."""

    __tablename__ = "relation"
    __table_args__ = (
        UniqueConstraint("kind_id", "person_a_id", "person_b_id"),
        ForeignKeyConstraint(
            ["kind_id", "kind_directed"],
            ["relation_kind.id", "relation_kind.directed"],
            ondelete="RESTRICT",
            onupdate="RESTRICT",
            name="fk_relation_kind_directed",
        ),
        CheckConstraint("kind_directed OR person_a_id <= person_b_id", name="undirected_pair_sorted"),
        # From either end to the other: the ties among a set of persons (both ends in it) are
        # found in these indexes alone, without reading the relations themselves.
        Index("ix_relation_person_a_id_person_b_id", "person_a_id", "person_b_id"),
        Index("ix_relation_person_b_id_person_a_id", "person_b_id", "person_a_id"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    kind_id: Mapped[int] = mapped_column(Integer)
    kind_directed: Mapped[bool] = mapped_column(Boolean)
    person_a_id: Mapped[int] = mapped_column(_fk("person.id"))
    person_b_id: Mapped[int] = mapped_column(_fk("person.id"))
    version: Mapped[int] = mapped_column(Integer, default=1, server_default="1")  # optimistic concurrency: +1 per edit

    kind: Mapped[RelationKind] = relationship(foreign_keys=[kind_id], primaryjoin="Relation.kind_id == RelationKind.id")
    person_a: Mapped[Person] = relationship(foreign_keys=[person_a_id])
    person_b: Mapped[Person] = relationship(foreign_keys=[person_b_id])


# --- groups ------------------------------------------------------------------------------


class Group(Base):
    """A node of the second mode: institution, society, household, parish, company, event."""

    __tablename__ = "group"
    __table_args__ = (
        CheckConstraint(KeyIsValid("key"), name="key_format"),
        CheckConstraint("parent_id IS NULL OR parent_id <> id", name="not_own_parent"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    key: Mapped[str] = _key_column()
    name: Mapped[str] = mapped_column(String(300))
    kind: Mapped[str | None] = mapped_column(String(100))
    place_id: Mapped[int | None] = mapped_column(_fk("place.id"), index=True)
    parent_id: Mapped[int | None] = mapped_column(_fk("group.id"), index=True)
    start_text: Mapped[str | None] = mapped_column(String(100))
    start_earliest: Mapped[date | None] = mapped_column(Date)
    start_latest: Mapped[date | None] = mapped_column(Date)
    end_text: Mapped[str | None] = mapped_column(String(100))
    end_earliest: Mapped[date | None] = mapped_column(Date)
    end_latest: Mapped[date | None] = mapped_column(Date)
    note: Mapped[str | None] = mapped_column(Text)
    version: Mapped[int] = mapped_column(Integer, default=1, server_default="1")  # optimistic concurrency: +1 per edit

    place: Mapped[Place | None] = relationship()
    parent: Mapped[Group | None] = relationship(remote_side=[id])


class Membership(Base):
    """A person's tie to a group with a role and an optional term; unique per person, group, role."""

    __tablename__ = "membership"
    __table_args__ = (UniqueConstraint("person_id", "group_id", "role"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    person_id: Mapped[int] = mapped_column(_fk("person.id"), index=True)
    group_id: Mapped[int] = mapped_column(_fk("group.id"), index=True)
    role: Mapped[str] = mapped_column(String(100), default="")  # "" when none is recorded
    start_text: Mapped[str | None] = mapped_column(String(100))
    start_earliest: Mapped[date | None] = mapped_column(Date)
    start_latest: Mapped[date | None] = mapped_column(Date)
    end_text: Mapped[str | None] = mapped_column(String(100))
    end_earliest: Mapped[date | None] = mapped_column(Date)
    end_latest: Mapped[date | None] = mapped_column(Date)
    version: Mapped[int] = mapped_column(Integer, default=1, server_default="1")  # optimistic concurrency: +1 per edit

    person: Mapped[Person] = relationship()
    group: Mapped[Group] = relationship()


# --- attestations ------------------------------------------------------------------------


class Attestation(Base):
    """The link between one source and exactly one relation, membership or person fact."""

    __tablename__ = "attestation"
    __table_args__ = (
        CheckConstraint(KeyIsValid("key"), name="key_format"),
        CheckConstraint(
            "(CASE WHEN relation_id IS NULL THEN 0 ELSE 1 END)"
            " + (CASE WHEN membership_id IS NULL THEN 0 ELSE 1 END)"
            " + (CASE WHEN fact_id IS NULL THEN 0 ELSE 1 END) = 1",
            name="exactly_one_target",
        ),
        CheckConstraint(_in("evidence", EVIDENCE_KINDS), name="evidence_listed"),
        CheckConstraint(_in("certainty", CERTAINTIES), name="certainty_listed"),
        CheckConstraint(_in("identification", CERTAINTIES), name="identification_listed"),
        CheckConstraint("earliest IS NULL OR latest IS NULL OR earliest <= latest", name="date_order"),
        CheckConstraint("deleted_at IS NULL OR deleted_reason IS NOT NULL", name="deletion_has_reason"),
        # A relation's attestations with their source and every column a slice filters on: the
        # counts of a hub's ties are made from this index alone, without reading the attestations.
        # The source comes second so that SQLite reads a relation's entries in one range and
        # filters them there, instead of seeking once per value of `evidence IN (...)`.
        Index("ix_attestation_relation_slice", "relation_id", "source_id", "deleted_at", "evidence", "certainty",
              "identification", "earliest", "latest"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    key: Mapped[str] = _key_column()
    relation_id: Mapped[int | None] = mapped_column(_fk("relation.id"))
    membership_id: Mapped[int | None] = mapped_column(_fk("membership.id"), index=True)
    fact_id: Mapped[int | None] = mapped_column(_fk("person_fact.id"), index=True)
    source_id: Mapped[int] = mapped_column(_fk("source.id"), index=True)
    locus: Mapped[str | None] = mapped_column(String(200))
    evidence: Mapped[str] = mapped_column(String(20), default="original")
    date_text: Mapped[str | None] = mapped_column(String(100))  # None: the source's date
    calendar: Mapped[str | None] = mapped_column(String(20))  # None: the source's calendar
    earliest: Mapped[date | None] = mapped_column(Date, index=True)  # own date, else the source's
    latest: Mapped[date | None] = mapped_column(Date)
    place_id: Mapped[int | None] = mapped_column(_fk("place.id"), index=True)
    certainty: Mapped[str] = mapped_column(String(20), default="certain")
    identification: Mapped[str] = mapped_column(String(20), default="certain")
    name_a_as_written: Mapped[str | None] = mapped_column(String(300))
    name_b_as_written: Mapped[str | None] = mapped_column(String(300))
    quote: Mapped[str | None] = mapped_column(Text)
    note: Mapped[str | None] = mapped_column(Text)
    entered_by_id: Mapped[int | None] = mapped_column(_fk("user.id"))
    entered_at: Mapped[datetime | None] = mapped_column(DateTime)
    deleted_at: Mapped[datetime | None] = mapped_column(DateTime)
    deleted_reason: Mapped[str | None] = mapped_column(Text)
    version: Mapped[int] = mapped_column(Integer, default=1, server_default="1")  # optimistic concurrency: +1 per edit

    relation: Mapped[Relation | None] = relationship()
    membership: Mapped[Membership | None] = relationship()
    fact: Mapped[PersonFact | None] = relationship()
    source: Mapped[Source] = relationship()
    place: Mapped[Place | None] = relationship()


# --- accounts and history ----------------------------------------------------------------


class User(Base):
    __tablename__ = "user"
    __table_args__ = (CheckConstraint(_in("role", ROLES), name="role_listed"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    name: Mapped[str] = mapped_column(String(100), unique=True)
    role: Mapped[str] = mapped_column(String(20), default="reader")
    password_hash: Mapped[str | None] = mapped_column(String(300))
    disabled: Mapped[bool] = mapped_column(Boolean, default=False)
    created_at: Mapped[datetime] = mapped_column(DateTime)
    # Kept in the database so that every server process sees the same count and lock.
    failed_logins: Mapped[int] = mapped_column(Integer, default=0, server_default="0")
    locked_until: Mapped[datetime | None] = mapped_column(DateTime)
    # Part of every session cookie: raising it (disable, new password) ends the user's sessions.
    session_epoch: Mapped[int] = mapped_column(Integer, default=0, server_default="0")


class AuditEntry(Base):
    """Who changed what and when; an import is one entry with its counts."""

    __tablename__ = "audit_entry"

    id: Mapped[int] = mapped_column(primary_key=True)
    at: Mapped[datetime] = mapped_column(DateTime, index=True)
    user_id: Mapped[int | None] = mapped_column(_fk("user.id"), index=True)
    actor: Mapped[str] = mapped_column(String(100))  # user name, or "local" / "cli"
    action: Mapped[str] = mapped_column(String(50))
    table_name: Mapped[str | None] = mapped_column(String(50))
    record_key: Mapped[str | None] = mapped_column(String(100))
    before_json: Mapped[str | None] = mapped_column(Text)
    after_json: Mapped[str | None] = mapped_column(Text)
    summary: Mapped[str | None] = mapped_column(Text)
    redacted_at: Mapped[datetime | None] = mapped_column(DateTime)  # personal data taken out by an admin (see the redact entry)


class DataVersion(Base):
    """A single row counting every write, so cached results know how stale they are."""

    __tablename__ = "data_version"
    __table_args__ = (CheckConstraint("id = 1", name="single_row"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    version: Mapped[int] = mapped_column(Integer, default=0)
    changed_at: Mapped[datetime | None] = mapped_column(DateTime)


# --- stored results of measures ----------------------------------------------------------


class StoredMeasure(Base):
    """A measure computed on one slice at one data version, kept so that it survives a restart.

    One row per measure, options, slice and visibility: a recompute replaces the row. A row
    from an older data version is kept until then, so a page can show it as "computed at
    version N" rather than lose it.
    """

    __tablename__ = "measure_result"
    __table_args__ = (
        UniqueConstraint("measure", "options", "slice_key", "visibility", name="uq_measure_result_request"),
        CheckConstraint("seconds >= 0", name="seconds_not_negative"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    measure: Mapped[str] = mapped_column(String(50))  # a centrality name, or summary, components, ...
    options: Mapped[str] = mapped_column(String(500))  # canonical JSON of the measure's options
    slice_key: Mapped[str] = mapped_column(Text)  # the slice's query string, pairs sorted
    visibility: Mapped[str] = mapped_column(String(100))  # which persons the viewer may see: "all" for now
    data_version: Mapped[int] = mapped_column(Integer)  # the data version the result was computed at
    result_json: Mapped[str] = mapped_column(Text)  # persons named by key, never by id
    computed_at: Mapped[datetime] = mapped_column(DateTime)
    seconds: Mapped[float] = mapped_column(Float)  # how long the computation took


class Job(Base):
    """A heavy measure waiting for, or computed by, the background worker.

    One live row (queued or running) per measure, options, slice, visibility and data version:
    a second request for the same result joins it. The result itself goes to ``measure_result``.
    """

    __tablename__ = "job"
    __table_args__ = (
        CheckConstraint("state IN ('queued', 'running', 'done', 'failed')", name="state_known"),
        CheckConstraint("progress >= 0 AND progress <= 1", name="progress_in_range"),
        Index("ix_job_state_created", "state", "created_at"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    measure: Mapped[str] = mapped_column(String(50))
    options: Mapped[str] = mapped_column(String(500))  # canonical JSON of the measure's options
    slice_key: Mapped[str] = mapped_column(Text)
    visibility: Mapped[str] = mapped_column(String(100))
    data_version: Mapped[int] = mapped_column(Integer)  # the data version it was requested at
    state: Mapped[str] = mapped_column(String(10), default="queued")
    progress: Mapped[float] = mapped_column(Float, default=0.0)
    requested_by: Mapped[str] = mapped_column(String(100))
    created_at: Mapped[datetime] = mapped_column(DateTime)
    started_at: Mapped[datetime | None] = mapped_column(DateTime, nullable=True)
    finished_at: Mapped[datetime | None] = mapped_column(DateTime, nullable=True)
    error: Mapped[str | None] = mapped_column(Text, nullable=True)
    worker_host: Mapped[str | None] = mapped_column(String(255), nullable=True)  # the machine of the worker running it
    worker_pid: Mapped[int | None] = mapped_column(Integer, nullable=True)  # its process id there
