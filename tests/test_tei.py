"""TEI correspondence import, checked against the TEI P5 Guidelines' correspondence description.

The files in tests/tei/ follow the shape of the examples of the TEI P5 Guidelines, chapter 2
"The TEI Header", section 2.4.6 "Correspondence Description" (``correspDesc`` holding
``correspAction type="sent"|"received"`` with ``persName``, ``placeName`` and ``date``); the
people, places and archives in them are invented.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from sqlalchemy import func, select

from app.exchange.tei import import_tei, read_tei
from app.exchange.workbook import WorkbookError, import_workbook
from app.models import Attestation, Base, Person, PersonIdentifier, PersonName, Relation, Source
from tests.workbooks import small_world, write_workbook

TEI = Path(__file__).resolve().parent / "tei"
LIMIT = 200 * 1024 * 1024


def tei(name: str) -> bytes:
    return (TEI / name).read_bytes()


def row_counts(database) -> dict[str, int]:  # noqa: ANN001
    with database.read() as session:
        return {t.name: session.scalar(select(func.count()).select_from(t)) for t in Base.metadata.sorted_tables}


def refused(database, name: str) -> list[str]:  # noqa: ANN001
    before = row_counts(database)
    with pytest.raises(WorkbookError) as caught:
        import_tei(database, tei(name), name)
    assert row_counts(database) == before  # nothing written
    return [str(p) for p in caught.value.problems]


def test_a_letter_becomes_a_source_with_both_dates_places_and_one_directed_tie(database):
    report = import_tei(database, tei("letter_single.xml"), "letter_single.xml")
    assert report.created["relations"] == 1
    with database.read() as session:
        letter = session.scalar(select(Source).where(Source.key == "tei-vell-0001"))  # key from publicationStmt/idno
        assert letter.kind == "letter"
        assert letter.date_text == "1703-05-12"  # correspAction[@type=sent]/date/@when
        # notBefore/notAfter: one day in a range, the EDTF one-of set, not an interval (EDTF level 2)
        assert letter.received_text == "[1703-05-20..1703-06-15]"
        assert (letter.received_earliest.isoformat(), letter.received_latest.isoformat()) == ("1703-05-20", "1703-06-15")
        assert letter.place_from.name == "Harwick" and letter.place_to.name == "Ostmere"
        assert letter.place_from.identifier == "https://example.org/places/harwick"  # placeName/@ref kept
        assert letter.collection.name == "Vell family papers" and letter.reference == "VFP 1/1"  # msIdentifier
        assert letter.collection.repository.name == "Harwick Town Archive"
        relation = session.scalar(select(Relation))
        assert relation.kind.key == "letter" and relation.kind.directed
        sender = session.get(Person, relation.person_a_id)
        addressee = session.get(Person, relation.person_b_id)
        assert (sender.name, addressee.key) == ("Anne Vel", "p-jost")  # persName/@key is the person's key
        ids = session.execute(select(PersonIdentifier.scheme, PersonIdentifier.value)).all()
        assert ("wikidata", "Q99999901") in ids  # persName/@ref kept as an identifier
        attestation = session.scalar(select(Attestation))
        assert attestation.name_a_as_written == "Anne Vel" and attestation.source_id == letter.id


def test_several_senders_and_addressees_give_a_tie_for_every_pair(database):
    report = import_tei(database, tei("letters_index.xml"), "letters_index.xml")
    assert report.rows["letters_index.xml [sources]"]["added"] == 2
    with database.read() as session:
        pairs = {(session.get(Person, r.person_a_id).key, session.get(Person, r.person_b_id).key)
                 for r in session.scalars(select(Relation))}
        # 2 senders x 2 addressees in the first letter, and the answer of the second
        assert pairs == {("orrin", "p-council"), ("orrin", "gnd-999000222X"), ("p-anna", "p-council"),
                         ("p-anna", "gnd-999000222X"), ("gnd-999000222X", "orrin")}
        council = session.scalar(select(Person).where(Person.key == "p-council"))
        assert council.kind == "corporate"  # orgName
        orrin = session.scalar(select(Person).where(Person.key == "orrin"))
        assert orrin.name == "Mattheus Orrin"  # ref="#orrin" resolved to the listPerson entry
        spellings = set(session.scalars(select(PersonName.name).where(PersonName.person_id == orrin.id)))
        assert {"M. Orrin", "Orrin"} <= spellings
        answer = session.scalar(select(Source).where(Source.key == "tei-hs-13"))
        assert answer.date_text == "[1731-05-01..1731-06-15]" and answer.calendar == "julian"
        first = session.scalar(select(Source).where(Source.key == "tei-hs-12"))
        assert first.date_text == "1712-03/1712-04"  # from/to is a span: the EDTF interval
        probable = session.scalars(select(Attestation.certainty)).all()
        assert probable.count("probable") == 2  # persName/@cert="medium" on the addressee


def test_persons_are_matched_to_stored_ones_by_key_and_by_identifier(database, tmp_path):
    world = small_world()
    world["persons.csv"][0]["identifiers"] = "wikidata:Q99999901"  # Anna Vell, known by her Wikidata item
    import_workbook(database, write_workbook(tmp_path / "wb", world), size_limit=LIMIT)
    persons_before = row_counts(database)["person"]
    import_tei(database, tei("letter_single.xml"), "letter_single.xml")
    with database.read() as session:
        assert session.scalar(select(func.count()).select_from(Person)) == persons_before  # nobody new
        anna = session.scalar(select(Person).where(Person.key == "p-anna"))
        assert anna.name == "Anna Vell"  # the stored name is kept
        relation = session.scalar(select(Relation).join(Source, Source.key == "tei-vell-0001")
                                  .join(Attestation, Attestation.relation_id == Relation.id)
                                  .where(Attestation.source_id == Source.id))
        assert relation.person_a_id == anna.id


def test_an_archive_named_like_a_stored_one_is_that_one_not_a_second(database, tmp_path):
    world = small_world()
    world["repositories.csv"][0]["name"] = "HARWICK  Town archive"  # case and spacing differ from the TEI's
    world["repositories.csv"].append({"key": "rep-other", "name": "Ostmere Archive"})
    world["collections.csv"].append({"key": "col-other", "repository": "rep-other", "name": "Vell family papers"})
    import_workbook(database, write_workbook(tmp_path / "wb", world), size_limit=LIMIT)
    before = row_counts(database)
    import_tei(database, tei("letter_single.xml"), "letter_single.xml")  # msIdentifier names the archive only by name
    after = row_counts(database)
    assert (after["repository"], after["collection"]) == (before["repository"], before["collection"])
    with database.read() as session:
        letter = session.scalar(select(Source).where(Source.key == "tei-vell-0001"))
        # the collection of that name in that repository, not the one of the same name elsewhere
        assert (letter.collection.key, letter.collection.repository.key) == ("col-vell", "rep-harwick")
        assert letter.collection.repository.name == "HARWICK  Town archive"  # the stored name is kept
    again = import_tei(database, tei("letter_single.xml"), "letter_single.xml")
    assert not again.changed_anything


def test_importing_the_same_file_again_changes_nothing(database):
    import_tei(database, tei("letters_index.xml"), "letters_index.xml")
    before = row_counts(database)
    again = import_tei(database, tei("letters_index.xml"), "letters_index.xml")
    assert not again.changed_anything
    assert row_counts(database) == before


def test_an_xml_bomb_is_refused_with_a_clear_message(database):
    (problem,) = refused(database, "bomb.xml")
    assert problem.startswith("bomb.xml:3:") and "entity" in problem and "refused" in problem


def test_an_external_entity_is_refused_and_nothing_is_read(database):
    (problem,) = refused(database, "external_entity.xml")
    assert "external entit" in problem and "/etc/passwd" in problem
    assert "root:" not in problem


def test_a_tei_file_without_correspdesc_gets_a_clear_message(database):
    (problem,) = refused(database, "no_correspdesc.xml")
    assert "no teiHeader/profileDesc/correspDesc" in problem and problem.startswith("no_correspdesc.xml:3:")


def test_a_bad_date_points_at_its_line_and_attribute(database):
    bad = tei("letter_single.xml").replace(b'when="1703-05-12"', b'when="1703-13-40"')
    with pytest.raises(WorkbookError) as caught:
        import_tei(database, bad, "bad.xml")
    (problem,) = [str(p) for p in caught.value.problems]
    assert problem.startswith("bad.xml:23: date/@when:")  # the line of the <date> element


def test_not_well_formed_xml_is_refused_with_its_line(database):
    tables, problems = read_tei(b"<TEI>\n<teiHeader>\n</TEI>", "broken.xml")
    assert not tables and problems[0].file == "broken.xml" and problems[0].line >= 2


def test_the_examples_in_the_tei_module_hold():
    import doctest

    import app.exchange.tei

    assert doctest.testmod(app.exchange.tei).failed == 0
