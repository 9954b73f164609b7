"""GraphML in and out, checked against the GraphML schema and against networkx's reader and writer."""

from __future__ import annotations

import io
from pathlib import Path

import networkx as nx
import pytest
from fastapi.testclient import TestClient
from lxml import etree
from sqlalchemy import func, select

from app.config import Settings
from app.exchange.graphml import import_graphml
from app.exchange.network_export import slice_export, to_graphml
from app.exchange.workbook import WorkbookError, import_workbook
from app.main import create_app
from app.models import Attestation, Base, Person, PersonIdentifier, Relation, Source
from app.network.slice import Slice
from tests.workbooks import small_world, write_workbook

SCHEMA_DIR = Path(__file__).resolve().parent / "graphml"
LIMIT = 200 * 1024 * 1024
TITLE = "graph received from a colleague, file letters.graphml"


def graphml_schema() -> etree.XMLSchema:
    """The published GraphML 1.0 schema (graphml.graphdrawing.org), shipped in tests/graphml/ (its README names the package)."""
    return etree.XMLSchema(etree.parse(str(SCHEMA_DIR / "graphml.xsd")))


def row_counts(database) -> dict[str, int]:  # noqa: ANN001
    with database.read() as session:
        return {t.name: session.scalar(select(func.count()).select_from(t)) for t in Base.metadata.sorted_tables}


@pytest.fixture
def world(database, tmp_path):
    import_workbook(database, write_workbook(tmp_path / "wb", small_world()), size_limit=LIMIT)
    return database


def test_the_slice_as_graphml_is_valid_against_the_graphml_schema(world):
    with world.read() as session:
        data = to_graphml(slice_export(session, Slice()))
    schema = graphml_schema()  # the published GraphML 1.0 schema (graphml.graphdrawing.org)
    assert schema.validate(etree.fromstring(data)), schema.error_log
    broken = etree.fromstring(data.replace(b'target="p-jost"', b'target="nobody"', 1))
    assert not schema.validate(broken)  # an edge to no node is refused by the schema's keyref edge_target_ref
    assert "edge_target_ref" in str(schema.error_log)
    undeclared = etree.fromstring(data.replace(b'<data key="', b'<data key="undeclared-', 1))
    assert not schema.validate(undeclared)  # a data element naming no key: keyref data_key_ref
    reference = io.BytesIO()
    nx.write_graphml(nx.karate_club_graph(), reference)  # networkx's writer and its Zachary dataset
    assert schema.validate(etree.fromstring(reference.getvalue())), schema.error_log


def test_the_slice_as_graphml_reads_back_in_networkx_with_its_attributes(world):
    with world.read() as session:
        export = slice_export(session, Slice())
        G = nx.read_graphml(io.BytesIO(to_graphml(export)))  # networkx is the reference reader
    assert set(G) == {n.key for n in export.nodes}
    assert G.nodes["p-anna"]["name"] == "Anna Vell" and G.nodes["p-anna"]["born"] == "1680~"
    assert G.nodes["p-jost"]["identifiers"] == "local:JB1"
    edge = G.edges["p-jost", "p-anna"]
    # letters s-2 and its copy s-2c count as one document; the edition s-ed and s-1 (sibling) are two more
    assert edge["kind"] == "letter|sibling" and edge["attestations"] == 4 and edge["documents"] == 3
    assert edge["source_keys"] == "s-1|s-2|s-2c|s-ed"
    assert G.graph["data_version"] == export.data_version


def test_a_graph_written_by_networkx_imports_with_all_its_attributes(database):
    G = nx.DiGraph()
    G.add_node("p-ida", name="Ida Marrow", born="1690", died="1741~", wikidata="Q99999903", town="Ostmere")
    G.add_node("p-oswin", label="Oswin Tarr", kind="corporate")
    G.add_edge("p-ida", "p-oswin", kind="letter", weight=3.0, date="1712", certainty="probable", mood="warm")
    G.add_edge("p-oswin", "p-ida", weight=1.0)
    buffer = io.BytesIO()
    nx.write_graphml(G, buffer)  # networkx's writer, the reference
    report = import_graphml(database, buffer.getvalue(), "letters.graphml", source_title=TITLE)
    assert report.created["relations"] == 2
    with database.read() as session:
        ida = session.scalar(select(Person).where(Person.key == "p-ida"))
        assert (ida.name, ida.born_text, ida.died_text) == ("Ida Marrow", "1690", "1741~")
        assert "town=Ostmere" in ida.note
        assert session.execute(select(PersonIdentifier.scheme, PersonIdentifier.value)).all() == [("wikidata", "Q99999903")]
        oswin = session.scalar(select(Person).where(Person.key == "p-oswin"))
        assert (oswin.name, oswin.kind) == ("Oswin Tarr", "corporate")
        source = session.scalar(select(Source))
        assert source.title == TITLE  # the provenance the user named
        attestations = session.scalars(select(Attestation).order_by(Attestation.id)).all()
        assert all(a.source_id == source.id and a.evidence == "mention" for a in attestations)
        letter = attestations[0]
        assert (letter.date_text, letter.certainty, letter.locus) == ("1712", "probable", "edge 1")
        assert "weight=3.0" in letter.note and "mood=warm" in letter.note
        tie = session.scalar(select(Relation).where(Relation.id == attestations[1].relation_id))
        assert tie.kind.key == "tie" and tie.kind.directed  # no kind given: the default kind, directed as the graph
    before = row_counts(database)
    again = import_graphml(database, buffer.getvalue(), "letters.graphml", source_title=TITLE)
    assert not again.changed_anything and row_counts(database) == before


def test_our_own_graphml_imports_into_a_fresh_database_with_the_same_ties(world, tmp_path):
    from app.config import database_url
    from app.db import Database, upgrade

    with world.read() as session:
        data = to_graphml(slice_export(session, Slice()))
    other = Database(database_url(tmp_path / "other.db"))
    upgrade(other)
    import_graphml(other, data, "slice.graphml", source_title="our own export")
    with other.read() as session:
        assert session.scalar(select(func.count()).select_from(Person)) == 3
        kinds = {r.kind.key for r in session.scalars(select(Relation))}
        assert kinds == {"letter", "sibling"}
    other.dispose()


def test_bad_graphml_gets_messages_with_lines_and_changes_nothing(database):
    before = row_counts(database)
    bad = b"""<?xml version="1.0"?>
<graphml xmlns="http://graphml.graphdrawing.org/xmlns">
  <graph edgedefault="undirected">
    <node id="a"/>
    <node id="bad id"/>
    <edge source="a" target="z"/>
  </graph>
</graphml>"""
    with pytest.raises(WorkbookError) as caught:
        import_graphml(database, bad, "bad.graphml", source_title=TITLE, kind="letter")
    problems = [str(p) for p in caught.value.problems]
    assert any(p.startswith("bad.graphml:5: node/@id:") for p in problems)
    assert any(p.startswith("bad.graphml:6: edge/@target:") for p in problems)
    assert row_counts(database) == before
    with pytest.raises(WorkbookError) as undirected:
        import_graphml(database, bad.replace(b'<node id="bad id"/>', b"").replace(b'target="z"', b'target="a"'),
                       "u.graphml", source_title=TITLE, kind="letter")
    assert "undirected edge cannot be a tie of the directed kind 'letter'" in str(undirected.value)
    with pytest.raises(WorkbookError) as untitled:
        import_graphml(database, bad, "bad.graphml", source_title=" ")
    assert "name the source" in str(untitled.value)
    assert row_counts(database) == before


# An entity expansion ("billion laughs") and an external entity, the two attacks the Python
# documentation's "XML vulnerabilities" table lists for XML parsers; common practice: refuse any DTD entity.
GRAPHML_BOMB = b"""<?xml version="1.0"?>
<!DOCTYPE graphml [
  <!ENTITY lol "lol">
  <!ENTITY lol2 "&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;">
  <!ENTITY lol3 "&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;">
]>
<graphml xmlns="http://graphml.graphdrawing.org/xmlns">
  <key id="n" for="node" attr.name="name" attr.type="string"/>
  <graph edgedefault="directed"><node id="a"><data key="n">&lol3;</data></node><node id="b"/><edge source="a" target="b"/></graph>
</graphml>"""
GRAPHML_EXTERNAL = b"""<?xml version="1.0"?>
<!DOCTYPE graphml [ <!ENTITY secret SYSTEM "file:///etc/passwd"> ]>
<graphml xmlns="http://graphml.graphdrawing.org/xmlns">
  <key id="n" for="node" attr.name="name" attr.type="string"/>
  <graph edgedefault="directed"><node id="a"><data key="n">&secret;</data></node><node id="b"/><edge source="a" target="b"/></graph>
</graphml>"""


@pytest.mark.parametrize("name, data", [("bomb.graphml", GRAPHML_BOMB), ("external.graphml", GRAPHML_EXTERNAL)])
def test_graphml_with_entities_is_refused_with_a_clear_message_and_changes_nothing(database, name, data):
    before = row_counts(database)
    with pytest.raises(WorkbookError) as caught:
        import_graphml(database, data, name, source_title=TITLE, kind="letter")
    message = str(caught.value)
    assert name in message and "entit" in message.lower(), message
    assert "root:" not in message  # nothing of /etc/passwd is read into the message
    assert row_counts(database) == before


def test_export_routes_answer_every_file_of_the_slice(world, settings):
    client = TestClient(create_app(settings))
    graphml = client.get("/export/graphml?kind=letter")
    assert graphml.status_code == 200 and graphml_schema().validate(etree.fromstring(graphml.content))
    assert b"sibling" not in graphml.content  # the slice of the query string
    nodes = client.get("/export/nodes.csv").text.splitlines()
    assert nodes[0].startswith("key,name,kind,unidentified,born,died,identifiers")
    matrix = client.get("/export/matrix.csv").text.splitlines()
    assert matrix[0] == ",p-anna,p-council,p-jost" and matrix[3] == "p-jost,3.0,0.0,0.0"
    png = client.get("/export/ego.png?person=p-anna")
    assert png.status_code == 200 and png.content.startswith(b"\x89PNG\r\n\x1a\n")  # the PNG signature (RFC 2083)
    assert client.get("/export/ego.png?person=nobody").status_code == 404
    assert client.get("/export/graphml?certainty=sure").status_code == 400
    person = client.get("/persons/p-anna").text
    assert "/export/graphml" in person and "/export/ego.png?person=p-anna" in person
    assert "/export/graphml" in client.get("/network/summary").text
