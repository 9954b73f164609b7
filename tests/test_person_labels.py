"""Persons of the same name are told apart wherever the network shows them by name."""

from __future__ import annotations

from pathlib import Path

from app.exchange.workbook import import_workbook
from app.store.network_labels import list_person_labels, list_person_labels_by_key
from tests.workbooks import write_workbook


def test_persons_of_one_name_get_their_life_dates_and_else_their_keys(database, tmp_path: Path):
    persons = [
        {"key": "p-pieter-1", "name": "Pieter Schuttelaer", "born": "1661", "died": "1720"},
        {"key": "p-pieter-2", "name": "Pieter Schuttelaer", "born": "1690?", "died": ""},
        {"key": "p-anna-1", "name": "Anna Vos", "born": "", "died": ""},
        {"key": "p-anna-2", "name": "Anna Vos", "born": "", "died": ""},
        {"key": "p-jost", "name": "Jost Brenner", "born": "1670", "died": "1731"},
    ]
    import_workbook(database, write_workbook(tmp_path / "wb", {"persons.csv": persons}), size_limit=10**7)
    with database.read() as session:
        by_key = list_person_labels_by_key(session=session, keys=[p["key"] for p in persons])
        by_id = list_person_labels(session=session, ids=[label.id for label in by_key.values()])
        alone = list_person_labels_by_key(session=session, keys=["p-pieter-1", "p-jost"])
    names = {key: label.name for key, label in by_key.items()}
    assert names["p-pieter-1"] == "Pieter Schuttelaer (1661–1720)"
    assert names["p-pieter-2"] == "Pieter Schuttelaer (1690?–?)"
    assert names["p-anna-1"] == "Anna Vos (?–?, p-anna-1)"  # no dates to tell them apart: the keys do
    assert names["p-jost"] == "Jost Brenner"  # a name nobody else has stays as it is
    assert {label.key: label.name for label in by_id.values()} == names
    assert alone["p-pieter-1"].name == "Pieter Schuttelaer"  # only names repeated among those shown get dates
