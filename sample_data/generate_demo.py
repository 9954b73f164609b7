#!/usr/bin/env python3
"""Write the demo workbook of Attesta: an invented world of letters and patronage, 1688-1740.

Every person, place, archive, collection and publication written here is invented.
The output is deterministic: one fixed seed, rows in a fixed order, UTF-8 with
"\\n" line endings, so two runs give byte-identical files.

    python sample_data/generate_demo.py [OUTDIR]      (default: sample_data/demo/)
"""
from __future__ import annotations

import csv
import random
import re
import sys
import unicodedata
from datetime import date, timedelta
from pathlib import Path

SEED = 1712
DEFAULT_OUT = Path(__file__).resolve().parent / "demo"
FIRST_YEAR, LAST_YEAR = 1688, 1740
WEST, EAST, QUELL, BROKER = "west", "east", "quellinghe", "broker"

# key: (name, variants, latitude, longitude, cluster, calendar of local documents)
TOWNS = {
    "pl-kalmstede": ("Kalmstede", "Calmstede|Kalmstädt", 52.412, 7.118, WEST, "gregorian"),
    "pl-ambelhaven": ("Ambelhaven", "Amblehaven|Ambelhafen", 53.184, 6.047, WEST, "gregorian"),
    "pl-morvenstadt": ("Morvenstadt", "Morvenstad|Morwenstat", 51.623, 6.712, WEST, "gregorian"),
    "pl-velderbrug": ("Velderbrug", "Velderbrugge|Felderbruck", 53.371, 9.842, EAST, "gregorian"),
    "pl-ornsval": ("Ørnsval", "Örnsval|Oernswal|Ornsval", 53.917, 11.384, EAST, "julian"),
    "pl-skelmore": ("Skelmøre", "Skelmöre|Schelmør|Skelmoer", 53.548, 11.793, EAST, "julian"),
    "pl-quellinghe": ("Quellinghe", "Quelling|Kwellinge", 50.741, 8.934, QUELL, "gregorian"),
}
SUMMER_SEAT = ("pl-ravelhorst", "Ravelhorst", "Huis Ravelhorst|Ravelhorst House", 52.503, 7.265)
JULIAN_TOWNS = ("pl-ornsval", "pl-skelmore")
CLUSTER_TOWNS = {c: [k for k, t in TOWNS.items() if t[4] == c] for c in (WEST, EAST, QUELL)}

REPOSITORIES = [  # key, name, place
    ("rep-kalmstede-ta", "Kalmstede Town Archive", "pl-kalmstede"),
    ("rep-aldersloh-house", "Aldersloh House Archive (private)", "pl-kalmstede"),
    ("rep-ksne-library", "Library of the Kalmstede Society of Natural Enquiry", "pl-kalmstede"),
    ("rep-ambelhaven-ca", "Ambelhaven City Archive", "pl-ambelhaven"),
    ("rep-morvenstadt-ra", "Morvenstadt Regional Archive", "pl-morvenstadt"),
    ("rep-velderbrug-sa", "Velderbrug State Archive", "pl-velderbrug"),
    ("rep-ornsval-da", "Ørnsval Diocesan Archive", "pl-ornsval"),
    ("rep-quellinghe-pl", "Quellinghe Parish Library", "pl-quellinghe"),
]
COLLECTIONS = [  # key, repository, name, reference code, note
    ("col-afp", "rep-aldersloh-house", "Aldersloh family papers", "AFP",
     "Holds nearly every letter Matthias Aldersloh received, 1688-1731."),
    ("col-afp-lb", "rep-aldersloh-house", "Letterbooks of Matthias Aldersloh", "AFP-LB",
     "Copies of his outgoing letters, 1694-1729; some originals survive elsewhere."),
    ("col-ksne-letters", "rep-ksne-library", "Correspondence of the Society", "KSNE-C", ""),
    ("col-ksne-minutes", "rep-ksne-library", "Minute books of the Society", "KSNE-M", ""),
    ("col-kal-council", "rep-kalmstede-ta", "Council of Kalmstede: minutes and registers", "KTA-1", ""),
    ("col-kal-notarial", "rep-kalmstede-ta", "Notarial archive of Kalmstede", "KTA-NA", ""),
    ("col-kal-church", "rep-kalmstede-ta", "Church books of Kalmstede", "KTA-KB", ""),
    ("col-kal-letters", "rep-kalmstede-ta", "Private letters, miscellaneous", "KTA-PL", ""),
    ("col-amb-council", "rep-ambelhaven-ca", "Council of Ambelhaven: minutes and letters", "ACA-1", ""),
    ("col-amb-merchants", "rep-ambelhaven-ca", "Merchant papers", "ACA-118", ""),
    ("col-amb-guilds", "rep-ambelhaven-ca", "Guild and company records", "ACA-GC", ""),
    ("col-amb-church", "rep-ambelhaven-ca", "Church books of Ambelhaven", "ACA-KB", ""),
    ("col-mor-town", "rep-morvenstadt-ra", "Town and family papers of Morvenstadt", "MRA-2", ""),
    ("col-mor-church", "rep-morvenstadt-ra", "Church books of Morvenstadt", "MRA-KB", ""),
    ("col-vel-town", "rep-velderbrug-sa", "Town council and guilds of Velderbrug", "VSA-Rep. 3", ""),
    ("col-vel-merchants", "rep-velderbrug-sa", "Merchant correspondence", "VSA-Rep. 12", ""),
    ("col-vel-notarial", "rep-velderbrug-sa", "Notarial protocols", "VSA-Rep. 15", ""),
    ("col-vel-church", "rep-velderbrug-sa", "Church books of Velderbrug", "VSA-KB", ""),
    ("col-orn-consistory", "rep-ornsval-da", "Consistory archive of Ørnsval", "ODA-K", ""),
    ("col-orn-church", "rep-ornsval-da", "Church books of Ørnsval and Skelmøre", "ODA-KB", ""),
    ("col-orn-deposits", "rep-ornsval-da", "Deposited family papers", "ODA-Dep. 7",
     "Documents from Ørnsval and Skelmøre are dated in the Julian calendar."),
    ("col-qu-kelterer", "rep-quellinghe-pl", "Kelterer letters", "QPL-K", ""),
]
REF_CODE = {c[0]: c[3] for c in COLLECTIONS}
LETTERS, DEEDS, CHURCH, COUNCIL = range(4)
TOWN_COLLECTIONS = {  # where a town's letters, deeds, church books and council records are kept
    "pl-kalmstede": ("col-kal-letters", "col-kal-notarial", "col-kal-church", "col-kal-council"),
    "pl-ambelhaven": ("col-amb-merchants", "col-amb-council", "col-amb-church", "col-amb-council"),
    "pl-morvenstadt": ("col-mor-town", "col-mor-town", "col-mor-church", "col-mor-town"),
    "pl-velderbrug": ("col-vel-merchants", "col-vel-notarial", "col-vel-church", "col-vel-town"),
    "pl-ornsval": ("col-orn-deposits", "col-orn-consistory", "col-orn-church", "col-orn-consistory"),
    "pl-skelmore": ("col-orn-deposits", "col-vel-notarial", "col-orn-church", "col-orn-deposits"),
    "pl-quellinghe": ("col-qu-kelterer",) * 4,
}
FAMILIES = [  # surname, particle, town, trade, head's given name, born, died (None: drawn), named children
    ("Aldersloh", "", "pl-kalmstede", "merchant", "Gerrit", 1631, 1699, [("Matthias", "m", 1662, 1731)]),
    ("Quintijn", "", "pl-kalmstede", "schoolmaster", "Anselm", 1638, 1701, [("Rémy", "m", 1667, 1733)]),
    ("Kranevelt", "van", "pl-kalmstede", "landowner", "Everard", 1648, 1722, []),
    ("Tillenbroeck", "", "pl-kalmstede", "printer", "Joost", 1652, None, []),
    ("Moerschot", "", "pl-kalmstede", "pastor", "Theodoor", 1645, None, []),
    ("Olderinck", "", "pl-ambelhaven", "merchant", "Cornelis", 1644, None, []),
    ("Schuttelaer", "", "pl-ambelhaven", "merchant", "Pieter", 1650, None, []),
    ("Wyntjes", "", "pl-ambelhaven", "shipmaster", "Floris", 1655, None, []),
    ("Brummel", "ten", "pl-ambelhaven", "merchant", "Jacob", 1649, None, []),
    ("Loosveldt", "", "pl-ambelhaven", "notary", "Adriaan", 1646, None, []),
    ("Verhaselt", "", "pl-morvenstadt", "physician", "Lodewijk", 1643, None, []),
    ("Brandecker", "", "pl-morvenstadt", "apothecary", "Willem", 1651, None, []),
    ("Duyvelaer", "", "pl-morvenstadt", "schoolmaster", "Maarten", 1654, None, []),
    ("Brüggemann", "", "pl-velderbrug", "merchant", "Hinrich", 1645, None, []),
    ("Hollerbeck", "", "pl-velderbrug", "merchant", "Lüder", 1650, None, []),
    ("Rautenkrantz", "", "pl-velderbrug", "merchant", "Claus", 1647, None, []),
    ("Everdingk", "", "pl-velderbrug", "notary", "Detlef", 1652, None, []),
    ("Bjørnvik", "", "pl-ornsval", "pastor", "Søren", 1649, 1724, []),
    ("Skjeldrup", "", "pl-ornsval", "merchant", "Peder", 1653, None, []),
    ("Falkvedt", "", "pl-ornsval", "shipmaster", "Anders", 1656, None, []),
    ("Ørnholt", "", "pl-skelmore", "merchant", "Jørgen", 1646, None, []),
    ("Sørbeck", "von", "pl-skelmore", "landowner", "Henning", 1651, 1727, []),
    ("Løvgaard", "", "pl-skelmore", "physician", "Niels", 1648, None, []),
]
GIVEN = {
    WEST: {"m": "Gerrit Matthias Cornelis Jacob Willem Hendrik Pieter Everard Joost Adriaan Floris Lodewijk Maarten "
                "Theodoor Abraham".split(),
           "f": "Hélène Geertruyd Maria Anna Elisabeth Margriet Catharina Aleid Josina Cornelia Sophia "
                "Amélie".split()},
    EAST: {"m": "Jürgen Johann Hinrich Søren Bjørn Niels Peder Christoffer Anders Lüder Detlef Claus Tönnies "
                "Jørgen Henning".split(),
           "f": "Anna Margarethe Kirsten Birgitte Dorothea Sophie Ingeborg Gesche Ilsabe Mette Karen".split()},
}
SURNAMES = {
    WEST: "Vennekamp Ambrecht Stoutenbeek Draeyer Kettelaer Wolfsweer Brakelmans Gansoirt Mollenkamp Verlooren "
          "Tackelaer Hemmerick Lanckaert Pellicaen Marchaudier Vaussenat".split(),
    EAST: "Timmerloh Hasselbarth Brakvold Tiedemer Gravholt Lüttjens Harrebøl Kossmer Volkerding Rødsten Mørckholt "
          "Jessendorf Wittrock Pøhlsen Stüvemann Dalhøj".split(),
}
EQUIV = {g: forms.split("/") for g, forms in (pair.split("=") for pair in (  # other forms of a given name
    "Gerrit=Gerard/Gerhardus Matthias=Mathijs/Matthijs Cornelis=Cornelius/Kees Jacob=Jacques/Jakob "
    "Willem=Wilhelm/Guillaume Hendrik=Heinrich/Henri Pieter=Petrus/Pierre Everard=Evert/Eberhard "
    "Rémy=Remigius/Remi Joost=Jodocus/Josse Adriaan=Adrianus/Arie Lodewijk=Ludovicus/Louis Maarten=Martinus/Martin "
    "Theodoor=Dirk/Theodorus Hélène=Helena/Heleen Geertruyd=Geertruid/Gertrude Maria=Marie/Maritje Anna=Anne/Anneke "
    "Elisabeth=Lijsbeth/Isabelle Margriet=Margaretha/Marguerite Catharina=Catrijn/Katharina Aleid=Aleida/Alijt "
    "Cornelia=Neeltje/Cornélie Amélie=Amalia/Emilia Jürgen=Georg/Jurgen Johann=Jehan/Hans/Johannes "
    "Hinrich=Heinrich/Hinrick Søren=Severin/Sören Bjørn=Björn/Biørn Niels=Nicolaus/Nils Peder=Peter/Petrus "
    "Christoffer=Christophorus/Stoffer Anders=Andreas/Andres Lüder=Luder/Lüdert Tönnies=Antonius/Tönnjes "
    "Claus=Nicolaus/Klaus Jørgen=Jörgen/Georgius Margarethe=Grete/Margreta Kirsten=Christina/Kirstine "
    "Gesche=Gesa/Gesken Ilsabe=Elisabeth/Ilsabé Dorothea=Dorthe/Dorotea Karen=Catharina/Kaaren").split())}
SPELLING = [("ø", "ö"), ("ø", "oe"), ("Ø", "Ö"), ("ü", "ue"), ("ü", "u"), ("é", "e"), ("ij", "y"), ("y", "ij"),
            ("ck", "k"), ("C", "K"), ("K", "C"), ("ae", "aa"), ("aa", "ae"), ("dt", "t"), ("th", "t"), ("ll", "l"),
            ("tt", "t"), ("ie", "y"), ("ei", "ey"), ("v", "w"), ("W", "V"), ("f", "ff"), ("s", "sz"), ("oo", "o"),
            ("ee", "e"), ("rt", "rdt"), ("rs", "rss"), ("ö", "ø")]
LEARNED = ["physician", "pastor", "schoolmaster", "apothecary", "tutor", "lawyer", "surveyor", "engineer",
           "instrument maker", "organist", "printer", "notary", "bookseller", "engraver", "painter"]
TRADING = ["merchant", "factor", "shipmaster"]
LETTER_QUOTES = ["your most obedient & humble servant", 'the "Hope" is come in safe with the wine', "I kiss your hands",
                 "send me word by the next post", "prices here are low & money scarce", "my wife greets yours",
                 'the "Fortuna" lies icebound below the town', "in haste, from the counting-house",
                 "the bearer will tell you the rest by mouth", "forgive the long silence, I have been ill",
                 "the books you asked for go by the carrier", "we wait on the council's answer"]
HEADERS = {name: cols.split() for name, cols in {
    "repositories.csv": "key name place note",
    "collections.csv": "key repository name reference_code note",
    "places.csv": "key name variants latitude longitude identifier",
    "persons.csv": "key name sort_name kind unidentified living variants born died calendar identifiers note",
    "groups.csv": "key name kind place parent start end note",
    "sources.csv": "key repository collection reference kind title author publisher year pages date calendar "
                   "place_from place_to received copy_of url note",
    "relation_kinds.csv": "key label directed role_a role_b parent",
    "relations.csv": "key person other kind source locus evidence date calendar place certainty identification "
                     "person_as_written other_as_written quote note",
    "memberships.csv": "key person group role start end source locus evidence date certainty quote note",
    "facts.csv": "key person fact value place date source locus certainty quote note"}.items()}
RELATION_KINDS = [("letter", "letter", "yes", "sender", "recipient", ""), ("kinship", "kinship", "no", "", "", ""),
                  ("parent", "parent and child", "yes", "parent", "child", "kinship"),
                  ("sibling", "siblings", "no", "", "", "kinship"), ("spouse", "spouses", "no", "", "", "kinship"),
                  ("patronage", "patronage", "yes", "patron", "client", ""),
                  ("business", "business", "no", "", "", ""), ("friendship", "friendship", "no", "", "", "")]
SOURCE_BLOCKS = ["reg", "deed", "diary", "let", "lbc", "ed"]  # order of sources in the file; copies after originals
KEY_RE = re.compile(r"^[A-Za-z0-9._:-]{1,100}$")


def slug(text):
    text = "".join(c for c in unicodedata.normalize("NFKD", text.replace("ø", "o").replace("Ø", "O"))
                   if not unicodedata.combining(c))
    return re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")


def drift(rng, word):
    """Return the word with one plausible spelling change."""
    options = [(a, b) for a, b in SPELLING if a in word]
    if not options:
        return word + "e" if word[-1] not in "aeiou" else word[:-1] + "a"
    a, b = rng.choice(options)
    at = rng.choice([m.start() for m in re.finditer(re.escape(a), word)])
    return word[:at] + b + word[at + len(a):]


def to_julian(d):
    """Return the Gregorian day d labelled as the Julian calendar labels it."""
    d = date(1700, 3, 12) if d == date(1700, 3, 11) else d  # Julian 29 February 1700 has no such label
    return d - timedelta(days=10 if d < date(1700, 3, 11) else 11)


def rand_day(rng, y0, y1):
    return date.fromordinal(rng.randint(date(y0, 1, 1).toordinal(), date(y1, 12, 31).toordinal()))


def edtf(rng, d, precise=0.82):
    """Return d as EDTF text: usually exact, sometimes uncertain, approximate, vague or blank."""
    if rng.random() < precise:
        return d.isoformat()
    y, m = d.year, d.month
    forms = [(25, lambda: f"{y}-{m:02d}"), (12, lambda: str(y)), (10, lambda: d.isoformat() + "?"),
             (8, lambda: f"{y}?"), (8, lambda: f"{y}~"), (7, lambda: f"{y}-{m:02d}~"),
             (6, lambda: f"{y - rng.randint(1, 3)}/{y + rng.randint(0, 2)}"), (5, lambda: f"{str(y)[:3]}X"),
             (6, lambda: f"[{d - timedelta(rng.randint(5, 40))}..{d + timedelta(rng.randint(5, 40))}]"),
             (6, lambda: f"{y}-{21 + (m - 3) // 3}" if 3 <= m <= 11 else f"{y}-{m:02d}"), (7, lambda: "")]
    return rng.choices([f for _, f in forms], weights=[n for n, _ in forms])[0]()


def grade(rng, probable=0.1, possible=0.03):
    r = rng.random()
    return "possible" if r < possible else "probable" if r < possible + probable else "certain" if r < 0.55 else ""


def overlap(*people):
    y0, y1 = max(p["_active"][0] for p in people), min(p["_active"][1] for p in people)
    return (y0, y1) if y0 <= y1 else None


class World:
    """The invented world as lists of rows; working fields that are not written start with "_"."""

    def __init__(self, seed=SEED):
        self.rng = random.Random(seed)
        self.places, self.repositories, self.collections, self.groups, self.persons = [], [], [], [], []
        self.sources, self.relations, self.memberships, self.facts, self.families = [], [], [], [], []
        self.index, self.group_by, self.volumes, self.letters_between, self.taken = {}, {}, {}, {}, set()

    def key(self, base):
        k, n = base[:94], 2
        while k in self.taken:
            k, n = f"{base[:94]}-{n}", n + 1
        self.taken.add(k)
        return k

    def find(self, key):
        return self.index[key]

    def person(self, given, surname, sex, town, by, dy, occ="", particle="", *, cluster=None, name=None, key=None,
               kind="individual", unidentified=False, isolate=False, note="", variants=None):
        rng, cal = self.rng, TOWNS[town][5]
        name = name or " ".join(x for x in (given, particle, surname) if x)
        dy = max(dy, 1690 + rng.randint(0, 8)) if dy else dy  # everyone lives into the decades of the demo
        p = dict(key=self.key(key or "p-" + slug(name)), name=name, kind=kind, note=note,
                 sort_name=f"{surname}, {given} {particle}".strip() if surname and given else name,
                 unidentified="yes" if unidentified else rng.choice(["", "no"]), living=rng.choice(["", "no", "no"]),
                 born=self.life_date(by, cal) if by else "",
                 died=self.life_date(dy, cal) if dy and dy <= LAST_YEAR else "",
                 identifiers=f"local:P{len(self.persons) + 1:04d}" if rng.random() < 0.85 else "",
                 _given=given, _surname=surname, _particle=particle, _sex=sex, _town=town, _occ=occ, _by=by, _dy=dy,
                 _cluster=cluster or TOWNS[town][4], _isolate=isolate, _unid=unidentified, _srcs=[])
        dated_julian = cal != "gregorian" and (p["born"] or p["died"])
        p["calendar"] = ("unknown" if rng.random() < 0.1 else cal) if dated_julian else ""
        y1 = min(dy or LAST_YEAR, LAST_YEAR)
        p["_active"] = (min(max((by or 1650) + 18, FIRST_YEAR), y1), y1)
        if variants is None:
            wanted, variants = rng.choice([0, 1, 1, 2, 2, 3]) if given else 0, []
            for _ in range(10 * wanted):
                form = self.name_form(p)
                if len(variants) < wanted and form != name and form not in variants:
                    variants.append(form)
        p["variants"] = variants
        self.persons.append(p)
        self.index[p["key"]] = p
        return p

    def life_date(self, year, cal):
        d = rand_day(self.rng, year, year)
        return edtf(self.rng, to_julian(d) if cal != "gregorian" else d, precise=0.3)

    def name_form(self, p):
        rng, g, s, r = self.rng, p["_given"], p["_surname"], self.rng.random()
        if r < 0.35 and g in EQUIV:
            g = rng.choice(EQUIV[g])
        elif r < 0.75:
            s = drift(rng, s)
        elif r < 0.85 and p["_sex"] == "m":
            s = (s[:-1] if s[-1] in "aeiou" else s) + "ius"
        else:
            g, s = drift(rng, g), drift(rng, s)
        return " ".join(x for x in (g, p["_particle"], s) if x)

    def as_written(self, p):
        """Return the name as a document writes it, and whether that leaves the identification open."""
        rng, r = self.rng, self.rng.random()
        if not p["_given"] or r < 0.3:
            return rng.choice([p["name"]] + p["variants"]), False
        if r < 0.65 and p["variants"]:
            return rng.choice(p["variants"]), False
        if r < 0.9:
            return self.name_form(p), False
        west = p["_cluster"] != EAST
        title = ("Mons." if west else "Herr") if p["_sex"] == "m" else ("Juffr." if west else "Jungfer")
        return f"{title} {p['_given'][0]}. {drift(rng, p['_surname'])}", True

    def cluster(self, name):
        return [p for p in self.persons if p["_cluster"] == name and p["kind"] == "individual"
                and not p["_isolate"] and not p["_unid"]]

    # -- sources
    def source(self, block, sort, col="", **fields):
        s = {h: "" for h in HEADERS["sources.csv"]}
        s.update(fields, collection=col, repository=dict((c[0], c[1]) for c in COLLECTIONS).get(col, ""))
        s.update(_block=block, _sort=sort, _n=len(self.sources), _autoref=bool(col) and not s["reference"])
        self.sources.append(s)
        return s

    def volume(self, col, kind, title, y0, y1, town):
        """Return the register volume covering y0-y1 (one source), creating it once."""
        if (col, title, y0) not in self.volumes:
            span = str(y0) if y0 == y1 else f"{y0}-{y1}"
            self.volumes[col, title, y0] = self.source(
                "reg", f"{col} {y0} {title}", col, kind=kind, title=f"{title}, {span}", date=span.replace("-", "/"),
                calendar="julian" if town in JULIAN_TOWNS else "", reference=f"{REF_CODE[col]} {len(self.volumes) + 1}",
                _slug=f"reg-{slug(title)}-{y0}")
        return self.volumes[col, title, y0]

    def church_book(self, town, year):
        first = 1680 if year < 1710 else 1710
        return self.volume(TOWN_COLLECTIONS[town][CHURCH], "register", f"Church book of {TOWNS[town][0]}",
                           first, first + 29 + 6 * (first == 1710), town)

    def deed(self, kind, title, d, town, parties=()):
        cal = "julian" if town in JULIAN_TOWNS else ""
        s = self.source("deed", d.toordinal(), TOWN_COLLECTIONS[town][DEEDS], kind=kind, title=title,
                        date=self.date_text(d, cal, 0.9), calendar=cal, place_from=town)
        for p in parties:
            p["_srcs"].append(s)
        return s

    # -- attestations
    def relate(self, a, b, kind, src, evidence="", locus="", when="", calendar="", place="", certainty=None,
               written=0.0, quote="", note=""):
        rng, ident, aw, bw = self.rng, "", "", ""
        if rng.random() < written:
            aw, unsure = self.as_written(a)
            ident = "probable" if unsure else ident
        if rng.random() < written and a is not b:
            bw, unsure = self.as_written(b)
            ident = ("possible" if rng.random() < 0.3 else "probable") if unsure else ident
        self.relations.append(dict(
            person=a["key"], other=b["key"], kind=kind, source=src, locus=locus, evidence=evidence, date=when,
            calendar=calendar, place=place, certainty=grade(rng) if certainty is None else certainty,
            identification=ident or ("certain" if rng.random() < 0.02 else ""), person_as_written=aw,
            other_as_written=bw, quote=quote, note=note))

    def member(self, p, group, role, src, start="", end="", locus="", evidence="register", when="", quote="", note=""):
        self.memberships.append(dict(person=p["key"], group=group, role=role, start=start, end=end, source=src,
                                     locus=locus or self.folio(), evidence=evidence, date=when,
                                     certainty=grade(self.rng, 0.06, 0.02), quote=quote, note=note))

    def fact(self, p, fact, value, src, place="", when="", locus="", certainty=None, quote="", note=""):
        self.facts.append(dict(person=p["key"], fact=fact, value=value, place=place, date=when, source=src,
                               locus=locus or self.folio(), quote=quote, note=note,
                               certainty=grade(self.rng, 0.08, 0.03) if certainty is None else certainty))

    def folio(self):
        r = self.rng
        return f"fol. {r.randint(1, 240)}{r.choice('rv')}" + (f", no. {r.randint(1, 30)}" if r.random() < 0.4 else "")

    # -- letters
    def place_of(self, p, d):
        if p is self.broker:
            return "pl-ambelhaven" if d.year <= 1718 else "pl-velderbrug"
        if p.get("_summer") and 6 <= d.month <= 9:
            return p["_summer"]
        return "" if self.rng.random() < 0.05 else p["_town"]

    def calendar_for(self, place, p):
        r = self.rng.random()
        if place in JULIAN_TOWNS or (not place and p["_town"] in JULIAN_TOWNS):
            if not place or r < 0.06:
                return "unknown"
            return "julian-march" if place == "pl-skelmore" and r < 0.3 else "julian"
        return "gregorian" if r < 0.15 else ""

    def date_text(self, d, cal, precise=0.82):
        label = to_julian(d) if cal in ("julian", "julian-march", "unknown") else d
        if cal == "julian-march":  # the year begins on 25 March
            label = label.replace(day=min(label.day, 28)) if label.month == 2 else label
            return (label.replace(year=label.year - 1) if (label.month, label.day) < (3, 25) else label).isoformat()
        return edtf(self.rng, label, precise)

    def home(self, p):
        """Return the collection where the letters p received survive."""
        return "col-afp" if p is self.owner else p.get("_papers") or TOWN_COLLECTIONS[p["_town"]][LETTERS]

    def letter(self, a, b, d=None, evidence="original", col=None, copy_of=None, certainty=None, note=""):
        """Add a letter from a to b (a memorandum when a is b) and its attestation; return the source."""
        rng, span = self.rng, overlap(a, b)
        if span is None:
            return None
        d = d or rand_day(rng, *span)
        if copy_of:
            fields = {f: copy_of[f] for f in ("date", "calendar", "place_from", "place_to")}
        else:
            place_from = self.place_of(a, d)
            cal = self.calendar_for(place_from, a)
            if cal == "julian-march" and rng.random() < 0.7:
                d = date(d.year, rng.randint(1, 3), rng.randint(1, 24))
            place_to = "" if a is b or rng.random() < 0.12 else self.place_of(b, d)
            fields = dict(date=self.date_text(d, cal), calendar=cal, place_from=place_from, place_to=place_to)
            if re.fullmatch(r"\d{4}-\d\d-\d\d", fields["date"]) and place_to and rng.random() < 0.1 and \
                    cal in ("", "gregorian", "julian") and (cal == "julian") == (place_to in JULIAN_TOWNS):
                later = d + timedelta(days=rng.randint(2, 24))
                fields["received"] = (to_julian(later) if cal == "julian" else later).isoformat()
        prefix = {"draft": "Draft, ", "copy": "Letterbook copy, "}.get(evidence, "")
        title = f"Memorandum of {a['name']}" if a is b else f"{prefix}{a['name']} to {b['name']}"
        col = col or (self.home(a) if evidence == "draft" or a is b else self.home(b))
        s = self.source("lbc" if evidence == "copy" else "let", d.toordinal(), col, title=title, copy_of=copy_of or "",
                        kind="memorandum" if a is b else "letter", note=note, **fields)
        if evidence == "copy":
            s["reference"], s["_autoref"] = f"AFP-LB {1 + (d.year - 1694) // 6}", False
        if rng.random() < 0.04:
            s["url"] = f"https://example.org/archive/{slug(col)}/{len(self.sources):05d}"
        locus = {"copy": f"fol. {rng.randint(2, 199)}{rng.choice('rv')}", "draft": "fol. 1r"}.get(
            evidence, rng.choice(["", "", "fol. 1r-2v", "fol. 1r"]))
        self.relate(a, b, "letter", s, evidence="" if evidence == "original" and rng.random() < 0.6 else evidence,
                    locus=locus, certainty=certainty, written=0.45,
                    quote=rng.choice(LETTER_QUOTES) if rng.random() < 0.1 else "")
        a["_srcs"].append(s)
        b["_srcs"].append(s)
        if a is not b and evidence in ("original", "copy"):
            self.letters_between.setdefault((a["key"], b["key"]), []).append(s)
        return s

    def exchange(self, a, b, n_ab, n_ba):
        for _ in range(n_ab):
            self.letter(a, b)
        for _ in range(n_ba):
            self.letter(b, a)


def build_places_and_archives(w):
    rows = [(k,) + t[:4] for k, t in TOWNS.items()] + [SUMMER_SEAT]
    for i, (k, name, variants, lat, lon) in enumerate(rows):
        w.places.append(dict(key=k, name=name, variants=variants, latitude=f"{lat:.3f}", longitude=f"{lon:.3f}",
                             identifier=f"local:pl-{i + 1}" if i % 3 != 2 else ""))
    for k, name, place in REPOSITORIES:
        note = "Kept by the family to this day." if "house" in k else ""
        w.repositories.append(dict(key=k, name=name, place=place, note=note))
    for k, rep, name, code, note in COLLECTIONS:
        w.collections.append(dict(key=k, repository=rep, name=name, reference_code=code, note=note))


# ---------------------------------------------------------------- people
def build_people(w, singles=(40, 32)):
    rng = w.rng
    for surname, particle, town, trade, head_given, head_by, head_dy, named in FAMILIES:
        cl = TOWNS[town][4]
        head_dy = head_dy or head_by + rng.randint(48, 80)
        head = w.person(head_given, surname, "m", town, head_by, head_dy, trade, particle)
        wife_by = head_by + rng.randint(-2, 8)
        wife = w.person(rng.choice(GIVEN[cl]["f"]), rng.choice(SURNAMES[cl]), "f", town, wife_by,
                        wife_by + rng.randint(40, 80))
        fam = dict(head=head, wife=wife, married=max(head_by, wife_by) + rng.randint(21, 27), town=town, cluster=cl,
                   surname=surname, spouses=[], grandchildren=[])
        kids = [w.person(g, surname, sex, town, by, dy, trade, particle) for g, sex, by, dy in named]
        born = fam["married"] + 1
        for _ in range(rng.randint(2, 3)):
            sex = rng.choice("mf")
            given = rng.choice([g for g in GIVEN[cl][sex] if g not in [head_given] + [k["_given"] for k in kids]])
            heir_taken = any(k["_occ"] == trade for k in kids)
            occ = "" if sex == "f" else rng.choice(LEARNED + TRADING) if heir_taken else trade
            kids.append(w.person(given, surname, sex, town, born, born + rng.randint(28, 80), occ, particle))
            born += rng.randint(1, 4)
        fam["children"] = sorted(kids, key=lambda k: k["_by"])
        w.families.append(fam)
    w.owner = w.find("p-matthias-aldersloh")
    for cl in (WEST, EAST):
        marry(w, [f for f in w.families if f["cluster"] == cl], cl)
    for cl, n in zip((WEST, EAST), singles):
        for _ in range(n):
            sex, by = "m" if rng.random() < 0.85 else "f", rng.randint(1645, 1705)
            occ = rng.choice(LEARNED + TRADING + ["clerk"] if sex == "m" else ["", "widow and merchant", "midwife"])
            w.person(rng.choice(GIVEN[cl][sex]), rng.choice(SURNAMES[cl]), sex, rng.choice(CLUSTER_TOWNS[cl]), by,
                     by + rng.randint(35, 80), occ)
    w.broker = w.person("Jehan", "Marteau", "m", "pl-velderbrug", 1668, 1736, "factor", cluster=BROKER,
                        variants=["Johann Martell", "Jean Marteau", "Hans Martel"],
                        note="Factor of the Ambelhaven company 1695-1718, then merchant at Velderbrug.")
    w.council = w.person("", "", "", "pl-ambelhaven", None, None, name="Council of Ambelhaven", kind="corporate",
                         variants=["Magistrate of Ambelhaven", "Magistraet van Amblehaven"])
    w.council["_papers"] = "col-amb-council"
    w.find("p-remy-quintijn")["_papers"] = "col-ksne-letters"
    for name, town, written, note in [
            ("the widow of the printer at Velderbrug", "pl-velderbrug", "Wittwe des Buchdruckers", ""),
            ("N. N., a correspondent at Skelmøre", "pl-skelmore", "N. N.", "Signs with initials only."),
            ("the factor of the Company at Ambelhaven", "pl-ambelhaven", "le facteur de la Compagnie",
             "Possibly Jehan Marteau, factor 1695-1718; not merged because the hand differs."),
            ("a physician at Morvenstadt", "pl-morvenstadt", "Med. Doct. at Morwenstat", ""),
            ("the younger Olderinck", "pl-ambelhaven", "Olderinck de jonge", "One of the sons of Cornelis Olderinck.")]:
        w.person("", "", "", town, None, None, name=name, unidentified=True, variants=[written], note=note)
    for given, surname, sex, by, dy, occ in [("Ambrosius", "Kelterer", "m", 1671, 1739, "pastor"),
                                             ("Ottilie", "Kelterer", "f", 1675, None, ""),
                                             ("Valentin", "Grünholt", "m", 1669, 1731, "schoolmaster"),
                                             ("Walburga", "Reisacher", "f", 1677, None, "")]:
        w.person(given, surname, sex, "pl-quellinghe", by, dy, occ, variants=[f"{given} {drift(rng, surname)}"])
    for k in ("p-matthias-aldersloh", "p-everard-van-kranevelt"):
        w.find(k)["_summer"] = SUMMER_SEAT[0]


def marry(w, fams, cl):
    """Marry daughters to sons of other families of the cluster or to newcomers; give heirs children."""
    rng = w.rng
    sons = [(f, c) for f in fams for c in f["children"] if c["_sex"] == "m"]
    for fam in fams:
        for daughter in [c for c in fam["children"] if c["_sex"] == "f"]:
            match = [(f, s) for f, s in sons
                     if f is not fam and 0 <= daughter["_by"] - s["_by"] <= 10 and "_spouse" not in s]
            f, son = rng.choice(match) if match and rng.random() < 0.5 else (fam, None)
            if not son and rng.random() < 0.45:
                son = w.person(rng.choice(GIVEN[cl]["m"]), rng.choice(SURNAMES[cl]), "m", fam["town"],
                               daughter["_by"] - rng.randint(1, 8), daughter["_by"] + rng.randint(40, 75),
                               rng.choice(LEARNED + TRADING))
            if son:
                son["_spouse"], daughter["_spouse"] = daughter, son
                f["spouses"].append((son, daughter, son["_by"] + rng.randint(22, 30)))
    for fam in fams:
        for son in [c for c in fam["children"] if c["_sex"] == "m" and "_spouse" not in c and rng.random() < 0.7]:
            wife = w.person(rng.choice(GIVEN[cl]["f"]), rng.choice(SURNAMES[cl]), "f", fam["town"],
                            son["_by"] + rng.randint(1, 8), son["_by"] + rng.randint(40, 80))
            son["_spouse"], wife["_spouse"] = wife, son
            fam["spouses"].append((son, wife, son["_by"] + rng.randint(24, 30)))
        heirs = [(s, wife, year) for s, wife, year in fam["spouses"]
                 if s["_surname"] == fam["surname"] and s["_by"] < 1688]
        if heirs:
            heir, wife, year = heirs[0]
            for i in range(rng.randint(1, 2) + (heir is w.owner)):
                given = fam["head"]["_given"] if i == 0 else rng.choice(GIVEN[cl]["m"] + GIVEN[cl]["f"])
                sex, by = "m" if given in GIVEN[cl]["m"] else "f", year + 1 + 2 * i + rng.randint(0, 2)
                note = f"Grandson of {fam['head']['name']}, named after him." if i == 0 else ""
                kid = w.person(given, fam["surname"], sex, fam["town"], by, by + rng.randint(30, 70),
                               heir["_occ"] if sex == "m" else "", fam["head"]["_particle"], note=note)
                fam["grandchildren"].append((heir, wife, kid))


# ---------------------------------------------------------------- ties other than letters
def build_kinship(w):
    rng = w.rng
    for fam in w.families:
        head, wife, town = fam["head"], fam["wife"], fam["town"]
        cal = "julian" if town in JULIAN_TOWNS else ""
        will = None
        if head["_dy"] <= 1738:
            made = rand_day(rng, head["_dy"] - 4, head["_dy"] - 1)
            will = w.deed("testament", f"Testament of {head['name']}", made, town, [head])
            w.relate(head, wife, "spouse", will, locus="fol. 1r", place=town, certainty="")
        for husband, spouse, year in [(head, wife, fam["married"])] + fam["spouses"]:
            if year >= 1680:
                w.relate(husband, spouse, "spouse", w.church_book(town, year), evidence="register", locus=w.folio(),
                         when=w.date_text(rand_day(rng, year, year), cal, 0.9), calendar=cal, written=0.6,
                         note="marriage entry")
            if rng.random() < 0.4 or year < 1680:
                contract = w.deed("marriage contract", f"Marriage contract of {husband['name']} and {spouse['name']}",
                                  rand_day(rng, year, year), town, [husband, spouse])
                w.relate(husband, spouse, "spouse", contract, locus="fol. 1r", place=town, written=0.3)
        for father, mother, child in [(head, wife, c) for c in fam["children"]] + fam["grandchildren"]:
            if child["_by"] >= 1680:
                book, locus = w.church_book(town, child["_by"]), w.folio()
                when = w.date_text(rand_day(rng, child["_by"], child["_by"]), cal, 0.85)
                for parent in (father, mother):
                    w.relate(parent, child, "parent", book, evidence="register", locus=locus, when=when, calendar=cal,
                             written=0.5, note="baptism entry")
                w.fact(child, "birth", when or str(child["_by"]), book, place=town, when=when, locus=locus,
                       note="baptism")
            elif will and father is head:
                w.relate(father, child, "parent", will, locus=f"fol. {rng.randint(1, 3)}r", place=town, written=0.3)
        kids = fam["children"]
        for a, b in [(kids[i], kids[j]) for i in range(len(kids)) for j in range(i + 1, len(kids))]:
            if rng.random() < 0.45:
                first = max(a["_active"][0], b["_active"][0])
                src = will or w.deed("deed of partition", f"Partition among the heirs of {head['name']}",
                                     rand_day(rng, first, first + 2), town, [a, b])
                w.relate(a, b, "sibling", src, locus="fol. 2r", place=town, written=0.4, note="named together as heirs")
        other = rng.choice([f for f in w.families if f["cluster"] == fam["cluster"] and f is not fam])
        a, b = rng.choice(kids), rng.choice(other["children"])
        if rng.random() < 0.3 and overlap(a, b):
            w.relate(a, b, "kinship", w.letter(a, b), certainty="probable", quote="my dear cousin",
                     note="called 'cousin'; the degree is unknown")


def build_patronage(w):
    rng = w.rng
    patrons = {WEST: ["p-everard-van-kranevelt", "p-matthias-aldersloh", "p-remy-quintijn"],
               EAST: ["p-henning-von-sorbeck", "p-soren-bjornvik"]}
    for cl, keys in patrons.items():
        pool = [p for p in w.cluster(cl) if p["_occ"] in LEARNED + ["clerk"] and p["key"] not in keys]
        for patron in map(w.find, keys):
            clients = [c for c in pool if overlap(patron, c)]
            for client in rng.sample(clients, min(len(clients), rng.randint(4, 7))):
                w.exchange(client, patron, rng.randint(0, 3), rng.randint(0, 2) if rng.random() < 0.5 else 0)
                thanks = w.letter(client, patron)
                w.relate(patron, client, "patronage", thanks, written=0.3, quote="my most gracious patron & protector")
                if rng.random() < 0.5:
                    appointment = w.deed("deed", f"Appointment of {client['name']} as {client['_occ']}",
                                         rand_day(rng, *overlap(patron, client)), patron["_town"], [client])
                    w.relate(patron, client, "patronage", appointment, locus="fol. 1r", certainty="",
                             place=patron["_town"])
                elif rng.random() < 0.4:
                    w.relate(patron, client, "patronage", rng.choice(w.letters_between[client["key"], patron["key"]]),
                             certainty="possible", note="thanks for a recommendation only")


def build_business_and_friendship(w, merchant_pairs, learned_pairs):
    rng = w.rng
    for a, b in merchant_pairs:
        for _ in range(rng.randint(1, 2) if rng.random() < 0.4 else 0):
            kind = rng.choice(["partnership contract", "bill of exchange", "freight contract"])
            s = w.deed(kind, f"{kind.capitalize()}, {a['name']} and {b['name']}", rand_day(rng, *overlap(a, b)),
                       a["_town"], [a, b])
            w.relate(a, b, "business", s, locus="fol. 1r", place=a["_town"], written=0.5,
                     certainty=grade(rng, 0.2, 0.08), quote=rng.choice(["", "", "for joint account & risk"]))
    for diarist in map(w.find, ("p-remy-quintijn", "p-soren-bjornvik", "p-cornelis-olderinck")):
        y0 = diarist["_active"][0] + 5
        diarist["_diary"] = w.source("diary", y0, w.home(diarist), kind="diary", title=f"Diary of {diarist['name']}",
                                     date=f"{y0}/{min(diarist['_active'][1], y0 + 20)}",
                                     _slug=f"diary-{slug(diarist['_surname'])}")
    for a, b in learned_pairs:
        if rng.random() > 0.35:
            continue
        diarist = a if "_diary" in a else b if "_diary" in b else None
        if diarist:
            w.relate(a, b, "friendship", diarist["_diary"], locus=f"p. {rng.randint(3, 400)}", written=0.5,
                     certainty=grade(rng, 0.25, 0.1),
                     quote=rng.choice(["", "dined with my old friend", "talked till midnight"]))
        if (a["key"], b["key"]) in w.letters_between:
            w.relate(a, b, "friendship", rng.choice(w.letters_between[a["key"], b["key"]]), quote="my dearest friend",
                     certainty=grade(rng, 0.3, 0.1))
        elif not diarist:
            will = w.deed("testament", f"Testament of {a['name']}", rand_day(rng, *overlap(a, b)), a["_town"], [a])
            w.relate(a, b, "friendship", will, locus="fol. 2v", certainty="probable",
                     note="bequest of books to a friend")


# ---------------------------------------------------------------- letters
def build_correspondence(w):
    rng, merchant_pairs, learned_pairs = w.rng, [], []
    for cl in (WEST, EAST):
        for fam in [f for f in w.families if f["cluster"] == cl]:
            kids = fam["children"]
            kin = [(c, fam["head"]) for c in kids] + [(c, fam["wife"]) for c in kids] + list(zip(kids, kids[1:]))
            kin += [(k, h) for h, _, k in fam["grandchildren"]] + [(a, b) for a, b, _ in fam["spouses"]]
            for a, b in kin:
                if overlap(a, b) and rng.random() < 0.3:
                    w.exchange(a, b, rng.randint(0, 3), rng.randint(0, 2))
        people = w.cluster(cl)
        traders = [p for p in people if p["_occ"] in TRADING + ["widow and merchant"]]
        for a in traders:
            for b in rng.sample(traders, 2):
                if b is not a and overlap(a, b) and (a, b) not in merchant_pairs and (b, a) not in merchant_pairs:
                    merchant_pairs.append((a, b))
                    w.exchange(a, b, rng.randint(1, 4), rng.randint(1, 4) if rng.random() < 0.75 else 0)
        learned = [p for p in people if p["_occ"] in LEARNED]
        for a in learned:
            for b in rng.sample(learned, rng.randint(1, 2)):
                if b is not a and overlap(a, b):
                    learned_pairs.append((a, b))
                    w.exchange(a, b, rng.randint(1, 2), rng.randint(1, 2) if rng.random() < 0.6 else 0)
    build_owner_letters(w)
    build_broker_letters(w)
    build_corner_letters(w)
    return merchant_pairs, learned_pairs


def build_owner_letters(w, correspondents=44):
    """The family archive: nearly every letter to its owner survives, and a letterbook of his own."""
    rng, owner = w.rng, w.owner
    pool = [p for p in w.cluster(WEST) if p is not owner and overlap(p, owner)]
    weights = [3 if p["_occ"] in TRADING else 2 if p["_occ"] in LEARNED else 1 for p in pool]
    chosen = []
    while len(chosen) < correspondents:
        p = rng.choices(pool, weights)[0]
        chosen += [p] if p not in chosen else []
    for p in chosen + [w.broker, w.council]:
        for _ in range(rng.randint(1, 4)):
            w.letter(p, owner)
        for _ in range(rng.randint(0, 3)):
            d = rand_day(rng, *overlap(p, owner))
            in_book = 1694 <= d.year <= 1729 and rng.random() < 0.75
            original = w.letter(owner, p, d) if rng.random() < (0.12 if in_book else 0.25) else None
            if in_book:
                w.letter(owner, p, d, evidence="copy", col="col-afp-lb", copy_of=original)
            elif not original:
                w.letter(owner, p, d, evidence="draft", note="Not known whether it was sent.")
    for _ in range(3):
        w.letter(owner, owner, note="Notes to himself on accounts and errands.")


def build_broker_letters(w):
    """The factor who alone joins the two trading clusters."""
    rng, broker = w.rng, w.broker
    sides = [["p-cornelis-olderinck", "p-pieter-schuttelaer", "p-jacob-ten-brummel", "p-floris-wyntjes"],
             ["p-hinrich-bruggemann", "p-luder-hollerbeck", "p-claus-rautenkrantz", "p-peder-skjeldrup",
              "p-jorgen-ornholt"]]
    partners = [w.find(k) for side in sides for k in side]
    partners += [p for p in w.cluster(WEST) if p["_occ"] == "merchant" and p["_town"] == "pl-ambelhaven"][:2]
    partners += [p for p in w.cluster(EAST) if p["_occ"] == "merchant" and p["_town"] == "pl-velderbrug"][:2]
    for p in [p for p in partners if overlap(p, broker)]:
        w.exchange(broker, p, rng.randint(2, 5), rng.randint(1, 4))
        if rng.random() < 0.3:
            bill = w.deed("bill of exchange", f"Bill of exchange, {broker['name']} and {p['name']}",
                          rand_day(rng, *overlap(p, broker)), p["_town"], [broker, p])
            w.relate(broker, p, "business", bill, locus="fol. 1r", written=0.6)


def build_corner_letters(w):
    """The council, the unidentified writers, the circle at Quellinghe, memoranda and kept drafts."""
    rng = w.rng
    for p in rng.sample([p for p in w.cluster(WEST) if p["_town"] == "pl-ambelhaven"], 8) + [w.broker]:
        if overlap(p, w.council):
            w.exchange(w.council, p, rng.randint(1, 3), rng.randint(0, 2))
    for p in [p for p in w.persons if p["_unid"]]:
        local = [q for q in w.cluster(p["_cluster"]) if q["_town"] == p["_town"]]
        to = rng.choice(local)
        to = w.owner if "factor" in p["key"] else w.find("p-remy-quintijn") if "physician" in p["key"] else to
        for _ in range(rng.randint(1, 2)):
            w.letter(p, to, certainty=rng.choice(["", "probable"]))
    q = [p for p in w.persons if p["_cluster"] == QUELL]
    for a, b, n_ab, n_ba in [(0, 2, 9, 8), (1, 3, 4, 3), (0, 1, 3, 2), (2, 1, 2, 0), (3, 0, 1, 1)]:
        w.exchange(q[a], q[b], n_ab, n_ba)
    w.relate(q[0], q[1], "sibling", w.letter(q[0], q[1]), quote="your faithful brother")
    w.relate(q[2], q[3], "spouse", w.letter(q[3], q[2]), quote="your loving wife till death")
    w.relate(q[0], q[2], "friendship", w.letter(q[2], q[0]), quote="brother in spirit", certainty="probable")
    for writer in map(w.find, ("p-remy-quintijn", "p-soren-bjornvik", "p-hinrich-bruggemann", "p-cornelis-olderinck")):
        w.letter(writer, writer)
        known = [w.find(b) for a, b in w.letters_between if a == writer["key"]]
        for b in rng.sample(known, min(5, len(known))):
            w.letter(writer, b, evidence="draft")


def build_lost_letters(w, n=55):
    """Letters known only because another letter mentions them."""
    rng = w.rng
    first_rows = {}
    for r in w.relations:
        if r["kind"] == "letter" and r["source"]["kind"] == "letter" and r["source"]["_block"] == "let":
            first_rows.setdefault(id(r["source"]), r)
    rows = [r for r in first_rows.values() if r["evidence"] != "draft"]
    while n:
        row = rng.choice(rows)
        s, a, b = row["source"], w.find(row["person"]), w.find(row["other"])
        if rng.random() < 0.6:
            sender, recipient, quote = b, a, "I have yours of the last month"
        else:
            known = [w.find(o) for (x, o) in w.letters_between if x == a["key"]]
            known = [c for c in known
                     if c is not b and c["_cluster"] == b["_cluster"] != BROKER and c["kind"] == "individual"]
            if not known:
                continue
            sender, recipient, quote = rng.choice(known), b, "he writes that he has sent you a letter"
        lost = date.fromordinal(s["_sort"]) - timedelta(days=rng.randint(10, 60))
        cal = s["calendar"] if s["calendar"] in ("julian", "unknown") else ""
        when = f"{to_julian(lost):%Y-%m}~" if cal == "julian" else rng.choice([f"{lost:%Y-%m}~", f"{lost.year}?", ""])
        w.relate(sender, recipient, "letter", s, evidence="mention",
                 locus=rng.choice(["fol. 1v", "fol. 2r", "postscript"]), when=when, calendar=cal,
                 certainty=grade(rng, 0.25, 0.1), quote=quote, note="lost letter, known only from this mention")
        n -= 1


def build_edition(w, printed_only=30, reprinted=10):
    """A printed edition of the secretary's letters; some of its texts also survive as originals."""
    rng, quin = w.rng, w.find("p-remy-quintijn")
    originals = [(s, w.find(a), w.find(b)) for (a, b), ss in w.letters_between.items() if quin["key"] in (a, b)
                 for s in ss if s["_block"] == "let"]
    entries = [(s["_sort"], a, b, s) for s, a, b in rng.sample(originals, reprinted)]
    fellows = [p for p in w.cluster(WEST) if p["_occ"] in LEARNED and overlap(p, quin) and p is not quin]
    for _ in range(printed_only):
        p = rng.choice(fellows)
        a, b = (quin, p) if rng.random() < 0.6 else (p, quin)
        entries.append((rand_day(rng, *overlap(a, b)).toordinal(), a, b, None))
    page = 11
    for no, (ordinal, a, b, original) in enumerate(sorted(entries, key=lambda e: e[0]), 1):
        pages = rng.randint(1, 3)
        s = w.source("ed", no, kind="edition", title=f"The Letters of Rémy Quintijn, no. {no}",
                     author="Hester Lanwaerden (ed.)", publisher="Kalmstede: Society for Regional History",
                     year="1887", pages=f"{page}-{page + pages}",
                     date=original["date"] if original else w.date_text(date.fromordinal(ordinal), "", 0.9),
                     place_from=a["_town"], place_to=b["_town"], copy_of=original or "",
                     url=f"https://example.org/editions/quintijn/no-{no:03d}", _slug=f"ed-quintijn-{no:03d}",
                     note="Printed from the original." if original else "Original lost; known only from the edition.")
        page += pages + 1
        w.relate(a, b, "letter", s, evidence="edition", locus=f"no. {no}",
                 certainty="" if original else grade(rng, 0.1, 0.02))


# ---------------------------------------------------------------- groups and memberships
PARISHES = {"pl-kalmstede": ["St. Walburg", "Holy Cross"], "pl-morvenstadt": ["St. Lambert", "New Church"],
            "pl-ambelhaven": ["St. Nicholas", "Old Church", "French Church"],
            "pl-velderbrug": ["St. Peter", "St. Gertrud", "Holy Ghost"], "pl-ornsval": ["Cathedral parish", "St. Olaf"],
            "pl-skelmore": ["Parish church"], "pl-quellinghe": ["St. Veit"]}
GROUPS = [  # key, name, kind, place, parent, start, end, note
    ("g-admiralty-ambelhaven", "Admiralty board of Ambelhaven", "board", "pl-ambelhaven", "g-council-ambelhaven",
     "1701", "", ""),
    ("g-orphanage-kalmstede", "Governors of the orphanage of Kalmstede", "board", "pl-kalmstede", "g-council-kalmstede",
     "1694", "", ""),
    ("g-consistory-ornsval", "Consistory of Ørnsval", "consistory", "pl-ornsval", "g-parish-ornsval-cathedral-parish",
     "", "", ""),
    ("g-guild-merchants-ambelhaven", "Merchants' guild of Ambelhaven", "guild", "pl-ambelhaven", "", "", "", ""),
    ("g-guild-printers-kalmstede", "Printers' and booksellers' guild of Kalmstede", "guild", "pl-kalmstede", "",
     "1662", "", ""),
    ("g-guild-surgeons-morvenstadt", "Surgeons' guild of Morvenstadt", "guild", "pl-morvenstadt", "", "", "", ""),
    ("g-guild-drapers-velderbrug", "Drapers' guild of Velderbrug", "guild", "pl-velderbrug", "", "", "", ""),
    ("g-guild-shipmasters-ornsval", "Shipmasters' fellowship of Ørnsval", "guild", "pl-ornsval", "", "1671", "", ""),
    ("g-company-northern-trade", "Ambelhaven Company of the Northern Trade", "company", "pl-ambelhaven", "",
     "1694", "1738", ""),
    ("g-company-eastward", "Velderbrug Eastward Company", "company", "pl-velderbrug", "", "1699~", "", ""),
    ("g-ksne", "Kalmstede Society of Natural Enquiry", "society", "pl-kalmstede", "", "1698-04-02", "", ""),
    ("g-ksne-instruments", "Committee on Instruments", "committee", "pl-kalmstede", "g-ksne", "1703", "", ""),
    ("g-ksne-transactions", "Committee for the Transactions", "committee", "pl-kalmstede", "g-ksne",
     "1706", "1729", ""),
    ("g-latin-school-kalmstede", "Latin school of Kalmstede", "school", "pl-kalmstede", "", "", "", ""),
    ("g-collegium-medicum-morvenstadt", "Collegium medicum of Morvenstadt", "college", "pl-morvenstadt", "",
     "1709", "", ""),
    ("g-music-velderbrug", "Velderbrug music society", "society", "pl-velderbrug", "", "1715?", "1733", ""),
    ("g-conventicle-quellinghe", "Quellinghe conventicle", "society", "pl-quellinghe", "", "1696~", "",
     "A small devotional circle whose members wrote only to one another."),
]
OFFICES = [  # group, town, occupations drawn from, roles, how many, first year, term length
    ("g-guild-merchants-ambelhaven", "pl-ambelhaven", TRADING, ["warden"], 3, None, (1, 3)),
    ("g-guild-printers-kalmstede", "pl-kalmstede", ["printer", "bookseller", "engraver"], ["warden"], 2, None, (1, 3)),
    ("g-guild-surgeons-morvenstadt", "pl-morvenstadt", ["physician", "apothecary"], ["warden"], 2, None, (1, 3)),
    ("g-guild-drapers-velderbrug", "pl-velderbrug", TRADING, ["warden"], 3, None, (1, 3)),
    ("g-guild-shipmasters-ornsval", "pl-ornsval", ["shipmaster", "merchant"], ["warden"], 2, None, (1, 3)),
    ("g-company-northern-trade", "pl-ambelhaven", TRADING, ["director", "member", "member", "bookkeeper"], 9, None,
     (4, 20)),
    ("g-company-eastward", "pl-velderbrug", TRADING, ["director", "member", "member", "bookkeeper"], 9, None,
     (4, 20)),
    ("g-ksne", "pl-kalmstede", LEARNED + ["merchant"], ["member"], 22, 1698, (30, 40)),
    ("g-ksne-instruments", "pl-kalmstede", LEARNED, ["member", "member", "chair"], 4, 1703, (2, 8)),
    ("g-ksne-transactions", "pl-kalmstede", LEARNED, ["member", "member", "chair"], 4, 1706, (2, 8)),
    ("g-collegium-medicum-morvenstadt", "pl-morvenstadt", ["physician", "apothecary"], ["member", "member", "dean"],
     6, 1709, (3, 12)),
    ("g-music-velderbrug", "pl-velderbrug", ["organist", "merchant", "notary", "tutor"],
     ["member", "member", "director"], 6, 1715, (3, 12)),
    ("g-admiralty-ambelhaven", "pl-ambelhaven", TRADING, ["commissioner"], 5, 1701, (3, 8)),
    ("g-orphanage-kalmstede", "pl-kalmstede", ["merchant", "pastor", "notary", "printer"], ["governor"],
     5, 1694, (3, 8)),
    ("g-consistory-ornsval", "pl-ornsval", ["pastor", "merchant", "shipmaster"], ["elder", "elder", "pastor"],
     5, 1688, (3, 8)),
]


def build_groups(w):
    rows = [(f"g-parish-{slug(TOWNS[t][0])}-{slug(n)}", f"{n}, {TOWNS[t][0]}", "parish", t, "", "", "", "")
            for t, names in PARISHES.items() for n in names]
    rows += [(f"g-council-{slug(TOWNS[t][0])}", f"Town council of {TOWNS[t][0]}", "council", t, "", "", "", "")
             for t in list(TOWNS)[:6]]
    for fam in w.families:
        head = fam["head"]
        fam["household"] = f"g-household-{slug(head['name'])}"
        rows.append((fam["household"], f"Household of {head['name']}", "household", fam["town"], "",
                     str(fam["married"]), str(head["_dy"]), ""))
    for row in rows + GROUPS:
        w.groups.append(dict(zip(HEADERS["groups.csv"], row)))
        w.group_by[row[0]] = w.groups[-1]


def build_memberships(w):
    rng = w.rng

    def record(gkey, town, y):
        """Return the minute book or roll of a group for the decade of y."""
        g = w.group_by[gkey]
        col = "col-ksne-minutes" if "ksne" in gkey else "col-amb-guilds" if town == "pl-ambelhaven" and g["kind"] in (
            "guild", "company") else TOWN_COLLECTIONS[town][COUNCIL]
        kind = "register" if g["kind"] in ("guild", "school") else "minutes"
        title = f"{'Roll' if kind == 'register' else 'Minutes'} of the {g['name']}"
        return w.volume(col, kind, title, y // 10 * 10, y // 10 * 10 + 9, town)

    def office(p, gkey, role, town, y0=None, years=(2, 8), proofs=(1, 3)):
        y0 = max(y0 or rng.randint(*p["_active"]), p["_active"][0])
        if y0 > p["_active"][1]:
            return
        y1 = min(y0 + rng.randint(*years), p["_active"][1])
        start = edtf(rng, rand_day(rng, y0, y0), 0.4) or str(y0)
        end = edtf(rng, rand_day(rng, y1, y1), 0.4) if y1 < LAST_YEAR else ""
        for i in range(rng.randint(*proofs)):  # one term, attested in several minutes
            y = y0 if i == 0 else rng.randint(y0, y1)
            src = record(gkey, town, y)
            w.member(p, gkey, role, src, start=start, end=end, when=edtf(rng, rand_day(rng, y, y), 0.7))
            if role == "burgomaster" and i == 0:
                w.fact(p, "title", f"Burgomaster of {TOWNS[town][0]}", src, place=town, when=str(y))

    for p in [p for p in w.persons if p["kind"] == "individual" and not p["_unid"] and not p["_isolate"]]:
        if p is not w.broker and rng.random() < 0.3:
            y = max(p["_active"][0], 1680)
            parishes = [k for k, g in w.group_by.items() if g["kind"] == "parish" and g["place"] == p["_town"]]
            role = "pastor" if p["_occ"] == "pastor" else "member"
            w.member(p, rng.choice(parishes), role, w.church_book(p["_town"], y),
                     start=str(y) if rng.random() < 0.5 else "", when=str(y))
    w.member(w.broker, "g-parish-ambelhaven-french-church", "member", w.church_book("pl-ambelhaven", 1696),
             start="1695", when="1696-02-12")
    for cl in (WEST, EAST):
        for town in CLUSTER_TOWNS[cl]:
            men = [p for p in w.cluster(cl) if p["_sex"] == "m" and p["_town"] == town]
            for p in rng.sample(men, min(len(men), 5)):
                role = rng.choice(["burgomaster", "alderman", "alderman", "councillor"])
                office(p, f"g-council-{slug(TOWNS[town][0])}", role, town)
            parish = next(k for k, g in w.group_by.items() if g["kind"] == "parish" and g["place"] == town)
            for p in rng.sample([p for p in men if p["_occ"] != "pastor"], 2):
                office(p, parish, rng.choice(["elder", "deacon"]), town, years=(2, 4))
    for gkey, town, occs, roles, n, first, years in OFFICES:
        pool = [p for p in w.cluster(TOWNS[town][4]) if p["_occ"] in occs and p["_active"][1] >= (first or FIRST_YEAR)]
        if w.group_by[gkey]["kind"] == "guild":
            for p in [p for p in pool if p["_town"] == town]:
                y = p["_active"][0]
                w.member(p, gkey, "member", record(gkey, town, y), start=str(y), when=str(y))
        for p in rng.sample(pool, min(len(pool), n)):
            office(p, gkey, rng.choice(roles), town, first, years, (1, 2) if len(roles) > 1 else (2, 3))
    office(w.broker, "g-company-northern-trade", "factor", "pl-ambelhaven", 1695, (23, 23), (3, 3))
    office(w.broker, "g-company-eastward", "member", "pl-velderbrug", 1719, (10, 17), (1, 2))
    office(w.find("p-remy-quintijn"), "g-ksne", "secretary", "pl-kalmstede", 1698, (33, 33), (3, 4))
    office(w.find("p-everard-van-kranevelt"), "g-ksne", "president", "pl-kalmstede", 1698, (17, 17), (2, 3))
    office(w.owner, "g-ksne", "president", "pl-kalmstede", 1715, (16, 16), (2, 3))
    for fam in [f for f in w.families if f["town"] == "pl-kalmstede"]:
        boys = [c for c in fam["children"] + [k for _, _, k in fam["grandchildren"]] if c["_sex"] == "m"]
        for c in [c for c in boys if c["_by"] >= 1676]:
            y = c["_by"] + 9
            w.member(c, "g-latin-school-kalmstede", "pupil", record("g-latin-school-kalmstede", "pl-kalmstede", y),
                     start=str(y), end=f"{y + rng.randint(4, 7)}~", when=str(y))
    circle = [p for p in w.persons if p["_cluster"] == QUELL]
    for p in circle:  # the leader's roll of the circle is his first letter; the others name it in a letter to him
        src, role = (circle[0]["_srcs"][0], "leader") if p is circle[0] else (w.letter(p, circle[0]), "member")
        w.member(p, "g-conventicle-quellinghe", role, src, start="1696~", evidence="original", locus="fol. 1v")
    isolates = [(w.person(rng.choice(GIVEN[WEST]["m"]), rng.choice(SURNAMES[WEST]), "m", "pl-ambelhaven", None, None,
                          "merchant", isolate=True, note="Known only from the guild roll."),
                 "g-guild-merchants-ambelhaven", rng.randint(1690, 1730)) for _ in range(2)]
    isolates.append((w.person("Floris", "Hemmerick", "m", "pl-kalmstede", None, None, "surveyor", isolate=True,
                              note="Elected a corresponding member; nothing else is known of him."), "g-ksne", 1712))
    for p, gkey, y in isolates:
        w.member(p, gkey, "member", record(gkey, w.group_by[gkey]["place"], y), start=str(y), when=str(y))
    for fam in w.families:
        build_household(w, fam)


def build_household(w, fam):
    rng, town, head = w.rng, fam["town"], fam["head"]
    for year in [y for y in (1690, 1705, 1722) if head["_by"] + 20 <= y <= head["_dy"]]:
        roll = w.volume(TOWN_COLLECTIONS[town][COUNCIL], "tax register", f"Poll-tax register of {TOWNS[town][0]}",
                        year, year, town)
        locus, when = w.folio(), str(year)
        w.member(head, fam["household"], "head", roll, start=str(fam["married"]), locus=locus, when=when)
        if fam["wife"]["_dy"] >= year:
            w.member(fam["wife"], fam["household"], "wife", roll, start=str(fam["married"]), locus=locus, when=when)
        for c in [c for c in fam["children"] if c["_by"] <= year < c["_by"] + 22]:
            w.member(c, fam["household"], "child", roll, start=str(c["_by"]), locus=locus, when=when)
        if rng.random() < 0.1:
            sex = rng.choice("mf")
            servant = w.person(rng.choice(GIVEN[fam["cluster"]][sex]), rng.choice(SURNAMES[fam["cluster"]]), sex, town,
                               None, None, "servant", isolate=True, note="Known only from the poll-tax register.")
            w.member(servant, fam["household"], "servant", roll, start=f"{year}?", end=f"{year}?", locus=locus,
                     when=when)


# ---------------------------------------------------------------- facts
def build_facts(w):
    rng = w.rng
    titles = {"p-everard-van-kranevelt": "Baron", "p-henning-von-sorbeck": "Count", "p-remy-quintijn": "Master of Arts"}
    for p in [p for p in w.persons if p["kind"] == "individual" and not p["_unid"] and not p["_isolate"]]:
        papers = [s for s in p["_srcs"]
                  if s["kind"] in ("letter", "testament", "deed", "partnership contract", "marriage contract")]
        if not papers:
            papers = [w.deed("deed", f"Deed of sale by {p['name']}", rand_day(rng, *p["_active"]), p["_town"], [p])]
        if p["_occ"] and rng.random() < 0.9:
            for s in rng.sample(papers, min(len(papers), 1 if rng.random() < 0.7 else 2)):
                w.fact(p, "occupation", p["_occ"], s, locus="address leaf" if s["kind"] == "letter" else "fol. 1r",
                       when="" if s["kind"] == "letter" else s["date"],
                       quote=rng.choice(["", "", f"{p['_occ']} in this town"]))
        if rng.random() < 0.4 and p is not w.broker:
            w.fact(p, "residence", TOWNS[p["_town"]][0], rng.choice(papers), place=p["_town"], locus="fol. 1r",
                   certainty=grade(rng, 0.15, 0.05))
        if p["key"] in titles or (p["_occ"] == "physician" and rng.random() < 0.6):
            w.fact(p, "title", titles.get(p["key"], "Doctor of Medicine"), rng.choice(papers), locus="address leaf")
        if p["_dy"] and p["_dy"] <= LAST_YEAR and rng.random() < 0.4:
            w.fact(p, "death", p["died"] or str(p["_dy"]), w.church_book(p["_town"], p["_dy"]), place=p["_town"],
                   when=p["died"] or str(p["_dy"]), note="burial entry")
        if rng.random() < 0.12:
            w.fact(p, "gender", "male" if p["_sex"] == "m" else "female", papers[0], locus="")
    for town, (y0, y1) in (("pl-ambelhaven", (1695, 1718)), ("pl-velderbrug", (1719, 1736))):
        src = rng.choice([s for s in w.broker["_srcs"] if s["place_from"] == town])
        w.fact(w.broker, "residence", TOWNS[town][0], src, place=town, when=f"{y0}/{y1}", locus="fol. 1r")
    for _ in range(2):  # persons known only from a burial entry
        y, town = rng.randint(1695, 1738), rng.choice(["pl-velderbrug", "pl-ornsval"])
        p = w.person(rng.choice(GIVEN[EAST]["m"]), rng.choice(SURNAMES[EAST]), "m", town, None, y, "sailor",
                     isolate=True, note="Known only from a burial entry.")
        w.fact(p, "death", p["died"] or str(y), w.church_book(town, y), place=town, when=p["died"] or str(y),
               note="burial entry")
        w.fact(p, "occupation", "sailor", w.church_book(town, y), quote="a sailor from the ship of Anders Falkvedt")


# ---------------------------------------------------------------- finishing, writing, checking
def components(w, people):
    """Return the connected parts of the relation graph among people, largest first."""
    adj = {p["key"]: [] for p in people}
    for r in w.relations:
        if r["person"] in adj and r["other"] in adj and r["person"] != r["other"]:
            adj[r["person"]].append(r["other"])
            adj[r["other"]].append(r["person"])
    seen, parts = set(), []
    for p in people:
        if p["key"] not in seen:
            stack, part = [p["key"]], []
            seen.add(p["key"])
            while stack:
                part.append(w.find(stack.pop()))
                for n in adj[part[-1]["key"]]:
                    if n not in seen:
                        seen.add(n)
                        stack.append(n)
            parts.append(part)
    return sorted(parts, key=len, reverse=True)


def ensure_connected(w):
    """Join stray pieces of each cluster to its largest part by one more letter."""
    for cl in (WEST, EAST):
        people = [p for p in w.persons if p["_cluster"] == cl and not p["_isolate"]]
        parts = components(w, people)
        for part in parts[1:]:
            b = next((p for p in parts[0] if overlap(part[0], p)), None)
            if b:
                w.exchange(part[0], b, 1, w.rng.randint(0, 1))


def finish(w):
    """Give every source and attestation its key, in a stable order."""
    block = {b: i for i, b in enumerate(SOURCE_BLOCKS)}
    w.sources.sort(key=lambda s: (block[s["_block"]], str(s["_sort"]) if s["_block"] == "reg" else
                                  s["_sort"] if s["date"] or s["_block"] != "let" else 10 ** 9, s["_n"]))
    counts, shelf = {}, {}
    for s in w.sources:
        counts[s["_block"]] = counts.get(s["_block"], 0) + 1
        s["key"] = w.key(s.get("_slug") or f"{s['_block']}-{counts[s['_block']]:04d}")
        if s["_autoref"]:
            n = shelf[s["collection"]] = shelf.get(s["collection"], 0) + 1
            s["reference"] = f"{REF_CODE[s['collection']]} {n // 40 + 1}/{n % 40 + 1}"
    order = {id(s): i for i, s in enumerate(w.sources)}
    kinds, groups, persons = [k[0] for k in RELATION_KINDS], list(w.group_by), [p["key"] for p in w.persons]
    w.relations.sort(key=lambda r: (kinds.index(r["kind"]), order[id(r["source"])]))
    w.memberships.sort(key=lambda m: (groups.index(m["group"]), order[id(m["source"])]))
    w.facts.sort(key=lambda f: (persons.index(f["person"]), order[id(f["source"])]))
    for prefix, rows in (("r", w.relations), ("m", w.memberships), ("f", w.facts)):
        for i, row in enumerate(rows, 1):
            row["key"] = f"{prefix}{i:04d}"


def tables(w):
    return {"repositories.csv": w.repositories, "collections.csv": w.collections, "places.csv": w.places,
            "persons.csv": w.persons, "groups.csv": w.groups, "sources.csv": w.sources,
            "relation_kinds.csv": [dict(zip(HEADERS["relation_kinds.csv"], k)) for k in RELATION_KINDS],
            "relations.csv": w.relations, "memberships.csv": w.memberships, "facts.csv": w.facts}


def cell(value):
    return value["key"] if isinstance(value, dict) else "|".join(value) if isinstance(value, list) else str(value)


def write(w, out):
    out.mkdir(parents=True, exist_ok=True)
    for name, rows in tables(w).items():
        with open(out / name, "w", encoding="utf-8", newline="") as fh:
            writer = csv.writer(fh, lineterminator="\n")
            writer.writerow(HEADERS[name])
            writer.writerows([cell(row.get(h, "")) for h in HEADERS[name]] for row in rows)


def self_check(w):
    """Check keys, references, vocabularies, sizes and the designed shape of the network; return the problems."""
    t = {name: [{h: cell(r.get(h, "")) for h in HEADERS[name]} for r in rows] for name, rows in tables(w).items()}
    keys = {name: [r["key"] for r in rows] for name, rows in t.items()}
    problems = [f"{name}: duplicate keys" for name, ks in keys.items() if len(set(ks)) != len(ks)]
    problems += [f"{name}: bad key {k!r}" for name, ks in keys.items() for k in ks if not KEY_RE.match(k)]
    refs = [("collections.csv", "repository", "repositories.csv"), ("repositories.csv", "place", "places.csv"),
            ("groups.csv", "place", "places.csv"), ("groups.csv", "parent", "groups.csv"),
            ("sources.csv", "repository", "repositories.csv"), ("sources.csv", "collection", "collections.csv"),
            ("sources.csv", "place_from", "places.csv"), ("sources.csv", "place_to", "places.csv"),
            ("relation_kinds.csv", "parent", "relation_kinds.csv"), ("relations.csv", "other", "persons.csv"),
            ("relations.csv", "kind", "relation_kinds.csv"), ("relations.csv", "place", "places.csv"),
            ("memberships.csv", "group", "groups.csv"), ("facts.csv", "place", "places.csv")]
    refs += [(f, col, target) for f in ("relations.csv", "memberships.csv", "facts.csv")
             for col, target in (("person", "persons.csv"), ("source", "sources.csv"))]
    for f, col, target in refs:
        known = set(keys[target])
        problems += [f"{f} {r['key']}: {col}={r[col]!r} unknown" for r in t[f] if r[col] and r[col] not in known]
    earlier = set()
    for s in t["sources.csv"]:
        if s["copy_of"] and s["copy_of"] not in earlier:
            problems.append(f"sources.csv {s['key']}: copy_of is not an earlier row")
        earlier.add(s["key"])
    calendars, grades = ("", "gregorian", "julian", "julian-march", "unknown"), ("", "certain", "probable", "possible")
    evidence = ("", "original", "copy", "draft", "mention", "register", "edition")
    for f, col, allowed in [("sources.csv", "calendar", calendars), ("persons.csv", "calendar", calendars),
                            ("relations.csv", "calendar", calendars), ("relations.csv", "certainty", grades),
                            ("relations.csv", "identification", grades), ("memberships.csv", "certainty", grades),
                            ("facts.csv", "certainty", grades), ("relations.csv", "evidence", evidence),
                            ("memberships.csv", "evidence", evidence)]:
        problems += [f"{f} {r['key']}: {col}={r[col]!r}" for r in t[f] if r[col] not in allowed]
    n_att = len(w.relations) + len(w.memberships) + len(w.facts)
    for label, n, lo, hi in [("persons", len(w.persons), 220, 290), ("groups", len(w.groups), 50, 70),
                             ("sources", len(w.sources), 1300, 1700), ("attestations", n_att, 2200, 2800)]:
        problems += [f"size: {n} {label}, expected {lo}-{hi}"] if not lo <= n <= hi else []
    related = {r["person"] for r in w.relations} | {r["other"] for r in w.relations}
    tied = [p for p in w.persons if p["key"] in related]
    parts = components(w, [p for p in tied if p is not w.broker])
    problems += ["without the broker a component still mixes clusters"
                 for part in parts if len({p["_cluster"] for p in part}) > 1]
    problems += ["the broker is not a cut point"] if len(components(w, tied)) >= len(parts) else []
    circle = sorted(p["key"] for p in w.persons if p["_cluster"] == QUELL)
    if circle not in [sorted(p["key"] for p in part) for part in parts]:
        problems.append("the Quellinghe circle is not a component of its own")
    problems += [f"isolate {p['key']} has a relation" for p in w.persons if p["_isolate"] and p["key"] in related]
    full = degrees(w.relations)
    outside = degrees([r for r in w.relations if r["source"]["collection"] not in ("col-afp", "col-afp-lb")])
    if max(full, key=full.get) != w.owner["key"] or max(outside, key=outside.get) == w.owner["key"]:
        problems.append("the family-archive owner should lead by degree only while his archive is counted")
    attested = related | {r["person"] for r in w.memberships} | {r["person"] for r in w.facts}
    problems += [f"person {p['key']} has no attestation" for p in w.persons if p["key"] not in attested]
    return problems


def degrees(relations):
    """Return the number of distinct neighbours of each person, self-loops left out."""
    neighbours = {}
    for r in relations:
        if r["person"] != r["other"]:
            neighbours.setdefault(r["person"], set()).add(r["other"])
            neighbours.setdefault(r["other"], set()).add(r["person"])
    return {k: len(v) for k, v in neighbours.items()}


def build(seed=SEED):
    w = World(seed)
    build_places_and_archives(w)
    build_people(w)
    build_groups(w)
    build_kinship(w)
    merchant_pairs, learned_pairs = build_correspondence(w)
    build_patronage(w)
    build_business_and_friendship(w, merchant_pairs, learned_pairs)
    build_memberships(w)
    build_facts(w)
    ensure_connected(w)
    build_lost_letters(w)
    build_edition(w)
    finish(w)
    return w


def main(argv):
    out = Path(argv[1]) if len(argv) > 1 else DEFAULT_OUT
    w = build()
    write(w, out)
    for name, rows in tables(w).items():
        print(f"{name:20} {len(rows):5d}")
    print(f"{'attestations':20} {len(w.relations) + len(w.memberships) + len(w.facts):5d}")
    degree = degrees(w.relations)
    top = sorted(degree, key=lambda k: (-degree[k], k))[:5]
    print("broker:", w.broker["key"], "| family archive of:", w.owner["key"])
    print("separate component:", " ".join(p["key"] for p in w.persons if p["_cluster"] == QUELL))
    print("highest degree:", ", ".join(f"{k} ({degree[k]})" for k in top))
    problems = self_check(w)
    print("\n".join(f"PROBLEM: {p}" for p in problems) or "self-check: ok")
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
