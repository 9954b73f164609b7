"""Accounts and access over real HTTP: sign-in, sessions, lockout, CSRF, the Host allow-list, the CLI.

Cookie flags are those of RFC 6265 (HttpOnly, Secure) and RFC 6265bis (SameSite); 421 Misdirected
Request is RFC 9110 section 15.5.20.
"""

from __future__ import annotations

import contextlib
import os
import subprocess
import sys
import time
from collections.abc import Iterator
from datetime import datetime, timedelta

import httpx
import pytest
from bs4 import BeautifulSoup
from click.testing import CliRunner
from fastapi.testclient import TestClient
from sqlalchemy import select

from app.auth import hash_password
from app.cli import main as cli_main
from app.cli import serve_refusal
from app.config import Settings, database_url
from app.main import create_app
from app.models import AuditEntry, User
from app.store.users import create_user
from helpers import free_port, served
from tests.accounts_world import PASSWORD, add_role_users, form_token, sign_in

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


@pytest.fixture
def team(database, db_path):
    """An instance with a reader, an editor and an admin."""
    add_role_users(database)
    return Settings(database_url=database_url(db_path))


def _cookie_header(response, name: str) -> str:
    headers = [v for k, v in response.headers.multi_items() if k == "set-cookie" and v.startswith(name + "=")]
    assert headers, f"no {name} cookie set"
    return headers[-1]


# --- laptop use ------------------------------------------------------------------------------------


def test_without_accounts_the_local_user_has_full_rights_and_the_header_says_so(settings):
    client = TestClient(create_app(settings))
    page = BeautifulSoup(client.get("/").text, "html.parser")
    assert "Local use" in page.select_one(".who").get_text()
    token = page.select_one("form input[name=csrf_token]")
    # the token comes with a cookie of its own; a write with it passes CSRF (and then 404s on a made-up view)
    assert client.post("/network/nothing/recompute").status_code == 403
    token = form_token(client, "/login")
    assert client.post("/network/nothing/recompute", data={"csrf_token": token}).status_code == 404


def test_the_local_user_is_only_for_a_loopback_client(settings):
    elsewhere = TestClient(create_app(settings), client=("192.0.2.7", 5000))
    response = elsewhere.get("/persons", follow_redirects=False)
    assert response.status_code == 303 and response.headers["location"].startswith("/login")


def test_a_csrf_token_of_another_browser_or_forged_is_refused(settings):
    app = create_app(settings)
    mine, theirs = TestClient(app), TestClient(app)
    token = form_token(mine)
    assert theirs.post("/network/summary/recompute", data={"csrf_token": token}).status_code == 403
    assert mine.post("/network/summary/recompute", data={"csrf_token": token + "x"}).status_code == 403
    assert mine.post("/network/summary/recompute", headers={"X-CSRF-Token": token}, follow_redirects=False).status_code == 303
    response = mine.post("/network/summary/recompute")
    assert response.status_code == 403 and "CSRF" in response.text


@pytest.mark.parametrize("host", ["evil.example", "127.0.0.1.evil.example", "localhost.evil.example:8000", "10.0.0.5"])
def test_a_host_not_on_the_allow_list_is_refused(settings, host):
    client = TestClient(create_app(settings))
    response = client.get("/", headers={"Host": host})
    assert response.status_code == 421
    assert "ATTESTA_ALLOWED_HOSTS" in response.text and host.split(":")[0] in response.text
    assert client.post("/network/summary/recompute", headers={"Host": host}).status_code == 421


@pytest.mark.parametrize("host", ["127.0.0.1:8000", "localhost", "LOCALHOST:9", "[::1]:8000", "attesta.example.org"])
def test_loopback_names_and_configured_names_are_answered(database, db_path, host):
    app = create_app(Settings(database_url=database_url(db_path), allowed_hosts=("attesta.example.org",)))
    assert TestClient(app).get("/", headers={"Host": host}).status_code == 200


# --- signing in ----------------------------------------------------------------------------------------


def test_sign_in_sets_a_signed_httponly_lax_cookie_and_the_header_shows_the_user(team):
    client = TestClient(create_app(team))
    assert client.get("/persons", follow_redirects=False).status_code == 303  # accounts exist: sign in first
    assert client.get("/api/persons").status_code == 401
    response = sign_in(client, "edmund")
    assert response.status_code == 303 and response.headers["location"] == "/"
    cookie = _cookie_header(response, "attesta_session").lower()
    assert "httponly" in cookie and "samesite=lax" in cookie and "secure" not in cookie and "max-age=43200" in cookie
    who = BeautifulSoup(client.get("/").text, "html.parser").select_one(".who")
    assert who.select_one(".actor-name").get_text() == "edmund" and who.select_one("form.sign-out button")
    tampered = TestClient(create_app(team))
    tampered.cookies.set("attesta_session", client.cookies["attesta_session"][:-3] + "AAA")
    assert tampered.get("/api/persons").status_code == 401


def test_the_session_cookie_is_secure_over_https(team):
    client = TestClient(create_app(team), base_url="https://127.0.0.1")
    response = sign_in(client, "edmund")
    assert "secure" in _cookie_header(response, "attesta_session").lower()
    fresh = TestClient(create_app(team), base_url="https://127.0.0.1")
    csrf = _cookie_header(fresh.get("/login"), "attesta_csrf").lower()
    assert "secure" in csrf and "httponly" in csrf and "samesite=strict" in csrf


def test_a_wrong_password_or_name_is_refused_with_one_message(team):
    client = TestClient(create_app(team))
    for name, password in (("edmund", "wrong password"), ("nobody", PASSWORD)):
        response = sign_in(client, name, password)
        assert response.status_code == 401
        assert "the user name or the password is wrong" in response.text
    assert client.get("/api/persons").status_code == 401


def test_repeated_failures_lock_the_name_in_the_database_for_every_process(team, database):
    first, second = create_app(team), create_app(team)  # two server processes on one database
    client = TestClient(first)
    for _ in range(5):
        assert sign_in(client, "edmund", "guess").status_code == 401
    with database.read() as session:
        user = session.scalar(select(User).where(User.name == "edmund"))
        assert user.failed_logins == 5 and user.locked_until > datetime.utcnow() + timedelta(minutes=14)
        first_lock = user.locked_until
    refused = sign_in(TestClient(second), "edmund")  # the right password, in another process
    assert refused.status_code == 429 and "too many failed sign-ins" in refused.text
    assert sign_in(client, "edmund", "guess again").status_code == 429  # while locked, not even counted
    # once the lock has passed, one more failure doubles it
    with database.write() as session:
        session.scalar(select(User).where(User.name == "edmund")).locked_until = datetime.utcnow() - timedelta(seconds=1)
    assert sign_in(client, "edmund", "guess").status_code == 401
    with database.read() as session:
        user = session.scalar(select(User).where(User.name == "edmund"))
        assert user.locked_until > datetime.utcnow() + timedelta(minutes=29)
        assert first_lock < user.locked_until
    # other names are not affected, and a success clears the count
    assert sign_in(client, "rhea").status_code == 303
    with database.read() as session:
        assert session.scalar(select(User.failed_logins).where(User.name == "rhea")) == 0


def test_sessions_expire_after_the_configured_hours(database, db_path):
    add_role_users(database)
    app = create_app(Settings(database_url=database_url(db_path), session_hours=1 / 3600))  # one second
    client = TestClient(app)
    assert sign_in(client, "rhea").status_code == 303
    assert client.get("/api/persons").status_code == 200
    time.sleep(2.2)
    assert client.get("/api/persons").status_code == 401


def test_sign_out_needs_csrf_and_ends_the_session_everywhere(team):
    app = create_app(team)
    laptop, phone = TestClient(app), TestClient(app)
    sign_in(laptop, "rhea")
    sign_in(phone, "rhea")
    stolen = laptop.cookies["attesta_session"]
    assert laptop.post("/logout").status_code == 403
    token = BeautifulSoup(laptop.get("/").text, "html.parser").select_one("form.sign-out input[name=csrf_token]")["value"]
    response = laptop.post("/logout", data={"csrf_token": token}, follow_redirects=False)
    assert response.status_code == 303 and response.headers["location"] == "/login"
    assert laptop.get("/api/persons").status_code == 401
    assert phone.get("/api/persons").status_code == 401
    replay = TestClient(app)
    replay.cookies.set("attesta_session", stolen)
    assert replay.get("/api/persons").status_code == 401


def test_a_sign_in_never_leads_off_the_site(team):
    app = create_app(team)
    for target in ("https://evil.example/", "//evil.example/x", "/\\evil.example"):
        client = TestClient(app)
        token = form_token(client)
        response = client.post("/login", data={"name": "rhea", "password": PASSWORD, "csrf_token": token, "next": target},
                               follow_redirects=False)
        assert response.headers["location"] == "/", target
    client = TestClient(app)
    assert client.post("/login", data={"name": "rhea", "password": PASSWORD}).status_code == 403  # no CSRF token


def test_anonymous_reading_is_a_setting(database, db_path):
    add_role_users(database)
    app = create_app(Settings(database_url=database_url(db_path), anonymous_read=True))
    client = TestClient(app)
    assert client.get("/api/persons").status_code == 200
    assert client.get("/admin/users").status_code == 401
    token = form_token(client)
    assert client.post("/network/summary/recompute", data={"csrf_token": token}).status_code == 401


# --- the admin page -------------------------------------------------------------------------------------


def test_an_admin_adds_and_disables_users_on_the_admin_page(team, database):
    app = create_app(team)
    admin, reader = TestClient(app), TestClient(app)
    sign_in(admin, "ada")
    sign_in(reader, "rhea")
    assert reader.get("/admin/users").status_code == 403
    token = form_token(admin, "/admin/users")
    assert admin.post("/admin/users", data={"name": "nell", "role": "editor"}).status_code == 403  # no token
    page = admin.post("/admin/users", data={"name": "nell", "role": "editor", "password": "", "csrf_token": token})
    assert page.status_code == 200
    password = BeautifulSoup(page.text, "html.parser").select_one(".generated-password code").get_text()
    assert len(password) >= 16
    assert "generated-password" not in admin.get("/admin/users").text  # shown once only
    nell = TestClient(app)
    assert sign_in(nell, "nell", password).status_code == 303
    bad = admin.post("/api/admin/users", data={"name": "nell", "role": "editor"}, headers={"X-CSRF-Token": token})
    assert bad.status_code == 400 and "exists already" in bad.json()["detail"]
    assert admin.post("/api/admin/users", data={"name": "x", "role": "owner"}, headers={"X-CSRF-Token": token}).status_code == 400
    users = {u["name"]: u for u in admin.get("/api/admin/users").json()["users"]}
    assert users["nell"]["role"] == "editor" and "password_hash" not in users["nell"]
    response = admin.post("/admin/users/nell/disable", data={"csrf_token": token}, follow_redirects=False)
    assert response.status_code == 303
    assert nell.get("/api/persons").status_code == 401  # the session ended
    assert sign_in(TestClient(app), "nell", password).status_code == 401
    last = admin.post("/api/admin/users/ada/disable", headers={"X-CSRF-Token": token})
    assert last.status_code == 400 and "last admin" in last.json()["detail"]
    assert admin.post("/api/admin/users/ghost/disable", headers={"X-CSRF-Token": token}).status_code == 404
    with database.read() as session:
        summaries = list(session.scalars(select(AuditEntry.summary).where(AuditEntry.table_name == "user")))
        actors = set(session.scalars(select(AuditEntry.actor).where(AuditEntry.record_key == "nell")))
    assert "user nell added as editor" in summaries and "user nell disabled" in summaries and actors == {"ada"}


# --- the command ----------------------------------------------------------------------------------------


def test_user_commands_add_list_and_disable(database, db_path):
    runner = CliRunner()
    db = str(db_path)
    typed = runner.invoke(cli_main, ["user", "add", "--db", db, "Ada", "--role", "admin"], input="long enough pw\nlong enough pw\n")
    assert typed.exit_code == 0, typed.output
    assert "user ada added as admin" in typed.output and "long enough pw" not in typed.output.split("again")[-1]
    mismatch = runner.invoke(cli_main, ["user", "add", "--db", db, "bea", "--role", "reader"],
                             input="long enough pw\nother password\nlong enough pw\nlong enough pw\n")
    assert "do not match" in mismatch.output.lower() or "don't match" in mismatch.output.lower()
    generated = runner.invoke(cli_main, ["user", "add", "--db", db, "cal", "--role", "editor", "--generate"])
    assert generated.exit_code == 0
    password = generated.output.split("password (shown only now): ")[1].strip()
    with database.read() as session:
        from argon2 import PasswordHasher

        stored = session.scalar(select(User.password_hash).where(User.name == "cal"))
        assert stored.startswith("$argon2id$") and PasswordHasher().verify(stored, password)
    again = runner.invoke(cli_main, ["user", "add", "--db", db, "cal", "--role", "editor", "--generate"])
    assert again.exit_code == 1 and "exists already" in again.output
    wrong = runner.invoke(cli_main, ["user", "add", "--db", db, "dee", "--role", "owner", "--generate"])
    assert wrong.exit_code == 2 and "owner" in wrong.output
    listing = runner.invoke(cli_main, ["user", "list", "--db", db]).output
    assert "ada\tadmin\tactive" in listing and "cal\teditor\tactive" in listing
    assert runner.invoke(cli_main, ["user", "disable", "--db", db, "cal"]).exit_code == 0
    assert "cal\teditor\tdisabled" in runner.invoke(cli_main, ["user", "list", "--db", db]).output
    last = runner.invoke(cli_main, ["user", "disable", "--db", db, "ada"])
    assert last.exit_code == 1 and "last admin" in last.output


def test_serve_on_another_address_needs_an_admin_and_a_secret_key(database, db_path):
    settings = Settings(database_url=database_url(db_path))
    assert serve_refusal(settings, database, "127.0.0.1") is None
    assert serve_refusal(settings, database, "localhost") is None
    refusal = serve_refusal(settings, database, "0.0.0.0")
    assert "attesta user add NAME --role admin" in refusal and "ATTESTA_SECRET_KEY" in refusal
    with database.write() as session:
        create_user(session=session, name="ed", role="editor", password_hash=hash_password(PASSWORD), actor="test")
    assert "--role admin" in serve_refusal(settings, database, "192.0.2.1")  # an editor is not enough
    with database.write() as session:
        create_user(session=session, name="ada", role="admin", password_hash=hash_password(PASSWORD), actor="test")
    refusal = serve_refusal(settings, database, "0.0.0.0")
    assert "ATTESTA_SECRET_KEY" in refusal and "user add" not in refusal
    keyed = Settings(database_url=database_url(db_path), secret_key="k" * 40)
    assert serve_refusal(keyed, database, "0.0.0.0") is None
    # the command itself refuses, with the same words, before listening
    env = {k: v for k, v in os.environ.items() if not k.startswith("ATTESTA_")}
    result = subprocess.run([sys.executable, "-m", "app.cli", "serve", "--db", str(db_path), "--host", "0.0.0.0",
                             "--port", str(free_port())], capture_output=True, text=True, cwd=ROOT, env=env, timeout=60)
    assert result.returncode == 1 and "ATTESTA_SECRET_KEY" in result.stderr


@contextlib.contextmanager
def _serve(db_path, env: dict[str, str]) -> Iterator[str]:
    """Run `attesta serve` (real uvicorn) on a free loopback port; yield its base URL, then stop it."""
    port = free_port()
    base = f"http://127.0.0.1:{port}"
    environment = {k: v for k, v in os.environ.items() if not k.startswith("ATTESTA_")} | env
    with served([sys.executable, "-m", "app.cli", "serve", "--db", str(db_path), "--port", str(port)], base,
                environment, timeout=30):  # fmt: skip
        yield base


def test_forwarded_headers_are_ignored_unless_a_proxy_is_trusted(database, db_path):
    """Real uvicorn through `attesta serve`: a forged X-Forwarded-For does not make a loopback client remote."""
    forged = {"X-Forwarded-For": "203.0.113.9", "X-Forwarded-Proto": "https"}
    with _serve(db_path, {}) as base:
        response = httpx.get(f"{base}/", headers=forged, timeout=10)
        assert response.status_code == 200 and "Local use" in response.text  # still the loopback client
        cookie = response.headers.get("set-cookie", "").lower()
        assert "attesta_csrf" in cookie and "secure" not in cookie  # still plain http
    with _serve(db_path, {"ATTESTA_TRUSTED_PROXIES": "127.0.0.1"}) as base:
        response = httpx.get(f"{base}/", headers=forged, timeout=10)
        assert response.status_code == 303  # believed: a remote client, and this instance has no accounts for it
