"""People, for the admin: add a user, change name or role, deactivate or reactivate, reset a
password. Every change goes through ``server.services.users`` and is audited there."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Depends, Form, HTTPException, Request
from fastapi.responses import RedirectResponse
from sqlmodel import col, func, select
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles
from server.db import audit_queries
from server.db.queries import users_by_id
from server.db.tables import LabTest, User
from server.services import users
from server.services.errors import Invalid, ServiceError, http_status
from server.web.params import IdPath, PageRoute
from server.web.templating import render
from server.workflow.states import Role

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Admin = Annotated[User, Depends(require_roles("admin"))]

ROLES = [r.value for r in Role]


def _errors(exc: ServiceError) -> dict[str, str]:
    """Refusals by form field; a refusal of no field goes under "form"."""
    if isinstance(exc, Invalid):
        return {str(e.loc[0]) if e.loc else "form": e.message for e in exc.errors}
    return {"form": str(exc)}


def _list_page(request: Request, *, status_code: int = 200, **extra: Any) -> Response:
    with database(request).session() as s:
        people = list(s.exec(select(User).order_by(col(User.active).desc(), col(User.username))))
    return render(
        request,
        "pages/admin_users.html",
        status_code=status_code,
        people=people,
        roles=ROLES,
        errors=extra.get("errors", {}),
        typed=extra.get("typed", {}),
    )


@router.get("/admin/users")
def list_users(request: Request, user: Admin) -> Response:
    return _list_page(request)


@router.post("/admin/users")
def add_user(
    request: Request,
    user: Admin,
    username: Annotated[str, Form()] = "",
    full_name: Annotated[str, Form()] = "",
    role: Annotated[str, Form()] = "",
    password: Annotated[str, Form()] = "",
) -> Response:
    try:
        made = users.create_user(database(request), user, username, full_name, role, password)
    except ServiceError as exc:
        typed = {"username": username, "full_name": full_name, "role": role}
        return _list_page(request, status_code=http_status(exc), errors=_errors(exc), typed=typed)
    return RedirectResponse(f"/admin/users/{made.id}", status_code=303)


def _person_page(
    request: Request, user_id: int, *, status_code: int = 200, message: str | None = None, **extra: Any
) -> Response:
    with database(request).session() as s:
        person = s.get(User, user_id)
        if person is None:
            raise HTTPException(404, "no such user")
        events = audit_queries.entity_events(s, "user", user_id)
        actors = users_by_id(s, (e.actor_id for e in events))
        signed = s.exec(
            select(func.count()).select_from(LabTest).where(LabTest.approved_by_id == user_id)
        ).one()
    return render(
        request,
        "pages/admin_user.html",
        status_code=status_code,
        person=person,
        roles=ROLES,
        events=events,
        labels={},
        actors=actors,
        signed=int(signed),
        message=message,
        errors=extra.get("errors", {}),
    )


@router.get("/admin/users/{user_id}")
def person(request: Request, user_id: IdPath, user: Admin, done: str = "") -> Response:
    messages = {
        "saved": "Saved.",
        "deactivated": "Deactivated: the account cannot sign in; its signatures stand.",
        "activated": "Reactivated: the account can sign in again.",
        "password": "Password reset: the person's open sessions have ended.",
    }
    return _person_page(request, user_id, message=messages.get(done))


def _act(request: Request, user_id: int, done: str, call: Any) -> Response:
    try:
        call()
    except ServiceError as exc:
        return _person_page(request, user_id, status_code=http_status(exc), errors=_errors(exc))
    return RedirectResponse(f"/admin/users/{user_id}?done={done}", status_code=303)


@router.post("/admin/users/{user_id}")
def update(
    request: Request,
    user_id: IdPath,
    user: Admin,
    full_name: Annotated[str, Form()] = "",
    role: Annotated[str, Form()] = "",
    reason: Annotated[str, Form()] = "",
) -> Response:
    db = database(request)
    return _act(
        request,
        user_id,
        "saved",
        lambda: users.update_user(db, user, user_id, full_name=full_name, role=role, reason=reason),
    )


@router.post("/admin/users/{user_id}/active")
def set_active(
    request: Request,
    user_id: IdPath,
    user: Admin,
    active: Annotated[str, Form()] = "",
    reason: Annotated[str, Form()] = "",
) -> Response:
    db = database(request)
    on = active == "yes"
    return _act(
        request,
        user_id,
        "activated" if on else "deactivated",
        lambda: users.set_active(db, user, user_id, on, reason),
    )


@router.post("/admin/users/{user_id}/password")
def reset_password(
    request: Request,
    user_id: IdPath,
    user: Admin,
    password: Annotated[str, Form()] = "",
    reason: Annotated[str, Form()] = "",
) -> Response:
    db = database(request)
    return _act(
        request, user_id, "password", lambda: users.reset_password(db, user, user_id, password, reason)
    )
