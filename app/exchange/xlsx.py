"""The sheets of an .xlsx workbook, read with openpyxl: each sheet named like a workbook file.

Cells give their values as a spreadsheet program last saved them; a formula is not computed
here: its saved value is taken and the formula is reported, so nobody is surprised that a
changed formula did not change the import.
"""

from __future__ import annotations

import zipfile
from datetime import date, datetime, time
from pathlib import Path
from typing import Any

from app.exchange.workbook import Problem, Sheet

MAX_FORMULA_NOTES = 20


def xlsx_sheets(path: Path, problems: list[Problem], warnings: list[str]) -> list[Sheet]:
    """Return one sheet per worksheet of the .xlsx at ``path``; formulas are reported in ``warnings``."""
    from openpyxl import load_workbook
    from openpyxl.utils.exceptions import InvalidFileException

    try:
        values_book = load_workbook(path, read_only=True, data_only=True)
        formulas_book = load_workbook(path, read_only=True, data_only=False)
    except (InvalidFileException, zipfile.BadZipFile, KeyError, OSError, ValueError) as error:
        problems.append(Problem(path.name, 0, "(xlsx)", f"not a readable .xlsx workbook ({error.__class__.__name__}); "
                                                          "save it again as an Excel workbook (.xlsx)"))
        return []
    sheets = []
    formulas: list[str] = []
    formula_count = 0
    try:
        for values_sheet in values_book.worksheets:
            title = values_sheet.title
            label = f"{path.name}, sheet {title}"
            values = [[_text(v) for v in row] for row in values_sheet.iter_rows(values_only=True)]
            for row in formulas_book[title].iter_rows():
                for cell in row:
                    if cell.data_type == "f" or (isinstance(cell.value, str) and cell.value.startswith("=")):
                        formula_count += 1
                        if len(formulas) < MAX_FORMULA_NOTES:
                            saved = values[cell.row - 1][cell.column - 1] if cell.row - 1 < len(values) else ""
                            taken = f"its saved value {saved!r} was taken" if saved else "it has no saved value, so the cell is taken as empty"
                            formulas.append(f"{label}, cell {cell.coordinate}: formula {cell.value}; {taken}")
            sheet = _sheet(title, label, values, problems)
            if sheet is not None:
                sheets.append(sheet)
    finally:
        values_book.close()
        formulas_book.close()
    warnings.extend(formulas)
    if formula_count > len(formulas):
        warnings.append(f"{path.name}: {formula_count - len(formulas)} more formula cells, their saved values taken")
    return sheets


def _sheet(title: str, label: str, values: list[list[str]], problems: list[Problem]) -> Sheet | None:
    if not values or not any(values[0]):
        if any(any(row) for row in values):
            problems.append(Problem(label, 1, "(file)", "the first row must hold the column names"))
        return None
    header = [h.strip() for h in values[0]]
    while header and not header[-1]:
        header.pop()
    width = len(header)
    records: list[tuple[int, list[str]]] = []
    for line, row in enumerate(values[1:], start=2):
        if not any(cell.strip() for cell in row):
            continue
        if any(cell.strip() for cell in row[width:]):
            problems.append(Problem(label, line, "(row)", f"cells beyond the {width} named columns"))
            continue
        records.append((line, row[:width]))
    return Sheet(name=title, label=label, header=header, count=len(records), walk=lambda: iter(records))


def _text(value: Any) -> str:
    """A cell as the text a CSV file would hold: whole numbers without .0, days as EDTF days, yes/no."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return str(int(value)) if value.is_integer() else repr(value)
    if isinstance(value, datetime):
        return value.date().isoformat() if value.time() == time(0) else value.isoformat()
    if isinstance(value, (date, time)):
        return value.isoformat()
    return str(value)
