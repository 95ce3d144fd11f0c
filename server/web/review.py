"""The reviewer's desk: the queue of handed-in tests, a review page, approve or return."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, Form, Request
from fastapi.responses import RedirectResponse
from sqlmodel import col
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles
from server.db.queries import readings_authors, test_rows, users_by_id
from server.db.tables import LabTest, User
from server.services import bench, review
from server.services.errors import ServiceError, http_status
from server.web.bench import flow_svg, load_row, sheet_view
from server.web.templating import render

router = APIRouter(dependencies=[Depends(csrf_protect)], include_in_schema=False)
Checker = Annotated[User, Depends(require_roles("reviewer", "admin"))]


@router.get("/review")
def queue(request: Request, user: Checker) -> Response:
    """Handed-in tests, flagged ones first, then the oldest first."""
    with database(request).session() as s:
        rows = test_rows(s, col(LabTest.status) == "submitted", order=(col(LabTest.submitted_at),))
    rows.sort(
        key=lambda r: (
            not any(f.get("severity") == "error" for f in r.test.flags or []),
            not r.test.flags,
            r.test.submitted_at,
        )
    )
    return render(request, "pages/review_queue.html", rows=rows)


def _review_page(
    request: Request, user: User, test_id: int, *, status_code: int = 200, problem: str | None = None
) -> Response:
    row = load_row(request, test_id)
    readings = row.test.readings or {}
    ev = bench.preview(row.test.method, readings)
    with database(request).session() as s:
        authors = readings_authors(s, test_id)
        people = users_by_id(s, [*authors, row.test.approved_by_id])
    return render(
        request,
        "pages/review.html",
        status_code=status_code,
        row=row,
        test=row.test,
        ev=ev,
        sections=sheet_view(row.test.method, readings, ev),
        chart=flow_svg(ev),
        authors=[people[a] for a in authors if a in people],
        approver=people.get(row.test.approved_by_id or 0),
        own=user.id in authors,
        meaning=review.DEFAULT_MEANING,
        problem=problem,
    )


@router.get("/review/{test_id}")
def review_page(request: Request, test_id: int, user: Checker) -> Response:
    return _review_page(request, user, test_id)


@router.post("/review/{test_id}/approve")
def approve(
    request: Request,
    test_id: int,
    user: Checker,
    version: Annotated[int, Form()],
    password: Annotated[str, Form()] = "",
    meaning: Annotated[str, Form()] = review.DEFAULT_MEANING,
) -> Response:
    try:
        review.approve(
            database(request),
            user,
            test_id,
            password,
            version,
            meaning=meaning.strip()[:300],
            self_approval_forbidden=request.app.state.settings.self_approval_forbidden,
        )
    except ServiceError as exc:
        return _review_page(
            request, user, test_id, status_code=http_status(exc), problem=f"Not approved: {exc}"
        )
    return RedirectResponse("/review", status_code=303)


@router.post("/review/{test_id}/return")
def return_test(
    request: Request,
    test_id: int,
    user: Checker,
    version: Annotated[int, Form()],
    reason: Annotated[str, Form()] = "",
) -> Response:
    try:
        review.return_test(database(request), user, test_id, reason, version)
    except ServiceError as exc:
        return _review_page(
            request, user, test_id, status_code=http_status(exc), problem=f"Not returned: {exc}"
        )
    return RedirectResponse("/review", status_code=303)
