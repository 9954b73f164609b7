"""The database itself enforces the rules that protect the evidence.

Every rule is broken once by a plain INSERT, UPDATE or DELETE (or an ORM write) and must
fail with IntegrityError naming the rule; next to it the valid counterpart goes through,
so a refusal for some other reason (a missing column, a wrong foreign key) cannot pass
for the rule itself.
"""

from __future__ import annotations

import re
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import date

import pytest
from sqlalchemy import func, select, text
from sqlalchemy.exc import DataError, IntegrityError

from app.db import Database, DatabaseBusy
from app.models import Attestation, Base, Person, PersonFact, Place, Source

# Columns without a default that every row of a table needs; tests override what they test.
REQUIRED = {
    "person": {
        "name": "Someone", "kind": "individual", "unidentified": False, "living": False, "calendar": "gregorian",
    },
    "place": {"name": "Somewhere"},
    "repository": {"name": "An archive"},
    "collection": {"name": "A fonds"},
    "source": {"calendar": "gregorian"},
    "group": {"name": "A society"},
    "relation_kind": {"label": "a kind", "directed": False},
    "person_fact": {"kind": "occupation", "value": "printer", "calendar": "gregorian"},
    "membership": {"role": ""},
    "attestation": {"evidence": "original", "certainty": "certain", "identification": "certain"},
}

FOREIGN_KEY_FAILED = "FOREIGN KEY constraint failed"

pytestmark = pytest.mark.both_databases


# --- helpers ------------------------------------------------------------------------------


def insert(database: Database, table: str, **values: object) -> int:
    """Insert one row by plain SQL, required columns filled in; return its id."""
    row = {**REQUIRED.get(table, {}), **values}
    columns = ", ".join(f'"{name}"' for name in row)
    placeholders = ", ".join(f":{name}" for name in row)
    with database.engine.begin() as connection:
        result = connection.execute(text(f'INSERT INTO "{table}" ({columns}) VALUES ({placeholders}) RETURNING id'), row)
        return result.scalar_one()


def execute(database: Database, sql: str, **params: object) -> None:
    with database.engine.begin() as connection:
        connection.execute(text(sql), params)


def scalar(database: Database, sql: str, **params: object) -> object:
    with database.engine.connect() as connection:
        return connection.execute(text(sql), params).scalar()


def scalar_list(database: Database, sql: str) -> list[object]:
    with database.engine.connect() as connection:
        return list(connection.execute(text(sql)).scalars())


def count(database: Database, table: str) -> int:
    return scalar(database, f'SELECT count(*) FROM "{table}"')


def counts(database: Database) -> dict[str, int]:
    return {table: count(database, table) for table in Base.metadata.tables}


@contextmanager
def refused(rule: str, what: str = "the change") -> Iterator[None]:
    """Expect an IntegrityError whose message names ``rule`` (a constraint name or SQLite's words).

    PostgreSQL words the same refusals its own way; ``postgres_words`` translates SQLite's.
    """
    try:
        yield
    except IntegrityError as error:
        message = str(error.orig)
        assert rule in message or postgres_words(rule) in message, f"{what} was refused, but not by {rule}: {message}"
    except DataError as error:  # PostgreSQL enforces varchar(100) itself, before the key check
        message = str(error.orig)
        assert rule.endswith("_key_format") and "value too long for type character varying(100)" in message, message
    else:
        pytest.fail(f"{what} was accepted; {rule} should have refused it")


def postgres_words(rule: str) -> str:
    """PostgreSQL's wording of a refusal given in SQLite's words (constraint names are the same)."""
    if rule == FOREIGN_KEY_FAILED:
        return "violates foreign key constraint"
    if match := re.fullmatch(r"NOT NULL constraint failed: (\w+)\.(\w+)", rule):
        return f'null value in column "{match[2]}" of relation "{match[1]}"'
    if match := re.fullmatch(r"UNIQUE constraint failed: (\w+)((?:[.,] ?\w+)*)", rule):
        columns = [column for column in re.findall(r"\.(\w+)", match[2])]
        return f'violates unique constraint "uq_{match[1]}' + "".join(f"_{c}" for c in columns)
    return rule


def kind(database: Database, key: str) -> tuple[int, bool]:
    """Id and directed flag of a relation kind."""
    with database.engine.connect() as connection:
        kind_id, directed = connection.execute(
            text("SELECT id, directed FROM relation_kind WHERE key = :key"), {"key": key}
        ).one()
    return kind_id, bool(directed)


def relate(database: Database, kind_key: str, a: int, b: int, *, kind_directed: bool | None = None) -> int:
    """Insert a relation of the kind ``kind_key``; ``kind_directed`` defaults to the kind's flag."""
    kind_id, directed = kind(database, kind_key)
    return insert(
        database,
        "relation",
        kind_id=kind_id,
        kind_directed=directed if kind_directed is None else kind_directed,
        person_a_id=a,
        person_b_id=b,
    )


def persons(database: Database, *keys: str) -> list[int]:
    """Insert persons in the order given, so their ids ascend in that order."""
    return [insert(database, "person", key=key, name=key) for key in keys]


def parents_of(database: Database, table: str) -> dict[str, int]:
    """The rows that a row of ``table`` must point to, created with valid keys."""
    if table == "collection":
        return {"repository_id": insert(database, "repository", key="archive")}
    if table == "attestation":
        (person_id,) = persons(database, "anna")
        return {
            "source_id": insert(database, "source", key="letter-1"),
            "fact_id": insert(database, "person_fact", person_id=person_id),
        }
    return {}


@pytest.fixture
def targets(database: Database) -> dict[str, int]:
    """One relation, one membership and one person fact, and a source that can attest them."""
    anna, bernd = persons(database, "anna", "bernd")
    group_id = insert(database, "group", key="academy")
    return {
        "source_id": insert(database, "source", key="letter-1"),
        "relation_id": relate(database, "friendship", anna, bernd),
        "membership_id": insert(database, "membership", person_id=anna, group_id=group_id, role="member"),
        "fact_id": insert(database, "person_fact", person_id=bernd),
    }


def attest(database: Database, targets: dict[str, int], key: str = "att-1", **values: object) -> int:
    """Insert an attestation of the relation from ``targets`` unless ``values`` say otherwise."""
    row = {"source_id": targets["source_id"], "relation_id": targets["relation_id"], **values}
    return insert(database, "attestation", key=key, **row)


# --- keys ---------------------------------------------------------------------------------

KEYED_TABLES = ["person", "source", "place", "repository", "collection", "group", "relation_kind", "attestation"]
BAD_KEYS = {
    "space": "a b",
    "slash": "a/b",
    "accented letter": "café",
    "empty": "",
    "101 characters": "k" * 101,
}


@pytest.mark.parametrize("table", KEYED_TABLES)
def test_a_malformed_key_is_refused(database: Database, table: str) -> None:
    parents = parents_of(database, table)
    before = count(database, table)
    for flaw, bad_key in BAD_KEYS.items():
        with refused(f"ck_{table}_key_format", f"a {table} key with {flaw} ({bad_key!r})"):
            insert(database, table, key=bad_key, **parents)
    assert count(database, table) == before
    insert(database, table, key="a.b:c-d_9", **parents)  # the same row with a valid key goes in


@pytest.mark.parametrize("table", KEYED_TABLES)
def test_keys_of_letters_digits_and_punctuation_up_to_100_characters_pass(database: Database, table: str) -> None:
    parents = parents_of(database, table)
    good = ["a.b:c-d_9", "Z", "k" * 100]
    for key in good:
        insert(database, table, key=key, **parents)
    with database.engine.connect() as connection:
        stored = set(connection.execute(text(f'SELECT key FROM "{table}"')).scalars())
    assert set(good) <= stored


@pytest.mark.parametrize("table", KEYED_TABLES)
def test_a_key_cannot_be_changed_into_a_malformed_one(database: Database, table: str) -> None:
    row_id = insert(database, table, key="good-key", **parents_of(database, table))
    with refused(f"ck_{table}_key_format"):
        execute(database, f'UPDATE "{table}" SET key = :key WHERE id = :id', key="bad key", id=row_id)
    assert scalar(database, f'SELECT key FROM "{table}" WHERE id = :id', id=row_id) == "good-key"
    execute(database, f'UPDATE "{table}" SET key = :key WHERE id = :id', key="better:key", id=row_id)


# --- attestations: one target, listed values, soft deletion --------------------------------

TARGETS = ("relation_id", "membership_id", "fact_id")


@pytest.mark.parametrize(
    "chosen",
    [(), ("relation_id", "membership_id"), ("relation_id", "fact_id"), ("membership_id", "fact_id"), TARGETS],
    ids=["none", "relation+membership", "relation+fact", "membership+fact", "all three"],
)
def test_an_attestation_without_exactly_one_target_is_refused(database: Database, targets: dict, chosen: tuple) -> None:
    values = {column: targets[column] for column in chosen}
    with refused("ck_attestation_exactly_one_target"):
        insert(database, "attestation", key="att-1", source_id=targets["source_id"], **values)
    assert count(database, "attestation") == 0


@pytest.mark.parametrize("chosen", TARGETS)
def test_an_attestation_of_exactly_one_target_is_accepted(database: Database, targets: dict, chosen: str) -> None:
    insert(database, "attestation", key="att-1", source_id=targets["source_id"], **{chosen: targets[chosen]})
    assert scalar(database, f"SELECT {chosen} FROM attestation WHERE key = 'att-1'") == targets[chosen]


def test_an_attestation_cannot_be_moved_to_a_second_target(database: Database, targets: dict) -> None:
    attestation_id = attest(database, targets)
    with refused("ck_attestation_exactly_one_target"):
        add_fact = "UPDATE attestation SET fact_id = :fact WHERE id = :id"
        execute(database, add_fact, fact=targets["fact_id"], id=attestation_id)
    execute(  # moving it (clearing the old target) is fine
        database,
        "UPDATE attestation SET fact_id = :fact, relation_id = NULL WHERE id = :id",
        fact=targets["fact_id"],
        id=attestation_id,
    )


CERTAINTY_VALUES = ["certain", "probable", "possible"]
EVIDENCE_VALUES = ["original", "copy", "draft", "mention", "register", "edition"]
UNLISTED = [
    ("certainty", "sure"),
    ("certainty", "Certain"),
    ("certainty", ""),
    ("identification", "likely"),
    ("identification", "PROBABLE"),
    ("evidence", "photocopy"),
    ("evidence", "Original"),
    ("evidence", "letter"),
]


LISTED = {"certainty": CERTAINTY_VALUES, "identification": CERTAINTY_VALUES, "evidence": EVIDENCE_VALUES}


@pytest.mark.parametrize("column", LISTED)
def test_an_unlisted_or_missing_grade_or_evidence_is_refused(database: Database, targets: dict, column: str) -> None:
    for value in [value for unlisted_column, value in UNLISTED if unlisted_column == column]:
        with refused(f"ck_attestation_{column}_listed", f"{column} {value!r}"):
            attest(database, targets, **{column: value})
    with refused(f"NOT NULL constraint failed: attestation.{column}", f"no {column}"):
        attest(database, targets, **{column: None})
    assert count(database, "attestation") == 0


@pytest.mark.parametrize("column", LISTED)
def test_every_listed_grade_and_evidence_is_accepted(database: Database, targets: dict, column: str) -> None:
    for n, value in enumerate(LISTED[column]):
        attest(database, targets, key=f"att-{n}", **{column: value})
    assert sorted(scalar_list(database, f"SELECT {column} FROM attestation")) == sorted(LISTED[column])


def test_a_soft_deleted_attestation_needs_a_reason(database: Database, targets: dict) -> None:
    attestation_id = attest(database, targets)
    with refused("ck_attestation_deletion_has_reason"):
        execute(database, "UPDATE attestation SET deleted_at = '2026-01-05 10:00:00' WHERE id = :id", id=attestation_id)
    with refused("ck_attestation_deletion_has_reason"):
        attest(database, targets, key="att-2", deleted_at="2026-01-05 10:00:00")
    execute(
        database,
        "UPDATE attestation SET deleted_at = '2026-01-05 10:00:00', deleted_reason = 'misread the date' WHERE id = :id",
        id=attestation_id,
    )
    assert scalar(database, "SELECT deleted_reason FROM attestation") == "misread the date"


# --- dates --------------------------------------------------------------------------------


def _source_dated(database: Database, earliest: date | None, latest: date | None, n: int = 0) -> None:
    with database.write() as session:
        session.add(Source(key=f"letter-{n}", earliest=earliest, latest=latest))


def _attestation_dated(database: Database, earliest: date | None, latest: date | None, n: int = 0) -> None:
    with database.write() as session:
        fact = PersonFact(person=Person(key=f"person-{n}", name="Anna"), kind="residence", value="Leiden")
        source = Source(key=f"letter-{n}")
        session.add(Attestation(key=f"att-{n}", fact=fact, source=source, earliest=earliest, latest=latest))


DATED = {"source": _source_dated, "attestation": _attestation_dated}


@pytest.mark.parametrize("table", DATED)
def test_earliest_after_latest_is_refused(database: Database, table: str) -> None:
    with refused(f"ck_{table}_date_order"):
        DATED[table](database, date(1701, 3, 2), date(1701, 3, 1))
    assert count(database, table) == 0


@pytest.mark.parametrize("table", DATED)
def test_ordered_or_open_dates_are_accepted(database: Database, table: str) -> None:
    intervals = {
        "same day": (date(1701, 3, 1), date(1701, 3, 1)),
        "across centuries": (date(999, 12, 31), date(1701, 3, 1)),
        "open end": (date(1701, 3, 1), None),
        "undated": (None, None),
    }
    for n, (earliest, latest) in enumerate(intervals.values()):
        DATED[table](database, earliest, latest, n)
    assert count(database, table) == len(intervals)


# --- relations ----------------------------------------------------------------------------


def test_a_relation_is_unique_per_kind_and_pair(database: Database) -> None:
    anna, bernd = persons(database, "anna", "bernd")
    relate(database, "friendship", anna, bernd)
    with refused("UNIQUE constraint failed: relation.kind_id, relation.person_a_id, relation.person_b_id"):
        relate(database, "friendship", anna, bernd)
    relate(database, "business", anna, bernd)  # another kind between the same pair is another relation
    assert count(database, "relation") == 2


def test_an_undirected_pair_must_be_sorted(database: Database) -> None:
    low, high = persons(database, "anna", "bernd")
    assert low < high
    with refused("ck_relation_undirected_pair_sorted"):
        relate(database, "friendship", high, low)
    relate(database, "friendship", low, high)


def test_an_undirected_pair_cannot_be_unsorted_by_an_update(database: Database) -> None:
    low, high = persons(database, "anna", "bernd")
    relation_id = relate(database, "friendship", low, high)
    with refused("ck_relation_undirected_pair_sorted"):
        execute(
            database,
            "UPDATE relation SET person_a_id = :a, person_b_id = :b WHERE id = :id",
            a=high,
            b=low,
            id=relation_id,
        )


def test_a_directed_kind_keeps_both_orders_as_distinct_relations(database: Database) -> None:
    low, high = persons(database, "anna", "bernd")
    forth = relate(database, "letter", low, high)
    back = relate(database, "letter", high, low)
    assert forth != back
    with refused("UNIQUE constraint failed: relation"):
        relate(database, "letter", high, low)
    assert count(database, "relation") == 2


@pytest.mark.parametrize("kind_key", ["friendship", "letter"])
def test_a_person_may_relate_to_themself(database: Database, kind_key: str) -> None:
    (anna,) = persons(database, "anna")
    relate(database, kind_key, anna, anna)
    assert count(database, "relation") == 1


@pytest.mark.parametrize("kind_key", ["friendship", "letter"])
def test_a_relation_must_copy_its_kinds_directed_flag(database: Database, kind_key: str) -> None:
    low, high = persons(database, "anna", "bernd")
    _, directed = kind(database, kind_key)
    with refused(FOREIGN_KEY_FAILED):
        relate(database, kind_key, low, high, kind_directed=not directed)
    relate(database, kind_key, low, high, kind_directed=directed)


def test_a_relation_cannot_flip_its_own_directed_flag(database: Database) -> None:
    low, high = persons(database, "anna", "bernd")
    relation_id = relate(database, "friendship", low, high)
    with refused(FOREIGN_KEY_FAILED):
        execute(database, "UPDATE relation SET kind_directed = TRUE WHERE id = :id", id=relation_id)


def test_directed_cannot_change_while_a_relation_uses_the_kind(database: Database) -> None:
    low, high = persons(database, "anna", "bernd")
    relate(database, "friendship", low, high)
    with refused(FOREIGN_KEY_FAILED):
        execute(database, "UPDATE relation_kind SET directed = TRUE WHERE key = 'friendship'")
    assert kind(database, "friendship")[1] is False

    execute(database, "UPDATE relation_kind SET directed = TRUE WHERE key = 'business'")  # unused: free to change
    assert kind(database, "business")[1] is True
    execute(database, "UPDATE relation_kind SET label = 'friends' WHERE key = 'friendship'")  # other columns too


# --- memberships --------------------------------------------------------------------------


def test_a_membership_is_unique_per_person_group_and_role(database: Database) -> None:
    anna, bernd = persons(database, "anna", "bernd")
    academy = insert(database, "group", key="academy")
    for role in ("member", ""):
        insert(database, "membership", person_id=anna, group_id=academy, role=role)
        with refused("UNIQUE constraint failed: membership.person_id, membership.group_id, membership.role"):
            insert(database, "membership", person_id=anna, group_id=academy, role=role)
    insert(database, "membership", person_id=anna, group_id=academy, role="secretary")
    insert(database, "membership", person_id=bernd, group_id=academy, role="member")
    assert count(database, "membership") == 4


# --- foreign keys: RESTRICT, nothing disappears by cascade ---------------------------------


@pytest.fixture
def world(database: Database) -> dict[str, int]:
    """A small dataset in which every kind of row that evidence depends on is in use.

    anna and bernd are friends (attested by a printed letter); carl is a member of the
    academy and a printer (both attested by the same letter); the archive holds one
    collection that no source is in yet.
    """
    anna, bernd, carl = persons(database, "anna", "bernd", "carl")
    ids = {"anna": anna, "bernd": bernd, "carl": carl}
    ids["repository"] = insert(database, "repository", key="archive")
    ids["collection"] = insert(database, "collection", key="letters", repository_id=ids["repository"])
    ids["source"] = insert(database, "source", key="letter-1")
    ids["relation"] = relate(database, "friendship", anna, bernd)
    ids["group"] = insert(database, "group", key="academy")
    ids["membership"] = insert(database, "membership", person_id=carl, group_id=ids["group"], role="member")
    ids["fact"] = insert(database, "person_fact", person_id=carl)
    for n, target in enumerate(("relation", "membership", "fact")):
        insert(database, "attestation", key=f"att-{n}", source_id=ids["source"], **{f"{target}_id": ids[target]})
    return ids


# case: (table, row in `world`, statements that remove what depends on the row)
RESTRICTED_DELETES = {
    "source with attestations": ("source", "source", ["DELETE FROM attestation"]),
    "person with relations": (
        "person",
        "anna",
        ["DELETE FROM attestation WHERE relation_id IS NOT NULL", "DELETE FROM relation"],
    ),
    "group with memberships": (
        "group",
        "group",
        ["DELETE FROM attestation WHERE membership_id IS NOT NULL", "DELETE FROM membership"],
    ),
    "relation with attestations": ("relation", "relation", ["DELETE FROM attestation WHERE relation_id IS NOT NULL"]),
    "repository with collections": ("repository", "repository", ["DELETE FROM collection"]),
}


@pytest.mark.parametrize("case", RESTRICTED_DELETES)
def test_deleting_a_row_in_use_is_refused_and_nothing_cascades(database: Database, world: dict, case: str) -> None:
    table, row, dependents = RESTRICTED_DELETES[case]
    delete = f'DELETE FROM "{table}" WHERE id = :id'
    before = counts(database)

    with refused(FOREIGN_KEY_FAILED):
        execute(database, delete, id=world[row])
    assert counts(database) == before

    for statement in dependents:  # once nothing depends on it any more, the same delete goes through
        execute(database, statement)
    execute(database, delete, id=world[row])
    assert count(database, table) == before[table] - 1


def test_every_foreign_key_in_the_file_is_restrict(database: Database) -> None:
    actions = {}
    with database.engine.connect() as connection:
        if database.engine.dialect.name == "postgresql":  # pg_constraint: 'r' is RESTRICT
            rows = connection.exec_driver_sql(
                "SELECT conrelid::regclass::text, conname, confrelid::regclass::text, confdeltype, confupdtype "
                "FROM pg_constraint WHERE contype = 'f'"
            ).all()
            names = {"r": "RESTRICT", "a": "NO ACTION", "c": "CASCADE", "n": "SET NULL", "d": "SET DEFAULT"}
            for table, name, target, on_delete, on_update in rows:
                actions[(table, name, target)] = (names[on_delete], names[on_update])
        for table in Base.metadata.tables if database.engine.dialect.name == "sqlite" else ():
            for row in connection.exec_driver_sql(f'PRAGMA foreign_key_list("{table}")').mappings():
                actions[(table, row["from"], row["table"])] = (row["on_delete"], row["on_update"])
    assert len(actions) >= 20  # every reference of the schema, not an empty list
    assert {action for action in actions.values()} == {("RESTRICT", "RESTRICT")}, actions


def test_a_reference_to_a_missing_row_is_refused(database: Database) -> None:
    (anna,) = persons(database, "anna")
    with refused(FOREIGN_KEY_FAILED):
        insert(database, "person_fact", person_id=anna + 1)
    insert(database, "person_fact", person_id=anna)


# --- sessions and connections -------------------------------------------------------------


def test_an_orm_write_that_breaks_a_rule_is_rolled_back_whole(database: Database) -> None:
    with refused("ck_person_key_format"):
        with database.write() as session:
            session.add(Place(key="leiden", name="Leiden"))
            session.add(Person(key="anna maria", name="Anna Maria"))
    with database.read() as session:
        assert session.scalar(select(func.count()).select_from(Place)) == 0
        assert session.scalar(select(func.count()).select_from(Person)) == 0


def pragma(connection, name: str) -> object:  # noqa: ANN001
    return connection.exec_driver_sql(f"PRAGMA {name}").scalar()


@pytest.mark.sqlite_only
def test_every_connection_has_foreign_keys_wal_and_a_busy_timeout(database: Database) -> None:
    with database.engine.connect() as first, database.engine.connect() as second:
        for connection in (first, second):
            assert pragma(connection, "foreign_keys") == 1
            assert pragma(connection, "journal_mode") == "wal"
            assert pragma(connection, "busy_timeout") == 10_000


@pytest.mark.sqlite_only
def test_the_busy_timeout_is_the_one_asked_for(database: Database) -> None:
    other = Database(database.url, busy_timeout_ms=200)
    try:
        with other.engine.connect() as connection:
            assert pragma(connection, "busy_timeout") == 200
    finally:
        other.dispose()


@pytest.fixture
def impatient(database: Database):
    """A second Database on the same file that gives up on a lock after 200 ms."""
    other = Database(database.url, busy_timeout_ms=200)
    yield other
    other.dispose()


def _try_to_write(database: Database) -> None:
    """Open a write session and run only a SELECT in it: enough to need the write lock."""
    with database.write() as session:
        session.execute(text("SELECT count(*) FROM place"))


def _places(database: Database) -> list[str]:
    with database.read() as session:
        return list(session.scalars(select(Place.key).order_by(Place.key)))


def test_a_write_session_takes_the_write_lock_when_it_begins(database: Database, impatient: Database) -> None:
    insert(database, "place", key="leiden")
    with database.write() as session:
        session.add(Place(key="delft", name="Delft"))
        session.flush()  # written, not committed

        with pytest.raises(DatabaseBusy, match="locked by another process"):
            _try_to_write(impatient)  # a write session cannot even begin
        assert _places(impatient) == ["leiden"]  # while readers still read the old data

    assert _places(impatient) == ["delft", "leiden"]
    _try_to_write(impatient)  # once the first has committed, the second may write


def test_a_write_session_holds_the_lock_before_it_writes_anything(database: Database, impatient: Database) -> None:
    with database.write() as session:
        session.execute(text("SELECT count(*) FROM place"))  # only read so far
        with pytest.raises(DatabaseBusy):
            _try_to_write(impatient)
        with impatient.read() as reader:
            assert reader.execute(text("SELECT count(*) FROM place")).scalar() == 0
    _try_to_write(impatient)
