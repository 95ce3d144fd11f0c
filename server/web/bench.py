"""The bench page of a test: readings typed in, results computed as they are typed."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Annotated, Any

from fastapi import APIRouter, Depends, HTTPException, Request
from fastapi.responses import RedirectResponse
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_user
from server.db.queries import TestRow, test_rows
from server.db.tables import LabTest, User
from server.engine.contract import Evaluation
from server.reports import charts
from server.services import bench
from server.services.errors import Invalid, ServiceError, http_status
from server.web.bench_forms import SHEETS, Input, Rows, Section
from server.web.forms import errors_by_path, lookup, readings_from_form
from server.web.templating import render
from server.workflow.states import is_editable

router = APIRouter(dependencies=[Depends(csrf_protect)], include_in_schema=False)
Staff = Annotated[User, Depends(require_user)]


@dataclass
class Cell:
    input: Input
    name: str
    value: Any
    error: str | None


@dataclass
class SheetRow:
    number: int
    cells: list[Cell]
    result: float | None


@dataclass
class SectionView:
    section: Section
    rows: list[SheetRow]


def _row_result(ev: Evaluation, section: Rows, i: int) -> float | None:
    values = ev.results.get(section.result_key) or []
    if i >= len(values):
        return None
    value = values[i]
    if section.result_field and isinstance(value, dict):
        value = value.get(section.result_field)
    return value if isinstance(value, int | float) else None


def sheet_view(method: str, readings: dict[str, Any], ev: Evaluation) -> list[SectionView]:
    """The sheet's sections with typed values, per-field refusals and per-row results."""
    errors = errors_by_path(ev.errors)
    views: list[SectionView] = []
    for section in SHEETS.get(method, ()):
        if isinstance(section, Rows):
            typed = lookup(readings, section.path) or []
            count = max(section.rows, len(typed) + 1)
            rows = []
            for i in range(count):
                cells = []
                for inp in section.inputs:
                    path = f"{section.path}.{i}.{inp.key}"
                    cells.append(Cell(inp, "r." + path, lookup(readings, path), errors.get(path)))
                rows.append(SheetRow(i + 1, cells, _row_result(ev, section, i)))
            views.append(SectionView(section, rows))
        else:
            cells = [
                Cell(inp, "r." + inp.key, lookup(readings, inp.key), errors.get(inp.key))
                for inp in section.inputs
            ]
            views.append(SectionView(section, [SheetRow(0, cells, None)]))
    return views


def load_row(request: Request, test_id: int) -> TestRow:
    with database(request).session() as s:
        rows = test_rows(s, LabTest.id == test_id)
    if not rows:
        raise HTTPException(404, "no such test")
    return rows[0]


def flow_svg(ev: Evaluation) -> str | None:
    trials = ev.results.get("liquid_limit_trials")
    fit = ev.results.get("flow_curve")
    if not trials:
        return None
    return charts.flow_curve_svg(trials, fit)


def _page(
    request: Request,
    row: TestRow,
    readings: dict[str, Any],
    ev: Evaluation,
    *,
    status_code: int = 200,
    message: str | None = None,
    problem: str | None = None,
) -> Response:
    return render(
        request,
        "pages/bench.html",
        status_code=status_code,
        row=row,
        test=row.test,
        editable=is_editable(row.test.status),
        sections=sheet_view(row.test.method, readings, ev),
        ev=ev,
        chart=flow_svg(ev),
        message=message,
        problem=problem,
    )


@router.get("/tests/{test_id}")
def bench_page(request: Request, test_id: int, user: Staff, saved: int = 0) -> Response:
    row = load_row(request, test_id)
    readings = row.test.readings or {}
    ev = bench.preview(row.test.method, readings)
    return _page(request, row, readings, ev, message="Draft saved." if saved else None)


@router.post("/tests/{test_id}/preview")
async def bench_preview(request: Request, test_id: int, user: Staff) -> Response:
    """Results for what is typed so far, without storing anything (htmx, as the technician types)."""
    row = load_row(request, test_id)
    readings = readings_from_form((await request.form()).multi_items())  # type: ignore[arg-type]
    ev = bench.preview(row.test.method, readings)
    return render(
        request,
        "partials/bench_results.html",
        test=row.test,
        sections=sheet_view(row.test.method, readings, ev),
        ev=ev,
        chart=flow_svg(ev),
    )


@router.post("/tests/{test_id}/readings")
async def save_readings(request: Request, test_id: int, user: Staff) -> Response:
    """Save the sheet as a draft and, when asked (``then=submit``), hand it in."""
    form = await request.form()
    readings = readings_from_form(form.multi_items())  # type: ignore[arg-type]
    try:
        version = int(str(form.get("version", "")))
    except ValueError:
        version = -1
    db = database(request)
    try:
        saved = bench.save_readings(db, user, test_id, readings, version)
    except ServiceError as exc:
        return _refused(request, test_id, readings, exc, "Nothing was saved")
    if form.get("then") == "submit":
        try:
            bench.submit(db, user, test_id, saved.test.version)
        except ServiceError as exc:
            return _refused(request, test_id, readings, exc, "Draft saved, but not handed in")
    return RedirectResponse(f"/tests/{test_id}?saved=1", status_code=303)


def _refused(
    request: Request, test_id: int, readings: dict[str, Any], exc: ServiceError, what: str
) -> Response:
    """The sheet again, as typed, with the refusal and every field's message."""
    row = load_row(request, test_id)
    detail = (
        f"{len(exc.errors)} value(s) need attention, listed below" if isinstance(exc, Invalid) else str(exc)
    )
    return _page(
        request,
        row,
        readings,
        bench.preview(row.test.method, readings),
        status_code=http_status(exc),
        problem=f"{what}: {detail}.",
    )
