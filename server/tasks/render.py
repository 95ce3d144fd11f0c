"""The render task: the same code whichever worker runs it (procrastinate's on PostgreSQL, the
polling worker of ``claybench serve`` on SQLite, or inline for the command line and tests).

Claim the queued render, plan its report again from the records, render the PDF in a child
process within the limits, and store it with the render marked done in one transaction. Any
failure marks the render failed with its reason; nothing of the report is stored.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass

from server.config import Settings, get_settings
from server.db.session import Database
from server.db.tables import Report, ReportRender
from server.services import renders
from server.services.errors import ServiceError
from server.services.reports import store_rendered
from server.tasks.limits import RenderFailed, RenderLimits, render_pdf

log = logging.getLogger("claybench.render")


def limits_of(settings: Settings) -> RenderLimits:
    return RenderLimits(settings.render_time_limit_s, settings.render_memory_limit_mb)


@dataclass(frozen=True)
class Outcome:
    """What one run of the task did: a stored report, a failure with its cause, or nothing
    (the render was not queued: done, failed or taken elsewhere)."""

    report: Report | None = None
    error: Exception | None = None


def run_render(db: Database, render_id: int, worker: str, limits: RenderLimits) -> Outcome:
    """Render one queued report revision; never raises for a failed render (the worker goes on)."""
    attempt = renders.claim(db, render_id, worker)
    if attempt is None:
        return Outcome()
    try:
        with db.session() as s:
            render = s.get(ReportRender, render_id)
            assert render is not None  # claimed just now; renders are never deleted
            prepared = renders.prepared_for(s, render)
        pdf = render_pdf(prepared.data, limits)
        report = store_rendered(db, render_id, attempt, prepared, pdf)
    except (ServiceError, RenderFailed) as exc:
        renders.fail(db, render_id, attempt, str(exc))
        log.warning("render %s of report failed: %s", render_id, exc)
        return Outcome(error=exc)
    except Exception as exc:  # a bug must not lose the worker: the render fails with its type
        log.exception("render %s failed unexpectedly", render_id)
        renders.fail(db, render_id, attempt, f"the render failed unexpectedly ({type(exc).__name__})")
        return Outcome(error=exc)
    log.info("render %s stored report %s revision %s", render_id, report.number, report.revision)
    return Outcome(report=report)


def render_now(db: Database, render_id: int, settings: Settings | None = None) -> Report:
    """Run the task here and now (command line, demo, tests) and give the report, or raise the
    refusal or failure that the worker would have shown."""
    outcome = run_render(db, render_id, "inline", limits_of(settings or get_settings()))
    if outcome.error is not None:
        raise outcome.error
    if outcome.report is None:
        raise RuntimeError(f"render {render_id} was not queued")
    return outcome.report
