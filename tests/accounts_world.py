"""A small world with restricted persons, and clients signed in as a reader, an editor or an admin."""

from __future__ import annotations

from pathlib import Path

from bs4 import BeautifulSoup
from fastapi.testclient import TestClient

from app.auth import hash_password
from app.db import Database
from app.exchange.workbook import import_workbook
from app.store.users import create_user
from tests.workbooks import small_world, write_workbook

PASSWORD = "correct horse battery"
ROLE_USERS = {"reader": "rhea", "editor": "edmund", "admin": "ada"}
# What a reader must never see of the restricted persons (names, variants, keys, identifiers, facts, quotes).
SECRETS = ("Zorwald", "Zorvald", "Quenneby", "p-zorwald", "ZQ77", "glassblower", "sealed greetings", "Ysolde",
           "Marrack", "p-ysolde")


def restricted_world() -> dict[str, list[dict[str, str]]]:
    """The small world plus one person marked living and one born in 1950 with no death (110-year rule)."""
    world = small_world()
    world["persons"+".csv"] += [
        {"key": "p-zorwald", "name": "Zorwald Quenneby", "variants": "Zorvald Quenby", "born": "1990", "living": "yes",
         "identifiers": "local:ZQ77", "note": "seen in 2020"},
        {"key": "p-ysolde", "name": "Ysolde Marrack", "born": "1950"},
        {"key": "p-oldtimer", "name": "Oswin Tarrant", "born": "1890"},  # 136 years ago: not restricted
    ]
    world["relations.csv"] += [
        {"key": "r-z1", "person": "p-zorwald", "other": "p-anna", "kind": "letter", "source": "s-1", "locus": "fol. 9r",
         "person_as_written": "Zorvald Q.", "quote": "sealed greetings from the glassblower"},
        {"key": "r-z2", "person": "p-jost", "other": "p-zorwald", "kind": "letter", "source": "s-2"},
        {"key": "r-y1", "person": "p-ysolde", "other": "p-zorwald", "kind": "friendship", "source": "s-ed"},
        {"key": "r-o1", "person": "p-oldtimer", "other": "p-anna", "kind": "letter", "source": "s-ed"},
    ]
    world["memberships.csv"] += [
        {"key": "m-z", "person": "p-zorwald", "group": "g-society", "role": "treasurer", "start": "2015", "source": "s-ed"},
    ]
    world["facts.csv"] += [
        {"key": "f-z", "person": "p-zorwald", "fact": "occupation", "value": "glassblower", "source": "s-1"},
    ]
    return world


def load_restricted_world(database: Database, folder: Path) -> None:
    import_workbook(database, write_workbook(folder / "restricted", restricted_world()), size_limit=10**9)


def add_role_users(database: Database) -> None:
    with database.write() as session:
        for role, name in ROLE_USERS.items():
            create_user(session=session, name=name, role=role, password_hash=hash_password(PASSWORD), actor="test")


def form_token(client: TestClient, path: str = "/login") -> str:
    """The CSRF token of the first form on a page."""
    return BeautifulSoup(client.get(path).text, "html.parser").select_one("input[name=csrf_token]")["value"]


def sign_in(client: TestClient, name: str, password: str = PASSWORD):
    """Sign in through the form, as a browser does; return the response."""
    token = form_token(client)
    return client.post("/login", data={"name": name, "password": password, "csrf_token": token, "next": "/"},
                       follow_redirects=False)
