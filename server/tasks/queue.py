"""The render queue on PostgreSQL: procrastinate, so that several app servers and workers share
one queue in the database they already have (jobs are rows; workers are woken by LISTEN/NOTIFY).

The render row (``report_render``) stays the record of what was signed and where it stands;
the procrastinate job only says "render this row now". On SQLite there is no job to defer: the
single machine's worker polls the render table.
"""

from __future__ import annotations

from functools import cache

import procrastinate
from sqlalchemy.engine import make_url

from server.config import get_settings
from server.db.session import Database
from server.services.workers import worker_name
from server.tasks.render import limits_of, run_render

QUEUE = "renders"
TASK = "claybench.render_report"


def conninfo(database_url: str) -> str:
    """The libpq address of a SQLAlchemy PostgreSQL URL (password kept)."""
    return make_url(database_url).set(drivername="postgresql").render_as_string(hide_password=False)


@cache
def _database(database_url: str) -> Database:
    return Database(database_url)


@cache
def queue_app(database_url: str) -> procrastinate.App:
    """The procrastinate app ``claybench worker`` runs (asynchronous, woken by LISTEN/NOTIFY); its
    one task is the render task of every backend."""
    app = procrastinate.App(connector=procrastinate.PsycopgConnector(conninfo=conninfo(database_url)))

    @app.task(name=TASK, queue=QUEUE)
    def render_report(render_id: int) -> None:
        settings = get_settings()
        run_render(_database(database_url), render_id, worker_name(QUEUE), limits_of(settings))

    return app


@cache
def _deferring_app(database_url: str) -> procrastinate.App:
    """The app the web process defers with: synchronous (the page routes are plain functions),
    opened once per process with a pool of at most two connections, and knowing the task by
    name only."""
    connector = procrastinate.SyncPsycopgConnector(conninfo=conninfo(database_url), min_size=1, max_size=2)
    return procrastinate.App(connector=connector).open()


def enqueue(db: Database, render_id: int) -> None:
    """Hand the render to the workers: a procrastinate job on PostgreSQL (one per render: the
    queueing lock refuses a second while one waits), nothing on SQLite (polled)."""
    if db.is_sqlite:
        return
    job = _deferring_app(db.url).configure_task(TASK, queue=QUEUE, queueing_lock=f"render-{render_id}")
    try:
        job.defer(render_id=render_id)
    except procrastinate.exceptions.AlreadyEnqueued:
        pass  # already waiting for a worker: nothing to add
