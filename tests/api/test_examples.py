"""The OpenAPI schema shows a working example request for every method the engine registers."""

from __future__ import annotations

from pathlib import Path

import pytest

from server.api.examples import EXAMPLES
from server.config import Settings
from server.engine import METHODS, evaluate
from server.main import create_app


def test_every_registered_method_has_an_example() -> None:
    assert set(EXAMPLES) == set(METHODS)


@pytest.mark.parametrize("method", sorted(EXAMPLES))
def test_each_example_is_accepted_by_the_engine(method: str) -> None:
    assert evaluate(method, EXAMPLES[method]).errors == []


def test_the_examples_are_published_in_the_openapi_schema(tmp_path: Path) -> None:
    app = create_app(
        Settings(data_dir=tmp_path, DATABASE_URL=f"sqlite:///{tmp_path}/x.db", secret_key="k" * 40)
    )
    operation = app.openapi()["paths"]["/api/v1/calculations"]["post"]
    examples = operation["requestBody"]["content"]["application/json"]["examples"]
    assert set(examples) == set(METHODS)
