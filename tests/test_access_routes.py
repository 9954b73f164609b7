"""Every route of the app with the roles allowed, checked over HTTP as anonymous, reader, editor and admin.

A new route without a line in ROUTES fails test_every_route_has_a_line.
"""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient
from starlette.routing import Mount

from app.config import Settings, database_url
from app.main import create_app
from tests.accounts_world import ROLE_USERS, add_role_users, load_restricted_world, sign_in

OPEN, READ, ADMIN = "anyone", "reader", "admin"
# (method, path template) -> (the least role allowed, a concrete path to ask)
ROUTES = {
    ("GET", "/"): (READ, "/"), ("GET", "/api/summary"): (READ, "/api/summary"),
    ("GET", "/login"): (OPEN, "/login"), ("GET", "/api/login"): (OPEN, "/api/login"),
    ("POST", "/login"): (OPEN, "/login"), ("POST", "/api/login"): (OPEN, "/api/login"),
    ("POST", "/logout"): (OPEN, "/logout"), ("POST", "/api/logout"): (OPEN, "/api/logout"),
    ("GET", "/admin/users"): (ADMIN, "/admin/users"), ("GET", "/api/admin/users"): (ADMIN, "/api/admin/users"),
    ("POST", "/admin/users"): (ADMIN, "/admin/users"), ("POST", "/api/admin/users"): (ADMIN, "/api/admin/users"),
    ("POST", "/admin/users/{name}/disable"): (ADMIN, "/admin/users/nobody/disable"),
    ("POST", "/api/admin/users/{name}/disable"): (ADMIN, "/api/admin/users/nobody/disable"),
    ("GET", "/groups"): (READ, "/groups"), ("GET", "/api/groups"): (READ, "/api/groups"),
    ("GET", "/groups/{key}"): (READ, "/groups/g-society"), ("GET", "/api/groups/{key}"): (READ, "/api/groups/g-society"),
    ("GET", "/groups/{key}/members.csv"): (READ, "/groups/g-society/members.csv"),
    ("GET", "/network"): (READ, "/network"), ("GET", "/api/network"): (READ, "/api/network"),
    ("GET", "/network/summary/degrees.svg"): (READ, "/network/summary/degrees.svg"),
    ("POST", "/network/{view}/recompute"): (READ, "/network/summary/recompute"),
    ("POST", "/api/network/{view}/recompute"): (READ, "/api/network/summary/recompute"),
    ("GET", "/network/jobs/{job_id}"): (READ, "/network/jobs/1"), ("GET", "/api/network/jobs/{job_id}"): (READ, "/api/network/jobs/1"),
    ("GET", "/persons/{key}/measures"): (READ, "/persons/p-anna/measures"),
    ("GET", "/api/persons/{key}/measures"): (READ, "/api/persons/p-anna/measures"),
    ("GET", "/persons"): (READ, "/persons"), ("GET", "/api/persons"): (READ, "/api/persons"),
    ("GET", "/persons/{key}"): (READ, "/persons/p-anna"), ("GET", "/api/persons/{key}"): (READ, "/api/persons/p-anna"),
    ("GET", "/persons/{key}/ego"): (READ, "/persons/p-anna/ego"), ("GET", "/api/persons/{key}/ego"): (READ, "/api/persons/p-anna/ego"),
    ("GET", "/persons/{key}/ego.svg"): (READ, "/persons/p-anna/ego.svg"),
    ("GET", "/places/{key}"): (READ, "/places/pl-harwick"), ("GET", "/api/places/{key}"): (READ, "/api/places/pl-harwick"),
    ("GET", "/sources"): (READ, "/sources"), ("GET", "/api/sources"): (READ, "/api/sources"),
    ("GET", "/sources/{key}"): (READ, "/sources/s-1"), ("GET", "/api/sources/{key}"): (READ, "/api/sources/s-1"),
    ("GET", "/repositories"): (READ, "/repositories"), ("GET", "/api/repositories"): (READ, "/api/repositories"),
    ("GET", "/repositories/{key}"): (READ, "/repositories/rep-harwick"),
    ("GET", "/api/repositories/{key}"): (READ, "/api/repositories/rep-harwick"),
    ("GET", "/collections/{key}"): (READ, "/collections/col-vell"), ("GET", "/api/collections/{key}"): (READ, "/api/collections/col-vell"),
    ("GET", "/ties/{a}/{b}"): (READ, "/ties/p-anna/p-jost"), ("GET", "/api/ties/{a}/{b}"): (READ, "/api/ties/p-anna/p-jost"),
    ("GET", "/relations/{relation_id}"): (READ, "/relations/1"), ("GET", "/api/relations/{relation_id}"): (READ, "/api/relations/1"),
    ("GET", "/network/two-mode"): (READ, "/network/two-mode"), ("GET", "/api/network/two-mode"): (READ, "/api/network/two-mode"),
    ("GET", "/openapi.json"): (OPEN, "/openapi.json"),
}  # fmt: skip
for view in ("summary", "centrality", "components", "cut-points", "cliques", "communities"):
    ROUTES[("GET", f"/network/{view}")] = (READ, f"/network/{view}")
    ROUTES[("GET", f"/api/network/{view}")] = (READ, f"/api/network/{view}")

EDIT = "editor"
# Forms, imports, merges and the audit trail are for editors (they show and change personal data);
# redaction is for admins; exports and the membership page are for readers.
for method, template, needed, path in [
    ("GET", "/memberships/{membership_id}", READ, "/memberships/1"),
    ("GET", "/api/memberships/{membership_id}", READ, "/api/memberships/1"),
    ("GET", "/export", READ, "/export"), ("GET", "/api/export", READ, "/api/export"),
    ("GET", "/export/edges.csv", READ, "/export/edges.csv"), ("GET", "/export/nodes.csv", READ, "/export/nodes.csv"),
    ("GET", "/export/matrix.csv", READ, "/export/matrix.csv"), ("GET", "/export/graphml", READ, "/export/graphml"),
    ("GET", "/export/sources.json", READ, "/export/sources.json"), ("GET", "/export/workbook.zip", READ, "/export/workbook.zip"),
    ("GET", "/export/ego.svg", READ, "/export/ego.svg?person=p-jost"), ("GET", "/export/ego.png", READ, "/export/ego.png?person=p-jost"),
    ("GET", "/export/two-mode.svg", READ, "/export/two-mode.svg"), ("GET", "/export/two-mode.png", READ, "/export/two-mode.png"),
    ("POST", "/export/snapshot", READ, "/export/snapshot"),
    ("POST", "/audit/{entry_id}/redact", ADMIN, "/audit/1/redact"),
]:
    ROUTES[(method, template)] = (needed, path)
for method, template, path in [
    ("GET", "/attestations/{key}/delete", "/attestations/att-none/delete"),
    ("POST", "/attestations/{key}/delete", "/attestations/att-none/delete"),
    ("GET", "/attestations/{key}/edit", "/attestations/att-none/edit"),
    ("POST", "/attestations/{key}/edit", "/attestations/att-none/edit"),
    ("POST", "/attestations/{key}/restore", "/attestations/att-none/restore"),
    ("GET", "/audit", "/audit"), ("GET", "/audit/{entry_id}", "/audit/1"),
    ("GET", "/import", "/import"), ("POST", "/import", "/import"), ("GET", "/import/{token}", "/import/nosuch"),
    ("POST", "/import/{token}/confirm", "/import/nosuch/confirm"), ("POST", "/import/{token}/mapping", "/import/nosuch/mapping"),
    ("GET", "/import/{token}/mapping.json", "/import/nosuch/mapping.json"),
    ("GET", "/import/{token}/progress", "/import/nosuch/progress"),
    ("POST", "/import/{token}/source", "/import/nosuch/source"),
    ("POST", "/memberships/{membership_id}/attestations", "/memberships/1/attestations"),
    ("GET", "/memberships/{membership_id}/edit", "/memberships/1/edit"),
    ("POST", "/memberships/{membership_id}/edit", "/memberships/1/edit"),
    ("GET", "/merge", "/merge"), ("POST", "/merge", "/merge"),
    ("GET", "/groups/{key}/edit", "/groups/g-society/edit"), ("POST", "/groups/{key}/edit", "/groups/g-society/edit"),
    ("GET", "/new/group", "/new/group"), ("POST", "/new/group", "/new/group"),
    ("GET", "/new/membership", "/new/membership"), ("POST", "/new/membership", "/new/membership"),
    ("GET", "/new/person", "/new/person"), ("POST", "/new/person", "/new/person"),
    ("GET", "/new/person/key", "/new/person/key?name=Griet"),
    ("GET", "/new/relation", "/new/relation"), ("POST", "/new/relation", "/new/relation"),
    ("GET", "/new/source", "/new/source"), ("POST", "/new/source", "/new/source"),
    ("POST", "/person-links/{link_id}/delete", "/person-links/999/delete"),
    ("GET", "/persons/{key}/edit", "/persons/p-jost/edit"), ("POST", "/persons/{key}/edit", "/persons/p-jost/edit"),
    ("POST", "/persons/{key}/links", "/persons/p-jost/links"),
    ("GET", "/persons/{key}/split", "/persons/p-jost/split"), ("POST", "/persons/{key}/split", "/persons/p-jost/split"),
    ("POST", "/relations/{relation_id}/attestations", "/relations/1/attestations"),
    ("GET", "/sources/{key}/edit", "/sources/s-1/edit"), ("POST", "/sources/{key}/edit", "/sources/s-1/edit"),
]:
    ROUTES[(method, template)] = (EDIT, path)
    if (method == "GET" or template.startswith("/import")) and not template.endswith("mapping.json"):
        api = "/api" + template
        ROUTES.setdefault((method, api), (EDIT, "/api" + path))
LEVEL = {"anonymous": -1, "reader": 0, "editor": 1, "admin": 2}
NEEDED = {OPEN: -1, READ: 0, "editor": 1, ADMIN: 2}


def app_routes(app) -> set[tuple[str, str]]:
    """Every (method, path) the app answers, from the openapi document and the routes outside it."""
    found = {(m.upper(), path) for path, ops in TestClient(app).get("/openapi.json").json()["paths"].items() for m in ops}
    stack = list(app.routes)
    while stack:
        route = stack.pop()
        if isinstance(route, Mount):
            continue
        if getattr(route, "methods", None):
            found.update((m, route.path) for m in route.methods - {"HEAD"} if route.path.startswith("/"))
        stack.extend(getattr(route, "routes", None) or getattr(getattr(route, "router", None), "routes", []) or [])
    return found


@pytest.fixture(scope="module")
def clients(tmp_path_factory):
    from app.db import Database, upgrade

    folder = tmp_path_factory.mktemp("roles")
    database = Database(database_url(folder / "attesta.db"))
    upgrade(database)
    load_restricted_world(database, folder)
    add_role_users(database)
    app = create_app(Settings(database_url=database_url(folder / "attesta.db")))
    result = {"anonymous": TestClient(app)}
    for role, name in ROLE_USERS.items():
        result[role] = TestClient(app)
        assert sign_in(result[role], name).status_code == 303
    yield app, result
    database.dispose()


def test_every_route_has_a_line(clients):
    app, _ = clients
    assert app_routes(app) == set(ROUTES), "ROUTES must list every route of the app with the roles allowed"


@pytest.mark.parametrize("who", list(LEVEL))
@pytest.mark.parametrize("route", sorted(ROUTES))
def test_each_route_answers_each_role_as_the_table_says(clients, route, who):
    _, by_role = clients
    method, _template = route
    needed, path = ROUTES[route]
    client = by_role[who]
    token = client.get("/api/login").json()["csrf_token"]
    if method == "GET":
        response = client.get(path, follow_redirects=False)
    else:
        if path.endswith("logout"):
            pytest.skip("signing out would end the shared sessions; covered in test_accounts")
        data = {"name": "", "password": ""}
        response = client.post(path, data=data, headers={"X-CSRF-Token": token}, follow_redirects=False)
    refused = response.status_code in (401, 403) or (
        response.status_code == 303 and response.headers.get("location", "").startswith("/login"))
    allowed = LEVEL[who] >= NEEDED[needed]
    if allowed:
        assert not refused or path.startswith(("/login", "/api/login")), (who, path, response.status_code)
        assert response.status_code < 500
    else:
        assert refused, (who, path, response.status_code)
