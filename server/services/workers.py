"""Which render workers are alive: each writes its row of ``worker_heartbeat`` every few
seconds (``server/tasks`` runs the beat), /readyz asks whether one was seen within the last
minute, and a render whose worker was not seen since is given up (``renders.reap_stale``)."""

from __future__ import annotations

import os
import socket
from datetime import datetime, timedelta

from sqlmodel import col, select

from server.db.session import Database
from server.db.tables import WorkerHeartbeat, utcnow

# A worker writes every BEAT_S; one unseen for ALIVE_S is taken for gone (readiness, stale renders).
BEAT_S = 10.0
ALIVE_S = 60.0


def worker_name(queue: str) -> str:
    """A name unique to this process on this host, stable while it runs."""
    return f"{socket.gethostname()}:{os.getpid()}:{queue}"[:120]


def beat(db: Database, name: str, queue: str, started_at: datetime) -> None:
    """Record that this worker is alive now (one short write)."""
    now = utcnow()
    with db.transaction() as s:
        row = s.get(WorkerHeartbeat, name)
        if row is None:
            row = WorkerHeartbeat(
                name=name,
                queue=queue,
                host=socket.gethostname()[:200],
                pid=os.getpid(),
                started_at=started_at,
                seen_at=now,
            )
        row.seen_at = now
        s.add(row)


def last_seen(db: Database) -> datetime | None:
    """When any render worker was last seen alive, or None when none ever was."""
    with db.session() as s:
        return s.exec(
            select(WorkerHeartbeat.seen_at).order_by(col(WorkerHeartbeat.seen_at).desc()).limit(1)
        ).first()


def alive_since(now: datetime | None = None) -> datetime:
    """The oldest heartbeat that still counts as a live worker."""
    return (now or utcnow()) - timedelta(seconds=ALIVE_S)


def any_alive(db: Database) -> bool:
    """Whether a worker was seen within ``ALIVE_S``: an issued report will be rendered."""
    seen = last_seen(db)
    return seen is not None and seen >= alive_since()
