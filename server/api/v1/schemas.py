"""Request and response bodies of the JSON API v1 (apart from the tables), each with an example.

The examples are a fictional job of our own (Harrow Fen relief road). Bodies name fields as
the tables and services do; readings are the calculation contract's JSON (DESIGN.md section 3).
A list is ``{"items": [...], "next": cursor-or-null}`` (DESIGN.md section 7).
"""

from __future__ import annotations

from datetime import date, datetime
from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, WithJsonSchema

from server.api.schemas import READINGS_OF_ANY_METHOD, FieldErrorOut, FlagOut
from server.api.v1.params import BodyId, IsoDate, Measure, Version
from server.services.review import DEFAULT_MEANING


def _example(*examples: dict[str, Any]) -> ConfigDict:
    return ConfigDict(json_schema_extra={"examples": list(examples)})


NEXT = "NDI"  # base64url of "42": the id after which the next page starts
_AT = "2026-11-30T09:15:00Z"
_DET = {"container": "T-17", "tare_g": 15.20, "wet_tare_g": 45.62, "dry_tare_g": 38.11}
READINGS_EXAMPLE: dict[str, Any] = {"determinations": [_DET]}

# --- clients ----------------------------------------------------------------------------------

CLIENT = {
    "id": 3,
    "name": "Marram & Tarn Consulting",
    "contact": "R. Ellery",
    "email": "r.ellery@marram-tarn.example",
    "postal_address": "4 Quay Row, Fenbridge",
}
CLIENT_IN = {k: v for k, v in CLIENT.items() if k != "id"}


class ClientIn(BaseModel):
    model_config = _example(CLIENT_IN)

    name: str = Field(description="unique in the laboratory, whatever its case")
    contact: str = ""
    email: str = ""
    postal_address: str = ""


class ClientOut(BaseModel):
    model_config = _example(CLIENT)

    id: int
    name: str
    contact: str
    email: str
    postal_address: str


class ClientPage(BaseModel):
    model_config = _example({"items": [CLIENT], "next": None})

    items: list[ClientOut]
    next: str | None = Field(description="the cursor of the next page; null on the last page")


# --- jobs -------------------------------------------------------------------------------------

JOB_IN = {
    "client_id": 3,
    "code": "HF-2031",
    "title": "Harrow Fen relief road",
    "site": "Harrow Fen, north embankment",
    "order_reference": "PO-88412",
    "received_on": "2026-11-28",
    "due_date": "2026-12-12",
    "standards": "astm",
    "notes": "",
}
JOB = {
    "id": 7,
    "code": "HF-2031",
    "title": "Harrow Fen relief road",
    "site": "Harrow Fen, north embankment",
    "client": {"id": 3, "name": "Marram & Tarn Consulting"},
    "order_reference": "PO-88412",
    "received_at": "2026-11-28T00:00:00Z",
    "due_date": "2026-12-12",
    "standards": "astm",
    "notes": "",
    "status": "open",
    "samples": 12,
    "tests_to_approve": 9,
    "issued_reports": 0,
}


class JobIn(BaseModel):
    model_config = _example(JOB_IN)

    client_id: BodyId
    code: str = Field(description="the job number, unique in the laboratory, printed on reports")
    title: str = Field(default="", description="blank: the job number")
    site: str = ""
    order_reference: str = ""
    received_on: IsoDate | None = Field(default=None, description="blank: today")
    due_date: IsoDate | None = None
    standards: str = Field(default="astm", description="the family of standards the job is tested to")
    notes: str = ""


class ClientRef(BaseModel):
    id: int
    name: str


class JobOut(BaseModel):
    model_config = _example(JOB)

    id: int
    code: str
    title: str
    site: str
    client: ClientRef
    order_reference: str
    received_at: datetime
    due_date: date | None
    standards: str
    notes: str
    status: Literal["open", "overdue", "reported"] = Field(
        description="reported: an issued report; overdue: open and past its due date; else open"
    )
    samples: int = Field(description="samples not withdrawn")
    tests_to_approve: int
    issued_reports: int


class JobPage(BaseModel):
    model_config = _example({"items": [JOB], "next": NEXT})

    items: list[JobOut]
    next: str | None


# --- locations and samples --------------------------------------------------------------------

LOCATION = {
    "id": 21,
    "job_id": 7,
    "code": "BH3",
    "kind": "borehole",
    "easting": 512034.5,
    "northing": 298877.0,
    "ground_level_m": 4.2,
}


class LocationIn(BaseModel):
    model_config = _example({k: v for k, v in LOCATION.items() if k not in ("id", "job_id")})

    code: str
    kind: str = Field(default="borehole", description="borehole, trial pit, window sample...")
    easting: Measure | None = None
    northing: Measure | None = None
    ground_level_m: Measure | None = None


class LocationOut(BaseModel):
    model_config = _example(LOCATION)

    id: int
    job_id: int
    code: str
    kind: str
    easting: float | None
    northing: float | None
    ground_level_m: float | None


class LocationPage(BaseModel):
    model_config = _example({"items": [LOCATION], "next": None})

    items: list[LocationOut]
    next: str | None


SAMPLE_IN = {
    "location_id": 21,
    "code": "BH3-U2",
    "depth_from_m": 2.0,
    "depth_to_m": 2.45,
    "sample_type": "U100",
    "description": "Firm grey silty CLAY",
    "remarks": "",
    "methods": ["atterberg"],
}
TEST_BRIEF = {"id": 12, "method": "atterberg", "status": "requested", "revision": 1}
SAMPLE = {
    "id": 40,
    "job_id": 7,
    "location_id": 21,
    "location": "BH3",
    "code": "BH3-U2",
    "depth_from_m": 2.0,
    "depth_to_m": 2.45,
    "sample_type": "U100",
    "description": "Firm grey silty CLAY",
    "remarks": "",
    "received_at": None,
    "condition": "",
    "stored_at": "",
    "withdrawn_at": None,
    "withdrawn_reason": None,
    "tests": [TEST_BRIEF],
}


class SampleIn(BaseModel):
    model_config = _example(SAMPLE_IN)

    location_id: BodyId = Field(description="a location of this job (POST /api/v1/jobs/{job_id}/locations)")
    code: str = Field(description="unique in the job")
    depth_from_m: Measure
    depth_to_m: Measure | None = Field(default=None, description="blank: the same as the top")
    sample_type: str = "disturbed"
    description: str = ""
    remarks: str = ""
    methods: list[str] = Field(default_factory=list, description="tests to request on it (method ids)")


class LabTestBrief(BaseModel):
    model_config = _example(TEST_BRIEF)

    id: int
    method: str
    status: str
    revision: int


class SampleOut(BaseModel):
    model_config = _example(SAMPLE)

    id: int
    job_id: int
    location_id: int
    location: str
    code: str
    depth_from_m: float
    depth_to_m: float
    sample_type: str
    description: str
    remarks: str
    received_at: datetime | None
    condition: str
    stored_at: str
    withdrawn_at: datetime | None
    withdrawn_reason: str | None
    tests: list[LabTestBrief]


class SamplePage(BaseModel):
    model_config = _example({"items": [SAMPLE], "next": None})

    items: list[SampleOut]
    next: str | None


# --- imports ----------------------------------------------------------------------------------

_COUNTS = {"locations": 2, "samples": 12, "tests": 18}
_NONE = {"locations": 0, "samples": 0, "tests": 0}


class Counts(BaseModel):
    locations: int
    samples: int
    tests: int


class ImportOut(BaseModel):
    """What the import stored (or, ``dry_run``, would store): DESIGN.md section 7."""

    model_config = _example(
        {"job": "HF-2031", "dry_run": False, "created": _COUNTS, "updated": _NONE, "unchanged": _NONE}
    )

    job: str
    dry_run: bool
    created: Counts
    updated: Counts
    unchanged: Counts


# --- tests ------------------------------------------------------------------------------------

TEST = {
    "id": 12,
    "job_id": 7,
    "job": "HF-2031",
    "sample_id": 40,
    "sample": "BH3-U2",
    "location": "BH3",
    "method": "water-content",
    "status": "draft",
    "revision": 1,
    "version": 2,
    "readings": READINGS_EXAMPLE,
    "results": {"water_content": 32.78044522042775},  # (45.62 - 38.11) / (38.11 - 15.20) x 100
    "flags": [],
    "previous_revision_id": None,
    "amendment_reason": None,
    "return_reason": None,
    "flag_reasons": None,
    "created_at": _AT,
    "updated_at": _AT,
    "submitted_at": None,
    "approved_at": None,
    "approver_role": None,
    "signature_meaning": None,
}


class LabTestOut(BaseModel):
    model_config = _example(TEST)

    id: int
    job_id: int
    job: str = Field(description="the job number")
    sample_id: int
    sample: str = Field(description="the sample code")
    location: str = Field(description="the location code")
    method: str
    status: str
    revision: int
    version: int = Field(description="the version guard: send it back with a change")
    readings: dict[str, Any] | None
    results: dict[str, Any] | None = Field(description="full precision, by the contract's result keys")
    flags: list[FlagOut]
    previous_revision_id: int | None
    amendment_reason: str | None
    return_reason: str | None
    flag_reasons: dict[str, Any] | None
    created_at: datetime
    updated_at: datetime
    submitted_at: datetime | None
    approved_at: datetime | None
    approver_role: str | None
    signature_meaning: str | None


class LabTestPage(BaseModel):
    model_config = _example({"items": [TEST], "next": None})

    items: list[LabTestOut]
    next: str | None


class ReadingsIn(BaseModel):
    """The whole readings of the test, and the version they were read at (the version guard)."""

    model_config = _example({"version": 1, "readings": READINGS_EXAMPLE})

    version: Version = Field(description="the test's version as last read; a stale one is refused (409)")
    readings: Annotated[dict[str, Any], WithJsonSchema(READINGS_OF_ANY_METHOD)]


class ReadingsSaved(LabTestOut):
    model_config = _example({**TEST, "changed": True, "missing": []})

    changed: bool = Field(description="false when the readings were already so (nothing stored)")
    missing: list[FieldErrorOut] = Field(description="fields not entered yet: the test cannot be submitted")


class SubmitIn(BaseModel):
    model_config = _example(
        {"version": 2, "reasons": {}},
        {
            "version": 2,
            "reasons": {"equipment-calibration-due": "Balance B-2 checked against the 200 g weight today"},
        },
    )

    version: Version
    reasons: dict[str, str] = Field(
        default_factory=dict,
        description="for each error flag that stands, why the result stands (flag code -> words)",
    )


class ApproveIn(BaseModel):
    """An approval is a signature: the reviewer's password again, and its meaning."""

    model_config = _example(
        {"version": 3, "password": "the reviewer's own password", "meaning": DEFAULT_MEANING}
    )

    version: Version
    password: str
    meaning: str = DEFAULT_MEANING


class ReturnIn(BaseModel):
    model_config = _example(
        {"version": 3, "reason": "Trial 2 blow count looks mistyped: please check the sheet"}
    )

    version: Version
    reason: str


# --- reports ----------------------------------------------------------------------------------

REPORT = {
    "id": 5,
    "job_id": 7,
    "number": "HF-2031-R01",
    "revision": 1,
    "status": "issued",
    "issued_at": _AT,
    "sha256": "9f2c4e0b6d3a8f71c5e2b9a04d6f1e3c7b8a2d5f0e9c4b1a6d3f8e2c7b5a9d04",
    "superseded_by_id": None,
    "signature_meaning": "Issued: results checked and authorised for release",
    "pdf": "/api/v1/reports/5.pdf",
    "ags4": "/api/v1/reports/5.ags",
    "ags4_sha256": "3b7e1d9a5c2f8e4b0a6d1c7f3e9b5a2d8c4f0e6b1a7d3c9f5e2b8a4d0c6f1e7b",
}


class ReportOut(BaseModel):
    model_config = _example(REPORT)

    id: int
    job_id: int
    number: str
    revision: int
    status: str = Field(description="issued or superseded")
    issued_at: datetime
    sha256: str = Field(description="of the PDF's bytes, as printed for verification")
    superseded_by_id: int | None
    signature_meaning: str
    pdf: str = Field(description="where to download the frozen PDF")
    ags4: str | None = Field(
        description="where to download the AGS4 file frozen with the report (none for a report "
        "issued before files were frozen with reports)"
    )
    ags4_sha256: str | None = Field(description="of the frozen AGS4 file's bytes")


class ReportPage(BaseModel):
    model_config = _example({"items": [REPORT], "next": None})

    items: list[ReportOut]
    next: str | None


# --- the caller -------------------------------------------------------------------------------


class TokenInfo(BaseModel):
    name: str
    prefix: str
    scope: Literal["read", "write"]
    expires_at: datetime


class MeOut(BaseModel):
    model_config = _example(
        {
            "username": "tech",
            "full_name": "Ada Quarry",
            "role": "technician",
            "token": {"name": "bench tablet sync", "prefix": "q3J9x0aL", "scope": "write", "expires_at": _AT},
        }
    )

    username: str
    full_name: str
    role: str
    token: TokenInfo
