"""My bench: each person's open work by job and sample, and the start page each role lands on."""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient

from server.db.session import Database
from server.services import bench, jobs, review, samples
from tests.conftest import PASSWORDS, People
from tests.support.http import sign_in
from tests.support.scenario import ATTERBERG, small_job


@pytest.mark.parametrize(
    ("username", "start"), [("tech", "/bench"), ("review", "/review"), ("admin", "/jobs")]
)
def test_each_role_starts_on_its_own_page(
    app_client: TestClient, db: Database, username: str, start: str
) -> None:
    sign_in(app_client, username, PASSWORDS[username])
    reply = app_client.get("/", follow_redirects=False)
    assert reply.status_code == 303 and reply.headers["location"] == start


def _tests_shown(reply: object, section: str = "mine") -> dict[str, list[tuple[str, str]]]:
    """{sample code: [(method, status), ...]} as the page's context carries them."""
    groups = reply.context[section]  # type: ignore[attr-defined]
    return {s.sample.code: [(t.method, t.status) for t in s.tests] for job in groups for s in job.samples}


def test_my_bench_lists_my_open_tests_by_job_and_sample_with_the_next_step(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)  # its atterberg test is requested and assigned to nobody
    location = samples.add_location(db, people.admin, job.job_id, "BH2")
    deep = samples.add_sample(db, people.admin, location.id or 0, "BH2-S4", 4.0, 4.45, "U100", "Stiff CLAY")
    tech, other = people.tech.id, people.review2.id
    mine = jobs.request_tests(db, people.admin, [job.sample_id], ["plastic-limit", "water-content"], tech)
    jobs.request_tests(db, people.admin, [deep.id or 0], ["hydrometer"], tech)
    jobs.request_tests(db, people.admin, [deep.id or 0], ["sieve"], other)  # someone else's
    done = jobs.request_tests(db, people.admin, [deep.id or 0], ["atterberg"], tech)[0]
    saved = bench.save_readings(db, people.tech, done.id or 0, ATTERBERG, 1)
    handed = bench.submit(db, people.tech, done.id or 0, saved.test.version)
    review.approve(
        db, people.review, done.id or 0, PASSWORDS["review"], handed.version
    )  # finished: not shown
    bench.save_readings(
        db, people.tech, mine[1].id or 0, {"determinations": ATTERBERG["water_content"]["determinations"]}, 1
    )

    sign_in(app_client, "tech", PASSWORDS["tech"])
    reply = app_client.get("/bench")
    assert reply.status_code == 200 and reply.template.name == "pages/my_bench.html"  # type: ignore[attr-defined]
    assert _tests_shown(reply) == {
        "BH1-S1": [("plastic-limit", "requested"), ("water-content", "draft")],
        "BH2-S4": [("hydrometer", "requested")],
    }
    assert reply.context["summary"] == [("draft", 1), ("requested", 2)]  # type: ignore[attr-defined]
    assert _tests_shown(reply, "open_to_all") == {"BH1-S1": [("atterberg", "requested")]}
    # the next step of each, from server/workflow/states.py NEXT_STEP, beside a link to the bench page
    assert "finish readings and hand in" in reply.text and "enter readings" in reply.text
    assert f'href="/tests/{mine[1].id}"' in reply.text


def test_a_draft_i_entered_stays_on_my_bench_though_assigned_to_nobody(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    bench.save_readings(db, people.tech, job.test_id, ATTERBERG, 1)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    reply = app_client.get("/bench")
    assert _tests_shown(reply) == {"BH1-S1": [("atterberg", "draft")]}
    sign_in(app_client, "review2", PASSWORDS["review2"])  # nobody else sees it as theirs
    assert app_client.get("/bench").context["mine"] == []  # type: ignore[attr-defined]


def test_a_returned_test_shows_the_reviewers_reason_on_my_bench(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    saved = bench.save_readings(db, people.tech, job.test_id, ATTERBERG, 1)
    handed = bench.submit(db, people.tech, job.test_id, saved.test.version)
    review.return_test(db, people.review, job.test_id, "Re-weigh tin L2", handed.version)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    reply = app_client.get("/bench")
    assert _tests_shown(reply) == {"BH1-S1": [("atterberg", "returned")]}
    assert "correct and hand in again" in reply.text and "Re-weigh tin L2" in reply.text


def test_my_bench_needs_a_signed_in_person(app_client: TestClient) -> None:
    reply = app_client.get("/bench", follow_redirects=False)
    assert reply.status_code == 303 and reply.headers["location"].startswith("/signin")
