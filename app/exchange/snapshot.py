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
import tempfile
import zipfile
from dataclasses import dataclass
from datetime import UTC, datetime
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from app.exchange.workbook import FILES, export_workbook
from app.models import Attestation, Person, Relation, Source
from app.network.slice import Slice
from app.store.measure_results import list_stored_results
from app.store.privacy import RestrictedPersons
from app.store.summary import get_data_version

__all__ = ["DatasetVersion", "dataset_version", "snapshot_bytes"]

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
    with tempfile.TemporaryDirectory(prefix="attesta-snapshot-") as folder:
        export_workbook(session, folder, leave_out=leave_out)
        return {name: (Path(folder) / name).read_bytes() for name in FILES if (Path(folder) / name).exists()}


def _canonical(files: dict[str, bytes]) -> bytes:
    tables = {}
    for name in sorted(files):
        rows = list(csv.reader(io.StringIO(files[name].decode("utf-8"))))
        tables[name] = {"columns": rows[0] if rows else [], "rows": sorted(rows[1:])}
    return json.dumps(tables, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode("utf-8")


def dataset_version(session: Session, files: dict[str, bytes] | None = None) -> DatasetVersion:
    """Return the content hash of the dataset and its counts."""
    files = files if files is not None else _workbook_files(session)
    alive = Attestation.deleted_at.is_(None)
    return DatasetVersion(
        sha256=hashlib.sha256(_canonical(files)).hexdigest(),
        persons=session.scalar(select(func.count()).select_from(Person)) or 0,
        sources=session.scalar(select(func.count()).select_from(Source)) or 0,
        relations=session.scalar(select(func.count()).select_from(Relation)) or 0,
        attestations=session.scalar(select(func.count()).select_from(Attestation).where(alive)) or 0,
        data_version=get_data_version(session=session),
    )


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
