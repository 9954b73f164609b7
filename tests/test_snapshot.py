"""Citable snapshots and CSL-JSON: the content hash is stable for the same data and moves with any change."""

from __future__ import annotations

import io
import json
import re
import zipfile
from pathlib import Path

from fastapi.testclient import TestClient
from sqlalchemy import update

from app.config import database_url
from app.db import Database, upgrade
from app.exchange.csl import csl_items
from app.exchange.snapshot import dataset_version, snapshot_bytes
from app.exchange.workbook import import_workbook
from app.main import create_app
from app.models import Attestation
from app.network.results import get_or_compute
from app.network.slice import Slice
from tests.workbooks import small_world, write_workbook

LIMIT = 200 * 1024 * 1024


def fresh(tmp_path, name: str, world=None) -> Database:  # noqa: ANN001
    db = Database(database_url(tmp_path / f"{name}.db"))
    upgrade(db)
    import_workbook(db, write_workbook(tmp_path / f"wb-{name}", world or small_world()), size_limit=LIMIT)
    return db


def version_of(db: Database) -> str:
    with db.read() as session:
        return dataset_version(session).sha256


def test_the_hash_is_the_same_in_two_fresh_databases_and_moves_with_one_attestation(tmp_path):
    first, second = fresh(tmp_path, "a"), fresh(tmp_path, "b")
    assert version_of(first) == version_of(second)  # no timestamps, ids or dict order in the hashed part
    assert re.fullmatch(r"[0-9a-f]{64}", version_of(first))  # SHA-256 (FIPS 180-4): 64 hex digits
    with second.write() as session:
        session.execute(update(Attestation).where(Attestation.key == "r-1").values(locus="fol. 2r"))
    assert version_of(first) != version_of(second)
    world = small_world()
    world["relations.csv"].reverse()  # rows in another order: the same data
    third = fresh(tmp_path, "c", world)
    assert version_of(third) == version_of(first)
    for db in (first, second, third):
        db.dispose()


def test_the_snapshot_holds_workbook_slice_measures_readme_and_hash(tmp_path):
    db = fresh(tmp_path, "s")
    slice_ = Slice.from_query([("kind", "letter")])
    get_or_compute(db, measure="degree", slice=slice_)
    with db.read() as session:
        data, cited = snapshot_bytes(session, slice_, dataset_name="Vell letters")
        again, _ = snapshot_bytes(session, slice_, dataset_name="Vell letters")
    with zipfile.ZipFile(io.BytesIO(data)) as archive:
        names = set(archive.namelist())
        assert {"snapshot/workbook/relations.csv", "snapshot/slice.json", "snapshot/README.txt", "snapshot/SHA256",
                "snapshot/measures/degree.json", "snapshot/measures/degree.csv"} <= names
        readme = archive.read("snapshot/README.txt").decode()
        assert cited.sha256 in readme and "Vell letters" in readme and "persons" in readme
        assert json.loads(archive.read("snapshot/slice.json"))["query"] == "kind=letter"
        assert archive.read("snapshot/SHA256").decode().startswith(cited.sha256)
    with zipfile.ZipFile(io.BytesIO(again)) as archive:
        assert cited.sha256 in archive.read("snapshot/SHA256").decode()
    db.dispose()


def csl_schema():
    """The CSL data schema's validator (draft 3, as the schema declares itself)."""
    import jsonschema

    return jsonschema.Draft3Validator(json.loads((Path(__file__).resolve().parent / "csl" / "csl-data.json").read_text()))


def test_sources_as_csl_json_follow_the_csl_data_schema(tmp_path):
    db = fresh(tmp_path, "c")
    with db.read() as session:
        items = {item["id"]: item for item in csl_items(session)}
    db.dispose()
    # the published CSL data schema (csl-data.json, shipped in tests/csl/, its README names the package)
    schema = csl_schema()
    assert not list(schema.iter_errors(list(items.values()))), [e.message for e in schema.iter_errors(list(items.values()))]
    assert list(schema.iter_errors([dict(items["s-1"], archive_place="Harwick")]))  # a misspelt field is refused
    # archival items are manuscripts with archive fields (field names as in csl-data.json)
    letter = items["s-1"]
    assert letter["type"] == "manuscript" and letter["archive"] == "Harwick Town Archive"
    assert letter["archive_location"] == "Vell family papers (VFP)" and letter["call-number"] == "VFP 1/1"
    assert letter["issued"]["date-parts"] == [[1703, 5, 12]]
    julian = items["s-2"]  # 1 June 1703 Julian is 12 June Gregorian; date-parts hold Gregorian days
    assert julian["issued"]["date-parts"] == [[1703, 6, 12]] and julian["issued"]["raw"] == "1703-06-01"
    printed = items["s-ed"]  # printed: author, title, publisher, issued, page
    assert printed["type"] == "book" and printed["author"] == [{"literal": "M. Orrin"}]
    assert (printed["title"], printed["publisher"], printed["page"]) == ("Letters of the Vell family", "Harwick Press", "12-14")
    assert printed["issued"] == {"date-parts": [[1888]]}


def test_the_export_page_shows_the_hash_and_the_button_posts_a_snapshot_with_csrf(tmp_path):
    from app.config import Settings

    db = fresh(tmp_path, "p")
    expected = version_of(db)
    client = TestClient(create_app(Settings(database_url=database_url(tmp_path / "p.db"))))
    page = client.get("/export?kind=letter")
    assert expected in page.text and client.get("/api/export").json()["version"]["sha256"] == expected
    token = re.search(r'name="csrf_token" value="([^"]+)"', page.text).group(1)
    action = re.search(r'<form method="post" action="([^"]+)"', page.text).group(1).replace("&amp;", "&")
    assert action == "/export/snapshot?kind=letter"
    assert client.post(action).status_code == 403  # no CSRF token
    snapshot = client.post(action, data={"csrf_token": token})
    assert snapshot.status_code == 200 and snapshot.headers["x-dataset-version"] == expected
    assert zipfile.ZipFile(io.BytesIO(snapshot.content)).read("snapshot/SHA256").decode().startswith(expected)
    db.dispose()


# --- the dataset version kept between writes ------------------------------------------------


def _every_kind_of_edit():
    """(label, edit) pairs: each edit is one write of a form, a merge, a split, a link or an import."""
    from sqlalchemy import select

    from app.auth import Actor
    from app.models import Group, Person, Source
    from app.store import editing, merging

    actor = Actor(name="editor", role="editor")

    def version(session, model, key):  # noqa: ANN001 - the version the form was loaded at
        return session.scalar(select(model.version).where(model.key == key))

    def person(session):
        editing.update_person(session=session, actor=actor, key="p-jost", version=version(session, Person, "p-jost"), name="Jost Brenner the younger",
                              variants="J. Brenner", identifiers="local:JB1|viaf:123")

    def source(session):
        editing.update_source(session=session, actor=actor, key="s-ed", version=version(session, Source, "s-ed"), kind="edition",
                              title="Letters of the Vell family, second edition", year="1890")

    def new_letter(session):
        editing.create_relation(session=session, actor=actor, person="p-council", other="p-jost", kind="letter",
                                attestation=editing.AttestationInput(source="s-1", locus="fol. 9"))

    def attestation(session):
        editing.update_attestation(session=session, actor=actor, key="r-1", version=version(session, Attestation, "r-1"),
                                   attestation=editing.AttestationInput(source="s-2", locus="fol. 2r\r\nverso"))

    def deletion(session):
        editing.delete_attestation(session=session, actor=actor, key="r-2", reason="a misreading")

    def group(session):
        editing.update_group(session=session, actor=actor, key="g-committee", version=version(session, Group, "g-committee"), name="Standing committee",
                             parent="g-society")

    def link(session):
        merging.create_person_link(session=session, actor=actor, key="p-anna", other="p-widow", note="same hand?")

    def split(session):
        merging.split_person(session=session, actor=actor, key="p-anna", new_key="p-anna-2", new_name="Anna Vell the elder",
                             attestations=["r-3"])

    def merge(session):
        merging.merge_persons(session=session, actor=actor, kept="p-jost", absorbed="p-council")

    return [("person", person, {"persons.csv"}), ("source", source, {"sources.csv"}),
            ("new letter", new_letter, {"relations.csv", "memberships.csv", "facts.csv"}),
            ("attestation", attestation, {"relations.csv", "memberships.csv", "facts.csv"}),
            ("deletion", deletion, {"relations.csv", "memberships.csv", "facts.csv"}),
            ("group", group, {"groups.csv"}), ("link", link, set()),
            ("split", split, {"persons.csv", "relations.csv", "memberships.csv", "facts.csv"}),
            ("merge", merge, {"persons.csv", "relations.csv", "memberships.csv", "facts.csv"})]


def test_the_kept_dataset_version_follows_every_kind_of_write_and_reads_only_the_files_it_may_change(tmp_path):
    from app.exchange.snapshot import DatasetVersionKeeper, _workbook_files

    db = fresh(tmp_path, "kept")
    keeper = DatasetVersionKeeper()
    with db.read() as session:
        first = keeper.get(session)
        assert first == dataset_version(session) and len(keeper.files_read) == 10  # every file the first time
        assert keeper.get(session) == first and keeper.files_read == []  # the same data version: nothing read
    seen = {first.sha256}
    for label, edit, files in _every_kind_of_edit():
        with db.write() as session:
            edit(session)
        with db.read() as session:
            kept = keeper.get(session)
            # the definition: SHA-256 of the canonical workbook files, as the snapshot hashes them
            assert kept == dataset_version(session, _workbook_files(session)), label
            assert set(keeper.files_read) == files, label
        assert (kept.sha256 in seen) == (label == "link"), label  # a link is not in the workbook; the rest change it
        seen.add(kept.sha256)
    import_workbook(db, write_workbook(tmp_path / "more", {"persons.csv": [{"key": "p-new", "name": "Ide Quast"}]}),
                    size_limit=LIMIT)
    with db.read() as session:
        assert keeper.get(session) == dataset_version(session, _workbook_files(session))
        assert len(keeper.files_read) == 10  # an import may change any file
    with db.write() as session:  # a write without an audit entry (a script on the database): every file again
        session.execute(update(Attestation).where(Attestation.key == "r-3").values(locus="fol. 7"))
        from app.store.audit import bump_data_version
        bump_data_version(session=session)
    with db.read() as session:
        assert keeper.get(session) == dataset_version(session, _workbook_files(session))
        assert len(keeper.files_read) == 10
    db.dispose()


def test_cells_with_line_breaks_quotes_and_carriage_returns_hash_as_the_files_hold_them(tmp_path):
    """The kept version serialises cells without writing the files; the definition reads the files back.

    Python's csv writer quotes a cell only for the delimiter, the quote character and the line
    terminator's characters (csv module documentation, QUOTE_MINIMAL), so the workbook ends its
    lines with "\r\n" (RFC 4180) and a lone carriage return is quoted and read back whole.
    """
    from app.exchange.snapshot import DatasetVersionKeeper, _workbook_files

    db = fresh(tmp_path, "cr")
    awkward = ["first line\rsecond line", "a \"quoted\", and\r\nbroken\nline", "\ufefftrailing space ", "tab\tand\x0bform"]
    with db.write() as session:
        for key, note in zip(["r-1", "r-2", "r-3"], awkward):
            session.execute(update(Attestation).where(Attestation.key == key).values(note=note, quote=awkward[-1]))
    with db.read() as session:
        files = _workbook_files(session)
        from_files = dataset_version(session, files)
        assert dataset_version(session) == from_files == DatasetVersionKeeper().get(session)
    import csv

    notes = {row["key"]: row["note"] for row in csv.DictReader(io.StringIO(files["relations.csv"].decode("utf-8")))}
    assert [notes["r-1"], notes["r-2"], notes["r-3"]] == awkward[:3]  # the files give every cell back
    db.dispose()
