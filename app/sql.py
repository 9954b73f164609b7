"""SQL that has to be spelled differently on SQLite and PostgreSQL, behind one name."""

from __future__ import annotations

from sqlalchemy.ext.compiler import compiles
from sqlalchemy.sql.functions import FunctionElement
from sqlalchemy.types import Integer, Text

__all__ = ["distinct_list", "json_integer"]


class distinct_list(FunctionElement):  # noqa: N801 - used like func.*
    """The distinct values of a column in a group, as one comma-separated text (order unspecified)."""

    type = Text()
    inherit_cache = True


@compiles(distinct_list)
def _distinct_list_sqlite(element: distinct_list, compiler, **kw) -> str:  # noqa: ANN001
    return f"group_concat(DISTINCT {compiler.process(element.clauses, **kw)})"


@compiles(distinct_list, "postgresql")
def _distinct_list_postgresql(element: distinct_list, compiler, **kw) -> str:  # noqa: ANN001
    return f"string_agg(DISTINCT CAST({compiler.process(element.clauses, **kw)} AS TEXT), ',')"


class json_integer(FunctionElement):  # noqa: N801 - used like func.*
    """A whole number at a top-level key of a JSON text column, read by the database (NULL when absent)."""

    type = Integer()
    inherit_cache = True

    def __init__(self, column, key: str):  # noqa: ANN001
        if not key.isidentifier():
            raise ValueError(f"a JSON key of letters, digits and _ only, not {key!r}")
        self.key = key
        super().__init__(column)


@compiles(json_integer)
def _json_integer_sqlite(element: json_integer, compiler, **kw) -> str:  # noqa: ANN001
    return f"CAST(json_extract({compiler.process(element.clauses, **kw)}, '$.{element.key}') AS INTEGER)"


@compiles(json_integer, "postgresql")
def _json_integer_postgresql(element: json_integer, compiler, **kw) -> str:  # noqa: ANN001
    return f"CAST(CAST({compiler.process(element.clauses, **kw)} AS json) ->> '{element.key}' AS INTEGER)"
