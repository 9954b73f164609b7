"""Workbook import and export: all or nothing, every problem with file:line, round trips lossless."""

from __future__ import annotations

import filecmp
import zipfile
from pathlib import Path

import pytest
from sqlalchemy import func, select, text

from app.db import Database, DatabaseBusy
from app.exchange.workbook import WorkbookError, export_workbook, import_workbook
from app.models import Attestation, Base, Membership, Person, PersonName, Relation, Source
from tests.conftest import DEMO_WORKBOOK
from tests.workbooks import small_world, write_workbook

LIMIT = 200 * 1024 * 1024

pytestmark = pytest.mark.both_databases


def row_counts(database: Database) -> dict[str, int]:
    """Rows in every table, to prove that a failed import changed nothing."""
    with database.read() as session:
        return {t.name: session.scalar(select(func.count()).select_from(t)) for t in Base.metadata.sorted_tables}


def problems_of(database: Database, folder: Path) -> list[str]:
    with pytest.raises(WorkbookError) as caught:
        import_workbook(database, folder, size_limit=LIMIT)
    return [str(p) for p in caught.value.problems]


# --- a small world by hand -----------------------------------------------------------------


def test_small_world_imports_with_the_expected_ties(database, tmp_path):
    report = import_workbook(database, write_workbook(tmp_path / "wb", small_world()), size_limit=LIMIT)
    assert report.rows["relations.csv"]["added"] == 7
    # letters anna->jost and jost->anna are two relations (directed); the two sibling rows, given
    # in both orders, are one undirected relation; council->anna; widow's self-addressed draft.
    assert report.created["relations"] == 5
    assert report.defaulted_certainty == 7
    with database.read() as session:
        pairs = session.execute(
            select(Relation.kind_id, Relation.person_a_id, Relation.person_b_id)
        ).all()
        assert len(pairs) == 5
        sibling = session.scalar(select(Relation).join(Relation.kind).where(text("relation_kind.key = 'sibling'")))
        assert sibling.person_a_id < sibling.person_b_id
        assert session.scalar(select(func.count()).select_from(Attestation).where(Attestation.relation_id == sibling.id)) == 2
        anna = session.scalar(select(Person).where(Person.key == "p-anna"))
        folded = set(session.scalars(select(PersonName.normalized).where(PersonName.person_id == anna.id)))
        assert folded == {"anna vell", "anne vel"}  # "Änna Vell" folds into "anna vell" too
        copy = session.scalar(select(Source).where(Source.key == "s-2c"))
        assert copy.copy_of.key == "s-2"


def test_names_as_written_follow_their_person_when_an_undirected_pair_is_sorted(database, tmp_path):
    world = small_world()
    world["relations.csv"] = [
        {"key": "r-x", "person": "p-jost", "other": "p-anna", "kind": "spouse", "source": "s-1",
         "person_as_written": "Jost B.", "other_as_written": "Anne"},
    ]
    import_workbook(database, write_workbook(tmp_path / "wb", world), size_limit=LIMIT)
    with database.read() as session:
        att = session.scalar(select(Attestation).where(Attestation.key == "r-x"))
        names = {att.relation.person_a.key: att.name_a_as_written, att.relation.person_b.key: att.name_b_as_written}
    assert names == {"p-jost": "Jost B.", "p-anna": "Anne"}


def test_attestation_dates_follow_their_calendar_or_the_source(database, tmp_path):
    world = small_world()
    world["relations.csv"].append(
        {"key": "r-j", "person": "p-anna", "other": "p-jost", "kind": "letter", "source": "s-2", "date": "1703-06-03"}
    )
    import_workbook(database, write_workbook(tmp_path / "wb", world), size_limit=LIMIT)
    with database.read() as session:
        by_key = {a.key: a for a in session.scalars(select(Attestation))}
    # s-2 is dated 1703-06-01 in the Julian calendar = Gregorian 1703-06-12 (11 days apart in the
    # 18th century; Calendar (New Style) Act 1750 dropped 11 days in 1752).
    assert str(by_key["r-2"].earliest) == "1703-06-12"
    # a row's own date is read in the source's calendar when the row names none
    assert str(by_key["r-j"].earliest) == "1703-06-14"
    assert by_key["r-1"].date_text is None and str(by_key["r-1"].earliest) == "1703-05-12"


def test_reimport_changes_nothing_and_keyed_rows_update(database, tmp_path):
    folder = write_workbook(tmp_path / "wb", small_world())
    import_workbook(database, folder, size_limit=LIMIT)
    before = row_counts(database)
    again = import_workbook(database, folder, size_limit=LIMIT)
    assert not again.changed_anything
    assert row_counts(database) == before

    world = small_world()
    world["relations.csv"][0]["certainty"] = "probable"  # r-1 has a key: this updates it
    world["relations.csv"].append({"person": "p-anna", "other": "p-council", "kind": "business", "source": "s-1"})
    report = import_workbook(database, write_workbook(tmp_path / "wb2", world), size_limit=LIMIT)
    assert report.rows["relations.csv"]["changed"] == 1
    assert report.rows["relations.csv"]["added"] == 1
    after = row_counts(database)
    assert after["attestation"] == before["attestation"] + 1
    assert after["relation"] == before["relation"] + 1
    with database.read() as session:
        assert session.scalar(select(Attestation.certainty).where(Attestation.key == "r-1")) == "probable"


def test_import_never_deletes(database, tmp_path):
    import_workbook(database, write_workbook(tmp_path / "wb", small_world()), size_limit=LIMIT)
    before = row_counts(database)
    world = small_world()
    world["relations.csv"] = world["relations.csv"][:1]
    del world["facts.csv"]
    import_workbook(database, write_workbook(tmp_path / "wb2", world), size_limit=LIMIT)
    assert row_counts(database) == before


def test_zip_and_folder_give_the_same_import(database, tmp_path):
    folder = write_workbook(tmp_path / "wb", small_world())
    archive = tmp_path / "wb.zip"
    with zipfile.ZipFile(archive, "w") as zf:
        for csv_file in folder.iterdir():
            zf.write(csv_file, f"workbook/{csv_file.name}")
    import_workbook(database, archive, size_limit=LIMIT)
    again = import_workbook(database, folder, size_limit=LIMIT)
    assert not again.changed_anything


# --- every problem with file:line, and nothing written ------------------------------------------


BAD_ROWS = [
    # (file, row changes, expected text of the problem)
    ("relations.csv", {"person": "p-nobody"}, "relations.csv:2: person: unknown person 'p-nobody'"),
    ("relations.csv", {"source": "s-missing"}, "relations.csv:2: source: unknown source 's-missing'"),
    ("relations.csv", {"kind": "enmity"}, "relations.csv:2: kind: unknown relation kind 'enmity'"),
    ("relations.csv", {"certainty": "sure"}, "relations.csv:2: certainty: 'sure' is not one of certain, probable, possible"),
    ("relations.csv", {"evidence": "rumour"}, "relations.csv:2: evidence: 'rumour' is not one of original"),
    ("relations.csv", {"date": "17o3"}, "relations.csv:2: date: "),
    ("sources.csv", {"date": "1703-13-45"}, "sources.csv:2: date: "),
    ("sources.csv", {"calendar": "mayan"}, "sources.csv:2: calendar: "),
    ("persons.csv", {"key": "p anna"}, "persons.csv:2: key: 'p anna' is not a valid key"),
    ("persons.csv", {"name": ""}, "persons.csv:2: name: required"),
    ("memberships.csv", {"group": "p-jost"}, "memberships.csv:2: group: unknown group 'p-jost' ('p-jost' is a person, not a group)"),
    ("places.csv", {"latitude": "north"}, "places.csv:2: latitude: 'north' is not a number"),
]


@pytest.mark.parametrize(("file", "changes", "expected"), BAD_ROWS)
def test_a_bad_cell_is_reported_with_file_line_and_column(database, tmp_path, file, changes, expected):
    world = small_world()
    world[file][0].update(changes)
    before = row_counts(database)
    problems = problems_of(database, write_workbook(tmp_path / "wb", world))
    assert any(p.startswith(expected) for p in problems), problems
    assert row_counts(database) == before


def test_all_problems_are_reported_at_once(database, tmp_path):
    world = small_world()
    world["persons.csv"].append({"key": "p-anna", "name": "Anna again"})  # duplicate key, line 6
    world["relations.csv"][2]["certainty"] = "maybe"  # line 4
    world["facts.csv"][0]["fact"] = "hobby"  # line 2
    problems = problems_of(database, write_workbook(tmp_path / "wb", world))
    assert "persons.csv:6: key: duplicate key 'p-anna' (first used on line 2)" in problems
    assert any(p.startswith("relations.csv:4: certainty:") for p in problems)
    assert any(p.startswith("facts.csv:2: fact: 'hobby'") for p in problems)


def test_a_failing_import_changes_nothing_even_after_many_good_rows(database, tmp_path):
    import_workbook(database, write_workbook(tmp_path / "first", small_world()), size_limit=LIMIT)
    before = row_counts(database)
    world = small_world()
    world["persons.csv"] += [{"key": f"p-new-{i}", "name": f"New Person {i}"} for i in range(50)]
    world["relations.csv"] += [
        {"person": f"p-new-{i}", "other": "p-anna", "kind": "letter", "source": "s-1"} for i in range(50)
    ]
    world["relations.csv"].append({"person": "p-new-1", "other": "p-anna", "kind": "letter", "source": "s-1", "date": "1703-02-30"})
    problems = problems_of(database, write_workbook(tmp_path / "second", world))
    assert len(problems) == 1 and problems[0].startswith("relations.csv:59: date:")
    assert row_counts(database) == before


def test_missing_required_column(database, tmp_path):
    folder = write_workbook(tmp_path / "wb", small_world())
    (folder / "relations.csv").write_text("person,other,kind\np-anna,p-jost,letter\n", encoding="utf-8")
    problems = problems_of(database, folder)
    assert problems == ["relations.csv:1: source: required column(s) missing; the header has person, other, kind"]


def test_empty_file_and_wrong_encoding(database, tmp_path):
    folder = write_workbook(tmp_path / "wb", small_world())
    (folder / "facts.csv").write_bytes(b"")
    (folder / "places.csv").write_bytes("key,name\npl-a,Harwick\npl-b,Sch\u00f6nau\n".encode("latin-1"))
    problems = problems_of(database, folder)
    assert any(p.startswith("facts.csv:1: (file): empty file") for p in problems)
    assert any(p.startswith("places.csv:3: (encoding): not UTF-8 text") for p in problems)
    assert row_counts(database)["person"] == 0


def test_byte_order_mark_is_accepted(database, tmp_path):
    folder = write_workbook(tmp_path / "wb", small_world())
    for csv_file in folder.iterdir():
        csv_file.write_bytes(b"\xef\xbb\xbf" + csv_file.read_bytes())
    report = import_workbook(database, folder, size_limit=LIMIT)
    assert report.rows["persons.csv"]["added"] == 4


def test_size_limit_refuses_before_reading(database, tmp_path):
    folder = write_workbook(tmp_path / "wb", small_world())
    with pytest.raises(WorkbookError) as caught:
        import_workbook(database, folder, size_limit=1000)
    assert "over the import size limit" in str(caught.value)
    assert row_counts(database)["person"] == 0


def test_zip_with_a_path_outside_its_folder_is_refused(database, tmp_path):
    archive = tmp_path / "evil.zip"
    with zipfile.ZipFile(archive, "w") as zf:
        zf.writestr("../persons.csv", "key,name\np-x,X\n")
    with pytest.raises(WorkbookError) as caught:
        import_workbook(database, archive, size_limit=LIMIT)
    assert "../persons.csv:0: (zip): path points outside the workbook folder" in str(caught.value)


def test_wrong_path(database, tmp_path):
    with pytest.raises(WorkbookError) as caught:
        import_workbook(database, tmp_path / "nowhere", size_limit=LIMIT)
    assert "no such file or folder" in str(caught.value)


def test_locked_database_gives_a_clear_message_and_changes_nothing(database, tmp_path):
    folder = write_workbook(tmp_path / "wb", small_world())
    impatient = Database(database.url, busy_timeout_ms=100)
    with database.write() as session:  # another writer holds the lock
        session.execute(text("UPDATE data_version SET version = version"))
        with pytest.raises(DatabaseBusy) as caught:
            import_workbook(impatient, folder, size_limit=LIMIT)
    assert "locked by another process" in str(caught.value)
    assert row_counts(database)["person"] == 0
    impatient.dispose()


def test_membership_terms_must_agree_within_one_import(database, tmp_path):
    world = small_world()
    world["memberships.csv"].append(
        {"person": "p-anna", "group": "g-society", "role": "member", "start": "1705", "source": "s-1"}
    )
    problems = problems_of(database, write_workbook(tmp_path / "wb", world))
    assert problems == ["memberships.csv:4: start: differs from the term given on line 2 for the same membership"]


# --- the demo: a full round trip -----------------------------------------------------------------


def test_demo_round_trip_loses_nothing(database, database_urls, tmp_path):
    first = import_workbook(database, DEMO_WORKBOOK, size_limit=LIMIT)
    assert first.changed_anything
    exported = tmp_path / "exported"
    with database.read() as session:
        export_workbook(session, exported)

    # re-importing what was exported changes nothing in the same database
    before = row_counts(database)
    assert not import_workbook(database, exported, size_limit=LIMIT).changed_anything
    assert row_counts(database) == before

    # and a fresh database fed the export exports the very same files
    fresh = Database(database_urls.new("fresh"))
    import_workbook(fresh, exported, size_limit=LIMIT)
    again = tmp_path / "again"
    with fresh.read() as session:
        export_workbook(session, again)
    names = sorted(p.name for p in exported.iterdir())
    match, mismatch, errors = filecmp.cmpfiles(exported, again, names, shallow=False)
    assert mismatch == [] and errors == []
    assert row_counts(fresh) == {k: v for k, v in before.items()} | {"audit_entry": 1}
    fresh.dispose()


def test_demo_every_input_row_survives_the_round_trip(database, tmp_path):
    """Every attestation key and every demo key comes back in the export."""
    import csv

    import_workbook(database, DEMO_WORKBOOK, size_limit=LIMIT)
    exported = tmp_path / "exported"
    with database.read() as session:
        export_workbook(session, exported)
    for name in ("persons.csv", "sources.csv", "relations.csv", "memberships.csv", "facts.csv", "groups.csv", "places.csv"):
        with open(DEMO_WORKBOOK / name, encoding="utf-8") as handle:
            original = {row["key"] for row in csv.DictReader(handle)}
        with open(exported / name, encoding="utf-8") as handle:
            back = {row["key"] for row in csv.DictReader(handle)}
        assert original <= back, name
    with database.read() as session:
        assert session.scalar(select(func.count()).select_from(Membership)) > 0


# --- cases found in review ------------------------------------------------------------------


def test_a_keyed_change_and_the_old_keyless_row_in_one_import(database, tmp_path):
    """Moving r-1 to another folio and giving the old row without a key keeps both attestations."""
    import_workbook(database, write_workbook(tmp_path / "a", small_world()), size_limit=LIMIT)
    world = small_world()
    moved = dict(world["relations.csv"][0], locus="fol. 2r")
    old_without_key = dict(world["relations.csv"][0], key="")
    world["relations.csv"] = [moved, old_without_key]
    report = import_workbook(database, write_workbook(tmp_path / "b", world), size_limit=LIMIT)
    assert report.rows["relations.csv"]["changed"] == 1 and report.rows["relations.csv"]["added"] == 1
    with database.read() as session:
        loci = set(session.scalars(select(Attestation.locus).join(Source).where(Source.key == "s-1", Attestation.relation_id.is_not(None))))
    assert {"fol. 1r", "fol. 2r"} <= loci


def test_a_corrected_source_calendar_moves_the_dates_that_follow_it(database, tmp_path):
    world = small_world()
    world["relations.csv"].append({"key": "r-own", "person": "p-anna", "other": "p-jost", "kind": "letter", "source": "s-2",
                                   "date": "1703-06-03"})
    import_workbook(database, write_workbook(tmp_path / "a", world), size_limit=LIMIT)
    world["sources.csv"][1]["calendar"] = "gregorian"  # s-2 was entered as Julian by mistake
    import_workbook(database, write_workbook(tmp_path / "b", world), size_limit=LIMIT)
    with database.read() as session:
        own = session.scalar(select(Attestation).where(Attestation.key == "r-own"))
        follows = session.scalar(select(Attestation).where(Attestation.key == "r-2"))
    assert str(own.earliest) == "1703-06-03"  # read in the source's calendar, now Gregorian
    assert str(follows.earliest) == "1703-06-01"  # no date of its own: the source's date


def test_generated_keys_are_the_same_in_two_databases(database, database_urls, tmp_path):
    other = Database(database_urls.new("other"))
    extra = Database(database_urls.new("extra"))
    # a first import of something else shifts the ids of the second database
    import_workbook(extra, write_workbook(tmp_path / "x", {"persons.csv": [{"key": "p-zz", "name": "Someone"}]}), size_limit=LIMIT)
    import_workbook(extra, write_workbook(tmp_path / "a", small_world()), size_limit=LIMIT)
    import_workbook(database, write_workbook(tmp_path / "b", small_world()), size_limit=LIMIT)
    keys = []
    for db in (database, extra):
        with db.read() as session:
            keys.append(set(session.scalars(select(Attestation.key).where(Attestation.key.like("att-%")))))
    assert keys[0] and keys[0] == keys[1]
    other.dispose()
    extra.dispose()


def test_a_copy_of_a_copy_is_refused(database, tmp_path):
    world = small_world()
    world["sources.csv"].append({"key": "s-2cc", "repository": "rep-harwick", "collection": "col-vell", "copy_of": "s-2c"})
    problems = problems_of(database, write_workbook(tmp_path / "wb", world))
    assert problems == ["sources.csv:6: copy_of: 's-2c' is itself a copy; copy_of must name the original"]


def test_a_damaged_zip_gets_our_own_message_and_changes_nothing(database, tmp_path):
    import_workbook(database, write_workbook(tmp_path / "wb", small_world()), size_limit=LIMIT)
    before = row_counts(database)
    archive = tmp_path / "damaged.zip"
    with zipfile.ZipFile(archive, "w", compression=zipfile.ZIP_DEFLATED) as out:
        out.writestr("wb/persons.csv", "key,name\n" + "".join(f"p-n{i},Name {i}\n" for i in range(2000)))
    data = bytearray(archive.read_bytes())
    data[60:120] = b"\0" * 60  # inside the compressed data of persons.csv
    archive.write_bytes(bytes(data))
    problems = problems_of(database, archive)
    assert len(problems) == 1 and "damaged.zip: wb/persons.csv" in problems[0] and "the zip is damaged" in problems[0]
    assert row_counts(database) == before


def test_bulk_writes_keep_keyed_updates_and_keyless_matches_across_many_rows(database, tmp_path):
    """More rows than one bulk batch: a re-import matches every keyless row, and a keyed change updates one."""
    world = small_world()
    world["sources.csv"] += [{"key": f"s-bulk{i}", "kind": "letter", "date": "1710"} for i in range(25_000)]
    world["relations.csv"] += [{"person": "p-anna", "other": "p-jost", "kind": "letter", "source": f"s-bulk{i}"}
                               for i in range(25_000)]
    folder = write_workbook(tmp_path / "wb", world)
    first = import_workbook(database, folder, size_limit=LIMIT)
    assert first.rows["relations.csv"]["added"] == 25_007
    again = import_workbook(database, folder, size_limit=LIMIT)
    assert not again.changed_anything and again.rows["relations.csv"]["unchanged"] == 25_007
    world["relations.csv"][0]["certainty"] = "possible"
    changed = import_workbook(database, write_workbook(tmp_path / "wb2", world), size_limit=LIMIT)
    assert changed.rows["relations.csv"]["changed"] == 1 and changed.rows["relations.csv"]["added"] == 0
