"""The claybench command, run as a real process (as a laboratory's scripts would run it)."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest
from fastapi.testclient import TestClient
from sqlmodel import select

from server.db.session import Database
from server.db.tables import AuditEvent, LabTest, Report, User
from tests.support.bad_inputs import BAD_ATTERBERG
from tests.support.scenario import ATTERBERG


def claybench(
    *args: str, stdin: str = "", env: dict[str, str] | None = None
) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "-m", "server.cli", *args],
        input=stdin,
        capture_output=True,
        text=True,
        env={**os.environ, **(env or {})},
        timeout=120,
        check=False,
    )


def test_calc_gives_the_same_answer_as_the_api(app_client: TestClient) -> None:
    request = {"method": "atterberg", "readings": ATTERBERG}
    done = claybench("calc", stdin=json.dumps(request))
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout) == app_client.post("/api/v1/calculations", json=request).json()


def test_calc_reads_the_request_from_a_file(tmp_path: Path) -> None:
    path = tmp_path / "request.json"
    path.write_text(json.dumps({"method": "atterberg", "readings": ATTERBERG}))
    done = claybench("calc", str(path))
    assert done.returncode == 0
    assert json.loads(done.stdout)["results"]["uscs_symbol"] == "CL"  # ASTM D2487 Fig. 4, LL 40 PI 19


@pytest.mark.parametrize("case", sorted(BAD_ATTERBERG))
def test_calc_refuses_bad_readings_with_exit_status_2(case: str) -> None:
    readings, path, _ = BAD_ATTERBERG[case]
    done = claybench("calc", stdin=json.dumps({"method": "atterberg", "readings": readings}))
    assert done.returncode == 2
    assert ["readings", *path] in [e["loc"] for e in json.loads(done.stdout)["detail"]]


def test_calc_refuses_text_that_is_not_json() -> None:
    done = claybench("calc", stdin="{not json")
    assert done.returncode == 2
    assert json.loads(done.stdout)["detail"][0]["loc"] == ["body"]


def test_migrate_and_create_user_work_on_the_configured_database(tmp_path: Path) -> None:
    url = f"sqlite:///{tmp_path / 'cli.sqlite3'}"
    env = {"DATABASE_URL": url, "CLAYBENCH_DATA_DIR": str(tmp_path)}
    assert claybench("migrate", env=env).returncode == 0
    made = claybench(
        "create-user",
        "Lab.Admin",
        "--role",
        "admin",
        "--full-name",
        "Lab Admin",
        env={**env, "CLAYBENCH_NEW_PASSWORD": "a-long-password"},
    )
    assert made.returncode == 0, made.stderr
    refused = claybench(
        "create-user", "shorty", "--role", "admin", env={**env, "CLAYBENCH_NEW_PASSWORD": "short"}
    )
    assert refused.returncode == 2 and "at least" in refused.stderr
    db = Database(url)
    with db.session() as s:
        users = s.exec(select(User)).all()
        events = s.exec(select(AuditEvent).where(AuditEvent.entity == "user")).all()
    db.dispose()
    assert [(u.username, u.role) for u in users] == [("lab.admin", "admin")]
    assert len(events) == 1 and "password" not in json.dumps(events[0].after)


@pytest.fixture(scope="module")
def demo_folder(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, subprocess.CompletedProcess[str]]:
    """One demo built by a real ``claybench demo --no-serve`` (about 15 s), shared by the demo tests."""
    folder = tmp_path_factory.mktemp("demo")
    return folder, claybench("demo", "--no-serve", env=_demo_env(folder))


def _demo_env(folder: Path) -> dict[str, str]:
    return {"CLAYBENCH_DATA_DIR": str(folder), "DATABASE_URL": ""}


def _demo_db(folder: Path) -> Database:
    return Database(f"sqlite:///{folder / 'claybench.sqlite3'}")


def test_demo_loads_the_fictional_job_without_serving(
    demo_folder: tuple[Path, subprocess.CompletedProcess[str]],
) -> None:
    folder, done = demo_folder
    assert done.returncode == 0, done.stderr
    assert "/share/" in done.stdout and "bench-demo-2026" in done.stdout
    db = _demo_db(folder)
    with db.session() as s:
        seen = set(s.exec(select(LabTest.status)).all())
        reports = s.exec(select(Report.number)).all()
    db.dispose()
    assert reports == ["SMW-2611-R01"]
    assert {"requested", "draft", "submitted", "returned", "approved"} <= seen


def test_demo_says_each_step_while_it_builds(
    demo_folder: tuple[Path, subprocess.CompletedProcess[str]],
) -> None:
    _, done = demo_folder
    steps = [line for line in done.stderr.splitlines() if line.startswith("claybench demo: ")]
    assert len(steps) >= 8, done.stderr  # schema, users, registers, three holes, report tests, ...
    assert any("issuing the report" in line for line in steps)
    assert done.stdout.index("Claybench demo is ready") == 0  # the steps stay off the summary


def test_demo_keeps_an_existing_demo_and_the_work_done_in_it(
    demo_folder: tuple[Path, subprocess.CompletedProcess[str]],
) -> None:
    folder, _ = demo_folder
    env = _demo_env(folder)
    made = claybench(
        "create-user",
        "own.work",
        "--role",
        "technician",
        env={**env, "CLAYBENCH_NEW_PASSWORD": "a-long-password"},
    )
    assert made.returncode == 0, made.stderr
    for flags in ((), ("--keep",)):  # --keep, the old way to ask for this, still runs
        again = claybench("demo", "--no-serve", *flags, env=env)
        assert again.returncode == 0, again.stderr
        assert "kept as it was" in again.stdout and "SMW-2611-R01" in again.stdout
    db = _demo_db(folder)
    with db.session() as s:
        assert s.exec(select(User).where(User.username == "own.work")).one()
        assert s.exec(select(Report.number)).all() == ["SMW-2611-R01"]  # nothing loaded twice
    db.dispose()


def test_demo_refuses_a_database_that_holds_other_work(tmp_path: Path) -> None:
    env = _demo_env(tmp_path)
    assert claybench("migrate", env=env).returncode == 0
    made = claybench(
        "create-user", "lab.own", "--role", "admin", env={**env, "CLAYBENCH_NEW_PASSWORD": "a-long-password"}
    )
    assert made.returncode == 0, made.stderr
    done = claybench("demo", "--no-serve", env=env)
    assert done.returncode != 0 and "not the demo" in done.stderr
    db = _demo_db(tmp_path)
    with db.session() as s:
        assert [u.username for u in s.exec(select(User)).all()] == ["lab.own"]
    db.dispose()


def test_demo_fresh_starts_again_from_an_empty_database(tmp_path: Path) -> None:
    env = _demo_env(tmp_path)
    assert claybench("migrate", env=env).returncode == 0
    made = claybench(
        "create-user", "lab.own", "--role", "admin", env={**env, "CLAYBENCH_NEW_PASSWORD": "a-long-password"}
    )
    assert made.returncode == 0, made.stderr
    done = claybench("demo", "--no-serve", "--fresh", env=env)
    assert done.returncode == 0, done.stderr
    db = _demo_db(tmp_path)
    with db.session() as s:
        names = {u.username for u in s.exec(select(User)).all()}
    db.dispose()
    assert "lab.own" not in names and {"tech", "review", "admin"} <= names


def test_demo_prints_the_address_it_really_serves_on(
    demo_folder: tuple[Path, subprocess.CompletedProcess[str]],
) -> None:
    """Port 0 lets the system choose: the printed address must be the port really bound."""
    folder, _ = demo_folder
    env = {**os.environ, **_demo_env(folder), "CLAYBENCH_METRICS_PORT": "0"}
    env.pop("CLAYBENCH_PUBLIC_BASE_URL", None)
    with subprocess.Popen(
        [sys.executable, "-m", "server.cli", "demo", "--port", "0"],
        stdout=subprocess.PIPE,
        stderr=subprocess.DEVNULL,
        text=True,
        env=env,
    ) as served:
        try:
            address = _signin_address(served)
            assert not address.endswith(":0/signin") and address.startswith("http://127.0.0.1:")
            deadline = time.monotonic() + 30
            while True:
                try:
                    with urllib.request.urlopen(address, timeout=5) as answer:
                        assert answer.status == 200 and b"Sign in" in answer.read()
                        break
                except OSError:
                    if time.monotonic() > deadline:
                        raise
                    time.sleep(0.2)
        finally:
            served.send_signal(signal.SIGINT)
            served.wait(40)


def _signin_address(served: subprocess.Popen[str]) -> str:
    """The "sign in at" address of the summary the demo prints before it serves."""
    assert served.stdout is not None
    for line in served.stdout:
        if "sign in at" in line:
            return line.split()[-1]
    raise AssertionError("the demo printed no sign-in address")
