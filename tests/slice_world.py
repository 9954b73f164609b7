"""A small network to check ego networks and slices on paper, built through the workbook import.

Persons: E (the ego), A, B, C (alters), D, F (two steps away), G (unidentified), H (a corporate
body), X (a name that is markup), Z (known only from a fact), W (no evidence at all).
Archives: rep-north with col-n1 and col-n2, rep-south with col-s1; one printed edition (ed1).

    row  tie                  kind        source (collection, date)          evidence  certainty
    a01  E -> A               letter      s1  (n1, 1700-01-10)                original  certain
    a02  A -> E               letter      s2  (n1, 1701-03-01)                original  certain
    a03  A -> E               letter      s2c (s1, copy of s2)                copy      certain
    a04  E -> B               letter      s3  (s1, 1699/1701)                 original  probable
    a05  E -- C               sibling     s4  (n2, undated)                   original  certain
    a06  A -- B               business    s5  (n2, 1702)                      original  possible
    a07  A -- B               business    s6  (s1, 1703)                      original  certain
    a08  B -- D               friendship  s6  (s1, 1703)                      original  certain
    a09  C -> F               parent      s7  (n1, 1704)                      original  certain
    a10  D -- F               spouse      s11 (s1, 1704)                      original  certain
    a11  E -> G               letter      s8  (n1, 1706)                      original  certain
    a12  E -> H               letter      s9  (n1, 1707)                      draft     certain
    a13  E -> E               letter      s10 (n1, 1700-06-01)                original  certain
    a14  E -- A               friendship  ed1 (printed, 1710)                 edition   certain
    a15  E -- X               business    s1  (n1, 1700-01-10)                original  certain
    fact Z occupation                     s1

Ego network of E in the default slice (drafts left out), radius 1: E, A, B, C, G, X and nine
ties: E->A, A->E and E--A (friendship), E->B, E--C, E->G, E--X, A--B and the loop E->E.
Radius 2 adds D (through B), F (through C) and the ties B--D, C->F and D--F.
"""

from __future__ import annotations

from pathlib import Path

from app.db import Database
from app.exchange.workbook import import_workbook
from tests.workbooks import write_workbook

XSS_NAME = '<script>alert(1)</script> & "Co"'
NAMES = {
    "E": "Elias Egmont", "A": "Anna Alting", "B": "Bruno Brede", "C": "Clara Egmont", "D": "Dirk Dael",
    "F": "Frida Egmont", "G": "the widow at the gate", "H": "Council of Hamm", "X": XSS_NAME, "Z": "Zeno Zand",
    "W": "Wim Weyl",
}  # fmt: skip

ROWS = [  # key, person, other, kind, source, evidence, certainty
    ("a01", "E", "A", "letter", "s1", "original", "certain"),
    ("a02", "A", "E", "letter", "s2", "original", "certain"),
    ("a03", "A", "E", "letter", "s2c", "copy", "certain"),
    ("a04", "E", "B", "letter", "s3", "original", "probable"),
    ("a05", "E", "C", "sibling", "s4", "original", "certain"),
    ("a06", "A", "B", "business", "s5", "original", "possible"),
    ("a07", "A", "B", "business", "s6", "original", "certain"),
    ("a08", "B", "D", "friendship", "s6", "original", "certain"),
    ("a09", "C", "F", "parent", "s7", "original", "certain"),
    ("a10", "D", "F", "spouse", "s11", "original", "certain"),
    ("a11", "E", "G", "letter", "s8", "original", "certain"),
    ("a12", "E", "H", "letter", "s9", "draft", "certain"),
    ("a13", "E", "E", "letter", "s10", "original", "certain"),
    ("a14", "E", "A", "friendship", "ed1", "edition", "certain"),
    ("a15", "E", "X", "business", "s1", "original", "certain"),
]
SOURCES = {  # key: (repository, collection, date, copy_of)
    "s1": ("rep-north", "col-n1", "1700-01-10", ""),
    "s2": ("rep-north", "col-n1", "1701-03-01", ""),
    "s2c": ("rep-south", "col-s1", "1701-03-01", "s2"),
    "s3": ("rep-south", "col-s1", "1699/1701", ""),
    "s4": ("rep-north", "col-n2", "", ""),
    "s5": ("rep-north", "col-n2", "1702", ""),
    "s6": ("rep-south", "col-s1", "1703", ""),
    "s7": ("rep-north", "col-n1", "1704", ""),
    "s8": ("rep-north", "col-n1", "1706", ""),
    "s9": ("rep-north", "col-n1", "1707", ""),
    "s10": ("rep-north", "col-n1", "1700-06-01", ""),
    "s11": ("rep-south", "col-s1", "1704", ""),
}


def key(letter: str) -> str:
    """Return the person key of a letter of the table above (E -> p-e)."""
    return f"p-{letter.lower()}"


def slice_world() -> dict[str, list[dict[str, str]]]:
    """Return the workbook tables of the module docstring."""
    persons = [{"key": key(letter), "name": name} for letter, name in NAMES.items()]
    for row in persons:
        if row["key"] == key("G"):
            row["unidentified"] = "yes"
        if row["key"] == key("H"):
            row["kind"] = "corporate"
    return {
        "repositories.csv": [{"key": "rep-north", "name": "North Archive"}, {"key": "rep-south", "name": "South Archive"}],
        "collections.csv": [
            {"key": "col-n1", "repository": "rep-north", "name": "Letters in"},
            {"key": "col-n2", "repository": "rep-north", "name": "Family papers"},
            {"key": "col-s1", "repository": "rep-south", "name": "Letter books"},
        ],
        "persons.csv": persons,
        "sources.csv": [
            {"key": k, "repository": r, "collection": c, "date": d, "copy_of": copy, "kind": "letter"}
            for k, (r, c, d, copy) in SOURCES.items()
        ] + [{"key": "ed1", "kind": "edition", "title": "Letters of the Egmonts", "year": "1890", "date": "1710"}],
        "relations.csv": [
            {"key": k, "person": key(p), "other": key(o), "kind": kind, "source": s, "evidence": e, "certainty": c}
            for k, p, o, kind, s, e, c in ROWS
        ],
        "facts.csv": [{"key": "f1", "person": key("Z"), "fact": "occupation", "value": "clerk", "source": "s1"}],
    }


def import_world(database: Database, folder: Path, tables: dict[str, list[dict[str, str]]]) -> None:
    """Write ``tables`` as a workbook in ``folder`` and import it into ``database``."""
    import_workbook(database, write_workbook(folder, tables), size_limit=10**9)
