"""EDTF text and calendars to Gregorian day intervals (app.dates).

Sources of the expected values are named beside each group:
"EDTF 2019" is the Library of Congress "Extended Date/Time Format (EDTF)
Specification" of 4 February 2019, cited by level and feature heading.
"from memory" marks values recalled without checking the source again;
"common practice" marks defaults with no published authority.
"""

from __future__ import annotations

import re
from datetime import date

import pytest

from app.dates import (
    CALENDARS,
    DEFAULT_SEASONS,
    DateError,
    DateInterval,
    DateSettings,
    check_calendar,
    format_interval,
    interval_or_none,
    parse_interval,
    season_words,
)

D = date
OPEN = None


def span(text: str, calendar: str = "gregorian", **settings) -> tuple[date | None, date | None]:
    interval = parse_interval(text, calendar, settings=DateSettings(**settings))
    return interval.earliest, interval.latest


# --- EDTF 2019, level 0 ------------------------------------------------------

@pytest.mark.parametrize("text, expected", [
    # Level 0, "Date" (examples 1-3)
    ("1985-04-12", (D(1985, 4, 12), D(1985, 4, 12))),
    ("1985-04", (D(1985, 4, 1), D(1985, 4, 30))),
    ("1985", (D(1985, 1, 1), D(1985, 12, 31))),
    # Level 0, "Date and Time": the day is kept, the time of day ignored
    ("1985-04-12T23:20:30", (D(1985, 4, 12), D(1985, 4, 12))),
    ("1985-04-12T23:20:30Z", (D(1985, 4, 12), D(1985, 4, 12))),
    ("1985-04-12T23:20:30-04", (D(1985, 4, 12), D(1985, 4, 12))),  # from memory
    ("1985-04-12T23:20:30+04:30", (D(1985, 4, 12), D(1985, 4, 12))),  # from memory
    # Level 0, "Time Interval" (examples 1-4; the last two from memory)
    ("1964/2008", (D(1964, 1, 1), D(2008, 12, 31))),
    ("2004-06/2006-08", (D(2004, 6, 1), D(2006, 8, 31))),
    ("2004-02-01/2005-02-08", (D(2004, 2, 1), D(2005, 2, 8))),
    ("2004-02-01/2005-02", (D(2004, 2, 1), D(2005, 2, 28))),
    ("2004-02-01/2005", (D(2004, 2, 1), D(2005, 12, 31))),
    ("2005/2006-02", (D(2005, 1, 1), D(2006, 2, 28))),
])
def test_level_0_examples(text, expected):
    assert span(text) == expected


# --- EDTF 2019, level 1 ------------------------------------------------------

@pytest.mark.parametrize("text, expected", [
    # Level 1, "Seasons": 2001-21 is spring 2001; the months (March-May) are
    # the meteorological season, common practice
    ("2001-21", (D(2001, 3, 1), D(2001, 5, 31))),
    # Level 1, "Qualification of a date (complete)"; widening by one step of
    # the date's precision, two for '%' (common practice)
    ("1984?", (D(1983, 1, 1), D(1985, 12, 31))),
    ("2004-06~", (D(2004, 5, 1), D(2004, 7, 31))),
    ("2004-06-11%", (D(2004, 6, 9), D(2004, 6, 13))),
    # Level 1, "Unspecified digit(s) from the right"
    ("201X", (D(2010, 1, 1), D(2019, 12, 31))),
    ("20XX", (D(2000, 1, 1), D(2099, 12, 31))),
    ("2004-XX", (D(2004, 1, 1), D(2004, 12, 31))),
    ("1985-04-XX", (D(1985, 4, 1), D(1985, 4, 30))),
    ("1985-XX-XX", (D(1985, 1, 1), D(1985, 12, 31))),
    # Level 1, "Extended Interval (L1)": '..' open, empty side unknown; both
    # leave that end undetermined (None)
    ("1985-04-12/..", (D(1985, 4, 12), OPEN)),
    ("1985-04/..", (D(1985, 4, 1), OPEN)),
    ("1985/..", (D(1985, 1, 1), OPEN)),
    ("../1985-04-12", (OPEN, D(1985, 4, 12))),
    ("../1985-04", (OPEN, D(1985, 4, 30))),
    ("../1985", (OPEN, D(1985, 12, 31))),
    ("1985-04-12/", (D(1985, 4, 12), OPEN)),
    ("1985-04/", (D(1985, 4, 1), OPEN)),
    ("1985/", (D(1985, 1, 1), OPEN)),
    ("/1985-04-12", (OPEN, D(1985, 4, 12))),
    ("/1985-04", (OPEN, D(1985, 4, 30))),
    ("/1985", (OPEN, D(1985, 12, 31))),
    # Level 1, "Extended Interval (L1)" with qualified ends (from memory)
    ("1984~/2004-06", (D(1983, 1, 1), D(2004, 6, 30))),
    ("1984/2004-06~", (D(1984, 1, 1), D(2004, 7, 31))),
    ("1984~/2004~", (D(1983, 1, 1), D(2005, 12, 31))),
    ("1984?/2004%", (D(1983, 1, 1), D(2006, 12, 31))),
    ("1984-06?/2004-08?", (D(1984, 5, 1), D(2004, 9, 30))),
    ("1984-06-02?/2004-08-08~", (D(1984, 6, 1), D(2004, 8, 9))),
    ("1984-06-02?/..", (D(1984, 6, 1), OPEN)),
])
def test_level_1_examples(text, expected):
    assert span(text) == expected


# --- EDTF 2019, level 2 ------------------------------------------------------

@pytest.mark.parametrize("text, expected", [
    # Level 2, "Significant digits": 1950S2 is some year from 1900 to 1999
    ("1950S2", (D(1900, 1, 1), D(1999, 12, 31))),
    # Level 2, "Sub-year groupings": 2001-34 is the second quarter of 2001
    # (from memory); quadrimester and semester codes by the same table
    ("2001-34", (D(2001, 4, 1), D(2001, 6, 30))),
    ("2001-38", (D(2001, 5, 1), D(2001, 8, 31))),
    ("2001-41", (D(2001, 7, 1), D(2001, 12, 31))),
    ("2001-29", (D(2001, 9, 1), D(2001, 11, 30))),  # southern spring, common practice
    # Level 2, "Set representation": one of a set [..], all of a set {..}
    ("[1667, 1668, 1670..1672]", (D(1667, 1, 1), D(1672, 12, 31))),
    ("[..1760-12-03]", (OPEN, D(1760, 12, 3))),
    ("[1760-12..]", (D(1760, 12, 1), OPEN)),
    ("[1760-01, 1760-02, 1760-12..]", (D(1760, 1, 1), OPEN)),
    ("[1667, 1760-12]", (D(1667, 1, 1), D(1760, 12, 31))),
    ("[..1984]", (OPEN, D(1984, 12, 31))),
    ("{1667,1668,1670..1672}", (D(1667, 1, 1), D(1672, 12, 31))),
    ("{1960, 1961-12}", (D(1960, 1, 1), D(1961, 12, 31))),
    ("{..1984}", (OPEN, D(1984, 12, 31))),
    # Level 2, "Qualification" of single components (from memory): a
    # qualifier left of a component covers it alone, right of one covers it
    # and all before it; the widening unit is the finest component covered
    ("2004?-06-11", (D(2003, 6, 11), D(2005, 6, 11))),
    ("2004-06~-11", (D(2004, 5, 11), D(2004, 7, 11))),
    ("?2004-06-~11", (D(2003, 6, 11), D(2005, 6, 11))),
    ("2004-%06-11", (D(2004, 4, 11), D(2004, 8, 11))),
    ("2004-06-?11", (D(2004, 6, 10), D(2004, 6, 12))),
    # Level 2, "Unspecified Digit" (from memory)
    ("156X-12-25", (D(1560, 12, 25), D(1569, 12, 25))),
    ("15XX-12-25", (D(1500, 12, 25), D(1599, 12, 25))),
    ("1XXX-XX", (D(1000, 1, 1), D(1999, 12, 31))),
    ("1XXX-12", (D(1000, 12, 1), D(1999, 12, 31))),
    # Level 2, "Interval" (from memory)
    ("2004-06-~01/2004-06-~20", (D(2004, 5, 31), D(2004, 6, 21))),
    ("2004-06-XX/2004-07-03", (D(2004, 6, 1), D(2004, 7, 3))),
])
def test_level_2_examples(text, expected):
    assert span(text) == expected


@pytest.mark.parametrize("text", [
    "Y170000002",  # EDTF 2019, level 1, "Letter-prefixed calendar year"
    "Y-170000002",
    "-1985",  # level 1, "Negative calendar year": out of scope
    "Y-17E7",  # level 2, "Exponential year" (from memory)
    "Y171010000S3",  # level 2, "Significant digits" (from memory)
    "XXXX-12-XX",  # level 2, "Unspecified Digit": any year at all
    "0000",
    "9999~",  # widened past 9999
])
def test_years_outside_1_to_9999_raise(text):
    with pytest.raises(DateError, match=r"1 to 9999.*" + re.escape(repr(text))):
        parse_interval(text)


# --- the examples of the brief ------------------------------------------------

@pytest.mark.parametrize("text, expected", [
    ("1703-05-12", (D(1703, 5, 12), D(1703, 5, 12))),
    ("1703-05", (D(1703, 5, 1), D(1703, 5, 31))),
    ("1703", (D(1703, 1, 1), D(1703, 12, 31))),
    ("1703?", (D(1702, 1, 1), D(1704, 12, 31))),
    ("1703~", (D(1702, 1, 1), D(1704, 12, 31))),
    ("1703%", (D(1701, 1, 1), D(1705, 12, 31))),
    ("170X", (D(1700, 1, 1), D(1709, 12, 31))),
    ("17XX", (D(1700, 1, 1), D(1799, 12, 31))),
    ("1703-XX", (D(1703, 1, 1), D(1703, 12, 31))),
    ("1703-02-XX", (D(1703, 2, 1), D(1703, 2, 28))),
    ("1704-02-XX", (D(1704, 2, 1), D(1704, 2, 29))),
    ("1703-XX-31", (D(1703, 1, 31), D(1703, 12, 31))),
    ("1701/1705", (D(1701, 1, 1), D(1705, 12, 31))),
    ("1701-03/1701-06-15", (D(1701, 3, 1), D(1701, 6, 15))),
    ("../1705", (OPEN, D(1705, 12, 31))),
    ("1701/..", (D(1701, 1, 1), OPEN)),
    ("/1705", (OPEN, D(1705, 12, 31))),
    ("1701/", (D(1701, 1, 1), OPEN)),
    ("../..", (OPEN, OPEN)),
    ("1703-21", (D(1703, 3, 1), D(1703, 5, 31))),
    ("1703-22", (D(1703, 6, 1), D(1703, 8, 31))),
    ("1703-23", (D(1703, 9, 1), D(1703, 11, 30))),
    ("1703-24", (D(1703, 12, 1), D(1704, 2, 29))),  # winter runs into 1704, a leap year
    ("1703-33", (D(1703, 1, 1), D(1703, 3, 31))),
    ("[1701..1705]", (D(1701, 1, 1), D(1705, 12, 31))),
    ("[1701-05-01..1701-06-15]", (D(1701, 5, 1), D(1701, 6, 15))),
    ("[1701, 1703]", (D(1701, 1, 1), D(1703, 12, 31))),
    ("1703-05?-12", (D(1703, 4, 12), D(1703, 6, 12))),
    ("?1703-05-12", (D(1702, 5, 12), D(1704, 5, 12))),
    ("1703-05-31~", (D(1703, 5, 30), D(1703, 6, 1))),
    ("2001-21~/2002", (D(2001, 2, 1), D(2002, 12, 31))),  # a season widens by months
    ("1703-01~", (D(1702, 12, 1), D(1703, 2, 28))),  # month ends follow the month
    (" 1703 ", (D(1703, 1, 1), D(1703, 12, 31))),
])
def test_examples_gregorian(text, expected):
    assert span(text) == expected


def test_open_and_unknown_ends_are_none_not_the_parsers_guess():
    # The parser alone would put the unknown start of "/1705" ten years
    # before the end and the unknown end of "1701/" ten years after.
    assert parse_interval("/1705") == DateInterval(None, D(1705, 12, 31))
    assert parse_interval("1701/") == DateInterval(D(1701, 1, 1), None)


# --- calendars -------------------------------------------------------------------

@pytest.mark.parametrize("text, calendar, expected", [
    # Inter gravissimas (1582): Thursday 4 October (Julian) was followed by
    # Friday 15 October (Gregorian)
    ("1582-10-04", "julian", D(1582, 10, 14)),
    ("1582-10-05", "julian", D(1582, 10, 15)),
    # Calendar (New Style) Act 1750: in Britain Wednesday 2 September 1752 was
    # followed by Thursday 14 September 1752
    ("1752-09-02", "julian", D(1752, 9, 13)),
    ("1752-09-03", "julian", D(1752, 9, 14)),
    # The difference grows by one day in each century year that is a leap
    # year only in the Julian calendar (leap-year rules of Inter gravissimas):
    # 10 days in the 1600s, 11 in the 1700s, 12 in the 1800s, 13 in the 1900s
    ("1650-06-01", "julian", D(1650, 6, 11)),
    ("1700-02-28", "julian", D(1700, 3, 10)),
    ("1700-02-29", "julian", D(1700, 3, 11)),  # exists in the Julian calendar only
    ("1700-03-01", "julian", D(1700, 3, 12)),
    ("1750-06-01", "julian", D(1750, 6, 12)),
    ("1850-06-01", "julian", D(1850, 6, 13)),
    ("1950-06-01", "julian", D(1950, 6, 14)),
    # Newton's birth, 25 December 1642 Old Style = 4 January 1643 (from memory)
    ("1642-12-25", "julian", D(1643, 1, 4)),
    # Year starting 25 March (the style the Calendar (New Style) Act 1750
    # ended in Britain): 10 February 1703 is 10 February 1704 by the modern
    # year count, Julian, 21 February 1704 Gregorian
    ("1703-02-10", "julian-march", D(1704, 2, 21)),
    # Washington's birth, 11 February 1731 Old Style = 22 February 1732
    # (from memory)
    ("1731-02-11", "julian-march", D(1732, 2, 22)),
    ("1703-03-24", "julian-march", D(1704, 4, 4)),  # last day written 1703
    ("1703-03-25", "julian-march", D(1703, 4, 5)),  # first day written 1703
    ("1703-05-12", "julian-march", D(1703, 5, 23)),  # after 25 March: no year change
    ("1699-02-29", "julian-march", D(1700, 3, 11)),  # written 1699 = Julian 1700, a leap year
])
def test_known_julian_to_gregorian_days(text, calendar, expected):
    assert span(text, calendar) == (expected, expected)


@pytest.mark.parametrize("text, calendar, expected", [
    ("1700-02", "julian", (D(1700, 2, 11), D(1700, 3, 11))),  # 29 days in Julian February 1700
    ("1700", "julian", (D(1700, 1, 11), D(1701, 1, 11))),
    ("1703", "julian-march", (D(1703, 4, 5), D(1704, 4, 4))),  # 25 Mar 1703 .. 24 Mar 1704 Julian
    ("1703-02", "julian-march", (D(1704, 2, 12), D(1704, 3, 11))),  # February 1704, 29 days
    ("1703-03", "julian-march", (D(1703, 4, 5), D(1704, 4, 4))),  # March of two modern years
    ("1703~", "julian-march", (D(1702, 4, 5), D(1705, 4, 4))),
    ("1701/1705", "julian-march", (D(1701, 4, 5), D(1706, 4, 4))),
    ("[1760-01, 1760-12]", "julian-march", (D(1760, 12, 12), D(1761, 2, 11))),
    ("1703-24", "julian-march", (D(1703, 12, 12), D(1704, 3, 11))),  # seasons count from 1 January
    ("1703-05-12", "unknown", (D(1703, 5, 12), D(1703, 5, 23))),
    ("1703", "unknown", (D(1703, 1, 1), D(1704, 1, 11))),
    ("../1705", "unknown", (OPEN, D(1706, 1, 11))),
    ("1700-02-29", "unknown", (D(1700, 3, 11), D(1700, 3, 11))),  # only the Julian reading exists
])
def test_calendar_spans(text, calendar, expected):
    assert span(text, calendar) == expected


@pytest.mark.parametrize("text, calendar", [
    ("1700-02-29", "gregorian"),
    ("1701-02-29", "julian"),
    ("1701-02-29", "unknown"),
    ("1700-02-29", "julian-march"),  # written 1700 = Julian 1701, no 29 February
    ("1703-02-3X", "gregorian"),
    ("1703-02-30", "gregorian"),
])
def test_days_that_do_not_exist_raise(text, calendar):
    with pytest.raises(DateError, match="no such day") as raised:
        parse_interval(text, calendar)
    assert repr(text) in str(raised.value)


def test_julian_year_1_reaches_before_gregorian_year_1():
    with pytest.raises(DateError, match="1 to 9999"):
        parse_interval("0001-01-01", "julian")


@pytest.mark.parametrize("text", [
    "1703", "1703-05-12", "1703~", "17XX", "1703-24", "[1701, 1703]", "1701/1705", "../1705", "1703-05?-12",
])
def test_unknown_calendar_is_the_union_of_both_readings(text):
    readings = [parse_interval(text, calendar) for calendar in ("gregorian", "julian")]
    starts, ends = [r.earliest for r in readings], [r.latest for r in readings]
    both = parse_interval(text, "unknown")
    assert both.earliest == (None if None in starts else min(starts))
    assert both.latest == (None if None in ends else max(ends))
    assert both.latest > readings[0].latest  # the Julian reading ends later


@pytest.mark.parametrize("calendar", CALENDARS)
@pytest.mark.parametrize("text", [
    "1703", "1703-02", "1703-03", "1703-12-31", "1703~", "1703-02-28%", "17XX", "1703-XX-05",
    "1703-24", "1701/1705", "[1701, 1703..1704]", "{1701, 1702-03}", "1703-05?-12", "1703-01-~01",
])
def test_earliest_never_after_latest(text, calendar):
    interval = parse_interval(text, calendar)
    assert interval.earliest <= interval.latest


@pytest.mark.parametrize("calendar", CALENDARS)
@pytest.mark.parametrize("text", ["1703-05-12", "1703-02", "1703", "1700-02-29", "1703-03-24"])
def test_plain_dates_read_as_the_full_parser_reads_them(text, calendar):
    # Plain dates skip the grammar; the same day as a one-day interval goes through it.
    def outcome(written):
        try:
            return parse_interval(written, calendar)
        except DateError:
            return "DateError"

    assert outcome(text) == outcome(f"{text}/{text}")


# --- settings --------------------------------------------------------------------

def test_default_widening_is_one_step_two_for_both():  # common practice
    settings = DateSettings()
    assert (settings.approximate_years, settings.uncertain_years, settings.both_years) == (1, 1, 2)
    assert (settings.approximate_months, settings.uncertain_months, settings.both_months) == (1, 1, 2)
    assert (settings.approximate_days, settings.uncertain_days, settings.both_days) == (1, 1, 2)
    assert settings.seasons == DEFAULT_SEASONS


def test_approximate_years_setting_changes_only_approximate_years():
    assert span("1703~", approximate_years=5) == (D(1698, 1, 1), D(1708, 12, 31))
    assert span("1703~", approximate_years=0) == span("1703")
    assert span("1703?", approximate_years=5) == (D(1702, 1, 1), D(1704, 12, 31))
    assert span("1703-05~", approximate_years=5) == (D(1703, 4, 1), D(1703, 6, 30))


@pytest.mark.parametrize("text, settings, expected", [
    ("1703?", {"uncertain_years": 3}, (D(1700, 1, 1), D(1706, 12, 31))),
    ("1703%", {"both_years": 4}, (D(1699, 1, 1), D(1707, 12, 31))),
    ("1703-05~", {"approximate_months": 2}, (D(1703, 3, 1), D(1703, 7, 31))),
    ("1703-05?", {"uncertain_months": 12}, (D(1702, 5, 1), D(1704, 5, 31))),
    ("1703-05-12~", {"approximate_days": 10}, (D(1703, 5, 2), D(1703, 5, 22))),
    ("1703-05-12%", {"both_days": 0}, (D(1703, 5, 12), D(1703, 5, 12))),
    ("?1703-05-12", {"uncertain_days": 9}, (D(1702, 5, 12), D(1704, 5, 12))),  # year-only qualifier
    ("1703-21", {"seasons": {21: (4, 6)}}, (D(1703, 4, 1), D(1703, 6, 30))),
    ("1703-24", {"seasons": {24: (11, 1)}}, (D(1703, 11, 1), D(1704, 1, 31))),
])
def test_settings_change_the_interval(text, settings, expected):
    assert span(text, **settings) == expected


def test_season_missing_from_settings_raises():
    with pytest.raises(DateError, match="season 22.*'1703-22'"):
        span("1703-22", seasons={21: (3, 5)})


@pytest.mark.parametrize("bad", [{"approximate_years": -1}, {"both_days": 1.5}, {"seasons": {21: (3, 13)}}])
def test_settings_refuse_nonsense(bad):
    with pytest.raises(ValueError):
        DateSettings(**bad)


def test_settings_can_key_a_cache():
    assert hash(DateSettings()) == hash(DateSettings())
    assert DateSettings(approximate_years=3) != DateSettings()


# --- errors ------------------------------------------------------------------------

@pytest.mark.parametrize("text", [
    "17o3", "1703-5-12", "12/05/1703", "17030512", "1703-13", "about 1703", "..", "/", "[..]",
    "1701//1705", "../1705/..", "{}", "1701/1705/1709",
    "1984-1X",  # the parser fails inside with an AttributeError
    "1703-21~",  # qualified seasons are not accepted by the parser
])
def test_unparseable_text_raises_date_error_naming_the_value(text):
    with pytest.raises(DateError) as raised:
        parse_interval(text)
    assert repr(text) in str(raised.value)


def test_unparseable_message_gives_examples():
    with pytest.raises(DateError) as raised:
        parse_interval("17o3")
    assert str(raised.value) == "not an EDTF date: '17o3' (examples: 1703-05-12, 1703?, 1701/1705, [1701..1705])"


@pytest.mark.parametrize("text, calendar", [
    ("1705/1701", "gregorian"),
    ("1703-06/1703-05-31", "gregorian"),
    ("[1705..1701]", "gregorian"),
    ("1703-02/1703-04", "julian-march"),  # February 1703 of that style falls after April 1703
])
def test_interval_ending_before_it_starts_raises(text, calendar):
    with pytest.raises(DateError, match="ends before it starts"):
        parse_interval(text, calendar)


@pytest.mark.parametrize("text", ["", "   ", None])
def test_blank_text(text):
    with pytest.raises(DateError, match="empty"):
        parse_interval(text)
    assert interval_or_none(text) is None
    assert interval_or_none(text, "no such calendar") is None


def test_interval_or_none_parses_text():
    assert interval_or_none("1703-05", "julian") == parse_interval("1703-05", "julian")
    with pytest.raises(DateError):
        interval_or_none("1703", "no such calendar")


@pytest.mark.parametrize("name, expected", [
    ("gregorian", "gregorian"), (" Julian ", "julian"), ("julian_march", "julian-march"),
    ("Julian March", "julian-march"), ("UNKNOWN", "unknown"),
])
def test_check_calendar_normalizes(name, expected):
    assert check_calendar(name) == expected


@pytest.mark.parametrize("name", ["islamic", "", "old style", None])
def test_check_calendar_lists_accepted_values(name):
    with pytest.raises(DateError) as raised:
        check_calendar(name)
    assert all(calendar in str(raised.value) for calendar in CALENDARS)
    assert repr(name) in str(raised.value)


def test_parse_interval_checks_the_calendar():
    with pytest.raises(DateError, match="accepted"):
        parse_interval("1703", "islamic")


def test_interval_refuses_end_before_start():
    with pytest.raises(DateError):
        DateInterval(D(1705, 1, 1), D(1701, 1, 1))


# --- display -----------------------------------------------------------------------

@pytest.mark.parametrize("text, shown", [
    ("1703-05-12", "1703-05-12"),
    ("1703-05", "1703-05-01 – 1703-05-31"),
    ("../1705", "? – 1705-12-31"),
    ("1701/..", "1701-01-01 – ?"),
    ("../..", "? – ?"),
])
def test_format_interval(text, shown):
    assert format_interval(parse_interval(text)) == shown


# EDTF 2019, Level 1 "Seasons": 21 spring, 22 summer, 23 autumn, 24 winter; Level 2 "Sub-year
# groupings": 25-28 spring..winter of the northern hemisphere, 29-32 of the southern hemisphere,
# 33-36 quarters 1-4, 37-39 quadrimesters 1-3, 40-41 semesters 1-2 (from memory of the headings).
@pytest.mark.parametrize(("written", "words"), [
    ("1662-21", "spring 1662"), ("1662-22", "summer 1662"), ("1662-23", "autumn 1662"), ("1662-24", "winter 1662"),
    ("1662-26", "summer 1662 (northern hemisphere)"), ("1662-30", "summer 1662 (southern hemisphere)"),
    ("1662-33", "first quarter of 1662 (January–March)"), ("1662-36", "fourth quarter of 1662 (October–December)"),
    ("1662-37", "January–April 1662 (first four months)"), ("1662-39", "September–December 1662 (third four months)"),
    ("1662-40", "first half of 1662 (January–June)"), ("1662-41", "second half of 1662 (July–December)"),
    ("1701-21/1702-24", "spring 1701/winter 1702"), ("1705-23/..", "autumn 1705/.."),
])
def test_season_codes_in_words(written: str, words: str):
    assert season_words(written) == words
    parse_interval(written, "gregorian")  # and each is a date the store accepts


def test_every_season_code_has_words_and_other_dates_have_none():
    import edtf
    from edtf.appsettings import SEASONS

    for code in range(21, 42):  # every sub-year grouping of EDTF 2019, Levels 1 and 2
        assert isinstance(edtf.parse_edtf(f"1703-{code}"), edtf.Season)  # the edtf package reads it as a season
        words = season_words(f"1703-{code}")
        assert words and "1703" in words and f"-{code}" not in words, code
    # the four seasons of Level 1 carry the edtf package's own names
    assert {code: season_words(f"1703-{code}") for code in SEASONS} == {code: f"{name} 1703" for code, name in SEASONS.items()}
    for plain in ("1703-05-22", "1703-12", "1703", "1703-05-21/1703-06-24", "", None, "[1701, 1703]"):
        assert season_words(plain) is None, plain
