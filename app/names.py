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
