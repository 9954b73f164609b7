"""small_world() with a few more rows, for the tests of the persons and ties pages.

Added to tests/workbooks.small_world():

- Anna Vell gets identifiers (wikidata, viaf, gnd, an ISNI written with spaces, a local one) and a
  cited fact (occupation: bookseller, from the printed edition).
- José Marteau (p-jose) wrote two letters to Jost Brenner known only from mentions: in s-1,
  fol. 1v, dated 1702-12, probable; in s-2, dated 1703-03 (Julian), possible.
- A corporate body whose name is markup, `<script>alert(1)</script> & "Co"` (p-xss), has a
  business tie with the Council of Ostmere in the edition, with a quote and a name as written
  that are markup too.
- Hans Brenne (p-hans), with no evidence at all: a near spelling of "Brenner".
- After the import, the council's letter to Anna (its only attestation) is deleted.

Counts on paper (attestations not deleted, of relations + memberships + facts; a self-loop
attestation counts once):

    p-jost    letters r-1, r-2, r-3 + sibling x2 + José's letters x2 + m-2 + f-1   = 9
    p-anna    letters r-1, r-2, r-3 + sibling x2 + m-1 + the bookseller fact        = 7
              (the council's letter is deleted)
    p-jose    two letters                                                         = 2
    p-xss     the business tie                                                    = 1
    p-council the business tie (its letter to Anna is deleted)                    = 1
    p-widow   the self-addressed draft                                            = 1
    p-hans                                                                        = 0

Degree (distinct other persons with a live relation; self-loops do not count):

    p-jost 2 (Anna, José); p-anna 1 (Jost; the council's letter is deleted); p-jose 1;
    p-xss 1; p-council 1 (p-xss); p-widow 0; p-hans 0
"""

from __future__ import annotations

import shutil
from collections.abc import Iterator
from datetime import datetime
from pathlib import Path

import pytest
from sqlalchemy import select, update

from app.config import database_url
from app.db import Database, upgrade
from app.exchange.workbook import import_workbook
from app.models import Attestation, Person, Relation
from tests.workbooks import small_world, write_workbook

XSS_NAME = '<script>alert(1)</script> & "Co"'
XSS_QUOTE = 'a <b>bold</b> & <script>steal()</script> "deal"'
XSS_WRITTEN = '"Co" <i>& partners</i>'


def evidence_world() -> dict[str, list[dict[str, str]]]:
    """Return the tables of small_world() with the rows listed in the module docstring."""
    world = small_world()
    anna = next(row for row in world["persons.csv"] if row["key"] == "p-anna")
    anna["identifiers"] = "wikidata:Q4115189|viaf:12345|gnd:118-5|isni:0000 0001 2345 6789|local:AV7"
    world["persons.csv"] += [
        {"key": "p-jose", "name": "José Marteau", "variants": "Iosephus Martellus"},
        {"key": "p-xss", "name": XSS_NAME, "kind": "corporate"},
        {"key": "p-hans", "name": "Hans Brenne"},
    ]
    world["relations.csv"] += [
        {"person": "p-jose", "other": "p-jost", "kind": "letter", "source": "s-1", "locus": "fol. 1v",
         "evidence": "mention", "date": "1702-12", "certainty": "probable"},
        {"person": "p-jose", "other": "p-jost", "kind": "letter", "source": "s-2", "evidence": "mention",
         "date": "1703-03", "calendar": "julian", "certainty": "possible"},
        {"person": "p-xss", "other": "p-council", "kind": "business", "source": "s-ed", "evidence": "edition",
         "quote": XSS_QUOTE, "person_as_written": XSS_WRITTEN, "note": "<em>note</em>"},
    ]  # fmt: skip
    world["facts.csv"] += [
        {"key": "f-2", "person": "p-anna", "fact": "occupation", "value": "bookseller", "source": "s-ed",
         "locus": "p. 13", "certainty": "probable"},
    ]  # fmt: skip
    return world


def build_evidence_world(database: Database, folder: Path) -> None:
    """Import evidence_world() through the real import, then delete the council's letter to Anna."""
    import_workbook(database, write_workbook(folder, evidence_world()), size_limit=10**9)
    with database.write() as session:
        council, anna = (session.scalar(select(Person.id).where(Person.key == key)) for key in ("p-council", "p-anna"))
        relation = session.scalar(select(Relation.id).where(Relation.person_a_id == council, Relation.person_b_id == anna))
        session.execute(
            update(Attestation).where(Attestation.relation_id == relation)
            .values(deleted_at=datetime(2026, 1, 5), deleted_reason="the letter is to her brother")
        )  # fmt: skip


# Importing the world takes a good part of a second; each module builds it once, and every test
# works on its own copy of the file, so a test that writes changes nothing for the others.


@pytest.fixture(scope="module")
def world_file(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A database file holding the evidence world, built once per test module."""
    path = tmp_path_factory.mktemp("world") / "attesta.db"
    database = Database(database_url(path))
    upgrade(database)
    build_evidence_world(database, path.parent / "workbook")
    database.dispose()  # the last connection closing folds the write-ahead log into the file
    return path


@pytest.fixture
def world(world_file: Path, tmp_path: Path) -> Iterator[Database]:
    """A fresh copy of the evidence world for one test."""
    path = tmp_path / "attesta.db"
    shutil.copyfile(world_file, path)
    database = Database(database_url(path))
    yield database
    database.dispose()
