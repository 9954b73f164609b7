"""Reading untrusted XML (TEI letters, GraphML graphs) without letting the file reach outside itself.

Two gates: defusedxml first refuses any entity declaration (the "billion laughs" bomb and its
kin) and any external entity or DTD reference that would be fetched; then lxml parses with
entity resolution, DTD loading and network access all switched off, so a file that slipped
past the first gate still cannot expand or fetch anything. lxml is kept for its line numbers,
which every problem reports.
"""

from __future__ import annotations

import re

import defusedxml.ElementTree as defused
from defusedxml import DefusedXmlException, DTDForbidden, EntitiesForbidden, ExternalReferenceForbidden
from lxml import etree

from app.exchange.workbook import Problem

__all__ = ["local_name", "parse_untrusted"]

_ENTITY = re.compile(rb"<!ENTITY", re.I)


def parse_untrusted(data: bytes, name: str) -> tuple[etree._ElementTree | None, list[Problem]]:
    """Return the parsed document and no problems, or None and the reason it was refused."""
    try:
        defused.fromstring(data, forbid_dtd=False, forbid_entities=True, forbid_external=True)
    except EntitiesForbidden as error:
        if error.sysid or error.pubid:
            reason = (f"the file declares the external entity {error.name!r} ({error.sysid or error.pubid}); "
                      "external entities are refused (they would read files or addresses outside the document)")
        else:
            reason = (f"the file declares the entity {error.name!r}; entity declarations are refused "
                      "(nested entities expand into an XML bomb)")
        return None, [Problem(name, _line_of(data, _ENTITY), "(xml)", reason)]
    except ExternalReferenceForbidden as error:
        return None, [Problem(name, _line_of(data, _ENTITY), "(xml)",
                              f"the file refers to an outside resource ({error.sysid or error.pubid}); "
                              "external entities are refused")]
    except DTDForbidden:  # pragma: no cover - forbid_dtd is off; kept for a stricter setting
        return None, [Problem(name, 1, "(xml)", "document type declarations are refused")]
    except DefusedXmlException as error:
        return None, [Problem(name, 1, "(xml)", f"refused: {error}")]
    except defused.ParseError as error:
        line = getattr(error, "position", (1, 0))[0]
        return None, [Problem(name, line, "(xml)", f"not well-formed XML: {error}")]
    parser = etree.XMLParser(resolve_entities=False, no_network=True, load_dtd=False, dtd_validation=False,
                             huge_tree=False, remove_comments=True, remove_pis=True)
    try:
        tree = etree.ElementTree(etree.fromstring(data, parser))
    except etree.XMLSyntaxError as error:
        return None, [Problem(name, error.lineno or 1, "(xml)", f"not well-formed XML: {error.msg}")]
    return tree, []


def local_name(element: etree._Element) -> str:
    """Return an element's name without its namespace (TEI files exist with and without one)."""
    tag = element.tag
    if not isinstance(tag, str):
        return ""
    return tag.rsplit("}", 1)[-1]


def _line_of(data: bytes, pattern: re.Pattern) -> int:
    found = pattern.search(data)
    return data[: found.start()].count(b"\n") + 1 if found else 1
