"""Client links: random token kept only as a hash, expiry, withdrawal, every use logged."""

from __future__ import annotations

from datetime import timedelta

import pytest
from sqlmodel import select

from server.db.session import Database
from server.db.tables import LinkAccess, ShareLink, utcnow
from server.services import links
from server.services.errors import Invalid
from tests.conftest import People
from tests.support.scenario import small_job


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
    assert view.refused is None and view.job is not None and view.job.id == job.job_id
    with db.session() as s:
        log = s.exec(select(LinkAccess)).all()
    assert [(a.outcome, a.remote_addr) for a in log] == [("ok", "127.0.0.1")]


def test_refuses_an_expired_or_withdrawn_or_unknown_link_and_logs_it(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    expired = links.create_link(db, people.review, job.job_id, 1)
    with db.transaction() as s:
        link = s.get(ShareLink, expired.link.id)
        assert link is not None
        link.expires_at = utcnow() - timedelta(seconds=1)
        s.add(link)
    withdrawn = links.create_link(db, people.review, job.job_id, 30)
    links.revoke_link(db, people.review, withdrawn.link.id or 0)
    assert links.open_link(db, expired.token, path="/").refused == "expired"
    assert links.open_link(db, withdrawn.token, path="/").refused == "revoked"
    unknown = links.open_link(db, "not-a-token", path="/")
    assert unknown.refused == "unknown" and unknown.job is None and unknown.reports is None
    with db.session() as s:
        assert sorted(a.outcome for a in s.exec(select(LinkAccess))) == ["expired", "revoked"]


@pytest.mark.parametrize("days", [0, -3, 367])
def test_refuses_a_validity_outside_one_day_to_a_year(db: Database, people: People, days: int) -> None:
    job = small_job(db, people.admin)
    with pytest.raises(Invalid):
        links.create_link(db, people.review, job.job_id, days)
