"""The records of one AGS4 export, read from the database: a job's approved results, or exactly
the test revisions a report carried (DESIGN.md section 7).

By default the export carries what a report may carry: the approved test revisions of the job's
samples that are not withdrawn (an approved revision is the current one: an amendment
supersedes it at once). Given ``test_ids`` it carries exactly those revisions, whatever has
happened to them since (amended, or their sample withdrawn), so that an issued report's file
can be made again from the revisions the report froze; every one of them must be a test of the
job that was approved. Only the locations and samples the tests were made on are carried.

The caller owns the session (a read; nothing is written). The writer, ``ags4_write``, is pure.
"""

from __future__ import annotations

from collections.abc import Sequence

from sqlmodel import Session, col, select

from server.db.queries import TestRow, test_rows
from server.db.tables import Client, Job, Laboratory, LabTest
from server.engine import METHODS
from server.exchange.ags4_write import JobExport, LocationRecord, SampleRecord, TestRecord
from server.services.errors import NotFound, invalid

APPROVED = "approved"


def job_export(session: Session, job_id: int, test_ids: Sequence[int] | None = None) -> JobExport:
    """The export of job ``job_id``: its approved results, or the revisions ``test_ids``.

    Refused with ``NotFound`` when the job does not exist or a test id is not a test of the job,
    and ``Invalid`` (field "tests") when a named revision was never approved, or when the job has
    no approved result to export.
    """
    job = session.get(Job, job_id)
    if job is None:
        raise NotFound(f"job {job_id} does not exist")
    if test_ids is None:
        rows = [
            r
            for r in test_rows(session, col(Job.id) == job_id, col(LabTest.status) == APPROVED)
            if r.sample.withdrawn_at is None
        ]
        if not rows:
            raise invalid(
                "tests",
                f"job {job.code} has no approved test yet (withdrawn samples are left out): "
                "there are no results to export",
            )
    else:
        wanted = set(test_ids)
        rows = test_rows(session, col(Job.id) == job_id, col(LabTest.id).in_(wanted)) if wanted else []
        missing = wanted - {r.test.id for r in rows}
        if missing:
            raise NotFound(f"not tests of job {job.code}: {', '.join(map(str, sorted(missing)))}")
        unapproved = sorted(r.test.id or 0 for r in rows if r.test.approved_at is None)
        if unapproved:
            raise invalid(
                "tests", f"never approved, so not exported: tests {', '.join(map(str, unapproved))}"
            )
    return _export(session, job, rows)


def _export(session: Session, job: Job, rows: list[TestRow]) -> JobExport:
    client = session.get(Client, job.client_id)
    lab = session.exec(select(Laboratory).order_by(col(Laboratory.id))).first()
    locations = {r.location.id: r.location for r in rows}
    samples = {r.sample.id: (r.sample, r.location.code) for r in rows}
    return JobExport(
        number=job.code,
        title=job.title,
        site=job.site,
        client=client.name if client else "",
        laboratory=lab.name if lab else "",
        accreditation=lab.accreditation if lab else "",
        locations=[
            LocationRecord(loc.code, loc.kind, loc.easting, loc.northing, loc.ground_level_m)
            for loc in sorted(locations.values(), key=lambda loc: loc.code)
        ],
        samples=[
            SampleRecord(code, s.code, s.depth_from_m, s.depth_to_m, s.sample_type, s.description, s.remarks)
            for s, code in sorted(
                samples.values(), key=lambda pair: (pair[1], pair[0].depth_from_m, pair[0].code)
            )
        ],
        tests=[
            TestRecord(
                r.sample.code,
                r.test.method,
                r.test.revision,
                r.test.id or 0,
                r.test.results or {},
                r.test.readings or {},
            )
            for r in sorted(rows, key=lambda r: r.test.id or 0)
        ],
        standards={method_id: method.standard for method_id, method in sorted(METHODS.items())},
    )
