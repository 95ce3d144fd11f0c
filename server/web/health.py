"""/healthz and /readyz: for the orchestrator, the load balancer and the operator, no sign-in.

Two questions with two different answers to act on. /healthz is "does the process live?": it
touches nothing (no database), so a busy or unreachable database never gets a healthy server
restarted, which would not help and would drop the requests it is serving. /readyz is "should
requests be sent here?": 200 when the database answers, the schema is at the newest migration
and a render worker is alive, else 503; both name every check with its reason
(``server/observability/readiness.py``).
"""

from __future__ import annotations

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse

from server import __version__
from server.observability import readiness

router = APIRouter(include_in_schema=False)


@router.get("/healthz")
async def healthz() -> JSONResponse:
    """The process lives and its event loop answers (async: no thread, no database)."""
    return JSONResponse({"status": "ok", "version": __version__})


@router.get("/readyz")
def readyz(request: Request) -> JSONResponse:
    """Each check ok or failed with its reason; 503 when any failed (a ``def``: the queries run
    in the thread pool, never on the event loop)."""
    found = readiness.check(request.app.state.db)
    return JSONResponse(
        {**found.to_dict(), "version": __version__},
        status_code=200 if found.ready else 503,
        headers={"Cache-Control": "no-store"},
    )
