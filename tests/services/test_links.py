"""Client links: random token kept only as a hash, expiry, withdrawal, job limit, every use logged."""

from __future__ import annotations

from datetime import timedelta

import pytest
from sqlmodel import select

from server.db.session import Database
from server.db.tables import Job, LinkAccess, ShareLink, utcnow
from server.services import bench, jobs, links, reports, review, samples
from server.services.errors import Forbidden, Invalid
from tests.conftest import PASSWORDS, People
from tests.support.scenario import ATTERBERG, small_job


def _expire(db: Database, link_id: int) -> None:
    """Move a link's expiry into the past (the clock cannot be waited on in a test)."""
    with db.transaction() as s:
        link = s.get(ShareLink, link_id)
        assert link is not None
        link.expires_at = utcnow() - timedelta(seconds=1)
        s.add(link)


def _issue(db: Database, people: People, test_id: int, job_id: int) -> int:
    saved = bench.save_readings(db, people.tech, test_id, ATTERBERG, 1)
    test = bench.submit(db, people.tech, test_id, saved.test.version)
    review.approve(db, people.review, test_id, PASSWORDS["review"], test.version)
    return (
        reports.issue_report(db, people.review, job_id, "http://lab.example", password=PASSWORDS["review"]).id
        or 0
    )


def test_keeps_only_the_hash_of_a_long_random_token(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    made = links.create_link(db, people.review, job.job_id, 7, "designer")
    assert len(made.token) >= 43  # 32 random bytes, base64url: 256 bits (S5 asks for at least 128)
    with db.session() as s:
        stored = s.exec(select(ShareLink)).one()
    assert stored.token_hash == links.token_hash(made.token) and made.token not in stored.token_hash


def test_opens_the_job_and_logs_the_access(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    made = links.create_link(db, people.review, job.job_id, 7)
    view = links.open_link(db, made.token, path="/share/x", remote_addr="127.0.0.1", user_agent="test")
    assert view.refused is None and [j.job.id for j in view.jobs] == [job.job_id]
    with db.session() as s:
        log = s.exec(select(LinkAccess)).all()
    assert [(a.outcome, a.remote_addr) for a in log] == [("ok", "127.0.0.1")]


def test_refuses_an_expired_or_withdrawn_or_unknown_link_and_logs_it(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    expired = links.create_link(db, people.review, job.job_id, 1)
    _expire(db, expired.link.id or 0)
    withdrawn = links.create_link(db, people.review, job.job_id, 30)
    links.revoke_link(db, people.review, withdrawn.link.id or 0, "Engagement ended by the client")
    for token, why in ((expired.token, "expired"), (withdrawn.token, "revoked")):
        view = links.open_link(db, token, path="/")
        assert (view.refused, view.jobs, view.report_ids) == (why, [], set())
    unknown = links.open_link(db, "not-a-token", path="/")
    assert unknown.refused == "unknown" and unknown.jobs == []
    with db.session() as s:
        assert sorted(a.outcome for a in s.exec(select(LinkAccess))) == ["expired", "revoked"]


def test_a_link_limited_to_one_job_shows_nothing_of_the_clients_other_jobs(
    db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    first = _issue(db, people, job.test_id, job.job_id)
    with db.session() as s:
        client_id = s.get(Job, job.job_id).client_id  # type: ignore[union-attr]
    other_job = jobs.create_job(db, people.admin, client_id, "T-200", "Second job", "Second site")
    location = samples.add_location(db, people.admin, other_job.id or 0, "BH9")
    sample = samples.add_sample(db, people.admin, location.id or 0, "BH9-S1", 1.0, 1.45, "U100", "Soft CLAY")
    (test,) = jobs.request_tests(db, people.admin, [sample.id or 0], ["atterberg"])
    second = _issue(db, people, test.id or 0, other_job.id or 0)

    limited = links.create_link(db, people.review, job.job_id, 7)
    view = links.open_link(db, limited.token, path="/")
    assert [j.job.code for j in view.jobs] == ["T-100"] and view.report_ids == {first}

    whole = links.create_link(db, people.review, job.job_id, 7, whole_client=True)
    view = links.open_link(db, whole.token, path="/")
    assert [j.job.code for j in view.jobs] == ["T-100", "T-200"] and view.report_ids == {first, second}
    assert view.whole_client


def test_lists_every_link_that_opens_a_job_with_its_state_and_use(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    open_one = links.create_link(db, people.review, job.job_id, 7, "designer")
    whole = links.create_link(db, people.review, job.job_id, 7, "client office", whole_client=True)
    gone = links.create_link(db, people.review, job.job_id, 7, "old")
    links.revoke_link(db, people.review, gone.link.id or 0, "Engagement ended by the client")
    old = links.create_link(db, people.review, job.job_id, 7, "expired")
    _expire(db, old.link.id or 0)
    links.open_link(db, open_one.token, path="/share/…")
    links.open_link(db, open_one.token, path="/share/…/reports/1.pdf")
    links.open_link(db, gone.token, path="/share/…")
    found = links.job_links(db, job.job_id)
    states = {row.link.label: (row.state, row.scope, row.uses) for row in found.links}
    assert states == {
        "designer": ("open", "this job", 2),
        "client office": ("open", "all jobs of Test Client Ltd", 0),
        "old": ("withdrawn", "this job", 1),
        "expired": ("expired", "this job", 0),
    }
    assert [(a.outcome, label) for a, label in found.log] == [
        ("revoked", "old"),
        ("ok", "designer"),
        ("ok", "designer"),
    ]
    assert whole.link.job_id is None


def test_a_technician_cannot_create_or_withdraw_a_link(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    with pytest.raises(Forbidden):
        links.create_link(db, people.tech, job.job_id, 7)
    made = links.create_link(db, people.review, job.job_id, 7)
    with pytest.raises(Forbidden):
        links.revoke_link(db, people.tech, made.link.id or 0, "Engagement ended by the client")


@pytest.mark.parametrize("days", [0, -3, 367])
def test_refuses_a_validity_outside_one_day_to_a_year(db: Database, people: People, days: int) -> None:
    job = small_job(db, people.admin)
    with pytest.raises(Invalid):
        links.create_link(db, people.review, job.job_id, days)
