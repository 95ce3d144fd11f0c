"""The ``claybench`` command: serve, worker, demo, migrate, create-user, create-token, calc, import, export,
audit verify, backup, restore."""

from __future__ import annotations

import argparse
import gc
import getpass
import json
import os
import socket
import subprocess
import sys
from typing import Any

from server.config import get_settings


def _bind(host: str, port: int) -> socket.socket:
    """The listening socket, bound before anything else so that the address printed is the one
    served (port 0 takes a free port) and a port in use is said before a long demo load."""
    try:
        return socket.create_server((host, port), family=socket.AF_INET6 if ":" in host else socket.AF_INET)
    except OSError as exc:
        raise SystemExit(f"cannot listen on {host}:{port}: {exc.strerror}") from exc


def _address(sock: socket.socket) -> str:
    """The base address a browser on this machine opens: the bound host and port (loopback for a
    socket bound to every address)."""
    host, port = sock.getsockname()[:2]
    if host in ("0.0.0.0", "::"):
        host = "127.0.0.1" if host == "0.0.0.0" else "::1"
    return f"http://[{host}]:{port}" if ":" in host else f"http://{host}:{port}"


def _serve(sock: socket.socket) -> None:
    """The app on the bound socket, its metrics on a port of their own, JSON log lines on stdout."""
    import logging.config

    import uvicorn

    from server.access_log import log_config
    from server.main import create_app
    from server.observability.metrics import start_exporter

    logging.config.dictConfig(log_config())  # before the app: share and API tokens never logged
    settings = get_settings()
    app = create_app(settings)
    start_exporter(app.state.metrics.registry, settings.metrics_host, settings.metrics_port)
    # What the app keeps for its life exists by now: out of the collector's reach (gc.freeze), so
    # a full collection scans only what requests make. Measured on the job page of 1,000 samples
    # (tests/benchmarks/bench_big_lab.py): p95 ~133 ms -> ~52 ms. Here, not in create_app: tests
    # build many apps, and frozen objects are never freed.
    gc.collect()
    gc.freeze()
    config = uvicorn.Config(
        app,
        proxy_headers=True,
        log_config=None,  # configured above
        access_log=False,  # the app writes each request's line itself (server/observability/middleware.py)
    )
    uvicorn.Server(config).run(sockets=[sock])


def _with_worker(settings_url: str, wanted: bool | None) -> bool:
    """Whether serve starts a render worker of its own: by default on SQLite (one machine, the
    worker beside the app), not on PostgreSQL, where workers run apart (``claybench worker``)."""
    return wanted if wanted is not None else settings_url.startswith("sqlite")


def _start_worker() -> subprocess.Popen[bytes]:
    """``claybench worker`` as a child process of serve: the same task code, another interpreter,
    so that a render never holds the web process."""
    return subprocess.Popen(
        [sys.executable, "-c", "from server.cli import main; raise SystemExit(main(['worker']))"]
    )


def _serve_and_render(sock: socket.socket, worker_wanted: bool | None) -> None:
    """The web app, and on SQLite (or when asked) a render worker beside it for as long."""
    worker = _start_worker() if _with_worker(get_settings().database_url, worker_wanted) else None
    try:
        _serve(sock)
    finally:
        if worker is not None:
            worker.terminate()  # the worker ends after the render in hand, or is killed
            try:
                worker.wait(30)
            except subprocess.TimeoutExpired:
                worker.kill()


def cmd_serve(args: argparse.Namespace) -> int:
    sock = _bind(args.host, args.port)
    print(f"claybench: serving on {_address(sock)}", file=sys.stderr, flush=True)
    _serve_and_render(sock, args.worker)
    return 0


def cmd_worker(args: argparse.Namespace) -> int:
    """Render issued reports until stopped (SIGTERM or Ctrl-C ends it after the render in hand)."""
    import logging.config

    from server.access_log import log_config
    from server.tasks.worker import run_worker

    logging.config.dictConfig(log_config())  # the same JSON lines as serve
    run_worker(get_settings())
    return 0


def cmd_migrate(args: argparse.Namespace) -> int:
    from server.db.migrate import upgrade

    upgrade(get_settings().migrate_database_url)
    print("database schema is up to date")
    return 0


def cmd_create_user(args: argparse.Namespace) -> int:
    from server.db.session import Database
    from server.services.errors import ServiceError
    from server.services.users import create_user

    password = os.environ.get("CLAYBENCH_NEW_PASSWORD") or getpass.getpass("Password for the new user: ")
    db = Database(get_settings().database_url)
    try:
        user = create_user(db, None, args.username, args.full_name or args.username, args.role, password)
    except ServiceError as exc:
        print(f"refused: {exc}", file=sys.stderr)
        return 2
    finally:
        db.dispose()
    print(f"created {user.role} {user.username!r}")
    return 0


def cmd_calc(args: argparse.Namespace) -> int:
    """The calculation contract on the command line: JSON in, JSON out, exit 2 when refused."""
    from pathlib import Path

    from server.services.calculations import calculate
    from server.services.errors import Invalid

    raw = Path(args.file).read_text(encoding="utf-8") if args.file else sys.stdin.read()
    try:
        request: Any = json.loads(raw)
    except ValueError as exc:  # JSONDecodeError, or an integer of more digits than Python reads
        json.dump(
            {"detail": [{"loc": ["body"], "msg": f"not valid JSON: {exc}", "type": "invalid"}]}, sys.stdout
        )
        print()
        return 2
    if not isinstance(request, dict) or not isinstance(request.get("method"), str):
        json.dump(
            {
                "detail": [
                    {
                        "loc": ["method"],
                        "msg": "a JSON object with a method id is required",
                        "type": "missing",
                    }
                ]
            },
            sys.stdout,
        )
        print()
        return 2
    try:
        out = calculate(request["method"], request.get("readings"))
    except Invalid as exc:
        json.dump({"detail": [e.to_dict() for e in exc.errors]}, sys.stdout, indent=2)
        print()
        return 2
    json.dump(out, sys.stdout, indent=2)
    print()
    return 0


def cmd_import(args: argparse.Namespace) -> int:
    """A sample schedule into a job (DESIGN.md section 7): the outcome as JSON, or exit 2 with
    every refused cell as JSON and nothing stored."""
    from pathlib import Path

    from server.db.session import Database
    from server.exchange.schedule import CellError, Origin
    from server.services.errors import ServiceError
    from server.services.imports import ImportRefused, Target, import_schedule, read_schedule
    from server.services.users import user_named

    path = Path(args.file)
    db = Database(get_settings().database_url)
    try:
        try:
            data = path.read_bytes()
        except OSError as exc:
            raise ImportRefused(
                [CellError(Origin(row=None), "file", f"cannot read {path}: {exc.strerror}")]
            ) from exc
        actor = user_named(db, args.user) if args.user else None
        schedule = read_schedule(path.name, data)
        target = Target(args.job or "", args.client or "", args.title or "", args.site or "")
        plan = import_schedule(db, actor, schedule, target, dry_run=args.dry_run, source=path.name)
    except ImportRefused as exc:
        json.dump(exc.to_dict(), sys.stdout, indent=2)
        print()
        return 2
    except ServiceError as exc:
        json.dump({"errors": [{"row": None, "column": "user", "message": str(exc)}]}, sys.stdout, indent=2)
        print()
        return 2
    finally:
        db.dispose()
    json.dump(plan.outcome(args.dry_run), sys.stdout, indent=2)
    print()
    return 0


def cmd_create_token(args: argparse.Namespace) -> int:
    """A personal API token for USERNAME, printed once as the last word of the output (only its
    SHA-256 is kept, so it cannot be shown again); exit 2 naming the refusal."""
    from server.db.session import Database
    from server.services.errors import Invalid, ServiceError
    from server.services.tokens import create_token
    from server.services.users import user_named

    db = Database(get_settings().database_url)
    try:
        user = user_named(db, args.username)
        made = create_token(db, None, user, args.name, args.scope, args.days)
    except Invalid as exc:
        print("refused: " + "; ".join(e.message for e in exc.errors), file=sys.stderr)
        return 2
    except ServiceError as exc:
        print(f"refused: {exc}", file=sys.stderr)
        return 2
    finally:
        db.dispose()
    token = made.token
    print(
        f"created {token.scope} token {token.name!r} for {user.username}, "
        f"expires {token.expires_at:%Y-%m-%d %H:%M} UTC; shown only now: {made.plaintext}"
    )
    return 0


def _export_refused(errors: list[dict[str, Any]]) -> int:
    json.dump({"errors": errors}, sys.stdout, indent=2)
    print()
    return 2


def cmd_export(args: argparse.Namespace) -> int:
    """A job's approved results (DESIGN.md section 7) to FILE, or to standard output; exit 2
    with the refusals as JSON, as ``import`` prints them, and nothing written.

    AGS4's TRAN_DATE is today (UTC): the file is a transmission issued now. XLSX is binary:
    without -o it goes to standard output only when that is a pipe or a file (``> out.xlsx``),
    never to a terminal, where it would be noise. With -o the command prints what it wrote as
    JSON, so a script can log it."""
    from datetime import UTC, datetime
    from pathlib import Path

    from server.db.session import Database
    from server.exchange import results_sheet
    from server.exchange.downloads import job_download
    from server.services.errors import Invalid, ServiceError

    if args.format == "xlsx" and args.output is None and sys.stdout.isatty():
        return _export_refused(
            [{"field": "output", "message": "an XLSX file is binary: name it with -o FILE, or redirect"}]
        )
    db = Database(get_settings().database_url)
    try:
        with db.session() as s:
            job = results_sheet.job_numbered(s, args.job)
            found = job_download(s, job.id or 0, args.format, today=datetime.now(UTC).date())
    except Invalid as exc:
        return _export_refused(
            [{"field": ".".join(map(str, e.loc)), "message": e.message} for e in exc.errors]
        )
    except ServiceError as exc:
        return _export_refused([{"field": "job", "message": str(exc)}])
    finally:
        db.dispose()
    data = found.data
    if args.output is None:
        sys.stdout.buffer.write(data)
        sys.stdout.buffer.flush()
        return 0
    path = Path(args.output)
    try:
        path.write_bytes(data)
    except OSError as exc:
        return _export_refused([{"field": "output", "message": f"cannot write {path}: {exc.strerror}"}])
    written = {
        "job": job.code,
        "format": args.format,
        "file": str(path),
        "bytes": len(data),
        "samples": found.samples,
        "tests": found.tests,
    }
    json.dump(written, sys.stdout, indent=2)
    print()
    return 0


def cmd_audit_verify(args: argparse.Namespace) -> int:
    """Walk the audit trail's hash chain: exit 0 when it holds, 1 naming the first bad event,
    so a scheduled job or a person can show the trail was not rewritten."""
    from server.db.session import Database
    from server.services.audit_chain import check

    db = Database(get_settings().database_url)
    try:
        outcome = check(db)
    finally:
        db.dispose()
    if outcome.bad is not None:
        print(f"checked {outcome.checked} audit events")
        print(f"event {outcome.bad.event_id}: {outcome.bad.kind}: {outcome.bad.message}")
        return 1
    print(f"checked {outcome.checked} audit events: trail intact")
    print(f"newest sha256: {outcome.head_sha256 or '(no events yet)'}")
    return 0


def cmd_backup(args: argparse.Namespace) -> int:
    """Every table into DIR with a manifest to check it by (server/ops/backup.py), as the schema's
    owner, while the app keeps running; exit 2 naming the refusal."""
    from pathlib import Path

    from server.ops.backup import backup
    from server.ops.errors import BackupRefused

    try:
        written = backup(get_settings().migrate_database_url, Path(args.dir))
    except BackupRefused as exc:
        print(f"refused: {exc}", file=sys.stderr)
        return 2
    print(written.summary())
    return 0


def cmd_restore(args: argparse.Namespace) -> int:
    """The backup in DIR into the empty database of the settings, as the schema's owner: exit 2
    when refused (nothing written), 1 when the restored rows do not match the manifest."""
    from pathlib import Path

    from server.ops.backup import restore
    from server.ops.errors import BackupRefused, RestoreMismatch

    try:
        restored = restore(get_settings().migrate_database_url, Path(args.dir))
    except BackupRefused as exc:
        print(f"refused: {exc}", file=sys.stderr)
        return 2
    except RestoreMismatch as exc:
        print(f"failed: {exc}", file=sys.stderr)
        return 1
    print(restored.summary())
    return 0


def _step(text: str) -> None:
    """One line per step of the demo load, on stderr (stdout keeps the summary)."""
    print(f"claybench demo: {text}", file=sys.stderr, flush=True)


def cmd_demo(args: argparse.Namespace) -> int:
    """Load the demo (kept if it is there, unless --fresh), then serve it where the summary says.

    The socket is bound first, so that the printed address and the demo report's verify link
    name the port really served unless CLAYBENCH_PUBLIC_BASE_URL says otherwise."""
    from server.demo import load_demo

    sock = None if args.no_serve else _bind(args.host, args.port)
    address = _address(sock) if sock else get_settings().public_base_url.rstrip("/")
    if sock and "CLAYBENCH_PUBLIC_BASE_URL" not in os.environ:
        os.environ["CLAYBENCH_PUBLIC_BASE_URL"] = address  # the app, its worker and the demo's links
        get_settings.cache_clear()
    info = load_demo(get_settings(), reset=args.fresh, progress=_step)
    print(info.summary(address), flush=True)
    if sock is None:
        return 0
    _step(f"serving on {address} (Ctrl-C stops)")
    _serve_and_render(sock, None)
    return 0


def parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="claybench", description="Index testing for a soils laboratory.")
    sub = p.add_subparsers(dest="command", required=True)

    s = sub.add_parser("serve", help="run the web app")
    s.add_argument("--host", default="127.0.0.1")
    s.add_argument("--port", type=int, default=8000)
    s.add_argument(
        "--worker",
        action=argparse.BooleanOptionalAction,
        default=None,
        help="start a render worker beside the app (default: on SQLite yes, on PostgreSQL no)",
    )
    s.set_defaults(fn=cmd_serve)

    w = sub.add_parser("worker", help="render issued reports (the queue of the database in DATABASE_URL)")
    w.set_defaults(fn=cmd_worker)

    d = sub.add_parser(
        "demo", help="build the demo database with a fictional job (or keep the one there), then serve it"
    )
    d.add_argument("--host", default="127.0.0.1")
    d.add_argument("--port", type=int, default=8000)
    d.add_argument(
        "--fresh", action="store_true", help="delete an existing SQLite demo database and build it again"
    )
    # Keeping is the default now; --keep stays accepted so that older scripts still run.
    d.add_argument("--keep", action="store_true", help=argparse.SUPPRESS)
    d.add_argument("--no-serve", action="store_true", help="load the demo data and stop")
    d.set_defaults(fn=cmd_demo)

    m = sub.add_parser("migrate", help="bring the database schema up to date")
    m.set_defaults(fn=cmd_migrate)

    u = sub.add_parser("create-user", help="add a user (password from CLAYBENCH_NEW_PASSWORD or a prompt)")
    u.add_argument("username")
    u.add_argument("--role", required=True, choices=["technician", "reviewer", "admin"])
    u.add_argument("--full-name", default="")
    u.set_defaults(fn=cmd_create_user)

    c = sub.add_parser("calc", help="compute a method's results: request JSON on stdin or in FILE")
    c.add_argument("file", nargs="?")
    c.set_defaults(fn=cmd_calc)

    i = sub.add_parser("import", help="import a sample schedule (.csv, .xlsx or .ags) into a job")
    i.add_argument("file")
    i.add_argument("--job", help="the job number (for AGS4, the file's PROJ_ID)")
    i.add_argument("--client", help="the client, when the job is created by this import")
    i.add_argument("--title", help="the job's title, when the job is created by this import")
    i.add_argument("--site", help="the job's site, when the job is created by this import")
    i.add_argument("--dry-run", action="store_true", help="check and count only; store nothing")
    i.add_argument("--user", help="the username the audit trail records (default: system)")
    i.set_defaults(fn=cmd_import)

    t = sub.add_parser(
        "create-token", help="make a personal API token for a user; the token is the last word printed"
    )
    t.add_argument("username")
    t.add_argument("--name", required=True, help="what the token is for (shown in the log of its uses)")
    t.add_argument("--scope", choices=["read", "write"], default="read")
    t.add_argument("--days", type=int, default=90, help="days until it expires (1 to 366; default 90)")
    t.set_defaults(fn=cmd_create_token)

    x = sub.add_parser("export", help="write a job's approved results as AGS4, CSV or XLSX")
    x.add_argument("job", help="the job number")
    x.add_argument("--format", required=True, choices=["ags4", "csv", "xlsx"])
    x.add_argument(
        "-o", "--output", help="the file to write (default: standard output, but XLSX never to a terminal)"
    )
    x.set_defaults(fn=cmd_export)

    a = sub.add_parser("audit", help="check the audit trail")
    audit_actions = a.add_subparsers(dest="action", required=True)
    v = audit_actions.add_parser(
        "verify", help="walk the hash chain; exit 1 naming the first event changed or after a removal"
    )
    v.set_defaults(fn=cmd_audit_verify)

    b = sub.add_parser("backup", help="copy every table (issued PDFs included) into DIR with a manifest")
    b.add_argument("dir", help="a new or empty folder")
    b.set_defaults(fn=cmd_backup)

    r = sub.add_parser("restore", help="restore the backup in DIR into the configured, empty database")
    r.add_argument("dir", help="a folder written by claybench backup")
    r.set_defaults(fn=cmd_restore)
    return p


def main(argv: list[str] | None = None) -> int:
    args = parser().parse_args(argv)
    code: int = args.fn(args)
    return code


if __name__ == "__main__":
    raise SystemExit(main())
