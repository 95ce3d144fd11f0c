"""Use-cases for client links: create, revoke, open.

A link's token is 256 random bits shown once; only its SHA-256 is stored, so a copy of the
database does not give access. Every use of a link is logged for the laboratory to see.
"""

from __future__ import annotations

import hashlib
import secrets
from dataclasses import dataclass
from datetime import timedelta

from sqlmodel import select

from server.db.queries import job_reports
from server.db.session import Database
from server.db.tables import Job, LinkAccess, Report, ShareLink, User, utcnow
from server.services import audit
from server.services.errors import NotFound, invalid

MAX_DAYS = 366


def token_hash(token: str) -> str:
    return hashlib.sha256(token.encode()).hexdigest()


@dataclass
class NewLink:
    link: ShareLink
    token: str


def create_link(db: Database, actor: User, job_id: int, days_valid: int, label: str = "") -> NewLink:
    """A new link to a job's issued reports, valid for ``days_valid`` days."""
    if not 1 <= days_valid <= MAX_DAYS:
        raise invalid("days_valid", f"a link is valid for 1 to {MAX_DAYS} days")
    token = secrets.token_urlsafe(32)
    with db.transaction() as s:
        job = s.get(Job, job_id)
        if job is None:
            raise NotFound(f"job {job_id} does not exist")
        link = ShareLink(
            client_id=job.client_id,
            job_id=job_id,
            token_hash=token_hash(token),
            label=label.strip()[:200],
            created_by_id=actor.id or 0,
            expires_at=utcnow() + timedelta(days=days_valid),
        )
        s.add(link)
        s.flush()
        audit.record(
            s,
            actor,
            "share_link",
            link.id or 0,
            "create",
            after={"job_id": job_id, "label": link.label, "expires_at": link.expires_at.isoformat()},
        )
        return NewLink(link, token)


def revoke_link(db: Database, actor: User, link_id: int) -> ShareLink:
    with db.transaction() as s:
        link = s.get(ShareLink, link_id)
        if link is None:
            raise NotFound(f"link {link_id} does not exist")
        if link.revoked_at is None:
            link.revoked_at = utcnow()
            s.add(link)
            audit.record(
                s,
                actor,
                "share_link",
                link_id,
                "revoke",
                before={"revoked_at": None},
                after={"revoked_at": link.revoked_at.isoformat()},
            )
        return link


@dataclass
class ClientView:
    """What a link opens: ``refused`` is "unknown", "expired" or "revoked" and then no data."""

    refused: str | None
    job: Job | None = None
    reports: list[Report] | None = None


def open_link(
    db: Database, token: str, *, path: str, remote_addr: str = "", user_agent: str = ""
) -> ClientView:
    """What a link holder may see: the job's issued reports. Logs the access either way."""
    with db.transaction() as s:
        link = s.exec(select(ShareLink).where(ShareLink.token_hash == token_hash(token))).first()
        if link is None:
            return ClientView("unknown")
        if link.revoked_at is not None:
            outcome = "revoked"
        elif link.expires_at <= utcnow():
            outcome = "expired"
        else:
            outcome = "ok"
        s.add(
            LinkAccess(
                link_id=link.id or 0,
                path=path[:300],
                outcome=outcome,
                remote_addr=remote_addr[:64],
                user_agent=user_agent[:300],
            )
        )
        if outcome != "ok":
            return ClientView(outcome)
        job = s.get(Job, link.job_id) if link.job_id is not None else None
        return ClientView(None, job, job_reports(s, link.job_id) if link.job_id is not None else [])
