"""A citable snapshot: the full workbook, a slice, its stored measures, a README and a content hash in one .zip.

The hash (:func:`dataset_hash`) is SHA-256 over a canonical serialisation of the workbook: every
file's rows as lists of cells in the workbook's column order, rows sorted, as JSON with sorted
keys and no whitespace. It holds no timestamp, no database id and no dict order, so the same data
gives the same hash in any database on any machine, and changing one attestation changes it.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import threading
import zipfile
from dataclasses import dataclass
from datetime import UTC, datetime
from importlib.metadata import PackageNotFoundError, version

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from app.exchange.workbook import FILES, export_workbook_files, export_workbook_rows
from app.models import Attestation, Person, Relation, Source
from app.network.slice import Slice
from app.store.audit import ChangeNote, latest_entry_id, list_changes_after
from app.store.measure_results import list_stored_results
from app.store.privacy import RestrictedPersons
from app.store.summary import get_data_version

__all__ = ["DatasetVersion", "DatasetVersionKeeper", "dataset_version", "files_touched", "snapshot_bytes"]

_FIXED_TIME = (1980, 1, 1, 0, 0, 0)  # zip entries carry no clock time: same data, same members


@dataclass(frozen=True)
class DatasetVersion:
    """What a paper cites: the content hash and the counts of the data it was taken from."""

    sha256: str
    """SHA-256 of the canonical workbook."""
    persons: int
    sources: int
    relations: int
    attestations: int
    data_version: int
    """The database's own counter of writes (not part of the hash)."""


def _workbook_files(session: Session, *, leave_out: RestrictedPersons | None = None) -> dict[str, bytes]:
    return {name: data for name, data in export_workbook_files(session, leave_out=leave_out).items() if name in FILES}


def _canonical(files: dict[str, bytes]) -> bytes:
    tables = {}
    for name in sorted(files):
        rows = list(csv.reader(io.StringIO(files[name].decode("utf-8"))))
        tables[name] = {"columns": rows[0] if rows else [], "rows": sorted(rows[1:])}
    return json.dumps(tables, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode("utf-8")


def _fragment(name: str, rows: list[tuple]) -> str:
    """Return the canonical JSON of one file's rows, as it stands inside :func:`_canonical`'s serialisation.

    The workbook's CSV writer and reader give every cell back as it was (tested), so the rows are
    serialised straight from the cells, without writing the file and reading it back.
    """
    cells = [row if None not in row else tuple("" if v is None else v for v in row) for row in rows]  # text or None
    table = {"columns": list(FILES[name].columns), "rows": sorted(cells)}
    return json.dumps(table, sort_keys=True, separators=(",", ":"), ensure_ascii=False)


def _joined(fragments: dict[str, str]) -> bytes:
    """The whole serialisation from the files' fragments: what json.dumps writes for the dict of them, sorted keys."""
    parts = (json.dumps(name, ensure_ascii=False) + ":" + fragments[name] for name in sorted(fragments))
    return ("{" + ",".join(parts) + "}").encode("utf-8")


def _counted(session: Session, sha256: str) -> DatasetVersion:
    alive = Attestation.deleted_at.is_(None)
    return DatasetVersion(
        sha256=sha256,
        persons=session.scalar(select(func.count()).select_from(Person)) or 0,
        sources=session.scalar(select(func.count()).select_from(Source)) or 0,
        relations=session.scalar(select(func.count()).select_from(Relation)) or 0,
        attestations=session.scalar(select(func.count()).select_from(Attestation).where(alive)) or 0,
        data_version=get_data_version(session=session),
    )


def dataset_version(session: Session, files: dict[str, bytes] | None = None) -> DatasetVersion:
    """Return the content hash of the dataset (of ``files``, the workbook's, when given) and its counts."""
    if files is not None:
        return _counted(session, hashlib.sha256(_canonical(files)).hexdigest())
    fragments = {name: _fragment(name, rows) for name, rows in export_workbook_rows(session).items()}
    return _counted(session, hashlib.sha256(_joined(fragments)).hexdigest())


PERSON_FILES = frozenset({"persons.csv", "relations.csv", "memberships.csv", "facts.csv"})
EVIDENCE_FILES = frozenset({"relations.csv", "memberships.csv", "facts.csv"})
_TOUCHED = {  # table of an audit entry -> the files it can change while the record keeps its key
    "person": {"persons.csv"}, "source": {"sources.csv"}, "repository": {"repositories.csv"},
    "collection": {"collections.csv"}, "group": {"groups.csv"}, "attestation": EVIDENCE_FILES,
    "relation": {"relations.csv"}, "membership": {"memberships.csv"},
}
_OUTSIDE = frozenset({"person_link", "user", "audit_entry"})
"""Tables the workbook does not hold: their entries (links, accounts, redactions) change no file."""
_EDITS = frozenset({"create", "update", "delete", "restore", "merge", "split"})
_NAMED_BY = {  # table -> the files that name its records by key (a changed key changes them)
    "person": PERSON_FILES, "source": {"sources.csv"} | EVIDENCE_FILES, "group": {"groups.csv", "memberships.csv"},
    "repository": {"repositories.csv", "collections.csv", "sources.csv"}, "collection": {"collections.csv", "sources.csv"},
}


def files_touched(changes: list[ChangeNote]) -> set[str] | None:
    """Return the workbook files these writes may have changed (None: any of them, e.g. after an import).

    An edit changes its record's own file; a merge or split, or a record whose key changed, also
    changes the files naming it; an action or table not listed here counts as changing everything.
    """
    touched: set[str] = set()
    for change in changes:
        if change.table in _OUTSIDE:
            continue
        if change.table not in _TOUCHED or change.action not in _EDITS or (
                change.action in ("merge", "split") and change.table != "person"):
            return None
        touched |= _TOUCHED[change.table]
        if change.action in ("merge", "split") or (change.key_before is not None and change.key_before != change.key_after):
            touched |= _NAMED_BY.get(change.table, set())
    return touched


class DatasetVersionKeeper:
    """The dataset version kept between writes, brought up to date file by file.

    It keeps each workbook file's canonical fragment and the newest audit entry it has seen; after
    writes it reads the entries since then and serialises again only the files they may have
    changed (:func:`files_touched`), so an edit of a person hashes the persons again, not the
    200,000 letters. The hash is the one :func:`dataset_version` gives, by the same definition.
    When the entries do not account for every step of the data version, everything is read again.
    """

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._fragments: dict[str, str] = {}
        self._entry_id = 0
        self._version: DatasetVersion | None = None
        self.files_read: list[str] = []
        """The files serialised at the last update (for tests and benchmarks)."""

    def get(self, session: Session) -> DatasetVersion:
        """Return the dataset version of the data ``session`` sees (one read transaction)."""
        current = get_data_version(session=session)
        with self._lock:
            kept = self._version
            if kept is not None and kept.data_version == current:
                self.files_read = []
                return kept
            changes = list_changes_after(session=session, entry_id=self._entry_id) if kept is not None else []
            files = None if kept is None or len(changes) != current - kept.data_version else files_touched(changes)
            wanted = list(FILES) if files is None else sorted(files)
            for name, rows in export_workbook_rows(session, files=wanted).items():
                self._fragments[name] = _fragment(name, rows)
            self.files_read = wanted
            self._entry_id = changes[-1].entry_id if changes else latest_entry_id(session=session)
            self._version = _counted(session, hashlib.sha256(_joined(self._fragments)).hexdigest())
            return self._version


def snapshot_bytes(session: Session, slice_: Slice, *, dataset_name: str,
                   leave_out: RestrictedPersons | None = None) -> tuple[bytes, DatasetVersion]:
    """Return the snapshot .zip and the dataset version it holds.

    With ``leave_out`` (the restricted persons) the workbook leaves them out, the stored measures
    (computed with them) are not included, and the hash is that of the files in the snapshot.
    """
    from app.network.results import slice_key

    files = _workbook_files(session, leave_out=leave_out)
    cited = dataset_version(session, files)
    query = slice_key(slice_)
    stored = [] if leave_out else list_stored_results(session=session, slice_key=query, visibility="all")
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
        def add(name: str, data: bytes | str) -> None:
            archive.writestr(zipfile.ZipInfo(f"snapshot/{name}", _FIXED_TIME), data)

        for name, data in files.items():
            add(f"workbook/{name}", data)
        add("slice.json", json.dumps({"query": query, "description": slice_.describe(),
                                      "parameters": slice_.to_query()}, indent=2, ensure_ascii=False))
        for result in stored:
            label = result.measure + ("" if result.options == "{}" else "-" + hashlib.sha256(result.options.encode()).hexdigest()[:8])
            add(f"measures/{label}.json", json.dumps({
                "measure": result.measure, "options": json.loads(result.options), "data_version": result.data_version,
                "current": result.data_version == cited.data_version, "result": result.payload}, indent=2, ensure_ascii=False))
            if isinstance(result.payload.get("rows"), list) and result.payload["rows"]:
                out = io.StringIO()
                writer = csv.DictWriter(out, fieldnames=list(result.payload["rows"][0]), lineterminator="\r\n")
                writer.writeheader()
                writer.writerows(result.payload["rows"])
                add(f"measures/{label}.csv", out.getvalue())
        add("SHA256", f"{cited.sha256}  (SHA-256 of the canonical workbook; see README.txt)\n")
        add("README.txt", _readme(dataset_name, cited, slice_, query, stored, left_out=len(leave_out.ids) if leave_out else 0))
    return buffer.getvalue(), cited


def _readme(dataset_name: str, cited: DatasetVersion, slice_: Slice, query: str, stored: list, *, left_out: int = 0) -> str:
    try:
        software = version("attesta")
    except PackageNotFoundError:  # pragma: no cover - run from a source tree that is not installed
        software = "unknown"
    measures = "\n".join(f"  - {r.measure} {r.options} (data version {r.data_version}"
                         f"{'' if r.data_version == cited.data_version else ', older than the data'})" for r in stored)
    privacy = "" if not left_out else (
        f"\nLeft out: {left_out} restricted persons (recorded as living, or born too recently), with every relation,\n"
        "membership and fact naming them; their names elsewhere read \"restricted person\". The hash and the\n"
        "workbook are those of this reduced dataset; the stored measures are not included.\n")
    return f"""{dataset_name}: a snapshot made by Attesta {software}

Made on: {datetime.now(UTC).strftime('%Y-%m-%d %H:%M')} UTC
Dataset version (cite this): {cited.sha256}
Counts: {cited.persons} persons, {cited.sources} sources, {cited.relations} relations, {cited.attestations} attestations
Database write counter: {cited.data_version}
{privacy}
Slice: {slice_.describe()}
Slice query string: {query or '(the default slice)'}

Contents:
  workbook/   the whole dataset as a workbook (CSV files); `attesta import` reads it back
  slice.json  the slice the measures were computed on
  measures/   every measure result stored for this slice (JSON, and CSV for ranked tables)
{measures or '  (no measure had been computed for this slice)'}

How the hash is made: SHA-256 over the workbook's files, each as its header and its rows
sorted, serialised as JSON with sorted keys and no spaces. The same data gives the same hash
on any machine; a change of one attestation changes it. The date above is not part of it.
"""
