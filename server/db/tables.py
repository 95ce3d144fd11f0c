"""The database tables (SQLModel), one class per record the laboratory keeps.

Client -> Job -> Location -> Sample -> LabTest (one method on one sample, one row per
revision) -> readings and results (JSON, as the calculation contract defines them). Reports
gather approved test revisions; share links give clients access to a job's issued reports;
audit events record every change and are never updated or deleted.

Schema changes go through the Alembic migrations in migrations/, never ``create_all``.
"""

from __future__ import annotations

from datetime import UTC, date, datetime
from typing import Any

import sqlalchemy as sa
from sqlalchemy.dialects.postgresql import JSONB
from sqlmodel import Field, SQLModel

# Constraint names that Alembic can address on every backend (batch mode on SQLite needs them).
SQLModel.metadata.naming_convention = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}


class UTCDateTime(sa.TypeDecorator[datetime]):
    """A timestamp stored as naive UTC and always handed back timezone-aware.

    SQLite keeps no time zone, PostgreSQL does; storing UTC everywhere and attaching the zone
    on the way out makes comparisons (link expiry, turnaround) behave the same on both.
    """

    impl = sa.DateTime
    cache_ok = True

    def process_bind_param(self, value: datetime | None, dialect: sa.Dialect) -> datetime | None:
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError("timestamps must be timezone-aware")
        return value.astimezone(UTC).replace(tzinfo=None)

    def process_result_value(self, value: datetime | None, dialect: sa.Dialect) -> datetime | None:
        return None if value is None else value.replace(tzinfo=UTC)


JSONType = sa.JSON().with_variant(JSONB(), "postgresql")


def utcnow() -> datetime:
    return datetime.now(UTC)


def _json(nullable: bool = True) -> Any:
    return Field(default=None, sa_type=JSONType, nullable=nullable)


class User(SQLModel, table=True):
    """A person who signs in. Never deleted: a deactivated user's signatures stay valid."""

    id: int | None = Field(default=None, primary_key=True)
    username: str = Field(max_length=64, unique=True, index=True)
    full_name: str = Field(max_length=200)
    role: str = Field(max_length=16)  # a server.workflow.states.Role value
    password_hash: str = Field(max_length=255)
    active: bool = True
    created_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)


class UserSession(SQLModel, table=True):
    """One signed-in browser. The cookie carries a random id; only its SHA-256 is kept here.

    Kept on the server so that signing out, "sign out everywhere", a password change, a
    deactivation or an admin can end it for good: a copied cookie opens nothing once
    ``ended_at`` is set. Never deleted, so the admin's list of sign-ins keeps its history.
    """

    __tablename__ = "user_session"

    id: int | None = Field(default=None, primary_key=True)
    user_id: int = Field(foreign_key="user.id", index=True)
    token_sha256: str = Field(max_length=64, unique=True, index=True)
    created_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)
    last_seen_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)
    ended_at: datetime | None = Field(default=None, sa_type=UTCDateTime, index=True)
    end_reason: str = Field(default="", max_length=32)
    remote_addr: str = Field(default="", max_length=64)
    user_agent: str = Field(default="", max_length=300)


class Laboratory(SQLModel, table=True):
    """The laboratory's details printed on every report (one row)."""

    id: int | None = Field(default=None, primary_key=True)
    name: str = Field(max_length=200)
    address: str = Field(default="", max_length=500)
    accreditation: str = Field(default="", max_length=200)


class Container(SQLModel, table=True):
    """A moisture tin (or dish) of the laboratory's register, with its known empty mass."""

    id: int | None = Field(default=None, primary_key=True)
    code: str = Field(max_length=32, unique=True, index=True)
    tare_g: float
    active: bool = True
    checked_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)  # when the tare was weighed


class Equipment(SQLModel, table=True):
    """A calibrated instrument: balance, oven, cup device, cone, vane, load frame, hydrometer, sieve."""

    id: int | None = Field(default=None, primary_key=True)
    code: str = Field(max_length=32, unique=True, index=True)
    kind: str = Field(max_length=32)
    description: str = Field(default="", max_length=200)
    calibration_due: date | None = None
    capacity_g: float | None = None  # a balance's capacity: a heavier mass is a typing slip
    active: bool = True


class Client(SQLModel, table=True):
    """Whoever orders the work and receives the reports."""

    id: int | None = Field(default=None, primary_key=True)
    name: str = Field(max_length=200, unique=True)
    contact: str = Field(default="", max_length=200)  # the contact person
    email: str = Field(default="", max_length=254)
    postal_address: str = Field(default="", max_length=500)


class Job(SQLModel, table=True):
    """A commission from a client: a site, its samples, a due date.

    ``code`` is the job number, unique in the laboratory; once a report is issued it never
    changes (the number is printed on the report). ``standards`` is the family the job is
    tested to (a ``server.workflow.vocabulary.STANDARDS`` id); it preselects the methods offered.
    """

    id: int | None = Field(default=None, primary_key=True)
    code: str = Field(max_length=32, unique=True, index=True)
    title: str = Field(max_length=200)
    site: str = Field(default="", max_length=200)
    client_id: int = Field(foreign_key="client.id", index=True)
    order_reference: str = Field(default="", max_length=100)
    due_date: date | None = None
    received_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)
    standards: str = Field(default="astm", max_length=16)
    notes: str = Field(default="", max_length=2000)


class Location(SQLModel, table=True):
    """A borehole, trial pit, window sample or hand auger hole of a job (kind: a vocabulary id)."""

    __table_args__ = (sa.UniqueConstraint("job_id", "code", name="uq_location_job_code"),)

    id: int | None = Field(default=None, primary_key=True)
    job_id: int = Field(foreign_key="job.id", index=True)
    code: str = Field(max_length=32)
    kind: str = Field(default="borehole", max_length=32)
    easting: float | None = None
    northing: float | None = None
    ground_level_m: float | None = None


class Sample(SQLModel, table=True):
    """A sample from a location, identified by its code (unique in the job) and depth range
    (m below ground).

    ``job_id`` repeats the location's job so that the database itself keeps codes unique in a
    job. A sample scheduled but not yet delivered has no ``received_at``; receipt records when,
    by whom, in what condition and where it is stored. A sample is never deleted: a withdrawn
    one keeps its record and its reason, and is left out of reports.
    """

    __table_args__ = (
        sa.UniqueConstraint("job_id", "code", name="uq_sample_job_code"),
        sa.CheckConstraint("depth_to_m >= depth_from_m", name="depth_order"),
    )

    id: int | None = Field(default=None, primary_key=True)
    job_id: int = Field(foreign_key="job.id", index=True)
    location_id: int = Field(foreign_key="location.id", index=True)
    code: str = Field(max_length=32)
    depth_from_m: float
    depth_to_m: float
    sample_type: str = Field(default="disturbed", max_length=32)
    description: str = Field(default="", max_length=1000)
    remarks: str = Field(default="", max_length=1000)
    received_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    received_by_id: int | None = Field(default=None, foreign_key="user.id")
    condition: str = Field(default="", max_length=32)  # a vocabulary.CONDITIONS id, "" before receipt
    stored_at: str = Field(default="", max_length=64)  # the store location (shelf, rack, cold room)
    withdrawn_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    withdrawn_by_id: int | None = Field(default=None, foreign_key="user.id")
    withdrawn_reason: str | None = Field(default=None, max_length=1000)


class LabTest(SQLModel, table=True):
    """One method on one sample, one row per revision.

    ``version`` is the optimistic lock: every change bumps it, and a change made against a
    stale version is refused instead of silently overwriting another person's work.
    An amendment leaves the approved row as it was (status ``superseded``) and opens a new row
    with ``revision + 1`` pointing back through ``previous_revision_id``.
    """

    __tablename__ = "lab_test"
    # A sample's current tests, and the review desk's queue, without the wide rows (migration 0010).
    __table_args__ = (
        sa.Index(
            "ix_lab_test_sample_status",
            "sample_id",
            "status",
            postgresql_include=["id", "submitted_at", "approved_at"],
        ),
        sa.Index(
            "ix_lab_test_waiting",
            "id",
            # Never a column a bench save changes (flags, updated_at): saves stay heap-only updates.
            postgresql_include=["sample_id", "method", "submitted_at", "previous_revision_id"],
            postgresql_where=sa.text("status = 'submitted'"),
            sqlite_where=sa.text("status = 'submitted'"),
        ),
    )

    id: int | None = Field(default=None, primary_key=True)
    sample_id: int = Field(foreign_key="sample.id", index=True)
    method: str = Field(max_length=40)
    status: str = Field(max_length=16, index=True)
    revision: int = 1
    previous_revision_id: int | None = Field(default=None, foreign_key="lab_test.id")
    amendment_reason: str | None = Field(default=None, max_length=1000)
    version: int = 1
    readings: dict[str, Any] | None = _json()
    results: dict[str, Any] | None = _json()
    flags: list[dict[str, Any]] | None = _json()
    requested_by_id: int | None = Field(default=None, foreign_key="user.id")
    assigned_to_id: int | None = Field(default=None, foreign_key="user.id")
    created_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)
    updated_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)
    submitted_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    approved_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    approved_by_id: int | None = Field(default=None, foreign_key="user.id")
    approver_role: str | None = Field(default=None, max_length=16)
    signature_meaning: str | None = Field(default=None, max_length=300)
    return_reason: str | None = Field(default=None, max_length=1000)
    # Why an error-severity flag stands, as the technician recorded it at hand-in (flag code ->
    # words); the reviewer sees it beside the flag.
    flag_reasons: dict[str, Any] | None = _json()


class Report(SQLModel, table=True):
    """An issued report revision: a frozen PDF, its SHA-256, never re-rendered or deleted."""

    __table_args__ = (sa.UniqueConstraint("number", "revision", name="uq_report_number_revision"),)

    id: int | None = Field(default=None, primary_key=True)
    job_id: int = Field(foreign_key="job.id", index=True)
    number: str = Field(max_length=40, index=True)
    revision: int = 1
    status: str = Field(default="issued", max_length=16)
    issued_at: datetime = Field(sa_type=UTCDateTime)
    issued_by_id: int = Field(foreign_key="user.id")
    sha256: str = Field(max_length=64, index=True)
    fingerprint: str = Field(max_length=64)
    pdf: bytes = Field(sa_type=sa.LargeBinary)
    superseded_by_id: int | None = Field(default=None, foreign_key="report.id")
    # The issuer's electronic signature: its meaning as shown before signing (the signer and
    # the time are issued_by_id and issued_at), and the decision recorded when this report
    # carries test revisions another current report carries too.
    signature_meaning: str = Field(default="", max_length=300)
    overlap_decision: str = Field(default="", max_length=1000)


class ReportAgs4(SQLModel, table=True):
    """The AGS4 file frozen with a report revision at its issue: exactly the test revisions the
    report carries, dated the issue date, kept byte for byte with its SHA-256 (never re-made).

    A table of its own rather than a column of ``report``: report lists never load the bytes,
    and reports issued before files were frozen simply have no row."""

    __tablename__ = "report_ags4"

    report_id: int = Field(foreign_key="report.id", primary_key=True)
    sha256: str = Field(max_length=64, index=True)
    data: bytes = Field(sa_type=sa.LargeBinary)


class ReportRender(SQLModel, table=True):
    """A report revision signed and waiting for, or being given, its PDF by a worker.

    Issuing is a signature made in the request (password, meaning, the test revisions shown);
    the render takes seconds to minutes, so it runs in a worker process and this row carries
    everything the worker needs to make exactly the report that was signed: the issue time and
    number, the test revisions with their versions (a change since is refused, not rendered),
    and a digest of the signer's password hash (a password changed since voids the signature).
    The report itself is stored, with this row marked done, in one transaction: a failed or
    killed render leaves no report behind, and can be retried."""

    __tablename__ = "report_render"

    id: int | None = Field(default=None, primary_key=True)
    job_id: int = Field(foreign_key="job.id", index=True)
    kind: str = Field(max_length=16)  # "issue" or "reissue"
    previous_report_id: int | None = Field(default=None, foreign_key="report.id")
    number: str = Field(max_length=40)
    revision: int = 1
    requested_by_id: int = Field(foreign_key="user.id")
    requested_at: datetime = Field(sa_type=UTCDateTime)  # the signature's time, printed as the issue time
    base_url: str = Field(max_length=300)
    sample_ids: list[int] | None = _json()
    tests: list[list[int]] = _json(nullable=False)  # [[test id, version], ...] as signed
    overlap_decision: str = Field(default="", max_length=1000)
    signature_meaning: str = Field(max_length=300)
    signer_check: str = Field(max_length=64)
    status: str = Field(default="queued", max_length=16, index=True)  # queued, rendering, done, failed
    attempts: int = 0
    worker: str = Field(default="", max_length=120)
    started_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    finished_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    error: str = Field(default="", max_length=1000)
    report_id: int | None = Field(default=None, foreign_key="report.id")


class WorkerHeartbeat(SQLModel, table=True):
    """A render worker that is alive: it writes ``seen_at`` every few seconds, so /readyz can
    say whether issued reports will be rendered, and a render whose worker stopped can be told
    from one still running."""

    __tablename__ = "worker_heartbeat"

    name: str = Field(primary_key=True, max_length=120)
    queue: str = Field(max_length=20)  # "sqlite" (the table polled) or "procrastinate"
    host: str = Field(default="", max_length=200)
    pid: int = 0
    started_at: datetime = Field(sa_type=UTCDateTime)
    seen_at: datetime = Field(sa_type=UTCDateTime, index=True)


class ReportTest(SQLModel, table=True):
    """Which test revisions a report carries."""

    __tablename__ = "report_test"
    __table_args__ = (sa.Index("ix_report_test_test_id", "test_id"),)  # the reports of a test (0010)

    report_id: int = Field(foreign_key="report.id", primary_key=True)
    test_id: int = Field(foreign_key="lab_test.id", primary_key=True)


class StagedImport(SQLModel, table=True):
    """An uploaded schedule file between its preview and the person's confirmation.

    Not part of the record: the import page keeps the file here (not in the form, whose fields
    are capped at 1 MB) so that the confirmed import reads exactly the bytes that were
    previewed (``sha256``). Removed when imported, and after a day when left unconfirmed.
    """

    __tablename__ = "staged_import"

    id: int | None = Field(default=None, primary_key=True)
    token: str = Field(max_length=64, unique=True)
    user_id: int = Field(foreign_key="user.id", index=True)
    filename: str = Field(max_length=255)
    sha256: str = Field(max_length=64)
    content: bytes = Field(sa_type=sa.LargeBinary)
    created_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)


class ShareLink(SQLModel, table=True):
    """A client's way in: only the SHA-256 of the random token is kept.

    A link opens the issued reports of one client; ``job_id`` limits it to one of their jobs.
    """

    __tablename__ = "share_link"

    id: int | None = Field(default=None, primary_key=True)
    client_id: int = Field(foreign_key="client.id", index=True)
    job_id: int | None = Field(default=None, foreign_key="job.id", index=True)
    token_hash: str = Field(max_length=64, unique=True, index=True)
    label: str = Field(default="", max_length=200)
    created_by_id: int = Field(foreign_key="user.id")
    created_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)
    expires_at: datetime = Field(sa_type=UTCDateTime)
    revoked_at: datetime | None = Field(default=None, sa_type=UTCDateTime)


class LinkAccess(SQLModel, table=True):
    """One use of a share link, kept so the laboratory can see who opened what."""

    __tablename__ = "link_access"

    id: int | None = Field(default=None, primary_key=True)
    link_id: int = Field(foreign_key="share_link.id", index=True)
    at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)
    path: str = Field(max_length=300)
    outcome: str = Field(max_length=16)
    remote_addr: str = Field(default="", max_length=64)
    user_agent: str = Field(default="", max_length=300)


class ApiToken(SQLModel, table=True):
    """A personal token for the JSON API: only the SHA-256 of the random token is kept.

    It acts as its user, with the user's role read afresh on every use (a role change or a
    deactivation takes effect at once); ``scope`` "read" may only read. Never deleted, so the
    log of its uses keeps its name; revoking sets ``revoked_at``.
    """

    __tablename__ = "api_token"

    id: int | None = Field(default=None, primary_key=True)
    user_id: int = Field(foreign_key="user.id", index=True)
    name: str = Field(max_length=100)
    token_sha256: str = Field(max_length=64, unique=True, index=True)
    prefix: str = Field(max_length=8)  # the token's first characters, to tell tokens apart on a page
    scope: str = Field(max_length=8)  # "read" or "write"
    created_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)
    expires_at: datetime = Field(sa_type=UTCDateTime)
    revoked_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    last_used_at: datetime | None = Field(default=None, sa_type=UTCDateTime)


class ApiTokenUse(SQLModel, table=True):
    """One request made with a token (refused ones included), for its owner to see.

    Not an audit event: a use changes nothing; what a write request changed is audited by the
    service it called, under the token's user.
    """

    __tablename__ = "api_token_use"

    id: int | None = Field(default=None, primary_key=True)
    token_id: int = Field(foreign_key="api_token.id", index=True)
    at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)
    method: str = Field(max_length=8)
    path: str = Field(max_length=300)
    status: int


class AuditEvent(SQLModel, table=True):
    """An append-only record of one change: who, when, what, before, after, why."""

    __tablename__ = "audit_event"

    id: int | None = Field(default=None, primary_key=True)
    at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime, index=True)
    actor_id: int | None = Field(default=None, foreign_key="user.id")
    actor: str = Field(max_length=64)
    entity: str = Field(max_length=32)
    entity_id: int
    action: str = Field(max_length=32)
    before: dict[str, Any] | None = _json()
    after: dict[str, Any] | None = _json()
    reason: str | None = Field(default=None, max_length=1000)
    # When the person typed the change, where it reached the server later (an offline tablet).
    typed_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    # The hash chain: SHA-256 of this event's content and of the event before it.
    prev_sha256: str = Field(default="", max_length=64)
    sha256: str = Field(default="", max_length=64)

    __table_args__ = (
        # A record's events (its leading columns), and who entered or amended it from the index
        # alone (migration 0010; the two-column index it made redundant went in 0011).
        sa.Index("ix_audit_event_authors", "entity", "entity_id", "action", "actor_id"),
    )


# -- quality control (ISO/IEC 17025:2017 cl. 7.7) ----------------------------------------------


class QualityDuplicate(SQLModel, table=True):
    """A test marked as a duplicate of another test of the same sample by the same method.

    A record of its own rather than a column of ``lab_test``: marking (or unmarking) a duplicate
    is a quality decision taken after the fact, often on approved tests, and an approved test's
    row (readings, results, version) must not change for it. Unmarking keeps the row, with who
    and when, so the duplicate checks once shown can be traced."""

    __tablename__ = "quality_duplicate"

    id: int | None = Field(default=None, primary_key=True)
    test_id: int = Field(foreign_key="lab_test.id", index=True)
    duplicate_of_id: int = Field(foreign_key="lab_test.id", index=True)
    marked_by_id: int = Field(foreign_key="user.id")
    marked_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)
    unmarked_by_id: int | None = Field(default=None, foreign_key="user.id")
    unmarked_at: datetime | None = Field(default=None, sa_type=UTCDateTime)


class ReferenceSoil(SQLModel, table=True):
    """A reference soil of the laboratory's register: a homogenised stock tested again and again
    to watch the methods (and the people) stay in control. ``assigned_values`` are its accepted
    values by method and result key (``{"atterberg": {"liquid_limit": 45.0}}``), for comparison;
    the control limits come from its own results. Never deleted: deactivated when used up."""

    __tablename__ = "reference_soil"

    id: int | None = Field(default=None, primary_key=True)
    code: str = Field(max_length=32, unique=True, index=True)
    name: str = Field(max_length=200)
    description: str = Field(default="", max_length=1000)
    assigned_values: dict[str, Any] | None = _json()
    active: bool = True
    created_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)


class ReferenceSample(SQLModel, table=True):
    """A sample that is a portion of a reference soil: its tests are points of that soil's
    control charts. A table of its own so that the sample's record is not changed by it."""

    __tablename__ = "reference_sample"

    sample_id: int = Field(foreign_key="sample.id", primary_key=True)
    reference_soil_id: int = Field(foreign_key="reference_soil.id", index=True)
    linked_by_id: int = Field(foreign_key="user.id")
    linked_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)


class ProficiencyRound(SQLModel, table=True):
    """The laboratory's result in one round of an interlaboratory comparison (proficiency test):
    the scheme's assigned value X and σpt for one method and result key, and the laboratory's
    result, typed or copied from the test it came from (kept as copied, so the record stays as
    entered when the test is later amended)."""

    __tablename__ = "proficiency_round"
    __table_args__ = (
        sa.UniqueConstraint(
            "scheme", "round_code", "method", "result_key", name="uq_proficiency_round_entry"
        ),
    )

    id: int | None = Field(default=None, primary_key=True)
    scheme: str = Field(max_length=100)
    round_code: str = Field(max_length=32)
    method: str = Field(max_length=40)
    result_key: str = Field(max_length=40)
    assigned_value: float
    sigma_pt: float
    result: float
    test_id: int | None = Field(default=None, foreign_key="lab_test.id")
    round_date: date
    entered_by_id: int = Field(foreign_key="user.id")
    entered_at: datetime = Field(default_factory=utcnow, sa_type=UTCDateTime)
