"""Folding of names for search and matching: case, accents and spacing do not matter."""

from __future__ import annotations

import re
import unicodedata

_SPACES = re.compile(r"\s+")
# Letters that Unicode does not decompose into a base letter plus an accent.
_SPECIAL = str.maketrans({"ß": "ss", "æ": "ae", "œ": "oe", "ø": "o", "ł": "l", "đ": "d", "þ": "th", "ð": "d", "ı": "i"})


def fold(text: str) -> str:
    """Return ``text`` lower-cased, without accents and with single spaces ("José  Ørsted" -> "jose orsted")."""
    decomposed = unicodedata.normalize("NFKD", text.casefold().translate(_SPECIAL))
    bare = "".join(ch for ch in decomposed if not unicodedata.combining(ch))
    return _SPACES.sub(" ", bare).strip()


_NOT_IN_KEY = re.compile(r"[^a-z0-9]+")
KEY_PREFIX = "p-"
"""Keys made from a name start so, as in the demo's workbook ("p-jehan-marteau")."""


def key_from_name(name: str, *, room: int = 0) -> str:
    """Return a person key made from ``name``: folded, words joined by hyphens, within the key format.

    ``room`` keeps that many characters free under the 100 the key format allows (for a "-2").

    >>> key_from_name("Griet  Molenaar")
    'p-griet-molenaar'
    >>> key_from_name("Jöns Ørsted (the elder)")
    'p-jons-orsted-the-elder'
    >>> key_from_name("  ")
    'p-person'
    """
    words = _NOT_IN_KEY.sub("-", fold(name)).strip("-") or "person"
    return (KEY_PREFIX + words)[: 100 - room].rstrip("-")
