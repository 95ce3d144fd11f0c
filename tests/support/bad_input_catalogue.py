"""The bad-input catalogue (S10): inputs every front door must refuse field by field.

Each case says how to send it (a page, the JSON API, the ``claybench`` command, or a schedule
file through one of the import doors), the status it must get (an HTTP status, or the
command's exit status 2), the field the refusal must name and a phrase its message must
contain: for a text that is too long, the limit. The runner (tests/test_bad_input_catalogue.py)
also checks that nothing answered 500 or printed a traceback and that no row of any table
changed.

Paths and values name the records of the runner's scenario with ``{placeholders}``: ``{job}``,
``{client}``, ``{location}``, ``{sample}``, ``{test}`` (a requested test), ``{submitted}`` and
``{version}`` (a test handed in for review), ``{user}`` (the technician), ``{container}``,
``{equipment}``, ``{link}`` and ``{job_code}``.

The limits are the columns' lengths (server/db/tables.py) and the services' constants; the
integer bounds are the largest value of a PostgreSQL ``integer`` (2^31 - 1, PostgreSQL manual,
"Numeric Types", table 8.2) and the first value past SQLite's 64-bit integers (2^63, SQLite
documentation, "Datatypes In SQLite", section 2); 401 digits and 1e400 are past the largest
IEEE 754 double (about 1.8e308, IEEE 754-2008 table 3.5).
"""

from __future__ import annotations

import copy
import csv
import io
import json
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from openpyxl import Workbook

from tests.services.test_imports import LOCA, PROJ, SAMP, ags_bytes
from tests.support.scenario import ATTERBERG

PG_PAST = 2**31  # one past PostgreSQL's integer
SQLITE_PAST = 2**63  # one past SQLite's integer
DIGITS_401 = "1" + "0" * 400  # a number no double holds
TOO_MANY_DIGITS = "1" + "0" * 5000  # past Python's own limit of 4300 digits for reading an integer
ID_BOUND = "2147483647"  # what the refusal of an id beyond the bound names


@dataclass(frozen=True)
class Page:
    """A page request by a signed-in browser: GET when ``form`` is None, else a POST of the form
    with the session's CSRF token (as an htmx request when ``htmx``)."""

    path: str
    form: dict[str, str] | None = None
    query: dict[str, str] | None = None
    user: str = "admin"
    htmx: bool = False
    json: Any = None


@dataclass(frozen=True)
class Api:
    """A JSON API request with a personal token (``raw``: a body sent as typed, for numbers a
    JSON encoder would not write)."""

    method: str
    path: str
    json: Any = None
    raw: str | None = None
    query: dict[str, str] | None = None


@dataclass(frozen=True)
class Cli:
    """``claybench ARGV...`` through the command's ``main``; ``file`` is written to a file whose
    path replaces ``{file}`` in the arguments (the calculation request, say)."""

    argv: tuple[str, ...]
    file: str | None = None


@dataclass(frozen=True)
class Upload:
    """A schedule file sent through one import door: ``cli`` (``claybench import``), ``api``
    (POST /api/v1/jobs/{job}/imports) or ``page`` (the import page's preview)."""

    filename: str
    content: Callable[[], bytes]
    via: str
    args: tuple[str, ...] = ()


@dataclass(frozen=True)
class Case:
    name: str
    send: Page | Api | Cli | Upload
    status: int
    field: str
    says: str

    @property
    def door(self) -> str:
        return {Page: "page", Api: "api", Cli: "cli", Upload: "import"}[type(self.send)]


CASES: list[Case] = []


def case(name: str, send: Page | Api | Cli | Upload, status: int, field_name: str, says: str) -> None:
    assert all(c.name != name for c in CASES), name
    CASES.append(Case(name, send, status, field_name, says))


def long(n: int) -> str:
    return "x" * n


def shown(value: str) -> str:
    """A value as a case's name gives it: a long one by its length."""
    if len(value) <= 20:
        return value
    return f"of {len(value)} digits" if value.isdigit() else f"of {len(value)} characters"


# --- pages: ids in paths beyond what any backend's integer holds: 404 -------------------------

PAGE_ID_PATHS = {
    "client page": ("/clients/{id}", "client_id"),
    "job edit page": ("/jobs/{id}/edit", "job_id"),
    "location edit page": ("/locations/{id}/edit", "location_id"),
    "sample edit page": ("/samples/{id}/edit", "sample_id"),
    "job page": ("/jobs/{id}", "job_id"),
    "sample page": ("/samples/{id}", "sample_id"),
    "job CSV export": ("/jobs/{id}/export.csv", "job_id"),
    "job AGS4 export": ("/jobs/{id}/export.ags", "job_id"),
    "receipt page": ("/jobs/{id}/receive", "job_id"),
    "job labels": ("/jobs/{id}/labels.pdf", "job_id"),
    "sample label": ("/samples/{id}/label.pdf", "sample_id"),
    "job import page": ("/jobs/{id}/import", "job_id"),
    "bench page": ("/tests/{id}", "test_id"),
    "review page": ("/review/{id}", "test_id"),
    "reissue page": ("/jobs/{id}/reissue", "job_id"),
    "report preview": ("/jobs/{id}/reports/preview", "job_id"),
    "links page": ("/jobs/{id}/links", "job_id"),
    "report PDF": ("/reports/{id}.pdf", "report_id"),
    "report AGS4": ("/reports/{id}.ags", "report_id"),
    "job trail": ("/jobs/{id}/trail", "job_id"),
    "job trail CSV": ("/jobs/{id}/trail.csv", "job_id"),
    "sample trail": ("/samples/{id}/trail", "sample_id"),
    "job turnaround": ("/jobs/{id}/turnaround", "job_id"),
    "admin user page": ("/admin/users/{id}", "user_id"),
}
for label, (template, param) in PAGE_ID_PATHS.items():
    for past, value in (("PostgreSQL", PG_PAST), ("SQLite", SQLITE_PAST)):
        case(f"{label}: id past {past}'s integer", Page(template.format(id=value)), 404, param, ID_BOUND)

PAGE_ID_POSTS = {
    "add a location": ("/jobs/{id}/locations", "job_id", {"code": "BH9"}),
    "withdraw a sample": ("/samples/{id}/withdraw", "sample_id", {"reason": "lost"}),
    "approve a test": ("/review/{id}/approve", "test_id", {"version": "1", "password": "x"}),
    "revoke a link": ("/links/{id}/revoke", "link_id", {"reason": "sent to the wrong client"}),
    "deactivate a user": ("/admin/users/{id}/active", "user_id", {"active": "0", "reason": "left"}),
    "reweigh a tin": ("/registers/admin/containers/{id}/tare", "container_id", {"tare_g": "12.5"}),
    "edit an instrument": ("/registers/admin/equipment/{id}", "equipment_id", {"description": "B"}),
    "save bench readings": ("/tests/{id}/readings", "test_id", {"version": "1"}),
}
for label, (template, param, form) in PAGE_ID_POSTS.items():
    case(
        f"{label}: id past SQLite's integer",
        Page(template.format(id=SQLITE_PAST), form),
        404,
        param,
        ID_BOUND,
    )

# --- pages: integers in queries: 422 with the field named --------------------------------------

PAGE_QUERIES = [
    ("trail offset in exponent form", "/jobs/{job}/trail", {"offset": "1e23"}, "offset", "integer"),
    (
        "trail offset past SQLite's integer",
        "/jobs/{job}/trail",
        {"offset": str(SQLITE_PAST)},
        "offset",
        ID_BOUND,
    ),
    (
        "trail offset below zero",
        "/jobs/{job}/trail",
        {"offset": "-1"},
        "offset",
        "greater than or equal to 0",
    ),
    (
        "sample trail offset past the bound",
        "/samples/{sample}/trail",
        {"offset": str(PG_PAST)},
        "offset",
        ID_BOUND,
    ),
    ("review queue age of a billion hours", "/review", {"age": "1000000000"}, "age", "36500"),
    ("review queue age below zero", "/review", {"age": "-5"}, "age", "36500"),
    ("review queue job past SQLite's integer", "/review", {"job": str(SQLITE_PAST)}, "job", ID_BOUND),
    ("review queue person past the bound", "/review", {"person": str(PG_PAST)}, "person", ID_BOUND),
    (
        "review queue approved count past the bound",
        "/review",
        {"approved": str(SQLITE_PAST)},
        "approved",
        ID_BOUND,
    ),
    ("bench saved flag past the bound", "/tests/{test}", {"saved": str(SQLITE_PAST)}, "saved", ID_BOUND),
    ("bench handed-in flag in exponent form", "/tests/{test}", {"handed_in": "1e23"}, "handed_in", "integer"),
    ("registers saved flag past the bound", "/registers", {"saved": str(SQLITE_PAST)}, "saved", ID_BOUND),
    (
        "tin register id past SQLite's integer",
        "/registers/admin/containers",
        {"id": str(SQLITE_PAST)},
        "id",
        ID_BOUND,
    ),
    (
        "instrument register id past the bound",
        "/registers/admin/equipment",
        {"id": str(PG_PAST)},
        "id",
        ID_BOUND,
    ),
    (
        "report preview sample past the bound",
        "/jobs/{job}/reports/preview",
        {"sample": str(SQLITE_PAST)},
        "sample",
        ID_BOUND,
    ),
    (
        "labels sample past the bound",
        "/jobs/{job}/labels.pdf",
        {"sample": str(SQLITE_PAST)},
        "sample",
        ID_BOUND,
    ),
    ("audit job id past SQLite's integer", "/audit/job", {"job_id": str(SQLITE_PAST)}, "job_id", ID_BOUND),
]
for label, path, query, param, says in PAGE_QUERIES:
    case(label, Page(path, query=query), 422, param, says)

# --- pages: texts too long and numbers that are not numbers, on every form --------------------

CLIENT_FORM = {"name": "Another Client Ltd", "contact": "", "email": "", "postal_address": ""}
JOB_FORM = {"client_id": "{client}", "code": "T-200", "title": "Second job", "site": "", "standards": "astm"}
SAMPLE_FORM = {
    "location_id": "{location}",
    "code": "BH1-S9",
    "depth_from_m": "2.0",
    "depth_to_m": "2.5",
    "sample_type": "disturbed",
    "description": "",
    "remarks": "",
}
RECEIPT_FORM = {
    "code": "BH1-S1",
    "location": "BH1",
    "location_kind": "borehole",
    "depth_from_m": "1.0",
    "depth_to_m": "1.45",
    "sample_type": "U100",
    "description": "Firm brown CLAY",
    "condition": "intact",
    "stored_at": "Rack 1",
}
EQUIPMENT_FORM = {
    "code": "B-9",
    "kind": "balance",
    "description": "Balance",
    "calibration_due": "2030-01-01",
    "capacity_g": "2000",
}


def form_case(
    label: str,
    path: str,
    base: dict[str, str],
    name: str,
    value: str,
    says: str,
    *,
    status: int = 422,
    err: str | None = None,
    page_user: str = "admin",
) -> None:
    case(label, Page(path, {**base, name: value}, user=page_user), status, err or name, says)


for name, limit in (("name", 200), ("contact", 200), ("email", 254), ("postal_address", 500)):
    form_case(
        f"new client: {name} of {limit + 1} characters",
        "/clients",
        CLIENT_FORM,
        name,
        long(limit + 1) if name != "email" else long(limit - 8) + "@ex.co.uk",
        f"at most {limit}",
    )
    form_case(
        f"client edit: {name} of {limit + 1} characters",
        "/clients/{client}",
        CLIENT_FORM,
        name,
        long(limit + 1) if name != "email" else long(limit - 8) + "@ex.co.uk",
        f"at most {limit}",
    )
for name, limit in (("code", 32), ("title", 200), ("site", 200), ("order_reference", 100), ("notes", 2000)):
    form_case(
        f"new job: {name} of {limit + 1} characters",
        "/jobs/new",
        JOB_FORM,
        name,
        long(limit + 1),
        f"at most {limit}",
    )
    form_case(
        f"job edit: {name} of {limit + 1} characters",
        "/jobs/{job}/edit",
        {**JOB_FORM, "code": "{job_code}"},
        name,
        long(limit + 1),
        f"at most {limit}",
    )
form_case(
    "new job: client id past SQLite's integer", "/jobs/new", JOB_FORM, "client_id", str(SQLITE_PAST), "choose"
)
form_case(
    "new job: received date in year 99999", "/jobs/new", JOB_FORM, "received_on", "99999-01-01", "YYYY-MM-DD"
)
LOCATION_FORM = {"code": "BH9", "kind": "borehole", "easting": "", "northing": "", "ground_level_m": ""}
form_case(
    "new location: code of 33 characters",
    "/jobs/{job}/locations",
    LOCATION_FORM,
    "code",
    long(33),
    "at most 32",
)
form_case(
    "new location: easting of 401 digits",
    "/jobs/{job}/locations",
    LOCATION_FORM,
    "easting",
    DIGITS_401,
    "finite",
)
form_case(
    "new location: ground level 1e400",
    "/jobs/{job}/locations",
    LOCATION_FORM,
    "ground_level_m",
    "1e400",
    "finite",
)
form_case(
    "location edit: code of 33 characters",
    "/locations/{location}/edit",
    {**LOCATION_FORM, "code": "BH1"},
    "code",
    long(33),
    "at most 32",
)
form_case(
    "location edit: northing NaN",
    "/locations/{location}/edit",
    {**LOCATION_FORM, "code": "BH1"},
    "northing",
    "NaN",
    "number",
)
for name, limit in (("code", 32), ("description", 1000), ("remarks", 1000)):
    form_case(
        f"new sample: {name} of {limit + 1} characters",
        "/jobs/{job}/samples",
        SAMPLE_FORM,
        name,
        long(limit + 1),
        f"at most {limit}",
    )
    form_case(
        f"sample edit: {name} of {limit + 1} characters",
        "/samples/{sample}/edit",
        {**SAMPLE_FORM, "code": "BH1-S1"},
        name,
        long(limit + 1),
        f"at most {limit}",
    )
for name, value, says in (
    ("depth_from_m", "1e400", "finite"),
    ("depth_from_m", DIGITS_401, "finite"),
    ("depth_to_m", "Infinity", "number"),
    ("depth_from_m", TOO_MANY_DIGITS, "number"),
):
    form_case(f"new sample: {name} {shown(value)}", "/jobs/{job}/samples", SAMPLE_FORM, name, value, says)
form_case(
    "new sample: location id past SQLite's integer",
    "/jobs/{job}/samples",
    SAMPLE_FORM,
    "location_id",
    str(SQLITE_PAST),
    "location",
)
form_case(
    "withdraw a sample: reason of 1001 characters",
    "/samples/{sample}/withdraw",
    {},
    "reason",
    long(1001),
    "1000 characters",
)
for name, limit in (("code", 32), ("location", 32), ("description", 1000), ("stored_at", 64)):
    form_case(
        f"receipt: {name} of {limit + 1} characters",
        "/jobs/{job}/receive",
        RECEIPT_FORM,
        name,
        long(limit + 1),
        f"at most {limit}",
    )
form_case(
    "receipt: depth of 401 digits", "/jobs/{job}/receive", RECEIPT_FORM, "depth_from_m", DIGITS_401, "finite"
)
form_case(
    "receipt: receiver id past SQLite's integer",
    "/jobs/{job}/receive",
    RECEIPT_FORM,
    "received_by_id",
    str(SQLITE_PAST),
    "member",
)
LAB_FORM = {"lab_name": "Soils Lab", "address": "", "accreditation": ""}
for name, limit in (("lab_name", 200), ("address", 500), ("accreditation", 200)):
    form_case(
        f"laboratory: {name} of {limit + 1} characters",
        "/registers/admin/laboratory",
        LAB_FORM,
        name,
        long(limit + 1),
        f"at most {limit}",
    )
form_case(
    "new tin: code of 33 characters",
    "/registers/admin/containers",
    {"code": "T-9", "tare_g": "12.5"},
    "code",
    long(33),
    "up to 32",
)
form_case(
    "new tin: tare 1e400",
    "/registers/admin/containers",
    {"code": "T-9", "tare_g": "12.5"},
    "tare_g",
    "1e400",
    "5000 g",
)
form_case(
    "new tin: tare of 401 digits",
    "/registers/admin/containers",
    {"code": "T-9", "tare_g": "12.5"},
    "tare_g",
    DIGITS_401,
    "5000 g",
)
form_case(
    "reweigh a tin: tare NaN",
    "/registers/admin/containers/{container}/tare",
    {},
    "tare_g",
    "NaN",
    "more than 0",
    err="tare-{container}",
)
for name, value, says in (
    ("code", long(33), "up to 32"),
    ("description", long(201), "at most 200"),
    ("capacity_g", DIGITS_401, "at most 1e+06"),
    ("calibration_due", "99999-12-31", "YYYY-MM-DD"),
):
    form_case(
        f"new instrument: {name} {shown(value)}",
        "/registers/admin/equipment",
        EQUIPMENT_FORM,
        name,
        value,
        says,
    )
form_case(
    "instrument edit: description of 201 characters",
    "/registers/admin/equipment/{equipment}",
    {"description": "B", "calibration_due": "2030-01-01", "capacity_g": "2000", "capacity_on_form": "1"},
    "description",
    long(201),
    "at most 200",
    err="row-{equipment}",
)
USER_FORM = {
    "username": "newperson",
    "full_name": "New Person",
    "role": "technician",
    "password": "a-long-first-password-1",
}
form_case(
    "new user: username of 65 characters", "/admin/users", USER_FORM, "username", long(65), "64 characters"
)
form_case(
    "new user: full name of 201 characters",
    "/admin/users",
    USER_FORM,
    "full_name",
    long(201),
    "200 characters",
)
form_case(
    "new user: full name of 5,000 characters",
    "/admin/users",
    USER_FORM,
    "full_name",
    long(5000),
    "200 characters",
)
form_case(
    "user edit: full name of 201 characters",
    "/admin/users/{user}",
    {"full_name": "Tech Person", "role": "technician", "reason": "typo"},
    "full_name",
    long(201),
    "200 characters",
)
form_case(
    "user edit: reason of 1001 characters",
    "/admin/users/{user}",
    {"full_name": "Tech Person Renamed", "role": "technician"},
    "reason",
    long(1001),
    "1000 characters",
    err="active",
)
form_case(
    "deactivate a user: reason of 1001 characters",
    "/admin/users/{user}/active",
    {"active": "0"},
    "reason",
    long(1001),
    "1000 characters",
    err="active",
)
form_case(
    "reset a password: reason of 1001 characters",
    "/admin/users/{user}/password",
    {"password": "another-long-password-2"},
    "reason",
    long(1001),
    "1000 characters",
    err="active",
)
TOKEN_FORM = {"name": "script", "scope": "read", "days": "30"}
form_case(
    "new API token: name of 101 characters", "/account/tokens", TOKEN_FORM, "name", long(101), "at most 100"
)
form_case(
    "new API token: days past SQLite's integer",
    "/account/tokens",
    TOKEN_FORM,
    "days",
    str(SQLITE_PAST),
    "366",
)
form_case("new API token: days in exponent form", "/account/tokens", TOKEN_FORM, "days", "1e23", "366")
LINK_FORM = {"days_valid": "30", "label": "for the client", "scope": "job"}
form_case(
    "new link: label of 201 characters", "/jobs/{job}/links", LINK_FORM, "label", long(201), "at most 200"
)
form_case(
    "new link: days past SQLite's integer",
    "/jobs/{job}/links",
    LINK_FORM,
    "days_valid",
    str(SQLITE_PAST),
    "366",
)
form_case("new link: days in exponent form", "/jobs/{job}/links", LINK_FORM, "days_valid", "1e23", "366")
form_case(
    "revoke a link: reason of 1001 characters",
    "/links/{link}/revoke",
    {"job_id": "{job}"},
    "reason",
    long(1001),
    "1000 characters",
    err="reason-{link}",
)
form_case(
    "approve: meaning of 301 characters",
    "/review/{submitted}/approve",
    {"version": "{version}", "password": "review-password-1"},
    "meaning",
    long(301),
    "300 characters",
    page_user="review",
)
form_case(
    "approve: version past SQLite's integer",
    "/review/{submitted}/approve",
    {"password": "review-password-1", "meaning": "Reviewed"},
    "version",
    str(SQLITE_PAST),
    ID_BOUND,
    page_user="review",
)
form_case(
    "return: reason of 1001 characters",
    "/review/{submitted}/return",
    {"version": "{version}"},
    "reason",
    long(1001),
    "1000 characters",
    page_user="review",
)
form_case(
    "return: version in exponent form",
    "/review/{submitted}/return",
    {"reason": "check trial 2"},
    "version",
    "1e23",
    "integer",
    page_user="review",
)

# --- the JSON API v1 and the calculation API ---------------------------------------------------

JOB_IN = {"client_id": "{client}", "code": "T-300", "title": "API job"}
SAMPLE_IN = {"location_id": "{location}", "code": "BH1-S7", "depth_from_m": 3.0, "depth_to_m": 3.5}
for name, limit in (("name", 200), ("contact", 200), ("postal_address", 500)):
    case(
        f"API client: {name} of {limit + 1} characters",
        Api("POST", "/api/v1/clients", {"name": "API Client", name: long(limit + 1)}),
        422,
        name,
        f"at most {limit}",
    )
for name, limit in (
    ("code", 32),
    ("title", 200),
    ("site", 200),
    ("order_reference", 100),
    ("notes", 2000),
    ("standards", 16),
):
    case(
        f"API job: {name} of {limit + 1} characters",
        Api("POST", "/api/v1/jobs", {**JOB_IN, name: long(limit + 1)}),
        422,
        name,
        f"at most {limit}" if name != "standards" else "standards",
    )
case(
    "API job: client id past SQLite's integer",
    Api("POST", "/api/v1/jobs", {**JOB_IN, "client_id": SQLITE_PAST}),
    422,
    "client_id",
    ID_BOUND,
)
case(
    "API location: code of 33 characters",
    Api("POST", "/api/v1/jobs/{job}/locations", {"code": long(33)}),
    422,
    "code",
    "at most 32",
)
case(
    "API location: easting of 401 digits",
    Api("POST", "/api/v1/jobs/{job}/locations", raw='{"code": "BH8", "easting": ' + DIGITS_401 + "}"),
    422,
    "easting",
    "number",
)
case(
    "API location: kind of 33 characters",
    Api("POST", "/api/v1/jobs/{job}/locations", {"code": "BH8", "kind": long(33)}),
    422,
    "kind",
    "kind",
)
for name, limit in (("code", 32), ("description", 1000), ("remarks", 1000), ("sample_type", 32)):
    case(
        f"API sample: {name} of {limit + 1} characters",
        Api("POST", "/api/v1/jobs/{job}/samples", {**SAMPLE_IN, name: long(limit + 1)}),
        422,
        name,
        f"at most {limit}" if name != "sample_type" else "sample type",
    )
for label, number in (
    ("401 digits", DIGITS_401),
    ("1e400", "1e400"),
    ("NaN", "NaN"),
    ("-Infinity", "-Infinity"),
):
    body = '{"location_id": {location}, "code": "BH1-S8", "depth_from_m": ' + number + "}"
    case(
        f"API sample: depth of {label}",
        Api("POST", "/api/v1/jobs/{job}/samples", raw=body),
        422,
        "depth_from_m",
        "finite" if label in ("1e400", "NaN", "-Infinity") else "number",
    )
case(
    "API sample: method id of 41 characters",
    Api("POST", "/api/v1/jobs/{job}/samples", {**SAMPLE_IN, "methods": [long(41)]}),
    422,
    "methods",
    "method",
)
case(
    "API sample: location id past the bound",
    Api("POST", "/api/v1/jobs/{job}/samples", {**SAMPLE_IN, "location_id": PG_PAST}),
    422,
    "location_id",
    ID_BOUND,
)
case(
    "API readings: version past SQLite's integer",
    Api("PUT", "/api/v1/tests/{test}/readings", {"version": SQLITE_PAST, "readings": {}}),
    422,
    "version",
    ID_BOUND,
)
case(
    "API readings: tare of 401 digits",
    Api(
        "PUT",
        "/api/v1/tests/{test}/readings",
        raw='{"version": 1, "readings": {"water_content": {"determinations": [{"tare_g": '
        + DIGITS_401
        + "}]}}}",
    ),
    422,
    "tare_g",
    "too large",
)
case(
    "API readings: container of 61 characters",
    Api(
        "PUT",
        "/api/v1/tests/{test}/readings",
        {"version": 1, "readings": {"water_content": {"determinations": [{"container": long(61)}]}}},
    ),
    422,
    "container",
    "40 characters",
)
case(
    "API approve: meaning of 301 characters",
    Api(
        "POST",
        "/api/v1/tests/{submitted}/approve",
        {"version": "{version}", "password": "admin-password-1", "meaning": long(301)},
    ),
    422,
    "meaning",
    "300 characters",
)
case(
    "API return: reason of 1001 characters",
    Api("POST", "/api/v1/tests/{submitted}/return", {"version": "{version}", "reason": long(1001)}),
    422,
    "reason",
    "1000 characters",
)
for path in (
    "/api/v1/jobs/{id}",
    "/api/v1/tests/{id}",
    "/api/v1/jobs/{id}/samples",
    "/api/v1/reports/{id}.pdf",
):
    case(
        f"API GET {path}: id past PostgreSQL's integer",
        Api("GET", path.format(id=PG_PAST)),
        422,
        path.split("{")[0].rstrip("/").split("/")[-1][:-1] + "_id",
        ID_BOUND,
    )
case(
    "API job list: client id past SQLite's integer",
    Api("GET", "/api/v1/jobs", query={"client_id": str(SQLITE_PAST)}),
    422,
    "client_id",
    ID_BOUND,
)
case(
    "API export: format of 5,000 characters",
    Api("GET", "/api/v1/jobs/{job}/export", query={"format": long(5000)}),
    422,
    "format",
    "ags4",
)
CALC_NUMBERS = (
    ("401 digits", DIGITS_401),
    ("1e400", "1e400"),
    ("NaN", "NaN"),
    ("Infinity", "Infinity"),
    ("5,001 digits", TOO_MANY_DIGITS),
)
for label, number in CALC_NUMBERS[
    :4
]:  # 5,001 digits is no JSON Python reads: a 400, as for any unparsable body
    wc = (
        '{"method": "water-content", "readings": {"determinations": [{"tare_g": '
        + number
        + ', "wet_tare_g": 45.62, "dry_tare_g": 38.11}]}}'
    )
    case(
        f"calculation API: water-content tare of {label}",
        Api("POST", "/api/v1/calculations", raw=wc),
        422,
        "tare_g",
        "too large" if label == "401 digits" else "number",
    )
    ll = (
        '{"method": "ll-cup-one-point", "readings": {"trials": [{"blows": '
        + number
        + ', "tare_g": 10, "wet_tare_g": 38.4, "dry_tare_g": 30}]}}'
    )
    case(
        f"calculation API: blows of {label}",
        Api("POST", "/api/v1/calculations", raw=ll),
        422,
        "blows",
        "too large" if label == "401 digits" else "number",
    )
case(
    "calculation API: method id of 5,000 characters",
    Api("POST", "/api/v1/calculations", {"method": long(5000), "readings": {}}),
    422,
    "method",
    "method",
)
case(
    "calculation API: container of 61 characters",
    Api(
        "POST",
        "/api/v1/calculations",
        {
            "method": "water-content",
            "readings": {
                "determinations": [{"container": long(61), "tare_g": 10, "wet_tare_g": 20, "dry_tare_g": 18}]
            },
        },
    ),
    422,
    "container",
    "40 characters",
)

# --- the command: calc, create-user, create-token, export --------------------------------------

ATTERBERG_TEXT = json.dumps(ATTERBERG)
for label, number in CALC_NUMBERS:
    big = label == "5,001 digits"
    says = "digits" if big else "too large" if label == "401 digits" else "number"
    wc = (
        '{"method": "water-content", "readings": {"determinations": [{"tare_g": '
        + number
        + ', "wet_tare_g": 45.62, "dry_tare_g": 38.11}]}}'
    )
    case(
        f"claybench calc: water-content tare of {label}",
        Cli(("calc", "{file}"), wc),
        2,
        "body" if big else "tare_g",
        says,
    )
    one_point = (
        '{"method": "ll-cup-one-point", "readings": {"trials": [{"blows": '
        + number
        + ', "tare_g": 10, "wet_tare_g": 38.4, "dry_tare_g": 30}]}}'
    )
    case(
        f"claybench calc: one-point blows of {label}",
        Cli(("calc", "{file}"), one_point),
        2,
        "body" if big else "blows",
        says,
    )
    atterberg = (
        '{"method": "atterberg", "readings": ' + ATTERBERG_TEXT[:-1] + ', "clay_fraction": ' + number + "}}"
    )
    case(
        f"claybench calc: clay fraction of {label}",
        Cli(("calc", "{file}"), atterberg),
        2,
        "body" if big else "clay_fraction",
        says,
    )
case(
    "claybench calc: method id of 5,000 characters",
    Cli(("calc", "{file}"), '{"method": "' + long(5000) + '", "readings": {}}'),
    2,
    "method",
    "method",
)
case(
    "claybench calc: a number as the whole request",
    Cli(("calc", "{file}"), DIGITS_401),
    2,
    "method",
    "object",
)
case(
    "claybench create-user: username of 65 characters",
    Cli(("create-user", long(65), "--role", "technician")),
    2,
    "username",
    "64 characters",
)
case(
    "claybench create-user: full name of 201 characters",
    Cli(("create-user", "someone", "--role", "technician", "--full-name", long(201))),
    2,
    "full name",
    "200 characters",
)
case(
    "claybench create-token: name of 101 characters",
    Cli(("create-token", "tech", "--name", long(101))),
    2,
    "token name",
    "at most 100",
)
case(
    "claybench create-token: days past SQLite's integer",
    Cli(("create-token", "tech", "--name", "script", "--days", str(SQLITE_PAST))),
    2,
    "days",
    "366",
)
case(
    "claybench create-token: days in exponent form",
    Cli(("create-token", "tech", "--name", "script", "--days", "1e23")),
    2,
    "--days",
    "int",
)
case(
    "claybench create-token: username of 5,000 characters",
    Cli(("create-token", long(5000), "--name", "script")),
    2,
    "user",
    "no active user",
)
case(
    "claybench export: job number of 5,000 characters",
    Cli(("export", long(5000), "--format", "csv")),
    2,
    "job",
    "job",
)

# --- import: schedule files with over-long texts, bad numbers, huge ids ------------------------

HEADER = ["location", "sample", "depth_top_m", "depth_base_m", "sample_type", "description", "tests"]
GOOD_ROW = ["BH5", "BH5-S1", "1.0", "1.5", "disturbed", "Soft grey CLAY", "water-content"]


def _row_with(column: str, value: str) -> list[str]:
    return [value if h == column else v for h, v in zip(HEADER, GOOD_ROW, strict=True)]


def csv_of(column: str, value: str) -> Callable[[], bytes]:
    def build() -> bytes:
        out = io.StringIO()
        writer = csv.writer(out)
        writer.writerow(HEADER)
        writer.writerow(_row_with(column, value))
        return out.getvalue().encode("utf-8")

    return build


def xlsx_of(column: str, value: Any) -> Callable[[], bytes]:
    def build() -> bytes:
        book = Workbook()
        sheet = book.active
        assert sheet is not None
        sheet.append(HEADER)
        sheet.append([value if h == column else v for h, v in zip(HEADER, GOOD_ROW, strict=True)])
        out = io.BytesIO()
        book.save(out)
        return out.getvalue()

    return build


def ags_of(group: str, heading: str, value: str) -> Callable[[], bytes]:
    """The import tests' AGS4 schedule (valid to python-ags4's checker) for the scenario's job,
    with ``value`` in ``group``'s ``heading`` (a location id changed in its samples too)."""

    def build() -> bytes:
        proj = {**PROJ, "PROJ_ID": "{job_code}"}
        loca, samp = copy.deepcopy(LOCA), copy.deepcopy(SAMP)
        if heading == "LOCA_ID":
            first = LOCA[0]["LOCA_ID"]
            for row in [*loca, *samp]:
                row["LOCA_ID"] = value if row["LOCA_ID"] == first else row["LOCA_ID"]
        elif group == "PROJ":  # a new job: the project's texts make it
            proj.update({"PROJ_ID": "T-901", heading: value})
        else:
            (loca if group == "LOCA" else samp)[0][heading] = value
        return ags_bytes(loca, samp, proj)

    return build


IMPORT_TEXTS = (("location", 32), ("sample", 32), ("description", 1000))
for via in ("cli", "api", "page"):
    for column, limit in IMPORT_TEXTS:
        case(
            f"import ({via}): CSV {column} of {limit + 1} characters",
            Upload("schedule.csv", csv_of(column, long(limit + 1)), via),
            2 if via == "cli" else 422,
            column,
            f"at most {limit:,}",
        )
    for label, number in (("1e400", "1e400"), ("401 digits", DIGITS_401), ("NaN", "NaN")):
        case(
            f"import ({via}): CSV depth of {label}",
            Upload("schedule.csv", csv_of("depth_top_m", number), via),
            2 if via == "cli" else 422,
            "depth_top_m",
            "not a number",
        )
    case(
        f"import ({via}): XLSX description of 1001 characters",
        Upload("schedule.xlsx", xlsx_of("description", long(1001)), via),
        2 if via == "cli" else 422,
        "description",
        "at most 1,000",
    )
    case(
        f"import ({via}): XLSX depth of 401 digits as text",
        Upload("schedule.xlsx", xlsx_of("depth_top_m", DIGITS_401), via),
        2 if via == "cli" else 422,
        "depth_top_m",
        "not a number",
    )
    case(
        f"import ({via}): XLSX depth 1e308 as a number",
        Upload("schedule.xlsx", xlsx_of("depth_top_m", 1e308), via),
        2 if via == "cli" else 422,
        "depth_top_m",
        "deeper than 1000 m",
    )
    case(
        f"import ({via}): XLSX tests of 5,000 characters",
        Upload("schedule.xlsx", xlsx_of("tests", long(5000)), via),
        2 if via == "cli" else 422,
        "tests",
        "test",
    )
    case(
        f"import ({via}): AGS4 sample description of 1001 characters",
        Upload("schedule.ags", ags_of("SAMP", "SAMP_DESC", long(1001)), via),
        2 if via == "cli" else 422,
        "SAMP_DESC",
        "at most 1000",
    )
    case(
        f"import ({via}): AGS4 location id of 33 characters",
        Upload("schedule.ags", ags_of("LOCA", "LOCA_ID", long(33)), via),
        2 if via == "cli" else 422,
        "LOCA_ID",
        "at most 32",
    )
    case(
        f"import ({via}): AGS4 sample top of 401 digits",
        Upload("schedule.ags", ags_of("SAMP", "SAMP_TOP", DIGITS_401), via),
        2 if via == "cli" else 422,
        "SAMP_TOP",
        "Rule 8",
    )
for name, limit in (("--title", 200), ("--site", 200), ("--client", 200), ("--job", 32)):
    case(
        f"import (cli): {name} of {limit + 1} characters",
        Upload(
            "schedule.csv",
            csv_of("description", "Soft CLAY"),
            "cli",
            ("--job", "T-900", "--client", "New Client", "--title", "New job", name, long(limit + 1)),
        ),
        2,
        {"--client": "name", "--job": "code"}.get(name, name.strip("-")),  # the service's own field
        f"at most {limit}",
    )
case(
    "import (cli): AGS4 project name of 201 characters",
    Upload("new.ags", ags_of("PROJ", "PROJ_NAME", long(201)), "cli"),
    2,
    "PROJ_NAME",
    "at most 200",
)


def by_door() -> dict[str, int]:
    counts: dict[str, int] = {}
    for c in CASES:
        counts[c.door] = counts.get(c.door, 0) + 1
    return counts


__all__ = ["CASES", "Api", "Case", "Cli", "Page", "Upload", "by_door"]
