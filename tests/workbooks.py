"""Small workbooks written from Python dicts, for import tests."""

from __future__ import annotations

import csv
from pathlib import Path

from app.exchange.workbook import FILES


def write_workbook(folder: Path, tables: dict[str, list[dict[str, str]]]) -> Path:
    """Write each table as a CSV file with the workbook's full header; return the folder."""
    folder.mkdir(parents=True, exist_ok=True)
    for name, rows in tables.items():
        with open(folder / name, "w", encoding="utf-8", newline="") as handle:
            writer = csv.DictWriter(handle, fieldnames=FILES[name].columns, lineterminator="\n")
            writer.writeheader()
            for row in rows:
                writer.writerow(row)
    return folder


def small_world() -> dict[str, list[dict[str, str]]]:
    """Three correspondents, one register, a society: enough to exercise every file."""
    return {
        "places.csv": [
            {"key": "pl-harwick", "name": "Harwick", "variants": "Harwyck|Harwic", "latitude": "51.5", "longitude": "7.25"},
            {"key": "pl-ostmere", "name": "Ostmere"},
        ],
        "repositories.csv": [{"key": "rep-harwick", "name": "Harwick Town Archive", "place": "pl-harwick"}],
        "collections.csv": [
            {"key": "col-vell", "repository": "rep-harwick", "name": "Vell family papers", "reference_code": "VFP"},
        ],
        "persons.csv": [
            {"key": "p-anna", "name": "Anna Vell", "variants": "Anne Vel|Änna Vell", "born": "1680~", "died": "1731"},
            {"key": "p-jost", "name": "Jost Brenner", "kind": "individual", "identifiers": "local:JB1"},
            {"key": "p-council", "name": "Council of Ostmere", "kind": "corporate"},
            {"key": "p-widow", "name": "the widow of the printer", "unidentified": "yes"},
        ],
        "groups.csv": [
            {"key": "g-society", "name": "Harwick Society of Letters", "kind": "society", "place": "pl-harwick", "start": "1701"},
            {"key": "g-committee", "name": "Committee of the Society", "parent": "g-society"},
        ],
        "sources.csv": [
            {"key": "s-1", "repository": "rep-harwick", "collection": "col-vell", "reference": "VFP 1/1", "kind": "letter",
             "date": "1703-05-12", "place_from": "pl-harwick", "place_to": "pl-ostmere"},
            {"key": "s-2", "repository": "rep-harwick", "collection": "col-vell", "reference": "VFP 1/2", "kind": "letter",
             "date": "1703-06-01", "calendar": "julian", "copy_of": ""},
            {"key": "s-2c", "repository": "rep-harwick", "collection": "col-vell", "reference": "VFP 9/1 fol. 3", "kind": "letterbook",
             "date": "1703-06-01", "calendar": "julian", "copy_of": "s-2"},
            {"key": "s-ed", "kind": "edition", "title": "Letters of the Vell family", "author": "M. Orrin", "publisher": "Harwick Press",
             "year": "1888", "pages": "12-14", "date": "1704?"},
        ],
        "relations.csv": [
            {"key": "r-1", "person": "p-anna", "other": "p-jost", "kind": "letter", "source": "s-1", "locus": "fol. 1r",
             "certainty": "certain", "person_as_written": "Anne Vel", "quote": "my dear & honoured friend"},
            {"key": "r-2", "person": "p-jost", "other": "p-anna", "kind": "letter", "source": "s-2", "evidence": "original"},
            {"key": "r-3", "person": "p-jost", "other": "p-anna", "kind": "letter", "source": "s-2c", "evidence": "copy"},
            {"person": "p-council", "other": "p-anna", "kind": "letter", "source": "s-ed", "evidence": "edition", "certainty": "probable"},
            {"person": "p-jost", "other": "p-anna", "kind": "sibling", "source": "s-ed", "certainty": ""},
            {"person": "p-anna", "other": "p-jost", "kind": "sibling", "source": "s-1", "locus": "fol. 1v", "certainty": "possible"},
            {"person": "p-widow", "other": "p-widow", "kind": "letter", "source": "s-ed", "evidence": "draft"},
        ],
        "memberships.csv": [
            {"key": "m-1", "person": "p-anna", "group": "g-society", "role": "member", "start": "1702", "end": "1710", "source": "s-ed"},
            {"key": "m-2", "person": "p-jost", "group": "g-committee", "role": "secretary", "source": "s-1", "evidence": "register"},
        ],
        "facts.csv": [
            {"key": "f-1", "person": "p-jost", "fact": "occupation", "value": "printer", "place": "pl-ostmere", "date": "1703",
             "source": "s-1", "locus": "fol. 1r"},
        ],
    }
