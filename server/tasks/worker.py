"""A render worker process: ``claybench worker``, and on SQLite the one ``claybench serve`` starts.

Every worker beats (``services.workers``) from a thread of its own, so that a long render does
not make it look dead, and gives up the renders of workers that stopped beating. On SQLite the
worker polls the render table (one machine, one worker: nothing to share); on PostgreSQL it is
a procrastinate worker, woken by the database when a render is deferred, and it also re-defers
queued renders that have no job (a retry, or a defer lost with its web process).
"""

from __future__ import annotations

import logging
import signal
import threading
from datetime import timedelta
from types import FrameType

from server.config import Settings
from server.db.session import Database
from server.db.tables import utcnow
from server.services import renders, workers
from server.tasks import queue
from server.tasks.render import limits_of, run_render

log = logging.getLogger("claybench.worker")

POLL_S = 1.0
REDEFER_AFTER_S = 30.0


class Heartbeat(threading.Thread):
    """Beat every ``workers.BEAT_S`` until stopped; give up renders of dead workers; on
    PostgreSQL, re-defer renders left queued without a job."""

    def __init__(self, db: Database, name: str, queue_kind: str, stop: threading.Event):
        super().__init__(name="claybench-heartbeat", daemon=True)
        self.db, self.worker, self.queue_kind, self.stop = db, name, queue_kind, stop
        self.started_at = utcnow()

    def beat_once(self) -> None:
        workers.beat(self.db, self.worker, self.queue_kind, self.started_at)
        for render_id in renders.reap_stale(self.db):
            log.warning("render %s given up: its worker stopped", render_id)
        if not self.db.is_sqlite:
            older = utcnow() - timedelta(seconds=REDEFER_AFTER_S)
            for render_id in renders.queued_before(self.db, older):
                queue.enqueue(self.db, render_id)

    def run(self) -> None:
        while not self.stop.is_set():
            try:
                self.beat_once()
            except Exception:  # a database hiccup must not stop the beat for good
                log.exception("heartbeat failed; trying again")
            self.stop.wait(workers.BEAT_S)


def poll_sqlite(db: Database, settings: Settings, name: str, stop: threading.Event) -> None:
    """Render queued reports oldest first until ``stop`` is set (between renders)."""
    limits = limits_of(settings)
    while not stop.is_set():
        render_id = renders.next_queued(db)
        if render_id is None:
            stop.wait(POLL_S)
            continue
        run_render(db, render_id, name, limits)


def run_worker(settings: Settings) -> None:
    """Run a worker for this database until SIGTERM or SIGINT (the current render finishes)."""
    db = Database(settings.database_url)
    kind = "sqlite" if db.is_sqlite else "procrastinate"
    name = workers.worker_name(kind)
    stop = threading.Event()
    beat = Heartbeat(db, name, kind, stop)
    beat.beat_once()  # seen at once: /readyz turns ready as the worker starts
    beat.start()
    log.info("render worker %s started", name)
    try:
        if db.is_sqlite:

            def _stop(signum: int, frame: FrameType | None) -> None:
                stop.set()

            signal.signal(signal.SIGTERM, _stop)
            signal.signal(signal.SIGINT, _stop)
            poll_sqlite(db, settings, name, stop)
        else:
            queue.queue_app(settings.database_url).run_worker(
                queues=[queue.QUEUE], concurrency=1, install_signal_handlers=True
            )
    finally:
        stop.set()
        beat.join(5)
        db.dispose()
        log.info("render worker %s stopped", name)
