"""Tests over the JSON API v1: read them (with readings, results and flags), save readings
under the version guard, hand them in, and approve or return them.

Readings go through ``bench.save_readings``, the same service and the same checks as the
bench page, so a value refused on the tablet is refused here with the same words (422), and a
save against a stale version is refused (409) instead of overwriting another person's work.
Who may do what is the workflow's table (``server.workflow.states``), applied by the services;
approving and returning are for reviewers and admins, as the review desk is.
"""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Body, Query, Request
from sqlmodel import Session, col

from server.api.v1 import pages
from server.api.v1.auth import Reader, Reviewer, Writer
from server.api.v1.params import MAX_ID, PathId
from server.api.v1.problems import ApiProblem, ProblemRoute, field_error, problems
from server.api.v1.schemas import (
    READINGS_EXAMPLE,
    ApproveIn,
    LabTestOut,
    LabTestPage,
    ReadingsIn,
    ReadingsSaved,
    ReturnIn,
    SubmitIn,
)
from server.auth.sessions import database
from server.db.queries import TestRow, test_rows
from server.db.tables import Job, LabTest
from server.engine import METHODS
from server.services import bench, review
from server.services.errors import NotFound
from server.workflow.states import Status

router = APIRouter(prefix="/api/v1", route_class=ProblemRoute, tags=["tests"])

CHANGE = problems(400, 401, 403, 404, 409, 422, 429)


def _out(row: TestRow) -> dict[str, Any]:
    test = row.test
    values: dict[str, Any] = test.model_dump()
    values.update(
        job_id=row.job.id,
        job=row.job.code,
        sample=row.sample.code,
        location=row.location.code,
        flags=test.flags or [],
    )
    return values


def _row(s: Session, test_id: int) -> TestRow:
    found = test_rows(s, col(LabTest.id) == test_id)
    if not found:
        raise NotFound(f"test {test_id} does not exist")
    return found[0]


def _test(request: Request, test_id: int) -> LabTestOut:
    with database(request).session() as s:
        return LabTestOut.model_validate(_out(_row(s, test_id)))


StatusFilter = Annotated[Status | None, Query(description="only tests in this status")]
MethodFilter = Annotated[
    str | None, Query(description="only tests of this method id", examples=["atterberg"])
]


def _list(
    request: Request,
    job_id: int | None,
    status: Status | None,
    method: str | None,
    cursor: str | None,
    limit: int,
) -> LabTestPage:
    if method is not None and method not in METHODS:
        raise ApiProblem(
            422,
            f"no method {method!r}: GET /api/v1/methods lists them",
            errors=[field_error(["query", "method"], f"unknown method {method!r}")],
        )
    after, limit = pages.decode(cursor), pages.capped(limit)
    conditions: list[Any] = []
    if job_id is not None:
        conditions.append(col(Job.id) == job_id)
    if status is not None:
        conditions.append(col(LabTest.status) == status.value)
    if method is not None:
        conditions.append(col(LabTest.method) == method)
    if after is not None:
        conditions.append(col(LabTest.id) > after)
    with database(request).session() as s:
        if job_id is not None and s.get(Job, job_id) is None:
            raise NotFound(f"job {job_id} does not exist")
        rows = test_rows(s, *conditions, order=(col(LabTest.id),), limit=limit + 1)
    items, following = pages.page(rows, limit, lambda r: r.test.id or 0)
    return LabTestPage(items=[LabTestOut.model_validate(_out(r)) for r in items], next=following)


@router.get("/tests", response_model=LabTestPage, responses=problems(401, 404, 422, 429))
def list_tests(
    request: Request,
    who: Reader,
    job_id: Annotated[
        int | None, Query(ge=1, le=MAX_ID, description="only this job's tests", examples=[7])
    ] = None,
    status: StatusFilter = None,
    method: MethodFilter = None,
    cursor: pages.Cursor = None,
    limit: pages.Limit = pages.DEFAULT_LIMIT,
) -> LabTestPage:
    """Tests of every job (every revision; a superseded one has status superseded), in id order."""
    return _list(request, job_id, status, method, cursor, limit)


@router.get("/jobs/{job_id}/tests", response_model=LabTestPage, responses=problems(401, 404, 422, 429))
def list_job_tests(
    request: Request,
    job_id: PathId,
    who: Reader,
    status: StatusFilter = None,
    method: MethodFilter = None,
    cursor: pages.Cursor = None,
    limit: pages.Limit = pages.DEFAULT_LIMIT,
) -> LabTestPage:
    """The job's tests, with their readings, results and flags: the results out."""
    return _list(request, job_id, status, method, cursor, limit)


@router.get("/tests/{test_id}", response_model=LabTestOut, responses=problems(401, 404, 422, 429))
def get_test(request: Request, test_id: PathId, who: Reader) -> LabTestOut:
    return _test(request, test_id)


@router.put("/tests/{test_id}/readings", response_model=ReadingsSaved, responses=CHANGE)
def put_readings(
    request: Request,
    test_id: PathId,
    who: Writer,
    body: Annotated[
        ReadingsIn,
        Body(
            openapi_examples={
                "water content": {
                    "summary": "one determination of water content",
                    "value": {"version": 1, "readings": READINGS_EXAMPLE},
                }
            }
        ),
    ],
) -> ReadingsSaved:
    """Store the whole readings as the test's draft, if its version is still ``version``.

    A value entered wrong is refused (422, each field in ``errors``) and nothing is stored;
    values not entered yet are fine in a draft and listed in ``missing``."""
    saved = bench.save_readings(database(request), who.user, test_id, body.readings, body.version)
    missing = [e.to_dict() for e in saved.evaluation.errors if e.kind == "missing"]
    with database(request).session() as s:
        values = _out(_row(s, test_id))
    return ReadingsSaved.model_validate({**values, "changed": saved.changed, "missing": missing})


@router.post("/tests/{test_id}/submit", response_model=LabTestOut, responses=CHANGE)
def submit(
    request: Request,
    test_id: PathId,
    who: Writer,
    body: Annotated[
        SubmitIn,
        Body(
            openapi_examples={
                "plain": {"summary": "hand in", "value": {"version": 2, "reasons": {}}},
                "with a reason": {
                    "summary": "hand in with an error flag explained",
                    "value": {
                        "version": 2,
                        "reasons": {
                            "equipment-calibration-due": "Balance B-2 checked against the 200 g weight today"
                        },
                    },
                },
            }
        ),
    ],
) -> LabTestOut:
    """Hand the stored draft in for review (the bench's own rule: every reading accepted, a
    reason for each error flag that stands)."""
    bench.submit(database(request), who.user, test_id, body.version, body.reasons)
    return _test(request, test_id)


@router.post("/tests/{test_id}/approve", response_model=LabTestOut, responses=CHANGE)
def approve(
    request: Request,
    test_id: PathId,
    who: Reviewer,
    body: Annotated[
        ApproveIn,
        Body(
            openapi_examples={
                "approve": {
                    "summary": "sign the approval",
                    "value": {
                        "version": 3,
                        "password": "the reviewer's own password",
                        "meaning": review.DEFAULT_MEANING,
                    },
                }
            }
        ),
    ],
) -> LabTestOut:
    """Sign a submitted test as approved: the password again, as on the review desk (nobody
    approves a test they entered, unless the laboratory turned that rule off)."""
    review.approve(
        database(request),
        who.user,
        test_id,
        body.password,
        body.version,
        meaning=body.meaning,
        self_approval_forbidden=request.app.state.settings.self_approval_forbidden,
    )
    return _test(request, test_id)


@router.post("/tests/{test_id}/return", response_model=LabTestOut, responses=CHANGE)
def return_test(
    request: Request,
    test_id: PathId,
    who: Reviewer,
    body: Annotated[
        ReturnIn,
        Body(
            openapi_examples={
                "return": {
                    "summary": "send it back to the bench",
                    "value": {
                        "version": 3,
                        "reason": "Trial 2 blow count looks mistyped: please check the sheet",
                    },
                }
            }
        ),
    ],
) -> LabTestOut:
    """Return a submitted test to the bench with a reason."""
    review.return_test(database(request), who.user, test_id, body.reason, body.version)
    return _test(request, test_id)
