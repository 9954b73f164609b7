"""TEI correspondence metadata in, as workbook rows: one source per letter, a letter tie per sender and addressee.

Reads TEI P5 files whose ``teiHeader/profileDesc`` holds ``correspDesc`` elements, as the TEI
P5 Guidelines describe them (chapter 2, "The TEI Header", section 2.4.6 "Correspondence
Description"): ``correspAction`` of ``type`` ``sent`` or ``received`` naming ``persName`` /
``orgName`` (with ``ref`` URIs or a ``key``), ``placeName`` and ``date`` (``when``,
``notBefore``/``notAfter``, ``from``/``to``). The file becomes the rows of a workbook
(``persons.csv``, ``places.csv``, ``sources.csv``, ``relations.csv``, ...) whose ``Row``
names the TEI file and the element's line, and :func:`import_tei` feeds them to the workbook
importer, so a TEI import is checked, matched and written exactly as a workbook is: all or
nothing, and a second import of the same file changes nothing.

Dates: ``when`` is copied as it is (the TEI's ISO forms are EDTF too); a ``notBefore`` /
``notAfter`` pair is one unknown day in a range, the EDTF one-of set ``[a..b]`` (not the
interval ``a/b``); ``from``/``to`` is a span of time, the EDTF interval ``a/b``.
"""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass, field

from lxml import etree
from sqlalchemy.orm import Session

from app.dates import DateError, interval_or_none
from app.db import Database
from app.exchange.matching import match_existing
from app.exchange.workbook import (
    KEY_RE,
    ImportReport,
    Problem,
    Row,
    WorkbookError,
    import_tables,
)
from app.exchange.xmlsafe import local_name, parse_untrusted
from app.names import fold

__all__ = ["identifier_from_uri", "import_tei", "labelled", "prepare_tei", "read_tei", "tei_date"]

PERSON_ELEMENTS = {"persName": "individual", "orgName": "corporate", "name": "individual"}
CERTAINTY = {"high": "certain", "medium": "probable", "low": "possible", "unknown": "possible"}
_ORDER = ("certain", "probable", "possible")
_AUTHORITIES = (  # URI patterns of the authority files the person page links to
    (re.compile(r"^https?://(?:www\.)?wikidata\.org/(?:entity|wiki)/(Q\d+)/?$"), "wikidata"),
    (re.compile(r"^https?://(?:www\.)?viaf\.org/viaf/(\d+)/?$"), "viaf"),
    (re.compile(r"^https?://d-nb\.info/gnd/([0-9X-]+)/?$"), "gnd"),
    (re.compile(r"^https?://(?:www\.)?isni\.org/isni/(\d{15}[\dX])/?$"), "isni"),
)


def identifier_from_uri(uri: str) -> tuple[str, str]:
    """Return ``(scheme, value)`` of an authority URI; an unknown one is kept whole under ``uri``.

    Examples
    --------
    >>> identifier_from_uri("http://www.wikidata.org/entity/Q42")
    ('wikidata', 'Q42')
    >>> identifier_from_uri("https://example.org/persons/17")
    ('uri', 'https://example.org/persons/17')
    """
    for pattern, scheme in _AUTHORITIES:
        found = pattern.match(uri)
        if found:
            return scheme, found.group(1)
    return "uri", uri


def tei_date(element: etree._Element) -> tuple[str | None, str | None]:
    """Return the EDTF text of a TEI ``date`` and the attribute it came from.

    Examples
    --------
    >>> tei_date(etree.fromstring('<date notBefore="1731-05-01" notAfter="1731-06-15"/>'))
    ('[1731-05-01..1731-06-15]', 'notBefore/notAfter')
    >>> tei_date(etree.fromstring('<date from="1703-05" to="1703-07"/>'))
    ('1703-05/1703-07', 'from/to')
    """
    get = lambda name: (element.get(name) or element.get(f"{name}-iso") or "").strip() or None  # noqa: E731
    when, not_before, not_after, start, end = get("when"), get("notBefore"), get("notAfter"), get("from"), get("to")
    if when:
        return when, "when"
    if not_before or not_after:  # one day, not known which, within the range
        return f"[{not_before or ''}..{not_after or ''}]", "notBefore/notAfter"
    if start or end:
        return f"{start or '..'}/{end or '..'}", "from/to"
    return None, None


@dataclass
class _Person:
    key: str
    name: str
    kind: str
    line: int
    identifiers: list[str] = field(default_factory=list)
    variants: list[str] = field(default_factory=list)


@dataclass
class _Party:
    key: str
    as_written: str
    certainty: str | None


class _Reader:
    def __init__(self, tree: etree._ElementTree, name: str):
        self.tree = tree
        self.name = name
        self.problems: list[Problem] = []
        self.persons: dict[str, _Person] = {}
        self.places: dict[str, Row] = {}
        self.repositories: dict[str, Row] = {}
        self.collections: dict[str, Row] = {}
        self.sources: list[Row] = []
        self.relations: list[Row] = []
        self.notes: list[str] = []
        self.by_id = {el.get("{http://www.w3.org/XML/1998/namespace}id"): el
                      for el in tree.iter() if el.get("{http://www.w3.org/XML/1998/namespace}id")}

    def problem(self, element: etree._Element | None, column: str, reason: str) -> None:
        self.problems.append(Problem(self.name, element.sourceline if element is not None else 1, column, reason))

    # -- the document --

    def read(self) -> None:
        root = self.tree.getroot()
        if local_name(root) not in ("TEI", "teiCorpus"):
            self.problem(root, "(tei)", f"not a TEI document: the root element is <{local_name(root)}>, not <TEI>")
            return
        headers = [el for el in root.iter() if local_name(el) == "teiHeader"]
        letters = 0
        for header in headers:
            profile = _child(header, "profileDesc")
            found = [el for el in (profile if profile is not None else []) if local_name(el) == "correspDesc"]
            for desc in found:
                self.letter(header, desc, alone=len(found) == 1)
            letters += len(found)
        if not letters:
            where = headers[0] if headers else root
            self.problem(where, "correspDesc", "this TEI file has no teiHeader/profileDesc/correspDesc, so it names no "
                         "letter to import (see the TEI Guidelines, 2.4.6 Correspondence Description)")

    def letter(self, header: etree._Element, desc: etree._Element, *, alone: bool) -> None:
        line = desc.sourceline
        senders, addressees = [], []
        sent_date = received_date = place_from = place_to = None
        calendar = None
        for action in desc:
            if local_name(action) != "correspAction":
                continue
            kind = (action.get("type") or "").strip()
            if kind not in ("sent", "received"):
                self.notes.append(f"line {action.sourceline}: correspAction type {kind or '(none)'!r} was left out "
                                  "(only sent and received are imported)")
                continue
            parties = [self.party(el) for el in action if local_name(el) in PERSON_ELEMENTS]
            date, place = None, None
            for el in action:
                if local_name(el) == "date" and date is None:
                    date = self.date(el)
                    calendar = calendar or _calendar(el) if kind == "sent" else calendar
                elif local_name(el) == "placeName" and place is None:
                    place = self.place(el)
            if kind == "sent":
                senders += [p for p in parties if p]
                sent_date, place_from = sent_date or date, place_from or place
            else:
                addressees += [p for p in parties if p]
                received_date, place_to = received_date or date, place_to or place
        key = self.source_key(header, desc, alone)
        values = {"key": key, "kind": "letter", "title": self.title(header, alone, senders, addressees, sent_date),
                  "date": sent_date or "", "received": received_date or "", "calendar": calendar or "",
                  "place_from": place_from or "", "place_to": place_to or "", "url": _web_ref(desc.get("ref")) or ""}
        if alone:
            values.update(self.archive(header))
        self.sources.append(Row(self.name, line, values))
        if not senders or not addressees:
            self.notes.append(f"line {line}: the letter {key} names no {'sender' if not senders else 'addressee'}, "
                              "so it attests no tie")
        for sender in senders:
            for addressee in addressees:
                certainty = max((p.certainty for p in (sender, addressee) if p.certainty), key=_ORDER.index, default="")
                self.relations.append(Row(self.name, line, {
                    "person": sender.key, "other": addressee.key, "kind": "letter", "source": key,
                    "certainty": certainty, "person_as_written": sender.as_written,
                    "other_as_written": addressee.as_written,
                }))

    # -- parts of a letter --

    def party(self, element: etree._Element) -> _Party | None:
        written = " ".join("".join(element.itertext()).split())
        refs = (element.get("ref") or "").split()
        key_attr = (element.get("key") or "").strip()
        identifiers, name, described = [], written, None
        for ref in refs:
            if ref.startswith("#"):  # a person described elsewhere in the file (listPerson)
                target = self.by_id.get(ref[1:])
                if target is None:
                    self.problem(element, f"{local_name(element)}/@ref", f"{ref} points to no element of this file")
                    return None
                for el in target.iter():
                    if local_name(el) == "idno" and (el.text or "").strip().startswith("http"):
                        identifiers.append(el.text.strip())
                    elif local_name(el) in PERSON_ELEMENTS and described is None:
                        described = " ".join("".join(el.itertext()).split()) or None
                key_attr = key_attr or ref[1:]
            else:
                identifiers.append(ref)
        name = described or name  # the name of the person's description comes before a spelling
        ids = [":".join(identifier_from_uri(uri)) for uri in identifiers]
        if not name and not ids and not key_attr:
            self.problem(element, local_name(element), "a name with neither text, ref nor key: nobody to import")
            return None
        if key_attr and KEY_RE.match(key_attr):
            key = key_attr
        elif ids:
            scheme, _, value = ids[0].partition(":")
            key = f"{scheme}-{value}" if scheme != "uri" and KEY_RE.match(f"{scheme}-{value}") else _hashed("tei-p", value)
        elif key_attr:
            key = _hashed("tei-p", key_attr)
        else:
            key = _slug_key("tei", name)
        person = self.persons.get(key)
        if person is None:
            person = self.persons[key] = _Person(key, name or key, PERSON_ELEMENTS[local_name(element)], element.sourceline)
        elif described and person.name != described:  # first met by a spelling, now by its description
            person.variants.append(person.name)
            person.name = described
        for spelling in (name, written):
            if spelling and spelling != person.name and spelling not in person.variants:
                person.variants.append(spelling)
        person.identifiers += [i for i in ids if i not in person.identifiers]
        cert = (element.get("cert") or "").strip().lower()
        return _Party(key, written, CERTAINTY.get(cert))

    def date(self, element: etree._Element) -> str | None:
        text, attribute = tei_date(element)
        if text is None:
            if "".join(element.itertext()).strip():
                self.notes.append(f"line {element.sourceline}: the date {''.join(element.itertext()).strip()!r} has no "
                                  "when, notBefore/notAfter or from/to attribute and was left out")
            return None
        try:
            interval_or_none(text, _calendar(element) or "gregorian")
        except DateError as error:
            self.problem(element, f"date/@{attribute}", str(error))
            return None
        return text

    def place(self, element: etree._Element) -> str | None:
        name = " ".join("".join(element.itertext()).split())
        refs = (element.get("ref") or "").split()
        key_attr = (element.get("key") or "").strip()
        if key_attr and KEY_RE.match(key_attr):
            key = key_attr
        elif refs:
            key = _hashed("tei-pl", refs[0])
        elif name:
            key = _slug_key("tei-pl", name)
        else:
            self.problem(element, "placeName", "a place with neither text, ref nor key")
            return None
        if key not in self.places:
            self.places[key] = Row(self.name, element.sourceline, {
                "key": key, "name": name or key, "identifier": refs[0] if refs else ""})
        return key

    def source_key(self, header: etree._Element, desc: etree._Element, alone: bool) -> str:
        own = desc.get("key") or desc.get("{http://www.w3.org/XML/1998/namespace}id") or desc.get("ref")
        if not own and alone:
            idno = _path(header, "fileDesc", "publicationStmt", "idno")
            own = idno.text.strip() if idno is not None and idno.text and idno.text.strip() else None
        if own:
            candidate = f"tei-{own.strip()}"
            return candidate if KEY_RE.match(candidate) else _hashed("tei", own.strip())
        return _hashed("tei", etree.tostring(desc, method="c14n").decode())

    def title(self, header, alone: bool, senders: list[_Party], addressees: list[_Party], date: str | None) -> str:  # noqa: ANN001
        title = _path(header, "fileDesc", "titleStmt", "title")
        if alone and title is not None and "".join(title.itertext()).strip():
            return " ".join("".join(title.itertext()).split())
        names = lambda parties: " and ".join(self.persons[p.key].name for p in parties) or "unknown"  # noqa: E731
        return f"Letter from {names(senders)} to {names(addressees)}" + (f", {date}" if date else "")

    def archive(self, header: etree._Element) -> dict[str, str]:
        """Where the letter is kept, from ``sourceDesc/msDesc/msIdentifier`` (repository, collection, idno)."""
        ms = _path(header, "fileDesc", "sourceDesc", "msDesc", "msIdentifier")
        if ms is None:
            return {}
        part = {local_name(el): " ".join("".join(el.itertext()).split()) for el in ms}
        repository = part.get("repository")
        if not repository:
            return {}
        rep_key = _slug_key("tei-rep", repository)
        self.repositories.setdefault(rep_key, Row(self.name, ms.sourceline, {"key": rep_key, "name": repository}))
        collection = part.get("collection") or f"{repository} (collection not named)"
        col_key = _slug_key("tei-col", f"{repository} {collection}")
        self.collections.setdefault(col_key, Row(self.name, ms.sourceline, {
            "key": col_key, "repository": rep_key, "name": collection}))
        return {"repository": rep_key, "collection": col_key, "reference": part.get("idno", "")}

    def tables(self) -> dict[str, list[Row]]:
        persons = [Row(self.name, p.line, {"key": p.key, "name": p.name, "kind": p.kind, "variants": "|".join(p.variants),
                                           "identifiers": "|".join(p.identifiers)}) for p in self.persons.values()]
        tables = {"places.csv": list(self.places.values()), "repositories.csv": list(self.repositories.values()),
                  "collections.csv": list(self.collections.values()), "persons.csv": persons,
                  "sources.csv": self.sources, "relations.csv": self.relations}
        return labelled(tables)


def labelled(tables: dict[str, list[Row]]) -> dict[str, list[Row]]:
    """Name each row's file as ``letters.xml [persons]``: the original file, and which kind of record.

    The importer counts and checks keys per file name, so the rows of one XML file that
    become persons, places and sources must not share one name.
    """
    return {table: [Row(f"{row.file} [{table.removesuffix('.csv')}]", row.line, row.values) for row in rows]
            for table, rows in tables.items() if rows}


def read_tei(data: bytes, name: str) -> tuple[dict[str, list[Row]], list[Problem]]:
    """Return the workbook rows of a TEI file's letters and the problems found (nothing is written).

    XML bombs and external entities are refused (see ``xmlsafe``); a TEI file without
    ``correspDesc`` is a problem. Rows name the TEI file and the line of their element.
    """
    tables, problems, _ = _read(data, name)
    return tables, problems


def _read(data: bytes, name: str) -> tuple[dict[str, list[Row]], list[Problem], list[str]]:
    tree, problems = parse_untrusted(data, name)
    if tree is None:
        return {}, problems, []
    reader = _Reader(tree, name)
    reader.read()
    return (reader.tables() if not reader.problems else {}), reader.problems, reader.notes


def prepare_tei(session: Session, data: bytes, name: str) -> tuple[dict[str, list[Row]], list[Problem], list[str]]:
    """Return the TEI file's rows matched to the stored data (read in ``session``), its problems and notes.

    Persons are matched to those already stored by key or by an identifier of their ``ref``;
    a stored person keeps the name it has (the TEI's spelling is added as a variant).
    Repositories and collections named like stored ones are those (see ``matching``).
    """
    tables, problems, notes = _read(data, name)
    if problems:
        return {}, problems, notes
    return match_existing(session, tables), [], notes


def import_tei(database: Database, data: bytes, name: str, *, actor: str = "cli") -> ImportReport:
    """Import the letters of a TEI file in one transaction; WorkbookError (nothing written) on any problem.

    The matching (:func:`prepare_tei`) reads in its own transaction just before the write.
    """
    with database.read() as session:
        tables, problems, notes = prepare_tei(session, data, name)
    if problems:
        raise WorkbookError(problems)
    return import_tables(database, tables, name=name, sha256=hashlib.sha256(data).hexdigest(), warnings=notes, actor=actor)


# --- helpers ---------------------------------------------------------------------------------


def _child(element: etree._Element, name: str) -> etree._Element | None:
    return next((el for el in element if local_name(el) == name), None)


def _path(element: etree._Element, *names: str) -> etree._Element | None:
    for name in names:
        if element is None:
            return None
        element = _child(element, name)
    return element


def _calendar(element: etree._Element) -> str | None:
    """The workbook calendar of a TEI ``@calendar`` pointer such as ``#julian``."""
    value = (element.get("calendar") or "").lower()
    if "julian" in value:
        return "julian"
    if "gregorian" in value:
        return "gregorian"
    return None


def _web_ref(ref: str | None) -> str | None:
    ref = (ref or "").split()
    return ref[0] if ref and ref[0].startswith(("http://", "https://")) else None


def _hashed(prefix: str, text: str) -> str:
    return f"{prefix}-{hashlib.sha256(text.encode()).hexdigest()[:12]}"


def _slug_key(prefix: str, text: str) -> str:
    """A readable key from a name (accents folded), shortened with a hash when long."""
    slug = re.sub(r"[^a-z0-9]+", "-", fold(text)).strip("-")
    key = f"{prefix}-{slug}"
    return key if slug and len(key) <= 80 else _hashed(prefix, text)
