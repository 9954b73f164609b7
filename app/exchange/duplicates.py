"""Likely duplicate persons: similar names and overlapping lives, among new rows and against the store.

Names are folded (case and accents dropped, ``app.names.fold``) and split into blocks by a
short name key, so that only names sharing a key are compared (blocking, as record linkage
does it, instead of comparing every pair). Each name gets two keys, one from the first
letter of the first word and the start of the last word and one the other way round, so a
variant in either part still meets its twin, and a third from its words in sorted order, so a
name written surname first meets it too. Inside a block, rapidfuzz scores every pair
(token sort ratio: word order does not matter) in compiled code. A pair is suggested when
the score reaches ``MIN_SCORE`` and the two lives overlap, or when one of them has no dates.
Names whose numbers differ (``Jost Brenner 1`` and ``Jost Brenner 2``) are told apart.
"""

from __future__ import annotations

import re
from collections import defaultdict
from collections.abc import Iterable
from dataclasses import dataclass
from datetime import date

from rapidfuzz import fuzz, process

from app.names import fold

__all__ = ["MIN_SCORE", "Candidate", "Suggestion", "block_keys", "find_duplicates"]

MIN_SCORE = 85  # token sort ratio, 0..100 (common practice for name matching; tuned on the test set)
MAX_BLOCK = 4000  # a block larger than this is split by a longer key
_WORD = re.compile(r"[a-z0-9]+")


@dataclass(frozen=True)
class Candidate:
    """A person to compare: from the upload (``stored=False``) or from the database."""

    key: str
    name: str
    variants: tuple[str, ...] = ()
    born: date | None = None  # earliest day of birth
    died: date | None = None  # latest day of death
    stored: bool = False


@dataclass(frozen=True)
class Suggestion:
    """Two persons that may be one: ``new_key`` comes from the upload, ``other_key`` from it or the store."""

    new_key: str
    new_name: str
    other_key: str
    other_name: str
    other_stored: bool
    score: int
    dates: str  # "lives overlap" or "no dates to compare"


def block_keys(folded: str, extra: int = 0) -> list[str]:
    """Return the blocking keys of a folded name (``extra`` lengthens them to split a large block)."""
    words = [w for w in _WORD.findall(folded) if not w.isdigit()]
    numbers = "".join(w for w in _WORD.findall(folded) if w.isdigit())
    if not words:
        return [f"#{numbers}"] if numbers else []
    first, last = words[0], words[-1]
    if len(words) == 1:
        return [f"{first[:3 + extra]}#{numbers}"]
    low, high = min(words), max(words)  # the same for any word order ("Oskamp Hinrik")
    return [f"{first[:1 + extra]}|{last[:3 + extra]}#{numbers}", f"{first[:3 + extra]}|{last[:1 + extra]}#{numbers}",
            f"~{low[:2 + extra]}|{high[:2 + extra]}#{numbers}"]


def find_duplicates(new: Iterable[Candidate], stored: Iterable[Candidate], *, min_score: int = MIN_SCORE) -> list[Suggestion]:
    """Return likely duplicate pairs, best first: new rows among themselves and new rows against stored persons.

    A stored person with the same key as a new row is that row's own record (an update), not a duplicate.
    """
    people: list[Candidate] = []
    new_keys: set[str] = set()
    for candidate in new:
        people.append(candidate)
        new_keys.add(candidate.key)
    for candidate in stored:
        if candidate.key not in new_keys:
            people.append(candidate)
    entries: list[tuple[int, str]] = []  # (index of the person, a folded name)
    for index, person in enumerate(people):
        for name in {fold(n) for n in (person.name, *person.variants) if n and n.strip()}:
            entries.append((index, name))
    best: dict[tuple[int, int], int] = {}
    _compare(entries, people, best, min_score, extra=0)
    found = []
    for (i, j), score in best.items():
        a, b = people[i], people[j]
        overlap = _lives(a, b)
        if overlap is None:
            continue
        if a.stored:  # the new row goes first
            a, b = b, a
        found.append(Suggestion(a.key, a.name, b.key, b.name, b.stored, score, overlap))
    found.sort(key=lambda s: (-s.score, s.new_key, s.other_key))
    return found


def _compare(entries: list[tuple[int, str]], people: list[Candidate], best: dict[tuple[int, int], int],
             min_score: int, extra: int) -> None:
    blocks: dict[str, list[tuple[int, str]]] = defaultdict(list)
    for entry in entries:
        for key in block_keys(entry[1], extra):
            blocks[key].append(entry)
    for members in blocks.values():
        if len({index for index, _ in members}) < 2:
            continue
        if len(members) > MAX_BLOCK and extra < 6:
            _compare(members, people, best, min_score, extra + 1)
            continue
        names = [name for _, name in members]
        scores = process.cdist(names, names, scorer=fuzz.token_sort_ratio, score_cutoff=min_score, dtype="uint8")
        rows, columns = scores.nonzero()
        for r, c in zip(rows.tolist(), columns.tolist()):
            i, j = members[r][0], members[c][0]
            if i >= j or (people[i].stored and people[j].stored):
                continue
            score = int(scores[r, c])
            if score > best.get((i, j), 0):
                best[(i, j)] = score


def _lives(a: Candidate, b: Candidate) -> str | None:
    """Say how the two lives compare: overlapping, unknown, or (None) apart in time.

    A life with one end known is taken to span at most ``MAX_LIFE_DAYS`` from it.
    """
    spans = []
    for person in (a, b):
        if person.born is None and person.died is None:
            return "no dates to compare"
        start = person.born or _shift(person.died, -MAX_LIFE_DAYS)
        end = person.died or _shift(person.born, MAX_LIFE_DAYS)
        spans.append((start, end))
    (a_start, a_end), (b_start, b_end) = spans
    return "lives overlap" if a_start <= b_end and b_start <= a_end else None


MAX_LIFE_DAYS = 100 * 366  # common practice: no life is taken to be longer than a hundred years


def _shift(day: date, days: int) -> date:
    try:
        return date.fromordinal(day.toordinal() + days)
    except (ValueError, OverflowError):
        return date.max if days > 0 else date.min
