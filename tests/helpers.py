"""Helpers shared by the tests: a real uvicorn server, and a tiny dataset built with the ORM."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import tempfile
import time
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import date, datetime
from pathlib import Path

import httpx
from sqlalchemy import select, update

from app.db import Database
from tests.preloaded import preloaded
from app.models import (
    Attestation,
    Collection,
    DataVersion,
    Group,
    Membership,
    Person,
    Relation,
    RelationKind,
    Repository,
    Source,
)

ROOT = Path(__file__).resolve().parent.parent


def free_port() -> int:
    """Return a TCP port on 127.0.0.1 that nothing listens on right now."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


@contextmanager
def running_server(db_url: str, *, env: dict[str, str] | None = None, timeout: float = 90.0,
                   workers: int = 1) -> Iterator[str]:
    """Run ``uvicorn app.main:app_from_env --factory`` on ``db_url``; yield its base URL, then stop it.

    ``env`` adds environment variables (``ATTESTA_DATASET_NAME``, ...). If the server does not
    answer within ``timeout`` seconds, its output is part of the error (importing the app alone
    can take half a minute on a machine whose two cores other test runs share). ``workers`` above
    1 runs ``attesta serve --workers N`` instead (several server processes).
    """
    port = free_port()
    base_url = f"http://127.0.0.1:{port}"
    environment = {**os.environ, "ATTESTA_DATABASE_URL": db_url, **(env or {})}
    command = [
        sys.executable, "-m", "uvicorn", "app.main:app_from_env", "--factory",
        "--host", "127.0.0.1", "--port", str(port), "--log-level", "warning",
    ] if workers == 1 else [
        sys.executable, "-m", "app.cli", "serve", "--db", db_url, "--port", str(port), "--workers", str(workers),
    ]  # fmt: skip
    with served(command, base_url, environment, timeout=timeout):
        yield base_url


@contextmanager
def served(command: list[str], base_url: str, environment: dict[str, str], *, timeout: float) -> Iterator[None]:
    """Run a server ``command``, wait until ``base_url`` answers (its output in the error if not), then stop it.

    ``python -m MODULE ...`` runs in a process forked from the session's preloaded interpreter
    (tests/preloaded.py), which saves importing the app again for every server; any other
    command runs as it is.
    """
    with tempfile.NamedTemporaryFile(prefix="attesta-server-", suffix=".log") as output:
        if command[:2] == [sys.executable, "-m"]:
            server = preloaded().run(command[2], command[3:], env=environment, cwd=ROOT, stdout=output.name)
        else:
            server = subprocess.Popen(command, cwd=ROOT, env=environment, stdout=output, stderr=subprocess.STDOUT)
        try:
            _wait_until_answering(server, base_url, timeout, output)
            yield
        finally:
            server.terminate()
            try:
                server.wait(timeout=15)
            except subprocess.TimeoutExpired:
                server.kill()
                server.wait()


def run_module(args: list[str], *, env: dict[str, str] | None = None, timeout: float = 120) -> subprocess.CompletedProcess:
    """``subprocess.run([python, "-m", *args], capture_output=True, text=True, cwd=ROOT)``, forked.

    The command runs in a process forked from the session's preloaded interpreter
    (tests/preloaded.py) instead of a fresh one that imports the app again, with ``env`` (or
    this process's environment) as its whole environment and an empty standard input.
    """
    environment = dict(os.environ if env is None else env)
    with tempfile.NamedTemporaryFile(prefix="attesta-out-") as out, tempfile.NamedTemporaryFile(prefix="attesta-err-") as err:
        process = preloaded().run(args[0], args[1:], env=environment, cwd=ROOT, stdout=out.name, stderr=err.name)
        try:
            code = process.wait(timeout=timeout)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait()
            raise
        return subprocess.CompletedProcess([sys.executable, "-m", *args], code, _text(out), _text(err))


def _text(output) -> str:  # noqa: ANN001
    """What ``text=True`` makes of a command's output: decoded, with universal newlines."""
    return _read(output).replace("\r\n", "\n").replace("\r", "\n")


def _wait_until_answering(server: subprocess.Popen, base_url: str, timeout: float, output) -> None:  # noqa: ANN001
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if server.poll() is not None:
            raise RuntimeError(f"the server stopped with code {server.returncode}:\n{_read(output)}")
        try:
            # a static file: the app is built and its startup done once uvicorn answers at all,
            # and the OpenAPI document would cost seconds of CPU to build on the first request
            httpx.get(f"{base_url}/static/favicon.svg", timeout=1.0)
            return
        except httpx.TransportError:
            time.sleep(0.1)
    raise RuntimeError(f"the server did not answer within {timeout} s:\n{_read(output)}")


def _read(output) -> str:  # noqa: ANN001
    output.seek(0)
    return output.read().decode(errors="replace")


# --- a tiny dataset ----------------------------------------------------------------------

TINY_DATA_VERSION = 7


def add_tiny_dataset(database: Database) -> None:
    """Write a dataset small enough to count on paper.

    One repository with one collection; two sources (one archival, one printed); three
    persons; two letter relations (P1 -> P2 with two live attestations, certain and
    probable; P2 -> P3 whose only attestation is deleted); one group with two memberships
    (P1's attested and alive, P3's only attestation deleted). Alive: 1 relation, 1
    membership, 3 attestations (2 certain, 1 probable), dated 1650-03-02 to 1702-11-30.
    The data version is set to TINY_DATA_VERSION.
    """
    deleted = {"deleted_at": datetime(2026, 1, 5, 12, 0), "deleted_reason": "misread the addressee"}
    with database.write() as session:
        letter = session.scalars(select(RelationKind).where(RelationKind.key == "letter")).one()
        repository = Repository(key="R1", name="City Archive")
        collection = Collection(key="R1.C1", repository=repository, name="Letters received")
        archival = Source(key="S1", collection=collection, reference="fol. 12", calendar="gregorian")
        printed = Source(key="S2", title="Printed letters", year="1710", calendar="gregorian")
        p1, p2, p3 = (Person(key=f"P{n}", name=f"Person {n}") for n in (1, 2, 3))
        guild = Group(key="G1", name="Guild of printers")
        session.add_all([repository, collection, archival, printed, p1, p2, p3, guild])
        session.flush()

        written = Relation(kind_id=letter.id, kind_directed=letter.directed, person_a=p1, person_b=p2)
        withdrawn = Relation(kind_id=letter.id, kind_directed=letter.directed, person_a=p2, person_b=p3)
        member = Membership(person=p1, group=guild, role="master")
        not_member = Membership(person=p3, group=guild, role="apprentice")
        session.add_all([written, withdrawn, member, not_member])
        session.flush()

        session.add_all([
            Attestation(key="A1", relation=written, source=archival, certainty="certain",
                        earliest=date(1650, 3, 2), latest=date(1650, 3, 2)),
            Attestation(key="A2", relation=written, source=printed, evidence="edition", certainty="probable",
                        earliest=date(1702, 11, 1), latest=date(1702, 11, 30)),
            Attestation(key="A3", relation=withdrawn, source=archival, certainty="possible",
                        earliest=date(1600, 1, 1), latest=date(1800, 12, 31), **deleted),
            Attestation(key="A4", membership=member, source=printed, certainty="certain"),
            Attestation(key="A5", membership=not_member, source=printed, certainty="possible", **deleted),
        ])  # fmt: skip
        session.execute(update(DataVersion).where(DataVersion.id == 1).values(version=TINY_DATA_VERSION))


def add_person(database: Database, key: str, name: str) -> None:
    """Write one more person."""
    with database.write() as session:
        session.add(Person(key=key, name=name))
