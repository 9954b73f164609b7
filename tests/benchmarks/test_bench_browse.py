"""Person page and ego network on 20,000 persons / 200,000 attestations.

Targets on a 2-core machine: ego JSON under 150 ms median at radius 1, under 400 ms at
radius 2 (with the cap on drawn alters). Server time is measured in-process around each request:
once cold (nothing kept in memory) and then warm (the ego panel is kept until the data changes).
"""

from __future__ import annotations

import time

from conftest import report, timings
from fastapi.testclient import TestClient
from generate import generate
from sqlalchemy import text

from app.config import Settings
from app.db import Database, upgrade
from app.main import create_app
from app.views import ego as ego_views

PERSONS, ATTESTATIONS = 20_000, 200_000


def test_browse_person_and_ego(cache_dir):
    path = cache_dir / f"browse-{PERSONS}-{ATTESTATIONS}.db"
    database = generate(path, persons=PERSONS, attestations=ATTESTATIONS) if not path.exists() else Database(f"sqlite:///{path}")
    upgrade(database)  # a cached database from an older schema
    database.dispose()
    client = TestClient(create_app(Settings(database_url=f"sqlite:///{path}")))
    with client.app.state.database.read() as session:
        degrees = session.execute(text(
            "SELECT p, count(DISTINCT o) AS d FROM ("
            " SELECT person_a_id AS p, person_b_id AS o FROM relation UNION ALL"
            " SELECT person_b_id, person_a_id FROM relation) GROUP BY p ORDER BY d"
        )).all()
        keys = dict(session.execute(text("SELECT id, key FROM person")).all())
    hub, hub_degree = degrees[-1]
    median, median_degree = degrees[len(degrees) // 2]
    figures = {"persons": PERSONS, "attestations": ATTESTATIONS, "targets": {"ego radius 1 median_ms": 150, "ego radius 2 median_ms": 400}}
    for label, person, degree in (("hub", hub, hub_degree), ("median person", median, median_degree)):
        key = keys[person]
        for name, url in (
            ("person page", f"/persons/{key}"),
            ("ego JSON radius 1", f"/api/persons/{key}/ego?radius=1"),
            ("ego JSON radius 2", f"/api/persons/{key}/ego?radius=2"),
        ):
            ego_views._PANELS.clear()  # cold: the ego panel is not yet kept in memory
            started = time.perf_counter()
            assert client.get(url).status_code == 200, url
            cold = round((time.perf_counter() - started) * 1000, 1)
            figures[f"{label} (degree {degree}): {name}"] = {"cold_ms": cold, "warm": timings(lambda: client.get(url), repeat=20)}
    report("browse", figures)
