"""The import pages: upload a workbook, TEI letters or a GraphML graph, map, look at the preview, confirm.

For editors and admins. A GraphML upload first asks for the source its ties come from; a
workbook's sheets may need the mapping step; then every kind has the same preview and the
same all-or-nothing confirmation.

Only the confirmation writes. The preview and the import run in a thread of the server
process that received them (``ImportTasks``), which the page follows by polling its progress route
with htmx; their state is written beside the uploads, so any server process can answer the polling.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Annotated

from fastapi import APIRouter, File, Form, HTTPException, Request, UploadFile
from fastapi.responses import HTMLResponse, JSONResponse, RedirectResponse, Response

from app.auth import CsrfChecked, EditorActor
from app.documented import DOCUMENTED
from app.exchange.mapping import SheetMapping, mapping_json
from app.exchange.uploads import (
    DECISIONS,
    GRAPH_OPTIONS,
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
    clean_options,
)
from app.exchange.graphml import DEFAULT_KIND
from app.exchange.workbook import FILES, SheetPlan
from app.views.common import BadParameter, is_api_request, render, urls_for

__all__ = ["ImportPage", "ImportStartPage", "UploadLimit", "router"]

router = APIRouter(tags=["import"])
FORM_ALLOWANCE = 1 << 20  # room for the form's other fields beside the files


@dataclass(frozen=True)
class ImportStartPage:
    """The upload form."""

    __pydantic_config__ = DOCUMENTED

    limit_mb: int
    """The largest upload accepted, in MB (setting ATTESTA_UPLOAD_LIMIT_MB)."""
    accepted: list[str]
    """The kinds of file accepted."""
    workbook_files: dict[str, list[str]]
    """Each workbook file and its columns."""
    default_kind: str
    """The relation kind of GraphML edges that name none."""


@dataclass
class ImportPage:
    """One upload: the mapping step, the preview, the progress of the import, or its result."""

    __pydantic_config__ = DOCUMENTED

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
    graph_files: list[str] = field(default_factory=list)
    """The GraphML files of the upload, whose ties need a source the user names."""
    graphml_source: str = ""
    """The source the graph's ties come from, as the user named it."""
    graphml_kind: str = ""
    """The relation kind of edges that name none (empty: the default kind)."""
    has_sheets: bool = False
    """True when some file has columns to map (CSV, .zip, .xlsx)."""
    default_kind: str = DEFAULT_KIND
    """The relation kind of edges that name none when the user gives no other."""


def _root(request: Request):  # noqa: ANN202
    return uploads_root(request.app.state.settings.database_url)


def _tasks(request: Request) -> ImportTasks:
    tasks = getattr(request.app.state, "import_tasks", None)
    if tasks is None:
        tasks = request.app.state.import_tasks = ImportTasks(_root(request))
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


def _page(upload: Upload, stage: str, **more) -> ImportPage:  # noqa: ANN003
    return ImportPage(token=upload.token, stage=stage, files=upload.files, graph_files=upload.graph_files(),
                      graphml_source=upload.options.get("graphml_source", ""),
                      graphml_kind=upload.options.get("graphml_kind", ""), has_sheets=upload.has_sheets(), **more)


def import_page_view(request: Request, token: str, step: str | None = None) -> ImportPage:
    """Return the state of one upload, starting its preview when nothing runs for it yet."""
    task = _tasks(request).get(token)
    if task is not None and task.stage in ("importing", "imported"):
        return ImportPage(token=token, stage=task.stage, files=[], task=task)
    upload = _upload_or_error(request, token)
    if step not in (None, "", "mapping", "source"):
        raise BadParameter("step", step, "mapping (show the mapping step again), source (name the graph's source again)")
    if step == "source" or (task is None and upload.needs_source()):
        if not upload.graph_files():
            raise BadParameter("step", step, "mapping (this upload holds no GraphML file)")
        return _page(upload, "source")
    if task is None or step == "mapping":
        database = request.app.state.database
        reading = read_upload(upload, size_limit=_limit(request))
        mappings = mapping_step(upload, reading, database)
        if step == "mapping" or (needs_mapping(upload, mappings) and not reading.problems):
            return _page(upload, "mapping", mappings=mappings,
                         fields={name: list(spec.columns) for name, spec in FILES.items()},
                         all_columns=sorted({c for spec in FILES.values() for c in spec.columns}))
        _start_preview(request, upload)
        task = _tasks(request).get(token)
    return _page(upload, task.stage, task=task)


_START = ("The upload form, for editors and admins: a workbook (a .zip of CSV files, several CSV files, or an "
          ".xlsx workbook whose sheets are named like the files, and optionally a column mapping .json saved "
          "from an earlier upload), TEI P5 files of letters (.xml, with correspDesc) or a GraphML graph "
          "(.graphml, with the source its ties come from). Nothing is written before the preview is confirmed.")


@router.get("/api/import", response_model=ImportStartPage, summary="Import a workbook: the upload form (JSON)",
            description=_START + " The page: `/import`.")
@router.get("/import", response_class=HTMLResponse, summary="Import a workbook: the upload form (page)",
            description=_START + " The same in JSON: `/api/import`.")
def import_start(request: Request, actor: EditorActor) -> Response:  # noqa: ARG001
    view = ImportStartPage(limit_mb=round(_limit(request) / 1024 / 1024),
                           accepted=[".zip", ".csv", ".xlsx", ".json (a column mapping)", ".xml (TEI letters)",
                                     ".graphml (a GraphML graph)"],
                           workbook_files={name: list(spec.columns) for name, spec in FILES.items()},
                           default_kind=DEFAULT_KIND)
    return render(request, view, template="import.html")


_UPLOAD = ("Store the uploaded files on the server under a random token (kept 2 hours) and go to the upload's "
           "page, which asks for the source of a GraphML graph's ties when the form field `graphml_source` was "
           "left empty (`graphml_kind`: the relation kind of edges that name none, `tie` when empty), shows the "
           "mapping step when some sheet or column is not recognised, else the preview. "
           "An upload over the size limit is refused while it streams in, and nothing is kept.")


@router.post("/import", response_class=RedirectResponse, status_code=303, summary="Upload a workbook (form)",
             description=_UPLOAD + " Answers with a redirect to `/import/{token}`.")
@router.post("/api/import", summary="Upload a workbook (JSON)", description=_UPLOAD + " Answers `{token, url}`.")
def import_upload(request: Request, actor: EditorActor, _: CsrfChecked,
                  files: Annotated[list[UploadFile], File(description="The workbook's files, TEI or GraphML files")],
                  graphml_source: Annotated[str, Form(description="The source a GraphML graph's ties come from")] = "",
                  graphml_kind: Annotated[str, Form(description="The relation kind of edges naming none")] = "") -> Response:
    try:
        upload = create_upload(_root(request), [(f.filename or "", f.file) for f in files if f.filename],
                               actor=actor.name, size_limit=_limit(request),
                               options={"graphml_source": graphml_source, "graphml_kind": graphml_kind})
    except UploadError as error:
        raise HTTPException(413 if "size limit" in str(error) else 400, str(error)) from error
    url = urls_for(request).import_upload(upload.token)
    if is_api_request(request):
        return JSONResponse({"token": upload.token, "url": url}, status_code=201)
    return RedirectResponse(url, status_code=303)


_PAGE = ("One upload: for a GraphML graph, the question of the source its ties come from; the mapping step (which workbook file each sheet is and which field each column is; an edge "
         "list's source and target are recognised and asked about), then the preview: what a confirmation would "
         "add, change and leave as it is, every problem with its file, line, column and reason, and likely "
         "duplicate persons to confirm as the same, keep apart, or link as possibly the same. While a preview or "
         "an import runs, the page shows its progress. A token that was imported, expired or never made is a 410. "
         "`?step=mapping` shows the mapping step again, `?step=source` the question of the graph's source.")


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


def _to_upload_page(request: Request, token: str) -> Response:
    """Answer a step of an upload: its page (a redirect), or ``{token, url}`` for the JSON twin."""
    url = urls_for(request).import_upload(token)
    if is_api_request(request):
        return JSONResponse({"token": token, "url": url})
    return RedirectResponse(url, status_code=303)


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
    return _to_upload_page(request, token)


_SOURCE = ("Name the source a GraphML upload's ties come from (form field `graphml_source`, required: for example "
           "\"graph received from a colleague, file X\"; every edge becomes an attestation of that one source) and "
           "optionally `graphml_kind`, the relation kind of edges that name none (`tie` when empty; a field left out "
           "keeps the value it had); then the upload's page goes on to the preview.")


@router.post("/import/{token}/source", response_class=RedirectResponse, status_code=303,
             summary="Name the source of a GraphML upload (form)", description=_SOURCE + " Redirects to `/import/{token}`.")
@router.post("/api/import/{token}/source", summary="Name the source of a GraphML upload (JSON)",
             description=_SOURCE + " Answers `{token, url}`.")
async def import_source(request: Request, token: str, actor: EditorActor, _: CsrfChecked) -> Response:  # noqa: ARG001
    upload = _upload_or_error(request, token)
    if not upload.graph_files():
        raise HTTPException(400, "this upload holds no GraphML file, so there is no source to name")
    form = await request.form()
    given = dict(upload.options)  # a field left out of the form keeps its value, an empty one is cleared
    given.update({name: value for name in GRAPH_OPTIONS if isinstance(value := form.get(name), str)})
    options = clean_options(given)
    if "graphml_source" not in options:
        raise HTTPException(400, "graphml_source is required: name the source the graph's ties come from, "
                                 "for example 'graph received from a colleague, file X'")
    running = _tasks(request).get(token)
    if running is not None and running.stage in ("previewing", "importing"):
        raise HTTPException(409, "a preview or an import of this upload is running; wait for it, then change the source")
    upload.options = options
    upload.save()
    _tasks(request).forget(token)  # the next visit makes a new preview with this source
    return _to_upload_page(request, token)


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
