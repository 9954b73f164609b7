"""The column-mapping step: which workbook file each uploaded sheet is and which field each column is.

Suggestions come from the sheet's name and its column names (exact, then case- and
accent-free, then a few common names such as ``Sender``). A mapping the user settles on can be
downloaded as a small JSON file and uploaded again beside the next workbook, so it is given
once. A sheet with ``source`` and ``target`` columns whose values are person keys is an edge
list: in the workbook ``source`` is the document, so the step asks instead of guessing.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from itertools import islice

from app.documented import DOCUMENTED
from app.exchange.workbook import FILES, Sheet, SheetPlan, workbook_file_of
from app.names import fold

__all__ = ["MAPPING_FORMAT", "SheetMapping", "mapping_json", "needs_confirmation", "plans_from_json", "suggest_mappings"]

MAPPING_FORMAT = "attesta-column-mapping"
EDGE_SAMPLE = 200  # values of the source column looked at to tell persons from documents

# Column names met in spreadsheets, folded, and the workbook column they usually mean.
COMMON_NAMES = {
    "sender": "person", "from": "person", "writer": "person", "ego": "person", "person a": "person",
    "recipient": "other", "addressee": "other", "to": "other", "alter": "other", "person b": "other",
    "date of letter": "date", "letter date": "date", "date sent": "date", "when": "date",
    "archive": "repository", "repository": "repository", "shelfmark": "reference", "call number": "reference",
    "signature": "reference", "full name": "name", "birth": "born", "date of birth": "born",
    "death": "died", "date of death": "died", "type": "kind", "relation": "kind", "document": "source",
    "place of writing": "place_from", "place of receipt": "place_to", "identifier": "identifiers",
}


@dataclass
class SheetMapping:
    """What the mapping step shows for one sheet: its columns, the suggested file and fields, and why it asks."""

    __pydantic_config__ = DOCUMENTED

    sheet: str
    """The sheet's name as uploaded (a CSV file's name, or an .xlsx sheet's)."""
    label: str
    """Where the sheet is, for messages."""
    header: list[str]
    """The sheet's column names."""
    file: str | None
    """The workbook file suggested (None: not recognised)."""
    columns: dict[str, str]
    """Suggested workbook column of each sheet column ("" = leave it out)."""
    fixed: dict[str, str] = field(default_factory=dict)
    """Values for every row, for required columns the sheet lacks (an edge list's document and kind)."""
    edge_list: bool = False
    """True when ``source`` and ``target`` hold person keys: an edge list, not documents."""
    examples: dict[str, list[str]] = field(default_factory=dict)
    """The first values of each column, to help the choice."""
    reasons: list[str] = field(default_factory=list)
    """Why this sheet needs a look (empty: it matches the workbook as it is)."""

    @property
    def plan(self) -> SheetPlan:
        return SheetPlan(self.file or "", dict(self.columns), dict(self.fixed))


def suggest_mappings(sheets: list[Sheet], person_keys: set[str], plans: dict[str, SheetPlan] | None = None) -> list[SheetMapping]:
    """Return a suggestion for every sheet; ``plans`` (from an uploaded mapping) win over guesses."""
    found = []
    for sheet in sheets:
        sample = _examples(sheet)
        examples = {h: v[:3] for h, v in sample.items()}
        plan = (plans or {}).get(sheet.name)
        if plan is not None:
            found.append(SheetMapping(sheet.name, sheet.label, sheet.header, plan.file or None,
                                      {h: plan.columns.get(h, h) for h in sheet.header}, dict(plan.fixed), examples=examples))
            continue
        file = workbook_file_of(sheet.name)
        reasons = []
        lower = {fold(h): h for h in sheet.header}
        edge = "source" in lower and "target" in lower and _mostly_persons(sample.get(lower["source"], []), person_keys)
        if edge:
            file = "relations.csv"
            reasons.append(f"its columns {lower['source']} and {lower['target']} hold persons (an edge list); in the "
                           "workbook, source is the document: map them to person and other, and name the document")
        if file is None:
            file = _file_by_columns(sheet.header)
            reasons.append(f"{sheet.name} is not the name of a workbook file"
                           + (f"; its columns suggest {file}" if file else ""))
        columns = {}
        for h in sheet.header:
            columns[h] = _field_of(h, file, edge)
        if file:
            unknown = [h for h in sheet.header if h not in FILES[file].columns]
            if unknown and not edge:
                reasons.append(f"column(s) {', '.join(unknown)} are not columns of {file}")
            missing = [c for c in FILES[file].required if c not in columns.values()]
            if missing:
                reasons.append(f"no column gives {', '.join(missing)}, required in {file}")
        found.append(SheetMapping(sheet.name, sheet.label, sheet.header, file, columns, edge_list=edge,
                                  examples=examples, reasons=reasons))
    return found


def needs_confirmation(mapping: SheetMapping) -> bool:
    """True when reading the sheet as it is named would misread it, so the user must settle a mapping.

    That is an edge list, a sheet recognised only by its columns, or a column that would be read
    as another (``Sender`` as ``person``). Columns that are no workbook columns are only left out
    (a warning), and a sheet that suggests no workbook file at all is left out too.
    """
    if mapping.edge_list:
        return True
    if mapping.file is None:
        return False
    if mapping.file != workbook_file_of(mapping.sheet):
        return True
    return any(field and field != column for column, field in mapping.columns.items())


def _field_of(header: str, file: str | None, edge: bool) -> str:
    if not file:
        return ""
    columns = FILES[file].columns
    folded = fold(header)
    if edge and folded == "source":
        return "person"
    if edge and folded == "target":
        return "other"
    if header in columns:
        return header
    for column in columns:
        if fold(column) == folded or fold(column.replace("_", " ")) == folded:
            return column
    common = COMMON_NAMES.get(folded)
    return common if common in columns else ""


def _file_by_columns(header: list[str]) -> str | None:
    """The workbook file whose columns the header shares most with (None when it shares none)."""
    folded = {fold(h) for h in header}
    best, best_score = None, 0
    for name, spec in FILES.items():
        score = sum(1 for c in spec.columns if c in folded) + sum(1 for h in folded if COMMON_NAMES.get(h) in spec.columns)
        if score > best_score:
            best, best_score = name, score
    return best


def _examples(sheet: Sheet) -> dict[str, list[str]]:
    """The non-blank values of each column in the sheet's first ``EDGE_SAMPLE`` records."""
    values: dict[str, list[str]] = {h: [] for h in sheet.header}
    for _, record in islice(sheet.records(), EDGE_SAMPLE):
        for h, cell in zip(sheet.header, record):
            if cell.strip():
                values[h].append(cell.strip())
    return values


def _mostly_persons(values: list[str], person_keys: set[str]) -> bool:
    return bool(values) and sum(1 for v in values if v in person_keys) * 2 >= len(values)


def mapping_json(mappings: list[SheetMapping]) -> str:
    """Return the mapping as the JSON file a user downloads and uploads with the next workbook."""
    return json.dumps({
        "format": MAPPING_FORMAT, "version": 1,
        "sheets": {m.sheet: {"file": m.file, "columns": m.columns, "fixed": m.fixed} for m in mappings if m.file},
    }, indent=2, ensure_ascii=False) + "\n"


def plans_from_json(text: str) -> dict[str, SheetPlan]:
    """Read a mapping file; raise ValueError with a plain message when it is not one."""
    try:
        data = json.loads(text)
    except json.JSONDecodeError as error:
        raise ValueError(f"not a JSON file ({error})") from error
    if not isinstance(data, dict) or data.get("format") != MAPPING_FORMAT or not isinstance(data.get("sheets"), dict):
        raise ValueError(f'not a column mapping (expected {{"format": "{MAPPING_FORMAT}", "sheets": ...}})')
    plans = {}
    for sheet, item in data["sheets"].items():
        file = item.get("file") if isinstance(item, dict) else None
        if file not in FILES:
            raise ValueError(f"sheet {sheet!r}: {file!r} is not a workbook file")
        columns = {str(k): str(v) for k, v in (item.get("columns") or {}).items()}
        bad = [v for v in columns.values() if v and v not in FILES[file].columns]
        if bad:
            raise ValueError(f"sheet {sheet!r}: {', '.join(bad)} are not columns of {file}")
        plans[str(sheet)] = SheetPlan(file, columns, {str(k): str(v) for k, v in (item.get("fixed") or {}).items()})
    return plans
