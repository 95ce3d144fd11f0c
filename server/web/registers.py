"""The registers: admin pages for containers, equipment and the laboratory's details, and the
look-ups the bench uses when a tin or an instrument is picked by its code.

Look-ups (any signed-in person; JSON, or an HTML fragment for an htmx request):
- ``GET /registers/containers/{code}`` -> ``{"code", "tare_g", "active"}``, 404 ``{"detail"}``
- ``GET /registers/containers`` -> the active containers, for a picker
- ``GET /registers/equipment/{code}`` -> ``{"code", "kind", "description", "calibration_due",
  "capacity_g", "state", "days_left", "active", "reading"}``; ``reading`` is the entry the
  readings carry (``{"id", "calibration_due"}``, and a balance's ``"capacity_g"``), from which the
  engine flags equipment past its due date and refuses a mass above the balance's capacity
- ``GET /registers/equipment?kind=balance`` -> the active instruments of a kind, for a picker
"""

from __future__ import annotations

from datetime import date
from typing import Annotated, Any

from fastapi import APIRouter, Depends, Form, Request
from fastapi.responses import JSONResponse, RedirectResponse
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles, require_user
from server.db.register_queries import containers, equipment_list
from server.db.tables import User
from server.services import registers
from server.services.errors import NotFound, ServiceError, http_status, invalid
from server.web.forms import errors_by_path, refusal_of
from server.web.params import Count, IdPath, PageRoute
from server.web.templating import is_htmx, render

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Staff = Annotated[User, Depends(require_user)]
Admin = Annotated[User, Depends(require_roles("admin"))]

# Each calibration state in a symbol and a style as well as its words (never colour alone).
CALIBRATION_LOOK = {
    registers.IN_CALIBRATION: (registers.STATE_MARK[registers.IN_CALIBRATION], "status-approved"),
    registers.DUE_SOON: (registers.STATE_MARK[registers.DUE_SOON], "status-submitted"),
    registers.PAST_DUE: (registers.STATE_MARK[registers.PAST_DUE], "status-returned"),
}


# --- look-ups for the bench -------------------------------------------------------------------


def _not_found(request: Request, exc: NotFound, fragment: str) -> Response:
    if is_htmx(request):
        return render(request, fragment, status_code=404, found=None, problem=str(exc))
    return JSONResponse({"detail": str(exc)}, status_code=404)


@router.get("/registers/containers/{code}")
def container_lookup(request: Request, code: str, user: Staff) -> Response:
    try:
        found = registers.container_lookup(database(request), code)
    except NotFound as exc:
        return _not_found(request, exc, "partials/register_container.html")
    if is_htmx(request):
        return render(request, "partials/register_container.html", found=found, problem=None)
    return JSONResponse(found)


@router.get("/registers/containers")
def container_choices(request: Request, user: Staff) -> Response:
    with database(request).session() as s:
        rows = containers(s, active_only=True)
    return JSONResponse([{"code": c.code, "tare_g": c.tare_g, "active": c.active} for c in rows])


@router.get("/registers/equipment/{code}")
def equipment_lookup(request: Request, code: str, user: Staff) -> Response:
    try:
        found = registers.equipment_lookup(database(request), code)
    except NotFound as exc:
        return _not_found(request, exc, "partials/register_equipment.html")
    if is_htmx(request):
        return render(
            request,
            "partials/register_equipment.html",
            found=found,
            problem=None,
            calibration_look=CALIBRATION_LOOK,
        )
    return JSONResponse(found)


@router.get("/registers/equipment")
def equipment_choices(request: Request, user: Staff, kind: str | None = None) -> Response:
    if kind and kind not in registers.EQUIPMENT_KINDS:
        return JSONResponse(
            {"detail": f"kind must be one of {', '.join(registers.EQUIPMENT_KINDS)}"}, status_code=422
        )
    on = registers.today()
    with database(request).session() as s:
        rows = equipment_list(s, kind or None, active_only=True)
    return JSONResponse([registers.equipment_view(item, on) for item in rows])


# --- admin pages ------------------------------------------------------------------------------


def _number(raw: str) -> float | None:
    try:
        return float(raw.strip().replace(",", "."))
    except ValueError:
        return None


def _date(raw: str) -> date | None:
    try:
        return date.fromisoformat(raw.strip())
    except ValueError:
        return None


_NOTHING = "Nothing was saved: see the fields marked below."
_NOT_GRAMS = "tare must be a number of grams, such as 15.32"


@router.get("/registers")
def registers_page(request: Request, user: Admin, saved: Count = 0) -> Response:
    return _registers_page(request, message="Laboratory details saved." if saved else None)


def _registers_page(request: Request, *, status_code: int = 200, **extra: Any) -> Response:
    db = database(request)
    on = registers.today()
    with db.session() as s:
        tins = containers(s)
        items = [registers.equipment_view(e, on) for e in equipment_list(s)]
    lab = registers.laboratory(db)
    return render(
        request,
        "pages/registers.html",
        status_code=status_code,
        lab=lab,
        form=extra.get("form")
        or {
            "lab_name": lab.name if lab else "",
            "address": lab.address if lab else "",
            "accreditation": lab.accreditation if lab else "",
        },
        n_tins=sum(1 for t in tins if t.active),
        n_items=sum(1 for e in items if e["active"]),
        n_due=sum(1 for e in items if e["active"] and e["state"] == registers.DUE_SOON),
        n_past=sum(1 for e in items if e["active"] and e["state"] == registers.PAST_DUE),
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
        message=extra.get("message"),
    )


@router.post("/registers/admin/laboratory")
def save_laboratory(
    request: Request,
    user: Admin,
    lab_name: Annotated[str, Form()] = "",  # not "name": a field so named hides the form's own name
    address: Annotated[str, Form()] = "",
    accreditation: Annotated[str, Form()] = "",
) -> Response:
    try:
        registers.set_laboratory(database(request), user, lab_name, address, accreditation)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        errors = {("lab_name" if k == "name" else k): v for k, v in errors.items()}
        form = {"lab_name": lab_name, "address": address, "accreditation": accreditation}
        return _registers_page(
            request, status_code=http_status(exc), errors=errors, problem=problem, form=form
        )
    return RedirectResponse("/registers?saved=1", status_code=303)


# containers


def _containers_page(request: Request, *, status_code: int = 200, **extra: Any) -> Response:
    with database(request).session() as s:
        rows = containers(s)
    done, done_id = extra.get("done", ("", 0))
    message = (
        next((CONTAINER_DONE[done].format(code=c.code, tare=c.tare_g) for c in rows if c.id == done_id), None)
        if done in CONTAINER_DONE
        else None
    )
    return render(
        request,
        "pages/containers.html",
        status_code=status_code,
        rows=rows,
        form=extra.get("form", {"code": "", "tare_g": ""}),
        errors=extra.get("errors", {}),
        row_errors=extra.get("row_errors", {}),
        problem=extra.get("problem"),
        message=message,
    )


CONTAINER_DONE = {
    "added": "Container {code} added with tare {tare:.2f} g.",
    "reweighed": "Container {code} re-weighed: tare now {tare:.2f} g.",
    "activated": "Container {code} is back in use.",
    "deactivated": "Container {code} is taken out of use.",
}
EQUIPMENT_DONE = {
    "added": "Equipment {code} added.",
    "updated": "Equipment {code} updated.",
    "activated": "Equipment {code} is back in service.",
    "deactivated": "Equipment {code} is taken out of service.",
}


@router.get("/registers/admin/containers")
def containers_page(request: Request, user: Admin, done: str = "", id: Count = 0) -> Response:
    return _containers_page(request, done=(done, id))


@router.post("/registers/admin/containers")
def add_container(
    request: Request,
    user: Admin,
    code: Annotated[str, Form()] = "",
    tare_g: Annotated[str, Form()] = "",
) -> Response:
    tare = _number(tare_g)
    form = {"code": code, "tare_g": tare_g}
    if tare is None:
        errors = {**errors_by_path(registers.container_problems(code, None)), "tare_g": _NOT_GRAMS}
        return _containers_page(request, status_code=422, form=form, errors=errors, problem=_NOTHING)
    try:
        made = registers.add_container(database(request), user, code, tare)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _containers_page(
            request, status_code=http_status(exc), form=form, errors=errors, problem=problem
        )
    return _back("/registers/admin/containers", "added", made.id)


@router.post("/registers/admin/containers/{container_id}/tare")
def reweigh_container(
    request: Request,
    container_id: IdPath,
    user: Admin,
    tare_g: Annotated[str, Form()] = "",
) -> Response:
    tare = _number(tare_g)
    try:
        if tare is None:
            raise invalid("tare_g", _NOT_GRAMS)
        made = registers.reweigh_container(database(request), user, container_id, tare)
    except ServiceError as exc:
        _, problem = refusal_of(exc)
        return _containers_page(
            request, status_code=http_status(exc), row_errors={container_id: str(exc)}, problem=problem
        )
    return _back("/registers/admin/containers", "reweighed", made.id)


@router.post("/registers/admin/containers/{container_id}/active")
def container_active(
    request: Request, container_id: IdPath, user: Admin, active: Annotated[str, Form()] = "0"
) -> Response:
    try:
        made = registers.set_container_active(database(request), user, container_id, active == "1")
    except ServiceError as exc:
        return _containers_page(request, status_code=http_status(exc), problem=f"Nothing was saved: {exc}.")
    return _back("/registers/admin/containers", "activated" if made.active else "deactivated", made.id)


# equipment


def _equipment_page(request: Request, *, status_code: int = 200, **extra: Any) -> Response:
    on = registers.today()
    with database(request).session() as s:
        rows = [(e.id, registers.equipment_view(e, on)) for e in equipment_list(s)]
    done, done_id = extra.get("done", ("", 0))
    message = (
        next((EQUIPMENT_DONE[done].format(code=view["code"]) for i, view in rows if i == done_id), None)
        if done in EQUIPMENT_DONE
        else None
    )
    return render(
        request,
        "pages/equipment.html",
        status_code=status_code,
        rows=rows,
        kinds=registers.EQUIPMENT_KINDS,
        calibration_look=CALIBRATION_LOOK,
        form=extra.get(
            "form", {"code": "", "kind": "", "description": "", "calibration_due": "", "capacity_g": ""}
        ),
        errors=extra.get("errors", {}),
        row_errors=extra.get("row_errors", {}),
        problem=extra.get("problem"),
        message=message,
    )


def _due_or_refuse(raw: str) -> date | None:
    """The due date typed, None when blank; a date that cannot be read is refused at its field."""
    if not raw.strip():
        return None
    due = _date(raw)
    if due is None:
        raise invalid("calibration_due", _bad_date(raw))
    return due


def _bad_date(raw: str) -> str:
    return f"due date must be written YYYY-MM-DD, not {raw.strip()!r}"


_NOT_CAPACITY = "capacity must be a number of grams, such as 6200"


def _capacity_or_refuse(raw: str) -> float | None:
    """A balance's capacity typed (a decimal comma too), None when blank; text that is not a
    number is refused at its field."""
    if not raw.strip():
        return None
    capacity = _number(raw)
    if capacity is None:
        raise invalid("capacity_g", _NOT_CAPACITY)
    return capacity


@router.get("/registers/admin/equipment")
def equipment_page(request: Request, user: Admin, done: str = "", id: Count = 0) -> Response:
    return _equipment_page(request, done=(done, id))


@router.post("/registers/admin/equipment")
def add_equipment(
    request: Request,
    user: Admin,
    code: Annotated[str, Form()] = "",
    kind: Annotated[str, Form()] = "",
    description: Annotated[str, Form()] = "",
    calibration_due: Annotated[str, Form()] = "",
    capacity_g: Annotated[str, Form()] = "",
) -> Response:
    form = {
        "code": code,
        "kind": kind,
        "description": description,
        "calibration_due": calibration_due,
        "capacity_g": capacity_g,
    }
    due = _date(calibration_due) if calibration_due.strip() else None
    capacity = _number(capacity_g) if capacity_g.strip() else None
    unreadable = {
        **(
            {"calibration_due": _bad_date(calibration_due)} if calibration_due.strip() and due is None else {}
        ),
        **({"capacity_g": _NOT_CAPACITY} if capacity_g.strip() and capacity is None else {}),
    }
    if unreadable:
        found = registers.equipment_problems(
            code, kind, due, due_unreadable="calibration_due" in unreadable, capacity_g=capacity
        )
        errors = {**errors_by_path(found), **unreadable}
        return _equipment_page(request, status_code=422, form=form, errors=errors, problem=_NOTHING)
    try:
        made = registers.add_equipment(database(request), user, code, kind, description, due, capacity)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _equipment_page(
            request, status_code=http_status(exc), form=form, errors=errors, problem=problem
        )
    return _back("/registers/admin/equipment", "added", made.id)


@router.post("/registers/admin/equipment/{equipment_id}")
def update_equipment(
    request: Request,
    equipment_id: IdPath,
    user: Admin,
    description: Annotated[str, Form()] = "",
    calibration_due: Annotated[str, Form()] = "",
    capacity_g: Annotated[str, Form()] = "",
    capacity_on_form: Annotated[str, Form()] = "",
) -> Response:
    """Save a row of the register; a row without the capacity field (only a balance's row has
    it, marked by ``capacity_on_form``) leaves the capacity as is, a blank one clears it."""
    try:
        made = registers.update_equipment(
            database(request),
            user,
            equipment_id,
            description,
            _due_or_refuse(calibration_due),
            capacity_g=_capacity_or_refuse(capacity_g) if capacity_on_form == "1" else registers.Keep.AS_IS,
        )
    except ServiceError as exc:
        _, problem = refusal_of(exc)
        return _equipment_page(
            request, status_code=http_status(exc), row_errors={equipment_id: str(exc)}, problem=problem
        )
    return _back("/registers/admin/equipment", "updated", made.id)


@router.post("/registers/admin/equipment/{equipment_id}/active")
def equipment_active(
    request: Request, equipment_id: IdPath, user: Admin, active: Annotated[str, Form()] = "0"
) -> Response:
    try:
        made = registers.set_equipment_active(database(request), user, equipment_id, active == "1")
    except ServiceError as exc:
        return _equipment_page(request, status_code=http_status(exc), problem=f"Nothing was saved: {exc}.")
    return _back("/registers/admin/equipment", "activated" if made.active else "deactivated", made.id)


def _back(path: str, done: str, record_id: int | None) -> Response:
    """After a change, back to the list, which confirms what was done (post, redirect, get)."""
    return RedirectResponse(f"{path}?done={done}&id={record_id}", status_code=303)
