"""Living persons (marked, or born less than 110 years ago with no death) are hidden from readers everywhere.

Each check asks the real app over HTTP as a signed-in reader and as a signed-in editor, on every
page family (HTML, JSON, SVG, CSV), and looks for every trace of the restricted persons: names,
spellings, keys, identifiers, facts and quotes (tests/accounts_world.py: SECRETS).
"""

from __future__ import annotations

from datetime import date

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select

from app.config import Settings, database_url
from app.db import Database, upgrade
from app.main import create_app
from app.models import StoredMeasure
from app.store.privacy import list_restricted_persons
from app.views import ego as ego_views
from tests.accounts_world import SECRETS, add_role_users, load_restricted_world, sign_in


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    folder = tmp_path_factory.mktemp("personal")
    database = Database(database_url(folder / "attesta.db"))
    upgrade(database)
    load_restricted_world(database, folder)
    add_role_users(database)
    app = create_app(Settings(database_url=database_url(folder / "attesta.db")))
    with TestClient(app) as reader, TestClient(app) as editor:
        assert sign_in(reader, "rhea").status_code == 303
        assert sign_in(editor, "edmund").status_code == 303
        yield database, reader, editor
    database.dispose()


def _relation_id(database: Database, key: str) -> int:
    from app.models import Attestation

    with database.read() as session:
        return session.scalar(select(Attestation.relation_id).where(Attestation.key == key))


def leaks(text: str) -> list[str]:
    return [secret for secret in SECRETS if secret.lower() in text.lower()]


PAGES = [
    "/", "/persons", "/api/persons", "/persons?sort=degree", "/persons/p-anna", "/api/persons/p-anna",
    "/persons/p-jost", "/api/persons/p-jost?relations=all", "/ties/p-anna/p-jost", "/api/ties/p-anna/p-jost",
    "/sources", "/sources/s-1", "/api/sources/s-1", "/sources/s-2", "/sources/s-ed", "/api/sources/s-ed",
    "/collections/col-vell", "/api/collections/col-vell", "/places/pl-harwick", "/api/places/pl-harwick",
    "/repositories/rep-harwick", "/groups", "/api/groups", "/groups/g-society", "/api/groups/g-society",
    "/groups/g-society/members.csv", "/persons/p-anna/ego", "/api/persons/p-anna/ego",
    "/persons/p-anna/ego?radius=2", "/persons/p-anna/ego.svg", "/persons/p-jost/ego.svg?radius=2",
    "/network", "/network/summary", "/api/network/summary", "/network/centrality?measure=degree",
    "/api/network/centrality?measure=degree", "/network/centrality?measure=betweenness&sort=name",
    "/network/centrality?measure=degree&format=csv", "/network/components", "/api/network/components",
    "/network/components?format=csv&table=components", "/network/cut-points", "/api/network/cut-points",
    "/network/cliques?min_size=2", "/api/network/cliques?min_size=2", "/network/communities",
    "/api/network/communities", "/network/two-mode", "/api/network/two-mode",
    "/network/two-mode?format=csv&table=incidence", "/network/two-mode?format=csv&table=person_projection",
    "/network/two-mode?format=csv&table=persons", "/persons/p-anna/measures", "/api/persons/p-anna/measures",
    "/ties/p-anna/p-jost?mode=co-membership",
    # the files of the export page: a reader downloads the slice without the restricted persons' traces
    "/export", "/api/export", "/export/graphml", "/export/nodes.csv", "/export/edges.csv", "/export/matrix.csv",
    "/export/sources.json", "/export/ego.svg?person=p-anna", "/export/ego.svg?person=p-jost&radius=2",
]  # fmt: skip
ABOUT_THEM = ["/persons/p-zorwald", "/api/persons/p-zorwald", "/persons/p-ysolde", "/persons/p-zorwald/ego",
              "/api/persons/p-zorwald/ego", "/persons/p-zorwald/ego.svg", "/ties/p-anna/p-zorwald",
              "/api/ties/p-zorwald/p-anna", "/persons/p-zorwald/measures", "/api/persons/p-ysolde/measures"]


@pytest.mark.parametrize("path", PAGES)
def test_a_reader_sees_no_trace_of_a_restricted_person(world, path):
    database, reader, editor = world
    response = reader.get(path)
    assert response.status_code == 200, response.text[:300]
    assert leaks(response.text) == []


def test_the_relation_page_of_a_restricted_person_hides_them_from_a_reader_and_shows_an_editor(world):
    database, reader, editor = world
    relation = _relation_id(database, "r-z1")
    for path in (f"/relations/{relation}", f"/api/relations/{relation}"):
        response = reader.get(path)
        assert response.status_code in (200, 403) and leaks(response.text) == []
        assert "restricted person" in response.text
        assert "fol. 9r" not in response.text  # the locus of its evidence, too
        assert "Zorwald Quenneby" in editor.get(path).text


@pytest.mark.parametrize("path", ABOUT_THEM)
def test_pages_about_a_restricted_person_are_refused_to_a_reader_and_shown_to_an_editor(world, path):
    database, reader, editor = world
    response = reader.get(path)
    assert response.status_code == 403
    assert leaks(response.text) == []
    assert "restricted person" in response.text
    shown = editor.get(path)
    assert shown.status_code == 200
    assert "Zorwald" in shown.text or "Ysolde" in shown.text


def test_a_reader_sees_restricted_person_in_lists_drawings_and_ranks_where_the_editor_sees_names(world):
    database, reader, editor = world
    for path in ("/persons", "/persons/p-anna", "/persons/p-anna/ego.svg", "/network/centrality?measure=degree",
                 "/groups/g-society", "/sources/s-1"):
        assert "restricted person" in reader.get(path).text, path
        assert "Zorwald Quenneby" in editor.get(path).text, path
        assert "restricted person" not in editor.get(path).text, path
    # the person born 1890 with no death is 136 years back: not restricted by the 110-year rule
    assert "Oswin Tarrant" in reader.get("/persons").text
    # measures keep their figures: the reader's degree table has as many rows with the same values
    mine = reader.get("/api/network/centrality?measure=degree").json()["rows"]
    theirs = editor.get("/api/network/centrality?measure=degree").json()["rows"]
    assert sorted(r["raw"] for r in mine) == sorted(r["raw"] for r in theirs)
    restricted = [r for r in mine if r["key"] == "restricted"]
    assert len(restricted) == 2 and all(r["name"] == "restricted person" for r in restricted)


def test_a_search_never_finds_a_restricted_person_by_any_spelling(world):
    database, reader, editor = world
    for q in ("Zorwald", "zorvald quenby", "Quenneby", "Ysolde", "Marrack"):
        found = reader.get("/api/persons", params={"q": q}).json()["result"]
        assert found["total"] == 0 and found["rows"] == [], q
        assert editor.get("/api/persons", params={"q": q}).json()["result"]["total"] >= 1, q
    # the whole list shows them last, not where their names would sort
    rows = reader.get("/api/persons", params={"sort": "name"}).json()["result"]["rows"]
    assert [r["name"] for r in rows[-2:]] == ["restricted person", "restricted person"]
    assert all(r["born"] in ("", None) and r["died"] in ("", None) for r in rows[-2:])


@pytest.mark.parametrize("order", ["asc", "desc"])
def test_a_rank_table_sorted_by_name_puts_restricted_persons_last_whatever_their_names(world, order):
    database, reader, editor = world
    query = f"/api/network/centrality?measure=degree&sort=name&order={order}"
    mine = reader.get(query).json()["rows"]
    theirs = editor.get(query).json()["rows"]
    # "Zorwald" and "Ysolde" sort last ascending and first descending: the reader's rows must not follow them
    assert [r["name"] for r in mine[-2:]] == ["restricted person"] * 2
    assert [r["key"] for r in mine[:-2]] == [r["key"] for r in theirs if r["key"] not in ("p-zorwald", "p-ysolde")]
    # among themselves they keep rank order, which the reader sees anyway
    assert [r["rank"] for r in mine[-2:]] == sorted(r["rank"] for r in mine[-2:])
    page = reader.get(f"/network/centrality?measure=degree&sort=name&order={order}").text
    assert leaks(page) == []


def test_stored_results_are_keyed_by_the_viewers_visibility(world):
    database, reader, editor = world
    reader.get("/api/network/centrality?measure=closeness")
    editor.get("/api/network/centrality?measure=closeness")
    with database.read() as session:
        kept = set(session.scalars(select(StoredMeasure.visibility).where(StoredMeasure.measure == "closeness")))
    assert kept == {"public", "all"}
    # the editor's stored copy holds the names, and the reader's answer, read from the reader's copy, does not
    assert "Zorwald" not in reader.get("/network/centrality?measure=closeness").text
    assert "Zorwald" in editor.get("/network/centrality?measure=closeness").text


def test_kept_ego_panels_are_keyed_by_visibility(world):
    database, reader, editor = world
    ego_views._PANELS.clear()
    assert "Zorwald" in editor.get("/persons/p-anna/ego").text  # kept for the editor first
    assert leaks(reader.get("/persons/p-anna/ego").text) == []  # then the reader asks
    visibilities = {key[2] for key in ego_views._PANELS}
    assert visibilities == {"all", "public"}
    assert "Zorwald" in editor.get("/persons/p-anna/ego").text  # and the editor's kept panel is still whole


def test_the_living_rule_follows_the_setting_and_the_date(world):
    database = world[0]
    with database.read() as session:
        rule_110 = list_restricted_persons(session=session, living_years=110, today=date(2026, 12, 2))
        rule_off = list_restricted_persons(session=session, living_years=0, today=date(2026, 12, 2))
        rule_140 = list_restricted_persons(session=session, living_years=140, today=date(2026, 12, 2))
        later = list_restricted_persons(session=session, living_years=110, today=date(2061, 1, 1))
    assert rule_110.keys == {"p-zorwald", "p-ysolde"}  # marked living; born 1950 with no death
    assert rule_off.keys == {"p-zorwald"}  # only the mark
    assert rule_140.keys == {"p-zorwald", "p-ysolde", "p-oldtimer"}  # born 1890
    assert later.keys == {"p-zorwald"}  # in 2061 the one born in 1950 is 110


def test_the_slice_files_leave_restricted_persons_out_and_stay_valid(world):
    import io

    import networkx as nx
    from lxml import etree

    from tests.test_graphml import graphml_schema

    database, reader, editor = world
    mine = reader.get("/export/graphml?kind=letter").content
    assert leaks(mine.decode()) == []
    assert graphml_schema().validate(etree.fromstring(mine))  # still valid GraphML (published GraphML 1.0 schema)
    G = nx.read_graphml(io.BytesIO(mine))
    theirs = nx.read_graphml(io.BytesIO(editor.get("/export/graphml?kind=letter").content))
    assert "p-zorwald" not in G and "p-zorwald" not in theirs  # left out for every role unless an admin asks
    assert "p-anna" in G and set(G) == set(theirs)
    assert reader.get("/export/ego.svg?person=p-zorwald").status_code == 403  # a drawing about them
    assert editor.get("/export/ego.svg?person=p-zorwald").status_code == 403
    whole = reader.get("/export/workbook.zip")
    import zipfile

    assert whole.status_code == 200
    with zipfile.ZipFile(io.BytesIO(whole.content)) as archive:
        assert not any("Zorwald" in archive.read(name).decode() for name in archive.namelist())


def test_the_redactor_remembers_texts_without_changing_what_it_leaves_or_hides():
    from app.store.persons import PersonRef
    from app.store.privacy import RestrictedPersons
    from app.views.redaction import Redactor

    restricted = RestrictedPersons(frozenset({7}), frozenset({"p-zorwald"}), ("Zorwald Quill",))
    redactor = Redactor(restricted)
    note = "letter to Zorwald Quill (p-zorwald)"
    for _ in range(2):  # the second time from what it remembers
        assert redactor.text("".join(note)) == "letter to restricted person (restricted)"
    # a view with nothing to hide comes back as the very object, even when its texts are equal copies of
    # texts seen before (an equal copy is not taken for a change, so nothing is copied)
    seen = [PersonRef(key="p-anna", name="Anna Vell", kind="individual", unidentified=False)]
    assert redactor.redact(seen) is seen
    again = [PersonRef(key="".join(["p-", "anna"]), name=" ".join(["Anna", "Vell"]), kind="individual", unidentified=False)]
    assert redactor.redact(again) is again
    hidden = redactor.redact([*again, PersonRef(key="p-zorwald", name="Zorwald Quill", kind="individual", unidentified=False)])
    assert [(ref.key, ref.name) for ref in hidden] == [("p-anna", "Anna Vell"), ("restricted", "restricted person")]


def test_a_write_that_changes_no_restricted_person_keeps_the_redactor(world):  # the last test: it adds a person
    database, reader, editor = world
    app = reader.app
    assert leaks(reader.get("/persons/p-anna").text) == []
    before = app.state.restricted_persons
    token = editor.get("/new/person").text.split('name="csrf_token" value="', 1)[1].split('"', 1)[0]
    assert editor.post("/new/person", data={"csrf_token": token, "key": "p-newcomer", "name": "Newcomer Fenn"},
                       follow_redirects=False).status_code == 303
    assert leaks(reader.get("/persons/p-anna").text) == []
    after = app.state.restricted_persons
    assert after[0] != before[0]  # looked up again at the new data version,
    assert after[1] is before[1] and app.state.redactor.restricted is before[1]  # and the same persons kept
