"""Benchmark of the pages of a big laboratory: each page's p50 and p95 against a trivial GET on
the same server, measured in the same run (issue S11 point 3; target p95 under 100 ms a page).

Run from the repository root with the PostgreSQL dev server of ``/tmp/pgenv``::

    python tests/benchmarks/build_big_lab.py              # once: claybench_big (about 1.5 min)
    python tests/benchmarks/bench_big_lab.py              # 30 timed GETs a page after 3 warm-ups
    python tests/benchmarks/bench_big_lab.py --smoke      # CI: a tiny lab (scale 0.001) built
                                                          # on a fresh database, 3 GETs a page

Set-up (not timed): the big database is left as ``build_big_lab.py`` made it (``--build`` makes
it first, at ``--scale``); a real uvicorn server (``start_serve`` of
``bench_concurrent_saves.py``: ``claybench serve``, no render worker) on a free loopback port against it,
configured through the environment as a laboratory's server is. The admin of the generated lab
signs in through the sign-in form; an API token is made for them with ``services.tokens``.

Then each page in turn, one request at a time: the warm-ups, then the timed GETs, each checked
to answer 200. The pages: the jobs list (first, a later and the last page), the job page of the
1,000-sample job (and its last page of samples), the review desk (and a later page), the audit
pages (the newest events, an older page of them, and the trail of the big job), the turnaround
page, and the API v1 lists (jobs, a later page by cursor, tests, the big job's samples). The
floor is ``/healthz`` (no database), timed the same way between the pages, so that a slow
moment of the shared machine shows in both. It prints p50 and p95 per page, the ratio of each to
the floor's, and whether p95 is within the target; it exits 1 on any answer other than 200.
Client and server share the machine's cores: compare the ratios of one run. Not collected by
pytest.
"""

from __future__ import annotations

import argparse
import os
import re
import statistics
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import httpx  # noqa: E402
from sqlalchemy.engine import make_url  # noqa: E402
from sqlmodel import col, func, select  # noqa: E402

from server.db.session import Database  # noqa: E402
from server.db.tables import AuditEvent, Job, Sample, User  # noqa: E402
from server.services import tokens  # noqa: E402
from tests.benchmarks.bench_concurrent_saves import free_port, start_serve  # noqa: E402
from tests.benchmarks.build_big_lab import (  # noqa: E402
    BIG_JOB,
    DATABASE,
    PASSWORD,
    PG_ENV,
    build,
    drop_database,
)

TARGET_MS = 100.0
CSRF = re.compile(r'name="csrf_token" value="([^"]+)"')


@dataclass
class Timing:
    path: str
    p50_ms: float
    p95_ms: float
    statuses: set[int]


def _percentile(values: list[float], q: float) -> float:
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, max(0, round(q * (len(ordered) - 1))))]


def timed(
    http: httpx.Client, path: str, warmup: int, repeat: int, headers: dict[str, str] | None = None
) -> Timing:
    statuses: set[int] = set()
    for _ in range(warmup):
        statuses.add(http.get(path, headers=headers).status_code)
    took: list[float] = []
    for _ in range(repeat):
        began = time.perf_counter()
        reply = http.get(path, headers=headers)
        took.append((time.perf_counter() - began) * 1000)
        statuses.add(reply.status_code)
    return Timing(path, statistics.median(took), _percentile(took, 0.95), statuses)


def sign_in(http: httpx.Client, username: str) -> None:
    token = CSRF.search(http.get("/signin").text)
    assert token, "the sign-in page has no CSRF token"
    reply = http.post(
        "/signin",
        data={"username": username, "password": PASSWORD, "csrf_token": token.group(1), "next": "/"},
    )
    if reply.status_code != 303:
        raise SystemExit(f"{username} could not sign in: {reply.status_code}")


def targets(url: str) -> tuple[list[str], list[str], str]:
    """The pages and API lists to time, with the ids of the big lab; and an API token."""
    db = Database(url)
    with db.session() as s:
        big = (
            s.exec(select(Job).where(Job.code == BIG_JOB)).first()
            or s.exec(
                select(Job)
                .join(Sample, col(Sample.job_id) == col(Job.id))
                .group_by(col(Job.id))
                .order_by(func.count().desc())
            ).first()
        )
        assert big is not None, "the lab has no job: build it first"
        jobs = int(s.exec(select(func.count()).select_from(Job)).one())
        newest = int(s.exec(select(func.max(AuditEvent.id))).one() or 0)
        admin = s.exec(select(User).where(User.username == "big-admin")).one()
    made = tokens.create_token(db, admin, admin, f"bench {time.time():.0f}", "read", 1)
    db.dispose()
    last_jobs_page = max(1, -(-jobs // 50))
    pages = [
        "/jobs",
        "/jobs?page=2",
        f"/jobs?page={last_jobs_page}",
        "/jobs?status=overdue",
        f"/jobs/{big.id}",
        f"/jobs/{big.id}?samples=10",
        "/review",
        "/review?page=3",
        "/audit",
        f"/audit?before={max(1, newest - 500_000)}",
        f"/jobs/{big.id}/trail",
        "/turnaround",
    ]
    api = ["/api/v1/jobs", "/api/v1/jobs?cursor=MTAwMA", "/api/v1/tests", f"/api/v1/jobs/{big.id}/samples"]
    return pages, api, made.plaintext


def bench(url: str, warmup: int, repeat: int) -> int:
    pages, api, token = targets(url)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        port = free_port()
        env = {
            "DATABASE_URL": url,
            "CLAYBENCH_DATA_DIR": str(folder / "data"),
            "CLAYBENCH_SECRET_KEY": "b" * 48,
            "CLAYBENCH_PUBLIC_BASE_URL": f"http://127.0.0.1:{port}",
            "CLAYBENCH_API_RATE_LIMIT": "100000/minute",
        }
        server = start_serve(folder, env, port)  # as a lab runs it: claybench serve
        try:
            with httpx.Client(base_url=f"http://127.0.0.1:{port}", timeout=60) as http:
                sign_in(http, "big-admin")
                auth = {"Authorization": f"Bearer {token}"}
                rows: list[tuple[Timing, Timing]] = []
                for path in [*pages, *api]:
                    page = timed(http, path, warmup, repeat, auth if path.startswith("/api/") else None)
                    floor = timed(http, "/healthz", warmup, repeat)
                    rows.append((page, floor))
        finally:
            server.terminate()
            server.wait(timeout=30)
    floor_p50 = statistics.median(f.p50_ms for _, f in rows)
    floor_p95 = statistics.median(f.p95_ms for _, f in rows)
    print(
        f"\n{repeat} GETs a page after {warmup} warm-ups;"
        f" floor /healthz p50 {floor_p50:.1f} ms, p95 {floor_p95:.1f} ms"
    )
    print(f"  {'page':<40} {'p50':>8} {'p95':>8} {'p50/floor':>10} {'p95/floor':>10}  target")
    failed = []
    for page, floor in rows:
        ok = "✔" if page.p95_ms < TARGET_MS else "✖"
        print(
            f"  {page.path[:40]:<40} {page.p50_ms:7.1f}ms {page.p95_ms:7.1f}ms"
            f" {page.p50_ms / floor.p50_ms:10.1f} {page.p95_ms / floor.p95_ms:10.1f}"
            f"  {ok} p95 < {TARGET_MS:.0f} ms"
        )
        if page.statuses != {200}:
            failed.append(f"{page.path} answered {sorted(page.statuses)}")
    for line in failed:
        print(f"  ✖ {line}")
    return 1 if failed else 0


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0] if __doc__ else None)
    parser.add_argument("--database", default=DATABASE, help=f"the built lab's database (default {DATABASE})")
    parser.add_argument("--build", action="store_true", help="build the lab first (build_big_lab.py)")
    parser.add_argument("--scale", type=float, default=1.0, help="with --build: the lab's size (default 1)")
    parser.add_argument("--repeat", type=int, default=30, help="timed GETs a page (default 30)")
    parser.add_argument("--warmup", type=int, default=3, help="untimed GETs first (default 3)")
    parser.add_argument(
        "--smoke", action="store_true", help="CI: a tiny lab on a fresh database, 3 GETs a page"
    )
    args = parser.parse_args()
    admin_url = os.environ.get(PG_ENV)
    if not admin_url:
        raise SystemExit(f"{PG_ENV} is not set: source /tmp/pgenv first")
    if args.smoke:
        name = f"{args.database}_smoke"
        build(admin_url, database=name, scale=0.001)
        try:
            return bench(make_url(admin_url).set(database=name).render_as_string(hide_password=False), 1, 3)
        finally:
            drop_database(admin_url, name)
    if args.build:
        build(admin_url, database=args.database, scale=args.scale)
    url = make_url(admin_url).set(database=args.database).render_as_string(hide_password=False)
    return bench(url, args.warmup, args.repeat)


if __name__ == "__main__":
    sys.exit(main())
