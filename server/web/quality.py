"""The Quality page (ISO/IEC 17025:2017 cl. 7.7): the reference soil register and each soil's
control charts (with a per-technician filter and the rules broken), duplicate pairs with their
verdicts, proficiency rounds with z and verdict, and the quality report PDF.

Anyone signed in may look, at every chart and every technician's (a laboratory's quality record is
no secret inside it); reviewers and admins change
things, as they keep the other registers of work. Every form carries the CSRF token; every
refusal comes back on the page beside its field, with nothing stored.
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Annotated, Any

from fastapi import APIRouter, Depends, Form, HTTPException, Request
from fastapi.responses import RedirectResponse
from markupsafe import Markup
from pydantic import BaseModel
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles, require_user
from server.db.tables import User
from server.engine import METHODS
from server.services import quality_charts, quality_duplicates, quality_proficiency, quality_report
from server.services import quality_references as refs
from server.services.errors import NotFound, ServiceError, http_status, invalid
from server.services.quality_proficiency import RoundForm
from server.web.forms import record_id, refusal_of
from server.web.params import IdPath, PageRoute
from server.web.templating import render

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Staff = Annotated[User, Depends(require_user)]
Checker = Annotated[User, Depends(require_roles("reviewer", "admin"))]
Text = Annotated[str, Form()]

EMPTY_SOIL = {"code": "", "name": "", "description": "", "assigned_values": "", "active": "1"}
EMPTY_ROUND = {
    "scheme": "",
    "round_code": "",
    "method": "atterberg",
    "result_key": "liquid_limit",
    "assigned_value": "",
    "sigma_pt": "",
    "round_date": "",
    "result": "",
    "test_id": "",
}
DONE = {
    "soil": "Reference soil saved.",
    "linked": "Sample linked to the reference soil.",
    "unlinked": "Sample unlinked from the reference soil.",
    "marked": "Duplicate pair marked.",
    "unmarked": "Duplicate pair unmarked.",
    "round": "Proficiency round saved.",
}


def parse_assigned(text: str) -> dict[str, dict[str, float]]:
    """Assigned values typed one per line as "method result_key value" (a decimal comma is
    read as a point), e.g. "atterberg liquid_limit 45"."""
    out: dict[str, dict[str, float]] = {}
    for number, line in enumerate(text.splitlines(), start=1):
        parts = line.split()
        if not parts:
            continue
        if len(parts) != 3:
            raise invalid("assigned_values", f"line {number}: write a method, a result key and a number")
        try:
            value = float(parts[2].replace(",", "."))
        except ValueError:
            raise invalid("assigned_values", f"line {number}: {parts[2][:20]!r} is not a number") from None
        if parts[1] in out.get(parts[0], {}):
            raise invalid("assigned_values", f"line {number}: {parts[0]} {parts[1]} is given twice")
        out.setdefault(parts[0], {})[parts[1]] = value
    return out


def assigned_text(values: dict[str, Any] | None) -> str:
    return "\n".join(f"{m} {k} {v:g}" for m, keys in (values or {}).items() for k, v in keys.items())


def _done(name: str) -> str | None:
    return DONE.get(name)


# --- the overview -----------------------------------------------------------------------------


def _quality_page(request: Request, *, status_code: int = 200, **extra: Any) -> Response:
    db = database(request)
    return render(
        request,
        "pages/quality.html",
        status_code=status_code,
        soils=refs.soils(db),
        pairs=quality_duplicates.pairs(db),
        rounds=quality_proficiency.rounds(db),
        methods=sorted(METHODS),
        soil_form=extra.get("soil_form", EMPTY_SOIL),
        round_form=extra.get("round_form", EMPTY_ROUND),
        mark_form=extra.get("mark_form", {"test_id": "", "duplicate_of": ""}),
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
        message=extra.get("message"),
        label_of=quality_report.label_of,
    )


@router.get("/quality")
def quality_page(request: Request, user: Staff, done: str = "") -> Response:
    return _quality_page(request, message=_done(done))


@router.post("/quality/soils")
def add_soil(
    request: Request,
    user: Checker,
    code: Text = "",
    name: Text = "",
    description: Text = "",
    assigned_values: Text = "",
) -> Response:
    form = {"code": code, "name": name, "description": description, "assigned_values": assigned_values}
    try:
        soil = refs.add_soil(
            database(request), user, code, name, description, parse_assigned(assigned_values)
        )
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _quality_page(
            request, status_code=http_status(exc), soil_form=form, errors=errors, problem=problem
        )
    return RedirectResponse(f"/quality/soils/{soil.id}?done=soil", status_code=303)


@router.post("/quality/duplicates")
def mark_duplicate(request: Request, user: Checker, test_id: Text = "", duplicate_of: Text = "") -> Response:
    form = {"test_id": test_id, "duplicate_of": duplicate_of}
    try:
        test, original = record_id(test_id), record_id(duplicate_of)
        if test is None:
            raise invalid("test_id", "the duplicate test's number is required (a whole number)")
        if original is None:
            raise invalid("duplicate_of", "the original test's number is required (a whole number)")
        try:
            quality_duplicates.mark(database(request), user, test, original)
        except NotFound as exc:
            raise invalid("test_id", str(exc)) from None
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _quality_page(
            request, status_code=http_status(exc), mark_form=form, errors=errors, problem=problem
        )
    return RedirectResponse("/quality?done=marked#duplicates", status_code=303)


@router.post("/quality/duplicates/{mark_id}/unmark")
def unmark_duplicate(request: Request, mark_id: IdPath, user: Checker, reason: Text = "") -> Response:
    try:
        quality_duplicates.unmark(database(request), user, mark_id, reason)
    except ServiceError as exc:
        _, problem = refusal_of(exc)
        return _quality_page(request, status_code=http_status(exc), problem=problem)
    return RedirectResponse("/quality?done=unmarked#duplicates", status_code=303)


class RoundFields(BaseModel):
    """A proficiency round's form as posted (text; the service reads and refuses it)."""

    scheme: str = ""
    round_code: str = ""
    method: str = ""
    result_key: str = ""
    assigned_value: str = ""
    sigma_pt: str = ""
    round_date: str = ""
    result: str = ""
    test_id: str = ""
    reason: str = ""


RoundPosted = Annotated[RoundFields, Form()]


def _round_form(fields: RoundFields) -> RoundForm:
    test = fields.test_id.strip()
    test_id = record_id(test)
    if test and test_id is None:
        raise invalid("test_id", "the test's number must be a whole number")
    return RoundForm(
        scheme=fields.scheme,
        round_code=fields.round_code,
        method=fields.method,
        result_key=fields.result_key,
        assigned_value=fields.assigned_value,
        sigma_pt=fields.sigma_pt,
        round_date=fields.round_date,
        result=fields.result,
        test_id=test_id,
    )


@router.post("/quality/rounds")
def add_round(request: Request, user: Checker, fields: RoundPosted) -> Response:
    try:
        quality_proficiency.add_round(database(request), user, _round_form(fields))
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _quality_page(
            request,
            status_code=http_status(exc),
            round_form=fields.model_dump(),
            errors=errors,
            problem=problem,
        )
    return RedirectResponse("/quality?done=round#rounds", status_code=303)


def _round_page(request: Request, round_id: int, *, status_code: int = 200, **extra: Any) -> Response:
    try:
        entry = quality_proficiency.round_entry(database(request), round_id)
    except NotFound as exc:
        raise HTTPException(404, str(exc)) from None
    return render(
        request,
        "pages/quality_round.html",
        status_code=status_code,
        entry=entry,
        form=extra.get("form") or quality_proficiency.as_form(entry),
        methods=sorted(METHODS),
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
    )


@router.get("/quality/rounds/{round_id}")
def round_page(request: Request, round_id: IdPath, user: Checker) -> Response:
    return _round_page(request, round_id)


@router.post("/quality/rounds/{round_id}")
def update_round(request: Request, round_id: IdPath, user: Checker, fields: RoundPosted) -> Response:
    try:
        quality_proficiency.update_round(
            database(request), user, round_id, _round_form(fields), fields.reason
        )
    except NotFound as exc:
        raise HTTPException(404, str(exc)) from None
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _round_page(
            request,
            round_id,
            status_code=http_status(exc),
            form=fields.model_dump(),
            errors=errors,
            problem=problem,
        )
    return RedirectResponse("/quality?done=round#rounds", status_code=303)


# --- one reference soil -----------------------------------------------------------------------


def _choice(raw: str, choices: list[tuple[str, str]]) -> tuple[str, str] | None:
    """The (method, key) a query names as "method:key", else the first the soil has."""
    method, _, key = raw.partition(":")
    if (method, key) in choices:
        return method, key
    return choices[0] if choices else None


def _soil_page(
    request: Request,
    soil_id: int,
    *,
    shown: str = "",
    technician: str = "",
    status_code: int = 200,
    **extra: Any,
) -> Response:
    db = database(request)
    try:
        soil = refs.soil(db, soil_id)
        choices = quality_charts.chart_choices(db, soil_id)
    except NotFound as exc:
        raise HTTPException(404, str(exc)) from None
    picked = _choice(shown, choices)
    chart = svg = None
    technicians: list[User] = []
    if picked:
        chart = quality_charts.chart(db, soil_id, *picked)  # everyone: the technicians to choose from
        technicians = chart.technicians
        who = record_id(technician)
        if who is not None and any(u.id == who for u in technicians):
            chart = quality_charts.chart(db, soil_id, *picked, technician_id=who)
        drawn = quality_report.control_chart_svg(chart)
        svg = Markup(drawn) if drawn else None  # our own escaped SVG (server/reports/charts.py)
    return render(
        request,
        "pages/quality_soil.html",
        status_code=status_code,
        soil=soil,
        choices=choices,
        picked=picked,
        chart=chart,
        svg=svg,
        technicians=technicians,
        portions=refs.portions(db, soil_id),
        form=extra.get("form")
        or {
            "code": soil.code,
            "name": soil.name,
            "description": soil.description,
            "assigned_values": assigned_text(soil.assigned_values),
            "active": "1" if soil.active else "0",
        },
        link_form=extra.get("link_form", {"job_code": "", "sample_code": ""}),
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
        message=extra.get("message"),
        label_of=quality_report.label_of,
    )


@router.get("/quality/soils/{soil_id}")
def soil_page(
    request: Request, soil_id: IdPath, user: Staff, chart: str = "", technician: str = "", done: str = ""
) -> Response:
    return _soil_page(request, soil_id, shown=chart, technician=technician, message=_done(done))


@router.post("/quality/soils/{soil_id}")
def update_soil(
    request: Request,
    soil_id: IdPath,
    user: Checker,
    code: Text = "",
    name: Text = "",
    description: Text = "",
    assigned_values: Text = "",
    active: Text = "",
) -> Response:
    form = {
        "code": code,
        "name": name,
        "description": description,
        "assigned_values": assigned_values,
        "active": active,
    }
    try:
        refs.update_soil(
            database(request),
            user,
            soil_id,
            code,
            name,
            description,
            parse_assigned(assigned_values),
            active == "1",
        )
    except NotFound as exc:
        raise HTTPException(404, str(exc)) from None
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _soil_page(
            request, soil_id, status_code=http_status(exc), form=form, errors=errors, problem=problem
        )
    return RedirectResponse(f"/quality/soils/{soil_id}?done=soil", status_code=303)


@router.post("/quality/soils/{soil_id}/samples")
def link_sample(
    request: Request, soil_id: IdPath, user: Checker, job_code: Text = "", sample_code: Text = ""
) -> Response:
    db = database(request)
    try:
        refs.soil(db, soil_id)
    except NotFound as exc:
        raise HTTPException(404, str(exc)) from None
    form = {"job_code": job_code, "sample_code": sample_code}
    try:
        refs.link_sample(db, user, refs.find_sample(db, job_code, sample_code), soil_id)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _soil_page(
            request, soil_id, status_code=http_status(exc), link_form=form, errors=errors, problem=problem
        )
    return RedirectResponse(f"/quality/soils/{soil_id}?done=linked#portions", status_code=303)


@router.post("/quality/soils/{soil_id}/samples/{sample_id}/unlink")
def unlink_sample(
    request: Request, soil_id: IdPath, sample_id: IdPath, user: Checker, reason: Text = ""
) -> Response:
    db = database(request)
    try:
        refs.soil(db, soil_id)
    except NotFound as exc:
        raise HTTPException(404, str(exc)) from None
    try:
        refs.unlink_sample(db, user, sample_id, reason)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _soil_page(request, soil_id, status_code=http_status(exc), errors=errors, problem=problem)
    return RedirectResponse(f"/quality/soils/{soil_id}?done=unlinked#portions", status_code=303)


# --- the review desk's extra flags, and the report ----------------------------------------------


@router.get("/quality/tests/{test_id}/flags")
def test_flags(request: Request, test_id: IdPath, user: Checker) -> Response:
    """The quality flags of a test from the reference soils' charts and its duplicate pair, as
    the fragment the review page loads beside the engine's own flags."""
    try:
        flags = quality_charts.quality_flags(database(request), test_id)
    except NotFound as exc:
        raise HTTPException(404, str(exc)) from None
    return render(request, "partials/quality_flags.html", flags=flags, test_id=test_id)


@router.get("/quality/report.pdf")
def quality_report_pdf(request: Request, user: Checker) -> Response:
    printed = datetime.now(UTC).replace(microsecond=0)
    content = quality_report.report_pdf(database(request), printed)
    name = f"quality-report-{printed.date().isoformat()}.pdf"
    return Response(
        content,
        media_type="application/pdf",
        headers={"Content-Disposition": f'inline; filename="{name}"', "Cache-Control": "no-store"},
    )
