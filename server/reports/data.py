"""What one certified report says, frozen, and its content fingerprint (pure: no I/O).

The service layer reads the database and builds a ``ReportData``; ``server.reports.view`` turns
it into what the template prints. ``canonical_json`` / ``content_fingerprint`` give the SHA-256
of the report data itself. A PDF cannot print the hash of its own bytes, so every page prints
this content fingerprint; the service stores the PDF's own SHA-256 beside it and the verify page
accepts either.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, fields, is_dataclass
from datetime import date, datetime
from typing import Any

DEFAULT_CAUTIONS: tuple[str, ...] = (
    "The results in this report relate only to the samples as received and tested by the laboratory.",
    "This report shall not be reproduced except in full without the written approval of the laboratory.",
    "Correlations and other interpretation in this report are indicative only; they are not measured "
    "results and do not replace tests.",
    "The choice of design values and their use are for the responsible engineer, under the local codes "
    "and licensed practice that apply to the project.",
)


# -- the report data (built by the service layer) -----------------------------------------------


@dataclass(frozen=True)
class LabInfo:
    name: str
    address: str = ""
    accreditation: str = ""


@dataclass(frozen=True)
class Signatory:
    """Who approved the report, in what role, what the signature means, and when (ISO 8601)."""

    name: str
    role: str
    meaning: str
    signed_at: str


@dataclass(frozen=True)
class MethodNote:
    """A method followed; ``deviation`` is empty when the standard was followed as written."""

    title: str
    standard: str
    deviation: str = ""


@dataclass(frozen=True)
class TestEntry:
    """One approved test on one sample, with results, readings and flags as stored.

    ``results`` use the engine's keys (DESIGN.md section 3), ``readings`` are as typed,
    ``flags`` are {"code", "severity", "message"} dicts. Treat the mappings as read-only: the
    content fingerprint is taken over them.
    """

    __test__ = False  # a report record, not a pytest test class

    sample_code: str
    location_code: str
    depth_from_m: float | None
    depth_to_m: float | None
    sample_type: str
    description: str
    method: str
    results: Mapping[str, Any]
    readings: Mapping[str, Any] = field(default_factory=dict)
    flags: Sequence[Mapping[str, Any]] = ()
    revision: int = 0
    method_title: str = ""
    approval: Signatory | None = None  # who approved this test revision, in what role, meaning, when
    amendment_reason: str = ""  # why this revision replaced an earlier one (empty for revision 1)

    def __post_init__(self) -> None:
        object.__setattr__(self, "flags", tuple(self.flags))


@dataclass(frozen=True)
class RevisionNote:
    """An earlier revision of the same report: its number, issue date and file SHA-256."""

    revision: int
    issued_on: str
    sha256: str


@dataclass(frozen=True)
class ReportData:
    """Everything one issued report prints, and nothing it must look up."""

    lab: LabInfo
    client_name: str
    job_code: str
    job_title: str
    site: str
    report_number: str
    revision: int
    issue_date: date
    issued_at_iso: str
    approver: Signatory
    verify_url: str
    tests: Sequence[TestEntry] = ()
    methods: Sequence[MethodNote] = ()
    cautions: Sequence[str] = DEFAULT_CAUTIONS
    scope: str = ""  # which samples the report covers, in words ("all 12 samples with approved tests")
    history: Sequence[RevisionNote] = ()  # earlier revisions this one supersedes, oldest first

    def __post_init__(self) -> None:
        for name in ("tests", "methods", "cautions", "history"):
            object.__setattr__(self, name, tuple(getattr(self, name)))


# -- the content fingerprint --------------------------------------------------------------------


def _plain(value: Any) -> Any:
    """The JSON form of report data: dataclasses as objects, dates as ISO text, no NaN."""
    if is_dataclass(value) and not isinstance(value, type):
        return {f.name: _plain(getattr(value, f.name)) for f in fields(value)}
    if isinstance(value, Mapping):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    if isinstance(value, datetime | date):
        return value.isoformat()
    if isinstance(value, float) and not math.isfinite(value):
        raise ValueError("report data holds a value that is not a finite number")
    return value


def canonical_json(data: ReportData) -> str:
    """The report data as canonical JSON: keys sorted, no spaces, UTF-8 text kept as is."""
    return json.dumps(
        _plain(data), sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
    )


def content_fingerprint(data: ReportData) -> str:
    """SHA-256 (hex) of the canonical JSON of the report data: printed on every page."""
    return hashlib.sha256(canonical_json(data).encode("utf-8")).hexdigest()
