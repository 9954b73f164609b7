"""Backup, restore and crash safety of an SQLite database, through the real `attesta` command.

- `attesta backup` writes a checked copy; `attesta restore` checks a file before it touches
  anything, refuses while a server has the database open, and saves the database as it was.
- An import killed with SIGKILL in the middle of its write transaction leaves the database as
  it was before (SQLite's WAL: an uncommitted transaction is never seen).
- Backups taken while another process keeps writing restore to a state between two whole
  writes, never half of one.
"""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from app.config import database_url
from tests.conftest import ROOT
from tests.helpers import run_module, running_server
from tests.workbooks import write_workbook

TABLES = ("person", "person_name", "relation", "attestation", "source", "audit_entry", "data_version")


def attesta(*arguments: str, check: bool = False) -> subprocess.CompletedProcess:
    """Run ``python -m app.cli ARGUMENTS`` in its own process (forked from the preloaded interpreter, tests/helpers.py)."""
    done = run_module(["app.cli", *arguments])
    if check:
        assert done.returncode == 0, done.stderr
    return done


def counts(path: Path) -> dict[str, int]:
    """Rows of the tables an import writes, and the data version, read with plain sqlite3."""
    with sqlite3.connect(path) as connection:
        found = {t: connection.execute(f'SELECT count(*) FROM "{t}"').fetchone()[0] for t in TABLES}
        found["version"] = connection.execute("SELECT version FROM data_version").fetchone()[0]
    return found


def integrity(path: Path) -> str:
    with sqlite3.connect(path) as connection:
        return connection.execute("PRAGMA integrity_check").fetchone()[0]


@pytest.fixture
def demo_db(tmp_path: Path, demo_sqlite) -> Path:  # noqa: ANN001
    """The demo imported into an SQLite file (a copy of the session's, tests/conftest.py)."""
    return demo_sqlite(tmp_path / "attesta.db", actor="demo")


# --- backup and restore -----------------------------------------------------------------------


def test_a_backup_is_a_checked_copy_that_restores_the_same_data(demo_db: Path, tmp_path: Path) -> None:
    done = attesta("backup", "--db", str(demo_db), str(tmp_path / "copy.db"), check=True)
    assert "integrity ok" in done.stdout and "data version 1" in done.stdout
    assert integrity(tmp_path / "copy.db") == "ok"
    assert counts(tmp_path / "copy.db") == counts(demo_db)
    assert not (tmp_path / "copy.db-wal").exists()  # one self-contained file

    fresh = tmp_path / "elsewhere.db"
    done = attesta("restore", "--db", str(fresh), str(tmp_path / "copy.db"), check=True)
    assert counts(fresh) == counts(demo_db)
    attesta("export", "--db", str(demo_db), str(tmp_path / "a"), check=True)
    attesta("export", "--db", str(fresh), str(tmp_path / "b"), check=True)
    for file in (tmp_path / "a").iterdir():
        assert file.read_bytes() == (tmp_path / "b" / file.name).read_bytes(), file.name


def test_a_backup_into_a_folder_gets_a_dated_name_and_never_overwrites(demo_db: Path, tmp_path: Path) -> None:
    folder = tmp_path / "backups"
    folder.mkdir()
    attesta("backup", "--db", str(demo_db), str(folder), check=True)
    (made,) = folder.iterdir()
    assert made.name.startswith("attesta-") and made.suffix == ".db"
    done = attesta("backup", "--db", str(demo_db), str(made))
    assert done.returncode == 1 and "exists already" in done.stderr


def _not_sqlite(path: Path) -> None:
    path.write_text("key,name\np-1,Someone\n", encoding="utf-8")


def _damaged(path: Path) -> None:
    data = bytearray(path.read_bytes())
    for offset in range(4096 * 3, len(data) - 4096, 4096):  # scramble the b-tree pages, keep the header
        data[offset + 8 : offset + 40] = b"\xff" * 32
    path.write_bytes(bytes(data))


def _foreign(path: Path) -> None:
    path.unlink()
    with sqlite3.connect(path) as connection:
        connection.execute("CREATE TABLE invoices (id INTEGER PRIMARY KEY, total REAL)")


def _newer(path: Path) -> None:
    with sqlite3.connect(path) as connection:
        connection.execute("UPDATE alembic_version SET version_num = 'ffff_newer'")


@pytest.mark.parametrize(("spoil", "message"), [
    (_not_sqlite, "is not an SQLite database file"),
    (_damaged, "damaged|fails the integrity check"),
    (_foreign, "is not an Attesta database"),
    (_newer, "does not know"),
])  # fmt: skip
def test_a_bad_backup_is_refused_and_changes_nothing(demo_db: Path, tmp_path: Path, spoil, message: str) -> None:  # noqa: ANN001
    attesta("backup", "--db", str(demo_db), str(tmp_path / "copy.db"), check=True)
    spoil(tmp_path / "copy.db")
    before = counts(demo_db)
    done = attesta("restore", "--db", str(demo_db), str(tmp_path / "copy.db"))
    assert done.returncode == 1
    assert any(part in done.stderr for part in message.split("|")), done.stderr
    assert counts(demo_db) == before
    assert not list(tmp_path.glob("*.before-restore-*"))


def test_restore_is_refused_while_a_server_has_the_database_open(demo_db: Path, tmp_path: Path) -> None:
    empty = tmp_path / "empty.db"
    attesta("init", "--db", str(empty), check=True)
    attesta("backup", "--db", str(empty), str(tmp_path / "empty-copy.db"), check=True)
    with running_server(database_url(demo_db)):
        done = attesta("restore", "--db", str(demo_db), str(tmp_path / "empty-copy.db"))
        assert done.returncode == 1 and "a server has" in done.stderr and "stop it" in done.stderr
        assert counts(demo_db)["person"] > 0
    before = counts(demo_db)
    done = attesta("restore", "--db", str(demo_db), str(tmp_path / "empty-copy.db"), check=True)
    assert counts(demo_db)["person"] == 0
    (saved,) = tmp_path.glob("attesta.db.before-restore-*")
    assert str(saved) in done.stdout and counts(saved) == before


def test_backup_and_restore_of_postgresql_name_its_own_tools(tmp_path: Path) -> None:
    url = "postgresql+psycopg://nobody@127.0.0.1:1/nothing"
    for command in (["backup", "--db", url, str(tmp_path / "x.db")], ["restore", "--db", url, str(tmp_path / "x.db")]):
        done = attesta(*command)
        assert done.returncode == 1 and "pg_dump" in done.stderr


# --- crash safety --------------------------------------------------------------------------


def big_workbook(folder: Path, *, persons: int, letters: int, prefix: str = "p") -> Path:
    """A generated workbook: ``persons`` persons and ``letters`` letters among them, one source each."""
    people = [{"key": f"{prefix}-{n}", "name": f"Person {prefix} {n}", "variants": f"P. {n}|Pers. {n}"} for n in range(persons)]
    sources = [{"key": f"s-{prefix}-{n}", "title": f"Letter {n}", "author": f"Person {prefix} {n % persons}",
                "date": f"{1700 + n % 40}-0{1 + n % 9}"} for n in range(letters)]  # fmt: skip
    relations = [{"person": f"{prefix}-{n % persons}", "other": f"{prefix}-{(n * 7 + 1) % persons}", "kind": "letter",
                  "source": f"s-{prefix}-{n}", "certainty": "probable" if n % 3 else "certain"} for n in range(letters)]  # fmt: skip
    return write_workbook(folder, {"persons.csv": people, "sources.csv": sources, "relations.csv": relations})


def _write_lock_taken(path: Path) -> bool:
    """Whether some process holds the database's write lock (a write transaction has begun)."""
    probe = sqlite3.connect(path, timeout=0, isolation_level=None)
    try:
        probe.execute("BEGIN IMMEDIATE")
        probe.execute("ROLLBACK")
        return False
    except sqlite3.OperationalError as error:
        assert "locked" in str(error)
        return True
    finally:
        probe.close()


def test_an_import_killed_halfway_leaves_the_database_as_it_was(demo_db: Path, tmp_path: Path) -> None:
    workbook = big_workbook(tmp_path / "big", persons=5000, letters=40000)
    before = counts(demo_db)
    importer = subprocess.Popen([sys.executable, "-m", "app.cli", "import", "--db", str(demo_db), str(workbook)],
                                cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE)  # fmt: skip
    deadline = time.monotonic() + 60
    while not _write_lock_taken(demo_db):  # reading and checking the files comes first
        assert importer.poll() is None, importer.stderr.read().decode()
        assert time.monotonic() < deadline
        time.sleep(0.02)
    # The importer writes into a large page cache, so the write-ahead log need not grow before the
    # commit; the write lock is the sign that the transaction is still open (a commit releases it).
    time.sleep(1.0)
    assert importer.poll() is None and _write_lock_taken(demo_db), "the import finished before it could be killed: make the workbook bigger"
    importer.send_signal(signal.SIGKILL)
    assert importer.wait(timeout=10) == -signal.SIGKILL

    assert integrity(demo_db) == "ok"
    assert counts(demo_db) == before
    done = attesta("import", "--db", str(demo_db), str(big_workbook(tmp_path / "small", persons=20, letters=40)), check=True)
    assert "data version 2" in done.stdout  # and the database takes the next import as usual


WRITER = textwrap.dedent("""
    import sys
    from pathlib import Path
    from app.db import Database
    from app.exchange.workbook import import_workbook
    database = Database(sys.argv[1])
    for folder in sys.argv[2:]:
        import_workbook(database, Path(folder), size_limit=10**9, actor="writer")
        print("imported", folder, flush=True)
""")


def test_backups_taken_during_writes_restore_to_whole_writes(demo_db: Path, tmp_path: Path) -> None:
    """Twelve writes of the same shape (200 persons, 400 letters, one audit entry each) run while backups are taken.

    Every backup must hold the state after a whole number of writes: base + k x (one write) in
    every table at once, with k the audit entries it holds.
    """
    workbooks = [str(big_workbook(tmp_path / f"w{n}", persons=200, letters=400, prefix=f"w{n}")) for n in range(12)]
    base = counts(demo_db)
    writer = subprocess.Popen([sys.executable, "-c", WRITER, database_url(demo_db), *workbooks], cwd=ROOT,
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)  # fmt: skip
    backups = []
    try:
        for n in range(30):
            if writer.poll() is not None:
                break
            copy = tmp_path / f"backup-{n}.db"
            attesta("backup", "--db", str(demo_db), str(copy), check=True)
            restored = tmp_path / f"restored-{n}.db"
            attesta("restore", "--db", str(restored), str(copy), check=True)
            assert integrity(restored) == "ok"
            backups.append(counts(restored))
            os.remove(copy)
            os.remove(restored)
    finally:
        output, errors = writer.communicate(timeout=300)
    assert writer.returncode == 0, errors
    final = counts(demo_db)
    assert final["audit_entry"] == base["audit_entry"] + len(workbooks)
    one_write = {}
    for table, n in final.items():
        assert (n - base[table]) % len(workbooks) == 0, table  # every write has the same shape
        one_write[table] = (n - base[table]) // len(workbooks)
    assert one_write["person"] == 200 and one_write["attestation"] == 400 and one_write["version"] == 1
    writes_seen = set()
    for n, found in enumerate(backups):
        writes = found["audit_entry"] - base["audit_entry"]
        assert 0 <= writes <= len(workbooks)
        assert found == {table: base[table] + writes * one_write[table] for table in final}, f"backup {n} holds part of a write"
        writes_seen.add(writes)
    assert len(writes_seen) >= 2, f"the backups did not overlap the writes (saw {writes_seen}); nothing was tested"
