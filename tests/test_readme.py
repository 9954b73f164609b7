"""The README's promises: its first command serves the demo, and every command and route is documented."""

from __future__ import annotations

import csv
import os
import re
import signal
import subprocess
import time
from pathlib import Path

import httpx
from fastapi.testclient import TestClient

from app.cli import main as cli_main
from app.config import Settings
from app.main import create_app
from helpers import free_port

ROOT = Path(__file__).resolve().parent.parent
README = (ROOT / "README.md").read_text(encoding="utf-8")


def quick_start_commands() -> list[str]:
    section = re.search(r"^#+\s*quick\s*start.*?$(.*?)(?=^#{1,2}\s|\Z)", README, re.I | re.M | re.S).group(1)
    return [line.strip() for block in re.findall(r"```[a-z]*\n(.*?)```", section, re.S)
            for line in block.splitlines() if line.strip() and not line.strip().startswith("#")]


def csv_rows(name: str) -> list[dict[str, str]]:
    with open(ROOT / "sample_data" / "demo" / name, encoding="utf-8") as handle:
        return list(csv.DictReader(handle))


def test_quick_start_has_two_commands_and_ci_runs_the_second():
    commands = quick_start_commands()
    assert len(commands) == 2
    assert "README" in (ROOT / ".ci" / "run").read_text()  # .ci/run reads the command from here


def test_first_command_serves_the_demo(tmp_path):
    """Run the README's first command as written (on a free port, into a scratch database)."""
    first = quick_start_commands()[0]
    port = free_port()
    env = {**os.environ, "ATTESTA_DEMO_DB": str(tmp_path / "demo.db")}
    server = subprocess.Popen(
        f"{first} --port {port}", shell=True, cwd=ROOT, env=env, start_new_session=True,
        stdout=subprocess.PIPE, stderr=subprocess.STDOUT,
    )
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 300
        while True:
            assert server.poll() is None, server.stdout.read().decode()
            try:
                summary = httpx.get(f"{base}/api/summary", timeout=2).json()["summary"]
                break
            except httpx.TransportError:
                assert time.monotonic() < deadline, "the demo server did not answer within 300 s"
                time.sleep(0.5)
        home = httpx.get(f"{base}/", timeout=5)
    finally:
        os.killpg(server.pid, signal.SIGTERM)
        server.wait(timeout=30)
    assert home.status_code == 200 and "Attesta" in home.text
    # the figures are those of the demo workbook (sample_data/demo)
    assert summary["persons"] == len(csv_rows("persons.csv"))
    assert summary["sources"] == len(csv_rows("sources.csv"))
    attestations = sum(len(csv_rows(name)) for name in ("relations.csv", "memberships.csv", "facts.csv"))
    assert summary["attestations"] == attestations
    relations = {(r["person"], r["other"], r["kind"]) for r in csv_rows("relations.csv")}
    assert summary["relations"] <= len(relations)  # undirected pairs given in both orders are one relation
    assert f"{summary['persons']}" in home.text.replace("\u2009", "")


def test_every_command_is_documented():
    for name, command in cli_main.commands.items():
        assert f"`attesta {name}" in README, f"attesta {name} has no line in README.md"
        for sub in getattr(command, "commands", {}):  # a group: each of its commands has its line
            assert f"`attesta {name} {sub}" in README, f"attesta {name} {sub} has no line in README.md"


def test_every_option_is_documented():
    """Each option of a command is named on that command's line of the README's command table."""
    for name, command in cli_main.commands.items():
        subcommands = getattr(command, "commands", {})
        for full, each in [(name, command), *((f"{name} {sub}", c) for sub, c in subcommands.items())]:
            lines = [line for line in README.splitlines() if line.startswith(f"| `attesta {full} ") or
                     line.startswith(f"| `attesta {full}`")]
            for param in each.params:
                for option in getattr(param, "opts", []):
                    if option.startswith("--") and option not in ("--help", "--version"):
                        assert any(option in line for line in lines), f"{option} of attesta {full} is not on its README line"


def test_every_setting_is_documented():
    for variable in re.findall(r'"(ATTESTA_[A-Z_]+)"', (ROOT / "app" / "config.py").read_text()):
        assert variable in README, f"{variable} is not described in README.md"


def test_every_route_is_documented(settings):
    schema = TestClient(create_app(settings)).get("/openapi.json").json()
    for path, operations in schema["paths"].items():
        for method, operation in operations.items():
            assert operation.get("summary") and operation.get("description"), f"{method.upper()} {path} is undocumented"
