"""My bench: the work of the person signed in, by job and sample, with the next step of each test."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, Request
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_user
from server.db.register_queries import my_bench, unassigned_requests
from server.db.tables import User
from server.engine import METHODS
from server.web.params import PageRoute
from server.web.templating import render

SUMMARY_ORDER = ("returned", "draft", "requested", "submitted")  # most urgent first

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Staff = Annotated[User, Depends(require_user)]


@router.get("/bench")
def bench_home(request: Request, user: Staff) -> Response:
    with database(request).session() as s:
        mine = my_bench(s, user.id or 0)
        open_to_all = unassigned_requests(s)
    counts: dict[str, int] = {}
    for job in mine:
        for sample in job.samples:
            for test in sample.tests:
                counts[test.status] = counts.get(test.status, 0) + 1
    return render(
        request,
        "pages/my_bench.html",
        mine=mine,
        open_to_all=open_to_all,
        summary=[(status, counts[status]) for status in SUMMARY_ORDER if counts.get(status)],
        titles={m.id: m.title for m in METHODS.values()},
    )
