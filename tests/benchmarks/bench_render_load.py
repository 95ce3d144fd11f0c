"""Benchmark: bench saves while a big report renders, against the same saves at rest.

Run from the repository root::

    python tests/benchmarks/bench_render_load.py [--samples 60] [--technicians 10] [--seconds 10]
    python tests/benchmarks/bench_render_load.py --smoke     # CI: 6 samples, 4 technicians, 2 s

On one database (SQLite, and PostgreSQL when CLAYBENCH_TEST_POSTGRES_URL is set) it builds a
fictional job of ``--samples`` approved samples (``bench_reports.build_job``) and one Atterberg
sheet per technician, starts the app under uvicorn and a render worker (``claybench worker``)
as a laboratory runs them, and drives the technicians' saves with wrk (one connection each, one
field per request, ``bench_http``'s script): first at rest, then while the worker renders the
job's report, issued through the page as a reviewer does. It prints both p95s and their ratio;
the target is 1.5 or less (the render runs in another process, so the web process's
interpreter stays free). The render must still be running when the second window closes, or
the figure covers less than a whole window of rendering (said in the output).
Not collected by pytest; compare ratios from one run, never absolute times across runs.
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import httpx

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from sqlmodel import col, select  # noqa: E402

from server.db.migrate import upgrade  # noqa: E402
from server.db.session import Database  # noqa: E402
from server.db.tables import ReportRender, User  # noqa: E402
from server.services import jobs, samples  # noqa: E402
from server.services.users import create_user  # noqa: E402
from tests.benchmarks.bench_concurrent_saves import PASSWORD as SAVER_PASSWORD  # noqa: E402
from tests.benchmarks.bench_concurrent_saves import ROOT, Saver, free_port, start_server  # noqa: E402
from tests.benchmarks.bench_http import PG_ENV, _drop, _postgres_database, signed_in, wrk  # noqa: E402
from tests.benchmarks.bench_reports import PASSWORD, build_job  # noqa: E402

TARGET = 1.5
CSRF = re.compile(r'name="csrf_token" value="([^"]+)"')
SAVE_PATH = "function(p) return '/tests/' .. p.test .. '/fields' end"


def sheets(db: Database, registrar: User, job_id: int, technicians: int) -> list[int]:
    """One technician and one fresh Atterberg sheet each, on another borehole of the same job."""
    location = samples.add_location(db, registrar, job_id, "BH-SAVE")
    ids = []
    for n in range(technicians):
        create_user(db, None, f"tech{n:02d}", f"Bench Technician {n:02d}", "technician", SAVER_PASSWORD)
        sample = samples.add_sample(
            db,
            registrar,
            location.id or 0,
            f"BH-SAVE-S{n + 1:02d}",
            n + 0.5,
            n + 0.95,
            "U100",
            "CLAY (fictional)",
        )
        (test,) = jobs.request_tests(db, registrar, [sample.id or 0], ["atterberg"])
        ids.append(test.id or 0)
    return ids


def start_worker(folder: Path, url: str) -> subprocess.Popen[bytes]:
    env = {**os.environ, "DATABASE_URL": url, "CLAYBENCH_DATA_DIR": str(folder / "data")}
    log = (folder / "worker.log").open("wb")
    return subprocess.Popen(
        [sys.executable, "-m", "server.cli", "worker"],
        cwd=ROOT,
        env=env,
        stdout=log,
        stderr=subprocess.STDOUT,
    )


def issue(base_url: str, job_id: int) -> None:
    """Sign in as the reviewer and issue the job's report through the page (queued at once)."""
    with httpx.Client(base_url=base_url, timeout=60, follow_redirects=True) as http:
        page = http.get("/signin")
        token = CSRF.search(page.text)
        assert token, "no CSRF token on the sign-in page"
        http.post("/signin", data={"username": "review", "password": PASSWORD, "csrf_token": token.group(1)})
        job = http.get(f"/jobs/{job_id}")
        token = CSRF.search(job.text)
        assert token, f"no CSRF token on the job page ({job.status_code})"
        done = http.post(
            f"/jobs/{job_id}/reports",
            data={"choice": "all", "password": PASSWORD, "csrf_token": token.group(1)},
            headers={"origin": base_url},
        )
        assert "It is being rendered" in done.text, done.text[:500]


def render_status(db: Database) -> str:
    with db.session() as s:
        newest = select(ReportRender.status).order_by(col(ReportRender.id).desc())
        return s.exec(newest).first() or "none"


def wait_for(db: Database, wanted: set[str], limit_s: float) -> str:
    deadline = time.monotonic() + limit_s
    while time.monotonic() < deadline:
        status = render_status(db)
        if status in wanted:
            return status
        time.sleep(0.05)
    return render_status(db)


def bench(name: str, url: str, n_samples: int, technicians: int, seconds: float, folder: Path) -> list[str]:
    upgrade(url)
    db = Database(url)
    job_id, reviewer = build_job(db, n_samples, seed=20261204)
    ids = sheets(db, reviewer, job_id, technicians)
    savers = [Saver(f"tech{n:02d}", test_id) for n, test_id in enumerate(ids)]
    port = free_port()
    base = f"http://127.0.0.1:{port}"
    app = start_server(folder, url, port, 1)
    worker = start_worker(folder, url)
    problems: list[str] = []
    try:
        people = signed_in(base, savers)
        rest = wrk(base, people, SAVE_PATH, seconds, folder)
        people = signed_in(base, savers)  # fresh base values after the first window
        started = time.monotonic()
        issue(base, job_id)
        opened = wait_for(db, {"rendering", "done", "failed"}, 60)
        during = wrk(base, people, SAVE_PATH, seconds, folder)
        still = render_status(db)
        finished = wait_for(db, {"done", "failed"}, 900)
        render_s = time.monotonic() - started
    finally:
        worker.terminate()
        app.terminate()
        worker.wait(30)
        app.wait(30)
        db.dispose()
    ratio = during.p95_ms / rest.p95_ms
    print(f"\n{name}: {technicians} technicians saving, {seconds:g} s windows, a {n_samples}-sample report")
    print("              saves/s    p50       p95     failed")
    for label, got in (("at rest  ", rest), ("rendering", during)):
        print(f"  {label} {got.per_second:9.1f} {got.p50_ms:7.1f}ms {got.p95_ms:7.1f}ms {got.failed:6d}")
    print(
        f"  p95 ratio {ratio:.2f} (target {TARGET:g} or less); the render took {render_s:.1f} s: {finished}"
    )
    if opened != "rendering" or still != "rendering":
        print("  note: the render did not cover the whole window; the window is only partly under load")
    if finished != "done":
        problems.append(f"{name}: the render ended {finished}")
    if rest.failed or during.failed:
        problems.append(f"{name}: {rest.failed + during.failed} saves failed")
    return problems


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0] if __doc__ else None)
    parser.add_argument("--samples", type=int, default=60)
    parser.add_argument("--technicians", type=int, default=10)
    parser.add_argument("--seconds", type=float, default=10.0)
    parser.add_argument("--backend", choices=("sqlite", "postgresql", "both"), default="both")
    parser.add_argument("--smoke", action="store_true", help="CI: 6 samples, 4 technicians, 2 s windows")
    args = parser.parse_args()
    if args.smoke:
        args.samples, args.technicians, args.seconds = 6, 4, 2.0
    problems: list[str] = []
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        if args.backend in ("sqlite", "both"):
            url = f"sqlite:///{folder / 'render-load.sqlite3'}"
            problems += bench("SQLite", url, args.samples, args.technicians, args.seconds, folder)
        admin_url = os.environ.get(PG_ENV)
        if args.backend in ("postgresql", "both") and admin_url:
            url, name = _postgres_database(admin_url)
            try:
                problems += bench("PostgreSQL", url, args.samples, args.technicians, args.seconds, folder)
            finally:
                _drop(admin_url, name)
    for line in problems:
        print(f"  ✖ {line}")
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
