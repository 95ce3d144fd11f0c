"""Benchmark of a bench save over HTTP against its floor, side by side in one run, with wrk.

Run from the repository root (wrk from the system's packages: ``apt-get install wrk``)::

    python tests/benchmarks/bench_http.py [--seconds 10] [--concurrency 1,10,20] [--backend sqlite]
                                         [--repeat 3]   # each level three times
    python tests/benchmarks/bench_http.py --smoke        # CI: 2 s at 1 and 4 technicians

Set-up (not timed): a throw-away database (SQLite, and PostgreSQL when
CLAYBENCH_TEST_POSTGRES_URL names a server: a fresh database on it), migrated and seeded through
the services with one technician and one Atterberg sheet per connection; every technician
signs in through the sign-in form and opens their sheet (the session cookie, CSRF token and the
field's stored value).

Then, for each concurrency in turn, two real uvicorn servers one after the other on the same
database, each driven by wrk with one connection per technician for the same time:

- the app: ``POST /tests/{id}/fields`` saving one field of the technician's own sheet with a new
  value each time against the value last stored (as ``static/bench.js`` does): session, CSRF,
  field guard, version, engine, audit event with the readings, one transaction;
- the floor (``floor_app.py``): a bare FastAPI endpoint on the same engine settings that reads
  the user and inserts one row with the same JSON, in one transaction.

It prints for each: requests a second, p50 and p95 latency, and failures (non-2xx answers,
timeouts, socket errors), then the ratios app / floor (throughput: goal 0.6 or more; p95 at
the highest concurrency: goal 2 or less). wrk and the servers share the machine's cores: compare
the ratios of one run, never absolute figures across machines. It exits 1 on any failed request.
Not collected by pytest.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import uuid
from dataclasses import dataclass
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import httpx  # noqa: E402
from sqlalchemy import create_engine, text  # noqa: E402
from sqlalchemy.engine import make_url  # noqa: E402
from sqlmodel import select  # noqa: E402

from server.db.session import Database  # noqa: E402
from server.db.tables import User  # noqa: E402
from tests.benchmarks.bench_concurrent_saves import (  # noqa: E402
    FIELD,
    Saver,
    free_port,
    open_sheet,
    seed,
    start_server,
    start_uvicorn,
)

PG_ENV = "CLAYBENCH_TEST_POSTGRES_URL"

# One wrk script for both servers: each thread (one connection) is one technician; it sends a new
# value of the field each time, against the value it last had stored, and counts what came back.
LUA = r"""
local people = %(people)s
local path_of = %(path_of)s
local threads = {}
local count = 0

function setup(thread)
  count = count + 1
  thread:set("me", count)
  table.insert(threads, thread)
end

function init(args)
  person = people[me]
  n = 0
  refused = 0
  value = nil
end

local function quoted(s) return '"' .. s .. '"' end

function request()
  n = n + 1
  value = string.format("%%.2f", 10 + (n %% 900) / 100)
  local body = '{"changes":[{"path":"%(field)s","value":' .. quoted(value) ..
    ',"base":' .. quoted(person.base) .. '}]}'
  local headers = {["Content-Type"] = "application/json", ["HX-Request"] = "true"}
  if person.cookie ~= "" then
    headers["Cookie"] = person.cookie
    headers["X-CSRF-Token"] = person.csrf
  end
  return wrk.format("POST", path_of(person), headers, body)
end

function response(status, headers, body)
  if status == 200 then person.base = value else refused = refused + 1 end
end

function done(summary, latency, requests)
  local refused_all = 0
  for _, thread in ipairs(threads) do refused_all = refused_all + thread:get("refused") end
  local e = summary.errors
  io.write(string.format(
    '{"requests": %%d, "duration_us": %%d, "p50_us": %%d, "p95_us": %%d, "p99_us": %%d, "refused": %%d, ' ..
    '"non_2xx": %%d, "timeouts": %%d, "socket_errors": %%d}\n',
    summary.requests, summary.duration, latency:percentile(50), latency:percentile(95),
    latency:percentile(99), refused_all, e.status, e.timeout, e.connect + e.read + e.write))
end
"""


@dataclass
class Run:
    """What wrk measured for one server at one concurrency."""

    requests: int
    seconds: float
    p50_ms: float
    p95_ms: float
    p99_ms: float
    failed: int

    @property
    def per_second(self) -> float:
        return self.requests / self.seconds


def wrk(base_url: str, people: list[dict[str, str]], path_of: str, seconds: float, folder: Path) -> Run:
    """Drive one server with one connection per person for ``seconds``; what wrk measured."""
    script = folder / "save.lua"
    script.write_text(
        LUA % {"people": _lua_table(people), "path_of": path_of, "field": FIELD}, encoding="utf-8"
    )
    c = len(people)
    command = ["wrk", "-t", str(c), "-c", str(c), "-d", f"{max(1, round(seconds))}s", "--timeout", "10s"]
    command += ["-s", str(script)]
    done = subprocess.run([*command, base_url], capture_output=True, text=True, check=False)
    lines = [line for line in done.stdout.splitlines() if line.startswith("{")]
    if done.returncode != 0 or not lines:
        raise SystemExit(f"wrk failed ({done.returncode}):\n{done.stdout}\n{done.stderr}")
    got = json.loads(lines[-1])
    failed = got["refused"] + got["timeouts"] + got["socket_errors"]
    return Run(
        got["requests"],
        got["duration_us"] / 1e6,
        got["p50_us"] / 1000,
        got["p95_us"] / 1000,
        got["p99_us"] / 1000,
        failed,
    )


def _lua_table(people: list[dict[str, str]]) -> str:
    def quoted(s: str) -> str:
        return json.dumps(s)  # a JSON string is a valid Lua string for these characters

    rows = ", ".join("{" + ", ".join(f"{k} = {quoted(v)}" for k, v in p.items()) + "}" for p in people)
    return "{" + rows + "}"


def start_floor(folder: Path, url: str, port: int) -> subprocess.Popen[bytes]:
    """The floor app under uvicorn, as the app runs (one worker, no access log)."""
    return start_uvicorn(
        folder, "tests.benchmarks.floor_app:create_floor", {"DATABASE_URL": url}, port, name="floor"
    )


def _stop(server: subprocess.Popen[bytes]) -> None:
    server.terminate()
    server.wait(timeout=30)


def signed_in(base_url: str, savers: list[Saver]) -> list[dict[str, str]]:
    """Each technician signed in with their sheet open: cookie, CSRF token, test, stored value."""
    people = []
    for saver in savers:
        with httpx.Client(base_url=base_url, timeout=30) as http:
            csrf, _version, base = open_sheet(http, saver)
            cookie = "; ".join(f"{k}={v}" for k, v in http.cookies.items())
        people.append({"cookie": cookie, "csrf": csrf, "test": str(saver.test_id), "base": base, "user": ""})
    return people


def _user_ids(url: str, usernames: list[str]) -> list[int]:
    db = Database(url)
    with db.session() as s:
        by_name = {u.username: u.id for u in s.exec(select(User))}
    db.dispose()
    return [int(by_name[name] or 0) for name in usernames]


def bench_backend(
    name: str, url: str, levels: list[int], seconds: float, folder: Path, repeat: int = 1
) -> list[str]:
    """Both servers at every concurrency on one database, ``repeat`` times a level (the machine's
    other work moves single runs; a ratio seen again is worth more); the failures seen."""
    ids = seed(url, max(levels))
    savers = [Saver(f"tech{n:02d}", test_id) for n, test_id in enumerate(ids)]
    user_ids = _user_ids(url, [s.username for s in savers])
    problems: list[str] = []
    print(f"\n{name}: one field saved per request, {seconds:g} s per run, app then floor at each level")
    print(
        "  conc   app req/s  floor req/s  ratio   app p50  floor p50   app p95  floor p95  p95 ratio  failed"
    )
    for level in [level for level in levels for _ in range(repeat)]:
        port = free_port()
        app = start_server(folder, url, port, 1)
        try:
            people = signed_in(f"http://127.0.0.1:{port}", savers[:level])
            got = wrk(
                f"http://127.0.0.1:{port}",
                people,
                "function(p) return '/tests/' .. p.test .. '/fields' end",
                seconds,
                folder,
            )
        finally:
            _stop(app)
        port = free_port()
        floor_server = start_floor(folder, url, port)
        try:
            bare = [
                {"cookie": "", "csrf": "", "test": "", "base": "", "user": str(u)} for u in user_ids[:level]
            ]
            floor = wrk(
                f"http://127.0.0.1:{port}",
                bare,
                "function(p) return '/floor/' .. p.user end",
                seconds,
                folder,
            )
        finally:
            _stop(floor_server)
        print(
            f"  {level:4d}  {got.per_second:10.1f}  {floor.per_second:11.1f}"
            f"  {got.per_second / floor.per_second:5.2f}"
            f"  {got.p50_ms:7.1f}ms {floor.p50_ms:8.1f}ms  {got.p95_ms:7.1f}ms {floor.p95_ms:8.1f}ms"
            f"  {got.p95_ms / floor.p95_ms:9.2f}  {got.failed + floor.failed:6d}"
        )
        if got.failed or floor.failed:
            problems.append(f"{name} at {level}: {got.failed} app and {floor.failed} floor requests failed")
    return problems


def _postgres_database(admin_url: str) -> tuple[str, str]:
    """A fresh database on the server: its URL and name (dropped by ``_drop``)."""
    name = f"bench_http_{uuid.uuid4().hex[:8]}"
    engine = create_engine(admin_url, isolation_level="AUTOCOMMIT")
    with engine.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    engine.dispose()
    return make_url(admin_url).set(database=name).render_as_string(hide_password=False), name


def _drop(admin_url: str, name: str) -> None:
    engine = create_engine(admin_url, isolation_level="AUTOCOMMIT")
    with engine.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
    engine.dispose()


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0] if __doc__ else None)
    parser.add_argument("--seconds", type=float, default=10.0, help="length of each wrk run (default 10)")
    parser.add_argument("--concurrency", default="1,10,20", help="technicians at once (default 1,10,20)")
    parser.add_argument("--backend", choices=("sqlite", "postgresql", "both"), default="both")
    parser.add_argument("--repeat", type=int, default=1, help="runs of each level, one after the other")
    parser.add_argument("--smoke", action="store_true", help="CI smoke run: 2 s at 1 and 4 technicians")
    args = parser.parse_args()
    levels = [1, 4] if args.smoke else [int(x) for x in args.concurrency.split(",")]
    seconds = 2.0 if args.smoke else args.seconds
    problems: list[str] = []
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        if args.backend in ("sqlite", "both"):
            problems += bench_backend(
                "SQLite", f"sqlite:///{folder / 'bench.sqlite3'}", levels, seconds, folder, args.repeat
            )
        admin_url = os.environ.get(PG_ENV)
        if args.backend in ("postgresql", "both") and admin_url:
            url, name = _postgres_database(admin_url)
            try:
                problems += bench_backend("PostgreSQL", url, levels, seconds, folder, args.repeat)
            finally:
                _drop(admin_url, name)
        elif args.backend == "postgresql":
            raise SystemExit(f"{PG_ENV} is not set")
    for line in problems:
        print(f"  ✖ {line}")
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
