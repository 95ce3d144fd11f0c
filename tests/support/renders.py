"""Running queued report renders in a test, as a worker would: the worker's own task code
(``server.tasks.render.run_render``, a child process with limits included), called for each
queued render in turn instead of waiting for a polling worker process."""

from __future__ import annotations

from sqlmodel import col, select

from server.db.session import Database
from server.db.tables import Report, ReportRender
from server.tasks.limits import RenderLimits
from server.tasks.render import run_render


def run_queued(db: Database, limits: RenderLimits | None = None) -> list[Report]:
    """Render every queued report, oldest first; the reports stored (a failure is left failed)."""
    with db.session() as s:
        queued = s.exec(
            select(ReportRender.id).where(ReportRender.status == "queued").order_by(col(ReportRender.id))
        ).all()
    made = [run_render(db, rid or 0, "test worker", limits or RenderLimits()) for rid in queued]
    return [m.report for m in made if m.report is not None]
