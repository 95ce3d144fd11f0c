"""Values bounded at parse time, and the findings of the schemathesis run kept as plain tests."""

from __future__ import annotations

from typing import Any

import pytest
from fastapi.testclient import TestClient

from server.db.session import Database
from server.services import tokens
from tests.api.test_v1_routes import problem_of
from tests.conftest import People


@pytest.fixture
def admin(app_client: TestClient, db: Database, people: People) -> dict[str, str]:
    made = tokens.create_token(db, people.admin, people.admin, "params", "write", 7).plaintext
    return {"Authorization": f"Bearer {made}"}  # RFC 6750 section 2.1


@pytest.mark.parametrize(
    "path",
    [
        "/api/v1/jobs/9223372036854775808",  # beyond a 64-bit integer (SQLite's)
        "/api/v1/jobs/2147483648",  # beyond PostgreSQL's integer
        "/api/v1/tests/0",
        "/api/v1/reports/99999999999999999999.ags",
        "/api/v1/jobs?client_id=2147483648",
        "/api/v1/jobs?updated_since=0.5",  # a number is not ISO 8601 text
    ],
)
def test_a_value_out_of_bounds_is_a_field_error(
    app_client: TestClient, admin: dict[str, str], path: str
) -> None:
    body = problem_of(app_client.get(path, headers=admin), 422)
    assert body["errors"], body


def test_a_date_sent_as_a_number_is_refused(app_client: TestClient, admin: dict[str, str]) -> None:
    job: dict[str, Any] = {"client_id": 1, "code": "P-1", "received_on": 0}
    body = problem_of(app_client.post("/api/v1/jobs", json=job, headers=admin), 422)
    assert any(e["loc"][-1] == "received_on" for e in body["errors"])


def test_a_method_not_allowed_names_every_method_of_the_path(
    app_client: TestClient, admin: dict[str, str]
) -> None:
    reply = app_client.request("OPTIONS", "/api/v1/clients", headers=admin)
    problem_of(reply, 405)
    assert reply.headers["allow"] == "GET, POST"  # RFC 9110 section 15.5.6


def test_a_client_name_beyond_ascii_registered_twice_is_a_field_error(
    app_client: TestClient, admin: dict[str, str]
) -> None:
    client = {"name": "Ôrsted Ground Ltd"}
    assert app_client.post("/api/v1/clients", json=client, headers=admin).status_code == 201
    body = problem_of(app_client.post("/api/v1/clients", json=client, headers=admin), 422)
    assert body["errors"][0]["loc"][-1] == "name"
