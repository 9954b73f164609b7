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
