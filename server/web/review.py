"""The reviewer's desk: the queue with filters and counts, batch approval, a review page per
test (the results as reported, the flags and curves a decision rests on, the readings as the PDF
prints them, every stored value folded away, what changed against the earlier revision),
approve, return, amend; and the job page's note of reports that need re-issue.

A decision posts, then redirects to the desk (post/redirect/get), which confirms what was done
and offers the next test waiting; a refused one stays on the review page with the message at
its field."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Annotated, Any
from urllib.parse import urlencode

from fastapi import APIRouter, Depends, Form, HTTPException, Request
from fastapi.responses import RedirectResponse
from sqlmodel import col
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles, require_user
from server.db import audit_queries, review_queries
from server.db.queries import TestRow, test_rows, users_by_id
from server.db.tables import Job, LabTest, User, utcnow
from server.engine.contract import Evaluation
from server.reports import charts
from server.reports.names import method_name, plural, state_name
from server.reports.view import TestSection, section_for
from server.services import amendments, bench, reports, review
from server.services.errors import Invalid, ServiceError, http_status, invalid
from server.web.jobs import page_number
from server.web.params import Count, FormVersion, IdPath, PageRoute, lenient_number
from server.web.templating import is_htmx, render
from server.workflow.states import Action, can

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Checker = Annotated[User, Depends(require_roles("reviewer", "admin"))]
Staff = Annotated[User, Depends(require_user)]

AGE_CHOICES = (1, 2, 7)
AGE_MAX_DAYS = 36500  # a hundred years: a longer wait is a typing slip (timedelta ends at 999,999,999 days)


# -- the queue ---------------------------------------------------------------------------------


def queue_filter(
    job: str | None, method: str | None, person: str | None, age: str | None, flags: str | None
) -> review_queries.QueueFilter:
    """The filter the query string asks for; a value that makes no sense narrows nothing."""
    return review_queries.QueueFilter(
        job_id=lenient_number("job", job),
        method=(method or "").strip() or None,
        author_id=lenient_number("person", person),
        older_than_days=lenient_number("age", age, AGE_MAX_DAYS, low=0, what="a number of days"),
        flags=flags if flags in review_queries.FLAG_CHOICES else None,
    )


def _waited(row: review_queries.QueueRow) -> str:
    hours = int(row.waited.total_seconds() // 3600)
    return f"{plural(hours // 24, 'day')} {hours % 24} h" if hours >= 24 else f"{hours} h"


@dataclass
class Decided:
    """What the desk confirms after a decision: the test as it now stands, in words."""

    row: TestRow
    text: str


def _decided(request: Request, user: User, test_id: int | None) -> Decided | None:
    """The confirmation of the decision just made on ``test_id``, read from the test itself (the
    address only says which test): approved by this reviewer, returned, or else its state now."""
    if not test_id:
        return None
    with database(request).session() as s:
        rows = test_rows(s, col(LabTest.id) == test_id)
    if not rows:
        return None
    row = rows[0]
    test = row.test
    what = f"{method_name(test.method)} on {row.location.code} / {row.sample.code}, revision {test.revision}"
    if test.status == "approved" and test.approved_by_id == user.id:
        return Decided(row, f"✔ Approved and signed: {what}.")
    if test.status == "returned":
        return Decided(row, f"↩ Returned to the bench: {what}. The technician sees your reason.")
    return Decided(row, f"{what} is now {state_name(test.status)}.")


def _queue_page(
    request: Request,
    user: User,
    wanted: review_queries.QueueFilter,
    *,
    status_code: int = 200,
    problem: str | None = None,
    message: str | None = None,
    page: int = 1,
    decided: Decided | None = None,
) -> Response:
    settings = request.app.state.settings
    with database(request).session() as s:
        queue = review_queries.review_queue(
            s, user, wanted, utcnow(), page=page, self_approval_forbidden=settings.self_approval_forbidden
        )
    done = decided.row.test.id if decided else None
    # The next test this reviewer may decide on, in the queue's order (errors first).
    next_up = next(
        (q for q in queue.rows if q.row.test.id != done and not (q.own and settings.self_approval_forbidden)),
        None,
    )
    return render(
        request,
        "pages/review_queue.html",
        status_code=status_code,
        queue=queue,
        rows=queue.rows,
        waited={q.row.test.id: _waited(q) for q in queue.rows},
        any_batchable=any(q.batchable for q in queue.rows),
        wanted=wanted,
        age_choices=AGE_CHOICES,
        flag_choices=review_queries.FLAG_CHOICES,
        meaning=review.DEFAULT_MEANING,
        problem=problem,
        message=message,
        decided=decided,
        next_up=next_up,
        previous_url=_queue_url(wanted, queue.previous_page) if queue.previous_page else None,
        next_url=_queue_url(wanted, queue.next_page) if queue.next_page else None,
    )


def _queue_url(wanted: review_queries.QueueFilter, page: int) -> str:
    """The queue's address for another page, keeping what it is narrowed to."""
    query = {
        "job": wanted.job_id,
        "method": wanted.method,
        "person": wanted.author_id,
        "age": wanted.older_than_days,
        "flags": wanted.flags,
        "page": page,
    }
    return "/review?" + urlencode({k: v for k, v in query.items() if v is not None})


@router.get("/review")
def queue(
    request: Request,
    user: Checker,
    job: str | None = None,
    method: str | None = None,
    person: str | None = None,
    age: str | None = None,
    flags: str | None = None,
    approved: Count = 0,
    decided: Count = 0,
    page: str = "",
) -> Response:
    """Handed-in tests: errors first, then warnings, then the rest, the longest waiting first,
    a page at a time; after a decision, its confirmation and the next test to review."""
    message = f"{plural(approved, 'test')} approved and signed." if approved > 0 else None
    wanted = queue_filter(job, method, person, age, flags)
    return _queue_page(
        request,
        user,
        wanted,
        message=message,
        page=page_number(page),
        decided=_decided(request, user, decided),
    )


def _selection(values: list[str]) -> list[tuple[int, int]]:
    """The ticked tests as (id, version seen); a value that is not "id:version" is refused."""
    picked = []
    for value in values:
        test_id, _, version = value.partition(":")
        if not (test_id.isdigit() and version.isdigit()):
            raise invalid("tests", f"{value!r} is not a test of the list")
        picked.append((int(test_id), int(version)))
    return picked


@router.post("/review/batch")
async def approve_batch(request: Request, user: Checker) -> Response:
    """One signature for the ticked tests without any flag: all approved, or none."""
    form = await request.form()
    values = [str(v) for v in form.getlist("test")]
    try:
        done = review.approve_batch(
            database(request),
            user,
            _selection(values),
            str(form.get("password", "")),
            meaning=str(form.get("meaning", review.DEFAULT_MEANING)),
            self_approval_forbidden=request.app.state.settings.self_approval_forbidden,
        )
    except ServiceError as exc:
        return _queue_page(
            request,
            user,
            review_queries.QueueFilter(),
            status_code=http_status(exc),
            problem=f"Nothing was approved: {exc}",
        )
    return RedirectResponse(f"/review?approved={len(done)}", status_code=303)


# -- the review page ---------------------------------------------------------------------------


@dataclass
class Revision:
    """The earlier revision and what changed since, field by field."""

    test: LabTest
    readings: list[amendments.Change]
    results: list[amendments.Change]


def curves(ev: Evaluation, label: str) -> list[str]:
    """The fitted curve and the charts a reviewer checks the results against (our own SVG)."""
    r = ev.results
    out = []
    if r.get("liquid_limit_trials"):
        out.append(charts.flow_curve_svg(r["liquid_limit_trials"], r.get("flow_curve")))
    if isinstance(r.get("liquid_limit"), int | float) and isinstance(r.get("plasticity_index"), int | float):
        out.append(charts.plasticity_chart_svg([(label, r["liquid_limit"], r["plasticity_index"])]))
    for key, title in (("combined_curve", "Grading curve"), ("grading_curve", "Grading curve")):
        points = [
            (float(p["size_mm"]), float(p["percent_passing"]))
            for p in r.get(key) or []
            if isinstance(p, dict)
            and isinstance(p.get("size_mm"), int | float)
            and isinstance(p.get("percent_passing"), int | float)
        ]
        if points:
            out.append(
                charts.xy_chart(
                    [charts.Series(label, points)],
                    title=title,
                    x_label="Particle size (mm)",
                    y_label="Percent passing (%)",
                    x_log=True,
                    y_range=(0.0, 100.0),
                )
            )
            break
    return out


def load_row(request: Request, test_id: int) -> TestRow:
    with database(request).session() as s:
        rows = test_rows(s, col(LabTest.id) == test_id)
    if not rows:
        raise HTTPException(404, "no such test")
    return rows[0]


def as_reported(row: TestRow) -> TestSection:
    """The test as its page of the certified report prints it: the results named, with units
    and rounding, the method's notes, the readings as tables with each water content."""
    entry = reports.test_entry(row)
    return section_for(0, entry)


def review_context(request: Request, user: User, test_id: int) -> dict[str, Any]:
    """Everything the review page shows, read in a fixed number of queries."""
    row = load_row(request, test_id)
    test = row.test
    readings = test.readings or {}
    ev = bench.preview(database(request), test, readings)
    settings = request.app.state.settings
    with database(request).session() as s:
        chain = review_queries.revisions(s, test_id)
        chain_ids = [t.id or 0 for t in chain]
        authors = review_queries.revision_authors(s, test_id)
        later = review_queries.later_revision(s, test_id)
        history = audit_queries.events_of_tests(s, chain_ids)
        reissue = review_queries.needs_reissue(s, test_ids=chain_ids)
        carrying = review_queries.reports_carrying(s, chain_ids)
        people = users_by_id(
            s, [*authors, *(t.approved_by_id for t in chain), *(e.actor_id for e in history)]
        )
    previous = next((t for t in chain if t.id == test.previous_revision_id), None)
    own = user.id in authors
    return {
        "row": row,
        "test": test,
        "report": as_reported(row),
        "raw_readings": amendments.leaves(readings),
        "computed": amendments.leaves(test.results),
        "flags": test.flags or [],
        "flag_reasons": test.flag_reasons or {},
        "charts": curves(ev, row.sample.code),
        "authors": sorted((people[a] for a in authors if a in people), key=lambda u: u.full_name),
        "approver": people.get(test.approved_by_id or 0),
        "own": own,
        "blocked_as_author": own and settings.self_approval_forbidden,
        "may_approve": can(test.status, Action.approve, user.role),
        "may_return": can(test.status, Action.return_, user.role),
        "may_amend": can(test.status, Action.amend, user.role) and later is None,  # one open amendment
        "previous": Revision(
            previous,
            amendments.changes(previous.readings, test.readings),
            amendments.changes(previous.results, test.results),
        )
        if previous
        else None,
        "later": later,
        "chain": chain,
        "revision_of": {t.id: t.revision for t in chain},
        "signers": people,
        "actors": people,  # who did each event of the history, by name
        "history": history,
        "reissue": reissue,
        "carrying": carrying,
        "meaning": review.DEFAULT_MEANING,
    }


def _review_page(
    request: Request,
    user: User,
    test_id: int,
    *,
    status_code: int = 200,
    problem: str | None = None,
    errors: dict[str, str] | None = None,
) -> Response:
    return render(
        request,
        "pages/review.html",
        status_code=status_code,
        problem=problem,
        errors=errors or {},
        **review_context(request, user, test_id),
    )


@router.get("/review/{test_id}")
def review_page(request: Request, test_id: IdPath, user: Checker) -> Response:
    return _review_page(request, user, test_id)


def _refused(request: Request, user: User, test_id: int, exc: ServiceError, what: str) -> Response:
    detail = "; ".join(e.message for e in exc.errors) if isinstance(exc, Invalid) else str(exc)
    errors = {str(e.loc[0]): e.message for e in exc.errors if e.loc} if isinstance(exc, Invalid) else {}
    return _review_page(
        request, user, test_id, status_code=http_status(exc), problem=f"{what}: {detail}", errors=errors
    )


@router.post("/review/{test_id}/approve")
def approve(
    request: Request,
    test_id: IdPath,
    user: Checker,
    version: FormVersion,
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
            meaning=meaning,
            self_approval_forbidden=request.app.state.settings.self_approval_forbidden,
        )
    except ServiceError as exc:
        return _refused(request, user, test_id, exc, "Not approved")
    return RedirectResponse(f"/review?decided={test_id}", status_code=303)


@router.post("/review/{test_id}/return")
def return_test(
    request: Request,
    test_id: IdPath,
    user: Checker,
    version: FormVersion,
    reason: Annotated[str, Form()] = "",
) -> Response:
    try:
        review.return_test(database(request), user, test_id, reason, version)
    except ServiceError as exc:
        return _refused(request, user, test_id, exc, "Not returned")
    return RedirectResponse(f"/review?decided={test_id}", status_code=303)


@router.post("/review/{test_id}/amend")
def amend(
    request: Request,
    test_id: IdPath,
    user: Checker,
    version: FormVersion,
    reason: Annotated[str, Form()] = "",
) -> Response:
    """Open the next revision; the bench page of the new draft comes next."""
    try:
        new = amendments.amend(database(request), user, test_id, reason, version)
    except ServiceError as exc:
        return _refused(request, user, test_id, exc, "Not amended")
    return RedirectResponse(f"/tests/{new.id}", status_code=303)


# -- reports that need re-issue, for the job page ----------------------------------------------


@router.get("/jobs/{job_id}/reissue")
def job_reissue(request: Request, job_id: IdPath, user: Staff) -> Response:
    """The job's issued reports that carry an amended test (a fragment the job page loads)."""
    with database(request).session() as s:
        job = s.get(Job, job_id)
        if job is None:
            raise HTTPException(404, "no such job")
        found = review_queries.needs_reissue(s, job_id=job_id)
    name = "partials/reissue_list.html" if is_htmx(request) else "pages/reissue.html"
    return render(request, name, reissue=found, job=job)
