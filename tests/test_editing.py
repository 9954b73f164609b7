"""The editing forms over HTTP (the real app on a real SQLite file): create, edit, refuse bad input
without writing anything, delete evidence with a reason and restore it, refuse stale saves, and
record every write in the audit trail of the same transaction."""

from __future__ import annotations

import json
import re

import pytest
from bs4 import BeautifulSoup
from fastapi.testclient import TestClient
from sqlalchemy import func, select

from app.auth import LOCAL_ACTOR
from app.main import create_app
from app.models import Attestation, AuditEntry, Collection, DataVersion, Person, PersonName, Relation, Repository, Source
from app.store import editing
from helpers import add_tiny_dataset

pytestmark = pytest.mark.both_databases  # store and editing tests run on SQLite and PostgreSQL


@pytest.fixture
def client(settings, database):
    add_tiny_dataset(database)
    with TestClient(create_app(settings)) as test_client:
        yield test_client


def token(client: TestClient, page: str = "/new/person") -> str:
    return re.search(r'name="csrf_token" value="([^"]+)"', client.get(page).text).group(1)


def post(client: TestClient, path: str, /, **data: str) -> object:
    return client.post(path, data={"csrf_token": token(client), **data}, follow_redirects=False)


def counts(database) -> tuple[int, int, int, int, int]:
    with database.read() as s:
        return tuple(s.scalar(select(func.count()).select_from(model)) for model in
                     (Person, Relation, Attestation, AuditEntry)) + (s.scalar(select(DataVersion.version)),)


def field_error(html: str, name: str) -> str | None:
    found = re.search(rf'data-field="{name}".*?<p class="field-error"[^>]*>(.*?)</p>', html, re.S)
    return found.group(1) if found else None


def audit_of(database, table: str, key: str) -> list[AuditEntry]:
    with database.read() as s:
        return list(s.scalars(select(AuditEntry).where(AuditEntry.table_name == table, AuditEntry.record_key == key)
                              .order_by(AuditEntry.id)))


# --- persons ---------------------------------------------------------------------------------


def test_a_new_person_is_created_with_spellings_dates_and_identifiers(client, database):
    answer = post(client, "/new/person", key="P9", name="Jost Brenner", variants="Jobst Brenner\nJ. Brenner",
                  born="1703-05", died="1751~", identifiers="viaf:123\nlocal:jb", note="printer")
    assert answer.status_code == 303 and answer.headers["location"] == "/persons/P9"
    person = client.get("/api/persons/P9").json()["person"]
    assert person["name"] == "Jost Brenner"
    assert set(person["variants"]) == {"Jobst Brenner", "J. Brenner"}
    # EDTF: 1703-05 is May 1703; 1751~ widens by one year each side (README, "Dates and calendars")
    assert person["born"]["interval"] == "1703-05-01 – 1703-05-31"
    assert person["died"]["interval"] == "1750-01-01 – 1752-12-31"
    assert {(i["scheme"], i["value"]) for i in person["identifiers"]} == {("viaf", "123"), ("local", "jb")}
    [entry] = audit_of(database, "person", "P9")
    assert entry.action == "create" and entry.actor == "local"
    assert json.loads(entry.after_json)["variants"] == ["Jobst Brenner", "J. Brenner"]
    # the variants are searchable like imported ones
    assert any(r["key"] == "P9" for r in client.get("/api/persons", params={"q": "jobst"}).json()["result"]["rows"])


def test_a_refused_person_form_comes_back_with_messages_beside_the_fields_and_writes_nothing(client, database):
    before = counts(database)
    answer = post(client, "/new/person", key="P1", name="  ", born="17x3", identifiers="no-colon")
    assert answer.status_code == 422
    assert "taken" in field_error(answer.text, "key")
    assert "required" in field_error(answer.text, "name")
    assert "17x3" in field_error(answer.text, "born")
    assert "scheme:value" in field_error(answer.text, "identifiers")
    assert 'value="17x3"' in answer.text  # what was typed stays in the form
    assert counts(database) == before


def test_editing_a_person_replaces_names_and_identifiers_and_keeps_a_before_and_after(client, database):
    post(client, "/new/person", key="P9", name="Anna Vos", variants="Anna Vosch", identifiers="local:a")
    form = client.get("/persons/P9/edit").text
    version = re.search(r'name="version" value="(\d+)"', form).group(1)
    answer = post(client, "/persons/P9/edit", version=version, name="Anna de Vos", variants="Anna Vos\nAnneke Vos",
                  identifiers="local:b", calendar="julian", born="1700-02-29")
    assert answer.status_code == 303
    person = client.get("/api/persons/P9").json()["person"]
    assert person["name"] == "Anna de Vos" and set(person["variants"]) == {"Anna Vos", "Anneke Vos"}
    assert [(i["scheme"], i["value"]) for i in person["identifiers"]] == [("local", "b")]
    # 29 February 1700 exists in the Julian calendar only; it is 11 March 1700 Gregorian: the calendars
    # drift from 10 to 11 days apart at that very day (from memory; the dates tests check the same rule)
    assert person["born"]["interval"] == "1700-03-11"
    update = audit_of(database, "person", "P9")[-1]
    assert update.action == "update"
    assert json.loads(update.before_json)["name"] == "Anna Vos" and json.loads(update.after_json)["name"] == "Anna de Vos"


def test_an_identifier_of_another_person_is_refused(client, database):
    post(client, "/new/person", key="P9", name="A", identifiers="viaf:1")
    before = counts(database)
    answer = post(client, "/new/person", key="P10", name="B", identifiers="viaf:1")
    assert answer.status_code == 422 and "P9" in field_error(answer.text, "identifiers")
    assert counts(database) == before


# --- sources ---------------------------------------------------------------------------------


def test_a_source_is_created_in_a_new_repository_and_collection(client, database):
    answer = post(client, "/new/source", key="S9", new_repository_key="R9", new_repository_name="Town Archive",
                  new_collection_key="R9.C1", new_collection_name="Council letters", reference="no. 4",
                  date="1704-03-01", calendar="julian-march")
    assert answer.status_code == 303 and answer.headers["location"] == "/sources/S9"
    source = client.get("/api/sources/S9").json()["source"]
    assert source["citation"]["repository_key"] == "R9" and source["citation"]["collection_key"] == "R9.C1"
    with database.read() as s:
        assert s.scalar(select(Collection.name).where(Collection.key == "R9.C1")) == "Council letters"
        assert s.scalar(select(Repository.name).where(Repository.key == "R9")) == "Town Archive"
    tables = {e.table_name for e in (audit_of(database, "repository", "R9") + audit_of(database, "collection", "R9.C1")
                                     + audit_of(database, "source", "S9"))}
    assert tables == {"repository", "collection", "source"}


def test_a_source_with_a_collection_of_another_repository_is_refused(client, database):
    post(client, "/new/source", key="S9", new_repository_key="R9", new_repository_name="Other", new_collection_key="R9.C",
         new_collection_name="x", reference="1")
    before = counts(database)
    answer = post(client, "/new/source", key="S10", repository="R1", collection="R9.C", reference="2", url="javascript:alert(1)")
    assert answer.status_code == 422
    assert "another repository" in field_error(answer.text, "collection")
    assert "http" in field_error(answer.text, "url")
    assert counts(database) == before


def test_a_new_source_date_moves_its_undated_attestations(client, database):
    with database.write() as s:
        source = s.scalar(select(Source).where(Source.key == "S2"))
        assert source.date_text is None
    version = re.search(r'name="version" value="(\d+)"', client.get("/sources/S2/edit").text).group(1)
    answer = post(client, "/sources/S2/edit", version=version, title="Printed letters", year="1710", date="1709")
    assert answer.status_code == 303
    with database.read() as s:
        a4 = s.scalar(select(Attestation).where(Attestation.key == "A4"))
        assert (a4.earliest.isoformat(), a4.latest.isoformat()) == ("1709-01-01", "1709-12-31")


# --- relations, memberships, attestations ----------------------------------------------------


def test_a_relation_cannot_be_saved_without_its_attestation(client, database):
    before = counts(database)
    answer = post(client, "/new/relation", person="P3", other="P1", kind="letter", source="", certainty="certain")
    assert answer.status_code == 422 and "source" in field_error(answer.text, "source")
    answer = post(client, "/new/relation", person="P3", other="P1", kind="letter", source="NOPE", date="1703-13")
    assert answer.status_code == 422
    assert "NOPE" in field_error(answer.text, "source") and field_error(answer.text, "date")
    assert counts(database) == before


def test_a_relation_with_its_attestation_shows_on_the_person_and_relation_pages(client, database):
    answer = post(client, "/new/relation", person="P3", other="P1", kind="letter", source="S1", locus="fol. 9",
                  certainty="probable", date="1703-06-12", quote="my dear friend", person_as_written="Persoon drie")
    assert answer.status_code == 303
    relation_id = int(answer.headers["location"].rsplit("/", 1)[1])
    relation = client.get(f"/api/relations/{relation_id}").json()["relation"]
    assert (relation["person_a"]["key"], relation["person_b"]["key"], relation["kind_key"]) == ("P3", "P1", "letter")
    [att] = relation["attestations"]
    assert (att["locus"], att["certainty"], att["quote"], att["date_text"]) == ("fol. 9", "probable", "my dear friend", "1703-06-12")
    person = client.get("/api/persons/P3").json()["person"]
    assert any(r["relation_id"] == relation_id for g in person["relations"] for r in g["relations"])
    # a further attestation is one short form on the relation page
    page = client.get(f"/relations/{relation_id}").text
    assert f'action="/relations/{relation_id}/attestations"' in page
    assert post(client, f"/relations/{relation_id}/attestations", source="S2", locus="p. 3").status_code == 303
    assert len(client.get(f"/api/relations/{relation_id}").json()["relation"]["attestations"]) == 2
    # the same tie again adds its attestation to the existing relation
    again = post(client, "/new/relation", person="P3", other="P1", kind="letter", source="S2", locus="p. 4")
    assert again.headers["location"] == f"/relations/{relation_id}"


def test_an_undirected_tie_is_stored_sorted_with_the_names_following_their_person(client, database):
    answer = post(client, "/new/relation", person="P3", other="P1", kind="friendship", source="S1",
                  person_as_written="Drie", other_as_written="Een")
    relation = client.get(answer.headers["location"].replace("/relations", "/api/relations")).json()["relation"]
    assert relation["person_a"]["key"] == "P1"
    written = {w["person"]: w["text"] for w in relation["attestations"][0]["names_as_written"]}
    assert written == {"P1": "Een", "P3": "Drie"} or set(written.values()) == {"Een", "Drie"}
    with database.read() as s:
        att = s.scalar(select(Attestation).where(Attestation.relation_id == relation["relation_id"]))
        assert (att.name_a_as_written, att.name_b_as_written) == ("Een", "Drie")


def test_a_membership_needs_its_attestation_and_shows_on_its_pages(client, database):
    before = counts(database)
    refused = post(client, "/new/membership", person="P2", group="G1", role="journeyman", source="")
    assert refused.status_code == 422 and counts(database) == before
    answer = post(client, "/new/membership", person="P2", group="G1", role="journeyman", start="1701", source="S1", locus="f. 2")
    assert answer.status_code == 303
    membership = client.get(answer.headers["location"].replace("/memberships", "/api/memberships")).json()
    assert membership["membership"]["role"] == "journeyman" and membership["membership"]["start"] == "1701"
    assert [a["locus"] for a in membership["attestations"]] == ["f. 2"]
    group = client.get("/api/groups/G1").json()["group"]
    assert any(m["person"]["key"] == "P2" and m["role"] == "journeyman" for m in group["members"])


def test_deleting_evidence_asks_for_a_reason_and_can_be_undone(client, database):
    before = counts(database)
    refused = post(client, "/attestations/A1/delete", reason="  ")
    assert refused.status_code == 422 and "why" in field_error(refused.text, "reason")
    assert counts(database) == before
    answer = post(client, "/attestations/A1/delete", reason="a duplicate of A2")
    assert answer.status_code == 303 and answer.headers["location"] == "/relations/1"
    page = client.get("/relations/1")
    assert "a duplicate of A2" in page.text and 'action="/attestations/A1/restore"' in page.text
    assert client.get("/api/relations/1").json()["deleted"] == 1
    entry = audit_of(database, "attestation", "A1")[-1]
    assert entry.action == "delete" and json.loads(entry.after_json)["deleted_reason"] == "a duplicate of A2"
    # the tie lives while one attestation is undeleted: A2 keeps P1 -> P2 in the network
    assert client.get("/api/summary").json()["summary"]["relations"] == 1
    post(client, "/attestations/A2/delete", reason="misread")
    assert client.get("/api/summary").json()["summary"]["relations"] == 0
    # restore from the relation page, and from the audit page
    assert post(client, "/attestations/A1/restore").status_code == 303
    delete_entry = audit_of(database, "attestation", "A2")[-1]
    assert 'action="/attestations/A2/restore"' in client.get(f"/audit/{delete_entry.id}").text
    assert post(client, "/attestations/A2/restore").status_code == 303
    assert client.get("/api/summary").json()["summary"]["relations"] == 1
    assert [e.action for e in audit_of(database, "attestation", "A1")] == ["delete", "restore"]


def test_an_attestation_is_edited_with_its_version(client, database):
    form = client.get("/attestations/A1/edit").text
    version = re.search(r'name="version" value="(\d+)"', form).group(1)
    answer = post(client, "/attestations/A1/edit", version=version, source="S1", locus="fol. 13", certainty="possible")
    assert answer.status_code == 303 and answer.headers["location"] == "/relations/1"
    [att] = [a for a in client.get("/api/relations/1").json()["relation"]["attestations"] if a["key"] == "A1"]
    assert (att["locus"], att["certainty"]) == ("fol. 13", "possible")


# --- optimistic concurrency ------------------------------------------------------------------


def test_a_second_save_on_a_stale_version_is_refused_with_what_changed(client, database):
    first = client.get("/persons/P1/edit").text
    version = re.search(r'name="version" value="(\d+)"', first).group(1)
    assert post(client, "/persons/P1/edit", version=version, name="Person One", note="seen in 1703").status_code == 303
    # a second editor, who opened the form at the same version, saves their own change
    answer = post(client, "/persons/P1/edit", version=version, name="Person 1 (printer)")
    assert answer.status_code == 409
    assert "Nothing was saved" in answer.text
    changes = dict(re.findall(r'<tr data-field="(\w+)"><th scope="row">\w+</th><td class="was">[^<]*</td><td class="now">([^<]*)</td>', answer.text))
    assert changes == {"name": "Person One", "note": "seen in 1703"}
    assert re.search(r'<td class="was">Person 1</td>', answer.text)
    assert client.get("/api/persons/P1").json()["person"]["name"] == "Person One"  # nothing overwritten
    assert 'value="Person 1 (printer)"' in answer.text  # the second editor's value is still in the form


def test_a_stale_membership_save_is_refused(client, database):
    version = re.search(r'name="version" value="(\d+)"', client.get("/memberships/1/edit").text).group(1)
    assert post(client, "/memberships/1/edit", version=version, role="warden").status_code == 303
    answer = post(client, "/memberships/1/edit", version=version, role="master", start="1700")
    assert answer.status_code == 409 and 'data-field="role"' in answer.text
    assert client.get("/api/memberships/1").json()["membership"]["role"] == "warden"


def test_a_new_person_gets_a_key_made_from_the_name_and_a_taken_key_is_refused_clearly(client, database):
    def box(**params: str):
        page = BeautifulSoup(client.get("/new/person/key", params=params).text, "html.parser")
        return page.select_one("#field-key")["value"], page.select_one("input[name=suggested]")["value"]

    # the key format of DESIGN.md (letters, digits and ._:-): folded, accents dropped, words hyphenated
    assert box(name="Griet  Mölenaar") == ("p-griet-molenaar", "p-griet-molenaar")
    assert box(name="Griet Molenaar", key="p-griet", suggested="p-griet") == ("p-griet-molenaar", "p-griet-molenaar")
    assert box(name="Griet Molenaar", key="GM1", suggested="p-griet") == ("GM1", "p-griet")  # typed by hand: kept
    assert client.get("/api/new/person/key", params={"name": "Griet"}).json()["value"] == "p-griet"
    form = BeautifulSoup(client.get("/new/person").text, "html.parser")
    name = form.select_one("#field-name")
    assert name["hx-get"] == "/new/person/key" and name["hx-target"] == "[data-field=key]"
    assert not form.select_one("#field-key").has_attr("required")

    # a blank key is made on saving; the next person of that name gets "-2"
    saved = post(client, "/new/person", key="", name="Griet Molenaar")
    assert saved.status_code == 303 and saved.headers["location"] == "/persons/p-griet-molenaar"
    assert box(name="Griet Molenaar") == ("p-griet-molenaar-2", "p-griet-molenaar-2")
    with database.read() as s:
        assert editing.suggest_person_key(session=s, name="Griet Molenaar") == "p-griet-molenaar-2"

    # a key already used is refused, naming who has it and a free key, and nothing is written
    before = counts(database)
    refused = post(client, "/new/person", key="p-griet-molenaar", name="Griet Molenaar")
    assert refused.status_code == 422
    message = BeautifulSoup(refused.text, "html.parser").select_one("#error-key").get_text()
    assert message == ("'p-griet-molenaar' is taken: it is already the key of Griet Molenaar; choose another, "
                       "for example 'p-griet-molenaar-2'")
    assert counts(database) == before


def test_a_season_is_shown_in_words_beside_the_code(client):
    # EDTF 2019, Level 1 "Seasons": 22 is summer, 24 winter
    post(client, "/new/person", key="P9", name="Nine", born="1662-22", died="1701-24")
    page = BeautifulSoup(client.get("/persons/P9").text, "html.parser")
    born = page.select_one('[data-life="born"]')
    assert born.select_one(".date-written").get_text() == "1662-22"
    assert born.select_one(".date-words").get_text() == "(summer 1662)"
    assert page.select_one('[data-life="died"] .date-words').get_text() == "(winter 1701)"
    index = BeautifulSoup(client.get("/persons", params={"q": "Nine"}).text, "html.parser")
    assert [w.get_text() for w in index.select("td.life .date-words")] == ["(summer 1662)", "(winter 1701)"]



def test_seasons_are_in_words_on_the_received_date_and_the_group_members_dates(tmp_path):
    # EDTF 2019, Level 1 "Seasons": 24 is winter; Level 2 "Sub-year groupings": 28 is winter (northern hemisphere)
    from app.config import Settings, database_url
    from app.db import Database, upgrade
    from app.exchange.workbook import import_workbook
    from app.main import create_app
    from tests.workbooks import small_world, write_workbook

    world = small_world()
    world["sources.csv"][0].update(date="1703-21", received="1703-24")
    for row in world["memberships.csv"]:
        row["date"] = "1702-28"
    db = Database(database_url(tmp_path / "seasons.db"))
    upgrade(db)
    import_workbook(db, write_workbook(tmp_path / "wb", world), size_limit=10**9)
    db.dispose()
    with TestClient(create_app(Settings(database_url=database_url(tmp_path / "seasons.db")))) as seasons:
        source = BeautifulSoup(seasons.get("/sources/s-1").text, "html.parser")
        assert source.select_one('[data-field="received"] .date-words').get_text() == "(winter 1703)"
        group = BeautifulSoup(seasons.get("/groups/g-society").text, "html.parser")
        dates = group.select("li.attestation-date")
        assert dates and all(d.select_one(".date-words").get_text() == "(winter 1702 (northern hemisphere))" for d in dates)

# --- audit trail -----------------------------------------------------------------------------


def test_a_failing_write_leaves_no_audit_entry(database):
    add_tiny_dataset(database)
    before = counts(database)
    with pytest.raises(RuntimeError):
        with database.write() as session:
            editing.create_person(session=session, actor=LOCAL_ACTOR, key="P9", name="Nine")
            assert session.scalar(select(func.count()).select_from(AuditEntry)) == before[3] + 1  # written, not committed
            raise RuntimeError("the disk is full")
    assert counts(database) == before
    with database.read() as s:
        assert s.scalar(select(PersonName.id).where(PersonName.name == "Nine")) is None


def test_the_audit_page_filters_by_user_record_and_date(client, database):
    post(client, "/new/person", key="P9", name="Nine")
    post(client, "/new/person", key="P10", name="Ten")
    everything = client.get("/api/audit").json()["changes"]
    assert everything["total"] == 2
    one = client.get("/api/audit", params={"table": "person", "key": "P9"}).json()["changes"]
    assert [r["key"] for r in one["rows"]] == ["P9"]
    assert client.get("/api/audit", params={"user": "local"}).json()["changes"]["total"] == 2
    assert client.get("/api/audit", params={"user": "someone"}).json()["changes"]["total"] == 0
    assert client.get("/api/audit", params={"to": "2000"}).json()["changes"]["total"] == 0
    assert client.get("/api/audit", params={"from": "2000-01-01"}).json()["changes"]["total"] == 2
    assert client.get("/api/audit", params={"from": "soon"}).status_code == 400
    # every record page links its own history
    assert "/audit?table=person&amp;key=P9" in client.get("/persons/P9").text
    assert "/audit?table=source&amp;key=S1" in client.get("/sources/S1").text
    assert "/audit?table=relation&amp;key=1" in client.get("/relations/1").text
    assert "/audit?table=group&amp;key=G1" in client.get("/groups/G1").text


def test_the_audit_page_names_the_persons_and_lays_its_filters_out_in_a_row(client):
    post(client, "/new/person", key="P9", name="Nine")
    page = BeautifulSoup(client.get("/audit").text, "html.parser")
    [row] = page.select("tr[data-action=create]")
    assert row.select_one(".summary").get_text(strip=True) == "created person Nine (P9)"
    name = row.select_one("a.record-name")
    assert name.get_text(strip=True) == "Nine" and name["href"] == "/persons/P9"
    form = page.select_one("form.filters.audit-filters")
    for field in ("user", "table", "key", "from", "to"):  # every box has its label
        box = form.select_one(f'input[name="{field}"]')
        assert form.select_one(f'label[for="{box["id"]}"]') is not None, field
    assert "person" in [option["value"] for option in form.select("datalist option")]
    assert form.select_one(".filter-reset") is None  # nothing filtered yet
    filtered = BeautifulSoup(client.get("/audit", params={"table": "person"}).text, "html.parser")
    assert filtered.select_one(".filter-reset")["href"] == "/audit"


def test_there_is_no_route_that_edits_an_audit_entry(client):
    paths = client.get("/openapi.json").json()["paths"]
    audit_writes = {(p, m) for p, ops in paths.items() for m in ops if p.startswith(("/audit", "/api/audit")) and m != "get"}
    assert audit_writes == {("/audit/{entry_id}/redact", "post")}


def test_redaction_takes_personal_data_out_and_is_itself_recorded(client, database):
    post(client, "/new/person", key="P9", name="Living Neighbour", note="lives at Mill Lane 4")
    [entry] = audit_of(database, "person", "P9")
    assert "Mill Lane" in entry.after_json
    refused = post(client, f"/audit/{entry.id}/redact", text="Mill Lane", reason="")
    assert refused.status_code == 422
    assert "Mill Lane" in audit_of(database, "person", "P9")[0].after_json
    answer = post(client, f"/audit/{entry.id}/redact", text="Mill Lane", reason="request of the person, 2026-12-01")
    assert answer.status_code == 303
    [redacted] = audit_of(database, "person", "P9")
    after = json.loads(redacted.after_json)
    assert after["note"] == "[redacted]" and after["name"] == "Living Neighbour"
    assert redacted.redacted_at is not None
    [record] = audit_of(database, "audit_entry", str(entry.id))
    assert record.action == "redact" and record.actor == "local"
    assert json.loads(record.after_json)["reason"] == "request of the person, 2026-12-01"
    assert "Mill Lane" not in (record.after_json + (record.summary or ""))
    assert "redacted" in client.get(f"/audit/{entry.id}").text


def test_a_write_without_the_csrf_token_is_refused_and_changes_nothing(client, database):
    before = counts(database)
    answer = client.post("/new/person", data={"key": "P9", "name": "Nine"}, follow_redirects=False)
    assert answer.status_code == 403
    answer = client.post("/new/person", data={"key": "P9", "name": "Nine", "csrf_token": "forged"}, follow_redirects=False)
    assert answer.status_code == 403
    assert counts(database) == before
    # htmx writes send the token as a header: every page's body carries it in hx-headers
    page = client.get("/persons/P1").text
    assert f'hx-headers=\'{{"X-CSRF-Token": "{token(client)}"}}\'' in page
    answer = client.post("/new/person", data={"key": "P9", "name": "Nine"}, headers={"X-CSRF-Token": token(client)},
                         follow_redirects=False)
    assert answer.status_code == 303


# --- roles -----------------------------------------------------------------------------------


@pytest.mark.parametrize("role, status", [("reader", 403), ("editor", 303)])
def test_writes_need_the_editor_role(client, database, role, status):
    from tests.accounts_world import ROLE_USERS, add_role_users, sign_in

    add_role_users(database)  # once a user exists, the instance has no local user: everyone signs in
    assert sign_in(client, ROLE_USERS[role]).status_code == 303
    csrf = token(client, "/persons/P1")  # every page carries the token, a reader's too
    before = counts(database)
    answer = client.post("/new/person", data={"csrf_token": csrf, "key": "P9", "name": "Nine"}, follow_redirects=False)
    assert answer.status_code == status
    assert (counts(database) == before) is (role == "reader")
    assert client.get("/audit").status_code == (403 if role == "reader" else 200)
    assert client.get("/new/person").status_code == (403 if role == "reader" else 200)
    # redaction is for admins only, editors included among those refused
    entry_id = client.get("/api/audit").json()["changes"]["rows"][0]["id"] if role == "editor" else 1
    refused = client.post(f"/audit/{entry_id}/redact", data={"csrf_token": csrf, "reason": "x"}, follow_redirects=False)
    assert refused.status_code == 403
    if role == "editor":
        assert audit_of(database, "person", "P9")[0].actor == ROLE_USERS["editor"]


def test_an_import_moves_the_version_on_so_a_form_opened_before_it_is_refused(client, database, tmp_path):
    from app.exchange.workbook import import_workbook
    from tests.workbooks import write_workbook

    version = re.search(r'name="version" value="(\d+)"', client.get("/persons/P1/edit").text).group(1)
    with database.read() as session:
        person_before = session.scalar(select(Person.version).where(Person.key == "P1"))
    folder = write_workbook(tmp_path / "wb", {"persons.csv": [
        {"key": "P1", "name": "Person 1", "note": "corrected from the register"}]})
    report = import_workbook(database, folder, size_limit=10**8, actor="edmund")
    assert report.changed_anything
    with database.read() as session:
        person_after = session.scalar(select(Person.version).where(Person.key == "P1"))
    assert person_after > person_before
    # the same file again changes nothing, and moves no version on
    assert not import_workbook(database, folder, size_limit=10**8, actor="edmund").changed_anything
    with database.read() as session:
        assert session.scalar(select(Person.version).where(Person.key == "P1")) == person_after
    # the editor who opened the form before the import saves: refused, with the record as it is now
    answer = post(client, "/persons/P1/edit", version=version, name="Person 1", note="my own note")
    assert answer.status_code == 409
    assert "an import by edmund" in answer.text and "Nothing was saved" in answer.text
    assert re.search(r'<tr data-field="note"><th scope="row">\w+</th><td class="was">[^<]*</td>'
                     r'<td class="now">corrected from the register</td>', answer.text)
    assert client.get("/api/persons/P1").json()["person"]["note"] == "corrected from the register"
    # a form opened after the import saves
    fresh = re.search(r'name="version" value="(\d+)"', client.get("/persons/P1/edit").text).group(1)
    assert post(client, "/persons/P1/edit", version=fresh, name="Person 1", note="my own note").status_code == 303


def test_an_import_that_adds_a_spelling_moves_the_persons_version_on(client, database, tmp_path):
    from app.exchange.workbook import import_workbook
    from tests.workbooks import write_workbook

    with database.read() as session:
        before = session.scalar(select(Person.version).where(Person.key == "P1"))
    import_workbook(database, write_workbook(tmp_path / "wb", {"persons.csv": [
        {"key": "P1", "name": "Person 1", "variants": "Persona Una"}]}), size_limit=10**8, actor="edmund")
    with database.read() as session:
        assert session.scalar(select(Person.version).where(Person.key == "P1")) > before


# --- groups ------------------------------------------------------------------------------------


def test_a_group_is_created_and_edited_with_its_version_and_audit(client, database):
    answer = post(client, "/new/group", key="g-guild", name="Guild of Printers", kind="guild", start="1702")
    assert answer.status_code == 303 and answer.headers["location"] == "/groups/g-guild"
    assert post(client, "/new/group", key="g-lodge", name="Lodge", parent="g-guild", end="1740").status_code == 303
    group = client.get("/api/groups/g-lodge").json()["group"]
    assert group["name"] == "Lodge" and group["ancestors"][-1]["key"] == "g-guild"
    version = re.search(r'name="version" value="(\d+)"', client.get("/groups/g-guild/edit").text).group(1)
    assert post(client, "/groups/g-guild/edit", version=version, name="Guild of Printers and Binders",
                kind="guild", start="1702").status_code == 303
    assert client.get("/api/groups/g-guild").json()["group"]["name"] == "Guild of Printers and Binders"
    [created, edited] = audit_of(database, "group", "g-guild")
    assert created.action == "create" and edited.action == "update"
    assert json.loads(edited.before_json)["name"] == "Guild of Printers"
    assert json.loads(edited.after_json)["name"] == "Guild of Printers and Binders"
    # a second editor on the old version is refused, with what changed
    answer = post(client, "/groups/g-guild/edit", version=version, name="Printers' Guild")
    assert answer.status_code == 409 and 'data-field="name"' in answer.text and "Nothing was saved" in answer.text
    assert client.get("/api/groups/g-guild").json()["group"]["name"] == "Guild of Printers and Binders"


def test_a_refused_group_form_names_each_field_and_writes_nothing(client, database):
    post(client, "/new/group", key="g-guild", name="Guild")
    before = counts(database)
    answer = post(client, "/new/group", key="g-guild", name="", place="nowhere", parent="g-none", start="17th century")
    assert answer.status_code == 422
    for name in ("key", "name", "place", "parent", "start"):
        assert field_error(answer.text, name), name
    assert counts(database) == before
    version = re.search(r'name="version" value="(\d+)"', client.get("/groups/g-guild/edit").text).group(1)
    post(client, "/new/group", key="g-inner", name="Inner", parent="g-guild")
    before = counts(database)
    answer = post(client, "/groups/g-guild/edit", version=version, name="Guild", parent="g-inner")
    assert answer.status_code == 422 and "inside it" in field_error(answer.text, "parent")
    assert counts(database) == before
