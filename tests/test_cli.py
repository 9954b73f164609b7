"""The attesta command: each bad input gets a clear message, a non-zero exit, and changes nothing."""

from __future__ import annotations

import json
import os
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from tests.helpers import run_module
from tests.workbooks import small_world, write_workbook

ATTESTA = [sys.executable, "-m", "app.cli"]
ROOT = Path(__file__).resolve().parent.parent


def attesta(*args: str, env: dict[str, str] | None = None) -> subprocess.CompletedProcess:
    """Run ``python -m app.cli ARGS`` in its own process (forked from the preloaded interpreter, tests/helpers.py)."""
    environment = {k: v for k, v in os.environ.items() if not k.startswith("ATTESTA_")} | (env or {})
    return run_module(["app.cli", *args], env=environment, timeout=120)


def counts(db: Path) -> dict[str, int]:
    with sqlite3.connect(db) as connection:
        tables = [r[0] for r in connection.execute("SELECT name FROM sqlite_master WHERE type='table'")]
        return {t: connection.execute(f'SELECT count(*) FROM "{t}"').fetchone()[0] for t in tables}


@pytest.fixture
def initialized(tmp_path: Path) -> Path:
    db = tmp_path / "cli.db"
    result = attesta("init", "--db", str(db))
    assert result.returncode == 0, result.stderr
    return db


def test_init_import_export(initialized, tmp_path):
    folder = write_workbook(tmp_path / "wb", small_world())
    result = attesta("import", "--db", str(initialized), str(folder))
    assert result.returncode == 0, result.stderr
    assert "persons.csv: 4 added" in result.stdout
    assert "taken as 'certain'" in result.stdout
    again = attesta("import", "--db", str(initialized), str(folder))
    assert "(nothing changed)" in again.stdout
    assert attesta("init", "--db", str(initialized)).returncode == 0  # upgrading a current database is harmless
    out = tmp_path / "out"
    exported = attesta("export", "--db", str(initialized), str(out))
    assert exported.returncode == 0 and (out / "relations.csv").exists()


def test_database_from_the_environment(tmp_path):
    db = tmp_path / "env.db"
    result = attesta("init", env={"ATTESTA_DATABASE_URL": f"sqlite:///{db}"})
    assert result.returncode == 0 and db.exists()


def test_malformed_workbook(initialized, tmp_path):
    world = small_world()
    world["relations.csv"][1]["person"] = "p-ghost"
    before = counts(initialized)
    result = attesta("import", "--db", str(initialized), str(write_workbook(tmp_path / "wb", world)))
    assert result.returncode == 1
    assert "relations.csv:3: person: unknown person 'p-ghost'" in result.stderr
    assert "nothing was imported" in result.stderr
    assert counts(initialized) == before


def test_wrong_workbook_path(initialized, tmp_path):
    result = attesta("import", "--db", str(initialized), str(tmp_path / "missing"))
    assert result.returncode == 1 and "no such file or folder" in result.stderr


def test_missing_database(tmp_path):
    result = attesta("import", "--db", str(tmp_path / "none.db"), str(tmp_path))
    assert result.returncode == 1 and "attesta init" in result.stderr
    assert not (tmp_path / "none.db").exists()


def test_database_of_a_newer_schema(initialized, tmp_path):
    with sqlite3.connect(initialized) as connection:
        connection.execute("UPDATE alembic_version SET version_num = 'zz99_newer'")
    before = counts(initialized)
    for args in (("init",), ("import", str(write_workbook(tmp_path / "wb", small_world())))):
        result = attesta(*args[:1], "--db", str(initialized), *args[1:])
        assert result.returncode == 1
        assert "newer Attesta" in result.stderr
    assert counts(initialized) == before


def test_locked_database(initialized, tmp_path):
    folder = write_workbook(tmp_path / "wb", small_world())
    holder = sqlite3.connect(initialized, isolation_level=None)
    holder.execute("BEGIN IMMEDIATE")
    holder.execute("UPDATE data_version SET version = version")
    try:  # a fresh interpreter, as the installed command starts
        result = subprocess.run(
            [*ATTESTA, "import", "--db", str(initialized), str(folder)], capture_output=True, text=True, cwd=ROOT,
            env={**os.environ, "ATTESTA_BUSY_TIMEOUT_MS": "200"}, timeout=120,
        )
    finally:
        holder.execute("ROLLBACK")
        holder.close()
    assert result.returncode == 1
    assert "locked by another process" in result.stderr
    assert counts(initialized)["person"] == 0


def test_non_utf8_csv(initialized, tmp_path):
    folder = write_workbook(tmp_path / "wb", small_world())
    (folder / "persons.csv").write_bytes("key,name\np-a,Jos\u00e9\n".encode("cp1252"))
    result = attesta("import", "--db", str(initialized), str(folder))
    assert result.returncode == 1
    assert "persons.csv:2: (encoding): not UTF-8 text" in result.stderr
    assert counts(initialized)["person"] == 0


def test_file_over_the_size_limit(initialized, tmp_path):
    folder = write_workbook(tmp_path / "wb", small_world())
    result = attesta("import", "--db", str(initialized), str(folder), env={"ATTESTA_UPLOAD_LIMIT_MB": "0.001"})
    assert result.returncode == 1 and "over the import size limit" in result.stderr
    assert counts(initialized)["person"] == 0


def test_demo_refuses_to_overwrite_without_replace(tmp_path):
    target = tmp_path / "demo.db"
    target.write_bytes(b"precious")
    result = attesta("demo", "--db", str(target))
    assert result.returncode == 1 and "--replace" in result.stderr
    assert target.read_bytes() == b"precious"


def test_tei_graphml_exports_and_snapshot_commands(initialized, tmp_path):
    tei = ROOT / "tests" / "tei"
    result = attesta("import-tei", "--db", str(initialized), str(tei / "letters_index.xml"))
    assert result.returncode == 0, result.stderr
    assert "letters_index.xml [sources]: 2 added" in result.stdout
    before = counts(initialized)
    bomb = attesta("import-tei", "--db", str(initialized), str(tei / "bomb.xml"))
    assert bomb.returncode == 1 and "bomb.xml:3: (xml):" in bomb.stderr and counts(initialized) == before
    graphml = tmp_path / "slice.graphml"
    exported = attesta("export-graphml", "--db", str(initialized), "--slice", "kind=letter", str(graphml))
    assert exported.returncode == 0 and "4 persons, 5 ties" in exported.stdout
    untitled = attesta("import-graphml", "--db", str(initialized), str(graphml))
    assert untitled.returncode != 0 and "--source-title" in untitled.stderr
    imported = attesta("import-graphml", "--db", str(initialized), str(graphml), "--source-title", "our own export")
    assert imported.returncode == 0, imported.stderr
    tables = attesta("export-tables", "--db", str(initialized), str(tmp_path / "tables"))
    assert tables.returncode == 0 and (tmp_path / "tables" / "matrix.csv").exists()
    first = attesta("snapshot", "--db", str(initialized), str(tmp_path / "a.zip"))
    second = attesta("snapshot", "--db", str(initialized), str(tmp_path / "b.zip"))
    assert first.returncode == 0 and first.stdout.splitlines()[0].split()[-1] == second.stdout.splitlines()[0].split()[-1]
    bad_slice = attesta("snapshot", "--db", str(initialized), "--slice", "certainty=sure", str(tmp_path / "c.zip"))
    assert bad_slice.returncode == 1 and "--slice" in bad_slice.stderr


def exported_files(db: Path, folder: Path) -> dict[str, str]:
    assert attesta("export", "--db", str(db), str(folder)).returncode == 0
    return {p.name: p.read_text() for p in sorted(folder.iterdir())}


def test_an_xlsx_workbook_imports_as_its_csv_files_do(tmp_path):
    from tests.test_import_pages import xlsx_of  # openpyxl writes the sheets (ECMA-376 SpreadsheetML)

    dbs = {}
    for kind in ("csv", "xlsx"):
        db = tmp_path / f"{kind}.db"
        assert attesta("init", "--db", str(db)).returncode == 0
        if kind == "csv":
            given = write_workbook(tmp_path / "wb", small_world())
        else:
            given = tmp_path / "world.xlsx"
            given.write_bytes(xlsx_of(small_world()))
        result = attesta("import", "--db", str(db), str(given))
        assert result.returncode == 0, result.stderr
        dbs[kind] = exported_files(db, tmp_path / f"out-{kind}")
    assert dbs["xlsx"] == dbs["csv"] and "p-anna" in dbs["csv"]["persons.csv"]


def test_sheets_named_differently_need_a_mapping_that_is_written_checked_and_reused(initialized, tmp_path):
    assert attesta("import", "--db", str(initialized), str(write_workbook(tmp_path / "wb", small_world()))).returncode == 0
    before = counts(initialized)
    letters = tmp_path / "letters.csv"
    letters.write_text("Sender,Recipient,Date of letter,Document,Type\np-anna,p-jost,1705-01-02,s-1,letter\n")
    stopped = attesta("import", "--db", str(initialized), str(letters))
    assert stopped.returncode == 1 and "need a column mapping" in stopped.stderr
    assert "letters.csv is not the name of a workbook file" in stopped.stderr
    assert counts(initialized) == before

    mapping = tmp_path / "mapping.json"
    written = attesta("import", "--db", str(initialized), "--write-mapping", str(mapping), str(letters))
    assert written.returncode == 0 and counts(initialized) == before
    saved = json.loads(mapping.read_text())
    assert saved["sheets"]["letters.csv"]["file"] == "relations.csv"
    assert saved["sheets"]["letters.csv"]["columns"]["Sender"] == "person"
    done = attesta("import", "--db", str(initialized), "--mapping", str(mapping), str(letters))
    assert done.returncode == 0, done.stderr
    assert counts(initialized)["attestation"] == before["attestation"] + 1

    edges = tmp_path / "edges.csv"  # an edge list: source and target are persons, not documents
    edges.write_text("source,target\np-anna,p-jost\n")
    asked = attesta("import", "--db", str(initialized), str(edges))
    assert asked.returncode == 1 and "edge list" in asked.stderr
    broken = tmp_path / "broken.json"
    broken.write_text('{"format": "attesta-column-mapping", "sheets": {"edges.csv": {"file": "letters.csv"}}}')
    refused = attesta("import", "--db", str(initialized), "--mapping", str(broken), str(edges))
    assert refused.returncode == 1 and "broken.json" in refused.stderr and "not a workbook file" in refused.stderr


def test_likely_duplicates_stop_the_import_until_kept_apart_or_linked(initialized, tmp_path):
    assert attesta("import", "--db", str(initialized), str(write_workbook(tmp_path / "wb", small_world()))).returncode == 0
    before = counts(initialized)
    new = tmp_path / "new"
    new.mkdir()
    # variant spellings of stored persons (doubled letters, a lost letter), and someone else
    (new / "persons.csv").write_text("key,name,born\nn-jost,Joost Brener,1681\nn-anna,Anna Vel,\nn-other,Tilde Abeln,\n")
    stopped = attesta("import", "--db", str(initialized), str(new))
    assert stopped.returncode == 1 and "nothing was imported" in stopped.stderr
    assert "n-anna (Anna Vel) ~ p-anna (Anna Vell, stored)" in stopped.stderr
    assert "n-other" not in stopped.stderr
    assert counts(initialized) == before

    apart = attesta("import", "--db", str(initialized), "--duplicates", "apart", str(new))
    assert apart.returncode == 0, apart.stderr
    assert "kept apart" in apart.stdout
    after = counts(initialized)
    assert after["person"] == before["person"] + 3 and after["person_link"] == before["person_link"]

    (new / "persons.csv").write_text("key,name\nn-anna2,Anna Vell\n")
    linked = attesta("import", "--db", str(initialized), "--duplicates", "link", str(new))
    assert linked.returncode == 0, linked.stderr
    with sqlite3.connect(initialized) as connection:
        pairs = connection.execute(
            "SELECT a.key, b.key FROM person_link JOIN person a ON a.id = person_a_id JOIN person b ON b.id = person_b_id"
        ).fetchall()
    assert ("p-anna", "n-anna2") in pairs or ("n-anna2", "p-anna") in pairs


def test_tei_and_graphml_files_are_pointed_to_their_own_commands(initialized, tmp_path):
    letter = tmp_path / "letter.xml"
    letter.write_text("<TEI/>")
    result = attesta("import", "--db", str(initialized), str(letter))
    assert result.returncode == 1 and "attesta import-tei" in result.stderr
