"""The import pages: upload a workbook, map its columns, look at the preview, confirm (editors and admins).

Only the confirmation writes. The preview and the import run in a thread of the server
process (``ImportTasks``), which the page follows by polling its progress route with htmx.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Annotated

from fastapi import APIRouter, File, HTTPException, Request, UploadFile
from fastapi.responses import HTMLResponse, JSONResponse, RedirectResponse, Response

from app.auth import CsrfChecked, EditorActor
from app.exchange.mapping import SheetMapping, mapping_json
from app.exchange.uploads import (
    DECISIONS,
    ImportTask,
    ImportTasks,
    Upload,
    UploadError,
    confirm_import,
    create_upload,
    delete_upload,
    get_upload,
    make_preview,
    mapping_step,
    needs_mapping,
    read_upload,
    uploads_root,
    Decision,
    check_unchanged,
)
from app.exchange.workbook import FILES, SheetPlan
from app.views.common import BadParameter, is_api_request, render, urls_for

__all__ = ["ImportPage", "ImportStartPage", "UploadLimit", "router"]

router = APIRouter(tags=["import"])
FORM_ALLOWANCE = 1 << 20  # room for the form's other fields beside the files


@dataclass(frozen=True)
class ImportStartPage:
    """The upload form."""

    __pydantic_config__ = {"use_attribute_docstrings": True}

    limit_mb: int
    """The largest upload accepted, in MB (setting ATTESTA_UPLOAD_LIMIT_MB)."""
    accepted: list[str]
    """The kinds of file accepted."""
    workbook_files: dict[str, list[str]]
    """Each workbook file and its columns."""


@dataclass
class ImportPage:
    """One upload: the mapping step, the preview, the progress of the import, or its result."""

    __pydantic_config__ = {"use_attribute_docstrings": True}

    token: str
    """The upload's token (kept on the server until confirmed or expired)."""
    stage: str
    """mapping, previewing, preview, importing, imported or failed."""
    files: list[str]
    """The files uploaded."""
    mappings: list[SheetMapping] = field(default_factory=list)
    """For the mapping step: each sheet with its suggested workbook file and fields."""
    fields: dict[str, list[str]] = field(default_factory=dict)
    """Each workbook file and its columns (the choices of the mapping step)."""
    task: ImportTask | None = None
    """The preview or import: progress, preview, result or error."""
    all_columns: list[str] = field(default_factory=list)
    """Every workbook column, for a sheet whose file is not chosen yet."""


def _root(request: Request):  # noqa: ANN202
    return uploads_root(request.app.state.settings.database_url)


def _tasks(request: Request) -> ImportTasks:
    tasks = getattr(request.app.state, "import_tasks", None)
    if tasks is None:
        tasks = request.app.state.import_tasks = ImportTasks()
    return tasks


def _limit(request: Request) -> int:
    return request.app.state.settings.upload_limit_bytes


def _upload_or_error(request: Request, token: str) -> Upload:
    try:
        return get_upload(_root(request), token)
    except UploadError as error:
        raise HTTPException(410, str(error)) from error


def _start_preview(request: Request, upload: Upload) -> None:
    database, limit = request.app.state.database, _limit(request)

    def work(task: ImportTask, progress) -> None:  # noqa: ANN001
        task.preview = make_preview(upload, database, size_limit=limit, progress=progress)
        task.stage = "preview"

    _tasks(request).start(upload.token, "previewing", work)


def import_page_view(request: Request, token: str, step: str | None = None) -> ImportPage:
    """Return the state of one upload, starting its preview when nothing runs for it yet."""
    task = _tasks(request).get(token)
    if task is not None and task.stage in ("importing", "imported"):
        return ImportPage(token=token, stage=task.stage, files=[], task=task)
    upload = _upload_or_error(request, token)
    if step not in (None, "", "mapping"):
        raise BadParameter("step", step, "mapping (show the mapping step again)")
    if task is None or step == "mapping":
        database = request.app.state.database
        reading = read_upload(upload, size_limit=_limit(request))
        mappings = mapping_step(upload, reading, database)
        if step == "mapping" or (needs_mapping(upload, mappings) and not reading.problems):
            return ImportPage(token=token, stage="mapping", files=upload.files, mappings=mappings,
                              fields={name: list(spec.columns) for name, spec in FILES.items()},
                              all_columns=sorted({c for spec in FILES.values() for c in spec.columns}))
        _start_preview(request, upload)
        task = _tasks(request).get(token)
    return ImportPage(token=token, stage=task.stage, files=upload.files, task=task)


_START = ("The upload form of workbooks, for editors and admins: a .zip of CSV files, several CSV files, or an "
          ".xlsx workbook whose sheets are named like the files, and optionally a column mapping (.json) saved "
          "from an earlier upload. Nothing is written before the preview is confirmed.")


@router.get("/api/import", response_model=ImportStartPage, summary="Import a workbook: the upload form (JSON)",
            description=_START + " The page: `/import`.")
@router.get("/import", response_class=HTMLResponse, summary="Import a workbook: the upload form (page)",
            description=_START + " The same in JSON: `/api/import`.")
def import_start(request: Request, actor: EditorActor) -> Response:  # noqa: ARG001
    view = ImportStartPage(limit_mb=round(_limit(request) / 1024 / 1024), accepted=[".zip", ".csv", ".xlsx", ".json (a column mapping)"],
                           workbook_files={name: list(spec.columns) for name, spec in FILES.items()})
    return render(request, view, template="import.html")


_UPLOAD = ("Store the uploaded files on the server under a random token (kept 2 hours) and go to the upload's "
           "page, which shows the mapping step when some sheet or column is not recognised, else the preview. "
           "An upload over the size limit is refused while it streams in, and nothing is kept.")


@router.post("/import", response_class=RedirectResponse, status_code=303, summary="Upload a workbook (form)",
             description=_UPLOAD + " Answers with a redirect to `/import/{token}`.")
@router.post("/api/import", summary="Upload a workbook (JSON)", description=_UPLOAD + " Answers `{token, url}`.")
def import_upload(request: Request, actor: EditorActor, _: CsrfChecked,
                  files: Annotated[list[UploadFile], File(description="The workbook's files")]) -> Response:
    try:
        upload = create_upload(_root(request), [(f.filename or "", f.file) for f in files if f.filename],
                               actor=actor.name, size_limit=_limit(request))
    except UploadError as error:
        raise HTTPException(413 if "size limit" in str(error) else 400, str(error)) from error
    url = urls_for(request).import_upload(upload.token)
    if is_api_request(request):
        return JSONResponse({"token": upload.token, "url": url}, status_code=201)
    return RedirectResponse(url, status_code=303)


_PAGE = ("One upload: the mapping step (which workbook file each sheet is and which field each column is; an edge "
         "list's source and target are recognised and asked about), then the preview: what a confirmation would "
         "add, change and leave as it is, every problem with its file, line, column and reason, and likely "
         "duplicate persons to confirm as the same, keep apart, or link as possibly the same. While a preview or "
         "an import runs, the page shows its progress. A token that was imported, expired or never made is a 410.")


@router.get("/api/import/{token}", response_model=ImportPage, summary="One upload (JSON)",
            description=_PAGE + " The page: `/import/{token}`.")
@router.get("/import/{token}", response_class=HTMLResponse, summary="One upload (page)",
            description=_PAGE + " The same in JSON: `/api/import/{token}`.")
def import_page(request: Request, token: str, actor: EditorActor, step: str | None = None) -> Response:  # noqa: ARG001
    return render(request, import_page_view(request, token, step), template="import_upload.html",
                  partial="_import_status.html")


_PROGRESS = ("How far the preview or the import of one upload is (rows checked or written of all rows); the page "
             "polls it every second while it runs and reloads itself when it is done.")


@router.get("/api/import/{token}/progress", response_model=ImportPage, summary="Progress of an upload (JSON)",
            description=_PROGRESS + " The partial page: `/import/{token}/progress`.")
@router.get("/import/{token}/progress", response_class=HTMLResponse, summary="Progress of an upload (partial page)",
            description=_PROGRESS + " The same in JSON: `/api/import/{token}/progress`.")
def import_progress(request: Request, token: str, actor: EditorActor) -> Response:  # noqa: ARG001
    task = _tasks(request).get(token)
    if task is None:
        raise HTTPException(404, f"nothing runs for the upload {token}; open /import/{token}")
    view = ImportPage(token=token, stage=task.stage, files=[], task=task)
    running = task.stage in ("previewing", "importing")
    headers = {} if running or is_api_request(request) else {"HX-Refresh": "true"}
    return render(request, view, template="import_upload.html", partial="_import_status.html", headers=headers)


_MAPPING = ("Save the mapping step's choices for one upload: form fields `file:{sheet}` (a workbook file, or "
            "empty to leave the sheet out), `column:{sheet}:{column}` (a workbook column, or empty to leave it "
            "out) and `fixed:{sheet}:{column}` (a value for every row), then start the preview.")


@router.post("/import/{token}/mapping", response_class=RedirectResponse, status_code=303,
             summary="Map the columns of an upload (form)", description=_MAPPING + " Redirects to `/import/{token}`.")
@router.post("/api/import/{token}/mapping", summary="Map the columns of an upload (JSON)",
             description=_MAPPING + " Answers with the upload's state.")
async def import_mapping(request: Request, token: str, actor: EditorActor, _: CsrfChecked) -> Response:  # noqa: ARG001
    upload = _upload_or_error(request, token)
    form = await request.form()
    plans: dict[str, SheetPlan] = {}
    for name, value in form.multi_items():
        if name.startswith("file:") and isinstance(value, str):
            sheet = name.removeprefix("file:")
            if value and value not in FILES:
                raise HTTPException(400, f"{name}={value} is not accepted; accepted: {', '.join(FILES)} or empty")
            if value:
                plans[sheet] = SheetPlan(value, {}, {})
    for name, value in form.multi_items():
        if not isinstance(value, str) or not name.startswith(("column:", "fixed:")):
            continue
        kind, _, rest = name.partition(":")
        sheet, _, column = rest.rpartition(":")
        plan = plans.get(sheet)
        if plan is None:
            continue
        if kind == "column":
            if value and value not in FILES[plan.file].columns:
                raise HTTPException(400, f"{name}={value} is not accepted; accepted: {', '.join(FILES[plan.file].columns)} or empty")
            plan.columns[column] = value
        elif value.strip():
            plan.fixed[column] = value.strip()
    upload.plans = plans
    upload.save()
    task = _tasks(request).get(token)
    if task is None or task.stage not in ("previewing", "importing"):
        _start_preview(request, upload)
    url = urls_for(request).import_upload(token)
    if is_api_request(request):
        return JSONResponse({"token": token, "url": url})
    return RedirectResponse(url, status_code=303)


_MAPPING_FILE = ("The column mapping of one upload as a small JSON file, to upload again beside the next workbook "
                 "with the same columns, so the mapping step is done once.")


@router.get("/import/{token}/mapping.json", summary="The column mapping of an upload (JSON file)", description=_MAPPING_FILE)
def import_mapping_file(request: Request, token: str, actor: EditorActor) -> Response:  # noqa: ARG001
    upload = _upload_or_error(request, token)
    reading = read_upload(upload, size_limit=_limit(request))
    mappings = mapping_step(upload, reading, request.app.state.database)
    return Response(mapping_json(mappings), media_type="application/json",
                    headers={"Content-Disposition": 'attachment; filename="column-mapping.json"'})


_CONFIRM = ("Import the previewed upload, in one transaction: form field `fingerprint` (from the preview) and, for "
            "each likely duplicate, `pair-{n}` = `same|{new}|{other}`, `apart|{new}|{other}` or `link|{new}|{other}`. "
            "Refused (409) when the files, the mapping or the data changed since the preview; 410 when the upload "
            "expired or was imported already.")


@router.post("/import/{token}/confirm", response_class=RedirectResponse, status_code=303,
             summary="Confirm an import (form)", description=_CONFIRM + " Redirects to `/import/{token}`.")
@router.post("/api/import/{token}/confirm", summary="Confirm an import (JSON)", description=_CONFIRM + " Answers `{token, url}`.")
async def import_confirm(request: Request, token: str, actor: EditorActor, _: CsrfChecked) -> Response:
    task = _tasks(request).get(token)
    if task is not None and task.stage in ("importing", "imported"):
        raise HTTPException(410, "this upload is imported already (or being imported); upload the workbook again to import it once more")
    upload = _upload_or_error(request, token)
    form = await request.form()
    fingerprint = form.get("fingerprint")
    if not isinstance(fingerprint, str) or not fingerprint:
        raise HTTPException(400, "the form field fingerprint is required (it comes with the preview)")
    decisions = []
    for name, value in form.multi_items():
        if name.startswith("pair-") and isinstance(value, str):
            choice, _, rest = value.partition("|")
            new_key, _, other_key = rest.partition("|")
            if choice not in DECISIONS or not new_key or not other_key:
                raise HTTPException(400, f"{name}={value} is not accepted; accepted: {'|'.join(DECISIONS)} then |new key|other key")
            decisions.append(Decision(new_key, other_key, choice))
    database, limit = request.app.state.database, _limit(request)
    try:  # refuse a changed upload at once, not in the thread
        check_unchanged(upload, database, fingerprint)
    except UploadError as error:
        raise HTTPException(409, str(error)) from error

    def work(task: ImportTask, progress) -> None:  # noqa: ANN001
        report = confirm_import(upload, database, fingerprint=fingerprint, decisions=decisions, actor=actor.name,
                                size_limit=limit, progress=progress)
        task.lines = report.lines()
        task.data_version = report.data_version
        task.stage = "imported"
        delete_upload(upload)

    _tasks(request).start(token, "importing", work)
    url = urls_for(request).import_upload(token)
    if is_api_request(request):
        return JSONResponse({"token": token, "url": url}, status_code=202)
    return RedirectResponse(url, status_code=303)


class UploadLimit:
    """ASGI middleware: refuse a request body over the upload limit while it streams, before it fills the disk.

    A declared Content-Length over the limit is refused at once; a body that turns out longer is cut off
    as soon as it passes the limit. Either way the answer is a 413 naming the limit.
    """

    def __init__(self, app, limit: int):  # noqa: ANN001
        self.app = app
        self.limit = limit + FORM_ALLOWANCE

    async def __call__(self, scope, receive, send):  # noqa: ANN001, ANN204
        if scope["type"] != "http" or scope.get("method") not in ("POST", "PUT", "PATCH"):
            return await self.app(scope, receive, send)
        message = (f"the upload is over the size limit of {(self.limit - FORM_ALLOWANCE) / 1e6:.0f} MB "
                   "(setting ATTESTA_UPLOAD_LIMIT_MB); nothing was kept")
        length = dict(scope.get("headers") or []).get(b"content-length")
        if length is not None and length.isdigit() and int(length) > self.limit:
            return await self._refuse(scope, send, message)
        seen = 0

        async def counted():  # noqa: ANN202
            nonlocal seen
            event = await receive()
            if event["type"] == "http.request":
                seen += len(event.get("body", b""))
                if seen > self.limit:
                    raise HTTPException(413, message)
            return event

        return await self.app(scope, counted, send)

    async def _refuse(self, scope, send, message: str) -> None:  # noqa: ANN001
        import json

        path = scope.get("path", "")
        if path.startswith("/api/"):
            body, kind = json.dumps({"error": "content too large", "detail": message}).encode(), b"application/json"
        else:
            body, kind = (f"<!doctype html><title>Too large · Attesta</title><h1>Upload too large</h1><p>{message}</p>"
                          ).encode(), b"text/html; charset=utf-8"
        await send({"type": "http.response.start", "status": 413,
                    "headers": [(b"content-type", kind), (b"content-length", str(len(body)).encode()),
                                (b"connection", b"close")]})
        await send({"type": "http.response.body", "body": body})
