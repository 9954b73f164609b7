"""SQL that has to be spelled differently on SQLite and PostgreSQL, behind one name."""

from __future__ import annotations

from sqlalchemy.ext.compiler import compiles
from sqlalchemy.sql.functions import FunctionElement
from sqlalchemy.types import Text

__all__ = ["distinct_list"]


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
