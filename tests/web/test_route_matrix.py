"""Every route of the app against every kind of caller, from the app's own route table.

The rules are declared by hand in ``tests/support/route_rules.py``. Here the route table of
``create_app()`` is checked against them (a new route without a rule fails, naming it), and then
every route is sent a real request by each caller: nobody, a client holding a share link, the
technician, reviewer and admin signed in through the sign-in form, and the API tokens of those
three people with the read and with the write scope. A caller the rule refuses must be refused
the way the app refuses (the sign-in redirect, 401, 403, or 404 for a link token it does not
hold); a caller the rule lets through must not be refused for who they are (a 404, 409 or 422
for an empty body is the route judging the body). No cell may answer 5xx. Every broken cell is
collected, so one run shows them all.

The whole matrix runs on SQLite and on PostgreSQL (about 15 s each: 130 routes x 11 callers).
"""

from __future__ import annotations

import re
import time
from collections.abc import Iterator
from contextlib import ExitStack
from dataclasses import dataclass
from datetime import date, timedelta
from pathlib import Path
from urllib.parse import urlencode

import pytest
from fastapi import FastAPI
from fastapi.routing import iter_route_contexts
from fastapi.testclient import TestClient
from httpx import Response
from sqlmodel import select

from server.config import Settings
from server.db.session import Database
from server.db.tables import Job, ReportRender, Sample, utcnow
from server.main import create_app
from server.services import (
    jobs,
    links,
    quality_duplicates,
    quality_proficiency,
    quality_references,
    registers,
    reports,
    sessions,
    tokens,
    workers,
)
from tests.conftest import PASSWORDS, People
from tests.reports.issued import two_approved_samples
from tests.support.http import csrf_of, sign_in
from tests.support.route_rules import DECLARED, EXCLUDED, ROUTE_RULES, Door, Rule

BASE = "http://testserver"
DECLARE = "declare who may use it in tests/support/route_rules.py"
UNKNOWN_LINK = "no-such-link-token-0000000000000000"  # what a caller without the link can send


# -- the route table ------------------------------------------------------------------------------


def route_keys(app: FastAPI) -> list[tuple[str, str]]:
    """(method, path template) of every route the app answers, in table order, HEAD folded into
    GET; an entry with no methods (a mount) is listed as ("*", path) unless excluded by name."""
    found: list[tuple[str, str]] = []
    for route in iter_route_contexts(app.routes):
        path = route.path or ""
        if path in EXCLUDED:
            continue
        methods = set(route.methods or ())
        if "GET" in methods:
            methods.discard("HEAD")
        found += [(method, path) for method in sorted(methods)] or [("*", path)]
    return found


def _twice(keys: list[tuple[str, str]]) -> list[tuple[str, str]]:
    return sorted({k for k in keys if keys.count(k) > 1})


def rule_problems(app: FastAPI) -> list[str]:
    """Routes without a rule, routes in the table twice, rules declared twice, and rules that
    name no route."""
    keys = route_keys(app)
    problems = [f"no rule for {m} {p}: {DECLARE}" for m, p in keys if (m, p) not in ROUTE_RULES]
    problems += [
        f"{m} {p} is in the route table twice: only the first is ever reached" for m, p in _twice(keys)
    ]
    declared = [key for key, _ in DECLARED]
    problems += [f"{m} {p} has more than one rule: keep the one that is true" for m, p in _twice(declared)]
    problems += [
        f"the rule for {m} {p} names no route of the app" for m, p in sorted(ROUTE_RULES.keys() - set(keys))
    ]
    return problems


@pytest.fixture
def bare_app(tmp_path: Path) -> FastAPI:
    """The app as create_app builds it (its routes only: no request is sent to it)."""
    settings = Settings(
        data_dir=tmp_path, DATABASE_URL=f"sqlite:///{tmp_path}/unused.sqlite3", secret_key="t" * 48
    )
    return create_app(settings)


def test_every_route_of_the_app_has_exactly_one_rule_and_every_rule_a_route(bare_app: FastAPI) -> None:
    assert len(route_keys(bare_app)) > 100  # the walk reaches into the included routers
    assert rule_problems(bare_app) == []


def test_a_new_route_without_a_rule_fails_naming_it(bare_app: FastAPI) -> None:
    @bare_app.post("/jobs/{job_id}/something-new")
    def something_new(job_id: int) -> dict[str, int]:
        return {"job": job_id}

    assert rule_problems(bare_app) == [f"no rule for POST /jobs/{{job_id}}/something-new: {DECLARE}"]


# -- the callers ----------------------------------------------------------------------------------


@dataclass(frozen=True)
class Caller:
    name: str
    door: Door  # public: nobody in particular; link: holds a share link; session; token
    username: str = ""
    role: str = ""
    scope: str = ""

    def allowed(self, rule: Rule) -> bool:
        if rule.door is Door.public:
            return True
        if rule.door is Door.link:
            return self.door is Door.link
        if rule.door is not self.door or self.role not in rule.roles:
            return False
        return rule.door is Door.session or rule.scope == "read" or self.scope == "write"

    def refusal(self, rule: Rule) -> str:
        """How the app refuses this caller on a route of this rule: a page sends a stranger to
        the sign-in form (303 See Other, RFC 9110 section 15.4.4); the API answers a missing
        token 401 and a token without the role or scope 403 (RFC 6750 section 3.1); a person of
        the wrong role gets 403 (RFC 9110 section 15.5.4); an unknown link is 404, as
        server/web/client.py answers it."""
        if rule.door is Door.link:
            return "404"  # the caller sends a link token it does not hold
        if rule.door is Door.session:
            return "403" if self.door is Door.session else "sign-in redirect"
        return "403" if self.door is Door.token else "401"


STAFF_PEOPLE = (("tech", "technician"), ("review", "reviewer"), ("admin", "admin"))
CALLERS = (
    Caller("anonymous", Door.public),
    Caller("client-link holder", Door.link),
    *(Caller(f"{role} signed in", Door.session, name, role) for name, role in STAFF_PEOPLE),
    *(
        Caller(f"{role} token ({scope})", Door.token, name, role, scope)
        for name, role in STAFF_PEOPLE
        for scope in ("read", "write")
    ),
)

# Routes that end the caller's session (or forget its cookie): run last, each from a new browser
# of the same caller, so that the cells after them still have what the caller holds.
ENDS_SESSION = (("POST", "/signout"), ("POST", "/account/sign-out-everywhere"))

# Query strings a GET needs to reach its handler (without them the cell would only test 422);
# "{name}" is filled in from the scenario as in a path.
QUERIES = {
    ("GET", "/api/v1/jobs/{job_id}/export"): {"format": "csv"},
    ("GET", "/audit/job"): {"job_id": "{job_id}"},
}


@dataclass
class Scenario:
    """Real records for every path parameter: an issued report on job T-100 with a client link,
    a requested test beside its two approved ones, a tin and a balance, a second reviewer whose
    spare session and token the admin's routes act on, and each person's own spare ones."""

    ids: dict[str, str]
    link_token: str
    own_sessions: dict[str, int]
    own_tokens: dict[str, int]
    api_tokens: dict[tuple[str, str], str]


def _scenario(db: Database, people: People) -> Scenario:
    two = two_approved_samples(db, people)
    report = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    link = links.create_link(db, people.review, two.job_id, 7, "matrix")
    spare_link = links.create_link(db, people.review, two.job_id, 7, "to withdraw")
    (requested,) = jobs.request_tests(db, people.admin, [two.samples[0]], ["water-content"])
    tin = registers.add_container(db, people.admin, "MX-1", 15.2)  # fictional records, not check values
    balance = registers.add_equipment(
        db, people.admin, "BAL-MX", "balance", "Matrix balance", date.today() + timedelta(days=90), 600.0
    )
    with db.session() as s:
        job, sample = s.get(Job, two.job_id), s.get(Sample, two.samples[1])
        assert job is not None and sample is not None
        client_id, location_id = job.client_id, sample.location_id
        render_id = s.exec(select(ReportRender.id).where(ReportRender.report_id == report.id)).one()
    workers.beat(db, workers.worker_name("sqlite"), "sqlite", utcnow())  # its render worker: /readyz 200
    soil = quality_references.add_soil(db, people.review, "RS-MX", "Matrix reference soil")
    (again,) = jobs.request_tests(db, people.admin, [two.samples[0]], ["water-content"])
    pair = quality_duplicates.mark(db, people.review, again.id or 0, requested.id or 0)
    entry = quality_proficiency.add_round(
        db,
        people.review,
        quality_proficiency.RoundForm(
            "Matrix scheme", "MX-1", "water-content", "water_content", 30.0, 1.5, date.today(), 31.0
        ),
    )
    _, other_session = sessions.start(db, people.review2, "10.9.9.9", "spare browser")
    other_token = tokens.create_token(db, people.review2, people.review2, "spare")
    staff = {"tech": people.tech, "review": people.review, "admin": people.admin}
    own_sessions = {
        name: sessions.start(db, user, "10.9.9.8", "own spare")[1].id or 0 for name, user in staff.items()
    }
    own_tokens = {
        name: tokens.create_token(db, user, user, "own spare").token.id or 0 for name, user in staff.items()
    }
    api_tokens = {
        (name, scope): tokens.create_token(db, user, user, f"matrix {scope}", scope).plaintext
        for name, user in staff.items()
        for scope in ("read", "write")
    }
    ids = {
        "job_id": two.job_id,
        "sample_id": two.samples[1],
        "test_id": requested.id or 0,
        "approved_test_id": two.tests[1],
        "report_id": report.id or 0,
        "render_id": render_id or 0,
        "client_id": client_id,
        "location_id": location_id,
        "link_id": spare_link.link.id or 0,
        "user_id": people.review2.id or 0,
        "session_id": other_session.id or 0,
        "token_id": other_token.token.id or 0,
        "container_id": tin.id or 0,
        "equipment_id": balance.id or 0,
        "soil_id": soil.id or 0,
        "mark_id": pair.id or 0,
        "round_id": entry.id or 0,
    }
    return Scenario(
        {k: str(v) for k, v in ids.items()} | {"container_code": tin.code, "equipment_code": balance.code},
        link.token,
        own_sessions,
        own_tokens,
        api_tokens,
    )


def _path(template: str, caller: Caller, scene: Scenario) -> str:
    """The template with real ids: the caller's own session and token on the account pages, the
    approved test on the review desk, the link token only for the caller who holds it."""
    values = dict(scene.ids)
    values["token"] = scene.link_token if caller.door is Door.link else UNKNOWN_LINK
    values["code"] = values["equipment_code" if "/equipment" in template else "container_code"]
    if template.startswith("/review/"):
        values["test_id"] = values["approved_test_id"]
    if template.startswith("/account/") and caller.username in scene.own_sessions:
        values["session_id"] = str(scene.own_sessions[caller.username])
        values["token_id"] = str(scene.own_tokens[caller.username])
    return _fill(template, values)


def _fill(template: str, values: dict[str, str]) -> str:
    return re.sub(r"\{(\w+)\}", lambda m: values[m.group(1)], template)


# -- the browsers ---------------------------------------------------------------------------------


def _browser(app: FastAPI, caller: Caller, scene: Scenario, address: str) -> TestClient:
    """A browser or script of its own (own cookies, own address, so that one caller's unknown
    link tokens do not count against another's) that has what this caller holds: nothing but an
    anonymous CSRF token, a share link it opened, a session from the sign-in form, or a token."""
    client = TestClient(app, base_url=BASE, raise_server_exceptions=False, client=(address, 50000))
    if caller.door is Door.session:
        sign_in(client, caller.username, PASSWORDS[caller.username])
        client.headers["X-CSRF-Token"] = csrf_of(client.get("/account/sessions"))
        return client
    client.headers["X-CSRF-Token"] = csrf_of(client.get("/signin"))  # refused for who, not for CSRF
    if caller.door is Door.link:
        assert client.get(f"/share/{scene.link_token}").status_code == 200
    if caller.door is Door.token:
        client.headers["Authorization"] = f"Bearer {scene.api_tokens[(caller.username, caller.scope)]}"
    return client


@dataclass(frozen=True)
class Cell:
    method: str
    template: str
    rule: Rule
    caller: Caller


def _verdict(cell: Cell, path: str, query: str, reply: Response) -> str | None:
    """What is wrong with this answer, or None."""
    status, location = reply.status_code, reply.headers.get("location", "")
    where = f"{cell.method} {cell.template} ({path}) as {cell.caller.name} [{cell.rule}]"
    if status >= 500:
        return f"{where}: {status} server error: {reply.text[:200]}"
    if cell.caller.allowed(cell.rule):
        to_sign_in = status == 303 and location.startswith("/signin?")
        link_refused = "{token}" in cell.template and status in (404, 410)  # the link's refusals
        if status in (401, 403, 429) or to_sign_in or link_refused:
            return f"{where}: allowed by the rule but refused with {status} {location}".rstrip()
        return None
    expected = cell.caller.refusal(cell.rule)
    if expected == "sign-in redirect":
        wanted = "/signin?" + urlencode({"next": f"{path}?{query}" if query else path})
        ok, expected = status == 303 and location == wanted, f"303 to {wanted}"
    else:
        ok = str(status) == expected
    return (
        None if ok else f"{where}: refused by the rule, expected {expected}, got {status} {location}".rstrip()
    )


def _cells(caller: Caller, keys: list[tuple[str, str]]) -> Iterator[Cell]:
    """The caller's cells, the ones that end a session last."""
    ordered = [k for k in keys if k not in ENDS_SESSION] + [k for k in ENDS_SESSION if k in keys]
    for method, template in ordered:
        yield Cell(method, template, ROUTE_RULES[(method, template)], caller)


def _query(cell: Cell, scene: Scenario) -> str:
    """The cell's query string (without "?"), or ""."""
    found = QUERIES.get((cell.method, cell.template), {})
    return urlencode({k: _fill(v, scene.ids) for k, v in found.items()})


def test_every_route_answers_every_caller_as_its_rule_says(
    app_client: TestClient, db: Database, people: People, backend: str
) -> None:
    started = time.monotonic()
    app = app_client.app
    assert isinstance(app, FastAPI)
    keys = [k for k in route_keys(app) if k in ROUTE_RULES]  # an unruled route fails the test above
    scene = _scenario(db, people)
    violations: list[str] = []
    sent = 0
    with ExitStack() as browsers:

        def browser(caller: Caller, number: int) -> TestClient:
            made = _browser(app, caller, scene, f"10.0.0.{number}")
            browsers.callback(made.close)
            return made

        for number, caller in enumerate(CALLERS, start=1):
            client = browser(caller, number)
            for cell in _cells(caller, keys):
                if (cell.method, cell.template) in ENDS_SESSION:
                    client = browser(caller, number)
                path, query = _path(cell.template, caller, scene), _query(cell, scene)
                reply = client.request(
                    cell.method, f"{path}?{query}" if query else path, follow_redirects=False
                )
                sent += 1
                problem = _verdict(cell, path, query, reply)
                if problem:
                    violations.append(problem)
    elapsed = time.monotonic() - started
    print(
        f"\nroute matrix on {backend}: {len(keys)} routes x {len(CALLERS)} callers, {sent} cells, "
        f"{elapsed:.1f} s"
    )
    assert sent == len(keys) * len(CALLERS)
    assert not violations, f"{len(violations)} of {sent} cells broke their rule:\n" + "\n".join(violations)
