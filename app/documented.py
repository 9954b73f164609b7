"""Field descriptions of the JSON shapes, read from the docstring under each field, for the OpenAPI page.

Every view-model and store dataclass documents its fields with a docstring under each one, and
sets ``__pydantic_config__ = DOCUMENTED`` so that the OpenAPI schema shows them. pydantic's own
``use_attribute_docstrings`` reads the class's source while it builds each response schema:
on Python 3.11 every read parses the whole module again, and FastAPI builds the response
schemas of all routes on the first request of a process, which took seconds. Here the
docstrings are read only when a JSON schema is drawn up (``/openapi.json``), once per class.
"""

from __future__ import annotations

import ast
import functools
import inspect
import textwrap
from typing import Any

__all__ = ["DOCUMENTED", "field_docstrings"]


@functools.cache
def field_docstrings(cls: type) -> dict[str, str]:
    """Return each field's docstring (the string right under its annotation), by field name.

    Examples
    --------
    >>> from app.views.common import ErrorPage
    >>> field_docstrings(ErrorPage)["error"]
    'What went wrong, in a few words ("not found", "bad parameter").'
    """
    try:
        tree = ast.parse(textwrap.dedent(inspect.getsource(cls)))
    except (OSError, TypeError, SyntaxError):
        return {}
    body = next((node.body for node in tree.body if isinstance(node, ast.ClassDef)), [])
    docs: dict[str, str] = {}
    for node, following in zip(body, body[1:]):
        if (isinstance(node, ast.AnnAssign) and isinstance(node.target, ast.Name) and isinstance(following, ast.Expr)
                and isinstance(following.value, ast.Constant) and isinstance(following.value.value, str)):
            docs[node.target.id] = inspect.cleandoc(following.value.value)
    return docs


def _describe_fields(schema: dict[str, Any], cls: type) -> None:
    """Give each property of a class's JSON schema its field docstring (pydantic's ``json_schema_extra``)."""
    for name, text in field_docstrings(cls).items():
        prop = schema.get("properties", {}).get(name)
        if prop is not None and "description" not in prop:
            prop["description"] = text


DOCUMENTED: dict[str, Any] = {"json_schema_extra": _describe_fields}
"""The pydantic configuration of a documented dataclass."""
