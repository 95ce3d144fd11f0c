"""The claybench command, run as a real process (as a laboratory's scripts would run it)."""

from __future__ import annotations

import json
import os
import subprocess
import sys
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


def test_demo_loads_the_fictional_job_without_serving(tmp_path: Path) -> None:
    env = {"CLAYBENCH_DATA_DIR": str(tmp_path), "DATABASE_URL": ""}
    done = claybench("demo", "--no-serve", env=env)
    assert done.returncode == 0, done.stderr
    assert "/share/" in done.stdout and "bench-demo-2026" in done.stdout
    db = Database(f"sqlite:///{tmp_path / 'claybench.sqlite3'}")
    with db.session() as s:
        seen = set(s.exec(select(LabTest.status)).all())
        reports = s.exec(select(Report.number)).all()
    db.dispose()
    assert reports == ["SMW-2611-R01"]
    assert {"requested", "draft", "submitted", "returned", "approved"} <= seen
