"""Uploaded workbooks, TEI letters and GraphML graphs kept on the server under a random token until confirmed or expired.

An upload is a folder of the files as sent (CSV files, a .zip, an .xlsx, a mapping .json, TEI
.xml, .graphml) and a ``meta.json`` (who, when, the SHA-256 of the files, the column mapping
chosen, the options the user gave, such as the source a graph's ties come from). Readers turn
the files into sheets (to be mapped), into ready workbook rows, or into conversions that match
their rows to the stored data (TEI persons by their ref/key identifiers, archives by name) in
one read transaction just before the import's write transaction; another kind of file plugs in
with :func:`register_reader`. The preview is the real import run in a transaction that is
rolled back; the confirmation runs it again for real, in one transaction, and is refused when
the files, the mapping or the data changed since the preview.
"""

from __future__ import annotations

import hashlib
import json
import os
import secrets
import shutil
import threading
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path, PurePath
from typing import Any, BinaryIO

from pydantic import TypeAdapter
from sqlalchemy import select
from sqlalchemy.orm import Session

from app.db import Database
from app.documented import DOCUMENTED
from app.exchange.duplicates import Candidate, Suggestion, find_duplicates
from app.exchange.graphml import DEFAULT_KIND, prepare_graphml
from app.exchange.mapping import SheetMapping, plans_from_json, suggest_mappings
from app.exchange.workbook import (
    FILES,
    ImportReport,
    Problem,
    Row,
    Sheet,
    SheetPlan,
    WorkbookError,
    csv_sheet,
    import_tables,
    tables_from_sheets,
    zip_members,
)
from app.exchange.tei import prepare_tei
from app.exchange.xlsx import xlsx_sheets
from app.models import DataVersion, Person, PersonName

__all__ = [
    "EXPIRY_SECONDS",
    "GRAPH_OPTIONS",
    "Conversion",
    "Reading",
    "Upload",
    "UploadError",
    "create_upload",
    "get_upload",
    "read_upload",
    "register_reader",
]

EXPIRY_SECONDS = 2 * 3600  # an upload not confirmed within two hours is removed
CHUNK = 1 << 20


class UploadError(Exception):
    """An upload that cannot be used (expired, changed, too large); the message says which and what to do."""


Prepared = tuple[dict[str, list[Row]], list[Problem], list[str]]  # rows by workbook file, problems, notes


@dataclass(frozen=True)
class Conversion:
    """A file of another format whose rows are made, and matched to the stored data, in a read session."""

    file: str
    prepare: Callable[[Session], Prepared]


GRAPH_OPTIONS = ("graphml_source", "graphml_kind")
"""Upload options of a GraphML file: the source its ties come from (required), the kind of edges naming none."""


@dataclass
class Reading:
    """What the readers made of an upload: sheets still to be mapped, rows already in workbook form."""

    options: dict[str, str] = field(default_factory=dict)  # what the user said of the upload (GRAPH_OPTIONS)
    conversions: list[Conversion] = field(default_factory=list)
    sheets: list[Sheet] = field(default_factory=list)
    tables: dict[str, Sequence[Row]] = field(default_factory=dict)
    problems: list[Problem] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    plans: dict[str, SheetPlan] = field(default_factory=dict)  # from a mapping .json among the files


Reader = Callable[[Path, int, Reading], None]  # (file, size limit, reading to add sheets/tables/problems to)
READERS: dict[str, Reader] = {}


def register_reader(suffix: str, reader: Reader) -> None:
    """Let uploads of files ending in ``suffix`` (".xml") be read by ``reader``."""
    READERS[suffix.lower()] = reader


def _read_csv(path: Path, size_limit: int, reading: Reading) -> None:
    sheet = csv_sheet(path.name, path.read_bytes(), reading.problems)
    if sheet is not None:
        reading.sheets.append(sheet)


def _read_zip(path: Path, size_limit: int, reading: Reading) -> None:
    files, problems = zip_members(path, size_limit, (".csv",))
    reading.problems.extend(problems)
    for name in sorted(files):
        sheet = csv_sheet(name, files[name], reading.problems, label=f"{path.name}: {name}")
        if sheet is not None:
            reading.sheets.append(sheet)


def _read_xlsx(path: Path, size_limit: int, reading: Reading) -> None:
    reading.sheets.extend(xlsx_sheets(path, reading.problems, reading.warnings))


def _read_mapping(path: Path, size_limit: int, reading: Reading) -> None:
    try:
        reading.plans.update(plans_from_json(path.read_text(encoding="utf-8")))
    except (ValueError, UnicodeDecodeError) as error:
        reading.problems.append(Problem(path.name, 0, "(mapping)", str(error)))


def _read_tei(path: Path, size_limit: int, reading: Reading) -> None:
    data, name = path.read_bytes(), path.name
    reading.conversions.append(Conversion(name, lambda session: prepare_tei(session, data, name)))


def _read_graphml(path: Path, size_limit: int, reading: Reading) -> None:
    data, name = path.read_bytes(), path.name
    title = reading.options.get("graphml_source", "")  # empty: prepare_graphml asks for it, as a problem
    kind = reading.options.get("graphml_kind") or DEFAULT_KIND
    reading.conversions.append(Conversion(name, lambda session: prepare_graphml(
        session, data, name, source_title=title, kind=kind)))


register_reader(".csv", _read_csv)
register_reader(".zip", _read_zip)
register_reader(".xlsx", _read_xlsx)
register_reader(".json", _read_mapping)
register_reader(".xml", _read_tei)
register_reader(".graphml", _read_graphml)
SHEET_SUFFIXES = (".csv", ".zip", ".xlsx")  # the files whose columns the mapping step maps


# --- storage -------------------------------------------------------------------------------


@dataclass
class Upload:
    """One upload on the server: its token, folder, files and the mapping chosen for it."""

    token: str
    folder: Path
    files: list[str]
    sha256: str
    created: float
    actor: str
    plans: dict[str, SheetPlan] | None = None  # None until the mapping step (or a mapping file) settled it
    options: dict[str, str] = field(default_factory=dict)  # GRAPH_OPTIONS the user gave

    def save(self) -> None:
        meta = {"files": self.files, "sha256": self.sha256, "created": self.created, "actor": self.actor,
                "plans": None if self.plans is None else {k: p._asdict() for k, p in self.plans.items()},
                "options": self.options}
        (self.folder / "meta.json").write_text(json.dumps(meta, sort_keys=True))

    def fingerprint(self, data_version: int) -> str:
        """A hash of the files, the mapping, the options and the data version: what a preview was made of."""
        plans = {k: p._asdict() for k, p in (self.plans or {}).items()}
        text = json.dumps([self.sha256, plans, self.options, data_version], sort_keys=True)
        return hashlib.sha256(text.encode()).hexdigest()[:32]

    def has_sheets(self) -> bool:
        """True when some file has columns to map (CSV, .zip, .xlsx)."""
        return any(Path(name).suffix.lower() in SHEET_SUFFIXES for name in self.files)

    def graph_files(self) -> list[str]:
        return [name for name in self.files if Path(name).suffix.lower() == ".graphml"]

    def needs_source(self) -> bool:
        """True while a GraphML file waits for the user to name the source its ties come from."""
        return bool(self.graph_files()) and not self.options.get("graphml_source", "").strip()

    def files_unchanged(self) -> bool:
        return _hash_files(self.folder, self.files) == self.sha256


def uploads_root(database_url: str) -> Path:
    """Where uploads wait: beside an SQLite file (``attesta.db-uploads/``), else in the temporary folder."""
    if database_url.startswith("sqlite:///") and database_url != "sqlite:///:memory:":
        return Path(database_url.removeprefix("sqlite:///") + "-uploads")
    import tempfile

    return Path(tempfile.gettempdir()) / "attesta-uploads"


def clean_options(given: dict[str, str]) -> dict[str, str]:
    """Keep the known upload options that have a value, spaces trimmed."""
    return {name: value.strip() for name, value in given.items() if name in GRAPH_OPTIONS and value and value.strip()}


def create_upload(root: Path, files: list[tuple[str, BinaryIO]], *, actor: str, size_limit: int,
                  options: dict[str, str] | None = None) -> Upload:
    """Store the uploaded files under a new token; refuse (UploadError) past ``size_limit`` in all, nothing kept."""
    _remove_expired(root)
    if not files:
        raise UploadError("no file was chosen: choose a .zip, CSV files or an .xlsx workbook, TEI letters (.xml) "
                          "or a GraphML graph (.graphml)")
    token = secrets.token_urlsafe(18)
    folder = root / token
    folder.mkdir(parents=True)
    names = []
    total = 0
    try:
        for given, stream in files:
            name = PurePath(given.replace("\\", "/")).name.strip()
            suffix = Path(name).suffix.lower()
            if not name or name in ("meta.json",) or suffix not in READERS:
                raise UploadError(f"{given or '(no name)'}: not a file Attesta reads (accepted: "
                                  f"{', '.join(sorted(READERS))})")
            if name in names:
                raise UploadError(f"{name} was chosen twice")
            with open(folder / name, "wb") as out:
                while chunk := stream.read(CHUNK):
                    total += len(chunk)
                    if total > size_limit:
                        raise UploadError(f"the upload is over the size limit of {size_limit / 1e6:.0f} MB "
                                          "(setting ATTESTA_UPLOAD_LIMIT_MB); nothing was kept")
                    out.write(chunk)
            names.append(name)
    except BaseException:
        shutil.rmtree(folder, ignore_errors=True)
        raise
    upload = Upload(token, folder, names, _hash_files(folder, names), time.time(), actor,
                    options=clean_options(options or {}))
    upload.save()
    return upload


def get_upload(root: Path, token: str) -> Upload:
    """Return the upload of ``token``; UploadError when there is none (never made, imported or expired)."""
    folder = root / token
    meta_file = folder / "meta.json"
    if not token.replace("-", "").replace("_", "").isalnum() or not meta_file.is_file():
        raise UploadError("there is no such upload: it was imported already, expired (after "
                          f"{EXPIRY_SECONDS // 3600} hours) or never made; upload the workbook again")
    meta = json.loads(meta_file.read_text())
    if time.time() - meta["created"] > EXPIRY_SECONDS:
        shutil.rmtree(folder, ignore_errors=True)
        raise UploadError(f"this upload expired (uploads are kept {EXPIRY_SECONDS // 3600} hours); upload the workbook again")
    plans = None if meta["plans"] is None else {k: SheetPlan(p["file"], p["columns"], p.get("fixed") or {})
                                                for k, p in meta["plans"].items()}
    return Upload(token, folder, meta["files"], meta["sha256"], meta["created"], meta["actor"], plans,
                  meta.get("options") or {})


def delete_upload(upload: Upload) -> None:
    shutil.rmtree(upload.folder, ignore_errors=True)


def _remove_expired(root: Path) -> None:
    if not root.is_dir():
        return
    now = time.time()
    for folder in root.iterdir():
        if folder.name == ".tasks":  # the tasks' state files: kept as long as an upload is
            for state in folder.iterdir():
                try:
                    if now - state.stat().st_mtime > EXPIRY_SECONDS:
                        state.unlink(missing_ok=True)
                except OSError:
                    pass
            continue
        meta = folder / "meta.json"
        try:
            created = json.loads(meta.read_text())["created"] if meta.is_file() else folder.stat().st_mtime
        except (OSError, ValueError, KeyError):
            created = 0
        if now - created > EXPIRY_SECONDS:
            shutil.rmtree(folder, ignore_errors=True)


def _hash_files(folder: Path, names: list[str]) -> str:
    digest = hashlib.sha256()
    for name in sorted(names):
        digest.update(name.encode() + b"\0")
        try:
            with open(folder / name, "rb") as handle:
                while chunk := handle.read(CHUNK):
                    digest.update(chunk)
        except OSError:
            digest.update(b"(missing)")
        digest.update(b"\0")
    return digest.hexdigest()


# --- reading, mapping, preview ---------------------------------------------------------------


def read_upload(upload: Upload, *, size_limit: int) -> Reading:
    """Read every file of the upload with the reader of its kind."""
    reading = Reading(options=dict(upload.options))
    for name in upload.files:
        path = upload.folder / name
        READERS[path.suffix.lower()](path, size_limit, reading)
    return reading


def stored_person_keys(database: Database) -> set[str]:
    with database.read() as session:
        return set(session.scalars(select(Person.key)))


def sheet_person_keys(reading: Reading) -> set[str]:
    """Person keys of the upload's own persons sheet, to tell an edge list's persons from documents."""
    keys: set[str] = set()
    for sheet in reading.sheets:
        if sheet.name in ("persons.csv", "persons") and "key" in sheet.header:
            at = sheet.header.index("key")
            keys.update(record[at] for _, record in sheet.records() if len(record) > at)
    return keys


def mapping_step(upload: Upload, reading: Reading, database: Database) -> list[SheetMapping]:
    """Return the suggestions for every sheet (the upload's own plans and a mapping file win)."""
    plans = {**reading.plans, **(upload.plans or {})}
    return suggest_mappings(reading.sheets, stored_person_keys(database) | sheet_person_keys(reading), plans)


def needs_mapping(upload: Upload, mappings: list[SheetMapping]) -> bool:
    """True while some sheet needs the user's choice and no mapping was settled for the upload."""
    return upload.plans is None and any(m.reasons for m in mappings)


def convert(reading: Reading, database: Database) -> tuple[dict[str, list[Row]], list[str]]:
    """Make the rows of the upload's TEI and GraphML files, matched to the stored data in one read session.

    Problems go to ``reading.problems``; the notes (what was left out or assumed) are returned.
    """
    tables: dict[str, list[Row]] = {}
    notes: list[str] = []
    if not reading.conversions:
        return tables, notes
    with database.read() as session:
        for conversion in reading.conversions:
            rows, problems, said = conversion.prepare(session)
            reading.problems.extend(problems)
            notes += [f"{conversion.file}: {note}" for note in said]
            for file, found in rows.items():
                tables.setdefault(file, []).extend(found)
    return tables, notes


def tables_of(upload: Upload, reading: Reading, mappings: list[SheetMapping],
              database: Database) -> tuple[dict[str, Sequence[Row]], list[str], dict[str, str]]:
    """Return the workbook rows of the upload, warnings, and the label of each workbook file (for messages).

    The rows of TEI and GraphML files come first (matched just now, see :func:`convert`), then
    those of readers that give rows, then the mapped sheets.
    """
    plans = upload.plans if upload.plans is not None else {m.sheet: m.plan for m in mappings if m.file}
    tables, warnings = tables_from_sheets(reading.sheets, reading.problems, plans)
    labels = {file: rows.sheet.label for file, rows in tables.items()}
    converted, notes = convert(reading, database)
    merged: dict[str, Sequence[Row]] = {}
    for part in (converted, reading.tables, tables):
        for file, rows in part.items():
            merged[file] = [*merged[file], *rows] if file in merged else rows
    return merged, notes + warnings, labels


def files_of(tables: dict[str, Sequence[Row]]) -> dict[str, str]:
    """The workbook file of each row file that is not one (``letters.xml [persons]`` -> ``persons.csv``)."""
    return {row.file: file for file, rows in tables.items() if isinstance(rows, list) for row in rows
            if row.file != file}


def relabel(problems: list[Problem], labels: dict[str, str]) -> list[Problem]:
    """Name each problem's file as the user knows it (``book.xlsx, sheet persons`` rather than persons.csv)."""
    return [p._replace(file=labels.get(p.file, p.file)) for p in problems]


def person_candidates(tables: dict[str, Sequence[Row]], database: Database) -> tuple[list[Candidate], list[Candidate]]:
    """The persons of the upload and the stored persons, as candidates for the duplicate search."""
    from app.dates import DateError, interval_or_none

    def day(text: str | None, calendar: str, end: bool):  # noqa: ANN202
        if not text:
            return None
        try:
            interval = interval_or_none(text, calendar or "gregorian")
        except DateError:
            return None
        return interval.latest if end else interval.earliest

    new = []
    for row in tables.get("persons.csv", []):
        if not row.get("key") or not row.get("name"):
            continue
        calendar = row.get("calendar") or "gregorian"
        variants = tuple(v.strip() for v in (row.get("variants") or "").split("|") if v.strip())
        new.append(Candidate(row.get("key"), row.get("name"), variants, day(row.get("born"), calendar, False),
                             day(row.get("died"), calendar, True)))
    stored = []
    with database.read() as session:
        names: dict[int, list[str]] = {}
        for person_id, name in session.execute(select(PersonName.person_id, PersonName.name)):
            names.setdefault(person_id, []).append(name)
        for pid, key, name, born, died in session.execute(
            select(Person.id, Person.key, Person.name, Person.born_earliest, Person.died_latest)
        ):
            stored.append(Candidate(key, name, tuple(names.get(pid, ())), born, died, stored=True))
    return new, stored


def data_version(database: Database) -> int:
    with database.read() as session:
        return session.scalar(select(DataVersion.version)) or 0


@dataclass
class Preview:
    """What confirming the upload would do, or why it cannot be imported."""

    __pydantic_config__ = DOCUMENTED

    fingerprint: str
    """Hash of the files, the mapping and the data version the preview was made of; the confirmation sends it back."""
    data_version: int
    """The data version the preview was made against."""
    counts: dict[str, dict[str, int]]
    """Per kind of record (persons, sources, relations, attestations, memberships, ...): added, changed, unchanged."""
    files: dict[str, dict[str, int]]
    """Per workbook file: rows added, changed, unchanged."""
    problems: list[dict[str, Any]]
    """Every validation problem (file, line, column, reason), the first 200."""
    problem_count: int
    """How many problems in all."""
    warnings: list[str]
    """What was ignored or assumed (unknown columns, formulas whose saved values were taken, ...)."""
    duplicates: list[Suggestion]
    """Likely duplicate persons, best first (at most 500)."""
    duplicate_count: int
    """How many likely duplicates in all."""
    rows: int
    """Rows in all files."""


MAX_DUPLICATES = 500


def counts_of(report: ImportReport, file_of: dict[str, str] | None = None) -> tuple[dict[str, dict[str, int]], dict[str, dict[str, int]]]:
    """Return the counts per kind of record and per file of a (dry-run) import report.

    ``file_of`` names the workbook file of row files that are not one (the rows of a TEI file).
    """
    files = {name: {k: int(v) for k, v in c.items()} for name, c in report.rows.items()}
    by_workbook_file: dict[str, dict[str, int]] = {}
    for name, c in files.items():
        total = by_workbook_file.setdefault((file_of or {}).get(name, name), {"added": 0, "changed": 0, "unchanged": 0})
        for k, v in c.items():
            total[k] = total.get(k, 0) + v

    def of(name: str) -> dict[str, int]:
        return by_workbook_file.get(name, {"added": 0, "changed": 0, "unchanged": 0})

    attestations = {k: sum(of(n)[k] for n in ("relations.csv", "memberships.csv", "facts.csv"))
                    for k in ("added", "changed", "unchanged")}
    counts = {
        "persons": of("persons.csv"),
        "sources": of("sources.csv"),
        "relations": {"added": int(report.created.get("relations", 0))},
        "memberships": {"added": int(report.created.get("memberships", 0))},
        "facts": {"added": int(report.created.get("facts", 0))},
        "attestations": attestations,
    }
    for name in ("places.csv", "repositories.csv", "collections.csv", "groups.csv", "relation_kinds.csv"):
        if name in by_workbook_file:
            counts[name.removesuffix(".csv").replace("_", " ")] = by_workbook_file[name]
    return counts, files


def make_preview(upload: Upload, database: Database, *, size_limit: int, progress=None) -> Preview:  # noqa: ANN001
    """Read, map and dry-run the upload; return what a confirmation would do and every problem."""
    version = data_version(database)
    reading = read_upload(upload, size_limit=size_limit)
    mappings = mapping_step(upload, reading, database)
    tables, warnings, labels = tables_of(upload, reading, mappings, database)
    warnings = reading.warnings + warnings
    problems = list(reading.problems)
    report = ImportReport()
    total_problems = len(problems)
    rows = sum(len(t) for t in tables.values())
    if not tables and not problems:
        problems.append(Problem(", ".join(upload.files), 0, "(workbook)",
                                f"no workbook files found; expected some of: {', '.join(FILES)} "
                                "(or TEI letters, a GraphML graph)"))
        total_problems = 1
    if not problems:
        try:
            report = import_tables(database, tables, name=", ".join(upload.files), sha256=upload.sha256,
                                   warnings=warnings, dry_run=True, progress=progress)
            warnings = report.warnings
        except WorkbookError as error:
            problems, total_problems = error.problems, error.total
    duplicates: list[Suggestion] = []
    if not problems:
        new, stored = person_candidates(tables, database)
        duplicates = find_duplicates(new, stored)
    counts, files = counts_of(report, files_of(tables))
    return Preview(
        fingerprint=upload.fingerprint(version), data_version=version, counts=counts, files=files,
        problems=[p._asdict() for p in relabel(problems, labels)], problem_count=total_problems,
        warnings=warnings, duplicates=duplicates[:MAX_DUPLICATES], duplicate_count=len(duplicates), rows=rows,
    )


# --- confirmation ----------------------------------------------------------------------------


DECISIONS = ("apart", "same", "link")


@dataclass(frozen=True)
class Decision:
    """What the user said of one suggested pair: keep apart, the same person, or link as possibly the same."""

    new_key: str
    other_key: str
    choice: str  # one of DECISIONS


class _Remapped:
    """Rows of one file with persons confirmed as the same mapped to the existing key (their own row left out)."""

    def __init__(self, rows: Sequence[Row], file: str, same: dict[str, str]):
        self.rows, self.file, self.same = rows, file, same

    def __len__(self) -> int:
        return len(self.rows)

    def __iter__(self):  # noqa: ANN204
        for row in self.rows:
            if self.file == "persons.csv" and row.get("key") in self.same:
                continue
            changed = {c: self.same[v] for c in ("person", "other") if (v := row.get(c)) in self.same}
            yield Row(row.file, row.line, {**row.values, **changed}) if changed else row


def apply_decisions(tables: dict[str, Sequence[Row]], decisions: list[Decision]) -> dict[str, Sequence[Row]]:
    """Return the tables with every person confirmed as the same as another mapped to that other's key."""
    same = {d.new_key: d.other_key for d in decisions if d.choice == "same"}
    for _ in range(len(same)):  # a chain a -> b -> c ends at c
        same = {k: same.get(v, v) for k, v in same.items()}
    same = {k: v for k, v in same.items() if k != v}
    if not same:
        return tables
    return {file: _Remapped(rows, file, same) for file, rows in tables.items()}


def link_persons(decisions: list[Decision], *, actor: str) -> Callable:
    """Return the step that records the "possibly the same as" links inside the import's transaction."""
    from app.store.audit import record_change
    from app.store.person_links import create_person_link

    links = [d for d in decisions if d.choice == "link"]

    def after(session, report: ImportReport) -> None:  # noqa: ANN001
        made = []
        for d in links:
            ids = dict(session.execute(select(Person.key, Person.id).where(Person.key.in_([d.new_key, d.other_key]))).all())
            if len(ids) == 2 and create_person_link(session=session, a=ids[d.new_key], b=ids[d.other_key],
                                                    note="suggested by the import as a likely duplicate", created_by=actor):
                made.append([d.new_key, d.other_key])
        if made:
            record_change(session=session, actor=actor, action="link persons", table="person_link",
                          after=made, summary=f"linked {len(made)} pair(s) of persons as possibly the same")
            report.warnings.append(f"{len(made)} pair(s) of persons linked as possibly the same")

    return after


def check_unchanged(upload: Upload, database: Database, fingerprint: str) -> None:
    """Raise UploadError when the files, the mapping or the data changed since the preview of ``fingerprint``."""
    if not upload.files_unchanged():
        raise UploadError("the uploaded files changed since the preview; upload the workbook again")
    version = data_version(database)
    if upload.fingerprint(version) != fingerprint:
        raise UploadError("the data or the column mapping changed since this preview (data version is now "
                          f"{version}); look at the new preview before you confirm")


def confirm_import(upload: Upload, database: Database, *, fingerprint: str, decisions: list[Decision], actor: str,
                   size_limit: int, progress=None) -> ImportReport:  # noqa: ANN001
    """Import the upload for real, in one transaction; UploadError when it changed since its preview."""
    check_unchanged(upload, database, fingerprint)
    reading = read_upload(upload, size_limit=size_limit)
    mappings = mapping_step(upload, reading, database)
    tables, warnings, labels = tables_of(upload, reading, mappings, database)
    if reading.problems:
        raise WorkbookError(relabel(reading.problems, labels))
    tables = apply_decisions(tables, decisions)
    try:
        return import_tables(database, tables, name=", ".join(upload.files), sha256=upload.sha256,
                             warnings=reading.warnings + warnings, actor=actor, progress=progress,
                             after=link_persons(decisions, actor=actor))
    except WorkbookError as error:
        raise WorkbookError(relabel(error.problems, labels), error.total) from error


@dataclass
class ImportTask:
    """A preview or an import running in the background, and how far it is."""

    __pydantic_config__ = DOCUMENTED

    token: str
    """The upload's token."""
    stage: str
    """previewing, preview, importing, imported or failed."""
    done: int = 0
    """Rows checked (or written) so far."""
    total: int = 0
    """Rows in all."""
    preview: Preview | None = None
    """The preview, once made."""
    lines: list[str] = field(default_factory=list)
    """What the import did, once it is done."""
    error: str | None = None
    """Why it failed."""
    data_version: int | None = None
    """The data version after the import."""


STALE_SECONDS = 20.0
"""A running preview or import whose state file was not rewritten for this long is taken as gone (its process stopped)."""
_BEAT_SECONDS = 1.0  # how often a running task writes its state (and progress) for the other processes


class ImportTasks:
    """The previews and imports of uploads, each run in a thread of the process that started it.

    With ``root`` (the uploads' folder), every task's state is also written to ``root/.tasks/TOKEN.json``
    while it runs and when it ends, so every server process of ``attesta serve --workers N`` shows the
    same progress and preview, whichever of them the page's polling reaches; and a claim file made
    with O_EXCL lets only one process run a task of an upload at a time.
    """

    def __init__(self, root: Path | None = None) -> None:
        self.tasks: dict[str, ImportTask] = {}
        self.lock = threading.Lock()
        self.folder = root / ".tasks" if root is not None else None

    def get(self, token: str) -> ImportTask | None:
        """Return the upload's task: from its state file when there is a folder (it may run in another process)."""
        if self.folder is not None:
            return self._read(token)
        with self.lock:
            return self.tasks.get(token)

    def forget(self, token: str) -> None:
        """Drop a finished preview (the upload's options changed); a running task is kept."""
        with self.lock:
            task = self.get(token)
            if task is not None and task.stage not in ("previewing", "importing", "imported"):
                self.tasks.pop(token, None)
                if self.folder is not None:
                    (self.folder / f"{token}.json").unlink(missing_ok=True)

    def start(self, token: str, stage: str, work: Callable[[ImportTask, Callable[[int, int], None]], None]) -> ImportTask:
        """Run ``work(task, progress)`` in a thread; a failure is kept as the task's error.

        When a task of the upload already runs, here or in another process, that task is answered instead.
        """
        task = ImportTask(token=token, stage=stage)
        with self.lock:
            running = self.get(token)
            if running is not None and running.stage in ("previewing", "importing"):
                return running
            if not self._claim(token):  # another process is starting one this very moment
                return self._read(token) or task
            self.tasks[token] = task
            self._write(task)

        def progress(done: int, total: int) -> None:
            task.done, task.total = done, total

        finished = threading.Event()

        def beat() -> None:
            while not finished.wait(_BEAT_SECONDS):
                self._write(task)

        def run() -> None:
            try:
                work(task, progress)
            except (WorkbookError, UploadError) as error:
                task.error = str(error)
                task.stage = "failed"
            except Exception as error:  # noqa: BLE001 - shown on the page rather than lost in a thread
                task.error = f"the import stopped with an error: {error}"
                task.stage = "failed"
            finally:
                finished.set()
                self._write(task)
                self._release(token)

        threading.Thread(target=beat, name=f"import-beat-{token[:8]}", daemon=True).start()
        threading.Thread(target=run, name=f"import-{token[:8]}", daemon=True).start()
        return task

    # --- the state files shared by the processes ---------------------------------------------

    def _path(self, token: str, suffix: str = ".json") -> Path | None:
        if self.folder is None or not token.replace("-", "").replace("_", "").isalnum():
            return None  # a token is URL-safe base64; anything else never names a file
        return self.folder / f"{token}{suffix}"

    def _read(self, token: str) -> ImportTask | None:
        path = self._path(token)
        if path is None:
            return None
        try:
            data, age = path.read_bytes(), time.time() - path.stat().st_mtime
            task = _TASK_JSON.validate_json(data)
        except (OSError, ValueError):
            return None
        if task.stage in ("previewing", "importing") and age > STALE_SECONDS:
            return None  # its process stopped: the page may start it again
        return task

    def _write(self, task: ImportTask) -> None:
        path = self._path(task.token)
        if path is None:
            return
        path.parent.mkdir(parents=True, exist_ok=True)
        partial = path.with_name(f"{path.name}.{os.getpid()}.{threading.get_ident()}.part")
        partial.write_bytes(_TASK_JSON.dump_json(task))
        os.replace(partial, path)  # readers see the old state or the new, never half of one

    def _claim(self, token: str) -> bool:
        """Make the upload's claim file; False while another process holds it (a task runs, or is just starting)."""
        path = self._path(token, ".claim")
        if path is None:
            return True
        path.parent.mkdir(parents=True, exist_ok=True)
        for _ in range(2):
            try:
                os.close(os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY))
                return True
            except FileExistsError:
                state = self._read(token)
                try:
                    just_made = time.time() - path.stat().st_mtime <= STALE_SECONDS
                except FileNotFoundError:
                    continue  # released meanwhile: try again
                if (state is not None and state.stage in ("previewing", "importing")) or just_made:
                    return False
                path.unlink(missing_ok=True)  # left by a process that stopped mid-task
        return False

    def _release(self, token: str) -> None:
        path = self._path(token, ".claim")
        if path is not None:
            path.unlink(missing_ok=True)


_TASK_JSON = TypeAdapter(ImportTask)
