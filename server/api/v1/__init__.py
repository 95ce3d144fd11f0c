"""The JSON API v1 (DESIGN.md section 7): personal tokens, work in, results out.

``install(app)`` adds its routers, answers unmatched paths under /api/v1 as problems, and adds
the problem and readings schemas to the OpenAPI document (FastAPI lists a response model under the route's
own media type, application/json; a problem is application/problem+json, RFC 9457).
"""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, FastAPI

from server.api.schemas import readings_components
from server.api.v1 import jobs, lab_tests, reports
from server.api.v1.auth import RateLimit, Reader
from server.api.v1.problems import Problem, ProblemRoute, problems
from server.api.v1.schemas import MeOut, TokenInfo

me_router = APIRouter(prefix="/api/v1", route_class=ProblemRoute, tags=["tokens"])


@me_router.get("/me", response_model=MeOut, responses=problems(401, 429))
def me(who: Reader) -> MeOut:
    """Who the token acts as, with which role and scope, until when."""
    token = who.token
    return MeOut(
        username=who.user.username,
        full_name=who.user.full_name,
        role=who.user.role,
        token=TokenInfo(name=token.name, prefix=token.prefix, scope=token.scope, expires_at=token.expires_at),
    )


ROUTERS = (me_router, jobs.router, lab_tests.router, reports.router)


def install(app: FastAPI) -> None:
    """Wire the API v1 into the app (the routers, the problem answers, the OpenAPI additions).
    Unmatched /api/v1 paths and methods are answered by ``problems.unmatched`` through the app's
    one ``HTTPException`` handler (``server/web/http_errors.py``)."""
    app.state.api_rate_limit = RateLimit(app.state.settings.api_rate_limit)  # refuses a bad rate at start
    for router in ROUTERS:
        app.include_router(router)
    generate = app.openapi

    def openapi() -> dict[str, Any]:
        if app.openapi_schema:
            return app.openapi_schema
        schema = generate()
        found = Problem.model_json_schema(ref_template="#/components/schemas/{model}")
        components = schema.setdefault("components", {}).setdefault("schemas", {})
        components.update(found.pop("$defs", {}))
        components["Problem"] = found
        components.update(readings_components())
        return schema

    app.openapi = openapi  # type: ignore[method-assign]
