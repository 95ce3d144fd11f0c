"""Every case of the bad-input catalogue is refused at its field, by its front door, and stores
nothing (S10 point 4): the status (or exit status 2), the field named with the message's
phrase, no 500, no traceback, and every table's rows as they were.

One scenario per front door and backend (a job with a sample, a requested test and one handed
in for review, a tin, a balance, a share link, an API token), then every case of that door in
turn, so that the set-up is paid once; the failures of a door are reported together, one line
a case.

What may change while a refusal is answered, and so is left out of the comparison:
- ``user_session.last_seen_at``: every page request of a signed-in browser moves it (the
  inactivity expiry slides, server/services/sessions.py);
- ``api_token.last_used_at`` and new ``api_token_use`` rows: every API request is logged for
  the token's owner, refused ones included (the ApiTokenUse table's own contract);
- new ``staged_import`` rows after a page import's preview: the page keeps the uploaded file
  for its confirmation even when cells are refused, so that a person can map a header and
  preview again (server/web/imports.py); nothing of the schedule is stored.
"""

from __future__ import annotations

import html
import json
import re
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import date
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select
from sqlmodel import SQLModel

import server.db.tables  # noqa: F401 - registers every table in SQLModel.metadata
from server import cli
from server.config import Settings, get_settings
from server.db.session import Database
from server.services import bench, jobs, links, registers, tokens
from tests.conftest import PASSWORDS, People
from tests.support.bad_input_catalogue import CASES, Api, Case, Cli, Page, Upload, by_door
from tests.support.http import csrf_of, sign_in
from tests.support.scenario import NATURAL, small_job

CHANGING_COLUMNS = {"user_session": {"last_seen_at"}, "api_token": {"last_used_at"}}
LOGS = {"api_token_use"}
_FIELD_ERROR = re.compile(r'class="field-error"(?: id="([^"]*)")?[^>]*>(.*?)</(?:span|td|li|p|div)>', re.S)


def snapshot(db: Database, *, staged_too: bool) -> dict[str, list[tuple[Any, ...]]]:
    """Every row of every table, ordered by primary key, less what a refusal may change."""
    out: dict[str, list[tuple[Any, ...]]] = {}
    with db.session() as s:
        for table in SQLModel.metadata.sorted_tables:
            if table.name in LOGS or (table.name == "staged_import" and not staged_too):
                continue
            kept = [c for c in table.columns if c.name not in CHANGING_COLUMNS.get(table.name, set())]
            rows = s.execute(select(*kept).order_by(*table.primary_key.columns)).all()
            out[table.name] = [tuple(r) for r in rows]
    return out


def filled(text: str, ids: dict[str, str]) -> str:
    for key, value in ids.items():
        text = text.replace("{" + key + "}", value)
    return text


class Doors:
    """The scenario's records and a signed-in browser per person, token and settings at hand."""

    def __init__(self, app_client: TestClient, db: Database, people: People, settings: Settings, tmp: Path):
        self.db, self.settings, self.tmp = db, settings, tmp
        made = small_job(db, people.admin)
        (handed,) = jobs.request_tests(db, people.admin, [made.sample_id], ["water-content"])
        saved = bench.save_readings(
            db, people.tech, handed.id or 0, {"determinations": NATURAL}, handed.version
        )
        submitted = bench.submit(db, people.tech, handed.id or 0, saved.test.version)
        tin = registers.add_container(db, people.admin, "T-1", 12.5)
        balance = registers.add_equipment(
            db, people.admin, "B-1", "balance", "Balance", date(2030, 1, 1), 2000.0
        )
        link = links.create_link(db, people.admin, made.job_id, 30, "for the client")
        token = tokens.create_token(db, people.admin, people.admin, "catalogue", "write")
        with db.session() as s:
            job = s.get(server.db.tables.Job, made.job_id)
            sample = s.get(server.db.tables.Sample, made.sample_id)
            assert job is not None and sample is not None
        self.ids = {
            "job": str(made.job_id),
            "job_code": job.code,
            "client": str(job.client_id),
            "location": str(sample.location_id),
            "sample": str(made.sample_id),
            "test": str(made.test_id),
            "submitted": str(submitted.id),
            "version": str(submitted.version),
            "user": str(people.tech.id),
            "container": str(tin.id),
            "equipment": str(balance.id),
            "link": str(link.link.id),
        }
        self.bearer = {"Authorization": f"Bearer {token.plaintext}"}
        self.app_client = app_client
        self.browsers: dict[str, tuple[TestClient, str]] = {}
        for who in ("admin", "review", "tech"):  # before any case: a sign-in changes rows by design
            client = TestClient(app_client.app, base_url="http://testserver")
            sign_in(client, who, PASSWORDS[who])
            self.browsers[who] = (client, csrf_of(client.get("/jobs")))

    def browser(self, who: str) -> tuple[TestClient, str]:
        return self.browsers[who]

    def close(self) -> None:
        for client, _ in self.browsers.values():
            client.close()


@pytest.fixture
def doors(
    app_client: TestClient, db: Database, people: People, settings: Settings, tmp_path: Path
) -> Iterator[Doors]:
    made = Doors(app_client, db, people, settings, tmp_path)
    yield made
    made.close()


# --- sending and reading one case -------------------------------------------------------------


def send_page(doors: Doors, page: Page) -> tuple[int, str]:
    client, csrf = doors.browser(page.user)
    path = filled(page.path, doors.ids)
    query = {k: filled(v, doors.ids) for k, v in (page.query or {}).items()}
    headers = {"HX-Request": "true"} if page.htmx else {}
    if page.form is None:
        reply = client.get(path, params=query, headers=headers, follow_redirects=False)
    else:
        form = {k: filled(v, doors.ids) for k, v in page.form.items()}
        reply = client.post(path, data={**form, "csrf_token": csrf}, headers=headers, follow_redirects=False)
    return reply.status_code, reply.text if "html" in reply.headers.get(
        "content-type", ""
    ) else f"NOT HTML: {reply.text[:300]}"


def page_names(text: str, name: str, says: str) -> bool:
    """The page shows ``says`` as the refusal of the field ``name`` (its ``err-NAME`` message,
    or an import preview's "✖ NAME: ..." line)."""
    for found_id, message in _FIELD_ERROR.findall(text):
        words = html.unescape(re.sub(r"<[^>]+>", "", message)).strip()
        named = found_id == f"err-{name}" or words.startswith(f"✖ {name}:")
        if named and says.lower() in words.lower():
            return True
    return False


def send_api(doors: Doors, api: Api) -> tuple[int, Any]:
    path = filled(api.path, doors.ids)
    query = {k: filled(v, doors.ids) for k, v in (api.query or {}).items()}
    body: bytes | None = None
    if api.raw is not None:
        body = filled(api.raw, doors.ids).encode()
    elif api.json is not None:  # an id placeholder stands for a JSON number: "{client}" -> 3
        text = json.dumps(api.json)
        for key, value in doors.ids.items():
            text = text.replace(f'"{{{key}}}"', value) if value.isdigit() else text
        body = filled(text, doors.ids).encode()
    headers = {**doors.bearer, **({"Content-Type": "application/json"} if body is not None else {})}
    reply = doors.app_client.request(api.method, path, params=query, content=body, headers=headers)
    try:
        return reply.status_code, reply.json()
    except ValueError:
        return reply.status_code, reply.text


def json_names(printed: Any, name: str, says: str) -> bool:
    """A JSON refusal (problem ``errors``, the calculation contract's ``detail``, the command's
    ``errors``) has an entry naming ``name`` whose message contains ``says``."""
    if not isinstance(printed, dict):
        return False
    entries = printed.get("errors") or printed.get("detail") or []
    for e in entries if isinstance(entries, list) else []:
        where = [str(p) for p in e.get("loc", [])] + [str(e.get(k)) for k in ("column", "heading", "field")]
        message = str(e.get("msg") or e.get("message") or "")
        if any(name in (w, w.split(".")[-1]) for w in where) and says.lower() in message.lower():
            return True
    return False


def run_cli(
    doors: Doors, argv: list[str], capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> tuple[int, str, str]:
    monkeypatch.setenv("DATABASE_URL", doors.settings.database_url)
    monkeypatch.setenv("CLAYBENCH_DATA_DIR", str(doors.settings.data_dir))
    monkeypatch.setenv("CLAYBENCH_NEW_PASSWORD", "a-long-first-password-1")
    get_settings.cache_clear()
    capsys.readouterr()
    try:
        code = cli.main(argv)
    except SystemExit as exc:  # argparse's refusal of an argument
        code = int(exc.code or 0)
    finally:
        get_settings.cache_clear()
    out = capsys.readouterr()
    return code, out.out, out.err


def cli_names(out: str, err: str, name: str, says: str) -> bool:
    try:
        if json_names(json.loads(out), name, says):
            return True
    except ValueError:
        pass
    return name.lower() in err.lower() and says.lower() in err.lower()


def send(
    doors: Doors, c: Case, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> str | None:
    """None when the case was refused as the catalogue says; else what went wrong."""
    send_ = c.send
    if isinstance(send_, Page):
        status, text = send_page(doors, send_)
        named = page_names(text, filled(c.field, doors.ids), c.says)
        shown = re.findall(r'class="field-error"[^>]*>.*?</', text)[:3] or text[:200]
    elif isinstance(send_, Api):
        status, printed = send_api(doors, send_)
        named, shown = json_names(printed, c.field, c.says), printed
    elif isinstance(send_, Cli):
        argv = list(send_.argv)
        if send_.file is not None:
            path = doors.tmp / "request.json"
            path.write_text(send_.file, encoding="utf-8")
            argv = [str(path) if a == "{file}" else a for a in argv]
        status, out, err = run_cli(doors, argv, capsys, monkeypatch)
        if "Traceback" in err:
            return f"traceback: {err[-300:]}"
        named, shown = cli_names(out, err, c.field, c.says), (out[:300], err[:300])
    else:
        status, named, shown = send_upload(doors, send_, c, capsys, monkeypatch)
    if status >= 500:
        return f"answered {status}"
    if status != c.status:
        return f"answered {status}, not {c.status}: {str(shown)[:300]}"
    if not named:
        return f"no refusal of {c.field!r} saying {c.says!r}: {str(shown)[:400]}"
    return None


def send_upload(
    doors: Doors, up: Upload, c: Case, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> tuple[int, bool, Any]:
    content = filled(up.content().decode("latin-1"), doors.ids).encode("latin-1")
    if up.via == "cli":
        path = doors.tmp / up.filename
        path.write_bytes(content)
        args = list(up.args) or (["--job", doors.ids["job_code"]] if not up.filename.endswith(".ags") else [])
        status, out, err = run_cli(doors, ["import", str(path), *args], capsys, monkeypatch)
        if "Traceback" in err:
            return 500, False, err[-300:]
        return status, cli_names(out, err, c.field, c.says), (out[:400], err[:200])
    if up.via == "api":
        reply = doors.app_client.post(
            f"/api/v1/jobs/{doors.ids['job']}/imports",
            files={"file": (up.filename, content)},
            headers=doors.bearer,
        )
        printed = reply.json() if "json" in reply.headers.get("content-type", "") else reply.text
        return reply.status_code, json_names(printed, c.field, c.says), printed
    client, csrf = doors.browser("admin")
    reply = client.post(
        "/import/preview",
        data={"job_id": doors.ids["job"], "csrf_token": csrf},
        files={"file": (up.filename, content)},
        follow_redirects=False,
    )
    text = reply.text
    shown = re.findall(r'class="field-error"[^>]*>.*?</', text)[:3] or text[:200]
    return reply.status_code, page_names(text, c.field, c.says), shown


# --- the runner -------------------------------------------------------------------------------


def test_the_catalogue_has_at_least_200_cases_across_the_four_doors() -> None:
    counts = by_door()
    assert sum(counts.values()) >= 200, counts
    assert set(counts) == {"page", "api", "cli", "import"}, counts


@contextmanager
def unchanged(db: Database, *, staged_too: bool) -> Iterator[list[str]]:
    """The tables whose rows changed within the block (appended to the yielded list)."""
    changed: list[str] = []
    before = snapshot(db, staged_too=staged_too)
    yield changed
    after = snapshot(db, staged_too=staged_too)
    changed += [name for name in before if before[name] != after[name]]


@pytest.mark.parametrize("door", ["page", "api", "cli", "import"])
def test_every_bad_input_of_a_front_door_is_refused_at_its_field_and_stores_nothing(
    door: str, doors: Doors, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    failures: list[str] = []
    for c in [c for c in CASES if c.door == door]:
        page_import = isinstance(c.send, Upload) and c.send.via == "page"
        with unchanged(doors.db, staged_too=not page_import) as changed:
            try:
                wrong = send(doors, c, capsys, monkeypatch)
            except Exception as exc:  # noqa: BLE001 - a case that raises is a failure of that case
                wrong = f"raised {type(exc).__name__}: {str(exc)[:300]}"
        if changed:
            wrong = (wrong + "; " if wrong else "") + f"changed rows of {', '.join(changed)}"
        if wrong:
            failures.append(f"{c.name}: {wrong}")
    assert not failures, f"{len(failures)} case(s) of {door}:\n" + "\n".join(failures)
