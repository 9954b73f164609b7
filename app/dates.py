"""EDTF dates and calendars turned into day intervals.

Historians write dates as the sources give them: "about 1703", "spring 1701",
"between 1701 and 1705", in the Julian calendar or with the year starting on
25 March. Attesta stores that text as written (in EDTF, the Library of
Congress Extended Date/Time Format) together with a calendar, and derives from
it the earliest and the latest day it can mean in the proleptic Gregorian
calendar. Slices by period, overlap tests and sorting all work on those two
days, so every reading here errs on the wide side: an interval always covers
every day the text can mean.

The `edtf` package parses the text; this module walks the parsed parts itself,
because day validity, month lengths and the year start depend on the calendar
(1700-02-29 exists in the Julian calendar only). `convertdate` converts Julian
days to Gregorian ones.

Rules, in brief:

* ``~`` (approximate), ``?`` (uncertain) and ``%`` (both) widen a date on both
  sides by a number of steps of the finest component the qualifier covers:
  ``1703~`` by years, ``1703-05~`` by months, ``1703-05-12~`` and
  ``1703-05-?12`` by days, ``?1703-05-12`` (the year alone) by years. A season
  counts as month precision. The numbers of steps are `DateSettings`.
* ``..`` (open end) and an empty side (unknown end, ``/1705``) both give
  ``None`` for that end: we claim nothing about it.
* Sets (``[1701, 1703]`` one of, ``{1701, 1703}`` all of) give the span from
  the earliest to the latest member.
* Unspecified digits (``17XX``, ``1703-XX-05``) give the span of every date
  they allow.
* ``julian-march``: the year number changes on 25 March, so "1703" runs from
  25 March 1703 to 24 March 1704 (Julian), "1703-02-10" is 10 February 1704,
  and "1703-03" spans both March 1703 (from the 25th) and March 1704 (to the
  24th). Seasons count their year from 1 January in every calendar.
* Times of day are ignored: ``1985-04-12T23:20:30`` is 1985-04-12.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from datetime import date
from functools import lru_cache

import convertdate.gregorian
import convertdate.julian
import edtf
import pyparsing
from edtf.appsettings import SEASONS as EDTF_SEASON_NAMES

__all__ = [
    "CALENDARS",
    "DEFAULT_SEASONS",
    "DEFAULT_SETTINGS",
    "DateError",
    "DateInterval",
    "DateSettings",
    "check_calendar",
    "format_interval",
    "interval_or_none",
    "parse_interval",
    "season_words",
]

CALENDARS = ("gregorian", "julian", "julian-march", "unknown")

# EDTF season code -> (first month, last month); a last month smaller than the
# first one falls in the next year (winter 1703 = December 1703 to February
# 1704). Seasons are the meteorological ones of the northern hemisphere
# (common practice); quarters, quadrimesters and semesters follow from their
# names.
DEFAULT_SEASONS: dict[int, tuple[int, int]] = {
    21: (3, 5), 22: (6, 8), 23: (9, 11), 24: (12, 2),  # spring .. winter
    25: (3, 5), 26: (6, 8), 27: (9, 11), 28: (12, 2),  # northern hemisphere
    29: (9, 11), 30: (12, 2), 31: (3, 5), 32: (6, 8),  # southern hemisphere
    33: (1, 3), 34: (4, 6), 35: (7, 9), 36: (10, 12),  # quarters
    37: (1, 4), 38: (5, 8), 39: (9, 12),  # quadrimesters
    40: (1, 6), 41: (7, 12),  # semesters
}

# The edtf grammar backtracks a lot and already turns on pyparsing's memo for
# the whole process; with the memo's default 128 entries a set such as
# "[1667, 1668, 1670..1672]" parses about five times slower than with 1024.
pyparsing.ParserElement.enable_packrat(cache_size_limit=1024, force=True)

_EXAMPLES = "examples: 1703-05-12, 1703?, 1701/1705, [1701..1705]"
_PLAIN_DATE = re.compile(r"(\d{4})(?:-(0[1-9]|1[0-2])(?:-(0[1-9]|[12]\d|3[01]))?)?")
_MAX_ORDINAL = date.max.toordinal()


class DateError(ValueError):
    """Unparseable or unsupported date; message names the value (the caller adds where it came from)."""


@dataclass(frozen=True)
class DateSettings:
    """How far qualified dates widen, and which months a season covers.

    A qualifier widens a date by N steps on each side, the step being the
    finest component it covers: ``approximate_years`` for ``1703~``,
    ``approximate_months`` for ``1703-05~``, ``approximate_days`` for
    ``1703-05-12~``; likewise ``uncertain_*`` for ``?`` and ``both_*`` for
    ``%``. Defaults (one step, two for ``%``) are common practice.
    """

    approximate_years: int = 1
    uncertain_years: int = 1
    both_years: int = 2
    approximate_months: int = 1
    uncertain_months: int = 1
    both_months: int = 2
    approximate_days: int = 1
    uncertain_days: int = 1
    both_days: int = 2
    seasons: dict[int, tuple[int, int]] = field(
        default_factory=lambda: dict(DEFAULT_SEASONS), hash=False
    )

    def __post_init__(self) -> None:
        for name, value in vars(self).items():
            if name != "seasons" and (not isinstance(value, int) or value < 0):
                raise ValueError(f"{name} must be a whole number >= 0, not {value!r}")
        for code, months in self.seasons.items():
            if len(months) != 2 or not all(1 <= m <= 12 for m in months):
                raise ValueError(f"season {code} needs two months 1..12, not {months!r}")


DEFAULT_SETTINGS = DateSettings()


@dataclass(frozen=True)
class DateInterval:
    """Earliest and latest Gregorian day a date can mean; None is an open or unknown end."""

    earliest: date | None
    latest: date | None

    def __post_init__(self) -> None:
        if self.earliest and self.latest and self.earliest > self.latest:
            raise DateError(f"earliest {self.earliest} is after latest {self.latest}")


def check_calendar(name: str) -> str:
    """Return the calendar name normalized, or raise DateError listing the accepted ones."""
    normal = str(name or "").strip().lower().replace("_", "-").replace(" ", "-")
    if normal not in CALENDARS:
        raise DateError(f"unknown calendar {name!r} (accepted: {', '.join(CALENDARS)})")
    return normal


def parse_interval(
    text: str, calendar: str = "gregorian", *, settings: DateSettings = DEFAULT_SETTINGS
) -> DateInterval:
    """Return the Gregorian interval an EDTF date in `calendar` can mean.

    Raises DateError for blank text, unparseable or unsupported dates, days
    that do not exist in the calendar, years outside 1..9999 and intervals
    that end before they start. In the ``unknown`` calendar the result spans
    both the Gregorian and the Julian reading (only the readings that exist:
    1700-02-29 can only be Julian).
    """
    calendar = check_calendar(calendar)
    if text is None or not str(text).strip():
        raise DateError(f"empty date: {text!r}")
    return _interval(str(text).strip(), calendar, settings)


@lru_cache(maxsize=16384)
def _interval(text: str, calendar: str, settings: DateSettings) -> DateInterval:
    """`parse_interval` for checked input; cached, since a dataset repeats its dates many times."""
    tree = _parse(text)
    readings = ("gregorian", "julian") if calendar == "unknown" else (calendar,)
    spans, errors = [], []
    for reading in readings:
        try:
            spans.append(_Reading(reading, settings, text).span(tree))
        except DateError as error:
            errors.append(error)
        except (ArithmeticError, AttributeError, KeyError, TypeError, ValueError):
            errors.append(DateError(f"unsupported EDTF date: {text!r} ({_EXAMPLES})"))
    if not spans:
        raise errors[0]
    low, high = _hull(spans)
    return DateInterval(
        date.fromordinal(low) if low is not None else None,
        date.fromordinal(high) if high is not None else None,
    )


def interval_or_none(
    text: str | None,
    calendar: str = "gregorian",
    *,
    settings: DateSettings = DEFAULT_SETTINGS,
) -> DateInterval | None:
    """Return None for blank or missing text (undated), else `parse_interval`.

    The calendar is only checked when there is a date.
    """
    if text is None or not str(text).strip():
        return None
    return parse_interval(text, calendar, settings=settings)


# A season code: a four-digit year, a hyphen and 21 to 41, not followed by another digit.
_SEASON_CODE = re.compile(r"(?<![\dX-])(-?\d{4})-(2[1-9]|3\d|4[01])(?!\d)")
_MONTHS = ("January", "February", "March", "April", "May", "June", "July", "August", "September", "October",
           "November", "December")
_ORDINALS = ("first", "second", "third", "fourth")
# Level 2 sub-year groupings of the EDTF specification beyond the four seasons: each code's words,
# {year} standing for the year. The months of each are those of DEFAULT_SEASONS.
_GROUPINGS: dict[int, str] = {
    **{25 + i: f"{{season}} {{year}} (northern hemisphere)" for i in range(4)},
    **{29 + i: f"{{season}} {{year}} (southern hemisphere)" for i in range(4)},
    **{33 + i: f"{_ORDINALS[i]} quarter of {{year}} ({{months}})" for i in range(4)},
    **{37 + i: f"{{months}} {{year}} ({_ORDINALS[i]} four months)" for i in range(3)},
    **{40 + i: f"{_ORDINALS[i]} half of {{year}} ({{months}})" for i in range(2)},
}


def season_words(text: str | None) -> str | None:
    """Return ``text`` with each EDTF season code in words ("1662-22" -> "summer 1662"), or None without one.

    The names of the four seasons (21-24) are the edtf package's; the other sub-year groupings of
    EDTF Level 2 (25-41: seasons of each hemisphere, quarters, thirds, halves) are named here, the
    latter with their months. A code the edtf package does not read as a season is left as it is.

    >>> season_words("1662-22")
    'summer 1662'
    >>> season_words("1701-21/1702-24~")
    'spring 1701/winter 1702~'
    >>> season_words("1703-35")
    'third quarter of 1703 (July–September)'
    >>> season_words("1703-05-22") is None
    True
    """
    if not text or not _SEASON_CODE.search(text):
        return None

    def words(match: re.Match) -> str:
        year, code = match.group(1), int(match.group(2))
        try:
            parsed = _parse(f"{year}-{code}")
        except DateError:
            return match.group(0)
        if not isinstance(parsed, edtf.Season):
            return match.group(0)
        if code in EDTF_SEASON_NAMES:
            return f"{EDTF_SEASON_NAMES[code]} {int(year)}"
        first, last = DEFAULT_SEASONS[code]
        season = EDTF_SEASON_NAMES[21 + (code - 25) % 4] if code <= 32 else ""
        return _GROUPINGS[code].format(season=season, year=int(year), months=f"{_MONTHS[first - 1]}–{_MONTHS[last - 1]}")

    shown = _SEASON_CODE.sub(words, text)
    return None if shown == text else shown


def format_interval(interval: DateInterval) -> str:
    """Render an interval for display: one day, or "earliest – latest" with "?" for an open end."""
    if interval.earliest is not None and interval.earliest == interval.latest:
        return interval.earliest.isoformat()
    low = interval.earliest.isoformat() if interval.earliest else "?"
    high = interval.latest.isoformat() if interval.latest else "?"
    return f"{low} – {high}"


@lru_cache(maxsize=4096)
def _parse(text: str) -> object:
    """Parse with the edtf package; plain dates skip its (slow) grammar."""
    plain = _PLAIN_DATE.fullmatch(text)
    if plain:
        return edtf.Date(*plain.groups())
    try:
        return edtf.parse_edtf(text)
    except Exception:  # the package raises several kinds, never let one through
        raise DateError(f"not an EDTF date: {text!r} ({_EXAMPLES})") from None


class _Reading:
    """One reading of a parsed date in one calendar; spans are Gregorian day ordinals."""

    def __init__(self, calendar: str, settings: DateSettings, text: str) -> None:
        self.march = calendar == "julian-march"
        self.base = "julian" if self.march else calendar
        self.settings = settings
        self.text = text

    def fail(self, reason: str) -> DateError:
        """An error naming the date as written."""
        return DateError(f"{reason}: {self.text!r}")

    def span(self, node) -> tuple[int | None, int | None]:
        """Span of any parsed node: an interval, a set or one date; None is an open end."""
        if isinstance(node, edtf.DateAndTime):
            return self.span(node.date)
        if isinstance(node, edtf.UnspecifiedIntervalSection):
            return None, None
        if isinstance(node, edtf.Interval):
            low = self.span(node.lower)[0] if node.lower is not None else None
            high = self.span(node.upper)[1] if node.upper is not None else None
            if low is not None and high is not None and low > high:
                raise self.fail("interval ends before it starts")
            return low, high
        if isinstance(node, (edtf.OneOfASet, edtf.MultipleDates)):
            return _hull([self.span(member) for member in node.objects])
        return self.point(node)

    def point(self, node) -> tuple[int, int]:
        """Span of one date, qualifiers and unspecified digits included."""
        qualifiers = []  # (UA, component it widens; None = the date's finest)
        if isinstance(node, edtf.UncertainOrApproximate):
            qualifiers.append((node.ua, None))
            node = node.date
        if isinstance(node, edtf.LongYear):
            year, month, day, season = str(node.estimated()), None, None, None
        elif isinstance(node, edtf.Season):  # has no month or day attributes
            year, month, day, season = node.year, None, None, node.season
        elif isinstance(node, edtf.Date):
            year, month, day, season = node.year, node.month, node.day, None
        else:
            raise self.fail(f"unsupported EDTF form {type(node).__name__}")
        qualifiers.append((getattr(node, "ua", None), None))
        if isinstance(node, edtf.PartialUncertainOrApproximate):
            qualifiers += [
                (node.year_ua, "year"), (node.year_ua_b, "year"),
                (node.month_ua, "month"), (node.year_month_ua, "month"),
                (node.day_ua, "day"), (node.month_day_ua, "day"), (node.all_ua, None),
            ]
        finest = "day" if day else "month" if (month or season) else "year"

        years = self.years(year, getattr(node, "significant_digits", None))
        if season:
            start, end = self.season_span(years, int(season))
        else:
            months, days = self.digits(month, 1, 12), self.digits(day, 1, 31)
            start = self.extreme(years, months, days, latest=False)
            end = self.extreme(years, months, days, latest=True)
        low, high = self.ordinal(start), self.ordinal(end)
        for ua, unit in qualifiers:
            if ua is not None:
                low, high = self.widen(low, high, start, end, ua, unit or finest)
        if not (1 <= low and high <= _MAX_ORDINAL):
            raise self.fail("date reaches outside the years 1 to 9999")
        return low, high

    def widen(self, low: int, high: int, start: tuple, end: tuple, ua, unit: str) -> tuple[int, int]:
        """Widen a span by the settings' steps of `unit` for one qualifier."""
        kind = ("both" if ua.is_uncertain_and_approximate
                else "uncertain" if ua.is_uncertain else "approximate")
        steps = getattr(self.settings, f"{kind}_{unit}s")
        if unit == "day":
            return min(low, self.ordinal(start) - steps), max(high, self.ordinal(end) + steps)
        months = steps * 12 if unit == "year" else steps
        return (min(low, self.ordinal(self.shift(start, -months, False))),
                max(high, self.ordinal(self.shift(end, months, True))))

    def season_span(self, years: range, code: int) -> tuple[tuple, tuple]:
        """First and last day of a season, with the months the settings give it."""
        if code not in self.settings.seasons:
            raise self.fail(f"season {code} has no months in the settings")
        first, last = self.settings.seasons[code]
        end_year = years[-1] + (last < first)
        return (years[0], first, 1), (end_year, last, _month_length(self.base, end_year, last))

    def years(self, text: str, significant_digits) -> range:
        """Years a written year can be ('X' digits, significant digits), within 1..9999."""
        low, high = int(text.replace("X", "0")), int(text.replace("X", "9"))
        digits = len(text.lstrip("-"))
        if significant_digits and int(significant_digits) < digits:
            size = 10 ** (digits - int(significant_digits))
            low = low // size * size
            high = low + size - 1
        if low < 1 or high > 9999:
            raise self.fail("year outside 1 to 9999")
        return range(low, high + 1)

    def digits(self, text: str | None, low: int, high: int) -> range:
        """Values a month or day can take, 'X' digits spanning 0..9."""
        if text:
            low = max(low, int(text.replace("X", "0")))
            high = min(high, int(text.replace("X", "9")))
        if low > high:
            raise self.fail("no such month or day")
        return range(low, high + 1)

    def written_length(self, year: int, month: int) -> int:
        """Days in a month as written; with the year starting 25 March, February
        is written with the previous year's number."""
        return _month_length(self.base, year + (self.march and month == 2), month)

    def extreme(self, years: range, months: range, days: range, latest: bool) -> tuple[int, int, int]:
        """Earliest (or latest) existing day among the written ones, years counted from 1 January."""
        for year in years[::-1] if latest else years:
            found = [
                self.from_january((year, month, day))
                for month in months
                for day in days
                if day <= self.written_length(year, month)
            ]
            if found:
                return max(found) if latest else min(found)
        raise self.fail(f"no such day in the {self.base} calendar")

    def from_january(self, ymd: tuple[int, int, int]) -> tuple[int, int, int]:
        """The day with its year counted from 1 January: with the year starting on
        25 March, a day written 1 January..24 March falls in the next year."""
        if self.march and ymd[1:] < (3, 25):
            return ymd[0] + 1, ymd[1], ymd[2]
        return ymd

    def shift(self, ymd: tuple[int, int, int], months: int, month_end: bool) -> tuple[int, int, int]:
        """Move a day by whole months; a month's last day stays its last day when `month_end`."""
        year, month, day = ymd
        at_end = month_end and day == _month_length(self.base, year, month)
        year, month = divmod(year * 12 + month - 1 + months, 12)
        month += 1
        if not 1 <= year <= 9999:
            raise self.fail("date reaches outside the years 1 to 9999")
        length = _month_length(self.base, year, month)
        return year, month, length if at_end else min(day, length)

    def ordinal(self, ymd: tuple[int, int, int]) -> int:
        """Gregorian day number of a day written in this reading's base calendar."""
        if self.base == "julian":
            ymd = convertdate.julian.to_gregorian(*ymd)
        if not 1 <= ymd[0] <= 9999:
            raise self.fail("date reaches outside the years 1 to 9999")
        return date(*ymd).toordinal()


def _hull(spans: list[tuple[int | None, int | None]]) -> tuple[int | None, int | None]:
    """Smallest span covering all `spans`; an open end anywhere stays open."""
    lows, highs = [span[0] for span in spans], [span[1] for span in spans]
    return (None if None in lows else min(lows)), (None if None in highs else max(highs))


def _month_length(calendar: str, year: int, month: int) -> int:
    module = convertdate.julian if calendar == "julian" else convertdate.gregorian
    return module.month_length(year, month)
