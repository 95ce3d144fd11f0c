"""Driving the pages as a browser would: sign in, read the CSRF token, post forms."""

from __future__ import annotations

import re

from fastapi.testclient import TestClient
from httpx import Response  # the TestClient answers with httpx responses

_CSRF = re.compile(r'name="csrf_token" value="([^"]+)"')


def csrf_of(page: Response) -> str:
    found = _CSRF.search(page.text)
    assert found, "the page has no CSRF token"
    return found.group(1)


def sign_in(client: TestClient, username: str, password: str) -> None:
    page = client.get("/signin")
    reply = client.post(
        "/signin",
        data={"username": username, "password": password, "csrf_token": csrf_of(page), "next": "/jobs"},
        follow_redirects=False,
    )
    assert reply.status_code == 303, reply.text


def post_form(
    client: TestClient,
    page_path: str,
    action: str,
    data: dict[str, str] | list[tuple[str, str]],
    **kwargs: object,
) -> Response:
    """Post a form found on ``page_path`` with the page's CSRF token added."""
    token = csrf_of(client.get(page_path))
    fields: dict[str, list[str]] = {}
    for key, value in [*(data.items() if isinstance(data, dict) else data), ("csrf_token", token)]:
        fields.setdefault(key, []).append(value)
    return client.post(action, data=fields, **kwargs)  # type: ignore[arg-type]
