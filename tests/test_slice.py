"""The slice: parsing the query string, the evidence it keeps (counted on paper), the graph it
builds, and the form that sets it."""

from __future__ import annotations

from datetime import date
from urllib.parse import parse_qsl, urlencode, urlsplit

import networkx as nx
import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient
from sqlalchemy import select

from app.config import Settings
from app.db import Database
from app.main import create_app
from app.models import Attestation, Person
from app.network.slice import DEFAULT_EVIDENCE, Slice, SliceError, build_graph, relation_evidence, resolve_slice, ties_from_evidence
from tests.slice_world import import_world, key, slice_world

pytestmark = pytest.mark.both_databases

# --- parsing ---------------------------------------------------------------------------------------


def test_no_parameters_is_the_default_slice():
    assert Slice.from_query({}) == Slice() == Slice.from_query([("q", "anna"), ("page", "2")])
    assert Slice().evidence == DEFAULT_EVIDENCE and "draft" not in Slice().evidence


def test_values_are_parsed():
    pairs = [("kind", "letter,sibling"), ("kind", "letter"), ("from", "1700"), ("to", "1705-06"), ("dates", "Inside"),
             ("undated", "drop"), ("certainty", "probable"), ("evidence", "original"), ("evidence", "mention"),
             ("omit_collection", "col-s1"), ("keep_repository", "rep-north"), ("min_collections", "2"),
             ("unidentified", "drop"), ("nodes", "all"), ("loops", "keep"), ("direction", "reciprocal"),
             ("weight", "none"), ("max_group_size", "40"), ("overlap", "required"), ("to_be", "ignored")]  # fmt: skip
    s = Slice.from_query(pairs)
    assert s.kind == ("letter", "sibling")  # repeated and comma-separated, each once, in order
    assert (s.period_from, s.period_to, s.dates, s.undated) == ("1700", "1705-06", "inside", "drop")
    assert (s.certainty, s.evidence) == ("probable", ("original", "mention"))
    assert (s.omit_collection, s.keep_repository, s.min_collections) == (("col-s1",), ("rep-north",), 2)
    assert (s.unidentified, s.nodes, s.loops, s.direction, s.weight) == ("drop", "all", "keep", "reciprocal", "none")
    assert (s.max_group_size, s.overlap) == (40, "required")
    grouped: dict[str, list[str]] = {}
    for name, value in pairs:
        grouped.setdefault(name, []).append(value)
    assert Slice.from_query(grouped) == s  # the mapping form reads the same
    assert s.period() == (date(1700, 1, 1), date(1705, 6, 30))


def test_blank_values_are_no_values():
    assert Slice.from_query([("from", ""), ("to", "  "), ("kind", ""), ("certainty", "")]) == Slice()


@pytest.mark.parametrize(
    ("parameter", "value", "accepted"),
    [
        ("dates", "around", "overlap, inside"),
        ("undated", "maybe", "keep, drop"),
        ("certainty", "sure", "certain, probable, possible"),
        ("unidentified", "hide", "keep, drop"),
        ("nodes", "some", "evidence, ties, all"),
        ("loops", "yes", "drop, keep"),
        ("direction", "sideways", "recorded, undirected, reciprocal"),
        ("weight", "heavy", "documents, attestations, none"),
        ("mode", "groups", "relations"),
        ("overlap", "sometimes", "any, required"),
        ("evidence", "rumour", "original, copy, draft, mention, register, edition"),
        ("min_collections", "0", "a whole number of 1 or more"),
        ("min_collections", "two", "a whole number of 1 or more"),
        ("max_group_size", "-3", "a whole number of 1 or more"),
        ("from", "17x", "a year"),
        ("to", "1703-13", "a year"),
    ],
)
def test_a_bad_value_names_its_parameter_and_what_is_accepted(parameter: str, value: str, accepted: str):
    with pytest.raises(SliceError) as caught:
        Slice.from_query([(parameter, value)])
    assert caught.value.parameter == parameter
    assert caught.value.value == value
    assert accepted in caught.value.accepted
    assert str(caught.value).startswith(f"{parameter}={value} is not accepted")


def test_a_period_must_not_end_before_it_starts():
    with pytest.raises(SliceError) as caught:
        Slice.from_query([("from", "1710"), ("to", "1700")])
    assert caught.value.parameter == "from" and "to=1700" in caught.value.accepted


@pytest.mark.parametrize(
    "s",
    [
        Slice(),
        Slice(kind=("kinship", "letter"), period_from="1700", period_to="1703-05", dates="inside"),
        Slice(evidence=("original", "draft"), certainty="certain", undated="drop", unidentified="drop"),
        Slice(keep_collection=("col-n1", "col-s1"), omit_repository=("rep-south",), min_collections=3),
        Slice(nodes="all", loops="keep", direction="undirected", weight="attestations", max_group_size=12),
    ],
)
def test_to_query_round_trips_and_leaves_defaults_out(s: Slice):
    pairs = s.to_query()
    assert Slice.from_query(pairs) == s
    assert Slice.from_query(parse_qsl(urlencode(pairs))) == s
    assert Slice().to_query() == []
    for name, _value in pairs:  # only what differs from the default is written
        field = "period_" + name if name in ("from", "to") else name
        assert getattr(s, field) != getattr(Slice(), field), name


def test_describe_says_what_the_slice_keeps():
    text = Slice.from_query([("kind", "letter"), ("from", "1700"), ("to", "1710"), ("dates", "inside"),
                             ("certainty", "probable"), ("omit_collection", "col-s1"), ("min_collections", "2"),
                             ("direction", "undirected")]).describe()  # fmt: skip
    for words in ("kinds: letter", "dated inside 1700–1710", "certain and probable evidence", "without collections col-s1",
                  "at least 2 collections", "undirected"):  # fmt: skip
        assert words in text, words
    assert Slice().describe() == "all relation kinds; every certainty grade; all evidence but drafts; direction as recorded"


# --- the evidence a slice keeps (tests/slice_world.py) -------------------------------------------------


@pytest.fixture(scope="module")
def world(tmp_path_factory, module_database_urls) -> Settings:
    folder = tmp_path_factory.mktemp("slice-world")
    url = module_database_urls.new("slice-world")
    database = Database(url)
    import_world(database, folder / "workbook", slice_world())
    database.dispose()
    return Settings(database_url=url)


@pytest.fixture
def session(world: Settings):
    database = Database(world.database_url)
    with database.read() as read_session:
        yield read_session
    database.dispose()


def kept(session, query: list[tuple[str, str]]) -> set[str]:  # noqa: ANN001
    """Return the keys of the attestations the slice of ``query`` keeps."""
    rows = relation_evidence(session, resolve_slice(session, Slice.from_query(query)))
    ids = [row.attestation_id for row in rows]
    return set(session.scalars(select(Attestation.key).where(Attestation.id.in_(ids))))


ALL = {f"a{n:02d}" for n in range(1, 16)}


@pytest.mark.parametrize(
    ("query", "left_out"),
    [
        ([], {"a12"}),  # the draft
        ([("from", "1700"), ("to", "1700")], {"a02", "a03", "a06", "a07", "a08", "a09", "a10", "a11", "a12", "a14"}),
        ([("from", "1700"), ("to", "1700"), ("dates", "inside")],
         {"a02", "a03", "a04", "a06", "a07", "a08", "a09", "a10", "a11", "a12", "a14"}),
        ([("from", "1700"), ("to", "1700"), ("undated", "drop")],
         {"a02", "a03", "a05", "a06", "a07", "a08", "a09", "a10", "a11", "a12", "a14"}),
        ([("undated", "drop")], {"a05", "a12"}),
        ([("from", "1705")], {"a01", "a02", "a03", "a04", "a06", "a07", "a08", "a09", "a10", "a12", "a13", "a15"}),
        ([("certainty", "certain")], {"a04", "a06", "a12"}),
        ([("certainty", "probable")], {"a06", "a12"}),
        ([("omit_collection", "col-s1")], {"a03", "a04", "a07", "a08", "a10", "a12"}),
        ([("omit_repository", "rep-south")], {"a03", "a04", "a07", "a08", "a10", "a12"}),
        ([("keep_collection", "col-n1")], ALL - {"a01", "a02", "a09", "a11", "a13", "a15"}),
        ([("keep_collection", "col-n1"), ("keep_collection", "col-n2")], ALL - {"a01", "a02", "a05", "a06", "a09", "a11", "a13", "a15"}),
        ([("keep_repository", "rep-north")], ALL - {"a01", "a02", "a05", "a06", "a09", "a11", "a13", "a15"}),
        ([("min_collections", "2")], ALL - {"a02", "a03", "a06", "a07"}),
        ([("kind", "kinship")], ALL - {"a05", "a09", "a10"}),
        ([("unidentified", "drop")], {"a11", "a12"}),
        ([("evidence", "draft")], ALL - {"a12"}),
        ([("from", "1700"), ("to", "1700"), ("certainty", "certain"), ("omit_collection", "col-s1")],
         ALL - {"a01", "a05", "a13", "a15"}),
    ],
)
def test_filters_remove_exactly_the_attestations_they_should(session, query, left_out: set[str]):
    assert kept(session, query) == ALL - left_out
    assert len(kept(session, query)) == 15 - len(left_out)


def test_a_tie_goes_only_when_all_its_attestations_are_filtered_out(session):
    def business_ab(query: list[tuple[str, str]]) -> list[int]:
        rows = relation_evidence(session, resolve_slice(session, Slice.from_query(query)))
        a, b = (session.scalars(select(Person.id).where(Person.key == key(letter))).one() for letter in "AB")
        return [len(t.attestation_ids) for t in ties_from_evidence(rows).values() if {t.person_a, t.person_b} == {a, b}]

    assert business_ab([]) == [2]
    assert business_ab([("certainty", "certain")]) == [1]
    assert business_ab([("omit_collection", "col-s1")]) == [1]
    assert business_ab([("certainty", "certain"), ("omit_collection", "col-s1")]) == []


def test_relation_evidence_around_persons_equals_the_whole_cut_down(session):
    """The quick path of ego networks (``persons=``) reads the same rows as a filter of the whole."""
    resolved = resolve_slice(session, Slice())
    everything = relation_evidence(session, resolved)
    ids = {letter: session.scalars(select(Person.id).where(Person.key == key(letter))).one() for letter in "EABCDF"}
    for group in ("E", "AB", "CDF"):
        people = {ids[letter] for letter in group}
        touching = sorted(r for r in everything if r.person_a in people or r.person_b in people)
        assert sorted(relation_evidence(session, resolved, persons=people)) == touching
        inside = sorted(r for r in everything if r.person_a in people and r.person_b in people)
        assert sorted(relation_evidence(session, resolved, persons=people, both_ends=True)) == inside


@pytest.mark.parametrize(("parameter", "value"), [("kind", "gossip"), ("keep_collection", "col-x"), ("omit_repository", "rep-x")])
def test_unknown_keys_are_found_when_resolved(session, parameter: str, value: str):
    with pytest.raises(SliceError) as caught:
        resolve_slice(session, Slice.from_query([(parameter, value)]))
    assert caught.value.parameter == parameter and caught.value.value == value


# --- the graph it builds ------------------------------------------------------------------------------


def graph(session, query: list[tuple[str, str]] = ()) -> nx.Graph:  # noqa: ANN001
    """Return the graph of the slice with person keys as nodes (names in letters of slice_world)."""
    G = build_graph(session, Slice.from_query(list(query)))
    letters = {session.scalars(select(Person.id).where(Person.key == key(l))).one(): l for l in "EABCDFGHXZW"}  # noqa: E741
    return nx.relabel_nodes(G, letters)


def test_recorded_direction_counts_an_undirected_kind_both_ways(session):
    G = graph(session)
    assert isinstance(G, nx.DiGraph)
    assert G.has_edge("E", "C") and G.has_edge("C", "E")  # sibling: undirected
    assert G.has_edge("E", "B") and not G.has_edge("B", "E")  # a letter one way
    assert G.has_edge("C", "F") and not G.has_edge("F", "C")  # parent and child


def test_undirected_and_reciprocal_views(session):
    undirected = graph(session, [("direction", "undirected")])
    assert not undirected.is_directed()
    assert undirected.has_edge("B", "E") and undirected["A"]["E"]["attestations"] == 4  # a01, a02, a03, a14
    reciprocal = graph(session, [("direction", "reciprocal")])
    assert not reciprocal.is_directed()
    assert reciprocal.has_edge("A", "E") and reciprocal.has_edge("C", "E")
    assert not reciprocal.has_edge("E", "B") and not reciprocal.has_edge("C", "F") and not reciprocal.has_edge("E", "G")


def test_weight_modes_fold_a_copy_into_its_original(session):
    # A->E in the recorded view: letters a02 (s2) and a03 (s2c, a copy of s2), friendship a14 (ed1)
    edge = graph(session)["A"]["E"]
    assert (edge["attestations"], edge["documents"], edge["weight"]) == (3, 2, 2.0)
    assert graph(session, [("weight", "attestations")])["A"]["E"]["weight"] == 3.0
    assert graph(session, [("weight", "none")])["A"]["E"]["weight"] == 1.0


def test_node_sets(session):
    evidence = graph(session)
    assert set(evidence) == set("EABCDFGXZ")  # H only in a draft, W without evidence
    assert evidence.degree("Z") == 0  # known only from a fact: an isolate
    assert set(graph(session, [("nodes", "ties")])) == set("EABCDFGX")
    assert set(graph(session, [("nodes", "all")])) == set("EABCDFGHXZW")
    assert set(graph(session, [("nodes", "all"), ("unidentified", "drop")])) == set("EABCDFHXZW")


def test_loops_are_kept_only_when_asked(session):
    assert not graph(session).has_edge("E", "E")
    assert graph(session, [("loops", "keep")]).has_edge("E", "E")


# --- the form --------------------------------------------------------------------------------------

FORM_PARAMETERS = {"kind", "from", "to", "dates", "undated", "certainty", "evidence", "keep_collection", "omit_collection",
                   "keep_repository", "omit_repository", "min_collections", "unidentified", "nodes", "loops",
                   "direction", "weight", "mode", "overlap", "weighting", "max_group_size"}  # fmt: skip


@pytest.fixture(scope="module")
def client(world: Settings):
    with TestClient(create_app(world)) as test_client:
        yield test_client


def form_of(client: TestClient, query: str) -> BeautifulSoup:
    response = client.get(f"/persons/{key('E')}/ego?{query}")
    assert response.status_code == 200, response.text
    return BeautifulSoup(response.text, "html.parser").select_one("form#slice-form")


def submitted(form: BeautifulSoup) -> list[tuple[str, str]]:
    """Return what a browser sends for the form as it stands: enabled, checked or filled controls."""
    pairs = []
    for field in form.select("input[name]"):
        if field.has_attr("disabled"):
            continue
        if field.get("type") in ("checkbox", "radio") and not field.has_attr("checked"):
            continue
        pairs.append((field["name"], field.get("value", "")))
    return pairs


def test_the_form_has_a_control_for_every_slice_parameter(client: TestClient):
    form = form_of(client, "")
    assert form["method"] == "get" and form["action"] == f"/persons/{key('E')}/ego"
    assert {field["name"] for field in form.select("input[name]")} >= FORM_PARAMETERS
    for field in form.select("input[type=text], input[type=number]"):
        assert field.find_parent("label") is not None, field["name"]  # each box has its label
    assert {c["value"] for c in form.select('input[name="kind"]')} == {
        "letter", "kinship", "parent", "sibling", "spouse", "patronage", "business", "friendship",
    }  # fmt: skip
    assert {c["value"] for c in form.select('input[name="keep_collection"]')} == {"col-n1", "col-n2", "col-s1"}
    assert {c["value"] for c in form.select('input[name="omit_repository"]')} == {"rep-north", "rep-south"}
    assert form.select_one("button[type=submit]") is not None
    assert form.select_one("a.slice-reset")["href"] == f"/persons/{key('E')}/ego"


def test_the_form_shows_the_current_slice_and_sends_it_back_unchanged(client: TestClient):
    query = [("kind", "letter"), ("kind", "kinship"), ("from", "1700"), ("to", "1705"), ("dates", "inside"),
             ("undated", "drop"), ("certainty", "probable"), ("evidence", "original"), ("evidence", "copy"),
             ("omit_collection", "col-s1"), ("keep_repository", "rep-north"), ("min_collections", "2"),
             ("unidentified", "drop"), ("nodes", "ties"), ("loops", "keep"), ("direction", "undirected"),
             ("weight", "attestations"), ("max_group_size", "9"), ("mode", "both"), ("overlap", "required"),
             ("weighting", "newman"), ("radius", "2")]  # fmt: skip
    form = form_of(client, urlencode(query))
    kinds = {c["value"]: c for c in form.select('input[name="kind"]')}
    assert kinds["kinship"].has_attr("checked") and not kinds["kinship"].has_attr("disabled")
    for sub in ("parent", "sibling", "spouse"):  # chosen with their parent kind
        assert kinds[sub].has_attr("checked") and kinds[sub].has_attr("disabled")
    assert not kinds["business"].has_attr("checked")
    for name in ("dates", "undated", "certainty", "unidentified", "nodes", "loops", "direction", "weight", "mode",
                 "overlap", "weighting"):
        checked = [r["value"] for r in form.select(f'input[type=radio][name="{name}"]') if r.has_attr("checked")]
        assert checked == [dict(query)[name]], name
    sent = submitted(form)
    assert Slice.from_query(sent) == Slice.from_query(query)
    assert ("radius", "2") in sent  # the page's own parameter survives applying the form
    assert {g["data-group"] for g in form.select("details[open]")} == {"kinds", "period", "evidence", "archives", "graph",
                                                                      "groups"}
    assert form.select_one('input[name="max_group_size"]')["value"] == "9"
    assert set(parse_qsl(urlsplit(form.select_one("a.slice-reset")["href"]).query)) == {("radius", "2")}


def test_a_default_form_sends_the_default_slice(client: TestClient):
    form = form_of(client, "")
    assert Slice.from_query(submitted(form)) == Slice()
    assert form.select("details[open]") == []


def test_the_slice_line_stands_above_the_drawing(client: TestClient):
    soup = BeautifulSoup(client.get(f"/persons/{key('E')}/ego?from=1700&certainty=certain").text, "html.parser")
    line = soup.select_one("#ego-panel .slice-line")
    assert line.find_next("svg") is not None
    assert line.get_text(" ", strip=True) == "Slice: " + Slice(period_from="1700", certainty="certain").describe()


def test_slice_controls_json_lists_the_choices(client: TestClient):
    controls = client.get(f"/api/persons/{key('E')}/ego?kind=kinship").json()["controls"]
    tree = {k["key"]: (k["depth"], k["checked"], k["implied"]) for k in controls["kinds"]}
    assert tree["kinship"] == (0, True, False) and tree["sibling"] == (1, False, True) and tree["letter"] == (0, False, False)
    assert [a["key"] for a in controls["archives"]] == ["rep-north", "col-n2", "col-n1", "rep-south", "col-s1"]
    assert controls["is_default"] is False and controls["open_groups"] == ["kinds"]


def test_unknown_database_keys_in_the_form_are_400(client: TestClient):
    response = client.get(f"/persons/{key('E')}/ego?keep_collection=col-nowhere")
    assert response.status_code == 400
    assert "keep_collection=col-nowhere" in BeautifulSoup(response.text, "html.parser").select_one(".error-detail").get_text()


def test_reciprocity_is_judged_kind_by_kind(database, tmp_path):
    """A one-way patronage between two correspondents who write both ways is not reciprocated."""
    from app.exchange.workbook import import_workbook
    from app.models import Attestation, Person
    from sqlalchemy import select
    from tests.workbooks import small_world, write_workbook

    world = small_world()
    world["relations.csv"].append(
        {"key": "r-patron", "person": "p-anna", "other": "p-jost", "kind": "patronage", "source": "s-1"}
    )
    import_workbook(database, write_workbook(tmp_path / "wb", world), size_limit=10**9)
    with database.read() as session:
        ids = dict(session.execute(select(Person.key, Person.id)).all())
        patron = session.scalar(select(Attestation.id).where(Attestation.key == "r-patron"))
        G = build_graph(session, Slice(direction="reciprocal"))
    anna, jost, council = ids["p-anna"], ids["p-jost"], ids["p-council"]
    assert set(G.edges) == {(anna, jost)}  # letters both ways, and the siblings
    assert patron not in G.edges[anna, jost]["attestation_ids"]
    assert council in G and G.degree(council) == 0  # the Council's one-way letter leaves it an isolate
