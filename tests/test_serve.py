"""`attesta serve` under real uvicorn: forged X-Forwarded-* headers are ignored, several server processes run one worker."""

from __future__ import annotations

import contextlib
import os
import subprocess
import sys
from collections.abc import Iterator

import httpx
import pytest

from app.db import Database
from app.network.jobs import Worker, worker_lock_path
from tests.helpers import ROOT, free_port, served

FORGED = {"X-Forwarded-For": "192.0.2.7", "X-Forwarded-Proto": "https", "X-Forwarded-Host": "evil.example"}


@contextlib.contextmanager
def attesta_serve(db_path, *args: str, env: dict[str, str] | None = None) -> Iterator[str]:
    """Run `attesta serve` (real uvicorn) on a free loopback port; yield its base URL, then stop it."""
    port = free_port()
    base_url = f"http://127.0.0.1:{port}"
    environment = {k: v for k, v in os.environ.items() if not k.startswith("ATTESTA_")} | (env or {})
    command = [sys.executable, "-m", "app.cli", "serve", "--db", str(db_path), "--port", str(port), *args]
    with served(command, base_url, environment, timeout=120):  # several processes start slowly on a busy machine
        yield base_url


def _secure_cookie(response: httpx.Response) -> bool:
    cookies = response.headers.get_list("set-cookie")
    assert cookies, "the first visit sets the CSRF cookie"
    return any("secure" in [part.strip().lower() for part in cookie.split(";")] for cookie in cookies)


def test_forged_forwarded_headers_are_ignored_without_a_trusted_proxy(database, db_path):
    with attesta_serve(db_path) as base:
        plain = httpx.get(base + "/")
        forged = httpx.get(base + "/", headers=FORGED)
    assert plain.status_code == forged.status_code == 200
    # still the loopback client (the local user of a laptop instance) and still plain http: no Secure cookie
    assert "Local use: no accounts" in forged.text
    assert not _secure_cookie(forged)


def test_a_configured_trusted_proxy_is_believed(database, db_path):
    with attesta_serve(db_path, env={"ATTESTA_TRUSTED_PROXIES": "127.0.0.1"}) as base:
        forged = httpx.get(base + "/", headers=FORGED)
        forged_login = httpx.get(base + "/login", headers=FORGED)
        plain = httpx.get(base + "/")
    # the proxy at 127.0.0.1 says the client is 192.0.2.7 over https: not the local user (sent to sign in),
    # and cookies are Secure
    assert forged.status_code == 303 and "/login" in forged.headers["location"]
    assert _secure_cookie(forged_login)
    assert "Local use: no accounts" in plain.text and not _secure_cookie(plain)


def test_several_server_processes_answer_and_ignore_forged_headers(database, db_path):
    with attesta_serve(db_path, "--workers", "2") as base:
        with httpx.Client(base_url=base) as client:
            answers = [client.get("/api/summary").status_code for _ in range(10)]
        forged = httpx.get(base + "/", headers=FORGED)
        assert worker_lock_path(f"sqlite:///{db_path}").exists()
    assert answers == [200] * 10
    assert "Local use: no accounts" in forged.text and not _secure_cookie(forged)


def test_an_upload_previews_and_imports_whichever_server_process_answers(database, db_path, tmp_path):
    """With several processes the page's polling reaches any of them: each must show the same upload."""
    import re
    import time

    from tests.workbooks import small_world, write_workbook

    folder = write_workbook(tmp_path / "wb", small_world())
    files = [("files", (p.name, p.read_bytes(), "text/csv")) for p in sorted(folder.iterdir())]
    with attesta_serve(db_path, "--workers", "2") as base:
        # no kept-alive connections: every request is accepted anew, by whichever process gets to it first
        with httpx.Client(base_url=base, limits=httpx.Limits(max_keepalive_connections=0), timeout=60) as client:
            def token() -> str:
                return re.search(r'name="csrf_token" value="([^"]+)"', client.get("/import").text).group(1)

            def settle(url: str) -> tuple[dict, list[int]]:
                codes = []
                for _ in range(600):
                    answer = client.get("/api" + url)
                    codes.append(answer.status_code)
                    if answer.status_code == 200 and answer.json()["stage"] not in ("previewing", "importing"):
                        return answer.json(), codes
                    time.sleep(0.05)
                raise AssertionError(f"still running: {codes[-5:]}")

            made = client.post("/api/import", data={"csrf_token": token()}, files=files)
            assert made.status_code == 201, made.text
            url = made.json()["url"]
            state, codes = settle(url)
            assert state["stage"] == "preview" and set(codes) == {200}, (state["stage"], codes)
            fingerprint = state["task"]["preview"]["fingerprint"]
            again = [client.get("/api" + url).json()["task"]["preview"]["fingerprint"] for _ in range(6)]
            assert again == [fingerprint] * 6  # the same preview from both processes, not made again
            confirmed = client.post(url + "/confirm", data={"csrf_token": token(), "fingerprint": fingerprint})
            assert confirmed.status_code in (200, 303), confirmed.text
            state, codes = settle(url)
            assert state["stage"] == "imported" and set(codes) == {200}, (state, codes)
            persons = {client.get("/api/summary").json()["summary"]["persons"] for _ in range(4)}
    assert persons == {len(small_world()["persons.csv"])}


def test_only_one_of_several_server_processes_runs_the_measure_worker(database, db_url):
    first, second = Worker(Database(db_url), shared=True), Worker(Database(db_url), shared=True)
    try:
        first.start()
        second.start()
        assert first._elected is not None and first._running
        assert second._elected is None and not second._running
        second.ensure_running()  # a job queued through the second process: it starts nothing
        assert second._process is None
    finally:
        first.stop()
        second.stop()
    third = Worker(Database(db_url), shared=True)
    try:
        third.start()  # the first stopped: its lock is free for a server process started later
        assert third._elected is not None
    finally:
        third.stop()


@pytest.mark.parametrize("workers", ["0", "many"])
def test_a_bad_worker_count_is_refused(database, db_path, workers):
    result = subprocess.run([sys.executable, "-m", "app.cli", "serve", "--db", str(db_path), "--workers", workers],
                            capture_output=True, text=True, cwd=ROOT, timeout=60)
    assert result.returncode == 2 and "--workers" in result.stderr
