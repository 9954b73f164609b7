"""Two-mode workbooks for the tests: the Southern Women data, and a parish small enough to check on paper."""

from __future__ import annotations

import re

import networkx as nx

# The Southern Women data of Davis, Gardner & Gardner (1941), "Deep South", as shipped with
# networkx (nx.davis_southern_women_graph): 18 women, 14 events, 89 attendances.
DAVIS = nx.davis_southern_women_graph()
WOMEN = list(DAVIS.graph["top"])
EVENTS = list(DAVIS.graph["bottom"])


def woman_key(name: str) -> str:
    return "w-" + re.sub(r"[^a-z]+", "-", name.lower()).strip("-")


def event_key(name: str) -> str:
    return "g-" + name.lower()


def davis_workbook() -> dict[str, list[dict[str, str]]]:
    """Women as persons, events as groups, each attendance a membership attested by its own source."""
    attendances = sorted((w, e) if w in WOMEN else (e, w) for w, e in DAVIS.edges())
    return {
        "persons.csv": [{"key": woman_key(w), "name": w} for w in WOMEN],
        "groups.csv": [{"key": event_key(e), "name": f"Event {e[1:]}", "kind": "event"} for e in EVENTS],
        "sources.csv": [{"key": f"s-att-{n}", "kind": "register", "title": f"Attendance {w} at {e}"}
                        for n, (w, e) in enumerate(attendances, 1)],  # fmt: skip
        "memberships.csv": [
            {"key": f"m-att-{n}", "person": woman_key(w), "group": event_key(e), "role": "guest", "source": f"s-att-{n}",
             "evidence": "register", "certainty": "certain"}
            for n, (w, e) in enumerate(attendances, 1)
        ],  # fmt: skip
    }


# A parish and a guild, checked on paper (test_twomode.py says what each pair should get):
#   parish: Aart with a recorded term 1650-1660 (register of 1655); Bette known only from a
#           register entry of 1712 (no term); Cas with a recorded start 1705 and an entry of 1715
#           (no end); Dirk, unidentified, from an undated list.
#   guild:  Aart from a roll of 1655; Bette with a recorded term 1650-1700 (roll of 1690).
#   The guild is a sub-group of the parish's confraternity, to give the tree a parent.
MARKUP_GROUP = '<b>Guild</b> of "Smiths" & <script>alert(1)</script>'
MARKUP_PERSON = '<script>alert("x")</script> Dirk & Sons'


def parish_workbook() -> dict[str, list[dict[str, str]]]:
    """The parish world: terms where recorded, register dates elsewhere, names with markup."""
    def membership(key, person, group, source, role="member", start="", end=""):  # noqa: ANN001, ANN202
        return {"key": key, "person": person, "group": group, "role": role, "start": start, "end": end,
                "source": source, "locus": f"fol. {key[-1]}", "evidence": "register", "certainty": "certain"}  # fmt: skip

    return {
        "places.csv": [{"key": "pl-ostmere", "name": "Østmere"}],
        "persons.csv": [
            {"key": "p-aart", "name": "Aart Velde", "sort_name": "Velde, Aart"},
            {"key": "p-bette", "name": "Bette Brink", "sort_name": "Brink, Bette"},
            {"key": "p-cas", "name": "Cas Oom", "sort_name": "Oom, Cas"},
            {"key": "p-dirk", "name": MARKUP_PERSON, "unidentified": "yes"},
        ],
        "groups.csv": [
            {"key": "g-confraternity", "name": "Confraternity of Østmere", "kind": "confraternity", "place": "pl-ostmere",
             "start": "1640", "end": "1720"},
            {"key": "g-parish", "name": "St. Ælfric, Østmere", "kind": "parish", "place": "pl-ostmere", "start": "1600~"},
            {"key": "g-guild", "name": MARKUP_GROUP, "kind": "guild", "parent": "g-confraternity", "note": "smiths & farriers"},
        ],  # fmt: skip
        "sources.csv": [
            {"key": "s-reg-1655", "kind": "register", "title": "Parish register", "date": "1655"},
            {"key": "s-reg-1712", "kind": "register", "title": "Parish register", "date": "1712"},
            {"key": "s-reg-1715", "kind": "register", "title": "Parish register", "date": "1715-03-02"},
            {"key": "s-list", "kind": "list", "title": "Undated list of parishioners"},
            {"key": "s-roll-1655", "kind": "roll", "title": "Guild roll", "date": "1655"},
            {"key": "s-roll-1690", "kind": "roll", "title": "Guild roll", "date": "1690"},
        ],
        "memberships.csv": [
            membership("m-p1", "p-aart", "g-parish", "s-reg-1655", start="1650", end="1660"),
            membership("m-p2", "p-bette", "g-parish", "s-reg-1712"),
            membership("m-p3", "p-cas", "g-parish", "s-reg-1715", role="churchwarden", start="1705"),
            membership("m-p4", "p-dirk", "g-parish", "s-list"),
            membership("m-g1", "p-aart", "g-guild", "s-roll-1655"),
            membership("m-g2", "p-bette", "g-guild", "s-roll-1690", role="master", start="1650", end="1700"),
        ],
    }
