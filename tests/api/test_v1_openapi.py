"""The OpenAPI document of the API v1 is complete: every operation is secured by the token,
every request body and every answer has an example, every refusal is a problem (RFC 9457), and
the examples are valid bodies of their own models."""

from __future__ import annotations

from typing import Any

import pytest
from fastapi.testclient import TestClient
from pydantic import BaseModel

from server.api.v1 import schemas

STATELESS = {"/api/v1/calculations", "/api/v1/methods"}  # the calculation API: no token (DESIGN.md section 3)


@pytest.fixture
def document(app_client: TestClient) -> dict[str, Any]:
    reply = app_client.get("/openapi.json")
    assert reply.status_code == 200
    found: dict[str, Any] = reply.json()
    return found


def _operations(document: dict[str, Any]) -> list[tuple[str, str, dict[str, Any]]]:
    return [
        (path, method, operation)
        for path, item in document["paths"].items()
        if path.startswith("/api/v1/") and path not in STATELESS
        for method, operation in item.items()
    ]


def _has_example(media: dict[str, Any], components: dict[str, Any]) -> bool:
    if "example" in media or "examples" in media:
        return True
    schema = media.get("schema", {})
    ref = schema.get("$ref", "")
    if ref:
        return "examples" in components[ref.rsplit("/", 1)[-1]]
    return "examples" in schema


def test_the_api_lists_the_routes_design_names(document: dict[str, Any]) -> None:
    paths = {(path, method) for path, method, _ in _operations(document)}
    # DESIGN.md section 7: at least these
    assert {
        ("/api/v1/jobs", "get"),
        ("/api/v1/jobs", "post"),
        ("/api/v1/jobs/{job_id}", "get"),
        ("/api/v1/jobs/{job_id}/samples", "get"),
        ("/api/v1/jobs/{job_id}/samples", "post"),
        ("/api/v1/jobs/{job_id}/imports", "post"),
        ("/api/v1/tests/{test_id}", "get"),
        ("/api/v1/tests/{test_id}/readings", "put"),
        ("/api/v1/tests/{test_id}/submit", "post"),
        ("/api/v1/jobs/{job_id}/reports", "get"),
        ("/api/v1/reports/{report_id}.pdf", "get"),
        ("/api/v1/jobs/{job_id}/export", "get"),
    } <= paths


def test_every_operation_needs_the_bearer_token(document: dict[str, Any]) -> None:
    scheme = document["components"]["securitySchemes"]["ApiToken"]
    assert (scheme["type"], scheme["scheme"]) == ("http", "bearer")  # RFC 6750 via OpenAPI 3.1 "http"
    for path, method, operation in _operations(document):
        assert operation.get("security") == [{"ApiToken": []}], (method, path)


def test_every_request_body_has_an_example(document: dict[str, Any]) -> None:
    components = document["components"]["schemas"]
    for path, method, operation in _operations(document):
        body = operation.get("requestBody")
        if body is None:
            continue
        for media_type, media in body["content"].items():
            assert _has_example(media, components), (method, path, media_type)


def test_every_answer_has_an_example_and_every_refusal_is_a_problem(document: dict[str, Any]) -> None:
    components = document["components"]["schemas"]
    for path, method, operation in _operations(document):
        for status, answer in operation["responses"].items():
            content = answer.get("content", {})
            assert content, (method, path, status)
            for media_type, media in content.items():
                assert _has_example(media, components), (method, path, status, media_type)
            if status.startswith(("4", "5")):
                # RFC 9457 section 3: application/problem+json, and only that
                assert list(content) == ["application/problem+json"], (method, path, status)
                assert content["application/problem+json"]["schema"] == {
                    "$ref": "#/components/schemas/Problem"
                }
        assert "401" in operation["responses"] and "429" in operation["responses"], (method, path)


def test_the_problem_schema_is_in_the_document(document: dict[str, Any]) -> None:
    problem = document["components"]["schemas"]["Problem"]
    # RFC 9457 section 3.1: type, title, status, detail, instance; "errors" is our extension
    assert {"type", "title", "status", "detail", "instance", "errors"} <= set(problem["properties"])
    assert "ProblemError" in document["components"]["schemas"]


MODELS = [
    model
    for model in vars(schemas).values()
    if isinstance(model, type) and issubclass(model, BaseModel) and model.__module__ == schemas.__name__
]


@pytest.mark.parametrize("model", MODELS, ids=lambda m: m.__name__)
def test_each_example_is_a_valid_body_of_its_model(model: type[BaseModel]) -> None:
    examples = (model.model_config.get("json_schema_extra") or {}).get("examples", [])  # type: ignore[union-attr]
    if model.__name__ not in {"ClientRef", "Counts", "TokenInfo"}:  # parts shown inside their parents
        assert examples, model.__name__
    for example in examples:
        model.model_validate(example)
