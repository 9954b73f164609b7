"""The workbook: a folder (or .zip) of UTF-8 CSV files that carries a whole dataset in and out.

Import reads every file, checks every row and writes in one transaction: if any row has a
problem, nothing is written and every problem is reported as ``file:line: column: reason``.
Rows with a key update the record of that key; attestation rows without a key are matched
on all their fields, so importing the same workbook twice changes nothing. Import never
deletes. Export writes every file back with keys filled in, so a round trip loses nothing.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import re
import zipfile
import zlib
from contextlib import contextmanager
from collections import Counter
from dataclasses import dataclass, field
from datetime import date, datetime, timezone
from pathlib import Path, PurePosixPath
from collections.abc import Callable, Iterable, Iterator
from typing import Any, NamedTuple, TextIO

from sqlalchemy import func, select, update
from sqlalchemy.orm import Session, aliased

from app.dates import DEFAULT_SETTINGS, DateError, DateSettings, check_calendar, interval_or_none
from app.db import Database
from app.models import (
    CERTAINTIES,
    EVIDENCE_KINDS,
    FACT_KINDS,
    PERSON_KINDS,
    Attestation,
    AuditEntry,
    Collection,
    DataVersion,
    Group,
    Membership,
    Person,
    PersonAlias,
    PersonFact,
    PersonIdentifier,
    PersonName,
    Place,
    Relation,
    RelationKind,
    Repository,
    Source,
)
from app.names import fold
from app.store.privacy import RestrictedPersons

MAX_PROBLEMS = 200
Progress = Callable[[int, int], None]  # called with (rows done, rows in all) while an import runs
KEY_RE = re.compile(r"^[A-Za-z0-9._:-]{1,100}$")
TRUE_WORDS = {"yes", "y", "true", "1"}
FALSE_WORDS = {"no", "n", "false", "0", ""}


class FileSpec(NamedTuple):
    columns: tuple[str, ...]
    required: tuple[str, ...]


# In the order they are read: every file refers only to files above it (or to itself).
FILES: dict[str, FileSpec] = {
    "places.csv": FileSpec(("key", "name", "variants", "latitude", "longitude", "identifier"), ("key", "name")),
    "repositories.csv": FileSpec(("key", "name", "place", "note"), ("key", "name")),
    "collections.csv": FileSpec(("key", "repository", "name", "reference_code", "note"), ("key", "repository", "name")),
    "persons.csv": FileSpec(
        ("key", "name", "sort_name", "kind", "unidentified", "living", "variants", "born", "died", "calendar",
         "identifiers", "note"),
        ("key", "name"),
    ),
    "groups.csv": FileSpec(("key", "name", "kind", "place", "parent", "start", "end", "note"), ("key", "name")),
    "sources.csv": FileSpec(
        ("key", "repository", "collection", "reference", "kind", "title", "author", "publisher", "year", "pages",
         "date", "calendar", "place_from", "place_to", "received", "copy_of", "url", "note"),
        ("key",),
    ),
    "relation_kinds.csv": FileSpec(("key", "label", "directed", "role_a", "role_b", "parent"), ("key",)),
    "relations.csv": FileSpec(
        ("key", "person", "other", "kind", "source", "locus", "evidence", "date", "calendar", "place", "certainty",
         "identification", "person_as_written", "other_as_written", "quote", "note"),
        ("person", "other", "kind", "source"),
    ),
    "memberships.csv": FileSpec(
        ("key", "person", "group", "role", "start", "end", "source", "locus", "evidence", "date", "certainty",
         "quote", "note"),
        ("person", "group", "source"),
    ),
    "facts.csv": FileSpec(
        ("key", "person", "fact", "value", "place", "date", "source", "locus", "evidence", "certainty", "quote",
         "note"),
        ("person", "fact", "source"),
    ),
}


class Problem(NamedTuple):
    file: str
    line: int
    column: str
    reason: str

    def __str__(self) -> str:
        return f"{self.file}:{self.line}: {self.column}: {self.reason}"


class WorkbookError(Exception):
    """The workbook cannot be imported; ``problems`` says where and why. Nothing was written."""

    def __init__(self, problems: list[Problem], total: int | None = None):
        self.problems = problems[:MAX_PROBLEMS]
        self.total = total if total is not None else len(problems)
        shown = "\n".join(str(p) for p in self.problems)
        more = f"\n... and {self.total - len(self.problems)} more" if self.total > len(self.problems) else ""
        super().__init__(f"{self.total} problem(s); nothing was imported:\n{shown}{more}")


@dataclass(slots=True)
class Row:
    file: str
    line: int
    values: dict[str, str]
    outcome: str | None = None  # added / changed / unchanged, once the import has seen the row

    def get(self, column: str) -> str | None:
        """Return the stripped cell, or None when the column is blank or absent."""
        value = self.values.get(column)
        if not value:
            return None
        return value.strip() or None

    def has(self, column: str) -> bool:
        return column in self.values


@dataclass
class ImportReport:
    """What an import did, file by file, and what it assumed."""

    rows: dict[str, Counter] = field(default_factory=dict)  # file -> added / changed / unchanged
    created: Counter = field(default_factory=Counter)  # new relations, memberships, facts
    defaulted_certainty: int = 0
    warnings: list[str] = field(default_factory=list)
    data_version: int = 0
    sha256: str = ""

    @property
    def changed_anything(self) -> bool:
        return any(c["added"] or c["changed"] for c in self.rows.values())

    def lines(self) -> list[str]:
        out = []
        for name, counts in self.rows.items():
            out.append(f"{name}: {counts['added']} added, {counts['changed']} changed, {counts['unchanged']} unchanged")
        if self.created:
            out.append("new ties: " + ", ".join(f"{n} {what}" for what, n in sorted(self.created.items())))
        if self.defaulted_certainty:
            out.append(f"{self.defaulted_certainty} row(s) had a blank certainty and were taken as 'certain'")
        out.extend(f"note: {w}" for w in self.warnings)
        return out


# --- reading files -----------------------------------------------------------------------


@dataclass
class Sheet:
    """One table as a file gives it, before it is matched to a workbook file: its header and records.

    Every reader (CSV, a zip of CSV files, the sheets of an .xlsx) gives sheets; the records
    are read again each time they are walked, so a large file is never held as rows twice.
    """

    name: str  # as the user named it: "persons.csv", "letters.csv", the sheet "persons" of an .xlsx
    label: str  # where it is, for messages: "persons.csv", "book.xlsx, sheet persons"
    header: list[str]
    count: int  # records with at least one non-blank cell
    walk: Callable[[], Iterator[tuple[int, list[str]]]]  # (line, cells) of each such record

    def records(self) -> Iterator[tuple[int, list[str]]]:
        return self.walk()


class SheetPlan(NamedTuple):
    """Which workbook file a sheet is, which workbook column each of its columns is ("" = left out),
    and values given once for every row (the document of an edge list, its relation kind)."""

    file: str
    columns: dict[str, str]
    fixed: dict[str, str] = {}


class RowFile:
    """The rows of one workbook file, made from a sheet as they are walked (``len`` is known at once)."""

    def __init__(self, file: str, sheet: Sheet, columns: list[tuple[int, str]], fixed: dict[str, str] | None = None):
        self.file = file
        self.sheet = sheet
        self.columns = columns  # (index in the record, workbook column)
        self.fixed = fixed or {}  # workbook column -> the value of every row

    def __len__(self) -> int:
        return self.sheet.count

    def __iter__(self) -> Iterator[Row]:
        file, columns, width = self.file, self.columns, len(self.sheet.header)
        for line, record in self.sheet.records():
            if len(record) > width:
                continue  # reported when the sheet was read
            if len(record) < width:
                record = record + [""] * (width - len(record))
            values = {column: record[i] for i, column in columns}
            if self.fixed:
                values.update(self.fixed)
            yield Row(file, line, values)

    def __getitem__(self, index: int) -> Row:
        for i, row in enumerate(self):
            if i == index:
                return row
        raise IndexError(index)


def read_workbook(path: str | Path, *, size_limit: int) -> tuple[dict[str, RowFile], list[Problem], list[str], str]:
    """Return the rows of every workbook file in a folder or .zip, the problems, warnings and a SHA-256.

    Files are decoded as UTF-8 (a byte-order mark is accepted); anything else is a problem.
    """
    path = Path(path)
    if not path.exists():
        raise WorkbookError([Problem(str(path), 0, "(path)", "no such file or folder")])
    raw, problems = _raw_files(path, size_limit)
    if problems:
        raise WorkbookError(problems)
    sheets, digest = csv_sheets(raw, problems)
    tables, warnings = tables_from_sheets(sheets, problems)
    if not tables and not problems:
        problems.append(Problem(str(path), 0, "(workbook)", f"no workbook files found; expected some of: {', '.join(FILES)}"))
    return tables, problems, warnings, digest


def csv_sheets(raw: dict[str, bytes], problems: list[Problem]) -> tuple[list[Sheet], str]:
    """Return a sheet for each CSV file (name -> bytes) and a SHA-256 of them all; bad files are problems."""
    digest = hashlib.sha256()
    sheets = []
    for name in sorted(raw):
        digest.update(name.encode() + b"\0" + raw[name] + b"\0")
        sheet = csv_sheet(name, raw[name], problems)
        if sheet is not None:
            sheets.append(sheet)
    return sheets, digest.hexdigest()


def _raw_files(path: Path, size_limit: int) -> tuple[dict[str, bytes], list[Problem]]:
    problems: list[Problem] = []
    if path.is_dir():
        files = sorted(p for p in path.iterdir() if p.is_file() and p.suffix.lower() == ".csv")
        total = sum(p.stat().st_size for p in files)
        if total > size_limit:
            return {}, [Problem(str(path), 0, "(size)", _too_big(total, size_limit))]
        return {p.name: p.read_bytes() for p in files}, problems
    if not zipfile.is_zipfile(path):
        return {}, [Problem(str(path), 0, "(path)", "not a folder or a .zip file of CSV files")]
    if path.stat().st_size > size_limit:
        return {}, [Problem(str(path), 0, "(size)", _too_big(path.stat().st_size, size_limit))]
    return zip_members(path, size_limit, (".csv",))


def zip_members(path: Path, size_limit: int, suffixes: tuple[str, ...]) -> tuple[dict[str, bytes], list[Problem]]:
    """Return the files of a .zip ending in ``suffixes`` (name -> bytes), or the problems that refuse it.

    A path outside the zip's folder, more than one folder, more unpacked bytes than ``size_limit``
    and a damaged archive are refused with a message naming the zip (and the member).
    """
    problems: list[Problem] = []
    try:
        with zipfile.ZipFile(path) as archive:
            members = [m for m in archive.infolist() if not m.is_dir()]
            for member in members:
                parts = PurePosixPath(member.filename.replace("\\", "/")).parts
                if member.filename.startswith(("/", "\\")) or ".." in parts or (parts and ":" in parts[0]):
                    problems.append(Problem(member.filename, 0, "(zip)", "path points outside the workbook folder; refused"))
            total = sum(m.file_size for m in members)
            if total > size_limit:
                problems.append(Problem(path.name, 0, "(size)", _too_big(total, size_limit) + " when unpacked"))
            if problems:
                return {}, problems
            wanted = [m for m in members if m.filename.lower().endswith(suffixes) and "__MACOSX" not in m.filename]
            folders = {PurePosixPath(m.filename).parent for m in wanted}
            if len(folders) > 1:
                return {}, [Problem(path.name, 0, "(zip)", "the CSV files must sit together in one folder of the zip")]
            files = {}
            for member in wanted:
                try:
                    files[PurePosixPath(member.filename).name] = archive.read(member)
                except (zipfile.BadZipFile, zlib.error, EOFError, OSError, NotImplementedError) as error:
                    return {}, [Problem(f"{path.name}: {member.filename}", 0, "(zip)",
                                        f"the zip is damaged and this file cannot be unpacked ({error.__class__.__name__}); "
                                        "make the zip again")]
            return files, problems
    except (zipfile.BadZipFile, zlib.error, EOFError, OSError) as error:
        return {}, [Problem(path.name, 0, "(zip)", f"not a readable .zip file ({error}); make the zip again")]


def _too_big(size: int, limit: int) -> str:
    return f"{size / 1e6:.1f} MB is over the import size limit of {limit / 1e6:.0f} MB (setting ATTESTA_UPLOAD_LIMIT_MB)"


def csv_sheet(name: str, data: bytes, problems: list[Problem], label: str | None = None) -> Sheet | None:
    """Return the sheet of one CSV file, or None (with a problem) when it cannot be read at all."""
    label = label or name
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as error:
        line = data[: error.start].count(b"\n") + 1
        problems.append(Problem(label, line, "(encoding)",
                                f"not UTF-8 text (byte 0x{data[error.start]:02x}); save the file as UTF-8"))
        return None
    del data
    if not text.strip():
        expected = f" with {', '.join(FILES[name].columns)}" if name in FILES else ""
        problems.append(Problem(label, 1, "(file)", f"empty file; expected a header row{expected}"))
        return None
    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        header = [h.strip() for h in next(reader)]
    except csv.Error as error:
        problems.append(Problem(label, 1, "(file)", f"cannot read the header row: {error}"))
        return None

    def walk() -> Iterator[tuple[int, list[str]]]:
        records = csv.reader(io.StringIO(text, newline=""))
        next(records)
        try:
            for record in records:
                if any(record) and any(cell.strip() for cell in record):
                    yield records.line_num, record
        except csv.Error:
            return  # reported when the sheet was read

    count = 0
    width = len(header)
    try:
        for record in reader:
            if not any(record) or not any(cell.strip() for cell in record):
                continue
            if len(record) > width:
                problems.append(Problem(label, reader.line_num, "(row)", f"{len(record)} cells but the header has {width} columns"))
            else:
                count += 1
    except csv.Error as error:
        problems.append(Problem(label, reader.line_num, "(row)", f"malformed CSV: {error}"))
    return Sheet(name=name, label=label, header=header, count=count, walk=walk)


def workbook_file_of(name: str) -> str | None:
    """Return the workbook file a sheet's name stands for (``persons``, ``Persons.csv`` -> ``persons.csv``)."""
    stem = name.strip().lower()
    stem = stem[:-4] if stem.endswith(".csv") else stem
    return f"{stem}.csv" if f"{stem}.csv" in FILES else None


def tables_from_sheets(
    sheets: list[Sheet], problems: list[Problem], plans: dict[str, SheetPlan] | None = None,
) -> tuple[dict[str, RowFile], list[str]]:
    """Return the workbook files of the sheets (with ``plans`` renaming sheets and columns) and warnings.

    A sheet whose header lacks a required column, or names a column twice, is a problem. A
    sheet that is no workbook file, and columns that are no workbook columns, are warnings.
    """
    tables: dict[str, RowFile] = {}
    warnings: list[str] = []
    for sheet in sheets:
        plan = (plans or {}).get(sheet.name)
        file = plan.file if plan else workbook_file_of(sheet.name)
        if not file:
            warnings.append(f"{sheet.label} is not a workbook file and was ignored (workbook files: {', '.join(FILES)})")
            continue
        if file in tables:
            problems.append(Problem(sheet.label, 1, "(file)", f"a second sheet for {file} (the first is {tables[file].sheet.label})"))
            continue
        renames = plan.columns if plan else {}
        fixed = {c: v for c, v in (plan.fixed if plan else {}).items() if v and c in FILES[file].columns}
        header = [renames.get(h, h) for h in sheet.header]
        spec = FILES[file]
        missing = [c for c in spec.required if c not in header and c not in fixed]
        if missing:
            problems.append(Problem(sheet.label, 1, ", ".join(missing),
                                    f"required column(s) missing; the header has {', '.join(sheet.header)}"))
            continue
        duplicated = sorted({h for h in header if h and header.count(h) > 1})
        if duplicated:
            problems.append(Problem(sheet.label, 1, ", ".join(duplicated), "column named twice in the header"))
            continue
        unknown = [original for original, h in zip(sheet.header, header) if h and h not in spec.columns]
        if unknown:
            warnings.append(f"{sheet.label}: column(s) {', '.join(unknown)} are not part of the workbook and were ignored")
        columns = [(i, h) for i, h in enumerate(header) if h in spec.columns and h not in fixed]
        tables[file] = RowFile(file, sheet, columns, fixed)
    return tables, warnings


# --- importing ---------------------------------------------------------------------------


def import_workbook(
    database: Database,
    path: str | Path,
    *,
    size_limit: int,
    date_settings: DateSettings = DEFAULT_SETTINGS,
    actor: str = "cli",
    progress: Progress | None = None,
) -> ImportReport:
    """Import the workbook at ``path`` in one transaction and return what changed.

    Raises WorkbookError (nothing written) when any row has a problem.
    """
    tables, problems, warnings, digest = read_workbook(path, size_limit=size_limit)
    if problems:
        raise WorkbookError(problems)
    return import_tables(
        database, tables, name=Path(path).name, sha256=digest, warnings=warnings,
        date_settings=date_settings, actor=actor, progress=progress,
    )


def import_tables(
    database: Database,
    tables: dict[str, list[Row]],
    *,
    name: str,
    sha256: str,
    warnings: list[str] | None = None,
    date_settings: DateSettings = DEFAULT_SETTINGS,
    actor: str = "cli",
    dry_run: bool = False,
    progress: Progress | None = None,
    after: Callable[[Session, ImportReport], None] | None = None,
) -> ImportReport:
    """Import rows already read (from a workbook, or converted from TEI or GraphML) in one transaction.

    ``tables`` maps a workbook file name (``persons.csv``) to its rows; each ``Row`` names the
    file and line it came from, so a problem points at the original file. Raises WorkbookError
    (nothing written) when any row has a problem. ``name`` and ``sha256`` describe the file
    for the one audit entry of the import.

    ``dry_run`` runs the whole import and rolls it back: the report says what a real import
    would add and change (the preview). ``progress`` is told how far the rows are. ``after``
    runs in the same transaction once the rows are written (say, to record links between
    persons the user asked for), so it too is all or nothing with the import.
    """
    with database.write() as session, _large_cache(session):
        importer = _Importer(session, date_settings, progress)
        report = importer.run(tables)
        report.warnings[:0] = warnings or []
        report.sha256 = sha256
        if importer.problems:
            session.rollback()
            raise WorkbookError(importer.problems, importer.problem_count)
        if dry_run:
            report.data_version = session.scalar(select(DataVersion.version)) or 0
            session.rollback()
            return report
        if after is not None:
            after(session, report)
        if report.changed_anything:
            report.data_version = _record_import(session, report, name, actor)
        else:
            report.data_version = session.scalar(select(DataVersion.version)) or 0
    return report


@contextmanager
def _large_cache(session: Session) -> Iterator[None]:
    """Give SQLite a page cache of 256 MB for the import (its 2 MB default makes bulk index inserts spill)."""
    connection = session.connection()
    if connection.dialect.name != "sqlite":
        yield
        return
    before = connection.exec_driver_sql("PRAGMA cache_size").scalar()
    connection.exec_driver_sql("PRAGMA cache_size = -262144")
    try:
        yield
    finally:
        try:
            session.connection().exec_driver_sql(f"PRAGMA cache_size = {int(before)}")
        except Exception:  # noqa: BLE001 - the connection is going back to the pool anyway
            pass


def _record_import(session: Session, report: ImportReport, name: str, actor: str) -> int:
    """Bump the data version and write one audit entry with the counts and the file hash."""
    now = datetime.now(timezone.utc).replace(tzinfo=None)
    session.execute(update(DataVersion).values(version=DataVersion.version + 1, changed_at=now))
    counts = {file: dict(c) for file, c in report.rows.items()}
    session.add(
        AuditEntry(
            at=now, actor=actor, action="import", table_name=None, record_key=None,
            after_json=json.dumps({"file": name, "sha256": report.sha256, "rows": counts, "created": dict(report.created)}),
            summary=f"imported workbook {name}",
        )
    )
    session.flush()
    return session.scalar(select(DataVersion.version))


class _PendingInserts:
    """New rows held back and written in bulk (one executemany per table), parents before children.

    Ids are handed out here (the write transaction holds the database's write lock, so nobody
    else can take them), which lets a row refer to a record that is not written yet. The rows
    are written when ``limit`` of them wait, before any read or update of a table that has
    waiting rows, and at the end of every file.
    """

    ORDER = (Place, Repository, Collection, Person, PersonName, PersonIdentifier, Group, Source, RelationKind,
             Relation, Membership, PersonFact, Attestation)

    def __init__(self, session: Session, limit: int = 20_000):
        self.session = session
        self.limit = limit
        self.tables = [model.__table__ for model in self.ORDER]
        self.rows: dict[str, list[dict[str, Any]]] = {t.name: [] for t in self.tables}
        self.first_new_id: dict[str, int] = {}
        self.next_id: dict[str, int] = {}
        for table in self.tables:
            top = session.scalar(select(func.max(table.c.id))) or 0
            self.first_new_id[table.name] = self.next_id[table.name] = top + 1
        self.waiting = 0

    def insert(self, table: Any, **values: Any) -> int:
        """Queue a new row of ``table`` and return the id it will have."""
        new_id = self.next_id[table.name]
        self.next_id[table.name] = new_id + 1
        self.add(table, id=new_id, **values)
        return new_id

    def add(self, table: Any, **values: Any) -> None:
        """Queue a new row whose id nobody needs (a name variant, an identifier)."""
        self.rows[table.name].append(values)
        self.waiting += 1
        if self.waiting >= self.limit:
            self.flush()

    def is_new(self, table: Any, record_id: int | None) -> bool:
        """Return True when ``record_id`` was created by this import (so no stored value needs reading)."""
        return record_id is not None and record_id >= self.first_new_id[table.name]

    def before_reading(self, table: Any) -> None:
        """Write what waits before ``table`` is read or updated, so the statement sees it."""
        if self.rows[table.name]:
            self.flush()

    def flush(self) -> None:
        """Write every waiting row: one executemany per table and set of columns, parents first.

        The statements go straight to the driver (SQLAlchemy's per-row parameter handling cost
        more than the insert itself); column defaults and type conversions (dates, booleans)
        are applied here as SQLAlchemy would.
        """
        connection = self.session.connection()
        dialect = connection.dialect
        quote = dialect.identifier_preparer.quote
        placeholder = "?" if dialect.paramstyle == "qmark" else "%s"  # SQLite's driver / psycopg's
        for table in self.tables:
            rows = self.rows[table.name]
            if not rows:
                continue
            by_columns: dict[tuple[str, ...], list[dict[str, Any]]] = {}
            for row in rows:  # executemany needs the same columns in every row
                by_columns.setdefault(tuple(row), []).append(row)
            for names, batch in by_columns.items():
                defaults = {c.name: c.default.arg for c in table.columns
                            if c.name not in names and c.default is not None and c.default.is_scalar}
                columns = [*names, *defaults]
                processors = [table.c[name].type.bind_processor(dialect) for name in columns]
                fill = tuple(defaults.values())
                values = [(*row.values(), *fill) for row in batch]
                if any(processors):
                    values = [tuple(v if p is None or v is None else p(v) for p, v in zip(processors, row))
                              for row in values]
                sql = (f"INSERT INTO {quote(table.name)} ({', '.join(quote(c) for c in columns)}) "
                       f"VALUES ({', '.join([placeholder] * len(columns))})")
                connection.exec_driver_sql(sql, values)
                if dialect.name == "postgresql" and "id" in names:
                    # ids handed out here do not move the table's sequence; later inserts would collide
                    connection.exec_driver_sql(
                        f"SELECT setval(pg_get_serial_sequence('{table.name}', 'id'), "
                        f"(SELECT max(id) FROM {quote(table.name)}))"
                    )
            rows.clear()
        self.waiting = 0


class _Ref(NamedTuple):
    """A record known by key: its id (None while a row with problems declared it) and extra facts."""

    id: int | None
    extra: Any = None


class _Importer:
    """Checks and writes the rows of one workbook inside one write transaction."""

    def __init__(self, session: Session, date_settings: DateSettings, progress: Progress | None = None):
        self.session = session
        self.date_settings = date_settings
        self.progress = progress
        self.pending = _PendingInserts(session)
        self.dates_read: dict[tuple[str, str | None], tuple[str, date | None, date | None]] = {}
        self.problems: list[Problem] = []
        self.problem_count = 0
        self.report = ImportReport()
        self.now = datetime.now(timezone.utc).replace(tzinfo=None)
        self.term_lines: dict[int, int] = {}  # membership id -> line that gave its term in this import
        self._load_existing()

    # -- bookkeeping --

    def problem(self, row: Row, column: str, reason: str) -> None:
        self.problem_count += 1
        if len(self.problems) < MAX_PROBLEMS:
            self.problems.append(Problem(row.file, row.line, column, reason))

    @property
    def writing(self) -> bool:
        """Once any row has a problem, the rest is only checked: the transaction will be rolled back."""
        return not self.problem_count

    def count(self, row: Row, outcome: str) -> None:
        counts = self.report.rows.get(row.file)
        if counts is None:
            counts = self.report.rows[row.file] = Counter({"added": 0, "changed": 0, "unchanged": 0})
        counts[outcome] += 1
        row.outcome = outcome

    def count_as_changed(self, row: Row) -> None:
        """A row first found unchanged changed something after all (a new variant, a parent)."""
        if row.outcome == "unchanged":
            counts = self.report.rows[row.file]
            counts["unchanged"] -= 1
            counts["changed"] += 1
            row.outcome = "changed"

    def _load_existing(self) -> None:
        s = self.session
        self.places = {k: _Ref(i) for k, i in s.execute(select(Place.key, Place.id))}
        self.repositories = {k: _Ref(i) for k, i in s.execute(select(Repository.key, Repository.id))}
        self.collections = {
            k: _Ref(i, r) for k, i, r in s.execute(select(Collection.key, Collection.id, Repository.key).join(Repository))
        }
        self.persons = {k: _Ref(i) for k, i in s.execute(select(Person.key, Person.id))}
        self.aliases = dict(s.execute(select(PersonAlias.key, Person.key).join(Person, Person.id == PersonAlias.person_id)).all())
        self.groups = {k: _Ref(i) for k, i in s.execute(select(Group.key, Group.id))}
        self.sources = {
            k: _Ref(i, (cal, e, l)) for k, i, cal, e, l in s.execute(
                select(Source.key, Source.id, Source.calendar, Source.earliest, Source.latest)
            )
        }
        self.kinds = {k: _Ref(i, d) for k, i, d in s.execute(select(RelationKind.key, RelationKind.id, RelationKind.directed))}
        self.relation_ids = {(k, a, b): i for i, k, a, b in s.execute(
            select(Relation.id, Relation.kind_id, Relation.person_a_id, Relation.person_b_id))}
        self.memberships = {
            (m["person_id"], m["group_id"], m["role"]): dict(m) for m in s.execute(select(Membership.__table__)).mappings()
        }
        self.fact_ids = {
            (f.person_id, f.kind, f.value, f.place_id, f.date_text): f.id for f in s.execute(select(PersonFact)).scalars()
        }
        self.names = {(p, n) for p, n in s.execute(select(PersonName.person_id, PersonName.name))}
        self.identifiers = {(sch, v): p for sch, v, p in s.execute(
            select(PersonIdentifier.scheme, PersonIdentifier.value, PersonIdentifier.person_id))}
        self.attestations_by_key: dict[str, tuple[int, str]] = {}
        self.attestation_signatures: dict[bytes, int] = {}
        self.deleted_matches = 0
        self.changed_sources: dict[int, Row] = {}
        self.seen_keys: dict[str, dict[str, int]] = {}  # file -> key -> line
        self.signature_of: dict[int, bytes] = {}
        self.deleted_ids: set[int] = set()
        table = Attestation.__table__
        columns = [table.c.id, table.c.key, table.c.relation_id, table.c.membership_id, table.c.fact_id,
                   table.c.deleted_at, *(table.c[f] for f in SIGNATURE_FIELDS)]
        for att in s.execute(select(*columns)):
            target = _target_of(att)
            signature = _signature(att, target)
            self.attestations_by_key[att.key] = (att.id, target[0])
            self.attestation_signatures[signature] = att.id
            self.signature_of[att.id] = signature
            if att.deleted_at is not None:
                self.deleted_ids.add(att.id)

    # -- cell readers: each returns the parsed value or None, and records a problem --

    def key(self, row: Row, column: str = "key", *, required: bool = True) -> str | None:
        value = row.get(column)
        if value is None:
            if required:
                self.problem(row, column, "required; a key of letters, digits and . _ : - (at most 100)")
            return None
        if not KEY_RE.match(value):
            self.problem(row, column, f"{value!r} is not a valid key: use letters, digits and . _ : - (at most 100)")
            return None
        if column == "key":
            first = self.seen_keys.setdefault(row.file, {}).setdefault(value, row.line)
            if first != row.line:
                self.problem(row, column, f"duplicate key {value!r} (first used on line {first})")
                return None
        return value

    def required(self, row: Row, column: str) -> str | None:
        value = row.get(column)
        if value is None:
            self.problem(row, column, "required; the cell is empty")
        return value

    def choice(self, row: Row, column: str, allowed: tuple[str, ...], default: str) -> str:
        value = row.get(column)
        if value is None:
            return default
        if value.lower() not in allowed:
            self.problem(row, column, f"{value!r} is not one of {', '.join(allowed)}")
            return default
        return value.lower()

    def boolean(self, row: Row, column: str) -> bool:
        value = (row.get(column) or "").lower()
        if value in TRUE_WORDS:
            return True
        if value not in FALSE_WORDS:
            self.problem(row, column, f"{value!r} is not yes or no")
        return False

    def number(self, row: Row, column: str, low: float, high: float) -> float | None:
        value = row.get(column)
        if value is None:
            return None
        try:
            number = float(value)
        except ValueError:
            self.problem(row, column, f"{value!r} is not a number")
            return None
        if not low <= number <= high:
            self.problem(row, column, f"{number} is outside {low}..{high}")
            return None
        return number

    def calendar(self, row: Row, column: str = "calendar", default: str | None = "gregorian") -> str | None:
        value = row.get(column)
        if value is None:
            return default
        try:
            return check_calendar(value)
        except DateError as error:
            self.problem(row, column, str(error))
            return default

    def date(self, row: Row, column: str, calendar: str | None) -> tuple[str | None, date | None, date | None]:
        """Return the EDTF text as written and its earliest and latest Gregorian day."""
        text = row.get(column)
        if text is None:
            return None, None, None
        known = self.dates_read.get((text, calendar))
        if known is not None:  # a dataset repeats its dates many times
            return known
        try:
            interval = interval_or_none(text, calendar or "gregorian", settings=self.date_settings)
        except DateError as error:
            self.problem(row, column, str(error))
            return text, None, None
        read = self.dates_read[(text, calendar)] = (text, interval.earliest, interval.latest)
        return read

    def ref(self, row: Row, column: str, known: dict[str, _Ref], what: str, *, required: bool = False) -> _Ref | None:
        value = row.get(column)
        if value is None:
            if required:
                self.problem(row, column, f"required; the key of a {what}")
            return None
        found = known.get(value)
        if found is None and known is self.persons and value in self.aliases:
            found = known.get(self.aliases[value])
        if found is None:
            hint = ""
            if known is self.groups and value in self.persons:
                hint = f" ({value!r} is a person, not a group)"
            elif known is self.persons and value in self.groups:
                hint = f" ({value!r} is a group, not a person)"
            elif known is self.kinds:
                hint = f" (known kinds: {', '.join(sorted(self.kinds))}; add it to relation_kinds.csv)"
            self.problem(row, column, f"unknown {what} {value!r}{hint}")
        return found

    # -- generic upsert of a keyed record --

    def upsert(self, row: Row, model: type, key: str, values: dict[str, Any], known: dict[str, _Ref], extra: Any = None) -> int | None:
        """Insert the record of ``key`` or update the columns the file gives; return its id."""
        ref = known.get(key)
        if not self.writing:
            known.setdefault(key, _Ref(None, extra))
            return None
        table = model.__table__
        if ref is None:
            new_id = self.pending.insert(table, key=key, **values)
            known[key] = _Ref(new_id, extra)
            self.count(row, "added")
            return new_id
        self.pending.before_reading(table)
        current = self.session.execute(select(*[table.c[c] for c in values]).where(table.c.id == ref.id)).one()
        changes = {c: v for (c, v), old in zip(values.items(), current) if old != v}
        if changes:
            self.session.execute(table.update().where(table.c.id == ref.id).values(**changes, **_bumped(table)))
            self.count(row, "changed")
        else:
            self.count(row, "unchanged")
        known[key] = _Ref(ref.id, extra)
        return ref.id

    def present(self, row: Row, pairs: dict[str, Any]) -> dict[str, Any]:
        """Keep only the columns whose workbook column is in the file's header (absent ones stay as they are)."""
        return {col: value for col, (source_col, value) in pairs.items() if row.has(source_col)}

    # -- the files --

    def run(self, tables: dict[str, list[Row]]) -> ImportReport:
        handlers = {
            "places.csv": self.place, "repositories.csv": self.repository, "collections.csv": self.collection,
            "persons.csv": self.person, "groups.csv": self.group, "sources.csv": self.source,
            "relation_kinds.csv": self.relation_kind, "relations.csv": self.relation,
            "memberships.csv": self.membership, "facts.csv": self.fact,
        }
        self.pending_parents: list[tuple[Row, type, int | None, str, str, dict[str, _Ref], str]] = []
        total = sum(len(tables.get(name, [])) for name in FILES)
        done = 0
        for name in FILES:
            for row in tables.get(name, []):
                handlers[name](row)
                done += 1
                if self.progress is not None and done % 2000 == 0:
                    self.progress(done, total)
            self._resolve_pending(name)
        self.pending.flush()
        if self.progress is not None:
            self.progress(total, total)
        if self.writing and self.changed_sources:
            self._refresh_undated_attestations()
        if self.deleted_matches:
            self.report.warnings.append(
                f"{self.deleted_matches} row(s) match attestations that were deleted; they stay deleted (restore them instead)"
            )
        return self.report

    def place(self, row: Row) -> None:
        key = self.key(row)
        name = self.required(row, "name")
        values = self.present(row, {
            "name": ("name", name), "variants": ("variants", row.get("variants")),
            "latitude": ("latitude", self.number(row, "latitude", -90, 90)),
            "longitude": ("longitude", self.number(row, "longitude", -180, 180)),
            "identifier": ("identifier", row.get("identifier")),
        })
        if key:
            self.upsert(row, Place, key, values, self.places)

    def repository(self, row: Row) -> None:
        key = self.key(row)
        name = self.required(row, "name")
        place = self.ref(row, "place", self.places, "place")
        values = self.present(row, {"name": ("name", name), "place_id": ("place", place and place.id), "note": ("note", row.get("note"))})
        if key:
            self.upsert(row, Repository, key, values, self.repositories)

    def collection(self, row: Row) -> None:
        key = self.key(row)
        name = self.required(row, "name")
        repository = self.ref(row, "repository", self.repositories, "repository", required=True)
        values = self.present(row, {
            "name": ("name", name), "repository_id": ("repository", repository and repository.id),
            "reference_code": ("reference_code", row.get("reference_code")), "note": ("note", row.get("note")),
        })
        if key:
            self.upsert(row, Collection, key, values, self.collections, extra=row.get("repository"))

    def person(self, row: Row) -> None:
        key = self.key(row)
        if key and key in self.aliases:
            self.problem(row, "key", f"{key!r} is the old key of {self.aliases[key]!r}, merged; use that key")
            return
        name = self.required(row, "name")
        kind = self.choice(row, "kind", PERSON_KINDS, "individual")
        calendar = self.calendar(row)
        born = self.date(row, "born", calendar)
        died = self.date(row, "died", calendar)
        identifiers = self._identifiers(row)
        values = self.present(row, {
            "name": ("name", name), "sort_name": ("sort_name", row.get("sort_name")), "kind": ("kind", kind),
            "unidentified": ("unidentified", self.boolean(row, "unidentified")),
            "living": ("living", self.boolean(row, "living")),
            "born_text": ("born", born[0]), "born_earliest": ("born", born[1]), "born_latest": ("born", born[2]),
            "died_text": ("died", died[0]), "died_earliest": ("died", died[1]), "died_latest": ("died", died[2]),
            "calendar": ("calendar", calendar), "note": ("note", row.get("note")),
        })
        if not key or name is None:
            return
        person_id = self.upsert(row, Person, key, values, self.persons)
        if person_id is None:
            return
        variants = [v.strip() for v in (row.get("variants") or "").split("|") if v.strip()]
        added = False
        for variant in [name, *variants]:
            if (person_id, variant) not in self.names:
                self.names.add((person_id, variant))
                self.pending.add(PersonName.__table__, person_id=person_id, name=variant, normalized=fold(variant))
                added = True
        for scheme, value in identifiers:
            owner = self.identifiers.get((scheme, value))
            if owner is None:
                self.identifiers[(scheme, value)] = person_id
                self.pending.add(PersonIdentifier.__table__, person_id=person_id, scheme=scheme, value=value)
                added = True
            elif owner != person_id:
                self.problem(row, "identifiers", f"{scheme}:{value} already belongs to another person")
        if added:
            self.count_as_changed(row)
            table = Person.__table__
            if not self.pending.is_new(table, person_id):  # a new spelling or identifier is an edit of the person
                self.session.execute(table.update().where(table.c.id == person_id).values(**_bumped(table)))

    def _identifiers(self, row: Row) -> list[tuple[str, str]]:
        found = []
        for item in (row.get("identifiers") or "").split("|"):
            item = item.strip()
            if not item:
                continue
            scheme, sep, value = item.partition(":")
            if not sep or not scheme.strip() or not value.strip():
                self.problem(row, "identifiers", f"{item!r} is not scheme:value (e.g. wikidata:Q1234, viaf:123, local:P7)")
                continue
            found.append((scheme.strip().lower(), value.strip()))
        return found

    def group(self, row: Row) -> None:
        key = self.key(row)
        name = self.required(row, "name")
        place = self.ref(row, "place", self.places, "place")
        start = self.date(row, "start", "gregorian")
        end = self.date(row, "end", "gregorian")
        values = self.present(row, {
            "name": ("name", name), "kind": ("kind", row.get("kind")), "place_id": ("place", place and place.id),
            "start_text": ("start", start[0]), "start_earliest": ("start", start[1]), "start_latest": ("start", start[2]),
            "end_text": ("end", end[0]), "end_earliest": ("end", end[1]), "end_latest": ("end", end[2]),
            "note": ("note", row.get("note")),
        })
        if key:
            group_id = self.upsert(row, Group, key, values, self.groups)
            if row.has("parent"):
                self.pending_parents.append((row, Group, group_id, "parent_id", "parent", self.groups, "group"))

    def source(self, row: Row) -> None:
        key = self.key(row)
        collection = self.ref(row, "collection", self.collections, "collection")
        repository_key = row.get("repository")
        if repository_key and repository_key not in self.repositories:
            self.problem(row, "repository", f"unknown repository {repository_key!r}")
        elif repository_key and collection is not None and collection.extra and collection.extra != repository_key:
            self.problem(row, "collection", f"collection {row.get('collection')!r} belongs to repository {collection.extra!r}, not {repository_key!r}")
        elif repository_key and row.get("collection") is None:
            self.problem(row, "collection", "an archival source needs the key of its collection (define it in collections.csv)")
        calendar = self.calendar(row)
        when = self.date(row, "date", calendar)
        received = self.date(row, "received", calendar)
        place_from = self.ref(row, "place_from", self.places, "place")
        place_to = self.ref(row, "place_to", self.places, "place")
        values = self.present(row, {
            "collection_id": ("collection", collection and collection.id), "reference": ("reference", row.get("reference")),
            "kind": ("kind", row.get("kind")), "title": ("title", row.get("title")), "author": ("author", row.get("author")),
            "publisher": ("publisher", row.get("publisher")), "year": ("year", row.get("year")), "pages": ("pages", row.get("pages")),
            "date_text": ("date", when[0]), "earliest": ("date", when[1]), "latest": ("date", when[2]),
            "calendar": ("calendar", calendar),
            "place_from_id": ("place_from", place_from and place_from.id), "place_to_id": ("place_to", place_to and place_to.id),
            "received_text": ("received", received[0]), "received_earliest": ("received", received[1]),
            "received_latest": ("received", received[2]), "url": ("url", row.get("url")), "note": ("note", row.get("note")),
        })
        if not key:
            return
        old = self.sources.get(key)
        source_id = self.upsert(row, Source, key, values, self.sources)
        if source_id is not None:
            if old is None:  # added: what the file gives, or the column's default
                current = (values.get("calendar") or "gregorian", values.get("earliest"), values.get("latest"))
            else:
                current = tuple(self.session.execute(
                    select(Source.calendar, Source.earliest, Source.latest).where(Source.id == source_id)
                ).one())
            self.sources[key] = _Ref(source_id, current)
            if old is not None and old.extra != tuple(current):
                self.changed_sources[source_id] = row
        if row.has("copy_of"):
            self.pending_parents.append((row, Source, source_id, "copy_of_id", "copy_of", self.sources, "source"))

    def relation_kind(self, row: Row) -> None:
        key = self.key(row)
        directed = self.boolean(row, "directed")
        existing = self.kinds.get(key) if key else None
        if existing is not None and existing.id is not None and row.has("directed") and existing.extra != directed:
            used = sum(1 for (kind_id, _, _) in self.relation_ids if kind_id == existing.id)
            if used:
                self.problem(row, "directed", f"kind {key!r} is used by {used} relation(s); directed cannot change while it is in use")
        values = self.present(row, {
            "label": ("label", row.get("label") or key), "directed": ("directed", directed),
            "role_a": ("role_a", row.get("role_a")), "role_b": ("role_b", row.get("role_b")),
        })
        if key:
            kind_id = self.upsert(row, RelationKind, key, values, self.kinds, extra=directed if row.has("directed") else (existing.extra if existing else False))
            if row.has("parent"):
                self.pending_parents.append((row, RelationKind, kind_id, "parent_id", "parent", self.kinds, "relation kind"))

    def _resolve_pending(self, file: str) -> None:
        """Set references to records of the same file (group parent, copy of, parent kind) once all exist."""
        self.pending.flush()
        for row, model, record_id, column, cell, known, what in [p for p in self.pending_parents if p[0].file == file]:
            target = self.ref(row, cell, known, what)
            if target is not None and target.id is not None and target.id == record_id:
                self.problem(row, cell, "a record cannot refer to itself here")
                continue
            if not self.writing or record_id is None:
                continue
            value = target.id if target else None
            table = model.__table__
            if self.pending.is_new(table, record_id) and value is None:
                continue  # a new record refers to nothing: already so
            if self.session.execute(select(table.c[column]).where(table.c.id == record_id)).scalar_one() != value:
                self.session.execute(table.update().where(table.c.id == record_id).values({column: value, **_bumped(table)}))
                self.count_as_changed(row)
        if file == "sources.csv" and self.writing:
            self._check_copies_name_originals()
        self.pending_parents = [p for p in self.pending_parents if p[0].file != file]

    def _check_copies_name_originals(self) -> None:
        """A copy names its original, never another copy: a copy and its original count as one document."""
        original = aliased(Source)
        chained = self.session.execute(
            select(Source.key, original.key).join(original, Source.copy_of_id == original.id).where(original.copy_of_id.is_not(None))
        ).all()
        rows = {p[0].get("key"): p[0] for p in self.pending_parents if p[1] is Source}
        for key, target in chained:
            row = rows.get(key) or Row("sources.csv", 0, {})
            self.problem(row, "copy_of", f"{target!r} is itself a copy; copy_of must name the original")

    # -- attestations --

    def _attestation_fields(self, row: Row, *, has_calendar: bool) -> dict[str, Any] | None:
        source = self.ref(row, "source", self.sources, "source", required=True)
        evidence = self.choice(row, "evidence", EVIDENCE_KINDS, "original")
        certainty = self.choice(row, "certainty", CERTAINTIES, "certain")
        if row.get("certainty") is None:
            self.report.defaulted_certainty += 1
        identification = self.choice(row, "identification", CERTAINTIES, "certain")
        calendar = self.calendar(row, default=None) if has_calendar else None
        source_calendar, source_earliest, source_latest = source.extra if source and source.extra else ("gregorian", None, None)
        date_text, earliest, latest = self.date(row, "date", calendar or source_calendar)
        if date_text is None:
            earliest, latest = source_earliest, source_latest
        place = self.ref(row, "place", self.places, "place") if row.has("place") and row.file == "relations.csv" else None
        if source is None:
            return None
        return {
            "source_id": source.id, "locus": row.get("locus"), "evidence": evidence, "date_text": date_text,
            "calendar": calendar, "earliest": earliest, "latest": latest, "place_id": place and place.id,
            "certainty": certainty, "identification": identification, "quote": row.get("quote"), "note": row.get("note"),
        }

    def _write_attestation(self, row: Row, target_column: str, target_id: int, fields: dict[str, Any]) -> None:
        key = self.key(row, required=False) if row.get("key") else None
        if row.get("key") and key is None:
            return
        if not self.writing:
            return
        fields = {**fields, target_column: target_id}
        for other in ("relation_id", "membership_id", "fact_id"):
            fields.setdefault(other, None)
        table = Attestation.__table__
        if key is not None and key in self.attestations_by_key:
            att_id, kind = self.attestations_by_key[key]
            if kind != target_column:
                self.problem(row, "key", f"{key!r} is the key of a {kind.removesuffix('_id')} attestation, not of a row of {row.file}")
                return
            columns = list(fields)
            self.pending.before_reading(table)
            current = self.session.execute(select(*[table.c[c] for c in columns]).where(table.c.id == att_id)).one()
            changes = {c: fields[c] for c, old in zip(columns, current) if old != fields[c]}
            if changes:
                self.session.execute(table.update().where(table.c.id == att_id).values(**changes, **_bumped(table)))
                self.count(row, "changed")
                # a keyless row later in this import must match the attestation as it is now
                old = self.signature_of.pop(att_id, None)
                if old is not None and self.attestation_signatures.get(old) == att_id:
                    del self.attestation_signatures[old]
                new = _signature_of_fields(fields, target_column)
                self.attestation_signatures[new] = att_id
                self.signature_of[att_id] = new
            else:
                self.count(row, "unchanged")
            return
        signature = _signature_of_fields(fields, target_column)
        match = self.attestation_signatures.get(signature)
        if match is not None and key is None:
            if match in self.deleted_ids:
                self.deleted_matches += 1
            self.count(row, "unchanged")
            return
        key = key or self._new_attestation_key(row)
        new_id = self.pending.insert(table, key=key, entered_at=self.now, **fields)
        self.attestations_by_key[key] = (new_id, target_column)
        self.attestation_signatures[signature] = new_id
        self.signature_of[new_id] = signature
        self.count(row, "added")

    def _new_attestation_key(self, row: Row) -> str:
        """A key from the row's own cells (keys, not database ids): the same row gets the same key in any database."""
        cells = sorted((name, value.strip()) for name, value in row.values.items() if name != "key" and value.strip())
        digest = hashlib.sha256(repr((row.file, cells)).encode()).hexdigest()
        key = f"att-{digest[:12]}"
        n = 1
        while key in self.attestations_by_key:
            n += 1
            key = f"att-{digest[:12]}-{n}"
        return key

    def relation(self, row: Row) -> None:
        if row.get("key"):
            self.key(row)
        person = self.ref(row, "person", self.persons, "person", required=True)
        other = self.ref(row, "other", self.persons, "person", required=True)
        kind = self.ref(row, "kind", self.kinds, "relation kind", required=True)
        fields = self._attestation_fields(row, has_calendar=True)
        if None in (person, other, kind, fields) or not self.writing:
            return
        a, b = person.id, other.id
        names = (row.get("person_as_written"), row.get("other_as_written"))
        if not kind.extra and a > b:  # undirected: the pair is stored sorted, names follow their person
            a, b, names = b, a, (names[1], names[0])
        relation_id = self.relation_ids.get((kind.id, a, b))
        if relation_id is None:
            relation_id = self.pending.insert(
                Relation.__table__, kind_id=kind.id, kind_directed=kind.extra, person_a_id=a, person_b_id=b
            )
            self.relation_ids[(kind.id, a, b)] = relation_id
            self.report.created["relations"] += 1
        fields.update(name_a_as_written=names[0], name_b_as_written=names[1])
        self._write_attestation(row, "relation_id", relation_id, fields)

    def membership(self, row: Row) -> None:
        if row.get("key"):
            self.key(row)
        person = self.ref(row, "person", self.persons, "person", required=True)
        group = self.ref(row, "group", self.groups, "group", required=True)
        fields = self._attestation_fields(row, has_calendar=False)
        calendar = fields and self._source_calendar(row)
        start = self.date(row, "start", calendar)
        end = self.date(row, "end", calendar)
        if None in (person, group, fields) or not self.writing:
            return
        role = row.get("role") or ""
        term = {"start_text": start[0], "start_earliest": start[1], "start_latest": start[2],
                "end_text": end[0], "end_earliest": end[1], "end_latest": end[2]}
        membership = self.memberships.get((person.id, group.id, role))
        table = Membership.__table__
        if membership is None:
            new_id = self.pending.insert(table, person_id=person.id, group_id=group.id, role=role, **term)
            membership = {"id": new_id, **term}
            self.memberships[(person.id, group.id, role)] = membership
            self.report.created["memberships"] += 1
            self.term_lines[new_id] = row.line
        else:
            # A term given on a row overrides the stored one; two rows of one import must agree.
            given = {c: v for c, v in term.items() if v is not None}
            first_line = self.term_lines.get(membership["id"])
            conflicts = [c for c, v in given.items() if membership[c] is not None and membership[c] != v]
            if conflicts and first_line is not None and first_line != row.line:
                column = conflicts[0].split("_")[0]
                self.problem(row, column, f"differs from the term given on line {first_line} for the same membership")
                return
            if given:
                self.term_lines.setdefault(membership["id"], row.line)
            if any(membership[c] != v for c, v in given.items()):
                self.pending.before_reading(table)
                self.session.execute(table.update().where(table.c.id == membership["id"]).values(**given, **_bumped(table)))
                membership.update(given)
                self._write_attestation(row, "membership_id", membership["id"], {**fields, "name_a_as_written": None, "name_b_as_written": None})
                self.count_as_changed(row)
                return
        fields.update(name_a_as_written=None, name_b_as_written=None)
        self._write_attestation(row, "membership_id", membership["id"], fields)

    def _source_calendar(self, row: Row) -> str:
        source = self.sources.get(row.get("source") or "")
        return source.extra[0] if source and source.extra else "gregorian"

    def fact(self, row: Row) -> None:
        if row.get("key"):
            self.key(row)
        person = self.ref(row, "person", self.persons, "person", required=True)
        kind = self.choice(row, "fact", FACT_KINDS, "other")
        place = self.ref(row, "place", self.places, "place")
        source_calendar = self._source_calendar(row)
        date_text, earliest, latest = self.date(row, "date", source_calendar)
        row_without_date = Row(row.file, row.line, {k: v for k, v in row.values.items() if k != "date"})
        fields = self._attestation_fields(row_without_date, has_calendar=False)
        if None in (person, fields) or not self.writing:
            return
        value = row.get("value") or ""
        identity = (person.id, kind, value, place and place.id, date_text)
        fact_id = self.fact_ids.get(identity)
        if fact_id is None:
            table = PersonFact.__table__
            fact_id = self.pending.insert(
                table, person_id=person.id, kind=kind, value=value, place_id=place and place.id,
                date_text=date_text, calendar=source_calendar, earliest=earliest, latest=latest,
            )
            self.fact_ids[identity] = fact_id
            self.report.created["facts"] += 1
        fields.update(name_a_as_written=None, name_b_as_written=None)
        self._write_attestation(row, "fact_id", fact_id, fields)

    def _refresh_undated_attestations(self) -> None:
        """Attestations follow their source: its date when they have none, its calendar when they name none."""
        for source_id, source_row in self.changed_sources.items():
            calendar, earliest, latest = self.session.execute(
                select(Source.calendar, Source.earliest, Source.latest).where(Source.id == source_id)
            ).one()
            self.session.execute(
                update(Attestation).where(Attestation.source_id == source_id, Attestation.date_text.is_(None))
                .values(earliest=earliest, latest=latest)
            )
            own_dates = self.session.execute(
                select(Attestation.id, Attestation.date_text)
                .where(Attestation.source_id == source_id, Attestation.date_text.is_not(None), Attestation.calendar.is_(None))
            ).all()
            for att_id, text in own_dates:
                try:
                    interval = interval_or_none(text, calendar, settings=self.date_settings)
                except DateError as error:
                    self.problem(source_row, "calendar", f"an attestation dated {text!r} cannot be read in this calendar: {error}")
                    continue
                self.session.execute(
                    update(Attestation).where(Attestation.id == att_id).values(earliest=interval.earliest, latest=interval.latest)
                )

def _bumped(table: Any) -> dict[str, Any]:
    """The version bump of a keyed update of a record that forms edit (persons, sources, groups, ...): an editor
    who opened the form before the import is then refused, not allowed to overwrite it silently."""
    return {"version": table.c.version + 1} if "version" in table.c else {}


def _target_of(att: Any) -> tuple[str, int]:
    if att.relation_id is not None:
        return "relation_id", att.relation_id
    if att.membership_id is not None:
        return "membership_id", att.membership_id
    return "fact_id", att.fact_id


SIGNATURE_FIELDS = ("source_id", "locus", "evidence", "date_text", "calendar", "place_id", "certainty",
                    "identification", "name_a_as_written", "name_b_as_written", "quote", "note")


def _digest(cells: tuple) -> bytes:
    """16 bytes that stand for an attestation's fields: a million of them fit in little memory."""
    return hashlib.blake2b(repr(cells).encode(), digest_size=16).digest()


def _signature(att: Any, target: tuple[str, int]) -> bytes:
    return _digest((*target, *(getattr(att, f) for f in SIGNATURE_FIELDS)))


def _signature_of_fields(fields: dict[str, Any], target_column: str) -> bytes:
    return _digest((target_column, fields[target_column], *(fields.get(f) for f in SIGNATURE_FIELDS)))


# --- exporting ---------------------------------------------------------------------------


def export_workbook(session: Session, folder: str | Path, *, leave_out: RestrictedPersons | None = None) -> dict[str, int]:
    """Write every workbook file of the dataset into ``folder``; return the row count per file.

    Soft-deleted attestations are left out: they stay in the database and its audit trail.
    With ``leave_out`` (the restricted persons, see ``app.store.privacy``), their persons rows and
    every relation, membership and fact row naming them are left out, and their keys and
    spellings in the remaining cells become "restricted" / "restricted person".
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    tables = _export_rows(session, leave_out or None)
    for name, rows in tables.items():
        with open(folder / name, "w", encoding="utf-8", newline="") as handle:
            _write_rows(handle, name, rows)
    return {name: len(rows) for name, rows in tables.items()}


def export_workbook_files(session: Session, *, leave_out: RestrictedPersons | None = None) -> dict[str, bytes]:
    """Return every workbook file of the dataset as ``{name: UTF-8 bytes}``, as :func:`export_workbook` writes them."""
    return workbook_files_of(export_workbook_rows(session, leave_out=leave_out))


def export_workbook_rows(session: Session, *, leave_out: RestrictedPersons | None = None,
                         files: Iterable[str] | None = None) -> dict[str, list[tuple]]:
    """Return the workbook files' rows (every file, or those named by ``files``) as tuples of cells in the
    file's column order (None: an empty cell)."""
    return _export_rows(session, leave_out or None, files)


def workbook_files_of(tables: dict[str, list[tuple]]) -> dict[str, bytes]:
    """Return the CSV files (UTF-8 bytes) of the rows :func:`export_workbook_rows` gives."""
    files = {}
    for name, rows in tables.items():
        buffer = io.StringIO(newline="")
        _write_rows(buffer, name, rows)
        files[name] = buffer.getvalue().encode("utf-8")
    return files


def _write_rows(handle: TextIO, name: str, rows: list[tuple]) -> None:
    # RFC 4180 line ends: with "\r\n" as the terminator the writer also quotes a cell holding a lone
    # carriage return, which it would otherwise leave bare and unreadable.
    writer = csv.writer(handle, lineterminator="\r\n")
    writer.writerow(FILES[name].columns)
    writer.writerows(rows)  # None is written as an empty cell


def _yes(value: bool) -> str:
    return "yes" if value else "no"


def _number(value: float | None) -> str | None:
    return None if value is None else repr(value)


_NAMING = {"persons.csv": ("key",), "relations.csv": ("person", "other"), "memberships.csv": ("person",),
           "facts.csv": ("person",)}
"""The columns that name a person by key, per file: a row naming a restricted person is left out."""


def _export_rows(s: Session, leave_out: RestrictedPersons | None = None,
                 files: Iterable[str] | None = None) -> dict[str, list[tuple]]:
    """Return every file's rows as tuples of cells in the file's column order (None for an empty cell)."""
    out = _all_export_rows(s, FILES.keys() if files is None else files)
    if leave_out is None:
        return out
    hidden = {key.lower() for key in leave_out.keys}
    hide = lambda value: leave_out.hide_in(value) if isinstance(value, str) else value  # noqa: E731
    kept = {}
    for name, rows in out.items():
        naming = [FILES[name].columns.index(c) for c in _NAMING.get(name, ())]
        kept[name] = [tuple(hide(v) for v in row) for row in rows
                      if not any((row[i] or "").lower() in hidden for i in naming)]
    return kept


def _texts(*columns: Any) -> list[Any]:
    """The columns with an absent value as the empty text, as the CSV file writes it."""
    return [func.coalesce(column, "") for column in columns]


def _all_export_rows(s: Session, files: Iterable[str]) -> dict[str, list[tuple]]:
    """The rows of the files named; the large files (sources and attestations) are joined and ordered in SQL."""
    wanted = [name for name in FILES if name in set(files)]
    place = dict(s.execute(select(Place.id, Place.key)).all())
    repository = dict(s.execute(select(Repository.id, Repository.key)).all())
    group = dict(s.execute(select(Group.id, Group.key)).all())
    kind = dict(s.execute(select(RelationKind.id, RelationKind.key)).all())
    made = {name: getattr(_FileRows, name.removesuffix(".csv")) for name in wanted}
    return {name: make(s, place=place, repository=repository, group=group, kind=kind) for name, make in made.items()}


class _FileRows:
    """One function per workbook file, giving its rows; the small tables' keys by id are passed to each."""

    @staticmethod
    def places(s: Session, **_: dict) -> list[tuple]:
        return [(p.key, p.name, p.variants, _number(p.latitude), _number(p.longitude), p.identifier)
                for p in s.execute(select(Place.__table__).order_by(Place.id))]

    @staticmethod
    def repositories(s: Session, *, place: dict, **_: dict) -> list[tuple]:
        return [(r.key, r.name, place.get(r.place_id), r.note)
                for r in s.execute(select(Repository.__table__).order_by(Repository.id))]

    @staticmethod
    def collections(s: Session, *, repository: dict, **_: dict) -> list[tuple]:
        return [(c.key, repository[c.repository_id], c.name, c.reference_code, c.note)
                for c in s.execute(select(Collection.__table__).order_by(Collection.id))]

    @staticmethod
    def persons(s: Session, **_: dict) -> list[tuple]:
        variants: dict[int, list[str]] = {}
        for person_id, name in s.execute(select(PersonName.person_id, PersonName.name).order_by(PersonName.id)):
            variants.setdefault(person_id, []).append(name)
        identifiers: dict[int, list[str]] = {}
        for person_id, scheme, value in s.execute(
            select(PersonIdentifier.person_id, PersonIdentifier.scheme, PersonIdentifier.value).order_by(PersonIdentifier.id)
        ):
            identifiers.setdefault(person_id, []).append(f"{scheme}:{value}")
        return [(p.key, p.name, p.sort_name, p.kind, _yes(p.unidentified), _yes(p.living),
                 "|".join(v for v in variants.get(p.id, []) if v != p.name), p.born_text, p.died_text, p.calendar,
                 "|".join(identifiers.get(p.id, [])), p.note)
                for p in s.execute(select(Person.__table__).order_by(Person.id))]

    @staticmethod
    def groups(s: Session, *, place: dict, group: dict, **_: dict) -> list[tuple]:
        return [(g.key, g.name, g.kind, place.get(g.place_id), group.get(g.parent_id), g.start_text, g.end_text, g.note)
                for g in s.execute(select(Group.__table__).order_by(Group.id))]

    @staticmethod
    def sources(s: Session, **_: dict) -> list[tuple]:
        place_from, place_to, original = aliased(Place), aliased(Place), aliased(Source)
        in_collection, in_repository = aliased(Collection), aliased(Repository)
        return _rows_of(s, select(*_texts(
            Source.key, in_repository.key, in_collection.key, Source.reference, Source.kind, Source.title, Source.author,
            Source.publisher, Source.year, Source.pages, Source.date_text, Source.calendar, place_from.key, place_to.key,
            Source.received_text, original.key, Source.url, Source.note))
            .outerjoin(in_collection, Source.collection_id == in_collection.id)
            .outerjoin(in_repository, in_collection.repository_id == in_repository.id)
            .outerjoin(place_from, Source.place_from_id == place_from.id)
            .outerjoin(place_to, Source.place_to_id == place_to.id)
            .outerjoin(original, Source.copy_of_id == original.id)
            .order_by(Source.id))

    @staticmethod
    def relation_kinds(s: Session, *, kind: dict, **_: dict) -> list[tuple]:
        return [(k.key, k.label, _yes(k.directed), k.role_a, k.role_b, kind.get(k.parent_id))
                for k in s.execute(select(RelationKind.__table__).order_by(RelationKind.id))]

    @staticmethod
    def relations(s: Session, **_: dict) -> list[tuple]:
        person_a, person_b, at_place = aliased(Person), aliased(Person), aliased(Place)
        return _rows_of(s, select(*_texts(
            Attestation.key, person_a.key, person_b.key, RelationKind.key, Source.key, Attestation.locus,
            Attestation.evidence, Attestation.date_text, Attestation.calendar, at_place.key, Attestation.certainty,
            Attestation.identification, Attestation.name_a_as_written, Attestation.name_b_as_written, Attestation.quote,
            Attestation.note))
            .join(Relation, Attestation.relation_id == Relation.id)
            .join(person_a, Relation.person_a_id == person_a.id).join(person_b, Relation.person_b_id == person_b.id)
            .join(RelationKind, Relation.kind_id == RelationKind.id).join(Source, Attestation.source_id == Source.id)
            .outerjoin(at_place, Attestation.place_id == at_place.id)
            .where(Attestation.deleted_at.is_(None)).order_by(Attestation.id))

    @staticmethod
    def memberships(s: Session, *, group: dict, **_: dict) -> list[tuple]:
        member = aliased(Person)
        return [(key, person, group[group_id], role or None, *rest) for key, person, group_id, role, *rest in s.execute(
            select(Attestation.key, member.key, Membership.group_id, Membership.role, Membership.start_text,
                   Membership.end_text, Source.key, Attestation.locus, Attestation.evidence, Attestation.date_text,
                   Attestation.certainty, Attestation.quote, Attestation.note)
            .join(Membership, Attestation.membership_id == Membership.id)
            .join(member, Membership.person_id == member.id).join(Source, Attestation.source_id == Source.id)
            .where(Attestation.deleted_at.is_(None)).order_by(Attestation.id)
        )]  # fmt: skip

    @staticmethod
    def facts(s: Session, *, place: dict, **_: dict) -> list[tuple]:
        subject = aliased(Person)
        return [(key, person, fact, value or None, place.get(place_id), *rest) for key, person, fact, value, place_id, *rest in s.execute(
            select(Attestation.key, subject.key, PersonFact.kind, PersonFact.value, PersonFact.place_id,
                   PersonFact.date_text, Source.key, Attestation.locus, Attestation.evidence, Attestation.certainty,
                   Attestation.quote, Attestation.note)
            .join(PersonFact, Attestation.fact_id == PersonFact.id)
            .join(subject, PersonFact.person_id == subject.id).join(Source, Attestation.source_id == Source.id)
            .where(Attestation.deleted_at.is_(None)).order_by(Attestation.id)
        )]  # fmt: skip


def _rows_of(s: Session, statement: Any) -> list[tuple]:
    """Plain tuples of a Core query (no ORM rows: the large files have 100,000s of them)."""
    return list(map(tuple, s.connection().execute(statement).all()))
