"""Pages around editing: one membership, merging and splitting persons, "possibly the same as" links.

Merging shows its preview first (``GET /merge?kept=&absorbed=``: what moves, what fuses, which tie
becomes a self-loop) and merges only when that preview is confirmed (``POST /merge``).
"""

from __future__ import annotations

from dataclasses import dataclass

from fastapi import APIRouter, HTTPException, Request
from fastapi.responses import HTMLResponse, RedirectResponse, Response

from app.auth import CsrfChecked, EditorActor
from app.documented import DOCUMENTED
from app.store import editing, merging
from app.store.attestations import CitedAttestation, get_cited_attestations
from app.store.editing import DeletedAttestation, EditError, MembershipDetail
from app.store.merging import MergePreview, SplitChoice
from app.views.common import SessionDep, render, urls_for
from app.views.editing import FormPage, form_values, save, submit

__all__ = ["MembershipPage", "MergePage", "SplitPage", "router"]

router = APIRouter(tags=["editing"])


# --- one membership --------------------------------------------------------------------------


@dataclass(frozen=True)
class MembershipPage:
    """One membership with its attestations, the deleted ones (restorable) and its version."""

    __pydantic_config__ = DOCUMENTED

    membership: MembershipDetail
    """Person, group, role, recorded term and version."""
    attestations: list[CitedAttestation]
    """Its attestations that are not deleted, as full citations."""
    deleted: list[DeletedAttestation]
    """Its deleted attestations with the reason, newest deletion first."""


def membership_view(*, session: SessionDep, membership_id: int) -> MembershipPage:
    """Return the view-model of one membership; 404 when there is none with that id."""
    detail = editing.get_membership(session=session, membership_id=membership_id)
    if detail is None:
        raise HTTPException(404, f"no membership with id {membership_id}")
    return MembershipPage(detail, get_cited_attestations(session=session, attestation_ids=detail.attestation_ids),
                          editing.list_deleted_attestations(session=session, membership_id=membership_id))


_MEMBERSHIP = ("One membership (a person in a group with a role): its recorded term, every attestation that is not "
               "deleted as a full citation, and its deleted attestations with the reason (editors can restore them, "
               "add one more attestation, or edit role and term).")


@router.get("/memberships/{membership_id}", response_class=HTMLResponse, summary="One membership (page)",
            description=_MEMBERSHIP + " The same data in JSON: `/api/memberships/{membership_id}`.")
def membership_page(request: Request, membership_id: int, session: SessionDep) -> Response:
    return render(request, membership_view(session=session, membership_id=membership_id), template="membership.html")


@router.get("/api/memberships/{membership_id}", response_model=MembershipPage, summary="One membership (JSON)",
            description=_MEMBERSHIP + " The page with the same data: `/memberships/{membership_id}`.")
def membership_api(request: Request, membership_id: int, session: SessionDep) -> Response:
    return render(request, membership_view(session=session, membership_id=membership_id), template="membership.html")


# --- merge -----------------------------------------------------------------------------------


@dataclass(frozen=True)
class MergePage:
    """The merge form: two persons picked, and what merging them would do."""

    __pydantic_config__ = DOCUMENTED

    kept: str
    """The key of the person who stays."""
    absorbed: str
    """The key of the person merged into them (it becomes an old key that redirects)."""
    preview: MergePreview | None
    """What the merge moves, fuses and turns into self-loops (None until two persons are picked)."""
    problems: dict[str, str]
    """What is wrong with the persons picked, by field."""


def merge_view(*, session: SessionDep, kept: str = "", absorbed: str = "") -> MergePage:
    """Return the merge form with the preview of merging ``absorbed`` into ``kept`` when both are given."""
    preview, problems = None, {}
    if kept.strip() and absorbed.strip():
        try:
            preview = merging.preview_merge(session=session, kept=kept, absorbed=absorbed)
        except EditError as error:
            problems = error.problems
    return MergePage(kept=kept, absorbed=absorbed, preview=preview, problems=problems)


_MERGE = ("Merging two persons found to be one: `kept` and `absorbed` (keys) give a preview of what would move to "
          "`kept` (spellings, identifiers, facts, attestations, memberships), which relations would fuse with one of "
          "`kept` of the same kind and other end, and which relation between the two would become a self-loop. "
          "Nothing changes until the preview is confirmed. Editors only.")


@router.get("/merge", response_class=HTMLResponse, summary="Merge two persons: pick and preview (page)",
            description=_MERGE + " The same data in JSON: `/api/merge`.")
def merge_page(request: Request, session: SessionDep, _: EditorActor, kept: str = "", absorbed: str = "") -> Response:
    return render(request, merge_view(session=session, kept=kept, absorbed=absorbed), template="merge.html")


@router.get("/api/merge", response_model=MergePage, summary="Merge two persons: preview (JSON)",
            description=_MERGE + " The page with the same data: `/merge`.")
def merge_api(request: Request, session: SessionDep, _: EditorActor, kept: str = "", absorbed: str = "") -> Response:
    return render(request, merge_view(session=session, kept=kept, absorbed=absorbed), template="merge.html")


@router.post("/merge", response_class=RedirectResponse, summary="Merge two persons",
             description="Merges person `absorbed` into `kept` (form fields) as the preview showed, in one transaction "
             "with its audit entry, and answers 303 to the kept person's page; the absorbed key redirects there from "
             "now on. Two unknown or equal keys show the form again (422).")
async def merge(request: Request, session: SessionDep, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    kept, absorbed = str(values.get("kept") or ""), str(values.get("absorbed") or "")
    try:
        await save(request, lambda s: merging.merge_persons(session=s, actor=actor, kept=kept, absorbed=absorbed))
    except EditError as error:
        page = MergePage(kept=kept, absorbed=absorbed, preview=None, problems=error.problems)
        return render(request, page, template="merge.html", status_code=200 if "HX-Request" in request.headers else 422)
    return RedirectResponse(urls_for(request).person(kept.strip()), status_code=303)


# --- split -----------------------------------------------------------------------------------


@dataclass(frozen=True)
class SplitPage:
    """The split form: a person's attestations and spellings, to choose those of a new person."""

    __pydantic_config__ = DOCUMENTED

    key: str
    """The person split."""
    name: str
    """Their display name."""
    variants: list[str]
    """Their other spellings (any may move to the new person)."""
    choices: list[SplitChoice]
    """Every attestation of their relations, memberships and facts."""
    new_key: str
    """The key of the new person (as typed)."""
    new_name: str
    """The name of the new person (as typed)."""
    chosen: list[str]
    """The attestations ticked."""
    problems: dict[str, str]
    """What kept the last split from being saved, by field."""


def split_view(*, session: SessionDep, key: str, new_key: str = "", new_name: str = "", chosen: list[str] | None = None,
               problems: dict[str, str] | None = None) -> SplitPage:
    """Return the split form of person ``key``; 404 when unknown."""
    values = editing.get_person_values(session=session, key=key)
    if values is None:
        raise HTTPException(404, f"no person with key '{key}'")
    return SplitPage(key=key, name=values["name"], variants=values["variants"],
                     choices=merging.list_split_choices(session=session, key=key), new_key=new_key, new_name=new_name,
                     chosen=chosen or [], problems=problems or {})


_SPLIT = ("Splitting a wrongly merged person: choose which attestations (of relations, memberships and facts) and which "
          "spellings go to a new person (key and name). Each attestation takes its tie along; a relation of the person "
          "with themself becomes a tie between the two. Editors only.")


@router.get("/persons/{key}/split", response_class=HTMLResponse, summary="Split a person (page)",
            description=_SPLIT + " The same form in JSON: `/api/persons/{key}/split`.")
def split_page(request: Request, key: str, session: SessionDep, _: EditorActor) -> Response:
    return render(request, split_view(session=session, key=key), template="split.html")


@router.get("/api/persons/{key}/split", response_model=SplitPage, summary="Split a person (JSON)",
            description=_SPLIT + " The page with the same form: `/persons/{key}/split`.")
def split_api(request: Request, key: str, session: SessionDep, _: EditorActor) -> Response:
    return render(request, split_view(session=session, key=key), template="split.html")


@router.post("/persons/{key}/split", response_class=RedirectResponse, summary="Split a person",
             description="Moves the ticked `attestation` values and `name` spellings to a new person `new_key`, "
             "`new_name` in one transaction with its audit entry; answers 303 to the new person's page, or the form "
             "again (422) with the messages and nothing moved.")
async def split(request: Request, key: str, session: SessionDep, _: CsrfChecked, actor: EditorActor) -> Response:
    form = await request.form()
    chosen = [str(v) for v in form.getlist("attestation")]
    names = [str(v) for v in form.getlist("name")]
    new_key, new_name = str(form.get("new_key") or "").strip(), str(form.get("new_name") or "")
    try:
        await save(request, lambda s: merging.split_person(session=s, actor=actor, key=key, new_key=new_key,
                                                           new_name=new_name, attestations=chosen, names=names))
    except EditError as error:
        page = split_view(session=session, key=key, new_key=new_key, new_name=new_name, chosen=chosen, problems=error.problems)
        return render(request, page, template="split.html", status_code=200 if "HX-Request" in request.headers else 422)
    return RedirectResponse(urls_for(request).person(new_key), status_code=303)


# --- possibly the same as --------------------------------------------------------------------


def _link_page(request: Request, key: str, values: dict, problems: dict[str, str]) -> FormPage:
    from app.views.editing import Fieldset, _f  # the form helpers

    urls = urls_for(request)
    return FormPage(f"{key}: possibly the same as", urls.person_links(key), "Link the two persons",
                    [Fieldset(None, [_f(values, problems, "other", "other person", required=True, hint="key"),
                                     _f(values, problems, "note", "note", "textarea", hint="why they may be one person")])],
                    cancel=urls.person(key),
                    intro="Short of a merge: both person pages show the link, and measures can treat the two as one "
                          "(slice option same_as=merge).")


@router.post("/persons/{key}/links", response_class=RedirectResponse, summary="Link two persons as possibly the same",
             description="Records that person `key` and `other` (form field) may be one person, with a `note`; both "
             "person pages show it. Answers 303 to the person's page, or the form again (422).")
async def link_persons(request: Request, key: str, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    return await submit(
        request, lambda s: merging.create_person_link(session=s, actor=actor, key=key, other=str(values.get("other") or ""),
                                                      note=str(values.get("note") or "")),
        lambda v, p: _link_page(request, key, v, p), values, lambda _: urls_for(request).person(key))


@router.post("/person-links/{link_id}/delete", response_class=RedirectResponse, summary="Remove a possibly-the-same link",
             description="Removes one link between two persons (the audit trail keeps it); answers 303 to the page in "
             "the form field `back`, if it is on this site, else to the persons index.")
async def unlink_persons(request: Request, link_id: int, _: CsrfChecked, actor: EditorActor) -> Response:
    values = await form_values(request)
    urls = urls_for(request)
    back = str(values.get("back") or "")
    if not back.startswith("/") or back.startswith("//"):
        back = urls.persons()
    return await submit(request, lambda s: merging.delete_person_link(session=s, actor=actor, link_id=link_id),
                        lambda v, p: _link_page(request, "", v, p), values, lambda _: back)
