"""The groups index and the page of one group, with their JSON twins, over HTTP on a real database.

The data is imported through the workbook: the parish world of tests/twomode_world.py (terms
and register dates checked on paper, names with markup) and the Southern Women data of Davis,
Gardner & Gardner (1941) as shipped with networkx, whose co-attendances give the neighbourhood
of each event.
"""

from __future__ import annotations

import csv
import dataclasses
import io
from datetime import datetime
import math
from pathlib import Path
from urllib.parse import parse_qsl, urlsplit

import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient
from lxml import etree
from sqlalchemy import update

from app.config import Settings, database_url
from app.db import Database, upgrade
from app.exchange.workbook import import_workbook
from app.main import create_app
from app.models import Attestation
from app.network.drawing import short_label
from app.network.group_drawing import GroupDrawing, GroupDrawnEdge, GroupDrawnNode, GroupNeighbourhood, SharedGroup
from app.network.slice import Slice
from app.store.attestations import CitedAttestation
from app.store.groups import GroupDetail, GroupList, GroupListRow, GroupMember, SubGroup, TermDate
from app.views.groups import GroupPage, GroupsPage
from tests.twomode_world import DAVIS, EVENTS, MARKUP_GROUP, MARKUP_PERSON, davis_workbook, event_key, parish_workbook, woman_key
from tests.workbooks import write_workbook


def world() -> dict[str, list[dict[str, str]]]:
    tables = parish_workbook()
    for name, rows in davis_workbook().items():
        tables[name] = tables.get(name, []) + rows
    return tables


def make_settings(folder: Path) -> tuple[Settings, Database]:
    database = Database(database_url(folder / "attesta.db"))
    upgrade(database)
    import_workbook(database, write_workbook(folder / "wb", world()), size_limit=10**9)
    return Settings(database_url=database_url(folder / "attesta.db")), database


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    settings, database = make_settings(tmp_path_factory.mktemp("groups"))
    database.dispose()
    with TestClient(create_app(settings)) as test_client:
        yield test_client


def soup_of(response) -> BeautifulSoup:  # noqa: ANN001
    assert response.status_code == 200, response.text
    return BeautifulSoup(response.text, "lxml")


def same_link(href: str, path: str, query: list[tuple[str, str]]) -> bool:
    parts = urlsplit(href)
    return parts.path == path and sorted(parse_qsl(parts.query)) == sorted(query)


# --- the index ----------------------------------------------------------------------------------


def test_index_lists_parents_before_their_sub_groups_with_live_member_counts(client: TestClient):
    rows = client.get("/api/groups").json()["result"]["rows"]
    keys = [row["key"] for row in rows]
    assert len(rows) == 3 + 14
    assert keys.index("g-guild") == keys.index("g-confraternity") + 1
    by_key = {row["key"]: row for row in rows}
    assert (by_key["g-guild"]["depth"], by_key["g-guild"]["parent_key"]) == (1, "g-confraternity")
    assert by_key["g-confraternity"]["sub_groups"] == 1 and by_key["g-confraternity"]["members"] == 0
    assert by_key["g-parish"]["members"] == 4 and by_key["g-guild"]["members"] == 2
    assert {e: by_key[event_key(e)]["members"] for e in EVENTS} == {e: DAVIS.degree(e) for e in EVENTS}
    roots = [row["name"] for row in rows if row["depth"] == 0]
    assert roots.index("Confraternity of Østmere") < roots.index("Event 1") < roots.index("St. Ælfric, Østmere")
    assert (by_key["g-parish"]["place"], by_key["g-parish"]["start"]) == ("Østmere", "1600~")


def test_page_and_json_twin_show_the_same_rows(client: TestClient):
    body = client.get("/api/groups").json()["result"]
    page = soup_of(client.get("/groups"))
    rows = page.select("#group-rows table.groups-table tbody tr")
    assert [tr["data-key"] for tr in rows] == [row["key"] for row in body["rows"]]
    for tr, row in zip(rows, body["rows"]):
        assert int(tr.select_one("td.members")["data-value"]) == row["members"]
        assert tr.select_one("a.group-link")["href"] == f"/groups/{row['key']}"
        assert int(tr["data-depth"]) == row["depth"]
    assert page.select_one('nav.site-nav a[aria-current="page"]').get_text() == "Groups"
    kinds = [o["value"] for o in page.select("select#group-kind option")]
    assert kinds == ["", "confraternity", "event", "guild", "parish"]
    # htmx asks for the rows only
    partial = client.get("/groups?q=event", headers={"HX-Request": "true"})
    fragment = BeautifulSoup(partial.text, "lxml")
    assert fragment.select_one("html head title") is None and fragment.select_one("section#group-rows") is not None
    assert len(fragment.select("tbody tr")) == 14


@pytest.mark.parametrize(
    "query, expected",
    [
        ("q=ostmere", ["g-confraternity", "g-parish"]),  # Østmere, whatever the accents
        ("q=%C3%86LFRIC", ["g-parish"]),  # "ÆLFRIC"
        ("q=aelfric", ["g-parish"]),
        ("q=event 1", ["g-e1", "g-e10", "g-e11", "g-e12", "g-e13", "g-e14"]),
        ("kind=guild", ["g-guild"]),
        ("q=%25", []),  # a percent sign is a letter to find, not a wildcard
    ],
)
def test_search_folds_case_and_accents_and_the_kind_filters(client: TestClient, query: str, expected: list[str]):
    body = client.get(f"/api/groups?{query}").json()["result"]
    assert [row["key"] for row in body["rows"]] == expected
    assert body["total"] == len(expected) and body["all_groups"] == 17


def test_a_sub_group_found_without_its_parent_names_the_parent(client: TestClient):
    rows = client.get("/api/groups?q=smiths").json()["result"]["rows"]
    assert [(r["key"], r["depth"], r["parent_key"]) for r in rows] == [("g-guild", 0, "g-confraternity")]
    row = soup_of(client.get("/groups?q=smiths")).select_one('tr[data-key="g-guild"]')
    assert row.select_one(".parent-note a")["href"] == "/groups/g-confraternity"


def test_an_unknown_kind_is_a_400_naming_the_kinds(client: TestClient):
    response = client.get("/api/groups?kind=monastery")
    assert response.status_code == 400
    assert response.json()["detail"] == "kind=monastery is not accepted; accepted: one of confraternity, event, guild, parish"
    page = client.get("/groups?kind=monastery")
    assert page.status_code == 400
    assert "confraternity, event, guild, parish" in BeautifulSoup(page.text, "lxml").select_one("#error .error-detail").get_text()


# --- one group ----------------------------------------------------------------------------------------


def members_of(soup: BeautifulSoup) -> dict[tuple[str, str], BeautifulSoup]:
    return {(li["data-person"], li["data-role"]): li for li in soup.select("#members li.membership")}


def test_group_page_shows_place_dates_parent_and_sub_groups(client: TestClient):
    soup = soup_of(client.get("/groups/g-guild"))
    assert soup.select_one("h1").get_text(" ", strip=True).startswith(MARKUP_GROUP)
    assert soup.select_one('dd[data-field="parent"] a')["href"] == "/groups/g-confraternity"
    assert [a["href"] for a in soup.select(".breadcrumbs a")] == ["/groups", "/groups/g-confraternity"]
    parent = soup_of(client.get("/groups/g-confraternity"))
    assert parent.select_one('dd[data-field="place"] a')["href"] == "/places/pl-ostmere"
    assert parent.select_one('dd[data-field="start"] .date-written').get_text() == "1640"
    assert "1720-01-01 – 1720-12-31" in parent.select_one('dd[data-field="end"]').get_text()
    assert [li["data-key"] for li in parent.select("ul.sub-groups li")] == ["g-guild"]
    body = client.get("/api/groups/g-confraternity").json()["group"]
    assert body["end"] == {"text": "1720", "earliest": "1720-01-01", "latest": "1720-12-31", "interval": "1720-01-01 – 1720-12-31"}
    assert body["sub_groups"] == [{"key": "g-guild", "name": MARKUP_GROUP, "kind": "guild", "members": 2}]


def test_members_with_roles_terms_and_the_dates_of_their_attestations(client: TestClient):
    soup = soup_of(client.get("/groups/g-parish"))
    members = members_of(soup)
    assert set(members) == {("p-aart", "member"), ("p-bette", "member"), ("p-cas", "churchwarden"), ("p-dirk", "member")}
    assert [li["data-person"] for li in soup.select("#members li.membership")] == ["p-dirk", "p-bette", "p-cas", "p-aart"]

    def dates(li) -> tuple[str, list[str]]:  # noqa: ANN001
        term = li.select_one("dd.term").get_text(" ", strip=True)
        return term, [d.get_text() for d in li.select("li.attestation-date")]

    aart = members[("p-aart", "member")]
    term, attested = dates(aart)
    assert aart.select_one(".term-start .date-written").get_text() == "1650"
    assert aart.select_one(".term-end .date-written").get_text() == "1660"
    assert attested == ["1655"]  # the register entry: evidence at its date, beside the term
    term, attested = dates(members[("p-bette", "member")])
    assert term == "not recorded" and attested == ["1712"]
    cas = members[("p-cas", "churchwarden")]
    term, attested = dates(cas)
    assert cas.select_one(".term-start .date-written").get_text() == "1705" and "end not recorded" in term
    assert attested == ["1715-03-02"]
    assert cas.select_one(".membership-head .role").get_text() == "churchwarden"
    # each membership opens on its attestations, cited in full
    cited = cas.select("details.membership-evidence li.attestation")
    assert [li["data-attestation"] for li in cited] == ["m-p3"]
    assert cited[0].select_one("a.source-link")["href"] == "/sources/s-reg-1715"
    assert cited[0].select_one(".locus").get_text() == "fol. 3"
    assert members[("p-dirk", "member")].select_one("a.person-link").get_text() == MARKUP_PERSON

    body = client.get("/api/groups/g-parish").json()["group"]
    assert [(m["person"]["key"], m["role"], m["attestation_dates"]) for m in body["members"]] == [
        ("p-dirk", "member", ["undated"]), ("p-bette", "member", ["1712"]),
        ("p-cas", "churchwarden", ["1715-03-02"]), ("p-aart", "member", ["1655"]),
    ]  # fmt: skip
    cas_json = body["members"][2]
    assert cas_json["start"]["earliest"] == "1705-01-01" and cas_json["end"] is None
    assert (cas_json["attested_from"], cas_json["attested_to"], cas_json["attested"]) == ("1715-03-02", "1715-03-02", "1715")
    assert cas_json["attestations"][0]["source"]["key"] == "s-reg-1715"
    assert (body["persons"], body["attestations"]) == (4, 4)


def test_the_drawing_links_every_person_and_group_and_keeps_the_slice(client: TestClient):
    query = "certainty=probable&to=1750"
    slice_pairs = Slice.from_query(parse_qsl(query)).to_query()
    soup = soup_of(client.get(f"/groups/g-parish?{query}"))
    svg = soup.select_one("#neighbourhood svg.group-svg")
    marks = svg.select("a.gn-node")
    persons = {a["data-key"] for a in marks if a["data-mode"] == "person"}
    groups = {a["data-key"] for a in marks if a["data-mode"] == "group"}
    assert persons == {"p-aart", "p-bette", "p-cas", "p-dirk"}
    assert groups == {"g-parish", "g-guild"}  # the guild is shared by Aart and Bette
    for a in marks:
        path = f"/persons/{a['data-key']}" if a["data-mode"] == "person" else f"/groups/{a['data-key']}"
        assert same_link(a["href"], path, slice_pairs), a["href"]
        assert a.find("title").get_text()
    centre = svg.select_one('a[data-centre="yes"]')
    assert centre["data-key"] == "g-parish" and centre.select_one("polygon") is not None
    # persons and groups differ by shape: hexagons for groups, circles for persons
    assert all(a.select_one("polygon") is not None for a in marks if a["data-mode"] == "group")
    assert all(a.select_one("circle") is not None for a in marks if a["data-mode"] == "person")
    assert "gn-unidentified" in svg.select_one('a[data-key="p-dirk"] circle')["class"]
    lines = [(p["data-person"], p["data-group"]) for p in svg.select("path.gn-line")]
    assert sorted(lines) == sorted([("p-aart", "g-parish"), ("p-bette", "g-parish"), ("p-cas", "g-parish"),
                                    ("p-dirk", "g-parish"), ("p-aart", "g-guild"), ("p-bette", "g-guild")])  # fmt: skip
    # the list beside it, and links to persons in the members list keep the slice too
    shared = {tr["data-key"]: tr for tr in soup.select("table.shared-groups-table tbody tr")}
    assert set(shared) == {"g-guild"} and shared["g-guild"].select_one("td.num")["data-value"] == "2"
    link = members_of(soup)[("p-cas", "churchwarden")].select_one("a.person-link")["href"]
    assert same_link(link, "/persons/p-cas", slice_pairs)


def test_the_slice_chooses_what_is_drawn(client: TestClient):
    later = client.get("/api/groups/g-parish?from=1700").json()["neighbourhood"]
    assert later["members"] == 3  # Aart's only attestation is of 1655
    assert later["shared_groups"] == []  # both guild rolls are older than 1700
    assert {n["key"] for n in later["drawing"]["nodes"]} == {"p-bette", "p-cas", "p-dirk", "g-parish"}
    # max_group_size leaves out the large groups around, never the group of the page
    guild = client.get("/api/groups/g-guild?max_group_size=3").json()["neighbourhood"]
    assert guild["members"] == 2 and guild["shared_groups"] == []
    assert "more than 3 members in the slice are left out" in guild["notes"][-1]
    parish = client.get("/api/groups/g-parish?max_group_size=3").json()["neighbourhood"]
    assert parish["members"] == 4 and [s["key"] for s in parish["shared_groups"]] == ["g-guild"]
    empty = soup_of(client.get("/groups/g-confraternity"))
    assert empty.select_one("svg.group-svg") is None
    assert "nothing to draw" in empty.select_one("#neighbourhood .ego-notes").get_text()


def test_the_neighbourhood_of_an_event_is_that_of_the_southern_women(client: TestClient):
    """Davis, Gardner & Gardner (1941), via networkx: the other events the women of E8 attended."""
    body = client.get(f"/api/groups/{event_key('E8')}").json()["neighbourhood"]
    attendees = set(DAVIS["E8"])
    assert body["members"] == len(attendees)
    expected = {event_key(e): len(attendees & set(DAVIS[e])) for e in EVENTS if e != "E8" and attendees & set(DAVIS[e])}
    assert {s["key"]: s["members"] for s in body["shared_groups"]} == expected
    assert {s["key"] for s in body["shared_groups"] if s["drawn"]} == {k for k, n in expected.items() if n >= 2}
    drawn = {(n["mode"], n["key"]) for n in body["drawing"]["nodes"]}
    assert {k for mode, k in drawn if mode == "person"} == {woman_key(w) for w in attendees}
    edges = {(e["person"], e["group"]) for e in body["drawing"]["edges"]}
    drawn_events = {k for mode, k in drawn if mode == "group"}
    assert edges == {(woman_key(w), event_key(e)) for w in attendees for e in DAVIS[w] if event_key(e) in drawn_events}
    # the same data always gives the same picture
    assert client.get(f"/api/groups/{event_key('E8')}").json()["neighbourhood"]["drawing"] == body["drawing"]


def test_names_with_markup_are_text_in_html_and_svg(client: TestClient):
    for path in ("/groups/g-parish", "/groups/g-guild", "/groups?q=smiths", "/groups"):
        response = client.get(path)
        assert "<script>alert" not in response.text and "<b>Guild" not in response.text, path
        soup = soup_of(response)
        assert all(script.get("src") for script in soup.find_all("script")), path
    page = client.get("/groups/g-parish").text
    svg_text = page[page.index("<svg class=\"group-svg\""): page.index("</svg>", page.index("<svg class=\"group-svg\"")) + 6]
    svg = etree.fromstring(svg_text.encode())  # well-formed: every name escaped
    labels = {a.get("data-key"): a for a in svg.iter("{*}a", "a")}
    assert "".join(labels["g-guild"].find("text").itertext()) == short_label(MARKUP_GROUP, 24)
    assert MARKUP_GROUP in "".join(labels["g-guild"].find("title").itertext())
    assert MARKUP_PERSON in "".join(labels["p-dirk"].find("title").itertext())
    assert client.get("/api/groups/g-guild").json()["group"]["name"] == MARKUP_GROUP


def test_members_download_as_csv(client: TestClient):
    response = client.get("/groups/g-parish/members.csv")
    assert response.status_code == 200 and response.headers["content-type"].startswith("text/csv")
    assert response.headers["content-disposition"] == 'attachment; filename="g-parish-members.csv"'
    rows = {row["person_key"]: row for row in csv.DictReader(io.StringIO(response.text))}
    assert set(rows) == {"p-aart", "p-bette", "p-cas", "p-dirk"}
    assert (rows["p-cas"]["start"], rows["p-cas"]["start_earliest"], rows["p-cas"]["end"]) == ("1705", "1705-01-01", "")
    assert (rows["p-cas"]["attestation_dates"], rows["p-cas"]["sources"], rows["p-cas"]["role"]) == ("1715-03-02", "s-reg-1715", "churchwarden")
    assert (rows["p-aart"]["start_latest"], rows["p-aart"]["end_latest"]) == ("1650-12-31", "1660-12-31")
    assert rows["p-dirk"]["person"] == MARKUP_PERSON
    link = soup_of(client.get("/groups/g-parish")).select_one("a.members-csv")["href"]
    assert link == "/groups/g-parish/members.csv"


def test_unknown_groups_and_bad_parameters(client: TestClient):
    for path in ("/groups/g-nowhere", "/groups/g-nowhere/members.csv"):
        response = client.get(path)
        assert response.status_code == 404
        detail = BeautifulSoup(response.text, "lxml").select_one("#error .error-detail").get_text(strip=True)
        assert detail == "No group has the key 'g-nowhere'."
    assert client.get("/api/groups/g-nowhere").json() == {"error": "not found", "detail": "No group has the key 'g-nowhere'."}
    for query, parameter in (("certainty=sure", "certainty"), ("max_group_size=0", "max_group_size"), ("omit_collection=nope", "omit_collection")):
        response = client.get(f"/api/groups/g-parish?{query}")
        assert response.status_code == 400, query
        assert response.json()["detail"].startswith(f"{parameter}="), query


def test_a_membership_whose_attestations_are_deleted_is_no_membership(tmp_path):
    settings, database = make_settings(tmp_path)
    with database.write() as session:
        session.execute(update(Attestation).where(Attestation.key == "m-p4").values(
            deleted_at=datetime(2026, 1, 1), deleted_reason="not this parish"))  # fmt: skip
    database.dispose()
    with TestClient(create_app(settings)) as client:
        row = next(r for r in client.get("/api/groups").json()["result"]["rows"] if r["key"] == "g-parish")
        assert row["members"] == 3
        body = client.get("/api/groups/g-parish").json()
        assert "p-dirk" not in {m["person"]["key"] for m in body["group"]["members"]}
        assert body["neighbourhood"]["members"] == 3


def test_openapi_documents_the_routes_and_every_field(client: TestClient):
    schema = client.get("/openapi.json").json()
    for path in ("/groups", "/api/groups", "/groups/{key}", "/api/groups/{key}", "/groups/{key}/members.csv"):
        operation = schema["paths"][path]["get"]
        assert operation["summary"] and operation["description"], path
    models = (GroupsPage, GroupList, GroupListRow, GroupPage, GroupDetail, GroupMember, TermDate, SubGroup,
              GroupNeighbourhood, SharedGroup, GroupDrawing, GroupDrawnNode, GroupDrawnEdge, CitedAttestation)  # fmt: skip
    for model in models:
        properties = schema["components"]["schemas"][model.__name__]["properties"]
        assert set(properties) == {f.name for f in dataclasses.fields(model)}, model.__name__
        undocumented = [name for name, spec in properties.items() if not spec.get("description")]
        assert undocumented == [], model.__name__


def _label_box(node) -> tuple[float, float, float, float]:
    """The box of a label as the drawing estimates it (letters 0.6 of the font size wide), unrotated labels only."""
    lines = node.lines or [node.label]
    width = 0.6 * node.font_size * max(len(line) for line in lines)
    left = {"start": node.label_x, "end": node.label_x - width, "middle": node.label_x - width / 2}[node.anchor]
    top = node.label_y - node.font_size / 2
    return left, top, left + width, top + len(lines) * 1.15 * node.font_size


def test_the_centre_label_stays_inside_the_ring_clear_of_the_members_labels():
    from types import SimpleNamespace

    from app.network.group_drawing import group_neighbourhood
    from app.network.twomode import MembershipEvidence

    long_name = "Confraternity of the Holy Sacrament and of Saint Ælfric in the parish of Østmere"
    groups = {0: SimpleNamespace(key="g-centre", name=long_name, kind=None)}
    persons = {p: SimpleNamespace(key=f"p-{p:02d}", name=f"Member number {p}", kind="individual", unidentified=False)
               for p in range(1, 9)}
    evidence = [MembershipEvidence(p, p, 0, "", None, None, None, None, None, None, (p,), (p,)) for p in persons]
    drawing = group_neighbourhood(0, evidence, persons=persons, groups=groups).drawing
    [centre] = [n for n in drawing.nodes if n.centre]
    members = [n for n in drawing.nodes if n.mode == "person"]
    ring = math.hypot(members[0].x - centre.x, members[0].y - centre.y)
    assert 1 < len(centre.lines) <= 3 and centre.lines[-1].endswith("…")
    left, top, right, bottom = _label_box(centre)
    for x, y in ((left, top), (left, bottom), (right, top), (right, bottom)):  # every corner inside the ring
        assert math.hypot(x - centre.x, y - centre.y) < ring - members[0].size, (x, y)
    for member in members:
        other = _label_box(member)
        assert other[2] <= left or other[0] >= right or other[3] <= top or other[1] >= bottom, member.name
    svg = BeautifulSoup(render_group_svg(drawing), "html.parser")
    assert [t.get_text() for t in svg.select('a[data-centre="yes"] text tspan')] == centre.lines


def render_group_svg(drawing) -> str:  # noqa: ANN001
    from app.views.common import templates, Urls
    from app.network.slice import Slice

    return templates.get_template("_group_svg.html").render(drawing=drawing, svg_label="x", slice=Slice(), urls=Urls())
