"""Tables as CSV downloads: every table a page shows can be had as a file that spreadsheets open.

A page's view-model says which tables it holds (:class:`Table`: a header and rows of plain
values); :func:`csv_response` writes one of them. The rows come from the same view-model as the
page and its JSON twin, so the three never disagree.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Sequence
from dataclasses import dataclass

from fastapi.responses import Response

__all__ = ["Table", "csv_response"]


@dataclass(frozen=True)
class Table:
    """One table as plain values, ready to be written as CSV."""

    header: list[str]
    """Column names."""
    rows: list[Sequence[object]]
    """One sequence of values per row (None is written as an empty cell)."""


def csv_response(table: Table, filename: str) -> Response:
    """Return ``table`` as a UTF-8 CSV download named ``filename``."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\r\n")
    writer.writerow(table.header)
    for row in table.rows:
        writer.writerow(["" if value is None else _cell(value) for value in row])
    safe = "".join(c if c.isalnum() or c in "-_." else "_" for c in filename)
    return Response(buffer.getvalue(), media_type="text/csv; charset=utf-8",
                    headers={"Content-Disposition": f'attachment; filename="{safe}"'})


def _cell(value: object) -> object:
    # repr keeps every digit of a float (str would too in Python 3, but say so explicitly)
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return repr(value)
    return spreadsheet_safe(value)


FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def spreadsheet_safe(value: object) -> object:
    """Return text that a spreadsheet will show as text: a cell starting like a formula gets a quote.

    Names and quotes come from workbooks; ``=HYPERLINK(...)`` in a name must not run when a
    downloaded table is opened. (The workbook export keeps values exactly, for round trips.)
    """
    if isinstance(value, str) and value.startswith(FORMULA_STARTS):
        return "'" + value
    return value
