"""The import pages: upload, mapping step, preview, duplicates, confirmation, bad input (counted, not mocked)."""

from __future__ import annotations

import csv
import io
import re
import time
import zipfile
from pathlib import Path

import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient
from openpyxl import Workbook
from sqlalchemy import select

from app.config import Settings
from app.exchange.duplicates import Candidate, find_duplicates
from app.exchange.workbook import FILES, export_workbook
from app.main import create_app
from app.models import Person, PersonLink
from tests.test_workbook import row_counts
from tests.workbooks import small_world, write_workbook


@pytest.fixture
def client(settings):
    with TestClient(create_app(settings)) as c:
        yield c


def csrf(client: TestClient) -> str:
    return re.search(r'name="csrf_token" value="([^"]+)"', client.get("/import").text).group(1)


def upload(client: TestClient, files: list[tuple[str, bytes]]) -> str:
    response = client.post("/api/import", data={"csrf_token": csrf(client)},
                           files=[("files", (name, data, "application/octet-stream")) for name, data in files])
    assert response.status_code == 201, response.text
    return response.json()["url"]


def settle(client: TestClient, url: str) -> dict:
    """Follow the upload's page until its preview or import has finished (the work runs in a thread)."""
    for _ in range(300):
        state = client.get("/api" + url).json()
        if state["stage"] not in ("previewing", "importing"):
            return state
        time.sleep(0.05)
    raise AssertionError(f"still running: {state}")


def confirm(client: TestClient, url: str, fingerprint: str, **pairs: str) -> dict:
    response = client.post(url + "/confirm", data={"csrf_token": csrf(client), "fingerprint": fingerprint, **pairs},
                           follow_redirects=False)
    assert response.status_code == 303, response.text
    return settle(client, url)


def csv_files(folder: Path) -> list[tuple[str, bytes]]:
    return [(p.name, p.read_bytes()) for p in sorted(folder.iterdir())]


def test_preview_counts_are_what_the_confirmation_writes(client, database, tmp_path):
    before = row_counts(database)
    url = upload(client, csv_files(write_workbook(tmp_path / "wb", small_world())))
    state = settle(client, url)
    assert state["stage"] == "preview"
    preview = state["task"]["preview"]
    assert preview["problem_count"] == 0
    assert row_counts(database) == before  # the preview wrote nothing
    counts = preview["counts"]
    assert counts["persons"] == {"added": 4, "changed": 0, "unchanged": 0}
    assert counts["attestations"]["added"] == 10 and counts["relations"]["added"] == 5
    page = BeautifulSoup(client.get(url).text, "html.parser")
    assert page.select_one('tr[data-kind="persons"] .added').text.strip() == "4"

    done = confirm(client, url, preview["fingerprint"])
    assert done["stage"] == "imported", done
    after = row_counts(database)
    assert after["person"] - before["person"] == counts["persons"]["added"]
    assert after["attestation"] - before["attestation"] == counts["attestations"]["added"]
    assert after["relation"] - before["relation"] == counts["relations"]["added"]
    assert after["membership"] - before["membership"] == counts["memberships"]["added"]

    # the same workbook again: the preview says everything is left as it is
    again = settle(client, upload(client, csv_files(tmp_path / "wb")))["task"]["preview"]
    assert again["counts"]["persons"] == {"added": 0, "changed": 0, "unchanged": 4}
    assert again["counts"]["attestations"] == {"added": 0, "changed": 0, "unchanged": 10}


def test_confirm_is_refused_when_the_data_changed_or_the_upload_was_imported(client, database, tmp_path):
    url = upload(client, csv_files(write_workbook(tmp_path / "wb", small_world())))
    stale = settle(client, url)["task"]["preview"]["fingerprint"]
    other = upload(client, [("persons.csv", b"key,name\np-zed,Zed Orrin\n")])
    confirm(client, other, settle(client, other)["task"]["preview"]["fingerprint"])
    before = row_counts(database)
    refused = client.post(url + "/confirm", data={"csrf_token": csrf(client), "fingerprint": stale})
    assert refused.status_code == 409 and "changed since this preview" in refused.text
    gone = client.post(other + "/confirm", data={"csrf_token": csrf(client), "fingerprint": stale})
    assert gone.status_code == 410
    assert client.get("/api/import/no-such-token").status_code == 410
    assert row_counts(database) == before


def test_confirm_needs_the_csrf_token(client, tmp_path):
    url = upload(client, csv_files(write_workbook(tmp_path / "wb", small_world())))
    fingerprint = settle(client, url)["task"]["preview"]["fingerprint"]
    assert client.post(url + "/confirm", data={"fingerprint": fingerprint}).status_code == 403


def test_problems_name_file_line_and_column_and_change_nothing(client, database, tmp_path):
    world = small_world()
    world["persons.csv"][1]["born"] = "not a date"
    world["relations.csv"][0]["kind"] = "lettre"
    before = row_counts(database)
    preview = settle(client, upload(client, csv_files(write_workbook(tmp_path / "wb", world))))["task"]["preview"]
    where = {(p["file"], p["line"], p["column"]) for p in preview["problems"]}
    assert ("persons.csv", 3, "born") in where and ("relations.csv", 2, "kind") in where
    assert preview["problem_count"] == 2
    assert row_counts(database) == before


def xlsx_of(tables: dict[str, list[dict[str, str]]], formula: bool = False) -> bytes:
    book = Workbook()
    book.remove(book.active)
    for name, rows in tables.items():
        sheet = book.create_sheet(name.removesuffix(".csv"))
        columns = FILES[name].columns
        sheet.append(list(columns))
        for row in rows:
            sheet.append([row.get(c, "") for c in columns])
    if formula:
        book["persons"]["L2"] = '="a note"'  # the note of the first person, as a formula with no saved value
    data = io.BytesIO()
    book.save(data)
    return data.getvalue()


def exported(database, folder: Path) -> dict[str, str]:
    with database.read() as session:
        export_workbook(session, folder)
    return {p.name: p.read_text() for p in sorted(folder.iterdir())}


def test_xlsx_and_csv_give_the_same_import(client, database, tmp_path, settings):
    url = upload(client, csv_files(write_workbook(tmp_path / "wb", small_world())))
    confirm(client, url, settle(client, url)["task"]["preview"]["fingerprint"])
    from_csv = exported(database, tmp_path / "out-csv")

    other_db = tmp_path / "other.db"
    from app.config import database_url
    from app.db import Database, upgrade

    second = Database(database_url(other_db))
    upgrade(second)
    with TestClient(create_app(Settings(database_url=database_url(other_db)))) as c2:
        url = upload(c2, [("world.xlsx", xlsx_of(small_world()))])
        state = settle(c2, url)
        assert state["stage"] == "preview", state
        confirm(c2, url, state["task"]["preview"]["fingerprint"])
    from_xlsx = exported(second, tmp_path / "out-xlsx")
    second.dispose()
    assert from_xlsx == from_csv


def test_xlsx_formulas_are_reported(client, tmp_path):
    preview = settle(client, upload(client, [("world.xlsx", xlsx_of(small_world(), formula=True))]))["task"]["preview"]
    assert any("cell L2: formula" in w and "no saved value" in w for w in preview["warnings"])


def test_mapping_step_maps_other_column_names_and_reuses_the_mapping(client, database, tmp_path):
    upload_url = upload(client, [("world.xlsx", xlsx_of({k: v for k, v in small_world().items() if k != "relations.csv"}))])
    confirm(client, upload_url, settle(client, upload_url)["task"]["preview"]["fingerprint"])
    letters = b"Sender,Recipient,Date of letter,Document,Type\np-anna,p-jost,1705-01-02,s-1,letter\n"
    url = upload(client, [("letters.csv", letters)])
    state = client.get("/api" + url).json()
    assert state["stage"] == "mapping"
    (mapping,) = state["mappings"]
    assert mapping["file"] == "relations.csv"
    assert mapping["columns"] == {"Sender": "person", "Recipient": "other", "Date of letter": "date",
                                  "Document": "source", "Type": "kind"}
    form = {"csrf_token": csrf(client), "file:letters.csv": "relations.csv",
            **{f"column:letters.csv:{h}": f for h, f in mapping["columns"].items()}}
    assert client.post(url + "/mapping", data=form, follow_redirects=False).status_code == 303
    preview = settle(client, url)["task"]["preview"]
    assert preview["problem_count"] == 0 and preview["counts"]["attestations"]["added"] == 1
    saved = client.get(url + "/mapping.json").content
    # the saved mapping, uploaded beside the next file of the same shape, skips the mapping step
    again = upload(client, [("letters.csv", letters.replace(b"1705-01-02", b"1706")), ("mapping.json", saved)])
    state = settle(client, again)
    assert state["stage"] == "preview" and state["task"]["preview"]["counts"]["attestations"]["added"] == 1


def test_an_edge_list_is_recognised_and_asked_about(client, tmp_path):
    url = upload(client, csv_files(write_workbook(tmp_path / "wb", small_world())))
    confirm(client, url, settle(client, url)["task"]["preview"]["fingerprint"])
    edges = b"source,target,weight\np-anna,p-jost,2\np-jost,p-council,1\n"
    url = upload(client, [("edges.csv", edges)])
    state = client.get("/api" + url).json()
    assert state["stage"] == "mapping"
    (mapping,) = state["mappings"]
    assert mapping["edge_list"] and mapping["file"] == "relations.csv"
    assert mapping["columns"]["source"] == "person" and mapping["columns"]["target"] == "other"
    assert any("edge list" in r for r in mapping["reasons"])
    page = BeautifulSoup(client.get(url).text, "html.parser")
    assert page.select_one(".notice.edge-list") is not None
    form = {"csrf_token": csrf(client), "file:edges.csv": "relations.csv", "column:edges.csv:source": "person",
            "column:edges.csv:target": "other", "column:edges.csv:weight": "", "fixed:edges.csv:source": "s-ed",
            "fixed:edges.csv:kind": "business"}
    client.post(url + "/mapping", data=form)
    preview = settle(client, url)["task"]["preview"]
    assert preview["problem_count"] == 0
    assert preview["counts"]["relations"]["added"] == 2
    # a source/target sheet whose source column holds documents is not taken for an edge list
    docs = client.get("/api" + upload(client, [("edges.csv", b"source,target\ns-1,s-2\n")])).json()
    assert not docs["mappings"][0]["edge_list"]


# Variant spellings built by hand: the same persons written as other scribes would (accents, doubled
# letters, word order), and near names that are other persons (lives apart, or another number).
VARIANTS = [
    ("Jost Brenner", "Joost Brener", "1660", "1720", "1661", ""),
    ("Anna Vell", "Änna Vel", "1680", "1731", "", ""),
    ("Hinrik Oskamp", "Oskamp Hinrik", "1650", "1701", "1650~", "1702"),
    ("Mette Roderink", "Mette Rodering", "", "", "1690", ""),
    ("Gerrit Wendering", "Gerrit Wenderinck", "1700", "1760", "1700", "1760"),
]
NOT_THE_SAME = [
    ("Lambert Quast", "Lambert Quast", "1600", "1650", "1700", "1760"),  # same name, lives a century apart
    ("Evert Hulsberg 1", "Evert Hulsberg 2", "", "", "", ""),  # numbered apart
    ("Tilde Abeln", "Aleid Tessel", "", "", "", ""),  # other names
]


def test_duplicate_suggestions_on_known_variant_spellings():
    stored, new = [], []
    from app.dates import interval_or_none

    def day(text, end=False):  # noqa: ANN001, ANN202
        if not text:
            return None
        interval = interval_or_none(text, "gregorian")
        return interval.latest if end else interval.earliest

    for n, (a, b, born_a, died_a, born_b, died_b) in enumerate(VARIANTS + NOT_THE_SAME):
        stored.append(Candidate(f"s{n}", a, (), day(born_a), day(died_a, True), stored=True))
        new.append(Candidate(f"n{n}", b, (), day(born_b), day(died_b, True)))
    found = {(s.new_key, s.other_key) for s in find_duplicates(new, stored)}
    expected = {(f"n{n}", f"s{n}") for n in range(len(VARIANTS))}
    assert expected <= found
    for n in range(len(VARIANTS), len(VARIANTS) + len(NOT_THE_SAME)):
        assert not any(pair[0] == f"n{n}" and pair[1] == f"s{n}" for pair in found)


def test_duplicates_are_confirmed_kept_apart_or_linked(client, database, tmp_path):
    url = upload(client, csv_files(write_workbook(tmp_path / "wb", small_world())))
    confirm(client, url, settle(client, url)["task"]["preview"]["fingerprint"])
    persons = b"key,name,born\nn-jost,Joost Brener,1681\nn-anna,Anna Vel,\nn-other,Tilde Abeln,\n"
    relations = b"person,other,kind,source\nn-jost,n-anna,business,s-1\n"
    url = upload(client, [("persons.csv", persons), ("relations.csv", relations)])
    preview = settle(client, url)["task"]["preview"]
    pairs = {(d["new_key"], d["other_key"]) for d in preview["duplicates"]}
    assert {("n-jost", "p-jost"), ("n-anna", "p-anna")} <= pairs
    assert not any(new == "n-other" for new, _ in pairs)
    before = row_counts(database)
    done = confirm(client, url, preview["fingerprint"], **{"pair-1": "same|n-jost|p-jost", "pair-2": "link|n-anna|p-anna"})
    assert done["stage"] == "imported", done
    with database.read() as session:
        keys = set(session.scalars(select(Person.key)))
        assert "n-jost" not in keys and "n-anna" in keys  # the same: mapped onto p-jost; linked: kept
        assert session.query(PersonLink).count() == 1
    assert row_counts(database)["person"] == before["person"] + 2
    # the link is shown on both person pages
    for key, other in (("p-anna", "n-anna"), ("n-anna", "p-anna")):
        page = BeautifulSoup(client.get(f"/persons/{key}").text, "html.parser")
        assert page.select_one(f'.same-as li[data-other="{other}"]') is not None


# --- bad input: a clear message, and the data as it was ---------------------------------------


def test_bad_uploads_are_refused_and_change_nothing(client, database, tmp_path):
    url = upload(client, csv_files(write_workbook(tmp_path / "wb", small_world())))
    confirm(client, url, settle(client, url)["task"]["preview"]["fingerprint"])
    before = row_counts(database)

    latin = settle(client, upload(client, [("persons.csv", "key,name\np-x,Jos\xe9\n".encode("latin-1"))]))
    assert latin["task"]["preview"]["problems"][0]["file"] == "persons.csv"
    assert "not UTF-8" in latin["task"]["preview"]["problems"][0]["reason"]

    evil = io.BytesIO()
    with zipfile.ZipFile(evil, "w") as archive:
        archive.writestr("../persons.csv", "key,name\np-x,X\n")
    refused = settle(client, upload(client, [("evil.zip", evil.getvalue())]))["task"]["preview"]
    assert "outside the workbook folder" in refused["problems"][0]["reason"]

    good = io.BytesIO()
    with zipfile.ZipFile(good, "w", compression=zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("wb/persons.csv", "key,name\n" + "".join(f"p-n{i},Name {i}\n" for i in range(2000)))
    damaged = bytearray(good.getvalue())
    damaged[60:120] = b"\0" * 60  # inside the compressed data
    broken = settle(client, upload(client, [("broken.zip", bytes(damaged))]))["task"]["preview"]
    assert broken["problem_count"] == 1 and "damaged" in broken["problems"][0]["reason"]
    assert "broken.zip" in broken["problems"][0]["file"]

    not_a_book = settle(client, upload(client, [("book.xlsx", b"this is no workbook")]))["task"]["preview"]
    assert "not a readable .xlsx" in not_a_book["problems"][0]["reason"]
    assert row_counts(database) == before


def test_an_upload_over_the_limit_is_refused_while_streaming(db_path, database, tmp_path):
    from app.config import database_url

    settings = Settings(database_url=database_url(db_path), upload_limit_bytes=100_000)
    before = row_counts(database)
    with TestClient(create_app(settings)) as c:
        token = csrf(c)
        big = b"key,name\n" + b"".join(b"p-%d,Name %d\n" % (i, i) for i in range(200_000))

        def chunks():  # noqa: ANN202 - no Content-Length: the body must be counted as it comes
            boundary = b"--xx\r\n"
            yield boundary + b'Content-Disposition: form-data; name="csrf_token"\r\n\r\n' + token.encode() + b"\r\n"
            yield boundary + b'Content-Disposition: form-data; name="files"; filename="persons.csv"\r\n\r\n'
            for i in range(0, len(big), 65536):
                yield big[i:i + 65536]
            yield b"\r\n--xx--\r\n"

        response = c.post("/import", content=chunks(), headers={"Content-Type": "multipart/form-data; boundary=xx"})
        assert response.status_code == 413 and "size limit" in response.text
        declared = c.post("/import", data={"csrf_token": token}, files=[("files", ("persons.csv", big, "text/csv"))])
        assert declared.status_code == 413
    root = Path(str(db_path) + "-uploads")
    assert not root.exists() or not any(root.iterdir())
    assert row_counts(database) == before


def test_the_menu_links_the_import_page_for_editors(client):
    page = BeautifulSoup(client.get("/").text, "html.parser")
    assert page.select_one('.site-nav a[href="/import"]') is not None


def test_progress_route_counts_rows_and_reloads_the_page_when_done(client, tmp_path):
    persons = "key,name\n" + "".join(f"p-{i},Person {i}\n" for i in range(5000))
    url = upload(client, [("persons.csv", persons.encode())])
    client.get(url)  # starts the preview
    state = settle(client, url)
    progress = client.get("/api" + url + "/progress").json()["task"]
    assert progress["done"] == progress["total"] == 5000
    assert state["task"]["preview"]["counts"]["persons"]["added"] == 5000
    partial = client.get(url + "/progress", headers={"HX-Request": "true"})
    assert partial.headers.get("HX-Refresh") == "true"
    assert client.get("/import/unknown-token/progress").status_code == 404
