"""Merging two persons (preview, relation fusion, self-loop, alias redirect), splitting one, and
"possibly the same as" links, over HTTP on a real SQLite file."""

from __future__ import annotations

import json
import re

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import func, select

from app.main import create_app
from app.models import Attestation, AuditEntry, Person, PersonAlias, Relation
from helpers import add_tiny_dataset

pytestmark = pytest.mark.both_databases  # store and editing tests run on SQLite and PostgreSQL


@pytest.fixture
def client(settings, database):
    add_tiny_dataset(database)
    with TestClient(create_app(settings)) as test_client:
        yield test_client


def post(client: TestClient, path: str, /, **data) -> object:  # noqa: ANN003
    token = re.search(r'name="csrf_token" value="([^"]+)"', client.get("/new/person").text).group(1)
    return client.post(path, data={"csrf_token": token, **data}, follow_redirects=False)


@pytest.fixture
def twins(client):
    """P4 'Person 2 bis' is P2 recorded twice: P4 writes to P3 (like P2, deleted) and P1 writes to P4.

    Merging P4 into P2: P1 -> P4 fuses with P1 -> P2 (A1, A2), P4 -> P3 fuses with P2 -> P3 (A3,
    deleted), P2 -> P4 becomes a self-loop of P2.
    """
    post(client, "/new/person", key="P4", name="Person 2 bis", variants="Persoon Twee", identifiers="local:p4")
    for person, other, locus in (("P1", "P4", "f. 20"), ("P4", "P3", "f. 21"), ("P2", "P4", "f. 22")):
        assert post(client, "/new/relation", person=person, other=other, kind="letter", source="S1", locus=locus).status_code == 303
    assert post(client, "/new/membership", person="P4", group="G1", role="master", source="S2", locus="p. 9").status_code == 303
    return client


def test_the_preview_says_what_moves_fuses_and_becomes_a_self_loop_and_changes_nothing(twins, database):
    with database.read() as s:
        before = (s.scalar(select(func.count()).select_from(Relation)), s.scalar(select(func.count()).select_from(AuditEntry)))
    preview = twins.get("/api/merge", params={"kept": "P2", "absorbed": "P4"}).json()["preview"]
    assert preview["names"] == ["Person 2 bis", "Persoon Twee"]
    assert preview["identifiers"] == ["local:p4"]
    outcomes = {(r["kind"], r["other"], r["outcome"]) for r in preview["relations"]}
    assert outcomes == {("letter", "P1", "fuses"), ("letter", "P3", "fuses"), ("letter", "P2", "self-loop")}
    assert preview["self_loops"] == 1 and preview["fused"] == 2
    assert preview["memberships"] == ["G1 (master): moves"]
    assert preview["attestations"] == 4  # three letters and the membership
    page = twins.get("/merge", params={"kept": "P2", "absorbed": "P4"}).text
    assert "becomes a self-loop" in page and 'action="/merge"' in page
    with database.read() as s:
        assert (s.scalar(select(func.count()).select_from(Relation)), s.scalar(select(func.count()).select_from(AuditEntry))) == before
    refused = twins.get("/api/merge", params={"kept": "P2", "absorbed": "P2"}).json()
    assert refused["preview"] is None and "different" in refused["problems"]["absorbed"]


def test_a_merge_fuses_relations_makes_the_self_loop_and_the_old_key_redirects(twins, database):
    answer = post(twins, "/merge", kept="P2", absorbed="P4")
    assert answer.status_code == 303 and answer.headers["location"] == "/persons/P2"
    with database.read() as s:
        assert s.scalar(select(Person.id).where(Person.key == "P4")) is None
        p2 = s.scalar(select(Person.id).where(Person.key == "P2"))
        assert s.scalar(select(PersonAlias.person_id).where(PersonAlias.key == "P4")) == p2
        relations = {(r.person_a_id, r.person_b_id): r.id for r in s.scalars(select(Relation))}
        p1, p3 = (s.scalar(select(Person.id).where(Person.key == k)) for k in ("P1", "P3"))
        assert set(relations) == {(p1, p2), (p2, p3), (p2, p2)}  # fused: no relation left pointing at P4
        loci = {a.locus: a.relation_id for a in s.scalars(select(Attestation)) if a.relation_id}
        assert loci["f. 20"] == relations[(p1, p2)] and loci["f. 21"] == relations[(p2, p3)]
        assert loci["f. 22"] == relations[(p2, p2)]
        entry = s.scalar(select(AuditEntry).where(AuditEntry.action == "merge"))
        assert json.loads(entry.after_json)["alias"] == "P4" and json.loads(entry.before_json)["absorbed"]["key"] == "P4"
    # the old key resolves by redirect, on the page and its JSON twin, the query string kept
    moved = twins.get("/persons/P4", params={"kind": "letter"}, follow_redirects=False)
    assert moved.status_code == 308 and moved.headers["location"] == "/persons/P2?kind=letter"
    person = twins.get("/api/persons/P4").json()["person"]
    assert person["key"] == "P2" and {"Person 2 bis", "Persoon Twee"} <= set(person["variants"])
    assert [(i["scheme"], i["value"]) for i in person["identifiers"]] == [("local", "p4")]
    # P1 -> P2 now has three attestations: A1, A2 and the fused one
    assert len(twins.get(f"/api/relations/{relations[(p1, p2)]}").json()["relation"]["attestations"]) == 3
    # the membership moved and fused with P1's? No: P1 is master of G1; P2 had none, so it moved
    assert any(m["person"]["key"] == "P2" for m in twins.get("/api/groups/G1").json()["group"]["members"])
    # a new record under the old key is refused
    assert "old key" in post(twins, "/new/person", key="P4", name="again").text


def test_memberships_of_the_same_group_and_role_fuse(client, database):
    post(client, "/new/person", key="P9", name="Person 1 again")
    post(client, "/new/membership", person="P9", group="G1", role="master", source="S1", locus="f. 30")
    preview = client.get("/api/merge", params={"kept": "P1", "absorbed": "P9"}).json()["preview"]
    assert preview["memberships"] == ["G1 (master): fuses with the kept membership"]
    post(client, "/merge", kept="P1", absorbed="P9")
    members = [m for m in client.get("/api/groups/G1").json()["group"]["members"] if m["person"]["key"] == "P1"]
    assert len(members) == 1 and len(members[0]["attestations"]) == 2


def test_split_moves_the_chosen_attestations_with_their_ties_to_a_new_person(twins, database):
    post(twins, "/merge", kept="P2", absorbed="P4")
    form = twins.get("/persons/P2/split").text
    assert "f. 22" in form and "with themself" in form
    with database.read() as s:
        keys = {a.locus: a.key for a in s.scalars(select(Attestation)) if a.locus}
    refused = post(twins, "/persons/P2/split", new_key="P4b", new_name="Person 2 bis")
    assert refused.status_code == 422 and "choose at least one" in refused.text
    answer = twins.post("/persons/P2/split", data={
        "csrf_token": re.search(r'name="csrf_token" value="([^"]+)"', form).group(1), "new_key": "P4b",
        "new_name": "Person 2 bis", "attestation": [keys["f. 20"], keys["f. 21"], keys["f. 22"], keys["p. 9"]],
        "name": ["Persoon Twee"]}, follow_redirects=False)
    assert answer.status_code == 303 and answer.headers["location"] == "/persons/P4b"
    with database.read() as s:
        ids = {k: s.scalar(select(Person.id).where(Person.key == k)) for k in ("P1", "P2", "P3", "P4b")}
        relations = {(r.person_a_id, r.person_b_id) for r in s.scalars(select(Relation))}
    # the self-loop is a tie between the two again; the fused ties are split back
    assert relations == {(ids["P1"], ids["P2"]), (ids["P2"], ids["P3"]), (ids["P1"], ids["P4b"]),
                         (ids["P4b"], ids["P3"]), (ids["P2"], ids["P4b"])}
    new = twins.get("/api/persons/P4b").json()["person"]
    assert new["variants"] == ["Persoon Twee"] and [m["group_key"] for m in new["memberships"]] == ["G1"]
    assert "Persoon Twee" not in twins.get("/api/persons/P2").json()["person"]["variants"]
    assert len(twins.get("/api/relations/1").json()["relation"]["attestations"]) == 2  # A1 and A2 stayed


def test_possibly_the_same_is_shown_on_both_pages_and_can_be_removed(client, database):
    answer = post(client, "/persons/P1/links", other="P3", note="same seal on both letters")
    assert answer.status_code == 303
    for key, other in (("P1", "P3"), ("P3", "P1")):
        [link] = client.get(f"/api/persons/{key}").json()["same_as"]
        assert link["key"] == other and link["note"] == "same seal on both letters"
        assert "same seal on both letters" in client.get(f"/persons/{key}").text
    assert "linked already" in post(client, "/persons/P3/links", other="P1").text
    assert "themself" in post(client, "/persons/P1/links", other="P1").text
    link_id = client.get("/api/persons/P1").json()["same_as"][0]["link_id"]
    assert post(client, f"/person-links/{link_id}/delete", back="/persons/P3").headers["location"] == "/persons/P3"
    assert client.get("/api/persons/P3").json()["same_as"] == []
    assert post(client, "/persons/P1/links", other="P3").status_code == 303
    link_id = client.get("/api/persons/P1").json()["same_as"][0]["link_id"]
    assert post(client, f"/person-links/{link_id}/delete", back="https://elsewhere.example/").headers["location"] == "/persons"
