"""Four client processes editing one served SQLite instance at once (real uvicorn, real HTTP):
every edit lands exactly once in the data and in the audit trail, and no user sees "database is
locked"."""

from __future__ import annotations

import json
import multiprocessing
import re
from collections import Counter

from sqlalchemy import select

from app.config import database_url
from app.models import Attestation, AuditEntry, Person
from edit_writer import EDITS, edit
from helpers import add_tiny_dataset, running_server

WRITERS = 4


def test_four_processes_of_fifty_edits_each_land_exactly_once(db_path, database):
    add_tiny_dataset(database)
    url = database_url(db_path)
    with running_server(url, timeout=120) as base_url:
        context = multiprocessing.get_context("spawn")
        results = context.Queue()
        writers = [context.Process(target=edit, args=(base_url, w, results)) for w in range(WRITERS)]
        for process in writers:
            process.start()
        reports = dict(results.get(timeout=300) for _ in writers)
        for process in writers:
            process.join(timeout=30)
    assert reports == {w: [] for w in range(WRITERS)}, reports
    expected_persons = {f"W{w}-{n}" for w in range(WRITERS) for n in range(0, EDITS, 2)}
    expected_loci = {f"w{w}-{n}" for w in range(WRITERS) for n in range(1, EDITS, 2)}
    with database.read() as s:
        persons = Counter(s.scalars(select(Person.key).where(Person.key.like("W%"))))
        loci = Counter(s.scalars(select(Attestation.locus).where(Attestation.locus.like("w%"))))
        audit = list(s.execute(select(AuditEntry.table_name, AuditEntry.record_key, AuditEntry.after_json)
                               .where(AuditEntry.action == "create")))
    assert persons == Counter(expected_persons)  # every key exactly once
    assert loci == Counter(expected_loci)
    audited_persons = Counter(key for table, key, _ in audit if table == "person")
    audited_loci = Counter(json.loads(after)["locus"] for table, _, after in audit if table == "attestation")
    assert audited_persons == Counter(expected_persons)
    assert audited_loci == Counter(expected_loci)
