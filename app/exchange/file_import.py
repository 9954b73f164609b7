"""The command line's import of workbook files: the upload page's readers, mapping and duplicate search.

``attesta import`` takes a folder of CSV files, a .zip, an .xlsx workbook or CSV files, and
optionally a column mapping saved from the upload page (or written by ``--write-mapping``). As
on the page, a sheet whose name or columns would be misread as they stand (an edge list, a sheet
recognised only by its columns, columns named differently) is not imported until a mapping
settles it, and likely duplicate persons are shown before anything is written: the command stops
unless it is told to keep them apart or to link them as possibly the same. The import itself is
the page's: one transaction, all or nothing.
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

from app.db import Database
from app.exchange.duplicates import Suggestion, find_duplicates
from app.exchange.mapping import SheetMapping, needs_confirmation, suggest_mappings
from app.exchange.uploads import (
    READERS,
    SHEET_SUFFIXES,
    Decision,
    Reading,
    link_persons,
    person_candidates,
    relabel,
    sheet_person_keys,
    stored_person_keys,
)
from app.exchange.workbook import (
    FILES,
    ImportReport,
    Problem,
    Row,
    WorkbookError,
    import_tables,
    tables_from_sheets,
)

__all__ = ["DUPLICATE_CHOICES", "PreparedFiles", "import_prepared", "prepare_files"]

DUPLICATE_CHOICES = ("stop", "apart", "link")
"""What to do with likely duplicates: stop before writing, import keeping them apart, import linking them."""


@dataclass
class PreparedFiles:
    """Workbook files read and mapped, ready to import, with what the user should look at first."""

    name: str
    sha256: str
    mappings: list[SheetMapping]
    unsettled: list[SheetMapping] = field(default_factory=list)  # sheets a mapping must settle first
    tables: dict[str, Sequence[Row]] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    labels: dict[str, str] = field(default_factory=dict)
    duplicates: list[Suggestion] = field(default_factory=list)


def _files_of(paths: Sequence[Path]) -> tuple[list[Path], list[Problem]]:
    """The files to read: a folder stands for its CSV files; other kinds of file are problems."""
    files, problems = [], []
    for path in paths:
        if path.is_dir():
            files += sorted(p for p in path.iterdir() if p.is_file() and p.suffix.lower() == ".csv")
        elif not path.exists():
            problems.append(Problem(str(path), 0, "(path)", "no such file or folder"))
        elif path.suffix.lower() in SHEET_SUFFIXES:
            files.append(path)
        elif path.suffix.lower() in (".xml", ".graphml"):
            command = "import-tei" if path.suffix.lower() == ".xml" else "import-graphml"
            problems.append(Problem(str(path), 0, "(path)", f"not a workbook file; import it with `attesta {command}`"))
        else:
            problems.append(Problem(str(path), 0, "(path)", "not a folder of CSV files, a .zip, an .xlsx or a .csv file"))
    names = [p.name for p in files]
    for name in sorted({n for n in names if names.count(n) > 1}):
        problems.append(Problem(name, 0, "(path)", "two files of this name were given; give one"))
    return files, problems


def _digest(files: list[Path]) -> str:
    digest = hashlib.sha256()
    for path in sorted(files, key=lambda p: p.name):
        digest.update(path.name.encode() + b"\0" + path.read_bytes() + b"\0")
    return digest.hexdigest()


def prepare_files(paths: Sequence[Path], database: Database, *, size_limit: int,
                  mapping: Path | None = None) -> PreparedFiles:
    """Read, map and check the workbook files; find likely duplicates. WorkbookError on any problem.

    Without ``mapping``, sheets that :func:`needs_confirmation` are returned as ``unsettled`` and
    nothing else is done; with it, the mapping's sheets are read as it says and the others by
    their names (a sheet that is no workbook file is left out with a warning).
    """
    files, problems = _files_of(paths)
    if problems:
        raise WorkbookError(problems)
    total = sum(p.stat().st_size for p in files) + (mapping.stat().st_size if mapping and mapping.is_file() else 0)
    if total > size_limit:
        raise WorkbookError([Problem(", ".join(str(p) for p in paths), 0, "(size)",
                                     f"{total / 1e6:.1f} MB is over the import size limit of {size_limit / 1e6:.0f} MB "
                                     "(setting ATTESTA_UPLOAD_LIMIT_MB)")])
    reading = Reading()
    for path in files:
        READERS[path.suffix.lower()](path, size_limit, reading)
    if mapping is not None:
        if not mapping.is_file():
            raise WorkbookError([Problem(str(mapping), 0, "(mapping)", "no such file")])
        READERS[".json"](mapping, size_limit, reading)
    if reading.problems:
        raise WorkbookError(reading.problems)
    name = ", ".join(p.name for p in paths)
    mappings = suggest_mappings(reading.sheets, stored_person_keys(database) | sheet_person_keys(reading), reading.plans)
    prepared = PreparedFiles(name=name, sha256=_digest(files), mappings=mappings)
    if mapping is None:
        prepared.unsettled = [m for m in mappings if needs_confirmation(m)]
        if prepared.unsettled:
            return prepared
    tables, warnings = tables_from_sheets(reading.sheets, reading.problems, reading.plans or None)
    labels = {file: rows.sheet.label for file, rows in tables.items()}
    if reading.problems:
        raise WorkbookError(relabel(reading.problems, labels))
    if not tables:
        raise WorkbookError([Problem(name, 0, "(workbook)", f"no workbook files found; expected some of: {', '.join(FILES)}")])
    new, stored = person_candidates(tables, database)
    prepared.tables, prepared.warnings, prepared.labels = tables, reading.warnings + warnings, labels
    prepared.duplicates = find_duplicates(new, stored)
    return prepared


def import_prepared(database: Database, prepared: PreparedFiles, *, duplicates: str, actor: str = "cli",
                    progress=None) -> ImportReport:  # noqa: ANN001
    """Import prepared files in one transaction, keeping likely duplicates apart or linking each pair."""
    if duplicates not in ("apart", "link"):
        raise ValueError(f"duplicates={duplicates!r}: import only with apart or link")
    decisions = [Decision(d.new_key, d.other_key, "link") for d in prepared.duplicates] if duplicates == "link" else []
    try:
        return import_tables(database, prepared.tables, name=prepared.name, sha256=prepared.sha256,
                             warnings=prepared.warnings, actor=actor, progress=progress,
                             after=link_persons(decisions, actor=actor) if decisions else None)
    except WorkbookError as error:
        raise WorkbookError(relabel(error.problems, prepared.labels), error.total) from error
