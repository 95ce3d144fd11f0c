"""Benchmark of concurrent saves at the bench on SQLite: many technicians saving at once through a
real server, counting every 5xx and checking that every acknowledged save is stored.

Run from the repository root::

    python tests/benchmarks/bench_concurrent_saves.py [--savers 20] [--seconds 20] [--workers 1]
    python tests/benchmarks/bench_concurrent_saves.py --smoke      # CI: 20 savers for 3 s

Set-up (not timed): a throw-away SQLite database, migrated and seeded through the services with
one technician per saver and a job whose samples carry one Atterberg test per saver; then a real
uvicorn server (``python -m uvicorn server.main:create_app --factory``, ``--workers`` processes)
on a free loopback port, configured through the environment as a laboratory's server is.

Each saver, in a thread of its own with its own cookies, signs in through the sign-in form, opens
its test's bench page (the CSRF token, the version, the stored values), and then until the time
is up saves one field of its own sheet (the natural water content's tare mass) as ``static/bench.js``
does: ``POST /tests/{id}/fields`` with the new value and the value last stored there (its base).
A 503 is the server's "busy, retry" (``server/web/busy.py``): the saver waits ``Retry-After``
and sends the same value again, as the page does.

It prints the acknowledged saves a second, the latency of every answer (p50, p95, p99), and the
count of each status. Then, with the server stopped, it checks the database: each test's version
went up once per acknowledged save, its audit trail holds one readings event per acknowledged
save, and the field holds the last value acknowledged. It exits 1 on any 5xx other than 503, on
a request that got no answer, or on an acknowledged save that is not stored. Client and server
share the machine's cores: compare runs on one machine, never absolute figures across machines.
Not collected by pytest.
"""

from __future__ import annotations

import argparse
import json
import os
import re
import socket
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import httpx  # noqa: E402
from sqlmodel import col, func, select  # noqa: E402

from server.db.migrate import upgrade  # noqa: E402
from server.db.session import Database  # noqa: E402
from server.db.tables import AuditEvent, LabTest  # noqa: E402
from server.services import jobs, samples  # noqa: E402
from server.services.users import create_user  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
PASSWORD = "bench-saver-password"
FIELD = "water_content.determinations.0.tare_g"
CSRF = re.compile(r'name="csrf_token" value="([^"]+)"')
VERSION = re.compile(r'name="version" value="(\d+)"')
STORED = re.compile(r'<script type="application/json" id="stored-values">(.*?)</script>', re.S)


def seed(url: str, savers: int) -> list[int]:
    """Migrate, then one technician and one Atterberg test per saver; the tests' ids."""
    upgrade(url)
    db = Database(url)
    admin = create_user(db, None, "admin", "Bench Admin", "admin", PASSWORD)
    for n in range(savers):
        create_user(db, None, f"tech{n:02d}", f"Bench Technician {n:02d}", "technician", PASSWORD)
    client = jobs.create_client(db, admin, "Benchmark Client")
    job = jobs.create_job(db, admin, client.id or 0, "BENCH-SAVE", "Concurrent saves", "Nowhere")
    location = samples.add_location(db, admin, job.id or 0, "BH1")
    ids = []
    for n in range(savers):
        sample = samples.add_sample(
            db,
            admin,
            location.id or 0,
            f"BH1-S{n + 1:02d}",
            n + 0.5,
            n + 0.95,
            "U100",
            "Firm CLAY (fictional)",
        )
        (test,) = jobs.request_tests(db, admin, [sample.id or 0], ["atterberg"])
        ids.append(test.id or 0)
    db.dispose()
    return ids


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def start_server(folder: Path, url: str, port: int, workers: int) -> subprocess.Popen[bytes]:
    """The app under uvicorn, configured through the environment as a laboratory's server is."""
    env = {
        "DATABASE_URL": url,
        "CLAYBENCH_DATA_DIR": str(folder / "data"),
        "CLAYBENCH_SECRET_KEY": "b" * 48,
        "CLAYBENCH_PUBLIC_BASE_URL": f"http://127.0.0.1:{port}",
    }
    return start_uvicorn(folder, "server.main:create_app", env, port, workers)


def start_uvicorn(
    folder: Path, factory: str, env: dict[str, str], port: int, workers: int = 1, name: str = "server"
) -> subprocess.Popen[bytes]:
    """An app factory under uvicorn on a loopback port (no access log), once /healthz answers;
    its output goes to ``folder / f"{name}.log"``."""
    command = [sys.executable, "-m", "uvicorn", factory, "--factory", "--host", "127.0.0.1"]
    command += ["--port", str(port), "--workers", str(workers), "--log-level", "warning", "--no-access-log"]
    return start_command(folder, command, env, port, name)


def start_serve(folder: Path, env: dict[str, str], port: int) -> subprocess.Popen[bytes]:
    """The app as a laboratory runs it (``claybench serve``, no worker, no metrics port)."""
    command = [sys.executable, "-m", "server.cli", "serve", "--no-worker", "--port", str(port)]
    return start_command(folder, command, {"CLAYBENCH_METRICS_PORT": "0", **env}, port, "serve")


def start_command(
    folder: Path, command: list[str], env: dict[str, str], port: int, name: str
) -> subprocess.Popen[bytes]:
    """A server command on a loopback port, once /healthz answers; output to ``{name}.log``."""
    log_path = folder / f"{name}.log"
    server = subprocess.Popen(
        command, cwd=ROOT, env={**os.environ, **env}, stdout=log_path.open("wb"), stderr=subprocess.STDOUT
    )
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        if server.poll() is not None:
            raise SystemExit(f"the {name} stopped while starting:\n{log_path.read_text()}")
        try:
            if httpx.get(f"http://127.0.0.1:{port}/healthz", timeout=2).status_code == 200:
                return server
        except httpx.HTTPError:
            time.sleep(0.1)
    server.terminate()
    raise SystemExit(f"the {name} did not answer /healthz within 30 s")


@dataclass
class Saver:
    """One technician at their own sheet: what they were told, and how long each answer took."""

    username: str
    test_id: int
    acknowledged: int = 0
    last_value: str = ""
    statuses: Counter[int] = field(default_factory=Counter)
    latencies: list[float] = field(default_factory=list)
    no_answer: int = 0
    problems: list[str] = field(default_factory=list)


def open_sheet(http: httpx.Client, saver: Saver) -> tuple[str, int, str]:
    """Sign in through the form and open the bench page: its CSRF token, the test's version and
    the stored value of the field."""
    page = http.get("/signin")
    token = CSRF.search(page.text)
    assert token, "the sign-in page has no CSRF token"
    reply = http.post(
        "/signin",
        data={"username": saver.username, "password": PASSWORD, "csrf_token": token.group(1), "next": "/"},
    )
    if reply.status_code != 303:
        raise RuntimeError(f"{saver.username} could not sign in: {reply.status_code}")
    sheet = http.get(f"/tests/{saver.test_id}")
    found = CSRF.search(sheet.text), VERSION.search(sheet.text), STORED.search(sheet.text)
    if sheet.status_code != 200 or not all(found):
        raise RuntimeError(f"the bench page of test {saver.test_id} answered {sheet.status_code}")
    csrf, version, stored = found
    assert csrf and version and stored
    return csrf.group(1), int(version.group(1)), str(json.loads(stored.group(1)).get(FIELD, ""))


def save_until(base_url: str, saver: Saver, start: threading.Barrier, stop_at: list[float]) -> None:
    """Save the field again and again with a new value each time, until the time is up."""
    with httpx.Client(base_url=base_url, timeout=30) as http:
        try:
            csrf, version, base = open_sheet(http, saver)
        except (RuntimeError, httpx.HTTPError) as exc:
            saver.problems.append(f"could not start: {exc}")
            start.abort()  # every saver starts together, or none does
            return
        try:
            start.wait()
        except threading.BrokenBarrierError:  # another saver could not start
            return
        n = 0
        while time.monotonic() < stop_at[0]:
            value = f"{10 + (n % 900) / 100:.2f}"  # 10.00 .. 18.99 g, a new value every save
            body = {"changes": [{"path": FIELD, "value": value, "base": base}]}
            began = time.perf_counter()
            try:
                reply = http.post(
                    f"/tests/{saver.test_id}/fields",
                    json=body,
                    headers={"X-CSRF-Token": csrf, "HX-Request": "true"},
                )
            except httpx.HTTPError as exc:
                saver.no_answer += 1
                saver.problems.append(f"no answer: {exc!r}")
                continue
            saver.latencies.append(time.perf_counter() - began)
            saver.statuses[reply.status_code] += 1
            if reply.status_code == 200:
                saved = reply.json()
                if saved["version"] != version + 1:  # own sheet: nobody else moves its version
                    saver.problems.append(f"version {version} became {saved['version']}")
                version, base = saved["version"], saved["values"][FIELD]
                saver.acknowledged += 1
                saver.last_value = base
                n += 1
            elif reply.status_code == 503:
                time.sleep(float(reply.headers.get("retry-after", "1")))  # the same value again
            else:
                saver.problems.append(f"{reply.status_code}: {reply.text[:300]}")
                if reply.status_code < 500:
                    return  # a refusal would repeat; the check below reports it


def stored_value(readings: dict[str, object]) -> object:
    """The saved field's value in a test's readings ("" when not there)."""
    node: object = readings
    for key in FIELD.split("."):
        if isinstance(node, dict):
            node = node.get(key, "")
        elif isinstance(node, list) and key.isdigit() and int(key) < len(node):
            node = node[int(key)]
        else:
            return ""
    return node


def stored_check(url: str, savers: list[Saver]) -> list[str]:
    """Every acknowledged save stored: one version step and one audit event each, the last value kept."""
    db = Database(url)
    lost = []
    with db.session() as s:
        for saver in savers:
            test = s.get(LabTest, saver.test_id)
            assert test is not None
            events = s.exec(
                select(func.count()).where(
                    col(AuditEvent.entity) == "lab_test",
                    col(AuditEvent.entity_id) == saver.test_id,
                    col(AuditEvent.action) == "readings",
                )
            ).one()
            kept = stored_value(test.readings or {})
            if saver.acknowledged and (test.version - 1, events, kept) != (
                saver.acknowledged,
                saver.acknowledged,
                saver.last_value,
            ):
                lost.append(
                    f"test {saver.test_id}: {saver.acknowledged} saves acknowledged, version {test.version}, "
                    f"{events} audit events, stored {kept!r} (last acknowledged {saver.last_value!r})"
                )
    db.dispose()
    return lost


def percentile(values: list[float], q: float) -> float:
    return statistics.quantiles(values, n=100, method="inclusive")[q - 1] if len(values) > 1 else values[0]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0] if __doc__ else None)
    parser.add_argument("--savers", type=int, default=20, help="concurrent savers (default 20)")
    parser.add_argument("--seconds", type=float, default=20.0, help="how long they save (default 20)")
    parser.add_argument("--workers", type=int, default=1, help="uvicorn worker processes (default 1)")
    parser.add_argument("--smoke", action="store_true", help="CI smoke run: 3 s")
    args = parser.parse_args()
    seconds = 3.0 if args.smoke else args.seconds
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        url = f"sqlite:///{folder / 'bench.sqlite3'}"
        ids = seed(url, args.savers)
        port = free_port()
        server = start_server(folder, url, port, args.workers)
        savers = [Saver(f"tech{n:02d}", test_id) for n, test_id in enumerate(ids)]
        start = threading.Barrier(args.savers + 1)
        stop_at = [float("inf")]
        threads = [
            threading.Thread(target=save_until, args=(f"http://127.0.0.1:{port}", s, start, stop_at))
            for s in savers
        ]
        try:
            for thread in threads:
                thread.start()
            try:
                start.wait(timeout=120)
            except threading.BrokenBarrierError:
                for thread in threads:
                    thread.join()
                print("\n".join(p for s in savers for p in s.problems) or "the savers did not start")
                return 1
            began = time.monotonic()
            stop_at[0] = began + seconds
            for thread in threads:
                thread.join()
            elapsed = time.monotonic() - began
        finally:
            server.terminate()
            server.wait(timeout=30)
        log = (folder / "server.log").read_text(errors="replace")
        lost = stored_check(url, savers)
    statuses: Counter[int] = sum((s.statuses for s in savers), Counter())
    latencies = sorted(x for s in savers for x in s.latencies)
    saves = sum(s.acknowledged for s in savers)
    no_answer = sum(s.no_answer for s in savers)
    errors = sum(n for status, n in statuses.items() if status >= 500 and status != 503)
    print(f"{args.savers} savers, one Atterberg sheet each, {elapsed:.1f} s, {args.workers} worker(s)")
    print(f"  acknowledged saves   {saves:8d}   {saves / elapsed:8.1f} saves/s")
    if latencies:
        print(
            f"  latency of answers   p50 {1000 * percentile(latencies, 50):7.1f} ms   "
            f"p95 {1000 * percentile(latencies, 95):7.1f} ms   "
            f"p99 {1000 * percentile(latencies, 99):7.1f} ms   max {1000 * latencies[-1]:7.1f} ms"
        )
    print(f"  answers by status    {dict(sorted(statuses.items()))}")
    print(f"  5xx (not 503)        {errors:8d}")
    print(f"  503 busy, retried    {statuses.get(503, 0):8d}")
    print(f"  no answer            {no_answer:8d}")
    print(f"  saves not stored     {len(lost):8d}")
    for line in [p for s in savers for p in s.problems][:5] + lost[:5]:
        print(f"    {line}")
    if errors and log.strip():
        print("server log (last 3000 characters):\n" + log[-3000:])
    problems = [p for s in savers for p in s.problems]
    return 1 if errors or no_answer or lost or problems or not saves else 0


if __name__ == "__main__":
    sys.exit(main())
