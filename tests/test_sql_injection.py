"""SQL injection attempts in every search and slice parameter change nothing and get a normal answer or a clear 400.

Each attempt goes to the real app over HTTP as the local user (full rights, so nothing is refused
for lack of a role). Before and after, every table is counted and checksummed row by row; the
stored measure results and the job queue are left out of the checksum, since reading a measure
page may store a result (that is a cache, not evidence), but they are counted for evidence of a
DROP or DELETE. The payloads are common practice (classic tautologies, stacked statements,
UNION reads, comment and quote breakers, LIKE wildcards).
"""

from __future__ import annotations

import hashlib
from urllib.parse import urlencode

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import func, select

from app.main import create_app
from app.models import Base
from helpers import add_tiny_dataset

pytestmark = pytest.mark.both_databases

PAYLOADS = [
    "' OR '1'='1", "' OR 1=1 --", "'; DROP TABLE person; --", "1; DELETE FROM attestation", "\" OR \"\"=\"",
    "' UNION SELECT name, password_hash FROM \"user\" --", "%' OR key LIKE '%", "%_%", "\\' ; UPDATE person SET name='x' --",
    "1) OR (1=1", "0x27", "' || (SELECT version()) || '", "S1' AND SLEEP(1) --", "1 OR pg_sleep(1) IS NULL",
]  # fmt: skip
SEARCHES = ["/persons", "/api/persons", "/groups", "/api/groups", "/sources", "/api/sources", "/audit", "/api/audit"]
SEARCH_PARAMETERS = {"/audit": ["user", "table", "key"], "/api/audit": ["user", "table", "key"],
                     "/sources": ["q", "kind", "from", "to", "place_from", "place_to", "sort"],
                     "/api/sources": ["q", "kind", "from", "to", "place_from", "place_to", "sort"],
                     "/groups": ["q", "kind"], "/api/groups": ["q", "kind"]}
SLICE_PARAMETERS = ["kind", "from", "to", "dates", "undated", "certainty", "evidence", "keep_collection",
                    "omit_collection", "keep_repository", "omit_repository", "min_collections", "unidentified", "nodes",
                    "loops", "direction", "weight", "mode", "overlap", "max_group_size", "same_as", "weighting"]
SLICE_PAGES = ["/api/network/summary", "/api/network/centrality?measure=degree", "/api/persons/P1/ego",
               "/api/persons/P1", "/api/ties/P1/P2", "/export/edges.csv"]
CACHES = {"measure_result", "job"}  # written by reading a measure page: counted, not checksummed


def fingerprint(database) -> dict[str, tuple[int, str]]:
    """Every table's row count, and a SHA-256 over its rows in key order (caches: count only)."""
    found = {}
    with database.read() as session:
        for table in Base.metadata.sorted_tables:
            count = session.scalar(select(func.count()).select_from(table))
            digest = ""
            if table.name not in CACHES:
                rows = session.execute(select(table).order_by(*table.primary_key.columns)).all()
                digest = hashlib.sha256(repr([tuple(row) for row in rows]).encode()).hexdigest()
            found[table.name] = (count, digest)
    return found


@pytest.fixture
def world(settings, database):
    add_tiny_dataset(database)
    with TestClient(create_app(settings)) as client:
        yield client, database


def _ask(client: TestClient, path: str, parameter: str, payload: str):
    joiner = "&" if "?" in path else "?"
    response = client.get(path + joiner + urlencode({parameter: payload}))
    assert response.status_code in (200, 400), (path, parameter, payload, response.status_code, response.text[:300])
    if response.status_code == 400:  # a clear message naming the parameter, never a database error
        assert parameter in response.text or parameter.replace("_", " ") in response.text, response.text[:300]
    lowered = response.text.lower()
    assert "traceback" not in lowered and "sqlalchemy" not in lowered and "syntax error" not in lowered
    return response


def test_injection_in_searches_changes_nothing_and_finds_nothing_it_should_not(world):
    client, database = world
    before = fingerprint(database)
    for path in SEARCHES:
        for parameter in SEARCH_PARAMETERS.get(path, ["q"]):
            for payload in PAYLOADS:
                response = _ask(client, path, parameter, payload)
                if path == "/api/persons" and response.status_code == 200:
                    # a tautology must not turn the search into "every person"
                    assert response.json()["result"]["total"] < 3, (payload, response.json()["result"]["total"])
    assert fingerprint(database) == before
    # the searches still work afterwards
    assert client.get("/api/persons", params={"q": "Person"}).json()["result"]["total"] >= 1


def test_injection_in_slice_parameters_changes_nothing(world):
    client, database = world
    before = fingerprint(database)
    for path in SLICE_PAGES:
        for parameter in SLICE_PARAMETERS:
            for payload in (PAYLOADS[1], PAYLOADS[2], PAYLOADS[5], PAYLOADS[8]):  # tautology, stacked, UNION, UPDATE
                _ask(client, path, parameter, payload)
    after = fingerprint(database)
    assert {name: value for name, value in after.items() if name not in CACHES} == \
           {name: value for name, value in before.items() if name not in CACHES}
    assert client.get("/api/network/summary").status_code == 200


def test_injection_in_keys_of_paths_changes_nothing(world):
    client, database = world
    before = fingerprint(database)
    for payload in PAYLOADS:
        for path in ("/api/persons/{}", "/api/sources/{}", "/api/groups/{}", "/api/ties/P1/{}"):
            response = client.get(path.format(payload.replace("/", "%2F")))
            assert response.status_code in (400, 404), (path, payload, response.status_code)
    assert fingerprint(database) == before
