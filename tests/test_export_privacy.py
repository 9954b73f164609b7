"""Exports leave restricted persons out for every role unless an admin asks for them (HTTP and the command).

The world (tests/accounts_world.py) holds a person marked living and one born in 1950 with no
death; SECRETS are every trace of them (names, spellings, keys, identifiers, facts, quotes).
"""

from __future__ import annotations

import csv
import json
import io
import zipfile

import pytest
from bs4 import BeautifulSoup
from click.testing import CliRunner
from fastapi.testclient import TestClient

from app.config import Settings, database_url
from app.db import Database, upgrade
from app.main import create_app
from tests.accounts_world import ROLE_USERS, SECRETS, add_role_users, form_token, load_restricted_world, sign_in
from app.cli import main


def attesta(*args: str):
    """Run the real command in this process (click's runner), without the ATTESTA_ settings of the environment."""
    import os

    result = CliRunner().invoke(main, list(args), env={k: None for k in os.environ if k.startswith("ATTESTA_")})
    if result.exception is not None and not isinstance(result.exception, SystemExit):
        raise result.exception
    result.returncode = result.exit_code
    return result

FILES = ["/export/graphml", "/export/nodes.csv", "/export/edges.csv", "/export/matrix.csv", "/export/sources.json",
         "/export/workbook.zip", "/export/ego.svg?person=p-anna", "/export/ego.svg?person=p-anna&radius=2",
         "/export/two-mode.svg"]


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    folder = tmp_path_factory.mktemp("export-privacy")
    path = folder / "attesta.db"
    database = Database(database_url(path))
    upgrade(database)
    load_restricted_world(database, folder)
    add_role_users(database)
    app = create_app(Settings(database_url=database_url(path)))
    clients = {}
    with TestClient(app) as reader, TestClient(app) as editor, TestClient(app) as admin:
        for role, client in (("reader", reader), ("editor", editor), ("admin", admin)):
            assert sign_in(client, ROLE_USERS[role]).status_code == 303
            clients[role] = client
        yield path, clients
    database.dispose()


def text_of(response) -> str:
    """The whole text of a download (every member of a .zip)."""
    if response.headers["content-type"].startswith("application/zip"):
        archive = zipfile.ZipFile(io.BytesIO(response.content))
        return "\n".join(archive.read(name).decode("utf-8") for name in archive.namelist())
    return response.text


def leaks(text: str) -> list[str]:
    return [secret for secret in SECRETS if secret.lower() in text.lower()]


@pytest.mark.parametrize("role", ["reader", "editor", "admin"])
@pytest.mark.parametrize("path", FILES)
def test_every_file_leaves_restricted_persons_out_for_every_role_by_default(world, role, path):
    _, clients = world
    response = clients[role].get(path)
    assert response.status_code == 200, response.text[:300]
    text = text_of(response)
    assert leaks(text) == []
    if "ego" not in path and "sources" not in path:
        assert "p-anna" in text  # the rest of the dataset is there


def test_the_files_without_restricted_persons_keep_everyone_else_and_drop_their_rows(world):
    _, clients = world
    nodes = list(csv.DictReader(io.StringIO(clients["editor"].get("/export/nodes.csv").text)))
    keys = {row["key"] for row in nodes}
    assert {"p-anna", "p-jost", "p-oldtimer"} <= keys and not keys & {"p-zorwald", "p-ysolde", "restricted"}
    archive = zipfile.ZipFile(io.BytesIO(clients["editor"].get("/export/workbook.zip").content))
    relations = list(csv.DictReader(io.StringIO(archive.read("workbook/relations.csv").decode())))
    assert "r-o1" in {row["key"] for row in relations}
    assert not {"r-z1", "r-z2", "r-y1"} & {row["key"] for row in relations}
    memberships = list(csv.DictReader(io.StringIO(archive.read("workbook/memberships.csv").decode())))
    assert "m-z" not in {row["key"] for row in memberships}


@pytest.mark.parametrize("path", FILES[:6] + ["/export/two-mode.svg"])
def test_an_admin_who_asks_gets_the_restricted_persons(world, path):
    _, clients = world
    joiner = "&" if "?" in path else "?"
    response = clients["admin"].get(path + joiner + "restricted=include")
    assert response.status_code == 200
    if "sources" not in path:  # CSL items name documents, not persons
        assert "p-zorwald" in text_of(response)


@pytest.mark.parametrize("role", ["reader", "editor"])
@pytest.mark.parametrize("path", FILES[:6] + ["/export", "/api/export"])
def test_only_an_admin_may_ask_for_restricted_persons(world, role, path):
    _, clients = world
    response = clients[role].get(path + "?restricted=include")
    assert response.status_code == 403
    assert "Only an admin" in response.text and leaks(response.text) == []


def test_a_bad_choice_is_a_clear_400(world):
    _, clients = world
    response = clients["admin"].get("/export/nodes.csv?restricted=everyone")
    assert response.status_code == 400 and "restricted" in response.text


def test_the_export_page_offers_the_choice_to_admins_only(world):
    _, clients = world
    for role in ("reader", "editor"):
        page = BeautifulSoup(clients[role].get("/export").text, "html.parser")
        assert page.select_one(".restricted-form") is None
        assert "leave out 2 restricted persons" in page.select_one(".restricted-choice").get_text(" ", strip=True)
    page = BeautifulSoup(clients["admin"].get("/export").text, "html.parser")
    assert page.select_one(".restricted-form input[name=restricted][value=include]") is not None
    chosen = BeautifulSoup(clients["admin"].get("/export?restricted=include").text, "html.parser")
    links = [a["href"] for a in chosen.select(".export-files a")]
    assert links and all("restricted=include" in href for href in links)
    assert "restricted=include" in chosen.select_one("main form[method=post]")["action"]
    assert "hold the restricted persons" in chosen.select_one(".restricted-choice").get_text(" ", strip=True)


def test_a_snapshot_leaves_them_out_unless_an_admin_asks(world):
    _, clients = world
    for role in ("reader", "editor", "admin"):
        client = clients[role]
        response = client.post("/export/snapshot", data={"csrf_token": form_token(client, "/export")})
        assert response.status_code == 200
        text = text_of(response)
        assert leaks(text) == [] and "Left out: 2 restricted persons" in text
    for role in ("reader", "editor"):
        client = clients[role]
        assert client.post("/export/snapshot?restricted=include",
                           data={"csrf_token": form_token(client, "/export")}).status_code == 403
    admin = clients["admin"]
    response = admin.post("/export/snapshot?restricted=include", data={"csrf_token": form_token(admin, "/export")})
    assert response.status_code == 200 and "p-zorwald" in text_of(response)


# --- the command -----------------------------------------------------------------------------


COMMANDS = [["export"], ["export-tables"], ["export-graphml"], ["snapshot"], ["export-drawing", "--radius", "2", "p-anna"]]


def _target(tmp_path, command, name):
    suffix = {"export-graphml": ".graphml", "snapshot": ".zip", "export-drawing": ".svg"}.get(command[0], "")
    return tmp_path / f"{name}{suffix}"


@pytest.mark.parametrize("command", COMMANDS)
def test_the_command_leaves_them_out_by_default_and_gives_them_to_an_admin_who_asks(world, tmp_path, command):
    path, _ = world
    target = _target(tmp_path, command, "default")
    result = attesta(*command, "--db", str(path), str(target))
    assert result.returncode == 0, result.stderr
    assert "left out: 2 restricted persons" in result.stdout
    assert leaks(_read(target)) == [] and "p-anna" in _read(target)
    target = _target(tmp_path, command, "admin")
    result = attesta(*command, "--db", str(path), "--include-restricted", "--as-user", "ada", str(target))
    assert result.returncode == 0, result.stderr
    assert "Zorwald" in _read(target)  # by name: a standalone drawing names persons without their keys


@pytest.mark.parametrize("user", ["rhea", "edmund", "ada"])
def test_the_command_leaves_them_out_for_readers_editors_and_admins_who_do_not_ask(world, tmp_path, user):
    path, _ = world
    result = attesta("export", "--db", str(path), "--as-user", user, str(tmp_path / "out"))
    assert result.returncode == 0, result.stderr
    assert leaks(_read(tmp_path / "out")) == [] and "p-anna" in _read(tmp_path / "out")


@pytest.mark.parametrize("who, refusal", [([], "give --as-user NAME of an enabled admin"),
                                          (["--as-user", "rhea"], "rhea is reader"),
                                          (["--as-user", "edmund"], "edmund is editor"),
                                          (["--as-user", "nobody"], "no enabled user")])
def test_the_command_refuses_restricted_persons_to_anyone_but_an_admin(world, tmp_path, who, refusal):
    path, _ = world
    for command in (["export"], ["snapshot"]) if who and who[1] == "rhea" else (["export"],):
        target = _target(tmp_path, command, "refused")
        result = attesta(*command, "--db", str(path), "--include-restricted", *who, str(target))
        assert result.returncode == 1 and refusal in result.stderr, result.stderr
        assert not target.exists()


def test_the_drawing_command_refuses_a_drawing_centred_on_a_restricted_person_unless_an_admin_asks(world, tmp_path):
    path, _ = world
    refused = attesta("export-drawing", "--db", str(path), "p-zorwald", str(tmp_path / "refused.svg"))
    assert refused.returncode == 1 and "p-zorwald is a restricted person" in refused.stderr
    assert not (tmp_path / "refused.svg").exists()
    given = attesta("export-drawing", "--db", str(path), "--include-restricted", "--as-user", "ada", "p-zorwald",
                    str(tmp_path / "given.png"))
    assert given.returncode == 0, given.stderr
    assert (tmp_path / "given.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # the PNG file signature (RFC 2083, section 3.1; from memory)


def _read(target) -> str:
    if target.is_dir():
        return "\n".join(p.read_text(encoding="utf-8") for p in sorted(target.iterdir()))
    if target.suffix == ".zip":
        archive = zipfile.ZipFile(target)
        return "\n".join(archive.read(name).decode("utf-8") for name in archive.namelist())
    return target.read_text(encoding="utf-8")


def test_a_source_naming_a_restricted_person_is_cited_without_the_name_by_the_page_and_the_command(tmp_path):
    from app.exchange.workbook import import_workbook
    from tests.accounts_world import restricted_world
    from tests.workbooks import write_workbook

    world = restricted_world()
    world["sources.csv"].append({"key": "s-z", "kind": "edition", "title": "Letters kept by Zorwald Quenneby",
                                 "author": "Ysolde Marrack", "year": "2001"})
    world["relations.csv"].append({"key": "r-s-z", "person": "p-anna", "other": "p-jost", "kind": "letter", "source": "s-z"})
    path = tmp_path / "attesta.db"
    database = Database(database_url(path))
    upgrade(database)
    import_workbook(database, write_workbook(tmp_path / "wb", world), size_limit=10**9)
    database.dispose()
    with TestClient(create_app(Settings(database_url=database_url(path)))) as local:
        page = local.get("/export/sources.json").json()
    result = attesta("export-tables", "--db", str(path), str(tmp_path / "tables"))
    assert result.returncode == 0, result.stderr
    command = json.loads((tmp_path / "tables" / "sources.json").read_text(encoding="utf-8"))
    for items in (page, command):
        cited = next(item for item in items if item["id"] == "s-z")  # the source stays, cited
        assert leaks(json.dumps(items, ensure_ascii=False)) == [] and "restricted person" in cited["title"]
