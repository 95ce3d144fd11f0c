"""The bench page of a test: readings typed in, results computed and each field saved as typed.

Three requests serve the page (``static/bench.js`` drives the last two, and without script the
form still posts whole):

- ``POST /tests/{id}/preview`` (htmx): the results of what is on the screen, storing nothing;
- ``POST /tests/{id}/fields`` (JSON): the fields the engine accepts, saved one by one against
  the value the page last saw there; a field changed meanwhile elsewhere answers 409 with both;
- ``POST /tests/{id}/readings``: the whole sheet (no script), or the hand-in of the saved draft,
  with the technician's reason for each error remark that stands (fields ``reason.<flag code>``).

Entries a tablet kept offline are bound to their typist: ``/fields`` refuses a batch typed by
another user than the one signed in, and ``POST /tests/{id}/offline-discard`` records that the
person now at the tablet discarded another person's unsent entries, and why
(``server.services.offline``).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Annotated, Any

from fastapi import APIRouter, Depends, HTTPException, Request
from fastapi.responses import JSONResponse, RedirectResponse
from pydantic import AwareDatetime, BaseModel, Field
from sqlmodel import col
from starlette.concurrency import run_in_threadpool
from starlette.responses import Response

from server.auth.sessions import (
    by_cookie,
    csrf_protect,
    database,
    remember_signed_in,
    require_user,
    session_cookie,
)
from server.db.queries import TestRow, test_rows
from server.db.tables import LabTest, User
from server.engine import METHODS
from server.engine.contract import Evaluation, Flag
from server.engine.readings import as_number
from server.reports import formatting
from server.services import bench, offline
from server.services.errors import Conflict, Invalid, NotFound, ServiceError, http_status
from server.services.linked_inputs import LINKED
from server.services.readings_paths import same, value_at
from server.services.sessions import LookUpFirst
from server.web.bench_charts import charts_for
from server.web.bench_forms import (
    RESULT_LINES,
    SHEETS,
    Input,
    Output,
    Rows,
    Section,
    Values,
    input_at,
)
from server.web.forms import dotted, errors_by_path, form_fields, text_of
from server.web.params import Count, IdPath, PageRoute
from server.web.templating import render
from server.workflow.states import is_editable

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Staff = Annotated[User, Depends(require_user)]
SessionCookie = Annotated[None, Depends(session_cookie)]


# -- the sheet as the template shows it ---------------------------------------------------------


@dataclass
class Cell:
    input: Input
    path: str  # readings path
    name: str  # the input's name: "r." + path
    dom: str  # the id suffix of the input and its message
    value: str  # the text the input shows
    error: str | None  # the engine's refusal of this value ("invalid" only)
    who: str  # the row it belongs to, spoken before the label ("Trial 2"), or ""
    hidden: bool = False


@dataclass
class Shown:
    """A computed value ready to show: label, text (rounded by the engine's rule), unit."""

    label: str
    text: str
    unit: str = ""
    key: str = ""
    spread: str = ""  # "± U", the expanded uncertainty, when the engine gives one


@dataclass
class SheetRow:
    index: int
    number: int
    cells: list[Cell]
    outputs: list[Shown] = field(default_factory=list)
    flags: list[Flag] = field(default_factory=list)
    spare: bool = False  # the empty row below the typed ones (a page may not have it yet)


@dataclass
class SectionView:
    section: Section
    kind: str  # "rows" | "values"
    dom: str
    rows: list[SheetRow]
    hidden: bool = False
    error: str | None = None  # a refusal of the whole table ("at least 3 trials")
    error_kind: str = ""  # "invalid" (entered wrong) or "missing" (still to enter)

    @property
    def can_add(self) -> bool:
        return isinstance(self.section, Rows) and len(self.rows) < self.section.max_rows


def _dom(path: str) -> str:
    return "r-" + path.replace(".", "-")


def _shown_when(section_or_input: Section | Input, readings: dict[str, Any]) -> bool:
    when = section_or_input.when
    if when is None:
        return True
    chosen = value_at(readings, when.path)
    return any(same(chosen, v) for v in when.values)


def _number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def _output(ev: Evaluation, readings: dict[str, Any], section: Rows, i: int, out: Output) -> Shown | None:
    entries = ev.results.get(out.result_key)
    if not isinstance(entries, list):
        return None
    entry: Any = None
    if out.align is None:
        entry = entries[i] if i < len(entries) else None
    else:
        typed = as_number(value_at(readings, f"{section.path}.{i}.{out.align}"))  # stored as typed text
        if typed is not None:
            entry = next(
                (e for e in entries if isinstance(e, dict) and as_number(e.get(out.align)) == typed), None
            )
    value = entry.get(out.field) if out.field and isinstance(entry, dict) else entry
    if not _number(value):
        return None
    return Shown(out.label, formatting.number(out.rounding, value), out.unit)


def _row_flags(ev: Evaluation, noun: str, number: int) -> list[Flag]:
    """The quality flags the engine words as about this row ("trial 2: ...")."""
    prefix = f"{noun} {number}:"
    return [f for f in ev.flags if f.message.startswith(prefix)]


def _cells(
    inputs: tuple[Input, ...], base: str, readings: dict[str, Any], errors: dict[str, str], who: str
) -> list[Cell]:
    cells = []
    for inp in inputs:
        path = f"{base}{inp.key}"
        cells.append(
            Cell(
                inp,
                path,
                "r." + path,
                _dom(path),
                text_of(value_at(readings, path)),
                errors.get(path),
                who,
                hidden=not _shown_when(inp, readings),
            )
        )
    return cells


def sheet_view(method: str, readings: dict[str, Any], ev: Evaluation) -> list[SectionView]:
    """The sheet's sections with typed values, per-field refusals, per-row results and flags."""
    errors = errors_by_path(ev.errors, kinds=("invalid",))
    views: list[SectionView] = []
    for n, section in enumerate(SHEETS.get(method, ())):
        hidden = not _shown_when(section, readings)
        if isinstance(section, Values):
            cells = _cells(section.inputs, "", readings, errors, "")
            views.append(SectionView(section, "values", f"part-{n}", [SheetRow(0, 0, cells)], hidden))
            continue
        typed = value_at(readings, section.path)
        count = min(section.max_rows, max(section.rows, (len(typed) if isinstance(typed, list) else 0) + 1))
        rows = []
        for i in range(count):
            who = f"{section.noun.capitalize()} {i + 1}"
            cells = _cells(section.inputs, f"{section.path}.{i}.", readings, errors, who)
            outputs = [s for s in (_output(ev, readings, section, i, o) for o in section.outputs) if s]
            spare = i >= max(section.rows, len(typed) if isinstance(typed, list) else 0)
            rows.append(SheetRow(i, i + 1, cells, outputs, _row_flags(ev, section.noun, i + 1), spare))
        whole = next((e for e in ev.errors if dotted(e.loc) == section.path), None)
        views.append(
            SectionView(
                section,
                "rows",
                f"part-{n}",
                rows,
                hidden,
                whole.message if whole else None,
                whole.kind if whole else "",
            )
        )
    return views


def sheet_texts(method: str, readings: dict[str, Any]) -> dict[str, str]:
    """Every input path of the sheet with the text it shows for these readings (each table's
    rows found once, not again for every one of their inputs: every field saved answers this)."""
    out: dict[str, str] = {}
    for section in SHEETS.get(method, ()):
        if isinstance(section, Values):
            for inp in section.inputs:
                out[inp.key] = text_of(value_at(readings, inp.key))
            continue
        typed = value_at(readings, section.path)
        rows = typed if isinstance(typed, list) else []
        for i in range(min(section.max_rows, max(section.rows, len(rows) + 1))):
            row = rows[i] if i < len(rows) and isinstance(rows[i], Mapping) else None
            for inp in section.inputs:
                out[f"{section.path}.{i}.{inp.key}"] = text_of(value_at(row, inp.key) if row else None)
    return out


def result_lines(ev: Evaluation) -> list[Shown]:
    """The results panel: each result the engine gave, rounded by its rule, with its ± U."""
    r = ev.results
    spreads = r.get("uncertainty") if isinstance(r.get("uncertainty"), dict) else {}
    lines = []
    for line in RESULT_LINES:
        value = r.get(line.key)
        if value is None or isinstance(value, bool | list | dict):
            continue
        u = (spreads or {}).get(line.key)
        # U to two significant figures, the value to the same place unless its rule is coarser
        # (GUM 7.2.6, server/reports/formatting.with_u): the same text as the PDF's
        shown_u = formatting.with_u(line.key, value, u.get("U") if isinstance(u, dict) else None)
        text = shown_u.value if _number(value) else str(value)
        spread = shown_u.u_text
        lines.append(Shown(line.label, text, line.unit, line.key, spread))
    if r.get("nonplastic") is True:
        lines.insert(0, Shown("Plasticity", "NP (non-plastic)", "", "nonplastic"))
    for path, source in (r.get(LINKED) or {}).items():
        field = path.rpartition(".")[2].replace("_mg_m3", "").replace("_", " ")
        where = f"{METHODS[source['method']].title} test {source['test_id']} ({source['status']})"
        lines.append(Shown(f"{field.capitalize()} taken from", where, "", LINKED))
    return lines


# -- routes -----------------------------------------------------------------------------------


def load_row(request: Request, test_id: int) -> TestRow:
    with database(request).session() as s:
        rows = test_rows(s, col(LabTest.id) == test_id)
    if not rows:
        raise HTTPException(404, "no such test")
    return rows[0]


def _results_context(row: TestRow, readings: dict[str, Any], ev: Evaluation) -> dict[str, Any]:
    return {
        "sections": sheet_view(row.test.method, readings, ev),
        "ev": ev,
        "lines": result_lines(ev),
        "charts": charts_for(ev, row.sample.code),
        "missing": [e for e in ev.errors if e.kind == "missing"],
        "wrong": [e for e in ev.errors if e.kind != "missing"],
    }


REASON_PREFIX = "reason."  # a hand-in form's reason for an error remark: "reason." + the flag's code


@dataclass
class ReasonField:
    """The field in which the technician says why an error remark stands, at hand-in."""

    code: str
    messages: list[str]  # the engine's words of every flag of this code
    text: str  # what the field holds: typed, or the reason given at the last hand-in
    error: str | None = None


def reasons_of(items: list[tuple[str, Any]]) -> dict[str, str]:
    """The reasons a posted hand-in gives, by flag code (``reason.<code>`` fields)."""
    return {
        name[len(REASON_PREFIX) :]: raw
        for name, raw in items
        if isinstance(raw, str) and name.startswith(REASON_PREFIX)
    }


def reason_fields(
    ev: Evaluation, texts: Mapping[str, Any] | None, errors: Mapping[str, str] | None = None
) -> list[ReasonField]:
    """One field per error remark of the sheet (``bench.error_flag_codes``), holding ``texts``."""
    shown = texts or {}
    return [
        ReasonField(
            code,
            [f.message for f in ev.flags if f.code == code],
            str(shown.get(code) or ""),
            (errors or {}).get(code),
        )
        for code in bench.error_flag_codes(ev)
    ]


def _page(
    request: Request,
    row: TestRow,
    readings: dict[str, Any],
    ev: Evaluation,
    *,
    status_code: int = 200,
    message: str | None = None,
    problem: str | None = None,
    reasons: Mapping[str, str] | None = None,
    reason_errors: Mapping[str, str] | None = None,
) -> Response:
    """The bench page; ``reasons`` are the hand-in's typed reasons (the stored ones by default)."""
    method = METHODS.get(row.test.method)
    return render(
        request,
        "pages/bench.html",
        status_code=status_code,
        row=row,
        test=row.test,
        title=method.title if method else row.test.method,
        standard=method.standard if method else "",
        editable=is_editable(row.test.status),
        stored=sheet_texts(row.test.method, row.test.readings or {}),
        message=message,
        problem=problem,
        flag_reasons=reason_fields(ev, row.test.flag_reasons if reasons is None else reasons, reason_errors),
        **_results_context(row, readings, ev),
    )


@router.get("/tests/{test_id}")
def bench_page(
    request: Request, test_id: IdPath, user: Staff, saved: Count = 0, handed_in: Count = 0
) -> Response:
    row = load_row(request, test_id)
    readings = row.test.readings or {}
    ev = bench.preview(database(request), row.test, readings)
    message = "Handed in for review." if handed_in else "Draft saved." if saved else None
    return _page(request, row, readings, ev, message=message)


def _changes_from_form(method: str, items: list[tuple[str, Any]]) -> list[bench.Change]:
    """The sheet's fields in a posted form as changes (fields the sheet does not have are ignored)."""
    changes = []
    for path, text in form_fields(items).items():
        inp = input_at(method, path)
        if inp is not None:
            changes.append(bench.Change(path, inp.value(text)))
    return changes


@router.post("/tests/{test_id}/preview")
async def bench_preview(request: Request, test_id: IdPath, user: Staff) -> Response:
    """Results for what is on the screen, without storing anything (htmx, as the technician types)."""
    row = load_row(request, test_id)
    changes = _changes_from_form(row.test.method, (await request.form()).multi_items())
    readings = bench.draft_with(row.test, changes)
    ev = bench.preview(database(request), row.test, readings)
    context = _results_context(row, readings, ev)
    return render(request, "partials/bench_results.html", test=row.test, **context)


class FieldIn(BaseModel):
    path: str = Field(max_length=200)
    value: str = Field(max_length=200)
    base: str = Field(default="", max_length=200)
    typed_at: AwareDatetime | None = None  # the tablet's clock when this value was typed


class FieldsIn(BaseModel):
    """A batch of typed fields; ``typed_by`` and the stamps come from a tablet's kept entries.

    Without ``typed_by`` the fields are taken as typed by the signed-in person just now.
    """

    changes: list[FieldIn] = Field(max_length=400)
    typed_by: int | None = None  # the user id of the person who typed them
    sent_at: AwareDatetime | None = None  # the tablet's clock when it sent the batch


class NotAField(Exception):
    """A typed field the test's sheet does not have: the save is refused, nothing stored."""

    def __init__(self, path: str):
        self.path = path
        super().__init__(f"{path!r} is not a field of this sheet")


def _typed_changes(fields: list[FieldIn]) -> Callable[[str], list[bench.Change]]:
    """The typed fields as changes by the sheet of the test's method, known once the save reads
    the test (so the route reads nothing itself before the save)."""

    def changes(method: str) -> list[bench.Change]:
        out = []
        for item in fields:
            inp = input_at(method, item.path)
            if inp is None:
                raise NotAField(item.path)
            out.append(bench.Change(item.path, inp.value(item.value), inp.value(item.base), item.typed_at))
        return out

    return changes


@router.post("/tests/{test_id}/fields")
async def save_fields(request: Request, test_id: IdPath, _: SessionCookie, body: FieldsIn) -> Response:
    """Save typed fields of the draft, each against the value the page last saw there (JSON).

    200 with the stored values of the whole sheet; 409 with both values of every field changed
    meanwhile elsewhere (nothing stored), or when the test can no longer be edited; 422 with the
    refused values (nothing stored). The bench's hottest path: the session lookup and the save
    share one worker thread (a ``def`` dependency would take a thread of its own first), the save
    is one write transaction with no read before it, and the answer is plain JSON.
    """
    return await run_in_threadpool(_save_fields, request, test_id, body)


def _save_fields(request: Request, test_id: int, body: FieldsIn) -> Response:
    db, changes = database(request), _typed_changes(body.changes)
    try:
        try:  # the usual case: the person read with the test's lock (``sessions.ByCookie``)
            saved = bench.save_changes(
                db, by_cookie(request), test_id, changes, typed_by=body.typed_by, sent_at=body.sent_at
            )
            remember_signed_in(request, saved.signed_in)
        except LookUpFirst:
            saved = bench.save_changes(
                db, require_user(request), test_id, changes, typed_by=body.typed_by, sent_at=body.sent_at
            )
    except NotAField as exc:
        errors = [{"path": exc.path, "message": "not a field of this sheet"}]
        return JSONResponse({"detail": str(exc), "errors": errors}, status_code=422)
    except NotFound as exc:
        raise HTTPException(404, "no such test") from exc
    except offline.OtherTypist as exc:
        return JSONResponse({"detail": str(exc), "other_typist": exc.typed_by}, status_code=409)
    except bench.FieldConflicts as exc:
        conflicts = [
            {"path": c.path, "theirs": text_of(c.theirs), "yours": text_of(c.yours)} for c in exc.conflicts
        ]
        return JSONResponse({"detail": str(exc), "conflicts": conflicts}, status_code=409)
    except Invalid as exc:
        errors = [{"path": dotted(e.loc), "message": e.message} for e in exc.errors]
        return JSONResponse({"detail": str(exc), "errors": errors}, status_code=422)
    except ServiceError as exc:
        refusal = {"detail": str(exc), "locked": isinstance(exc, Conflict)}
        return JSONResponse(refusal, status_code=http_status(exc))
    test = saved.test
    return JSONResponse(
        {
            "version": test.version,
            "status": test.status,
            "stored": saved.paths,
            "values": sheet_texts(test.method, test.readings or {}),
        }
    )


class KeptIn(BaseModel):
    path: str = Field(max_length=200)
    value: str = Field(max_length=200)
    typed_at: AwareDatetime | None = None


class DiscardIn(BaseModel):
    """Another person's entries a tablet kept unsent, to be discarded with a reason."""

    typed_by: int | None  # None: the tablet did not record who typed them
    entries: list[KeptIn] = Field(max_length=400)
    reason: str = Field(default="", max_length=offline.REASON_MAX)


@router.post("/tests/{test_id}/offline-discard")
def discard_offline(request: Request, test_id: IdPath, user: Staff, body: DiscardIn) -> Response:
    """Record that the signed-in person discards entries another person left unsent here (JSON).

    200 once the audit event is written (the tablet then removes the entries); 422 without a
    reason, or with a field the sheet does not have; 404 for no such test. The test itself does
    not change: the entries were never saved.
    """
    row = load_row(request, test_id)
    for item in body.entries:
        if input_at(row.test.method, item.path) is None:
            errors = [{"path": item.path, "message": "not a field of this sheet"}]
            detail = f"{item.path!r} is not a field of this sheet"
            return JSONResponse({"detail": detail, "errors": errors}, status_code=422)
    entries = [offline.KeptEntry(e.path, e.value, e.typed_at) for e in body.entries]
    try:
        event = offline.discard(database(request), user, test_id, body.typed_by, entries, body.reason)
    except Invalid as exc:
        errors = [{"path": dotted(e.loc), "message": e.message} for e in exc.errors]
        return JSONResponse({"detail": str(exc), "errors": errors}, status_code=422)
    except ServiceError as exc:
        return JSONResponse({"detail": str(exc)}, status_code=http_status(exc))
    return JSONResponse({"event": event.id, "discarded": len(entries)})


@router.post("/tests/{test_id}/readings")
async def save_readings(request: Request, test_id: IdPath, user: Staff) -> Response:
    """Save the whole sheet as a draft (no script) and, when asked (``then=submit``), hand it in.

    With ``autosaved=1`` the page has saved every field already: the stored draft is handed in.
    """
    form = await request.form()
    row = load_row(request, test_id)
    changes = _changes_from_form(row.test.method, form.multi_items())
    try:
        version = int(str(form.get("version", "")))
    except ValueError:
        version = -1
    db = database(request)
    if form.get("autosaved") != "1":
        try:
            saved = bench.save_changes(db, user, test_id, changes, version)
        except ServiceError as exc:
            return _refused(request, test_id, changes, exc, "Nothing was saved")
        version = saved.test.version
    else:
        changes = []
    if form.get("then") == "submit":
        reasons = reasons_of(form.multi_items())
        try:
            bench.submit(db, user, test_id, version, reasons)
        except ServiceError as exc:
            what = "Not handed in" if form.get("autosaved") == "1" else "Draft saved, but not handed in"
            return _refused(request, test_id, changes, exc, what, reasons)
        return RedirectResponse(f"/tests/{test_id}?handed_in=1", status_code=303)
    return RedirectResponse(f"/tests/{test_id}?saved=1", status_code=303)


def _refused(
    request: Request,
    test_id: IdPath,
    changes: list[bench.Change],
    exc: ServiceError,
    what: str,
    reasons: Mapping[str, str] | None = None,
) -> Response:
    """The sheet again, as typed, with the refusal and every field's message (a hand-in's
    reasons for error remarks too)."""
    row = load_row(request, test_id)
    readings = bench.draft_with(row.test, changes)
    errors = exc.errors if isinstance(exc, Invalid) else []
    why = {str(e.loc[1]): e.message for e in errors if len(e.loc) == 2 and e.loc[0] == "reasons"}
    if len(why) < len(errors):
        detail = f"{len(errors) - len(why)} value(s) need attention, listed below"
    elif why:
        detail = f"say why each error remark stands ({len(why)} to explain, above the hand-in button)"
    else:
        detail = str(exc)
    return _page(
        request,
        row,
        readings,
        bench.preview(database(request), row.test, readings),
        status_code=http_status(exc),
        problem=f"{what}: {detail}.",
        reasons=reasons,
        reason_errors=why,
    )
