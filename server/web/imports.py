"""Importing a sample schedule from the page (reviewers and admins): upload, preview, confirm.

The page calls the same service as ``claybench import`` (``server.services.imports``). An
upload is read and planned, never stored: the preview shows every row as it would be stored
and every refused cell with its reason, and offers a field for each header it did not
recognise. The file waits in ``server.services.staging`` until the person confirms, and the
confirmation imports exactly those bytes, in one transaction, or nothing.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Annotated, Any

from fastapi import APIRouter, Depends, File, Form, HTTPException, Request, UploadFile
from fastapi.responses import RedirectResponse
from pydantic import BaseModel
from sqlmodel import col, select
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles, require_user
from server.db.tables import Client, Job, User
from server.exchange import spreadsheet
from server.exchange.schedule import CellError, Origin, Schedule
from server.services import imports, staging
from server.services.errors import ServiceError, http_status
from server.services.imports import FILE_MAX_BYTES, ImportPlan, ImportRefused, Target
from server.web.forms import record_id, refusal_of
from server.web.params import IdPath, PageRoute
from server.web.templating import render
from server.workflow.vocabulary import LOCATION_KINDS, SAMPLE_TYPES

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Staff = Annotated[User, Depends(require_user)]
Checker = Annotated[User, Depends(require_roles("reviewer", "admin"))]

FIELD_CHOICES = {"": "(not read)", **{name: column.label for name, column in spreadsheet.FIELDS.items()}}
ACTION_WORDS = {
    "create": "new",
    "update": "changed",
    "unchanged": "unchanged",
    "refused": "refused",
}


@dataclass
class PreviewRow:
    """One line of the file as the preview shows it."""

    where: str
    action: str
    location: str = ""
    values: dict[str, Any] = field(default_factory=dict)
    changes: dict[str, tuple[Any, Any]] = field(default_factory=dict)
    tests: list[str] = field(default_factory=list)
    errors: list[CellError] = field(default_factory=list)


def _where(origin: Origin) -> str:
    if origin.group is not None:
        return f"{origin.group} line {origin.line}" if origin.line else origin.group
    return f"row {origin.row}" if origin.row else ""


def _order(origin: Origin) -> tuple[str, int]:
    return (origin.group or "", origin.line or origin.row or 0)


def preview_rows(plan: ImportPlan) -> tuple[list[PreviewRow], list[CellError]]:
    """Every planned sample and every refused line in file order, each line's refusals beside
    it; and the refusals of the file or the job as a whole (no line of a sample)."""
    by_origin: dict[Origin, list[CellError]] = {}
    for error in plan.errors:
        by_origin.setdefault(error.origin, []).append(error)
    rows: dict[Origin, PreviewRow] = {}
    for planned in plan.samples:
        rows[planned.origin] = PreviewRow(
            _where(planned.origin),
            planned.action,
            planned.location,
            planned.values,
            planned.changes,
            [*planned.new_tests, *planned.kept_tests],
        )
    whole: list[CellError] = []
    for origin, errors in by_origin.items():
        if origin.row in (None, 1) and origin.line is None and origin not in rows:
            whole += errors
            continue
        row = rows.setdefault(origin, PreviewRow(_where(origin), "refused"))
        row.errors = errors
        row.action = "refused"
    ordered = [rows[o] for o in sorted(rows, key=_order)]
    return ordered, whole


def _headers(filename: str, content: bytes, mapping: dict[str, str]) -> list[tuple[str, str, bool]]:
    """A spreadsheet's headers, each with the field it gives and whether a person chose it."""
    try:
        table = spreadsheet.read_table(filename, content)
        match = spreadsheet.match_headers(table.headers, mapping)
    except (spreadsheet.FileRefused, spreadsheet.HeaderError):
        return []
    taken = {index: name for name, index in match.columns.items()}
    return [(h, taken.get(i, ""), h in mapping) for i, h in enumerate(table.headers) if h.strip()]


def _target(request: Request, fields: ImportFields) -> tuple[Target, Job | None]:
    """The import's target: the page's job when it was opened from one, else what was typed."""
    if fields.job_id:
        with database(request).session() as s:
            found = s.get(Job, record_id(fields.job_id) or 0)
        if found is None:
            raise HTTPException(404, "no such job")
        return Target(found.code), found
    return Target(fields.job, fields.client, fields.title, fields.site), None


def _upload_page(
    request: Request, job: Job | None, form: dict[str, str], status_code: int = 200, **extra: Any
) -> Response:
    with database(request).session() as s:
        clients = [c.name for c in s.exec(select(Client).order_by(col(Client.name)))]
    return render(
        request,
        "pages/import.html",
        status_code=status_code,
        job=job,
        form=form,
        clients=clients,
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
        max_mb=FILE_MAX_BYTES // (1024 * 1024),
        fields=spreadsheet.FIELDS,
        required=spreadsheet.REQUIRED,
    )


def _blank_target() -> dict[str, str]:
    return {"job": "", "client": "", "title": "", "site": ""}


@router.get("/import")
def new_job_import_page(request: Request, user: Checker) -> Response:
    """Import a schedule into a job that does not exist yet (or name any job by its number)."""
    return _upload_page(request, None, _blank_target())


@router.get("/jobs/{job_id}/import")
def job_import_page(request: Request, job_id: IdPath, user: Checker) -> Response:
    with database(request).session() as s:
        job = s.get(Job, job_id)
    if job is None:
        raise HTTPException(404, "no such job")
    return _upload_page(request, job, _blank_target())


def _preview(
    request: Request,
    staged: staging.Staged,
    target: Target,
    job: Job | None,
    mapping: dict[str, str],
    refused: list[CellError] | None = None,
) -> Response:
    """Read and plan the staged file and show the preview (422 while anything is refused);
    with ``refused``, the refusals a confirmation met (the stored job changed since the
    preview) are shown instead."""
    schedule: Schedule = imports.read_schedule(staged.filename, staged.content, mapping or None)
    plan = imports.plan_import(database(request), schedule, target)
    if refused is not None:
        plan.errors = refused
    rows, whole = preview_rows(plan)
    return render(
        request,
        "pages/import_preview.html",
        status_code=422 if plan.errors else 200,
        staged=staged,
        plan=plan,
        rows=rows,
        whole=whole,
        target=target,
        job=job,
        mapping=mapping,
        headers=_headers(staged.filename, staged.content, mapping) if schedule.format != "ags4" else [],
        field_choices=FIELD_CHOICES,
        action_words=ACTION_WORDS,
        kinds=LOCATION_KINDS,
        sample_types=SAMPLE_TYPES,
    )


class ImportFields(BaseModel):
    """What the upload, preview and confirmation forms carry besides the file: the staged
    file's token, the job (the page's own, or the one typed), and the header mapping chosen."""

    token: str = ""
    job_id: str = ""
    job: str = ""
    client: str = ""
    title: str = ""
    site: str = ""
    map_header: list[str] = []
    map_field: list[str] = []

    def typed(self) -> dict[str, str]:
        return {"job": self.job, "client": self.client, "title": self.title, "site": self.site}

    def mapping(self) -> dict[str, str]:
        """The person's choice of field for each header, as pairs of the parallel lists."""
        return {h: f for h, f in zip(self.map_header, self.map_field, strict=False) if h}


Fields = Annotated[ImportFields, Form()]


@router.post("/import/preview")
def preview_import(
    request: Request, user: Checker, fields: Fields, file: Annotated[UploadFile | None, File()] = None
) -> Response:
    """Read an upload (or the staged file again, with a header mapping) and show the preview."""
    target, found = _target(request, fields)
    try:
        if file is not None and file.filename:
            content = file.file.read(FILE_MAX_BYTES + 1)
            if len(content) > FILE_MAX_BYTES or Path(file.filename).suffix.lower() not in imports.FORMATS:
                # read_schedule words the refusal (kind of file, size) as the command does
                imports.read_schedule(file.filename, content)
            staged = staging.stage(database(request), user, file.filename, content)
        elif fields.token:
            staged = staging.staged(database(request), user, fields.token)
        else:
            errors = {"file": "choose a .csv, .xlsx or .ags file to import"}
            return _upload_page(request, found, fields.typed(), 422, errors=errors)
        return _preview(request, staged, target, found, fields.mapping())
    except ImportRefused as exc:
        message = "; ".join(e.message for e in exc.errors)
        return _upload_page(request, found, fields.typed(), 422, errors={"file": message})
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _upload_page(request, found, fields.typed(), http_status(exc), errors=errors, problem=problem)


@router.post("/import/confirm")
def confirm_import(request: Request, user: Checker, fields: Fields) -> Response:
    """Import the previewed file in one transaction, then open the job."""
    target, found = _target(request, fields)
    mapping = fields.mapping()
    try:
        staged = staging.staged(database(request), user, fields.token)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _upload_page(request, found, fields.typed(), http_status(exc), errors=errors, problem=problem)
    try:
        schedule = imports.read_schedule(staged.filename, staged.content, mapping or None)
        plan = imports.import_schedule(
            database(request), user, schedule, target, source=f"{staged.filename} (sha256 {staged.sha256})"
        )
    except ImportRefused as exc:
        return _preview(request, staged, target, found, mapping, exc.errors)
    except ServiceError as exc:
        return _preview(
            request, staged, target, found, mapping, [CellError(Origin(row=None), "job", str(exc))]
        )
    staging.discard(database(request), staged.token)
    with database(request).session() as s:
        stored = s.exec(select(Job).where(Job.code == plan.job)).first()
    if stored is None:  # the import created or found it: it exists unless deleted meanwhile
        raise HTTPException(404, "no such job")
    return RedirectResponse(f"/jobs/{stored.id}?done=imported", status_code=303)


# --- templates --------------------------------------------------------------------------------


@router.get("/imports/template.csv")
def template_csv(user: Staff) -> Response:
    return Response(
        spreadsheet.template_csv(),
        media_type="text/csv; charset=utf-8",
        headers={"Content-Disposition": 'attachment; filename="claybench-schedule.csv"'},
    )


@router.get("/imports/template.xlsx")
def template_xlsx(user: Staff) -> Response:
    return Response(
        spreadsheet.template_xlsx(),
        media_type="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
        headers={"Content-Disposition": 'attachment; filename="claybench-schedule.xlsx"'},
    )
