"""Queries the pages and services share. Each page needs a fixed number of queries, whatever
the number of rows (no query per row).

The bench save runs on every field a technician types, so its statements are Core statements
built once (SQLAlchemy's compiled cache then serves them), executed on a bare connection, and
their rows become objects the way the ORM builds the objects it loads (``loaded``): that path
costs a fraction of an ORM session's setup, flush, identity map and refresh.
"""

from __future__ import annotations

import json
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, TypeVar, cast

from sqlalchemy import JSON, ColumnElement, Connection, Table, bindparam, func, or_, update
from sqlalchemy import inspect as sa_inspect
from sqlalchemy import select as core_select
from sqlalchemy.orm import defer
from sqlalchemy.orm.attributes import set_committed_value
from sqlmodel import Session, SQLModel, col, select

from server.db.tables import (
    AuditEvent,
    Client,
    Job,
    LabTest,
    Location,
    Report,
    ReportAgs4,
    Sample,
    ShareLink,
    User,
    UserSession,
    utcnow,
)

Model = TypeVar("Model", bound=SQLModel)

_LAB_TEST = cast(Table, LabTest.__table__)  # type: ignore[attr-defined]
_JSON_COLUMNS = frozenset(c.name for c in _LAB_TEST.c if isinstance(c.type, JSON))
_TEST_FOR_CHANGE = core_select(_LAB_TEST).where(_LAB_TEST.c.id == bindparam("id")).with_for_update()
_BUMP = update(_LAB_TEST).where(
    _LAB_TEST.c.id == bindparam("b_id"), _LAB_TEST.c.version == bindparam("b_version")
)  # the values to set are the other parameters of each execution


def loaded(model: type[Model], values: Mapping[Any, Any]) -> Model:
    """An instance holding a row read with Core, made as the ORM makes the objects it loads (no
    ``__init__``, no validation: the values are the database's own), in no session. About 5 µs,
    where ``Model(**row)`` validates and costs some 150 µs."""
    instance = cast(Model, sa_inspect(model).class_manager.new_instance())
    instance.__dict__.update(values)
    return instance


_USER = cast(Table, User.__table__)  # type: ignore[attr-defined]
_USER_SESSION = cast(Table, UserSession.__table__)  # type: ignore[attr-defined]
_SESSION_BY_TOKEN = (
    core_select(_USER, _USER_SESSION)
    .join_from(_USER, _USER_SESSION, _USER_SESSION.c.user_id == _USER.c.id)
    .where(_USER_SESSION.c.token_sha256 == bindparam("token_sha256"))
)


def session_with_user(conn: Connection, token_sha256: str) -> tuple[User, UserSession] | None:
    """The sign-in session whose cookie id has this SHA-256, with its person, as stored (one Core
    read: every request that needs the signed-in person makes it)."""
    row = conn.execute(_SESSION_BY_TOKEN, {"token_sha256": token_sha256}).first()
    if row is None:
        return None
    n = len(_USER.c)
    user = loaded(User, dict(zip(_USER.c.keys(), row[:n], strict=True)))
    return user, loaded(UserSession, dict(zip(_USER_SESSION.c.keys(), row[n:], strict=True)))


_TEST_AND_SESSION_FOR_CHANGE = (
    core_select(_LAB_TEST, _USER, _USER_SESSION)
    .select_from(
        _LAB_TEST.outerjoin(
            _USER_SESSION.join(_USER, _USER_SESSION.c.user_id == _USER.c.id),
            _USER_SESSION.c.token_sha256 == bindparam("token_sha256"),
        )
    )
    .where(_LAB_TEST.c.id == bindparam("id"))
    .with_for_update(of=_LAB_TEST)
)


def test_and_session_for_change(
    conn: Connection, test_id: int, token_sha256: str
) -> tuple[LabTest | None, tuple[User, UserSession] | None]:
    """``test_for_change`` and ``session_with_user`` in one statement (one round trip, not two, on
    the bench save of a person who is not yet looked up). The session is an outer join: a test
    is locked whatever the cookie; with no such test, nothing is read at all."""
    row = conn.execute(_TEST_AND_SESSION_FOR_CHANGE, {"id": test_id, "token_sha256": token_sha256}).first()
    if row is None:
        return None, None
    t, u = len(_LAB_TEST.c), len(_USER.c)
    test = loaded(LabTest, dict(zip(_LAB_TEST.c.keys(), row[:t], strict=True)))
    if row[t] is None:  # no session of that cookie
        return test, None
    user = loaded(User, dict(zip(_USER.c.keys(), row[t : t + u], strict=True)))
    return test, (user, loaded(UserSession, dict(zip(_USER_SESSION.c.keys(), row[t + u :], strict=True))))


def test_for_change(conn: Connection, test_id: int) -> LabTest | None:
    """The test as stored, locked until the transaction ends against other writers of it (a
    PostgreSQL row lock; SQLite's ``BEGIN IMMEDIATE`` already serialises writers); None if none."""
    row = conn.execute(_TEST_FOR_CHANGE, {"id": test_id}).mappings().first()
    return None if row is None else loaded(LabTest, row)


@dataclass(frozen=True)
class Bumped:
    """What ``bump_test`` did: whether it changed the test (its truth value), and ``also``'s value."""

    changed: bool
    also: Any = None

    def __bool__(self) -> bool:
        return self.changed


def bump_test(
    session: Session | Connection,
    test: LabTest,
    expected_version: int,
    *,
    also: ColumnElement[Any] | None = None,
    **values: Any,
) -> Bumped:
    """Change a test only if nobody changed it since ``expected_version`` (optimistic lock).

    Refused (false, nothing changed) when the stored version differs. On success ``test`` holds
    what was stored (the new version, and JSON values as the database gives them back), set as
    loaded values, so an ORM session does not write them again; and ``also``, when given, is
    evaluated by the same UPDATE (its RETURNING clause): a second thing the caller needs from
    the database, in the same round trip.
    """
    values = {**values, "version": expected_version + 1, "updated_at": utcnow()}
    if isinstance(session, Session):
        session.flush()  # what the ORM's own UPDATE did first: pending changes go before this one
    conn = session.connection() if isinstance(session, Session) else session
    statement = _BUMP if also is None else _BUMP.returning(also)
    result = conn.execute(statement, {"b_id": test.id, "b_version": expected_version, **values})
    returned = result.first() if also is not None else None
    if result.rowcount != 1:
        return Bumped(False)
    for key, value in values.items():
        stored = json.loads(json.dumps(value)) if key in _JSON_COLUMNS and value is not None else value
        set_committed_value(test, key, stored)
    return Bumped(True, None if returned is None else returned[0])


def readings_authors(session: Session, test_id: int) -> set[int]:
    """Everyone who entered or changed readings of this test revision (from the audit trail)."""
    rows = session.exec(
        select(AuditEvent.actor_id).where(
            AuditEvent.entity == "lab_test",
            AuditEvent.entity_id == test_id,
            col(AuditEvent.action).in_(["readings", "amend"]),
        )
    ).all()
    return {r for r in rows if r is not None}


@dataclass
class TestRow:
    """A test with the names a list shows beside it."""

    test: LabTest
    sample: Sample
    location: Location
    job: Job


def test_rows(
    session: Session, *conditions: Any, order: Sequence[Any] = (), limit: int | None = None
) -> list[TestRow]:
    """Tests with their sample, location and job, in one query (at most ``limit`` of them)."""
    stmt = (
        select(LabTest, Sample, Location, Job)
        .join(Sample, col(Sample.id) == LabTest.sample_id)
        .join(Location, col(Location.id) == Sample.location_id)
        .join(Job, col(Job.id) == Location.job_id)
        .where(*conditions)
        .order_by(*order)
        .limit(limit)
    )
    return [TestRow(t, s, loc, j) for t, s, loc, j in session.exec(stmt).all()]


def current_tests(session: Session, job_id: int) -> list[TestRow]:
    """Every test of a job that is not superseded, ordered by location, depth and method."""
    return test_rows(
        session,
        col(Job.id) == job_id,
        col(LabTest.status) != "superseded",
        order=(col(Location.code), col(Sample.depth_from_m), col(LabTest.method)),
    )


def users_by_id(session: Session, ids: Iterable[int | None]) -> dict[int, User]:
    wanted = {i for i in ids if i is not None}
    if not wanted:
        return {}
    return {u.id: u for u in session.exec(select(User).where(col(User.id).in_(wanted))).all() if u.id}


def job_reports(session: Session, job_id: int) -> list[Report]:
    """A job's reports, current ones first, newest first (the PDF bytes are not loaded)."""
    stmt = (
        select(Report)
        .where(Report.job_id == job_id)
        .options(defer(Report.pdf))  # type: ignore[arg-type]
        .order_by(col(Report.status), col(Report.number).desc(), col(Report.revision).desc())
    )
    return list(session.exec(stmt).all())


def frozen_ags4_digests(session: Session, report_ids: Iterable[int]) -> dict[int, str]:
    """The SHA-256 of the AGS4 file frozen with each of these reports, by report id; a report
    issued before files were frozen has none (the bytes are not loaded)."""
    wanted = set(report_ids)
    if not wanted:
        return {}
    rows = session.exec(
        select(ReportAgs4.report_id, ReportAgs4.sha256).where(col(ReportAgs4.report_id).in_(wanted))
    ).all()
    return dict(rows)


@dataclass
class JobSheet:
    """Everything the job page shows, loaded in a fixed number of queries."""

    job: Job
    client: Client
    locations: list[Location]
    samples: dict[int, list[Sample]]  # by location id
    tests: dict[int, list[LabTest]]  # by sample id, current revisions only
    reports: list[Report]
    links: list[ShareLink]
    ags4: dict[int, str]  # the SHA-256 of each report's frozen AGS4 file, by report id


def same_name(column: Any, name: str) -> Any:
    """A condition: ``column`` holds ``name`` whatever its case. SQLite's lower() folds only the
    ASCII letters (and PostgreSQL's follows the collation), so the exact name is asked for too:
    a name with "Ô" in it is still found, never inserted twice against the unique index."""
    return or_(column == name, func.lower(column) == name.lower())
