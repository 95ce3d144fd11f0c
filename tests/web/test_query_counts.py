"""The pages that list what a laboratory accumulates ask the database the same number of
questions whatever the number of rows (issue S11 point 3): the statements of one GET are counted
on the app's own engine, with a job of 2 samples and again once the lab holds 20 samples more.

A page that loaded its rows one by one (a query per sample, per test, per event) would count
more the second time; a page of the big generated laboratory (tests/benchmarks/bench_big_lab.py)
answers in the same statements as these.
"""

from __future__ import annotations

from fastapi.testclient import TestClient

from server.db.session import Database
from server.services import tokens
from tests.conftest import PASSWORDS, People
from tests.support.http import sign_in
from tests.support.statements import statements_sent
from tests.workflow.flows import Lab


def _paths(job_id: int) -> list[str]:
    return [
        "/jobs",
        f"/jobs/{job_id}",
        "/review",
        "/audit",
        f"/jobs/{job_id}/trail",
        "/turnaround",
        "/api/v1/jobs",
        "/api/v1/tests",
        f"/api/v1/jobs/{job_id}/samples",
    ]


def _statements_per_page(app_client: TestClient, db: Database, token: str, job_id: int) -> dict[str, int]:
    """Sign in afresh (an audited event: nothing a page keeps is still current), then count the
    statements of one GET of each page, each answered 200."""
    sign_in(app_client, "admin", PASSWORDS["admin"])
    found = {}
    for path in _paths(job_id):
        headers = {"Authorization": f"Bearer {token}"} if path.startswith("/api/") else {}
        with statements_sent(db) as statements:
            reply = app_client.get(path, headers=headers)
        assert reply.status_code == 200, path
        found[path] = len(statements)
    return found


def _grow(db: Database, people: People, lab: Lab, other: Lab) -> None:
    """Eighteen samples more in the job (20 in all) and two in another one, in every state a list shows."""
    for n in range(5):
        lab.new_test("water-content" if n % 2 else "atterberg")
        lab.submitted(people.tech, "water-content")
        lab.submitted(people.tech)
    lab.approved(people.tech, people.review)
    lab.approved(people.tech, people.review2)
    lab.approved(people.tech, people.review)
    other.submitted(people.tech)
    other.new_test()


def test_every_listing_page_asks_as_many_questions_for_20_samples_as_for_2(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "QC-1")
    lab.submitted(people.tech)
    lab.approved(people.tech, people.review)
    other = Lab(db, people.admin, "QC-2")
    token = tokens.create_token(db, people.admin, people.admin, "query counts", "read").plaintext
    small = _statements_per_page(app_client, db, token, lab.job.id or 0)
    _grow(db, people, lab, other)
    assert lab.samples == 20
    large = _statements_per_page(app_client, db, token, lab.job.id or 0)
    assert large == small
    assert all(0 < n <= 30 for n in small.values()), small  # a page is a handful of queries
