"""The web application: wiring only (settings, database, middleware, routers, error pages)."""

from __future__ import annotations

from urllib.parse import urlencode

from fastapi import FastAPI, Request
from fastapi.responses import JSONResponse, RedirectResponse
from fastapi.staticfiles import StaticFiles
from starlette.middleware.sessions import SessionMiddleware
from starlette.responses import Response

from server import __version__
from server.api import calculations as api_calculations
from server.api import v1 as api_v1
from server.auth.sessions import CsrfRefused, RoleRequired, SignInRequired
from server.config import ROOT, Settings, get_settings
from server.db.session import Database
from server.observability.metrics import Metrics
from server.observability.middleware import RequestObserver
from server.web import (
    account,
    admin_access,
    admin_users,
    audit,
    bench,
    busy,
    client,
    exports,
    health,
    home,
    http_errors,
    imports,
    intake,
    job_page,
    jobs,
    quality,
    receipt,
    registers,
    reports,
    requests,
    review,
    signin,
    turnaround,
)
from server.web.security_headers import SecurityHeaders
from server.web.templating import render


def create_app(settings: Settings | None = None, db: Database | None = None) -> FastAPI:
    """Build the app for these settings; tests pass their own settings and database."""
    settings = settings or get_settings()
    app = FastAPI(
        title="Claybench",
        version=__version__,
        description="Index testing for a soils laboratory: calculations, bench, review, reports.",
    )
    app.state.settings = settings
    app.state.db = db or Database(settings.database_url)
    app.add_middleware(
        SessionMiddleware,
        secret_key=settings.resolved_secret_key(),
        session_cookie="claybench_session",
        max_age=settings.session_max_age_s,
        same_site="lax",
        https_only=settings.https_only_cookies,
    )
    app.add_middleware(SecurityHeaders, production=settings.production)  # CSP and friends, every response
    app.state.metrics = Metrics(app.state.db)  # exported by `claybench serve` on a port of its own
    app.add_middleware(RequestObserver, metrics=app.state.metrics)  # outermost: request id, access line
    app.mount("/static", StaticFiles(directory=ROOT / "static"), name="static")
    # First: the bench save is the hottest route, and every router included before it costs a
    # match (~10 % of a save's CPU); its paths (/tests/{id}...) overlap no other router's.
    app.include_router(bench.router)
    app.include_router(api_calculations.router)
    api_v1.install(app)  # before the pages, so that no page route reads an /api/v1 path
    busy.install(app)  # a write that waited its whole turn: 503 with Retry-After
    http_errors.install(app)  # 404, 403, 409 ... as a page, a fragment, JSON or a problem
    for module in (
        health,  # /healthz and /readyz
        signin,
        intake,  # before jobs: /jobs/new must not be read as /jobs/{job_id}
        job_page,
        exports,
        receipt,
        imports,
        jobs,
        review,
        reports,
        client,
        home,
        audit,
        turnaround,
        admin_users,
        admin_access,
        registers,
        quality,
        requests,
        account,
    ):
        app.include_router(module.router)

    @app.exception_handler(SignInRequired)
    def _signin(request: Request, exc: SignInRequired) -> Response:
        if request.url.path.startswith("/api/"):
            return JSONResponse({"detail": "sign in required"}, status_code=401)
        if request.headers.get("hx-request") == "true":
            return Response(status_code=401, headers={"HX-Redirect": "/signin"})
        target = request.url.path + (f"?{request.url.query}" if request.url.query else "")
        return RedirectResponse(f"/signin?{urlencode({'next': target})}", status_code=303)

    @app.exception_handler(RoleRequired)
    def _role(request: Request, exc: RoleRequired) -> Response:
        return render(request, "pages/refused.html", status_code=403, reason=str(exc))

    @app.exception_handler(CsrfRefused)
    def _csrf(request: Request, exc: CsrfRefused) -> Response:
        return render(request, "pages/refused.html", status_code=403, reason=str(exc))

    return app
