"""Who can get in, for the admin: every live session and API token, each with a button that
ends it, and the latest refused or throttled sign-ins. Ending and revoking go through
``server.services`` (sessions, tokens) and are audited there."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, Request
from fastapi.responses import RedirectResponse
from starlette.responses import Response

from server.auth.sessions import csrf_protect, current_session, database, lifetime, require_roles
from server.db import audit_queries
from server.db.tables import User
from server.services import sessions, tokens
from server.web.params import IdPath, PageRoute
from server.web.refusals import refusals_as_http
from server.web.templating import render

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Admin = Annotated[User, Depends(require_roles("admin"))]


@router.get("/admin/access")
def access_page(request: Request, user: Admin, done: str = "") -> Response:
    db = database(request)
    with db.session() as s:
        refused = audit_queries.refused_sign_ins(s)
    message = {"ended": "The session has ended.", "revoked": "The token is revoked."}.get(done)
    return render(
        request,
        "pages/admin_access.html",
        live=sessions.live(db, lifetime(request)),
        this=current_session(request),
        live_tokens=tokens.live_tokens(db),
        refused=refused,
        message=message,
    )


@router.post("/admin/sessions/{session_id}/end")
def end_session(request: Request, session_id: IdPath, user: Admin) -> Response:
    with refusals_as_http():
        sessions.end_by_admin(database(request), user, session_id)
    return RedirectResponse("/admin/access?done=ended", status_code=303)


@router.post("/admin/tokens/{token_id}/revoke")
def revoke_token(request: Request, token_id: IdPath, user: Admin) -> Response:
    with refusals_as_http():
        tokens.revoke_token(database(request), user, token_id)
    return RedirectResponse("/admin/access?done=revoked", status_code=303)
