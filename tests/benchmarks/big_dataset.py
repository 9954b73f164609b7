"""A large synthetic dataset written straight into a migrated database, for benchmarks.

20,000 persons, about 200,000 attestations over 10 repositories and 60 collections. Who writes
to whom follows a skewed popularity, so there are hubs with hundreds of correspondents, as in
real letter networks. Seeded: the same call writes the same rows.
"""

from __future__ import annotations

import random
import sqlite3
from datetime import date, timedelta
from pathlib import Path


def write_big_dataset(path: Path, *, persons: int = 20_000, attestations: int = 200_000, seed: int = 7) -> None:
    """Fill the migrated, empty SQLite file at ``path``."""
    rng = random.Random(seed)
    db = sqlite3.connect(path)
    db.execute("PRAGMA foreign_keys = OFF")
    db.executemany("INSERT INTO repository (id, key, name) VALUES (?, ?, ?)", [(r, f"rep-{r}", f"Archive {r}") for r in range(1, 11)])
    db.executemany(
        "INSERT INTO collection (id, key, repository_id, name) VALUES (?, ?, ?, ?)",
        [(c, f"col-{c}", 1 + c % 10, f"Collection {c}") for c in range(1, 61)],
    )
    db.executemany(
        "INSERT INTO person (id, key, name, kind, unidentified, living, calendar) VALUES (?, ?, ?, ?, ?, 0, 'gregorian')",
        [(p, f"p{p}", f"Person {p}", "corporate" if p % 97 == 0 else "individual", int(p % 53 == 0)) for p in range(1, persons + 1)],
    )
    sources = attestations // 4
    start = date(1600, 1, 1)
    source_rows = []
    for s in range(1, sources + 1):
        day = start + timedelta(days=rng.randrange(100 * 365))
        source_rows.append((s, f"s{s}", 1 + s % 60, "letter", day.isoformat(), "gregorian", day, day))
    db.executemany(
        "INSERT INTO source (id, key, collection_id, kind, date_text, calendar, earliest, latest) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
        source_rows,
    )
    popularity = [1.0 / (rank ** 0.9) for rank in range(1, persons + 1)]
    kinds = [(1, True)] * 8 + [(4, False), (5, False), (6, True), (7, False)]  # mostly letters
    relations: dict[tuple[int, int, int], int] = {}
    relation_rows, attestation_rows = [], []
    grades = ("certain",) * 6 + ("probable",) * 3 + ("possible",)
    evidence = ("original",) * 6 + ("copy", "mention", "register", "draft")
    while len(attestation_rows) < attestations:
        a, b = rng.choices(range(1, persons + 1), weights=popularity, k=2) if rng.random() < 0.5 else (
            rng.randrange(1, persons + 1), rng.choices(range(1, persons + 1), weights=popularity, k=1)[0])
        kind, directed = rng.choice(kinds)
        if not directed and a > b:
            a, b = b, a
        relation = relations.get((kind, a, b))
        if relation is None:
            relation = relations[(kind, a, b)] = len(relations) + 1
            relation_rows.append((relation, kind, directed, a, b))
        for _ in range(rng.choice((1, 1, 1, 2, 3))):
            n = len(attestation_rows) + 1
            s = rng.randrange(1, sources + 1)
            day = source_rows[s - 1][6]
            attestation_rows.append((n, f"a{n}", relation, s, rng.choice(evidence), day, day, rng.choice(grades)))
    db.executemany("INSERT INTO relation (id, kind_id, kind_directed, person_a_id, person_b_id) VALUES (?, ?, ?, ?, ?)", relation_rows)
    db.executemany(
        "INSERT INTO attestation (id, key, relation_id, source_id, evidence, earliest, latest, certainty, identification) "
        "VALUES (?, ?, ?, ?, ?, ?, ?, ?, 'certain')",
        attestation_rows[:attestations],
    )
    db.commit()
    db.close()
