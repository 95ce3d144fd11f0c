"""One report render in a child process, with a time and a memory limit.

WeasyPrint holds the interpreter for the whole render and keeps the document in memory
(STACK-NOTES: 444 MiB for 58 dense pages), so a render runs in a child of the worker: a
runaway report is stopped at the time limit, an address-space limit turns a runaway
allocation into a refused render instead of the machine swapping, and a crash of the child
(a signal, a kill) is a failed render the worker survives. Children come from a fork server
that has WeasyPrint imported already, so a render does not pay the import.
"""

from __future__ import annotations

import multiprocessing
import resource
import signal
from dataclasses import dataclass
from functools import cache
from multiprocessing.connection import Connection
from multiprocessing.context import ForkServerContext

from server.reports.data import ReportData


class RenderFailed(Exception):
    """The render stopped before it gave a PDF: over time, over memory, or killed."""


@dataclass(frozen=True)
class RenderLimits:
    time_s: float = 600.0
    memory_mb: int = 2048


@cache
def _context() -> ForkServerContext:
    ctx = multiprocessing.get_context("forkserver")
    ctx.set_forkserver_preload(["server.reports.pdf"])
    return ctx


def _child(conn: Connection, data: ReportData, memory_mb: int) -> None:
    """In the child: limit the address space, render, send the bytes or the reason back."""
    try:
        limit = memory_mb * 1024 * 1024
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
        from server.reports.pdf import render_report_pdf

        conn.send(("pdf", render_report_pdf(data)))
    except MemoryError:
        conn.send(("error", f"the render needed more than its memory limit of {memory_mb} MiB"))
    except Exception as exc:  # noqa: BLE001 - any failure of the render is reported, not raised
        conn.send(("error", f"the render failed: {type(exc).__name__}: {exc}"[:500]))
    finally:
        conn.close()


def _stopped(code: int | None) -> str:
    if code is not None and code < 0:
        try:
            return f"the render process was stopped by {signal.Signals(-code).name}"
        except ValueError:
            return f"the render process was stopped by signal {-code}"
    return f"the render process ended without a PDF (exit code {code})"


def render_pdf(data: ReportData, limits: RenderLimits) -> bytes:
    """The report's PDF rendered in a child process within ``limits``; ``RenderFailed`` with
    the reason otherwise."""
    ctx = _context()
    ours, theirs = ctx.Pipe(duplex=False)
    child = ctx.Process(target=_child, args=(theirs, data, limits.memory_mb), daemon=True)
    child.start()
    theirs.close()  # the child holds the only sending end: its exit ends the pipe
    try:
        if not ours.poll(limits.time_s):
            raise RenderFailed(f"the render took longer than its time limit of {limits.time_s:g} s")
        try:
            kind, value = ours.recv()
        except EOFError:
            child.join(5)
            raise RenderFailed(_stopped(child.exitcode)) from None
    finally:
        if child.is_alive():
            child.kill()
        child.join(5)
        ours.close()
    if kind != "pdf":
        raise RenderFailed(str(value))
    return bytes(value)
