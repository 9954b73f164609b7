"""TEI letters and GraphML graphs through the upload page over HTTP: preview, confirm, all or nothing.

The TEI files in tests/tei/ follow the shape of the examples of the TEI P5 Guidelines, chapter 2
"The TEI Header", section 2.4.6 "Correspondence Description"; the GraphML files are written by
networkx (``nx.write_graphml``, the reference writer) and follow the GraphML Primer
(graphml.graphdrawing.org): ``<key>`` declarations and ``<data>`` values.
"""

from __future__ import annotations

import io
from pathlib import Path

import networkx as nx
from bs4 import BeautifulSoup
from sqlalchemy import select

from app.exchange.workbook import import_workbook
from app.models import Attestation, Person, PersonIdentifier, Relation, Repository, Source
from tests.test_import_pages import client, confirm, csrf, settle, upload  # noqa: F401 - the client fixture
from tests.test_workbook import row_counts
from tests.workbooks import small_world, write_workbook

TEI = Path(__file__).resolve().parent / "tei"
LIMIT = 200 * 1024 * 1024
TITLE = "graph received from a colleague, file letters.graphml"


def tei(name: str) -> tuple[str, bytes]:
    return name, (TEI / name).read_bytes()


def a_graph(kind: str | None = "letter") -> bytes:
    G = nx.DiGraph()
    G.add_node("p-ida", name="Ida Marrow", born="1690", wikidata="Q99999903", town="Ostmere")
    G.add_node("p-oswin", name="Oswin Tarr")
    G.add_edge("p-ida", "p-oswin", weight=3.0, date="1712", **({"kind": kind} if kind else {}))
    G.add_edge("p-oswin", "p-ida", **({"kind": kind} if kind else {}))
    buffer = io.BytesIO()
    nx.write_graphml(G, buffer)  # networkx's writer, the reference
    return buffer.getvalue()


def test_a_tei_letter_is_previewed_then_imported_in_one_confirmation(client, database):
    before = row_counts(database)
    url = upload(client, [tei("letter_single.xml")])
    state = settle(client, url)
    assert state["stage"] == "preview", state
    preview = state["task"]["preview"]
    assert preview["problem_count"] == 0
    assert row_counts(database) == before  # the preview wrote nothing
    counts = preview["counts"]
    # one correspDesc: one source, its sender and addressee, one directed letter tie (TEI P5 2.4.6)
    assert counts["persons"] == {"added": 2, "changed": 0, "unchanged": 0}
    assert counts["sources"]["added"] == 1 and counts["relations"]["added"] == 1
    assert counts["attestations"]["added"] == 1 and counts["repositories"]["added"] == 1
    page = BeautifulSoup(client.get(url).text, "html.parser")
    assert page.select_one('tr[data-kind="persons"] .added').text.strip() == "2"
    assert page.select_one("button.confirm") is not None
    assert "Change the column mapping" not in page.text  # a TEI file has no columns to map

    done = confirm(client, url, preview["fingerprint"])
    assert done["stage"] == "imported", done
    after = row_counts(database)
    assert after["person"] - before["person"] == 2 and after["relation"] - before["relation"] == 1
    with database.read() as session:
        letter = session.scalar(select(Source).where(Source.key == "tei-vell-0001"))
        assert letter.received_text == "[1703-05-20..1703-06-15]"  # notBefore/notAfter: the EDTF one-of set
        sender = session.scalar(select(Person).join(PersonIdentifier).where(PersonIdentifier.value == "Q99999901"))
        assert sender.name == "Anne Vel"
    assert "Anne Vel" in client.get("/persons?q=Anne").text

    again = settle(client, upload(client, [tei("letter_single.xml")]))["task"]["preview"]
    assert again["counts"]["persons"] == {"added": 0, "changed": 0, "unchanged": 2}
    assert again["counts"]["sources"] == {"added": 0, "changed": 0, "unchanged": 1}


def test_tei_persons_and_archives_are_matched_to_stored_ones_before_the_write(client, database, tmp_path):
    world = small_world()
    world["persons.csv"][0]["identifiers"] = "wikidata:Q99999901"  # Anna Vell, the letter's ref
    import_workbook(database, write_workbook(tmp_path / "wb", world), size_limit=LIMIT)
    before = row_counts(database)
    url = upload(client, [tei("letter_single.xml")])
    preview = settle(client, url)["task"]["preview"]
    # the sender by her ref's identifier, the addressee by key="p-jost", the archive by its name
    assert preview["counts"]["persons"]["added"] == 0
    assert preview["counts"]["repositories"] == {"added": 0, "changed": 0, "unchanged": 1}
    assert preview["counts"]["collections"] == {"added": 0, "changed": 0, "unchanged": 1}
    assert preview["duplicates"] == []  # matched persons are the stored ones, not likely duplicates of them
    confirm(client, url, preview["fingerprint"])
    after = row_counts(database)
    assert (after["person"], after["repository"], after["collection"]) == (
        before["person"], before["repository"], before["collection"])
    with database.read() as session:
        letter = session.scalar(select(Source).where(Source.key == "tei-vell-0001"))
        assert letter.collection.key == "col-vell"
        tie = session.scalar(select(Relation).join(Attestation).where(Attestation.source_id == letter.id))
        assert (session.get(Person, tie.person_a_id).key, session.get(Person, tie.person_b_id).key) == ("p-anna", "p-jost")
        assert session.scalar(select(Repository.name).where(Repository.key == "rep-harwick")) == "Harwick Town Archive"


def test_a_graphml_upload_asks_for_its_source_before_the_preview(client, database):
    before = row_counts(database)
    url = upload(client, [("letters.graphml", a_graph())])
    state = client.get("/api" + url).json()
    assert state["stage"] == "source" and state["graph_files"] == ["letters.graphml"]
    page = BeautifulSoup(client.get(url).text, "html.parser")
    assert page.select_one("form input[name=graphml_source][required]") is not None
    refused = client.post(url + "/source", data={"csrf_token": csrf(client), "graphml_source": "  "})
    assert refused.status_code == 400 and "graphml_source is required" in refused.text
    assert client.post(url + "/source", data={"graphml_source": TITLE}).status_code == 403  # no CSRF token

    named = client.post(url + "/source", data={"csrf_token": csrf(client), "graphml_source": TITLE},
                        follow_redirects=False)
    assert named.status_code == 303
    state = settle(client, url)
    assert state["stage"] == "preview" and state["graphml_source"] == TITLE
    preview = state["task"]["preview"]
    assert preview["counts"]["persons"]["added"] == 2 and preview["counts"]["relations"]["added"] == 2
    assert preview["counts"]["sources"]["added"] == 1  # the one source the user named
    assert row_counts(database) == before
    assert TITLE in client.get(url).text

    done = confirm(client, url, preview["fingerprint"])
    assert done["stage"] == "imported", done
    with database.read() as session:
        source = session.scalar(select(Source).where(Source.title == TITLE))
        attestations = session.scalars(select(Attestation)).all()
        assert len(attestations) == 2 and all(a.source_id == source.id for a in attestations)
        assert any("weight=3.0" in (a.note or "") for a in attestations)  # another tool's weight kept as a note
        ida = session.scalar(select(Person).where(Person.key == "p-ida"))
        assert ida.born_text == "1690" and "town=Ostmere" in ida.note


def test_a_source_named_at_upload_goes_straight_to_the_preview_and_a_new_source_needs_a_new_preview(client, database):
    response = client.post("/api/import", data={"csrf_token": csrf(client), "graphml_source": TITLE, "graphml_kind": "friendship"},
                           files=[("files", ("g.graphml", a_graph(kind=None), "application/xml"))])
    url = response.json()["url"]
    preview = settle(client, url)["task"]["preview"]
    assert preview["problem_count"] == 0, preview["problems"]
    # edges whose kind is empty take the kind named at upload (friendship is undirected: a note says so)
    assert any("undirected kind 'friendship'" in w for w in preview["warnings"])
    stale = preview["fingerprint"]
    client.post(url + "/source", data={"csrf_token": csrf(client), "graphml_source": "another source"})
    refused = client.post(url + "/confirm", data={"csrf_token": csrf(client), "fingerprint": stale})
    assert refused.status_code == 409  # the preview was made with the other source
    fresh = settle(client, url)["task"]["preview"]
    assert fresh["fingerprint"] != stale
    confirm(client, url, fresh["fingerprint"])
    with database.read() as session:
        assert session.scalars(select(Source.title)).all() == ["another source"]
        assert {r.kind.key for r in session.scalars(select(Relation))} == {"friendship"}


def test_bad_letters_and_graphs_get_their_file_and_line_and_nothing_is_written(client, database):
    before = row_counts(database)
    bad_graph = b"""<?xml version="1.0"?>
<graphml xmlns="http://graphml.graphdrawing.org/xmlns">
  <graph edgedefault="directed">
    <node id="a"/>
    <edge source="a" target="z"/>
  </graph>
</graphml>"""
    response = client.post("/api/import", data={"csrf_token": csrf(client), "graphml_source": TITLE},
                           files=[("files", (name, data, "application/xml"))
                                  for name, data in (tei("letter_single.xml"), ("bad.graphml", bad_graph))])
    preview = settle(client, response.json()["url"])["task"]["preview"]
    # the good letter is not imported alone: one upload, all or nothing
    assert [(p["file"], p["line"], p["column"]) for p in preview["problems"]] == [("bad.graphml", 5, "edge/@target")]
    assert "button" not in str(BeautifulSoup(client.get(response.json()["url"]).text, "html.parser").select_one("#import-status"))

    empty = settle(client, upload(client, [tei("no_correspdesc.xml")]))["task"]["preview"]
    assert empty["problems"][0]["file"] == "no_correspdesc.xml" and "correspDesc" in empty["problems"][0]["reason"]
    bomb = settle(client, upload(client, [tei("bomb.xml")]))["task"]["preview"]
    assert bomb["problem_count"] == 1 and "entit" in bomb["problems"][0]["reason"]
    external = settle(client, upload(client, [tei("external_entity.xml")]))["task"]["preview"]
    assert external["problem_count"] == 1 and "entit" in external["problems"][0]["reason"]
    assert row_counts(database) == before


def test_the_upload_form_offers_letters_and_graphs(client):
    form = BeautifulSoup(client.get("/import").text, "html.parser")
    accept = form.select_one("input[type=file]")["accept"].split(",")
    assert ".xml" in accept and ".graphml" in accept
    assert form.select_one("input[name=graphml_source]") is not None
    assert ".graphml (a GraphML graph)" in client.get("/api/import").json()["accepted"]
