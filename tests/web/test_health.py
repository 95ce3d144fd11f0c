"""/healthz says the process lives; /readyz says whether the database answers, the schema is at
the newest migration and a render worker is alive, naming each check with its reason.

Every case runs on SQLite and PostgreSQL, against real databases: a fresh migrated one, one taken
back a revision by the real downgrade, one the app cannot open, and a worker's real heartbeat.
"""

from __future__ import annotations

from collections.abc import Iterator
from datetime import timedelta
from pathlib import Path
from typing import Any

import pytest
from alembic.script import ScriptDirectory
from fastapi.testclient import TestClient
from sqlalchemy import text
from sqlmodel import select

from server.config import Settings
from server.db.migrate import alembic_config, downgrade
from server.db.session import Database
from server.db.tables import WorkerHeartbeat, utcnow
from server.main import create_app
from server.services import workers
from tests.support.unreachable import unreachable_url

# The newest revision and the one before it, as Alembic itself reads migrations/ (not our code).
_SCRIPTS = ScriptDirectory.from_config(alembic_config(""))
(HEAD,) = _SCRIPTS.get_heads()
_DOWN = _SCRIPTS.get_revision(HEAD).down_revision
assert isinstance(_DOWN, str)  # one parent: the chain of migrations/ has no merges
PREVIOUS: str = _DOWN


def _checks(reply: Any) -> dict[str, dict[str, str]]:
    body = reply.json()
    assert set(body["checks"]) == {"database", "schema", "worker"}
    return dict(body["checks"])


def _beat(db: Database) -> None:
    """What a running worker does every few seconds (server/services/workers.py)."""
    workers.beat(db, workers.worker_name("sqlite"), "sqlite", utcnow())


def test_healthz_answers_200_without_signing_in(app_client: TestClient) -> None:
    reply = app_client.get("/healthz")
    assert reply.status_code == 200
    assert reply.json()["status"] == "ok"


def test_readyz_is_503_naming_the_worker_when_no_worker_ever_beat(app_client: TestClient) -> None:
    reply = app_client.get("/readyz")
    assert reply.status_code == 503
    assert reply.json()["status"] == "not ready"
    checks = _checks(reply)
    assert checks["database"]["status"] == "ok"
    assert checks["schema"] == {"status": "ok", "reason": f"at {HEAD}, the newest migration"}
    assert checks["worker"]["status"] == "failed"
    assert "no render worker has been seen" in checks["worker"]["reason"]
    assert reply.headers["cache-control"] == "no-store"


def test_readyz_is_200_once_a_worker_beat(app_client: TestClient, db: Database) -> None:
    _beat(db)
    reply = app_client.get("/readyz")
    assert reply.status_code == 200, reply.text
    assert reply.json()["status"] == "ready"
    assert {c["status"] for c in _checks(reply).values()} == {"ok"}
    assert "a render worker was seen" in _checks(reply)["worker"]["reason"]


def test_readyz_is_503_when_the_last_heartbeat_is_older_than_the_alive_window(
    app_client: TestClient, db: Database
) -> None:
    _beat(db)
    with db.transaction() as s:  # the worker stopped beating a little over ALIVE_S ago
        for row in s.exec(select(WorkerHeartbeat)):
            row.seen_at = utcnow() - timedelta(seconds=workers.ALIVE_S + 5)
            s.add(row)
    reply = app_client.get("/readyz")
    assert reply.status_code == 503
    worker = _checks(reply)["worker"]
    assert worker["status"] == "failed"
    assert f"no render worker seen in the last {workers.ALIVE_S:.0f} s" in worker["reason"]


def test_readyz_is_503_when_the_schema_is_a_revision_behind_the_code(
    settings: Settings, db: Database
) -> None:
    downgrade(db.url, PREVIOUS)  # a server of the new release started before `claybench migrate`
    with TestClient(create_app(settings, db)) as client:
        reply = client.get("/readyz")
    assert reply.status_code == 503
    schema = _checks(reply)["schema"]
    assert schema["status"] == "failed"
    assert f"the database is at {PREVIOUS}, the code needs {HEAD}: run claybench migrate" in schema["reason"]
    assert _checks(reply)["database"]["status"] == "ok"


def test_readyz_is_503_when_no_revision_is_recorded(app_client: TestClient, db: Database) -> None:
    with db.transaction() as s:
        s.connection().execute(text("DROP TABLE alembic_version"))
    reply = app_client.get("/readyz")
    assert reply.status_code == 503
    schema = _checks(reply)["schema"]
    assert schema["status"] == "failed" and "no schema revision recorded" in schema["reason"]


@pytest.fixture
def unreachable_db(backend: str, tmp_path: Path, database_url: str) -> Iterator[Database]:
    broken = Database(unreachable_url(backend, tmp_path, database_url))
    yield broken
    broken.dispose()


def test_healthz_is_200_and_readyz_503_when_the_database_does_not_answer(
    settings: Settings, unreachable_db: Database
) -> None:
    with TestClient(create_app(settings, unreachable_db)) as client:
        alive = client.get("/healthz")
        ready = client.get("/readyz")
    assert alive.status_code == 200  # the process lives: restarting it would not bring the database
    assert ready.status_code == 503
    checks = _checks(ready)
    assert checks["database"] == {"status": "failed", "reason": "the database did not answer a query"}
    assert checks["schema"]["status"] == checks["worker"]["status"] == "failed"
    assert "claybench_no_such_db" not in ready.text and "not-a-file" not in ready.text  # nothing internal
