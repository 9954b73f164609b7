"""The editing forms: persons, sources, relations, memberships, attestations (and deleting evidence).

Each form is a page (``GET``) with a JSON twin under ``/api/`` giving the same view-model (the
fields, their values and the record's ``version``), and a ``POST`` that saves it in one write
transaction with its audit entry and answers 303 to the record's page. A form that cannot be saved
is shown again (422) with the message beside the field and nothing written; a save on a stale
version is refused (409) with what changed meanwhile, field by field. To htmx (which swaps only
successful answers) the same forms answer 200.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from fastapi import APIRouter, HTTPException, Request
from fastapi.responses import HTMLResponse, RedirectResponse, Response
from starlette.concurrency import run_in_threadpool

from app.auth import CsrfChecked, EditorActor
from app.dates import CALENDARS
from app.db import DatabaseBusy
from app.documented import DOCUMENTED
from app.models import CERTAINTIES, EVIDENCE_KINDS, PERSON_KINDS
from app.store import editing
from app.store.editing import AttestationInput, EditError, FieldChange, StaleEdit
from app.views.common import SessionDep, render, urls_for

__all__ = ["FormField", "FormPage", "Fieldset", "StaleNotice", "router", "save"]

router = APIRouter(tags=["editing"])


@dataclass(frozen=True)
class FormField:
    """One field of a form, its value and, after a refused save, its message."""

    name: str
    label: str
    kind: str = "text"  # text, textarea, select, checkbox, hidden
    value: Any = ""
    error: str | None = None
    hint: str | None = None
    options: list[tuple[str, str]] = field(default_factory=list)  # (value, label) of a select
    required: bool = False
    suggests: str | None = None  # a URL that answers a new suggestion for the key field while this one is typed in
    suggested: str | None = None  # the key last suggested, kept to tell it from a key typed by hand


@dataclass(frozen=True)
class Fieldset:
    """A group of fields with a legend ("the tie", "its first attestation")."""

    legend: str | None
    fields: list[FormField]


@dataclass(frozen=True)
class StaleNotice:
    """Why a save was refused: the record changed since the form was loaded."""

    message: str
    changes: list[FieldChange]


@dataclass(frozen=True)
class FormPage:
    """A form page: where it posts, its fields, and what went wrong with the last save."""

    __pydantic_config__ = DOCUMENTED

    title: str
    """The heading of the form."""
    action: str
    """Where the form posts to."""
    submit: str
    """The label of the save button."""
    fieldsets: list[Fieldset]
    """The fields, in groups."""
    cancel: str | None = None
    """The page to go back to without saving."""
    errors: list[str] = field(default_factory=list)
    """Problems of the last save not tied to a field shown."""
    stale: StaleNotice | None = None
    """Set when the last save was refused because someone else changed the record meanwhile."""
    intro: str | None = None
    """A sentence above the form."""


# --- fields of each form ---------------------------------------------------------------------

_DATE_HINT = "EDTF: 1703-05-12, 1703-05, 1703, 1703? (uncertain), 1703~ (about), 1701/1705"
_CALENDAR_OPTIONS = [(c, c) for c in CALENDARS]


def _f(values: dict[str, Any], problems: dict[str, str], name: str, label: str, kind: str = "text", **extra: Any) -> FormField:
    value = values.get(name, extra.pop("default", False if kind == "checkbox" else ""))
    if value is None:
        value = ""
    if isinstance(value, list):
        value = "\n".join(value)
    return FormField(name=name, label=label, kind=kind, value=value, error=problems.get(name), **extra)


def person_fields(values: dict[str, Any], problems: dict[str, str], *, new: bool) -> list[Fieldset]:
    """The fields of the person form."""
    name = _f(values, problems, "name", "name", required=True, hint="the display name",
              suggests="/new/person/key" if new else None)
    fields = [
        name, key_field(values, problems) if new else _f(values, problems, "version", "version", "hidden"),
        _f(values, problems, "sort_name", "sorted as", hint="e.g. Brenner, Jost"),
        _f(values, problems, "kind", "kind", "select", options=[(k, k) for k in PERSON_KINDS], default="individual"),
        _f(values, problems, "unidentified", "not identified (known only by a description)", "checkbox"),
        _f(values, problems, "living", "living (data protection)", "checkbox"),
        _f(values, problems, "variants", "other spellings", "textarea", hint="one per line"),
        _f(values, problems, "born", "born", hint=_DATE_HINT),
        _f(values, problems, "died", "died", hint=_DATE_HINT),
        _f(values, problems, "calendar", "calendar of born and died", "select", options=_CALENDAR_OPTIONS, default="gregorian"),
        _f(values, problems, "identifiers", "identifiers", "textarea", hint="one scheme:value per line (wikidata:Q1, viaf:…, gnd:…, isni:…, local:…)"),
        _f(values, problems, "note", "note", "textarea"),
    ]
    return [Fieldset(None, fields)]


KEY_HINT = ("letters, digits and ._:- ; it never changes. Made from the name as you type it; "
            "change it as you like, or leave it blank to have it made on saving.")


def key_field(values: dict[str, Any], problems: dict[str, str], suggested: str | None = None) -> FormField:
    """The key box of a new person: what was typed, or the key suggested from the name."""
    return _f(values, problems, "key", "key", hint=KEY_HINT, suggested=suggested if suggested is not None
              else str(values.get("suggested") or ""))


def source_fields(values: dict[str, Any], problems: dict[str, str], *, new: bool, repositories: list[tuple[str, str]],
                  collections: list[tuple[str, str]]) -> list[Fieldset]:
    """The fields of the source form: its holder (picked or created) and its citation."""
    first = _f(values, problems, "key", "key", required=True, hint="letters, digits and ._:-") if new else \
        _f(values, problems, "version", "version", "hidden")
    holder = [
        _f(values, problems, "repository", "repository", "select", options=[("", "— none (a printed source) —"), *repositories]),
        _f(values, problems, "collection", "collection", "select", options=[("", "— none —"), *collections]),
        _f(values, problems, "new_repository_key", "or a new repository: key"),
        _f(values, problems, "new_repository_name", "new repository: name"),
        _f(values, problems, "new_collection_key", "or a new collection: key"),
        _f(values, problems, "new_collection_name", "new collection: name"),
    ]
    citation = [
        _f(values, problems, "reference", "shelfmark", hint="archival source: the reference in its collection"),
        _f(values, problems, "kind", "kind", hint="letter, register, deed, …"),
        _f(values, problems, "title", "title"),
        _f(values, problems, "author", "author"),
        _f(values, problems, "publisher", "publisher"),
        _f(values, problems, "year", "year (of publication)"),
        _f(values, problems, "pages", "pages"),
        _f(values, problems, "date", "date", hint=_DATE_HINT),
        _f(values, problems, "calendar", "calendar", "select", options=_CALENDAR_OPTIONS, default="gregorian"),
        _f(values, problems, "url", "digital copy", hint="a web address (https://…)"),
        _f(values, problems, "note", "note", "textarea"),
    ]
    return [Fieldset(None, [first]), Fieldset("where it is kept", holder), Fieldset("the document", citation)]


def attestation_fields(values: dict[str, Any], problems: dict[str, str], *, names: bool = True) -> list[FormField]:
    """The fields of one attestation: source, locus, evidence, certainty, date, quote."""
    fields = [
        _f(values, problems, "source", "source", required=True, hint="the key of the document (see Sources)"),
        _f(values, problems, "locus", "locus", hint="folio, page, line"),
        _f(values, problems, "evidence", "evidence", "select", options=[(e, e) for e in EVIDENCE_KINDS], default="original"),
        _f(values, problems, "certainty", "certainty", "select", options=[(c, c) for c in CERTAINTIES], default="certain"),
        _f(values, problems, "identification", "identification", "select", options=[(c, c) for c in CERTAINTIES], default="certain",
           hint="how sure it is who is meant"),
        _f(values, problems, "date", "date", hint="blank: the source's date. " + _DATE_HINT),
        _f(values, problems, "calendar", "calendar", "select", options=[("", "the source's"), *_CALENDAR_OPTIONS]),
        _f(values, problems, "quote", "quote", "textarea"),
        _f(values, problems, "note", "note", "textarea"),
    ]
    if names:
        fields[7:7] = [_f(values, problems, "person_as_written", "first person as written"),
                       _f(values, problems, "other_as_written", "other person as written")]
    return fields


def attestation_input(values: dict[str, Any]) -> AttestationInput:
    """The attestation fields of a submitted form."""
    names = ("source", "locus", "evidence", "certainty", "identification", "date", "calendar", "quote", "note",
             "person_as_written", "other_as_written")
    return AttestationInput(**{n: str(values.get(n) or "") for n in names})


# --- saving ----------------------------------------------------------------------------------


async def form_values(request: Request) -> dict[str, Any]:
    """The submitted form as a dict (a repeated field as a list; a ticked checkbox as True)."""
    form = await request.form()
    values: dict[str, Any] = {}
    for name in form:
        items = [str(v) for v in form.getlist(name)]
        values[name] = items if len(items) > 1 else items[0]
    for name in ("unidentified", "living"):
        values[name] = name in form
    values.pop("csrf_token", None)
    return values


async def save(request: Request, work: Callable[[Any], Any]) -> Any:
    """Run ``work(session)`` in one write transaction off the event loop; return its result."""
    database = request.app.state.database

    def run() -> Any:
        with database.write() as session:
            return work(session)

    return await run_in_threadpool(run)


async def submit(request: Request, work: Callable[[Any], Any], page: Callable[[dict, dict[str, str]], FormPage],
                 values: dict[str, Any], done: Callable[[Any], str]) -> Response:
    """Save the form with ``work``; on success 303 to ``done(result)``, else the form again with its messages."""
    try:
        result = await save(request, work)
    except EditError as error:
        view = page(values, error.problems)
        shown = {f.name for s in view.fieldsets for f in s.fields if f.kind != "hidden"}
        others = [f"{n}: {m}" for n, m in error.problems.items() if n not in shown]
        return _again(request, _with(view, errors=others), 422)
    except StaleEdit as stale:
        view = page({**values, "version": stale.current}, {})
        notice = StaleNotice(str(stale) + " Your values are still in the form: saving again puts them in place of "
                             "the changes listed.", stale.changes)
        return _again(request, _with(view, stale=notice), 409)
    except DatabaseBusy as busy:
        return _again(request, _with(page(values, {}), errors=[str(busy)]), 503)
    except LookupError as missing:
        raise HTTPException(404, str(missing)) from missing
    return RedirectResponse(done(result), status_code=303)


def _with(view: FormPage, **changes: Any) -> FormPage:
    return FormPage(**{**view.__dict__, **changes})


def _again(request: Request, view: FormPage, status: int) -> Response:
    # htmx swaps only successful answers; a plain browser shows any
    code = 200 if "HX-Request" in request.headers else status
    return render(request, view, template="edit_form.html", status_code=code)


def show(request: Request, view: FormPage) -> Response:
    """Answer a form page (or its JSON twin)."""
    return render(request, view, template="edit_form.html")


def _pair(path: str, summary: str, description: str, builder: Callable[..., FormPage]) -> None:
    """Register the form page and its JSON twin, both from ``builder(request, session, **path_params)``."""

    def page(request: Request, session: SessionDep, _: EditorActor) -> Response:
        return show(request, builder(request, session, **request.path_params))

    router.add_api_route(path, page, methods=["GET"], response_class=HTMLResponse, summary=f"{summary} (page)",
                         description=f"{description} Editors only. The same form in JSON: `/api{path}`.", name=f"form:{path}")
    router.add_api_route(f"/api{path}", page, methods=["GET"], response_model=FormPage, summary=f"{summary} (JSON)",
                         description=f"{description} Editors only. The page with the same form: `{path}`.", name=f"form-api:{path}")


# --- persons ---------------------------------------------------------------------------------

_PERSON_FORM = ("A form for a person: key (new persons only), name, sort name, kind, unidentified, living, other "
                "spellings (one per line), born and died in EDTF with their calendar, authority identifiers "
                "(`scheme:value`, one per line) and a note.")


def _new_person_page(values: dict, problems: dict[str, str], urls) -> FormPage:  # noqa: ANN001
    return FormPage("New person", urls.new("person"), "Create the person", person_fields(values, problems, new=True),
                    cancel=urls.persons())


def _edit_person_page(key: str, values: dict, problems: dict[str, str], urls) -> FormPage:  # noqa: ANN001
    return FormPage(f"Edit {key}", urls.edit_person(key), "Save", person_fields(values, problems, new=False),
                    cancel=urls.person(key))


def _person_form_values(request: Request, session: SessionDep, key: str) -> dict:
    values = editing.get_person_values(session=session, key=key)
    if values is None:
        raise HTTPException(404, f"no person with key '{key}'")
    return values


_KEY_SUGGESTION = ("The key box of the new person form, with a key made from `name` (folded, words joined by hyphens, "
                   "\"-2\", \"-3\"... when it is taken). A `key` typed by hand (one that is not the last `suggested`) "
                   "is kept as it is. htmx asks for it while the name is typed.")


def key_suggestion(session: SessionDep, name: str, key: str, suggested: str) -> FormField:
    """Return the key box: a new suggestion when the box is blank or still holds the last one, else the typed key."""
    typed = key.strip()
    if typed and typed != suggested.strip():
        return key_field({"key": key}, {}, suggested)
    fresh = editing.suggest_person_key(session=session, name=name) if name.strip() else ""
    return key_field({"key": fresh}, {}, fresh)


@router.get("/new/person/key", response_class=HTMLResponse, summary="A key suggested from a name (form piece)",
            description=_KEY_SUGGESTION + " Editors only. JSON twin: `/api/new/person/key`.")
def key_suggestion_piece(request: Request, session: SessionDep, _: EditorActor, name: str = "", key: str = "",
                         suggested: str = "") -> Response:
    return render(request, key_suggestion(session, name, key, suggested), template="_key_field.html")


@router.get("/api/new/person/key", response_model=FormField, summary="A key suggested from a name (JSON)",
            description=_KEY_SUGGESTION + " Editors only. The form piece: `/new/person/key`.")
def key_suggestion_api(request: Request, session: SessionDep, _: EditorActor, name: str = "", key: str = "",
                       suggested: str = "") -> Response:
    return render(request, key_suggestion(session, name, key, suggested), template="_key_field.html")


_pair("/new/person", "New person form", _PERSON_FORM,
      lambda request, session: _new_person_page({}, {}, urls_for(request)))
_pair("/persons/{key}/edit", "Edit a person", _PERSON_FORM + " It carries the person's `version`: a save on an older "
      "version than the stored one is refused with what changed.",
      lambda request, session, key: _edit_person_page(key, _person_form_values(request, session, key), {}, urls_for(request)))


def _person_arguments(values: dict) -> dict:
    names = ("name", "sort_name", "kind", "variants", "born", "died", "calendar", "identifiers", "note")
    return {**{n: str(values.get(n) or "") for n in names}, "unidentified": bool(values.get("unidentified")),
            "living": bool(values.get("living"))}


@router.post("/new/person", response_class=RedirectResponse, summary="Create a person",
             description="Saves the new person form (" + _PERSON_FORM + ") and answers 303 to the person's page; a field "
             "that cannot be saved shows the form again (422) with its message, nothing written.")  # fmt: skip
async def create_person(request: Request, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    urls = urls_for(request)
    return await submit(
        request,
        lambda s: editing.create_person(session=s, actor=actor, key=str(values.get("key") or ""), **_person_arguments(values)),
        lambda v, p: _new_person_page(v, p, urls), values, urls.person)


@router.post("/persons/{key}/edit", response_class=RedirectResponse, summary="Save a person",
             description="Saves the person form and answers 303 to the person's page; a field that cannot be saved shows "
             "the form again (422); a stale `version` is refused (409) with the fields someone else changed.")  # fmt: skip
async def update_person(request: Request, key: str, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    urls = urls_for(request)
    return await submit(
        request,
        lambda s: editing.update_person(session=s, actor=actor, key=key, version=values.get("version"), **_person_arguments(values)),
        lambda v, p: _edit_person_page(key, v, p, urls), values, lambda _: urls.person(key))


# --- groups ----------------------------------------------------------------------------------

_GROUP_FORM = ("A form for a group (institution, society, household, parish, company, event): key (new groups only), "
               "name, kind, place (key), parent group (key), start and end in EDTF and a note.")


def group_fields(values: dict[str, Any], problems: dict[str, str], *, new: bool) -> list[Fieldset]:
    """The fields of the group form."""
    fields = [
        _f(values, problems, "key", "key", required=True, hint="letters, digits and ._:- ; it never changes")
        if new else _f(values, problems, "version", "version", "hidden"),
        _f(values, problems, "name", "name", required=True),
        _f(values, problems, "kind", "kind", hint="e.g. society, household, parish, company"),
        _f(values, problems, "place", "place", hint="key of a recorded place"),
        _f(values, problems, "parent", "part of", hint="key of the group it belongs to"),
        _f(values, problems, "start", "start", hint=_DATE_HINT),
        _f(values, problems, "end", "end", hint=_DATE_HINT),
        _f(values, problems, "note", "note", "textarea"),
    ]
    return [Fieldset(None, fields)]


def _new_group_page(values: dict, problems: dict[str, str], urls) -> FormPage:  # noqa: ANN001
    return FormPage("New group", urls.new("group"), "Create the group", group_fields(values, problems, new=True),
                    cancel=urls.groups())


def _edit_group_page(key: str, values: dict, problems: dict[str, str], urls) -> FormPage:  # noqa: ANN001
    return FormPage(f"Edit {key}", urls.edit_group(key), "Save", group_fields(values, problems, new=False),
                    cancel=urls.group(key))


def _group_form_values(request: Request, session: SessionDep, key: str) -> dict:
    values = editing.get_group_values(session=session, key=key)
    if values is None:
        raise HTTPException(404, f"no group with key '{key}'")
    return values


_pair("/new/group", "New group form", _GROUP_FORM, lambda request, session: _new_group_page({}, {}, urls_for(request)))
_pair("/groups/{key}/edit", "Edit a group", _GROUP_FORM + " It carries the group's `version` (see the person form).",
      lambda request, session, key: _edit_group_page(key, _group_form_values(request, session, key), {}, urls_for(request)))


def _group_arguments(values: dict) -> dict:
    return {n: str(values.get(n) or "") for n in ("name", "kind", "place", "parent", "start", "end", "note")}


@router.post("/new/group", response_class=RedirectResponse, summary="Create a group",
             description="Saves the new group form (" + _GROUP_FORM + ") and answers 303 to the group's page; refusals "
             "as for a person (422).")  # fmt: skip
async def create_group(request: Request, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    urls = urls_for(request)
    return await submit(
        request,
        lambda s: editing.create_group(session=s, actor=actor, key=str(values.get("key") or ""), **_group_arguments(values)),
        lambda v, p: _new_group_page(v, p, urls), values, urls.group)


@router.post("/groups/{key}/edit", response_class=RedirectResponse, summary="Save a group",
             description="Saves the group form and answers 303 to the group's page; refusals as for a person (422, 409).")
async def update_group(request: Request, key: str, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    urls = urls_for(request)
    return await submit(
        request,
        lambda s: editing.update_group(session=s, actor=actor, key=key, version=values.get("version"), **_group_arguments(values)),
        lambda v, p: _edit_group_page(key, v, p, urls), values, lambda _: urls.group(key))


# --- sources ---------------------------------------------------------------------------------

_SOURCE_FORM = ("A form for a document: key (new sources only), its repository and collection picked from those "
                "recorded or created here (key and name), or none for a printed source, shelfmark, kind, title, "
                "author, publisher, year, pages, date in EDTF with its calendar, digital copy (a web address) and note.")
_SOURCE_NAMES = ("repository", "new_repository_key", "new_repository_name", "collection", "new_collection_key",
                 "new_collection_name", "reference", "kind", "title", "author", "publisher", "year", "pages", "date",
                 "calendar", "url", "note")


def _source_page(request: Request, values: dict, problems: dict[str, str], key: str | None) -> FormPage:
    urls = urls_for(request)
    with request.app.state.database.read() as session:
        repositories, collections = editing.list_holders(session=session)
    fields = source_fields(values, problems, new=key is None, repositories=repositories, collections=collections)
    if key is None:
        return FormPage("New source", urls.new("source"), "Create the source", fields, cancel=urls.sources())
    return FormPage(f"Edit source {key}", urls.edit_source(key), "Save", fields, cancel=urls.source(key))


def _source_form_values(session: SessionDep, key: str) -> dict:
    values = editing.get_source_values(session=session, key=key)
    if values is None:
        raise HTTPException(404, f"no source with key '{key}'")
    return values


_pair("/new/source", "New source form", _SOURCE_FORM, lambda request, session: _source_page(request, {}, {}, None))
_pair("/sources/{key}/edit", "Edit a source", _SOURCE_FORM + " It carries the source's `version` (see the person form).",
      lambda request, session, key: _source_page(request, _source_form_values(session, key), {}, key))


@router.post("/new/source", response_class=RedirectResponse, summary="Create a source",
             description="Saves the new source form (and the repository and collection it creates) and answers 303 to "
             "the source's page; a field that cannot be saved shows the form again (422), nothing written.")  # fmt: skip
async def create_source(request: Request, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    arguments = {n: str(values.get(n) or "") for n in _SOURCE_NAMES}
    return await submit(
        request, lambda s: editing.create_source(session=s, actor=actor, key=str(values.get("key") or ""), **arguments),
        lambda v, p: _source_page(request, v, p, None), values, urls_for(request).source)


@router.post("/sources/{key}/edit", response_class=RedirectResponse, summary="Save a source",
             description="Saves the source form and answers 303 to the source's page; its undated attestations take its "
             "new date. Refusals as for a person (422, 409).")  # fmt: skip
async def update_source(request: Request, key: str, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    arguments = {n: str(values.get(n) or "") for n in _SOURCE_NAMES}
    return await submit(
        request, lambda s: editing.update_source(session=s, actor=actor, key=key, version=values.get("version"), **arguments),
        lambda v, p: _source_page(request, v, p, key), values, lambda _: urls_for(request).source(key))


# --- relations -------------------------------------------------------------------------------

_RELATION_FORM = ("A form for a tie between two persons with its first attestation: person (the first end of a directed "
                  "kind: sender, parent, patron), other, kind, and the attestation's source, locus, evidence, certainty, "
                  "identification, optional date and calendar, names as written, quote and note. A tie cannot be saved "
                  "without its attestation; a tie that exists already gets the attestation added. `person` and `other` "
                  "in the query string fill the form.")


def _relation_page(request: Request, values: dict, problems: dict[str, str]) -> FormPage:
    urls = urls_for(request)
    with request.app.state.database.read() as session:
        kinds = editing.list_relation_kinds(session=session)
    tie = [
        _f(values, problems, "person", "person", required=True, hint="key; for a directed kind the first end (sender, parent, patron)"),
        _f(values, problems, "kind", "kind", "select", options=kinds, default="letter"),
        _f(values, problems, "other", "other person", required=True, hint="key"),
    ]
    return FormPage("New relation", urls.new("relation"), "Save the relation and its evidence",
                    [Fieldset("the tie", tie), Fieldset("its first attestation", attestation_fields(values, problems))],
                    cancel=urls.person(values["person"]) if values.get("person") else urls.persons())


_pair("/new/relation", "New relation form", _RELATION_FORM,
      lambda request, session: _relation_page(request, dict(request.query_params), {}))


@router.post("/new/relation", response_class=RedirectResponse, summary="Create a relation with its attestation",
             description="Saves the new relation form and answers 303 to the relation's page; without a valid attestation "
             "nothing is written and the form comes back (422) with the messages.")  # fmt: skip
async def create_relation(request: Request, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    return await submit(
        request, lambda s: editing.create_relation(
            session=s, actor=actor, person=str(values.get("person") or ""), other=str(values.get("other") or ""),
            kind=str(values.get("kind") or ""), attestation=attestation_input(values)),
        lambda v, p: _relation_page(request, v, p), values, urls_for(request).relation)


def _add_attestation_page(request: Request, values: dict, problems: dict[str, str], relation_id: int) -> FormPage:
    urls = urls_for(request)
    return FormPage("Add an attestation", urls.relation_attestations(relation_id), "Add the attestation",
                    [Fieldset(None, attestation_fields(values, problems))], cancel=urls.relation(relation_id))


@router.post("/relations/{relation_id}/attestations", response_class=RedirectResponse,
             summary="Add an attestation to a relation",
             description="The short form on the relation page: source, locus, evidence, certainty, identification, "
             "optional date, names as written, quote, note. Answers 303 to the relation page; a field that cannot be "
             "saved shows the form again (422), nothing written.")  # fmt: skip
async def add_relation_attestation(request: Request, relation_id: int, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    return await submit(
        request, lambda s: editing.create_attestation(session=s, actor=actor, relation_id=relation_id,
                                                      attestation=attestation_input(values)),
        lambda v, p: _add_attestation_page(request, v, p, relation_id), values,
        lambda _: urls_for(request).relation(relation_id))


# --- memberships -----------------------------------------------------------------------------

_MEMBERSHIP_FORM = ("A form for a person's membership of a group with its first attestation: person, group (keys), "
                    "role, start and end of the term as recorded (EDTF), and the attestation's source, locus, evidence, "
                    "certainty, optional date, quote and note. `person` and `group` in the query string fill the form.")


def _membership_page(request: Request, values: dict, problems: dict[str, str]) -> FormPage:
    urls = urls_for(request)
    tie = [
        _f(values, problems, "person", "person", required=True, hint="key"),
        _f(values, problems, "group", "group", required=True, hint="key"),
        _f(values, problems, "role", "role"),
        _f(values, problems, "start", "start of the term", hint=_DATE_HINT),
        _f(values, problems, "end", "end of the term", hint=_DATE_HINT),
    ]
    return FormPage("New membership", urls.new("membership"), "Save the membership and its evidence",
                    [Fieldset("the membership", tie), Fieldset("its first attestation", attestation_fields(values, problems, names=False))],
                    cancel=urls.group(values["group"]) if values.get("group") else urls.groups())


_pair("/new/membership", "New membership form", _MEMBERSHIP_FORM,
      lambda request, session: _membership_page(request, dict(request.query_params), {}))


@router.post("/new/membership", response_class=RedirectResponse, summary="Create a membership with its attestation",
             description="Saves the new membership form and answers 303 to the membership's page; without a valid "
             "attestation nothing is written and the form comes back (422).")  # fmt: skip
async def create_membership(request: Request, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    return await submit(
        request, lambda s: editing.create_membership(
            session=s, actor=actor, person=str(values.get("person") or ""), group=str(values.get("group") or ""),
            role=str(values.get("role") or ""), start=str(values.get("start") or ""), end=str(values.get("end") or ""),
            attestation=attestation_input(values)),
        lambda v, p: _membership_page(request, v, p), values, urls_for(request).membership)


def _edit_membership_page(request: Request, membership_id: int, values: dict, problems: dict[str, str]) -> FormPage:
    urls = urls_for(request)
    fields = [_f(values, problems, "version", "version", "hidden"), _f(values, problems, "role", "role"),
              _f(values, problems, "start", "start of the term", hint=_DATE_HINT),
              _f(values, problems, "end", "end of the term", hint=_DATE_HINT)]
    return FormPage(f"Edit the membership of {values.get('person')} in {values.get('group')}",
                    urls.edit_membership(membership_id), "Save", [Fieldset(None, fields)], cancel=urls.membership(membership_id))


def _membership_values(session: SessionDep, membership_id: int | str) -> dict:
    try:
        number = int(membership_id)
    except ValueError:
        raise HTTPException(404, f"no membership with id {membership_id}") from None
    values = editing.get_membership_values(session=session, membership_id=number)
    if values is None:
        raise HTTPException(404, f"no membership with id {membership_id}")
    return values


def _edit_membership_form(request: Request, session: SessionDep, membership_id: str) -> FormPage:
    values = _membership_values(session, membership_id)  # 404 unless a known id
    return _edit_membership_page(request, int(membership_id), values, {})


_pair("/memberships/{membership_id}/edit", "Edit a membership",
      "The role and recorded term of one membership, with its `version` (a stale save is refused with what changed).",
      lambda request, session, membership_id: _edit_membership_form(request, session, membership_id))


@router.post("/memberships/{membership_id}/edit", response_class=RedirectResponse, summary="Save a membership",
             description="Saves role and term and answers 303 to the membership's page; refusals as for a person (422, 409).")  # fmt: skip
async def update_membership(request: Request, membership_id: int, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    with request.app.state.database.read() as session:
        shown = {**_membership_values(session, membership_id), **values}
    return await submit(
        request, lambda s: editing.update_membership(
            session=s, actor=actor, membership_id=membership_id, version=values.get("version"),
            role=str(values.get("role") or ""), start=str(values.get("start") or ""), end=str(values.get("end") or "")),
        lambda v, p: _edit_membership_page(request, membership_id, {**shown, **v}, p), values,
        lambda _: urls_for(request).membership(membership_id))


@router.post("/memberships/{membership_id}/attestations", response_class=RedirectResponse,
             summary="Add an attestation to a membership",
             description="The short form on the membership page (source, locus, evidence, certainty, date, quote, note); "
             "answers 303 to the membership page, or the form again (422).")  # fmt: skip
async def add_membership_attestation(request: Request, membership_id: int, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    urls = urls_for(request)
    return await submit(
        request, lambda s: editing.create_attestation(session=s, actor=actor, membership_id=membership_id,
                                                      attestation=attestation_input(values)),
        lambda v, p: FormPage("Add an attestation", urls.membership_attestations(membership_id), "Add the attestation",
                              [Fieldset(None, attestation_fields(v, p, names=False))], cancel=urls.membership(membership_id)),
        values, lambda _: urls.membership(membership_id))


# --- attestations ----------------------------------------------------------------------------


def _attestation_page(request: Request, key: str, values: dict, problems: dict[str, str]) -> FormPage:
    urls = urls_for(request)
    back = urls.relation(values["relation"]) if values.get("relation") else (
        urls.membership(values["membership"]) if values.get("membership") else None)
    fields = [_f(values, problems, "version", "version", "hidden"),
              *attestation_fields(values, problems, names=bool(values.get("relation")))]
    return FormPage(f"Edit attestation {key}", urls.edit_attestation(key), "Save", [Fieldset(None, fields)], cancel=back)


def _attestation_values(session: SessionDep, key: str) -> dict:
    values = editing.get_attestation_values(session=session, key=key)
    if values is None:
        raise HTTPException(404, f"no attestation with key '{key}'")
    return values


_pair("/attestations/{key}/edit", "Edit an attestation",
      "The citation of one attestation (source, locus, evidence, certainty, identification, date, names as written, "
      "quote, note) with its `version` (a stale save is refused with what changed).",
      lambda request, session, key: _attestation_page(request, key, _attestation_values(session, key), {}))


@router.post("/attestations/{key}/edit", response_class=RedirectResponse, summary="Save an attestation",
             description="Saves the attestation form and answers 303 to its relation's or membership's page; refusals "
             "as for a person (422, 409).")  # fmt: skip
async def update_attestation(request: Request, key: str, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    with request.app.state.database.read() as session:
        stored = _attestation_values(session, key)
    return await submit(
        request, lambda s: editing.update_attestation(session=s, actor=actor, key=key, version=values.get("version"),
                                                      attestation=attestation_input(values)),
        lambda v, p: _attestation_page(request, key, {**stored, **v}, p), values,
        lambda _: _back_to_tie(request, stored))


def _back_to_tie(request: Request, stored: dict) -> str:
    urls = urls_for(request)
    if stored.get("relation"):
        return urls.relation(stored["relation"])
    if stored.get("membership"):
        return urls.membership(stored["membership"])
    return urls.audit(table="attestation", key=stored["key"])


def _delete_page(request: Request, key: str, values: dict, problems: dict[str, str]) -> FormPage:
    urls = urls_for(request)
    return FormPage(f"Delete attestation {key}", urls.delete_attestation(key), "Delete this evidence",
                    [Fieldset(None, [_f(values, problems, "reason", "reason", "textarea", required=True,
                                        hint="why this evidence goes (a misreading, a duplicate…); it is kept in the audit trail")])],
                    cancel=_back_to_tie(request, values),
                    intro="The attestation is marked deleted, not erased: it leaves the network and the pages, stays in "
                          "the database and the audit trail, and can be restored. A tie lives while one of its "
                          "attestations is not deleted.")


_pair("/attestations/{key}/delete", "Delete an attestation (form)",
      "Asks for the reason before an attestation is deleted.",
      lambda request, session, key: _delete_page(request, key, _attestation_values(session, key), {}))


@router.post("/attestations/{key}/delete", response_class=RedirectResponse, summary="Delete an attestation",
             description="Marks the attestation deleted with the `reason` given (required) and answers 303 to its tie's "
             "page; the audit trail keeps it and `/attestations/{key}/restore` brings it back.")  # fmt: skip
async def delete_attestation(request: Request, key: str, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    with request.app.state.database.read() as session:
        stored = _attestation_values(session, key)
    return await submit(
        request, lambda s: editing.delete_attestation(session=s, actor=actor, key=key, reason=str(values.get("reason") or "")),
        lambda v, p: _delete_page(request, key, {**stored, **v}, p), values, lambda _: _back_to_tie(request, stored))


@router.post("/attestations/{key}/restore", response_class=RedirectResponse, summary="Restore a deleted attestation",
             description="Undoes the deletion of an attestation (the button on the relation, membership and audit pages) "
             "and answers 303 to its tie's page.")  # fmt: skip
async def restore_attestation(request: Request, key: str, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    with request.app.state.database.read() as session:
        stored = _attestation_values(session, key)
    return await submit(
        request, lambda s: editing.restore_attestation(session=s, actor=actor, key=key),
        lambda v, p: _delete_page(request, key, stored, p), values, lambda _: _back_to_tie(request, stored))
