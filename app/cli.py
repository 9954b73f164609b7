"""The ``attesta`` command: create, fill, export and serve a dataset.

Every command takes ``--db`` (a path or a database URL; default ``ATTESTA_DATABASE_URL`` or
``./attesta.db``). Problems are printed with where they are, and exit with status 1.
"""

from __future__ import annotations

import ipaddress
import os
import secrets
import shutil
import sys
import tempfile
from collections.abc import Callable
from dataclasses import replace
from functools import wraps
from pathlib import Path

import click
from tqdm import tqdm

from app.backup import backup_database, is_newest, restore_database
from app.auth import hash_password
from app.config import Settings
from app.db import Database, DatabaseError, check_schema, upgrade
from app.exchange.workbook import WorkbookError, export_workbook, import_workbook
from app.models import ROLES
from app.store.privacy import RestrictedPersons
from app.store.users import UserError, count_users, create_user, disable_user, list_users

MIN_PASSWORD = 10
DEMO_WORKBOOK = Path(__file__).resolve().parent.parent / "sample_data" / "demo"

db_option = click.option(
    "--db", "database", metavar="PATH|URL", default=None,
    help="Database file or URL (default: $ATTESTA_DATABASE_URL or ./attesta.db).",
)


def _fail(message: str) -> None:
    click.secho(f"error: {message}", fg="red", err=True)
    sys.exit(1)


def reports_problems(command: Callable) -> Callable:
    """Turn our own errors into a clear message and exit status 1 instead of a traceback."""

    @wraps(command)
    def wrapper(*args, **kwargs):  # noqa: ANN002, ANN003
        try:
            return command(*args, **kwargs)
        except WorkbookError as error:
            _fail(str(error))
        except DatabaseError as error:
            _fail(str(error))

    return wrapper


def _open(database: str | None, *, must_exist: bool = True) -> tuple[Settings, Database]:
    settings = Settings.from_env(database)
    if must_exist and settings.database_url.startswith("sqlite:///"):
        path = Path(settings.database_url.removeprefix("sqlite:///"))
        if not path.exists():
            _fail(f"no database at {path}: create one with `attesta init --db {path}` or `attesta demo --db {path}`")
    return settings, Database(settings.database_url, busy_timeout_ms=settings.busy_timeout_ms)


@click.group()
@click.version_option(package_name="attesta")
def main() -> None:
    """Attesta: persons, documents and the ties the documents attest."""


@main.command()
@db_option
@reports_problems
def init(database: str | None) -> None:
    """Create the database, or upgrade it to the newest schema."""
    settings, db = _open(database, must_exist=False)
    upgrade(db)
    click.echo(f"database ready: {settings.database_url}")


@main.command(name="import")
@db_option
@click.argument("workbook", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--mapping", type=click.Path(path_type=Path), default=None,
              help="A column mapping (.json) saved from the upload page or written by --write-mapping.")
@click.option("--write-mapping", type=click.Path(path_type=Path), default=None,
              help="Write the suggested column mapping to this file (to check and pass to --mapping) and stop.")
@click.option("--duplicates", type=click.Choice(["stop", "apart", "link"]), default="stop", show_default=True,
              help="Likely duplicate persons: stop before writing, import keeping them apart, or import linking "
                   "each pair as possibly the same.")
@reports_problems
def import_command(database: str | None, workbook: tuple[Path, ...], mapping: Path | None, write_mapping: Path | None,
                   duplicates: str) -> None:
    """Import a workbook (a folder or .zip of CSV files, an .xlsx, CSV files): all rows, or nothing.

    As on the upload page, sheets named or laid out differently need a column mapping, and
    likely duplicate persons are shown before anything is written.
    """
    from app.exchange.file_import import import_prepared, prepare_files
    from app.exchange.mapping import mapping_json

    settings, db = _open(database)
    check_schema(db)
    prepared = prepare_files(list(workbook), db, size_limit=settings.upload_limit_bytes, mapping=mapping)
    if write_mapping is not None:
        write_mapping.write_text(mapping_json(prepared.mappings), encoding="utf-8")
        click.echo(f"{write_mapping}: the column mapping of {len(prepared.mappings)} sheet(s); check it, then "
                   f"import with --mapping {write_mapping}")
        return
    if prepared.unsettled:
        for m in prepared.unsettled:
            click.echo(f"{m.label}: " + ("; ".join(m.reasons) or "its columns would be read as "
                       + ", ".join(f"{h} -> {f}" for h, f in m.columns.items() if f and f != h)), err=True)
        _fail("these sheets need a column mapping; nothing was imported. Write the suggested one with "
              "--write-mapping FILE, check it, and import with --mapping FILE (or map them on the /import page "
              "and download column-mapping.json)")
    if prepared.duplicates and duplicates == "stop":
        for d in prepared.duplicates[:50]:
            where = "stored" if d.other_stored else "in this workbook"
            click.echo(f"likely duplicate: {d.new_key} ({d.new_name}) ~ {d.other_key} ({d.other_name}, {where}), "
                       f"score {d.score}, {d.dates}", err=True)
        if len(prepared.duplicates) > 50:
            click.echo(f"... and {len(prepared.duplicates) - 50} more", err=True)
        _fail(f"{len(prepared.duplicates)} likely duplicate person(s); nothing was imported. Rename or key them in "
              "the workbook, decide pair by pair on the /import page, or import anyway with --duplicates apart "
              "(kept as separate persons) or --duplicates link (each pair linked as possibly the same)")
    with tqdm(desc="rows", unit=" rows", disable=None, leave=False, file=sys.stderr) as bar:

        def progress(done: int, total: int) -> None:
            bar.total = total
            bar.update(done - bar.n)

        report = import_prepared(db, prepared, duplicates="link" if duplicates == "link" else "apart", actor="cli",
                                 progress=progress)
    if prepared.duplicates and duplicates == "apart":
        click.echo(f"{len(prepared.duplicates)} likely duplicate person(s) kept apart")
    _report(report)


def restricted_options(command: Callable) -> Callable:
    """``--include-restricted`` and ``--as-user``: who asks for the restricted persons in an export."""
    command = click.option(
        "--as-user", "as_user", metavar="NAME", default=None,
        help="The user the export is made for; it is made as that user's role may have it.")(command)
    return click.option(
        "--include-restricted", is_flag=True,
        help="Keep restricted persons (recorded as living, or born too recently) in the files. Only for an admin: "
             "give --as-user NAME of an enabled admin once the instance has users.")(command)


def _left_out(settings: Settings, db: Database, *, include: bool, as_user: str | None) -> RestrictedPersons | None:
    """Return the restricted persons an export leaves out (None: an admin asked for them), or stop with why not."""
    from app.store.privacy import list_restricted_persons
    from app.store.users import get_user

    with db.read() as session:
        user = get_user(session=session, name=as_user) if as_user else None
        if as_user and (user is None or user.disabled):
            _fail(f"--as-user: no enabled user named {as_user!r} (see `attesta user list`)")
        if include:
            if user is None and count_users(session=session, enabled_only=False) > 0:
                _fail("--include-restricted: only an admin may export restricted persons; give --as-user NAME of an "
                      "enabled admin")
            if user is not None and user.role != "admin":
                _fail(f"--include-restricted: {user.name} is {user.role}; only an admin may export restricted persons")
            return None
        restricted = list_restricted_persons(session=session, living_years=settings.living_years)
    if restricted:
        click.echo(f"left out: {len(restricted.ids)} restricted persons (recorded as living, or born too recently) "
                   "and every relation, membership and fact naming them")
    return restricted or None


@main.command()
@db_option
@restricted_options
@click.argument("folder", type=click.Path(path_type=Path))
@reports_problems
def export(database: str | None, include_restricted: bool, as_user: str | None, folder: Path) -> None:
    """Export the whole dataset as a workbook folder (keys filled in), without restricted persons unless an admin asks."""
    settings, db = _open(database)
    check_schema(db)
    leave_out = _left_out(settings, db, include=include_restricted, as_user=as_user)
    with db.read() as session:
        counts = export_workbook(session, folder, leave_out=leave_out)
    for name, n in counts.items():
        click.echo(f"{name}: {n} rows")


def _slice(query: str) -> "Slice":
    from urllib.parse import parse_qsl

    from app.network.slice import Slice, SliceError

    try:
        return Slice.from_query(parse_qsl(query.lstrip("?"), keep_blank_values=True))
    except SliceError as error:
        _fail(f"--slice: {error}")


slice_option = click.option("--slice", "slice_query", default="", metavar="QUERY",
                            help="The slice as a page's query string, e.g. 'kind=letter&from=1700&to=1720'.")


def _report(report) -> None:  # noqa: ANN001
    for line in report.lines():
        click.echo(line)
    click.echo(f"data version {report.data_version}" + ("" if report.changed_anything else " (nothing changed)"))


def _read_file(path: Path, limit: int) -> bytes:
    if not path.is_file():
        _fail(f"{path}: no such file")
    if path.stat().st_size > limit:
        _fail(f"{path}: {path.stat().st_size / 1e6:.1f} MB is over the import size limit of {limit / 1e6:.0f} MB "
              "(setting ATTESTA_UPLOAD_LIMIT_MB)")
    return path.read_bytes()


@main.command(name="import-tei")
@db_option
@click.argument("files", nargs=-1, required=True, type=click.Path(path_type=Path))
@reports_problems
def import_tei_command(database: str | None, files: tuple[Path, ...]) -> None:
    """Import the letters (correspDesc) of TEI files, each file all or nothing."""
    from app.exchange.tei import import_tei

    settings, db = _open(database)
    check_schema(db)
    for path in files:
        _report(import_tei(db, _read_file(path, settings.upload_limit_bytes), path.name, actor="cli"))


@main.command(name="import-graphml")
@db_option
@click.argument("file", type=click.Path(path_type=Path))
@click.option("--source-title", required=True, help="The source every edge is attested by, e.g. 'graph received from a colleague, file X'.")
@click.option("--source-key", default=None, help="Key of that source (default: made from the title).")
@click.option("--kind", default="tie", show_default=True, help="Relation kind of edges without a kind attribute.")
@click.option("--evidence", default="mention", show_default=True, help="Evidence grade of the edges.")
@click.option("--key-prefix", default="", help="Put before every node id to make its person key.")
@reports_problems
def import_graphml_command(database: str | None, file: Path, source_title: str, source_key: str | None, kind: str,
                           evidence: str, key_prefix: str) -> None:
    """Import the nodes and edges of a GraphML file, every edge attested by the source you name."""
    from app.exchange.graphml import import_graphml

    settings, db = _open(database)
    check_schema(db)
    _report(import_graphml(db, _read_file(file, settings.upload_limit_bytes), file.name, source_title=source_title,
                           source_key=source_key, kind=kind, evidence=evidence, key_prefix=key_prefix, actor="cli"))


@main.command(name="export-graphml")
@db_option
@slice_option
@restricted_options
@click.argument("output", type=click.Path(path_type=Path))
@reports_problems
def export_graphml_command(database: str | None, slice_query: str, include_restricted: bool, as_user: str | None,
                           output: Path) -> None:
    """Write the slice as GraphML (without restricted persons unless an admin asks)."""
    from app.exchange.network_export import slice_export, to_graphml

    settings, db = _open(database)
    check_schema(db)
    leave_out = _left_out(settings, db, include=include_restricted, as_user=as_user)
    with db.read() as session:
        export = slice_export(session, _slice(slice_query), leave_out=leave_out)
    output.write_bytes(to_graphml(export))
    click.echo(f"{output}: {len(export.nodes)} persons, {len(export.edges)} ties (data version {export.data_version})")


@main.command(name="export-tables")
@db_option
@slice_option
@restricted_options
@click.argument("folder", type=click.Path(path_type=Path))
@reports_problems
def export_tables_command(database: str | None, slice_query: str, include_restricted: bool, as_user: str | None,
                          folder: Path) -> None:
    """Write the slice's persons, ties, adjacency matrix (CSV) and sources (CSL-JSON) into a folder
    (without restricted persons unless an admin asks)."""
    import json

    from app.exchange.csl import csl_items
    from app.exchange.network_export import adjacency_csv, edges_csv, nodes_csv, slice_export

    settings, db = _open(database)
    check_schema(db)
    leave_out = _left_out(settings, db, include=include_restricted, as_user=as_user)
    folder.mkdir(parents=True, exist_ok=True)
    with db.read() as session:
        export = slice_export(session, _slice(slice_query), leave_out=leave_out)
        items = csl_items(session, keys={k for e in export.edges for k in e.source_keys})
    if leave_out is not None:  # a restricted person's name in a title or as an author, as /export/sources.json does
        from app.views.redaction import Redactor

        items = Redactor(leave_out).redact(items)
    (folder / "persons.csv").write_text(nodes_csv(export), encoding="utf-8")
    (folder / "ties.csv").write_text(edges_csv(export), encoding="utf-8")
    (folder / "matrix.csv").write_text(adjacency_csv(export), encoding="utf-8")
    (folder / "sources.json").write_text(json.dumps(items, indent=2, ensure_ascii=False), encoding="utf-8")
    click.echo(f"{folder}: {len(export.nodes)} persons, {len(export.edges)} ties, {len(items)} sources")


@main.command()
@db_option
@slice_option
@restricted_options
@click.argument("output", type=click.Path(path_type=Path))
@reports_problems
def snapshot(database: str | None, slice_query: str, include_restricted: bool, as_user: str | None,
             output: Path) -> None:
    """Write a citable snapshot .zip (workbook, slice, stored measures, README, content hash), without restricted
    persons unless an admin asks."""
    from app.exchange.snapshot import snapshot_bytes

    settings, db = _open(database)
    check_schema(db)
    leave_out = _left_out(settings, db, include=include_restricted, as_user=as_user)
    with db.read() as session:
        data, cited = snapshot_bytes(session, _slice(slice_query), dataset_name=settings.dataset_name,
                                     leave_out=leave_out)
    output.write_bytes(data)
    click.echo(f"{output}: dataset version {cited.sha256}")
    click.echo(f"{cited.persons} persons, {cited.sources} sources, {cited.relations} relations, "
               f"{cited.attestations} attestations")


@main.command(name="export-drawing")
@db_option
@slice_option
@restricted_options
@click.option("--radius", type=click.Choice(["1", "2"]), default="1", show_default=True, help="Steps from the person.")
@click.argument("person", metavar="PERSON_KEY")
@click.argument("output", type=click.Path(path_type=Path))
@reports_problems
def export_drawing_command(database: str | None, slice_query: str, include_restricted: bool, as_user: str | None,
                           radius: str, person: str, output: Path) -> None:
    """Write the ego network drawing of one person as SVG or PNG (by OUTPUT's suffix), with the caption
    naming the slice and the dataset version (restricted persons read "restricted person" unless an admin asks)."""
    from fastapi import HTTPException

    from app.exchange.drawing_png import png_of
    from app.exchange.snapshot import dataset_version
    from app.views.common import Urls
    from app.views.ego import ego_panel, standalone_ego_svg
    from app.views.redaction import without_left_out

    suffix = output.suffix.lower()
    if suffix not in (".svg", ".png"):
        _fail(f"{output}: the file name must end in .svg or .png")
    settings, db = _open(database)
    check_schema(db)
    leave_out = _left_out(settings, db, include=include_restricted, as_user=as_user)
    with db.read() as session:
        try:
            view = ego_panel(session=session, person_key=person, slice=_slice(slice_query), radius=int(radius))
        except HTTPException as error:
            _fail(str(error.detail))
        if leave_out is not None:
            view = without_left_out(view, leave_out)
            if view is None:
                _fail(f"{person} is a restricted person: their drawing is written only when an admin asks "
                      "(--include-restricted --as-user ADMIN)")
        svg, _name = standalone_ego_svg(view, urls=Urls(""), dataset_sha256=dataset_version(session).sha256)
    output.write_bytes(png_of(svg, label_class=".ego-svg .ego-label") if suffix == ".png" else svg.encode("utf-8"))
    click.echo(f"{output}: ego network of {view.name}, radius {view.radius}, {len(view.drawing.nodes)} persons, "
               f"{len(view.drawing.edges)} ties drawn (data version {view.data_version})")


@main.command()
@db_option
@click.option("--replace", is_flag=True, help="Replace an existing database file.")
@reports_problems
def demo(database: str | None, replace: bool) -> None:
    """Create a database holding the invented demo scenario of sample_data/."""
    settings = Settings.from_env(database)
    if not settings.database_url.startswith("sqlite:///"):
        _fail("the demo is built as an SQLite file; give --db a file path")
    target = Path(settings.database_url.removeprefix("sqlite:///"))
    if target.exists() and not replace:
        _fail(f"{target} exists already; add --replace to overwrite it")
    # Built beside the target and moved into place, so a failure never leaves half a demo.
    with tempfile.TemporaryDirectory(dir=target.parent, prefix=".attesta-demo-") as scratch:
        scratch_db = Path(scratch) / "demo.db"
        db = Database(f"sqlite:///{scratch_db}")
        upgrade(db)
        report = import_workbook(db, DEMO_WORKBOOK, size_limit=settings.upload_limit_bytes, actor="demo")
        with db.engine.connect() as connection:  # fold the WAL into the file before moving it
            connection.exec_driver_sql("PRAGMA wal_checkpoint(TRUNCATE)")
        db.dispose()
        for suffix in ("-wal", "-shm"):
            Path(f"{target}{suffix}").unlink(missing_ok=True)
        shutil.move(scratch_db, target)
    click.echo(f"demo database written to {target}")
    for line in report.lines():
        click.echo(line)


def _is_loopback(host: str) -> bool:
    name = host.strip().strip("[]").lower()
    if name == "localhost":
        return True
    try:
        return ipaddress.ip_address(name).is_loopback
    except ValueError:
        return False


def serve_refusal(settings: Settings, db: Database, host: str) -> str | None:
    """Return why ``attesta serve`` may not listen on ``host``, or None.

    On an address other than loopback the instance is reachable by others: it needs an admin
    account (else nobody could sign in, or the local user's full rights would be open to all) and
    a configured secret key (else sessions would not survive a restart or be shared by processes).
    """
    if _is_loopback(host):
        return None
    missing = []
    with db.read() as session:
        if count_users(session=session, role="admin") == 0:
            missing.append("at least one admin: `attesta user add NAME --role admin`")
    if not settings.secret_key:
        missing.append("a secret key in ATTESTA_SECRET_KEY, for example "
                       "`export ATTESTA_SECRET_KEY=$(python3 -c 'import secrets; print(secrets.token_urlsafe(32))')`")
    if not missing:
        return None
    return (f"refusing to serve on {host}, an address other machines can reach, until there is "
            + " and ".join(missing) + ". On 127.0.0.1 (the default) it serves at once, for one person.")


@main.command()
@db_option
@click.argument("target", type=click.Path(path_type=Path))
@reports_problems
def backup(database: str | None, target: Path) -> None:
    """Write a checked, consistent copy of the database while it may be in use (a file, or a folder)."""
    settings = Settings.from_env(database)
    info = backup_database(settings.database_url, target, busy_timeout_ms=settings.busy_timeout_ms)
    click.echo(f"backup written to {info.describe()}")


@main.command()
@db_option
@click.argument("backup_file", metavar="BACKUP", type=click.Path(path_type=Path))
@reports_problems
def restore(database: str | None, backup_file: Path) -> None:
    """Replace the database by a checked backup; refused while a server has the database open."""
    settings = Settings.from_env(database)
    info, saved = restore_database(settings.database_url, backup_file, busy_timeout_ms=settings.busy_timeout_ms)
    if saved is not None:
        click.echo(f"the database as it was is saved in {saved}")
    click.echo(f"restored {info.describe()}")
    if not is_newest(info):
        click.echo("the backup has an older schema: run `attesta init` to upgrade it before serving")


@main.command()
@db_option
@click.option("--host", default="127.0.0.1", show_default=True, help="Address to listen on.")
@click.option("--port", default=8000, show_default=True, type=int, help="Port to listen on.")
@click.option("--workers", default=1, show_default=True, type=click.IntRange(1, 64),
              help="Server processes answering requests (uvicorn workers); the background measure worker runs once.")
@reports_problems
def serve(database: str | None, host: str, port: int, workers: int) -> None:
    """Serve the web pages and the JSON API with uvicorn."""
    import uvicorn

    from app.main import create_app
    from app.serving import prepare_routes

    settings, db = _open(database)
    check_schema(db)
    refusal = serve_refusal(settings, db, host)
    db.dispose()
    if refusal:
        _fail(refusal)
    os.environ["ATTESTA_DATABASE_URL"] = settings.database_url
    os.environ["ATTESTA_SERVER_PROCESSES"] = str(workers)
    if workers > 1 and not settings.secret_key:  # one key for every process, so each accepts the others' cookies
        os.environ["ATTESTA_SECRET_KEY"] = secrets.token_urlsafe(32)
    click.echo(f"serving {settings.database_url} on http://{host}:{port}/"
               + (f" with {workers} server processes" if workers > 1 else ""))
    options = uvicorn_options(settings)
    if workers == 1:
        uvicorn.run(prepare_routes(create_app(replace(settings, server_processes=1))), host=host, port=port, **options)
    else:  # each process builds its app from the environment set above
        uvicorn.run("app.main:app_from_env", factory=True, host=host, port=port, workers=workers, **options)


def uvicorn_options(settings: Settings) -> dict:
    """Options of uvicorn for ``settings``: X-Forwarded-* headers are believed only from the configured
    trusted proxies, never by default (uvicorn alone would believe them from 127.0.0.1, so anyone on this
    machine could pose as another client or as https)."""
    proxies = list(settings.trusted_proxies)
    return {"log_level": "warning", "proxy_headers": bool(proxies), "forwarded_allow_ips": proxies or []}


# --- accounts ------------------------------------------------------------------------------------


@main.group()
def user() -> None:
    """Accounts of a shared instance: add, list and disable users."""


@user.command(name="add")
@db_option
@click.argument("name")
@click.option("--role", type=click.Choice(ROLES), required=True, help="reader, editor or admin.")
@click.option("--generate", is_flag=True, help="Generate a password and print it once instead of asking for one.")
@reports_problems
def user_add(database: str | None, name: str, role: str, generate: bool) -> None:
    """Add a user (asks for the password twice, or --generate prints a generated one once)."""
    _, db = _open(database)
    check_schema(db)
    if generate:
        password = secrets.token_urlsafe(15)
    else:
        password = click.prompt("password", hide_input=True, confirmation_prompt="password again")
        if len(password) < MIN_PASSWORD:
            _fail(f"the password is too short: use at least {MIN_PASSWORD} characters, or --generate")
    try:
        with db.write() as session:
            created = create_user(session=session, name=name, role=role, password_hash=hash_password(password),
                                  actor="cli")
    except UserError as error:
        _fail(str(error))
    click.echo(f"user {created.name} added as {created.role}")
    if generate:
        click.echo(f"password (shown only now): {password}")


@user.command(name="list")
@db_option
@reports_problems
def user_list(database: str | None) -> None:
    """List the users with role and state."""
    _, db = _open(database)
    check_schema(db)
    with db.read() as session:
        users = list_users(session=session)
    if not users:
        click.echo("no users: the instance runs for one local user on 127.0.0.1")
    for info in users:
        state = "disabled" if info.disabled else (f"locked until {info.locked_until:%Y-%m-%d %H:%M} UTC"
                                                   if info.locked_until else "active")
        click.echo(f"{info.name}\t{info.role}\t{state}\tadded {info.created_at:%Y-%m-%d}")


@user.command(name="disable")
@db_option
@click.argument("name")
@reports_problems
def user_disable(database: str | None, name: str) -> None:
    """Disable a user: no more sign-ins, and their sessions end."""
    _, db = _open(database)
    check_schema(db)
    try:
        with db.write() as session:
            info = disable_user(session=session, name=name, actor="cli")
    except UserError as error:
        _fail(str(error))
    click.echo(f"user {info.name} disabled")


if __name__ == "__main__":
    main()
