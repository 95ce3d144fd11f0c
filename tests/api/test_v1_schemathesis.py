"""The API against its own OpenAPI document, by schemathesis (DESIGN.md section 7)."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
import schemathesis
from fastapi.testclient import TestClient
from hypothesis import HealthCheck, settings

from server.config import Settings
from server.db.session import Database
from server.main import create_app
from server.services import tokens
from tests.conftest import People
from tests.support.scenario import small_job


@pytest.fixture
def api_schema(settings: Settings, db: Database, people: People) -> Iterator[object]:
    small_job(db, people.admin, method="water-content")
    app = create_app(settings.model_copy(update={"api_rate_limit": "100000/minute"}), db)
    token = tokens.create_token(db, people.admin, people.admin, "schemathesis", "write", 7).plaintext
    with TestClient(app):
        schema = schemathesis.openapi.from_asgi("/openapi.json", app)
        schema.config.headers = {"Authorization": f"Bearer {token}"}
        # A request the schema allows is accepted, or refused field by field with the 422 that
        # every route's schema describes (DESIGN.md section 7): a cursor from nowhere, a sample
        # at a location of another job, a liquid limit from blows the cup never gives.
        accepted = schema.config.checks.positive_data_acceptance
        accepted.expected_statuses = [*accepted.expected_statuses, "422"]
        yield schema


schema = schemathesis.pytest.from_fixture("api_schema")


@schema.parametrize()
@settings(max_examples=12, deadline=None, suppress_health_check=list(HealthCheck))
def test_api(case: schemathesis.Case) -> None:
    case.call_and_validate()
