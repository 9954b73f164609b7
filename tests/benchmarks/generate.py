"""Generated networks for the benchmarks: many persons, hubs and a long tail, written in bulk.

The data is random but reproducible (fixed seed). It is written straight into a migrated
database with bulk inserts, so building 20,000 persons and 200,000 attestations takes seconds;
the import path has its own benchmark.
"""

from __future__ import annotations

import itertools
import random
from datetime import date, timedelta
from pathlib import Path

from sqlalchemy import insert

from app.db import Database, upgrade
from app.models import Attestation, Collection, Person, PersonName, Relation, Repository, Source
from app.names import fold

FIRST = ["Anna", "Jost", "Mette", "Hinrik", "Greet", "Lambert", "Tilde", "Evert", "Aleid", "Gerrit", "Wobbe", "Ide"]
LAST = ["Vell", "Brenner", "Marteau", "Oskamp", "Roderink", "Tessel", "Hulsberg", "Quast", "Wendering", "Abeln"]
CERTAINTY = ["certain"] * 7 + ["probable"] * 2 + ["possible"]
EVIDENCE = ["original"] * 8 + ["copy", "mention", "register", "draft"]


def generate(path: Path, *, persons: int, attestations: int, seed: int = 1703) -> Database:
    """Write a database at ``path`` with ``persons`` persons and about ``attestations`` letter attestations."""
    rng = random.Random(seed)
    path.unlink(missing_ok=True)
    database = Database(f"sqlite:///{path}")
    upgrade(database)
    with database.write() as session:
        letter_kind, friendship_kind = 1, 8  # seeded by the first migration: letter (directed), friendship
        session.execute(insert(Repository), [{"id": i, "key": f"rep{i}", "name": f"Archive {i}"} for i in range(1, 11)])
        session.execute(insert(Collection), [
            {"id": i, "key": f"col{i}", "repository_id": 1 + i % 10, "name": f"Papers {i}"} for i in range(1, 101)
        ])
        people = []
        names = []
        for i in range(1, persons + 1):
            name = f"{rng.choice(FIRST)} {rng.choice(LAST)} {i}"
            people.append({"id": i, "key": f"p{i}", "name": name, "kind": "individual", "unidentified": i % 97 == 0,
                           "living": False, "calendar": "gregorian"})
            names.append({"person_id": i, "name": name, "normalized": fold(name)})
        session.execute(insert(Person), people)
        session.execute(insert(PersonName), names)

        # Preferential attachment: a few hubs write and receive a large share of the letters.
        cumulative = list(itertools.accumulate(1.0 / (rank ** 0.8) for rank in range(1, persons + 1)))
        order = list(range(1, persons + 1))
        rng.shuffle(order)
        relation_ids: dict[tuple[int, int, int], int] = {}
        relations, sources, rows = [], [], []
        start = date(1680, 1, 1)
        for n in range(1, attestations + 1):
            a, b = rng.choices(order, cum_weights=cumulative, k=2)
            kind = letter_kind if n % 10 else friendship_kind
            if kind == friendship_kind and a > b:
                a, b = b, a
            key = (kind, a, b)
            if key not in relation_ids:
                relation_ids[key] = len(relation_ids) + 1
                relations.append({"id": relation_ids[key], "kind_id": kind, "kind_directed": kind == letter_kind,
                                  "person_a_id": a, "person_b_id": b})
            day = start + timedelta(days=rng.randrange(60 * 365))
            sources.append({"id": n, "key": f"s{n}", "collection_id": 1 + rng.randrange(100), "reference": f"Ms {n}",
                            "kind": "letter", "date_text": day.isoformat(), "calendar": "gregorian",
                            "earliest": day, "latest": day})
            rows.append({"key": f"a{n}", "relation_id": relation_ids[key], "source_id": n, "evidence": rng.choice(EVIDENCE),
                         "certainty": rng.choice(CERTAINTY), "identification": "certain", "earliest": day, "latest": day})
        session.execute(insert(Relation), relations)
        session.execute(insert(Source), sources)
        session.execute(insert(Attestation), rows)
    return database


def generate_workbook(folder: Path, *, persons: int, attestations: int, seed: int = 1703) -> Path:
    """Write the network of :func:`generate` (same seed, same draws) as a workbook folder of CSV files.

    Persons, repositories, collections, one source per letter and one relations.csv row per
    attestation, keyed as in the generated database, so the import benchmark reads the scale dataset.
    """
    import csv

    rng = random.Random(seed)
    folder.mkdir(parents=True, exist_ok=True)

    def write(name: str, header: list[str], rows) -> None:  # noqa: ANN001
        with open(folder / name, "w", encoding="utf-8", newline="") as handle:
            writer = csv.writer(handle, lineterminator="\n")
            writer.writerow(header)
            writer.writerows(rows)

    write("repositories.csv", ["key", "name"], ([f"rep{i}", f"Archive {i}"] for i in range(1, 11)))
    write("collections.csv", ["key", "repository", "name"],
          ([f"col{i}", f"rep{1 + i % 10}", f"Papers {i}"] for i in range(1, 101)))
    people = []
    for i in range(1, persons + 1):
        name = f"{rng.choice(FIRST)} {rng.choice(LAST)} {i}"
        people.append([f"p{i}", name, "yes" if i % 97 == 0 else "no"])
    write("persons.csv", ["key", "name", "unidentified"], people)
    cumulative = list(itertools.accumulate(1.0 / (rank ** 0.8) for rank in range(1, persons + 1)))
    order = list(range(1, persons + 1))
    rng.shuffle(order)
    sources, rows = [], []
    start = date(1680, 1, 1)
    for n in range(1, attestations + 1):
        a, b = rng.choices(order, cum_weights=cumulative, k=2)
        kind = "letter" if n % 10 else "friendship"
        if kind == "friendship" and a > b:
            a, b = b, a
        day = start + timedelta(days=rng.randrange(60 * 365))
        collection = 1 + rng.randrange(100)
        sources.append([f"s{n}", f"rep{1 + collection % 10}", f"col{collection}", f"Ms {n}", "letter", day.isoformat()])
        rows.append([f"a{n}", f"p{a}", f"p{b}", kind, f"s{n}", rng.choice(EVIDENCE), rng.choice(CERTAINTY)])
    write("sources.csv", ["key", "repository", "collection", "reference", "kind", "date"], sources)
    write("relations.csv", ["key", "person", "other", "kind", "source", "evidence", "certainty"], rows)
    return folder
