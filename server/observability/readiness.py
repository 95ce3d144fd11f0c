"""Whether this app server can do the laboratory's work now: the checks behind /readyz.

Three checks, each ``ok`` or ``failed`` with a reason a person can act on:

- database: it answers a trivial query;
- schema: the revision in ``alembic_version`` is the head of ``migrations/`` (a server started
  before ``claybench migrate`` ran, or one older than the database, would fail on tables or
  columns it does not know);
- worker: a render worker was seen within ``server.services.workers.ALIVE_S`` (issued reports wait
  in the queue otherwise).

The reasons name no host, address or driver message: /readyz is public (load balancers and
orchestrators call it without credentials); the details go to the log, under the request's id.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass
from functools import lru_cache

from alembic.script import ScriptDirectory
from sqlalchemy import Connection, inspect, text
from sqlalchemy.exc import SQLAlchemyError

from server.db.migrate import alembic_config
from server.db.session import Database
from server.db.tables import utcnow
from server.services import workers

log = logging.getLogger(__name__)

OK, FAILED = "ok", "failed"


@dataclass(frozen=True)
class Check:
    status: str  # OK or FAILED
    reason: str


@dataclass(frozen=True)
class Readiness:
    database: Check
    schema: Check
    worker: Check

    @property
    def ready(self) -> bool:
        return all(c.status == OK for c in (self.database, self.schema, self.worker))

    def to_dict(self) -> dict[str, object]:
        checks = {"database": self.database, "schema": self.schema, "worker": self.worker}
        return {
            "status": "ready" if self.ready else "not ready",
            "checks": {name: {"status": c.status, "reason": c.reason} for name, c in checks.items()},
        }


@lru_cache(maxsize=1)
def head_revisions() -> frozenset[str]:
    """The head revision(s) of ``migrations/``: read from the files once per process (they do not
    change under a running server; a new release is a new process)."""
    return frozenset(ScriptDirectory.from_config(alembic_config("")).get_heads())


def check(db: Database) -> Readiness:
    """Run the three checks (three small queries; the later two only when the database answers)."""
    try:
        with db.session() as s:
            connection = s.connection()
            connection.execute(text("SELECT 1"))
            current = _recorded_revisions(connection)
    except SQLAlchemyError:
        log.warning("readiness: the database did not answer", exc_info=True)
        unknown = Check(FAILED, "not checked: the database did not answer")
        return Readiness(Check(FAILED, "the database did not answer a query"), unknown, unknown)
    return Readiness(Check(OK, "answered a query"), _schema(current), _worker(db))


def _recorded_revisions(connection: Connection) -> frozenset[str]:
    """The revision(s) in ``alembic_version``, none when the table is missing (read directly:
    Alembic's own reader logs two lines at each call, which every probe would add to the log)."""
    if not inspect(connection).has_table("alembic_version"):
        return frozenset()
    return frozenset(connection.execute(text("SELECT version_num FROM alembic_version")).scalars())


def _schema(current: frozenset[str]) -> Check:
    heads = head_revisions()
    want = ", ".join(sorted(heads))
    if current == heads:
        return Check(OK, f"at {want}, the newest migration")
    if not current:
        return Check(FAILED, f"no schema revision recorded; the code needs {want}: run claybench migrate")
    have = ", ".join(sorted(current))
    return Check(
        FAILED,
        f"the database is at {have}, the code needs {want}: run claybench migrate "
        "(or, if the database is newer, this server is an older release)",
    )


def _worker(db: Database) -> Check:
    try:
        seen = workers.last_seen(db)
    except SQLAlchemyError:
        log.warning("readiness: worker heartbeats not readable", exc_info=True)
        return Check(FAILED, "the worker heartbeats could not be read")
    if seen is None:
        return Check(FAILED, "no render worker has been seen: issued reports will wait to be rendered")
    ago = (utcnow() - seen).total_seconds()
    if seen < workers.alive_since():
        return Check(
            FAILED,
            f"no render worker seen in the last {workers.ALIVE_S:.0f} s (last {ago:.0f} s ago): "
            "issued reports will wait to be rendered",
        )
    return Check(OK, f"a render worker was seen {max(ago, 0):.0f} s ago")
