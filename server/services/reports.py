"""Issuing and re-issuing a report: gather approved tests, plan the report, store the rendered PDF
with its hash.

Issuing is a signature made in the request; the PDF is rendered afterwards by a worker process
(``services/renders.py`` queues it, ``server/tasks`` renders it), never in the web request and
never inside the write transaction. Storing then checks that every test is still the approved
revision that was signed and rendered, and stores the bytes, SHA-256, content fingerprint and
audit event together, with the AGS4 file of the same test revisions (made in the same read as
the PDF's data) and its SHA-256. A stored report is never rendered again: downloads serve the
stored bytes.

A re-issue after an amendment is revision n + 1 of the same report number, carrying the
current approved revisions of the same samples and methods; the earlier revision is marked
superseded (never deleted) and stays downloadable. Withdrawn samples are left out of every
report, and of a re-issue.
"""

from __future__ import annotations

import hashlib
from collections.abc import Collection, Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlalchemy.orm import defer
from sqlmodel import Session, col, func, select

from server.db.queries import TestRow, current_tests, users_by_id
from server.db.session import Database
from server.db.tables import (
    Client,
    Job,
    Laboratory,
    LabTest,
    Report,
    ReportAgs4,
    ReportRender,
    ReportTest,
    User,
    utcnow,
)
from server.engine import METHODS
from server.exchange.ags4_write import ags4_text
from server.exchange.job_export import job_export
from server.reports.data import (
    LabInfo,
    MethodNote,
    ReportData,
    RevisionNote,
    Signatory,
    TestEntry,
    content_fingerprint,
)
from server.reports.names import ROLE_NAMES
from server.services import audit
from server.services.errors import Conflict, Forbidden, NotFound, invalid
from server.services.review import Signature, required_reason, signer_in
from server.workflow.states import CHECKERS, Role

REPORT_MEANING = (
    "Authorised for issue: I have checked that this report carries the approved results listed, "
    "as approved, and I release it to the client"
)
ROLE_TITLES = ROLE_NAMES  # the one table of names (server/reports/names.py)
# Optional free text in a test's readings: how the test departed from its standard.
DEVIATION_KEY = "deviation"


def check_issuer(actor: User) -> None:
    """Only a reviewer or an admin issues, re-issues, previews or re-renders reports."""
    if Role(actor.role) not in CHECKERS:
        raise Forbidden("only a reviewer or admin issues reports")


def _iso(when: datetime | None) -> str:
    return "" if when is None else when.replace(microsecond=0).isoformat()


def test_entry(row: TestRow, people: dict[int, User] | None = None) -> TestEntry:
    """A test as a report carries it; with ``people`` (approvers by id), its approval too (the
    review page shows a test as its report page would, before anyone has signed it)."""
    t = row.test
    method = METHODS.get(t.method)
    approval = None
    if people is not None and t.approved_by_id is not None and t.approved_at is not None:
        signer = people.get(t.approved_by_id)
        approval = Signatory(
            signer.full_name if signer else f"user {t.approved_by_id}",
            ROLE_TITLES.get(t.approver_role or (signer.role if signer else ""), t.approver_role or ""),
            t.signature_meaning or "",
            _iso(t.approved_at),
        )
    return TestEntry(
        sample_code=row.sample.code,
        location_code=row.location.code,
        depth_from_m=row.sample.depth_from_m,
        depth_to_m=row.sample.depth_to_m,
        sample_type=row.sample.sample_type,
        description=row.sample.description,
        method=t.method,
        method_title=method.title if method else t.method,
        results=t.results or {},
        readings=t.readings or {},
        flags=t.flags or [],
        revision=t.revision,
        approval=approval,
        amendment_reason=(t.amendment_reason or "") if t.revision > 1 else "",
    )


def _parts(test: TestEntry) -> list[str]:
    """The methods a test followed: itself, and for the Atterberg set each part's own method."""
    out = [test.method]
    if test.method == "atterberg":
        r = test.readings
        if isinstance(r.get("water_content"), dict):
            out.append("water-content")
        ll = r.get("liquid_limit")
        if isinstance(ll, dict) and isinstance(ll.get("method"), str):
            out.append(ll["method"])
        if isinstance(r.get("plastic_limit"), dict):
            out.append("plastic-limit")
    return out


def method_notes(tests: Sequence[TestEntry]) -> list[MethodNote]:
    """Every method the report's tests followed, with its standard, and the deviations recorded
    on them (a test's readings may carry ``"deviation": "..."``), named by sample."""
    deviations: dict[str, list[str]] = {}
    order: list[str] = []
    for t in tests:
        for m in _parts(t):
            if m not in order:
                order.append(m)
        text = t.readings.get(DEVIATION_KEY)
        if isinstance(text, str) and text.strip():
            deviations.setdefault(t.method, []).append(f"{t.sample_code}: {text.strip()}")
    known = [m for m in order if m in METHODS]
    return [
        MethodNote(METHODS[m].title, METHODS[m].standard, "; ".join(deviations.get(m, [])))
        for m in sorted(known, key=lambda m: (m != "atterberg", METHODS[m].title))
    ]


def next_report_number(session: Session, job: Job) -> str:
    """Report numbers run per job: JOB-R01, JOB-R02, ... (revisions keep their number)."""
    count = session.exec(
        select(func.count(func.distinct(Report.number))).where(Report.job_id == job.id)
    ).one()
    return f"{job.code}-R{int(count) + 1:02d}"


def _scope(rows: Sequence[TestRow], approved: Sequence[TestRow]) -> str:
    chosen = {r.sample.id for r in rows}
    available = {r.sample.id for r in approved}
    if chosen == available:
        return f"All {len(chosen)} sample{'s' if len(chosen) != 1 else ''} of the job with approved tests."
    return f"Selected samples: {len(chosen)} of the {len(available)} samples of the job with approved tests."


def report_data(
    session: Session,
    job: Job,
    rows: Sequence[TestRow],
    issuer: User,
    number: str,
    revision: int,
    issued_at: datetime,
    base_url: str,
    *,
    scope: str = "",
    history: Sequence[RevisionNote] = (),
) -> ReportData:
    """The report's content from records: everything it prints, nothing it must look up later."""
    lab = session.exec(select(Laboratory)).first() or Laboratory(name="Laboratory")
    client = session.get(Client, job.client_id)
    people = users_by_id(session, [r.test.approved_by_id for r in rows])
    tests = [test_entry(r, people) for r in rows]
    return ReportData(
        lab=LabInfo(lab.name, lab.address, lab.accreditation),
        client_name=client.name if client else "",
        job_code=job.code,
        job_title=job.title,
        site=job.site,
        report_number=number,
        revision=revision,
        issue_date=issued_at.date(),
        issued_at_iso=_iso(issued_at),
        approver=Signatory(
            issuer.full_name, ROLE_TITLES.get(issuer.role, issuer.role), REPORT_MEANING, _iso(issued_at)
        ),
        verify_url=f"{base_url.rstrip('/')}/verify?number={number}&revision={revision}",
        tests=tests,
        methods=method_notes(tests),
        scope=scope,
        history=history,
    )


def frozen_ags4(session: Session, job_id: int, rows: Sequence[TestRow], data: ReportData) -> bytes:
    """The AGS4 file issued with a report: exactly the test revisions it carries, dated its
    issue date, TRAN_ISNO its revision. Made from the same records as the PDF and in the same
    read, so that the two never disagree; the same records give the same bytes."""
    records = job_export(session, job_id, [r.test.id or 0 for r in rows])
    text = ags4_text(
        records,
        issued_on=data.issue_date,
        issue=data.revision,
        description=f"Results of report {data.report_number} revision {data.revision}",
    )
    return text.encode("ascii")


@dataclass
class Prepared:
    """A planned report revision: its data, the test rows it carries, the signature and the
    frozen AGS4 file; what the render needs and what storing checks."""

    job_id: int
    rows: list[TestRow]
    data: ReportData
    signature: Signature
    ags4: bytes
    previous_id: int | None = None
    overlap_decision: str = ""


def store_rendered(db: Database, render_id: int, attempt: int, prepared: Prepared, pdf: bytes) -> Report:
    """Store the rendered report and mark its render done, in one transaction, if nothing it
    carries changed while it was rendered and this attempt still owns the render (a render
    given up for lost and retried elsewhere must not be stored twice)."""
    data, rows = prepared.data, prepared.rows
    with db.transaction() as s:
        render = s.get(ReportRender, render_id, with_for_update=True)
        if render is None or render.status != "rendering" or render.attempts != attempt:
            raise Conflict("this render was given up and retried meanwhile; its result was not stored")
        signer = signer_in(s, prepared.signature)
        actor = signer
        found = {
            tid: (version, status)
            for tid, version, status in s.exec(
                select(LabTest.id, LabTest.version, LabTest.status).where(
                    col(LabTest.id).in_([r.test.id for r in rows])
                )
            ).all()
        }
        if any(found.get(r.test.id) != (r.test.version, "approved") for r in rows):
            raise Conflict("a test changed while the report was being prepared; issue it again")
        previous = None
        if prepared.previous_id is None:
            job = s.get(Job, prepared.job_id)
            if job is None or next_report_number(s, job) != data.report_number:
                raise Conflict("another report was issued on this job meanwhile; issue it again")
        else:
            previous = s.get(Report, prepared.previous_id, options=[defer(Report.pdf)])  # type: ignore[arg-type]
            if previous is None or previous.status != "issued":
                raise Conflict("this report was re-issued meanwhile; open the job again")
        report = Report(
            job_id=prepared.job_id,
            number=data.report_number,
            revision=data.revision,
            status="issued",
            issued_at=datetime.fromisoformat(data.issued_at_iso),
            issued_by_id=signer.id or 0,
            sha256=hashlib.sha256(pdf).hexdigest(),
            fingerprint=content_fingerprint(data),
            pdf=pdf,
            signature_meaning=prepared.signature.meaning,
            overlap_decision=prepared.overlap_decision,
        )
        s.add(report)
        s.flush()
        for r in rows:
            s.add(ReportTest(report_id=report.id or 0, test_id=r.test.id or 0))
        ags4 = ReportAgs4(
            report_id=report.id or 0, sha256=hashlib.sha256(prepared.ags4).hexdigest(), data=prepared.ags4
        )
        s.add(ags4)
        after: dict[str, Any] = {
            "number": data.report_number,
            "revision": data.revision,
            "sha256": report.sha256,
            "fingerprint": report.fingerprint,
            "ags4_sha256": ags4.sha256,
            "tests": [r.test.id for r in rows],
            "signed_by": signer.username,
            "signature_meaning": prepared.signature.meaning,
        }
        if prepared.overlap_decision:
            after["overlap_decision"] = prepared.overlap_decision
        if previous is not None:
            previous.status = "superseded"
            previous.superseded_by_id = report.id
            s.add(previous)
            after["supersedes"] = previous.id
            audit.record(
                s,
                actor,
                "report",
                previous.id or 0,
                "supersede",
                before={"status": "issued", "superseded_by_id": None},
                after={"status": "superseded", "superseded_by_id": report.id},
            )
        action = "issue" if previous is None else "reissue"
        audit.record(
            s, actor, "report", report.id or 0, action, after=after, reason=prepared.overlap_decision or None
        )
        render.status, render.report_id, render.finished_at, render.error = "done", report.id, utcnow(), ""
        s.add(render)
        return report


def _reportable(rows: Sequence[TestRow]) -> list[TestRow]:
    """The approved tests of samples not withdrawn: what a report may carry."""
    return [r for r in rows if r.test.status == "approved" and r.sample.withdrawn_at is None]


def _chosen(
    session: Session, job_id: int, sample_ids: Collection[int] | None
) -> tuple[Job, list[TestRow], list[TestRow]]:
    """The job, the approved tests to report (of the chosen samples, or all), and all approved."""
    job = session.get(Job, job_id)
    if job is None:
        raise NotFound(f"job {job_id} does not exist")
    current = current_tests(session, job_id)
    approved = _reportable(current)
    if not approved:
        raise invalid("tests", "no approved test to report on this job")
    if sample_ids is None:
        return job, approved, approved
    wanted = set(sample_ids)
    if not wanted:
        raise invalid("samples", "choose at least one sample to report")
    withdrawn = sorted(r.sample.code for r in current if r.sample.id in wanted and r.sample.withdrawn_at)
    if withdrawn:
        raise invalid("samples", f"sample {withdrawn[0]} is withdrawn: it is left out of reports")
    if wanted - {r.sample.id for r in approved}:
        raise invalid("samples", "a chosen sample has no approved test on this job")
    return job, [r for r in approved if r.sample.id in wanted], approved


def new_report_data(
    session: Session,
    job_id: int,
    issuer: User,
    issued_at: datetime,
    base_url: str,
    sample_ids: Collection[int] | None = None,
    *,
    number: str | None = None,
) -> tuple[ReportData, list[TestRow]]:
    """The data of revision 1 of a new report of the job (or of its chosen samples), and the test
    rows it carries. Given the same records and issue record, the same data: a stored report can
    be rendered again from it byte for byte while its records are unchanged."""
    job, rows, approved = _chosen(session, job_id, sample_ids)
    number = number or next_report_number(session, job)
    scope = _scope(rows, approved)
    return report_data(session, job, rows, issuer, number, 1, issued_at, base_url, scope=scope), rows


def plan_issue(
    session: Session,
    job_id: int,
    issuer: User,
    issued_at: datetime,
    base_url: str,
    sample_ids: Collection[int] | None,
    signature: Signature,
    *,
    overlap_decision: str = "",
    number: str | None = None,
) -> Prepared:
    """Revision 1 of a new report carrying every approved test of the job, or of the chosen
    samples only. A test revision that another current report carries already is refused
    unless the issuer records why both reports should carry it (``overlap_decision``)."""
    data, rows = new_report_data(session, job_id, issuer, issued_at, base_url, sample_ids, number=number)
    decision = _overlap_decision(session, rows, overlap_decision)
    ags4 = frozen_ags4(session, job_id, rows, data)
    return Prepared(job_id, rows, data, signature, ags4, overlap_decision=decision)


def issue_report(
    db: Database,
    actor: User,
    job_id: int,
    base_url: str,
    sample_ids: Collection[int] | None = None,
    *,
    password: str,
    overlap_decision: str = "",
) -> Report:
    """Issue a report and render it here and now, through the same queue and task code a worker
    runs: for the command line, the demo and tests. The web pages queue the render instead
    (``services.renders.request_issue``) and return at once."""
    from server.services import renders
    from server.tasks.render import render_now

    queued = renders.request_issue(
        db, actor, job_id, base_url, sample_ids, password=password, overlap_decision=overlap_decision
    )
    return render_now(db, queued.id or 0)


def unreported_sample_ids(db: Database, job_id: int) -> list[int]:
    """The samples of the job with approved tests that no current report carries yet: what
    "only samples not yet reported" issues."""
    with db.session() as s:
        approved = _reportable(current_tests(s, job_id))
        reported = already_reported(s, approved)
    return sorted({r.sample.id or 0 for r in approved} - set(reported))


def already_reported(session: Session, rows: Sequence[TestRow]) -> dict[int, str]:
    """The samples (of these test rows) whose test revisions a current report carries, with
    that report's number: what issuing them again would print twice."""
    ids = [r.test.id for r in rows]
    if not ids:
        return {}
    carried = session.exec(
        select(ReportTest.test_id, Report.number)
        .join(Report, col(Report.id) == ReportTest.report_id)
        .where(col(ReportTest.test_id).in_(ids), Report.status == "issued")
    ).all()
    by_test = dict(carried)
    return {r.sample.id or 0: by_test[r.test.id] for r in rows if r.test.id in by_test}


def _overlap_decision(session: Session, rows: Sequence[TestRow], decision: str) -> str:
    """The recorded decision to issue test revisions another current report carries, or ""
    when there are none; refused (field "overlap_decision") when there are and no reason is
    given, naming the samples and their report."""
    overlap = already_reported(session, rows)
    if not overlap:
        return ""
    if decision.strip():
        return required_reason(decision, "issue these samples in a second current report")
    codes = sorted(
        {(r.sample.code, overlap[r.sample.id or 0]) for r in rows if (r.sample.id or 0) in overlap}
    )
    listed = ", ".join(f"{code} (in {number})" for code, number in codes[:6])
    more = f" and {len(codes) - 6} more" if len(codes) > 6 else ""
    raise invalid(
        "overlap_decision",
        f"{len(codes)} sample(s) are already in a current report: {listed}{more}. Issue only the samples "
        "not yet reported, re-issue that report after an amendment, or record why a second report should "
        "carry them",
    )


# What a preview prints where an issued report has its number: a preview takes none of the job's
# numbers, so that no copy of it can pass for the report issued later under that number.
PREVIEW_NUMBER = "PREVIEW"


def preview_report_html(
    db: Database,
    actor: User,
    job_id: int,
    base_url: str,
    sample_ids: Collection[int] | None = None,
    style_nonce: str = "",
) -> str:
    """The HTML of the report that issuing now would give, every page marked as a preview.
    Nothing is stored; the charts are the same SVG the PDF would carry. ``style_nonce``: as
    ``render_report_html``'s."""
    check_issuer(actor)
    with db.session() as s:
        data, _ = new_report_data(s, job_id, actor, utcnow(), base_url, sample_ids, number=PREVIEW_NUMBER)
    from server.reports.pdf import render_report_html

    return render_report_html(data, preview=True, style_nonce=style_nonce)


def _latest(rows: Sequence[TestRow]) -> dict[tuple[int, str], TestRow]:
    latest: dict[tuple[int, str], TestRow] = {}
    for r in rows:
        key = (r.test.sample_id, r.test.method)
        if key not in latest or r.test.revision > latest[key].test.revision:
            latest[key] = r
    return latest


def plan_reissue(
    session: Session, report_id: int, issuer: User, issued_at: datetime, base_url: str, signature: Signature
) -> Prepared:
    """Revision n + 1 of an issued report after an amendment.

    It carries the current approved revision of each sample and method of revision n; revision n
    becomes superseded (with ``superseded_by_id``) when it is stored. Refused when a carried
    test's newest revision is not approved yet, or when nothing was amended since revision n.
    """
    s = session
    old = s.get(Report, report_id, options=[defer(Report.pdf)])  # type: ignore[arg-type]
    if old is None:
        raise NotFound(f"report {report_id} does not exist")
    if old.status != "issued":
        raise Conflict(
            f"revision {old.revision} of report {old.number} is superseded; re-issue its current revision"
        )
    job = s.get(Job, old.job_id)
    assert job is not None
    carried_ids = set(s.exec(select(ReportTest.test_id).where(ReportTest.report_id == report_id)).all())
    carried = s.exec(select(LabTest).where(col(LabTest.id).in_(carried_ids))).all()
    everything = current_tests(s, job.id or 0)
    withdrawn = {r.sample.id for r in everything if r.sample.withdrawn_at is not None}
    keys = {(t.sample_id, t.method) for t in carried if t.sample_id not in withdrawn}
    if not keys:
        raise invalid("tests", "every sample this report carries is withdrawn: there is nothing to re-issue")
    latest = _latest([r for r in everything if (r.test.sample_id, r.test.method) in keys])
    pending = [r for r in latest.values() if r.test.status != "approved"]
    if pending:
        r = pending[0]
        raise invalid(
            "tests",
            f"{r.sample.code} ({r.test.method}) revision {r.test.revision} is {r.test.status}, "
            "not approved: approve it before re-issuing",
        )
    if len(latest) < len(keys):
        raise invalid("tests", "a test carried by this report has no current revision")
    rows = [r for r in everything if latest.get((r.test.sample_id, r.test.method)) is r]
    if {r.test.id for r in rows} == carried_ids:
        raise invalid(
            "tests",
            f"nothing in revision {old.revision} was amended since it was issued: it stays current",
        )
    earlier = s.exec(
        select(Report.revision, Report.issued_at, Report.sha256)
        .where(Report.number == old.number)
        .order_by(col(Report.revision))
    ).all()
    history = [RevisionNote(rev, when.date().isoformat(), sha) for rev, when, sha in earlier]
    approved = _reportable(everything)
    data = report_data(
        s,
        job,
        rows,
        issuer,
        old.number,
        old.revision + 1,
        issued_at,
        base_url,
        scope=_scope(rows, approved),
        history=history,
    )
    ags4 = frozen_ags4(s, old.job_id, rows, data)
    return Prepared(old.job_id, rows, data, signature, ags4, old.id)


def reissue_report(db: Database, actor: User, report_id: int, base_url: str, *, password: str) -> Report:
    """Re-issue a report and render it here and now (as ``issue_report``: the command line, the
    demo and tests; the web pages queue it with ``services.renders.request_reissue``)."""
    from server.services import renders
    from server.tasks.render import render_now

    queued = renders.request_reissue(db, actor, report_id, base_url, password=password)
    return render_now(db, queued.id or 0)


@dataclass
class Verdict:
    """The answer of the verification page: genuine and current, superseded, or unknown.

    ``matched`` says what matched: "file" (the SHA-256 of the PDF's bytes), "content" (the
    content fingerprint printed on its pages) or "ags4" (the SHA-256 of the AGS4 file issued
    with it)."""

    state: str  # "current" | "superseded" | "unknown"
    report: Report | None = None
    current: Report | None = None  # the revision that replaces a superseded one
    matched: str = ""


def _clean(digest: str | None) -> str:
    return "".join((digest or "").split()).lower()


def verify(
    db: Database,
    *,
    sha256: str | None = None,
    upload: bytes | None = None,
    number: str | None = None,
) -> Verdict:
    """Find the issued report whose PDF or AGS4 file this is (an ``upload`` of it, or its SHA-256),
    or whose printed content fingerprint this is; with ``number``, only a report of that number
    counts. Reads only."""
    digest = hashlib.sha256(upload).hexdigest() if upload is not None else _clean(sha256)
    if len(digest) != 64 or any(c not in "0123456789abcdef" for c in digest):
        return Verdict("unknown")
    unloaded = defer(Report.pdf)  # type: ignore[arg-type]
    with db.session() as s:
        found = s.exec(
            select(Report).options(unloaded).where((Report.sha256 == digest) | (Report.fingerprint == digest))
        ).first()
        matched = "" if found is None else "file" if found.sha256 == digest else "content"
        if found is None:
            found = s.exec(
                select(Report)
                .options(unloaded)
                .join(ReportAgs4, col(ReportAgs4.report_id) == Report.id)
                .where(ReportAgs4.sha256 == digest)
            ).first()
            matched = "ags4"
        if found is None or (number and found.number != number.strip()):
            return Verdict("unknown")
        if found.status != "superseded":
            return Verdict("current", found, matched=matched)
        newest = s.exec(
            select(Report)
            .options(unloaded)
            .where(Report.number == found.number, Report.status == "issued")
            .order_by(col(Report.revision).desc())
        ).first()
        return Verdict("superseded", found, newest, matched=matched)
