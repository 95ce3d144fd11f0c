"""Use-cases for client links: create, revoke, open, and the lab's view of their use.

A link's token is 256 random bits shown once; only its SHA-256 is stored, so a copy of the
database does not give access. A link opens the issued reports of one client: of one job when
it is limited to that job (the default), else of all that client's jobs. Every use of a link,
refused or not, is logged for the laboratory to see.
"""

from __future__ import annotations

import hashlib
import secrets
from dataclasses import dataclass, field
from datetime import datetime, timedelta

from sqlalchemy.orm import defer
from sqlmodel import Session, col, func, or_, select

from server.db.queries import frozen_ags4_digests
from server.db.session import Database
from server.db.tables import Client, Job, LinkAccess, Report, ShareLink, User, utcnow
from server.services import audit
from server.services.errors import Forbidden, NotFound
from server.services.fields import Checks
from server.services.review import required_reason
from server.workflow.states import CHECKERS, Role

MAX_DAYS = 366
LABEL_MAX = 200  # the column of server.db.tables.ShareLink
TOKEN_BYTES = 32  # 256 bits (at least 128 asked for)


def token_hash(token: str) -> str:
    return hashlib.sha256(token.encode()).hexdigest()


def link_state(link: ShareLink, now: datetime) -> str:
    """ "withdrawn", "expired" or "open" at ``now``."""
    if link.revoked_at is not None:
        return "withdrawn"
    if link.expires_at <= now:
        return "expired"
    return "open"


@dataclass
class NewLink:
    link: ShareLink
    token: str


def create_link(
    db: Database,
    actor: User,
    job_id: int,
    days_valid: int,
    label: str = "",
    *,
    whole_client: bool = False,
) -> NewLink:
    """A new link to a job's issued reports (or, ``whole_client``, to every job of the job's
    client), valid for ``days_valid`` days."""
    if Role(actor.role) not in CHECKERS:
        raise Forbidden("only a reviewer or admin creates client links")
    checks = Checks()
    if not 1 <= days_valid <= MAX_DAYS:
        checks.add("days_valid", f"a link is valid for 1 to {MAX_DAYS} days")
    label = checks.text("label", label, "the label", LABEL_MAX)
    checks.done()
    token = secrets.token_urlsafe(TOKEN_BYTES)
    with db.transaction() as s:
        job = s.get(Job, job_id)
        if job is None:
            raise NotFound(f"job {job_id} does not exist")
        link = ShareLink(
            client_id=job.client_id,
            job_id=None if whole_client else job_id,
            token_hash=token_hash(token),
            label=label,
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
            after={
                "client_id": job.client_id,
                "job_id": link.job_id,
                "label": link.label,
                "expires_at": link.expires_at.isoformat(),
            },
        )
        return NewLink(link, token)


def revoke_link(db: Database, actor: User, link_id: int, reason: str) -> ShareLink:
    """Withdraw a link at once, with the reason (audited); withdrawing it again changes nothing."""
    if Role(actor.role) not in CHECKERS:
        raise Forbidden("only a reviewer or admin withdraws client links")
    reason = required_reason(reason, "withdraw a client link")
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
                reason=reason,
            )
        return link


@dataclass
class JobReports:
    job: Job
    reports: list[Report]  # current revisions first, then superseded ones; PDF bytes not loaded


@dataclass
class ClientView:
    """What a link opens: ``refused`` is "unknown", "expired", "revoked" (or, from the page,
    "throttled": not looked up) and then no data."""

    refused: str | None
    client_name: str = ""
    jobs: list[JobReports] = field(default_factory=list)
    whole_client: bool = False
    ags4: dict[int, str] = field(default_factory=dict)  # frozen AGS4 file's SHA-256, by report id

    @property
    def report_ids(self) -> set[int]:
        return {r.id for j in self.jobs for r in j.reports if r.id is not None}


def _issued_reports(session: Session, job_ids: list[int]) -> dict[int, list[Report]]:
    """Issued reports of these jobs (current ones first, newest first), without their PDF bytes."""
    found: dict[int, list[Report]] = {j: [] for j in job_ids}
    if not job_ids:
        return found
    for report in session.exec(
        select(Report)
        .where(col(Report.job_id).in_(job_ids), col(Report.status).in_(["issued", "superseded"]))
        .options(defer(Report.pdf))  # type: ignore[arg-type]
        .order_by(col(Report.status), col(Report.number).desc(), col(Report.revision).desc())
    ):
        found[report.job_id].append(report)
    return found


def open_link(
    db: Database, token: str, *, path: str, remote_addr: str = "", user_agent: str = ""
) -> ClientView:
    """What a link holder may see: issued reports of the link's job (or client). Logs the access."""
    with db.transaction() as s:
        link = s.exec(select(ShareLink).where(ShareLink.token_hash == token_hash(token))).first()
        if link is None:
            return ClientView("unknown")
        state = link_state(link, utcnow())
        outcome = {"withdrawn": "revoked", "expired": "expired", "open": "ok"}[state]
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
        client = s.get(Client, link.client_id)
        if link.job_id is not None:
            jobs = list(s.exec(select(Job).where(Job.id == link.job_id, Job.client_id == link.client_id)))
        else:
            jobs = list(s.exec(select(Job).where(Job.client_id == link.client_id).order_by(col(Job.code))))
        reports = _issued_reports(s, [j.id for j in jobs if j.id is not None])
        carried = [r.id or 0 for rs in reports.values() for r in rs]
        return ClientView(
            None,
            client.name if client else "",
            [JobReports(j, reports[j.id or 0]) for j in jobs],
            whole_client=link.job_id is None,
            ags4=frozen_ags4_digests(s, carried),
        )


# -- the laboratory's view of its links ---------------------------------------------------------


@dataclass
class LinkRow:
    link: ShareLink
    state: str  # open | expired | withdrawn
    scope: str  # "this job" or "all jobs of <client>"
    uses: int
    last_use: datetime | None


@dataclass
class JobLinks:
    job: Job
    client: Client
    links: list[LinkRow]
    log: list[tuple[LinkAccess, str]]  # newest first, with the link's label


def job_links(db: Database, job_id: int, *, log_limit: int = 200) -> JobLinks:
    """Every link that opens this job (limited to it or to all the client's jobs) and their use."""
    with db.session() as s:
        job = s.get(Job, job_id)
        if job is None:
            raise NotFound(f"job {job_id} does not exist")
        client = s.get(Client, job.client_id)
        assert client is not None
        links = list(
            s.exec(
                select(ShareLink)
                .where(
                    ShareLink.client_id == job.client_id,
                    or_(ShareLink.job_id == job_id, col(ShareLink.job_id).is_(None)),
                )
                .order_by(col(ShareLink.created_at).desc())
            )
        )
        ids = [link.id for link in links]
        uses: dict[int, tuple[int, datetime | None]] = (
            dict(
                (lid, (int(n), last))
                for lid, n, last in s.exec(
                    select(LinkAccess.link_id, func.count(col(LinkAccess.id)), func.max(LinkAccess.at))
                    .where(col(LinkAccess.link_id).in_(ids))
                    .group_by(col(LinkAccess.link_id))
                ).all()
            )
            if ids
            else {}
        )
        log = (
            list(
                s.exec(
                    select(LinkAccess)
                    .where(col(LinkAccess.link_id).in_(ids))
                    .order_by(col(LinkAccess.at).desc(), col(LinkAccess.id).desc())
                    .limit(log_limit)
                )
            )
            if ids
            else []
        )
    now = utcnow()
    labels = {link.id: link.label or f"link {link.id}" for link in links}
    rows = []
    for link in links:
        n, last = uses.get(link.id or 0, (0, None))
        scope = "this job" if link.job_id is not None else f"all jobs of {client.name}"
        rows.append(LinkRow(link, link_state(link, now), scope, n, last))
    return JobLinks(job, client, rows, [(a, labels.get(a.link_id, "")) for a in log])
