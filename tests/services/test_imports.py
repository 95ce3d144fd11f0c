"""Importing a sample schedule into a job: CSV, XLSX and AGS4 files written here, stored in a
real database (DESIGN.md section 7, issue S6).

A fictional scenario: the Wendle Moor reservoir spillway, for Pellow & Brannock Engineers,
with a borehole, a trial pit and a hand-auger hole. The readers alone are tested in
tests/exchange; here every file goes through ``read_schedule`` and ``import_schedule`` and the
database is read back, table by table.
"""

from __future__ import annotations

import csv
import io
from typing import Any

import openpyxl
import pytest
import sqlalchemy as sa
from sqlmodel import SQLModel, col, select

from server.db.session import Database
from server.db.tables import AuditEvent, Client, Job, LabTest, Location, Sample, User
from server.services import bench, jobs, samples
from server.services.imports import ImportPlan, ImportRefused, Target, import_schedule, read_schedule
from tests.conftest import People
from tests.support.ags4_files import ags4_text, line_of

JOB = "WM-2631"
CLIENT = "Pellow & Brannock Engineers"
TITLE = "Wendle Moor reservoir spillway"
SITE = "Wendle Moor"
NEW_JOB = Target(JOB, CLIENT, TITLE, SITE)

# The headers of the schedule template (spreadsheet.FIELDS labels).
HEADER = [
    "Location",
    "Location type",
    "Easting (m)",
    "Northing (m)",
    "Ground level (m)",
    "Sample",
    "Depth top (m)",
    "Depth base (m)",
    "Sample type",
    "Description",
    "Tests",
]
ROWS: list[list[Any]] = [
    [
        "BH01",
        "BH",
        438120.5,
        512340.2,
        212.4,
        "BH01-U1",
        1.2,
        1.65,
        "U",
        "Firm brown slightly sandy CLAY",
        "water-content; atterberg",
    ],
    ["BH01", "", None, None, None, "BH01-D2", 2.5, None, "D", "", "Water content"],
    [
        "TP02",
        "Trial pit",
        None,
        None,
        211.9,
        "TP02-B1",
        0.5,
        1.0,
        "Bulk",
        "Brown clayey GRAVEL",
        "Grading by sieving",
    ],
]

# What ROWS store (the vocabulary ids of server/workflow/vocabulary.py).
STORED_LOCATIONS = {
    ("BH01", "borehole", 438120.5, 512340.2, 212.4),  # BH: AGS4 abbreviation of a borehole
    ("TP02", "trial pit", None, None, 211.9),  # our label "Trial pit"; blank cells give no coordinates
}
STORED_SAMPLES = [
    ("BH01", "BH01-U1", 1.2, 1.65, "U100", "Firm brown slightly sandy CLAY"),  # U: AGS4 abbreviation of U100
    ("BH01", "BH01-D2", 2.5, 2.5, "disturbed", ""),  # blank base: a point sample (common practice)
    ("TP02", "TP02-B1", 0.5, 1.0, "bulk", "Brown clayey GRAVEL"),  # "Bulk": our label
]
STORED_TESTS = {
    ("BH01-U1", "water-content", "requested"),  # method ids, DESIGN.md section 7
    ("BH01-U1", "atterberg", "requested"),
    ("BH01-D2", "water-content", "requested"),  # display name "Water content"
    ("TP02-B1", "sieve", "requested"),  # display name "Grading by sieving"
}
CREATED = {"locations": 2, "samples": 3, "tests": 4}  # computed from ROWS
NONE = {"locations": 0, "samples": 0, "tests": 0}

# An AGS4 schedule of the same site: PROJ names the job (DESIGN.md section 7).
PROJ = {"PROJ_ID": "J2632", "PROJ_NAME": TITLE, "PROJ_LOC": SITE, "PROJ_CLNT": CLIENT}
LOCA = [
    {
        "LOCA_ID": "BH01",
        "LOCA_TYPE": "CP",
        "LOCA_NATE": "438120.50",
        "LOCA_NATN": "512340.20",
        "LOCA_GL": "212.40",
    },
    {"LOCA_ID": "HA03", "LOCA_TYPE": "AUG"},
]
SAMP = [
    {
        "LOCA_ID": "BH01",
        "SAMP_TOP": "1.20",
        "SAMP_REF": "1",
        "SAMP_TYPE": "U",
        "SAMP_BASE": "1.65",
        "SAMP_DESC": "Firm brown slightly sandy CLAY",
    },
    {"LOCA_ID": "BH01", "SAMP_TOP": "3.00", "SAMP_TYPE": "D", "SAMP_ID": "BH01-D3"},
    {"LOCA_ID": "HA03", "SAMP_TOP": "0.40", "SAMP_REF": "1", "SAMP_TYPE": "PST", "SAMP_BASE": "0.60"},
]
# Codes of the file's own, described in its ABBR group (AGS Format Rule 16).
OWN_ABBR = [
    {"ABBR_HDNG": "LOCA_TYPE", "ABBR_CODE": "AUG", "ABBR_DESC": "Hand auger"},
    {"ABBR_HDNG": "SAMP_TYPE", "ABBR_CODE": "PST", "ABBR_DESC": "Piston"},
    {"ABBR_HDNG": "LOCA_TYPE", "ABBR_CODE": "SON", "ABBR_DESC": "Sonic drilling"},
]


# --- files ------------------------------------------------------------------------------------


def csv_bytes(rows: list[list[Any]], header: list[str] = HEADER) -> bytes:
    out = io.StringIO(newline="")
    writer = csv.writer(out)
    writer.writerow(header)
    writer.writerows(["" if value is None else str(value) for value in row] for row in rows)
    return out.getvalue().encode("utf-8")


def xlsx_bytes(rows: list[list[Any]], header: list[str] = HEADER) -> bytes:
    """A workbook as openpyxl writes it, numbers as numbers."""
    book = openpyxl.Workbook()
    book.active.append(header)
    for row in rows:
        book.active.append(row)
    out = io.BytesIO()
    book.save(out)
    return out.getvalue()


def ags_bytes(
    loca: list[dict[str, str]] | None = None,
    samp: list[dict[str, str]] | None = None,
    proj: dict[str, str] | None = None,
) -> bytes:
    return ags4_text(proj or PROJ, loca or LOCA, samp or SAMP, abbr=OWN_ABBR).encode("ascii")


def schedule_file(kind: str, rows: list[list[Any]] = ROWS) -> tuple[str, bytes]:
    if kind == "csv":
        return "schedule.csv", csv_bytes(rows)
    if kind == "xlsx":
        return "schedule.xlsx", xlsx_bytes(rows)
    return "schedule.ags", ags_bytes()


# --- the database read back -------------------------------------------------------------------


def do_import(
    db: Database,
    actor: User | None,
    filename: str,
    data: bytes,
    target: Target = NEW_JOB,
    *,
    dry_run: bool = False,
    mapping: dict[str, str] | None = None,
) -> ImportPlan:
    schedule = read_schedule(filename, data, mapping)
    return import_schedule(db, actor, schedule, target, dry_run=dry_run, source=filename)


def refusals(
    db: Database, filename: str, data: bytes, target: Target = NEW_JOB, *, dry_run: bool = False
) -> list[dict[str, Any]]:
    with pytest.raises(ImportRefused) as refused:
        do_import(db, None, filename, data, target, dry_run=dry_run)
    errors: list[dict[str, Any]] = refused.value.to_dict()["errors"]
    return errors


def table_counts(db: Database) -> dict[str, int]:
    """The number of rows in every table of the schema."""
    with db.session() as s:
        return {
            table.name: int(s.execute(sa.select(sa.func.count()).select_from(table)).scalar_one())
            for table in SQLModel.metadata.sorted_tables
        }


def last_event_id(db: Database) -> int:
    with db.session() as s:
        return int(s.execute(sa.select(sa.func.coalesce(sa.func.max(AuditEvent.id), 0))).scalar_one())


def events_since(db: Database, event_id: int) -> list[AuditEvent]:
    with db.session() as s:
        return list(
            s.exec(select(AuditEvent).where(col(AuditEvent.id) > event_id).order_by(col(AuditEvent.id)))
        )


def job_named(db: Database, code: str) -> tuple[Job, str]:
    with db.session() as s:
        job = s.exec(select(Job).where(Job.code == code)).one()
        client = s.get(Client, job.client_id)
    assert client is not None
    return job, client.name


def stored_locations(db: Database, job_id: int) -> set[tuple[Any, ...]]:
    with db.session() as s:
        found = s.exec(select(Location).where(Location.job_id == job_id))
        return {(loc.code, loc.kind, loc.easting, loc.northing, loc.ground_level_m) for loc in found}


def stored_samples(db: Database, job_id: int) -> list[tuple[Any, ...]]:
    with db.session() as s:
        found = s.exec(
            select(Location.code, Sample)
            .join(Location, col(Location.id) == Sample.location_id)
            .where(Sample.job_id == job_id)
            .order_by(col(Sample.id))
        )
        return [
            (code, smp.code, smp.depth_from_m, smp.depth_to_m, smp.sample_type, smp.description)
            for code, smp in found
        ]


def stored_tests(db: Database, job_id: int) -> set[tuple[str, str, str]]:
    with db.session() as s:
        found = s.exec(
            select(Sample.code, LabTest.method, LabTest.status)
            .join(Sample, col(Sample.id) == LabTest.sample_id)
            .where(Sample.job_id == job_id)
        )
        return {(code, method, status) for code, method, status in found}


def sample_named(db: Database, code: str) -> Sample:
    with db.session() as s:
        return s.exec(select(Sample).where(Sample.code == code)).one()


def lab_test_of(db: Database, code: str, method: str) -> LabTest:
    with db.session() as s:
        return s.exec(
            select(LabTest)
            .join(Sample, col(Sample.id) == LabTest.sample_id)
            .where(Sample.code == code, LabTest.method == method)
        ).one()


def enter_water_content(db: Database, who: User, code: str) -> None:
    """Readings typed at the bench on a sample's water content (ASTM D2216 formula: 30.0 %)."""
    test = lab_test_of(db, code, "water-content")
    readings = {
        "determinations": [{"container": "T1", "tare_g": 10.00, "wet_tare_g": 36.00, "dry_tare_g": 30.00}]
    }
    bench.save_readings(db, who, test.id or 0, readings, test.version)


def registered_sample(db: Database, admin: User, methods: tuple[str, ...] = ()) -> Sample:
    """Job WM-2631 registered by hand: borehole BH01 and sample BH01-U1 (remarks typed in)."""
    client = jobs.create_client(db, admin, CLIENT)
    job = jobs.create_job(db, admin, client.id or 0, JOB, TITLE, SITE)
    location = samples.add_location(db, admin, job.id or 0, "BH01", "borehole")
    return samples.add_sample(
        db,
        admin,
        location.id or 0,
        "BH01-U1",
        1.2,
        1.65,
        "U100",
        "Firm brown CLAY",
        "Sealed with wax",
        methods,
    )


# --- spreadsheets -----------------------------------------------------------------------------


@pytest.mark.parametrize("kind", ["csv", "xlsx"])
def test_a_spreadsheet_creates_its_job_locations_samples_and_requested_tests(
    db: Database, people: People, kind: str
) -> None:
    filename, data = schedule_file(kind)

    plan = do_import(db, people.admin, filename, data)

    # DESIGN.md section 7: the outcome's shape; the counts computed from ROWS
    assert plan.outcome(False) == {
        "job": JOB,
        "dry_run": False,
        "created": CREATED,
        "updated": NONE,
        "unchanged": NONE,
    }
    job, client = job_named(db, JOB)
    # DESIGN.md section 7: --client and --title create the job when no job has that number
    assert (job.title, job.site, client) == (TITLE, SITE, CLIENT)
    assert stored_locations(db, job.id or 0) == STORED_LOCATIONS  # ROWS, read as their vocabulary ids
    assert stored_samples(db, job.id or 0) == STORED_SAMPLES  # ROWS, in file order
    assert stored_tests(db, job.id or 0) == STORED_TESTS  # every requested test, status "requested"
    with db.session() as s:
        requesters = set(s.exec(select(LabTest.requested_by_id)))
    assert requesters == {people.admin.id}  # the importing person requested them (audit: who)


def test_the_import_is_recorded_as_one_job_level_audit_event(db: Database, people: People) -> None:
    first = last_event_id(db)

    plan = do_import(db, people.admin, "schedule.csv", csv_bytes(ROWS))

    events = events_since(db, first)
    job, _ = job_named(db, JOB)
    imports = [e for e in events if e.action == "import"]
    assert len(imports) == 1  # one "import" event per import (server/services/imports.py)
    event = imports[0]
    # the job's own event, by the importing person (server/services/imports.py)
    assert (event.entity, event.entity_id, event.actor) == ("job", job.id, "admin")
    assert event.after == {"file": "schedule.csv", "format": "csv", **plan.outcome(False)}  # imports.py
    assert event is events[-1]  # written last, after what it counts (computed)
    # every record created is audited too: client, job, 2 locations, 3 samples, 4 tests (computed)
    assert sorted({(e.entity, e.action) for e in events}) == [
        ("client", "create"),
        ("job", "create"),
        ("job", "import"),
        ("lab_test", "request"),
        ("location", "create"),
        ("sample", "create"),
    ]
    assert len(events) == 1 + 1 + 2 + 3 + 4 + 1  # computed


def test_headers_are_matched_ignoring_case_spaces_underscores_and_a_unit_in_brackets(db: Database) -> None:
    header = [
        "HOLE",  # location (DESIGN.md section 7)
        "hole_type",  # location type, "hole type" with an underscore
        "EASTING",
        "Northing [m]",
        "Ground Level (mAOD)",
        "Sample_ID",  # "sample id"
        "DEPTH FROM [m]",  # "depth from" with a unit in brackets
        "Depth  To (m)",  # "depth to" with two spaces and a unit
        "TYPE",  # sample type
        "description",
        "Requested Tests",
    ]

    plan = do_import(db, None, "schedule.csv", csv_bytes(ROWS, header))

    assert plan.created.to_dict() == CREATED  # the same schedule as under the template's headers (computed)
    job, _ = job_named(db, JOB)
    assert stored_samples(db, job.id or 0) == STORED_SAMPLES  # every column found
    assert stored_locations(db, job.id or 0) == STORED_LOCATIONS


def test_a_header_mapped_by_hand_is_read_as_the_field_it_names(db: Database) -> None:
    header = ["Bohrung", "Probe", "Tiefe von", "Tiefe bis", "Notes"]  # the site team's own words
    rows = [["BH01", "BH01-U1", 1.2, 1.65, "Bag torn"], ["BH01", "BH01-D2", 2.5, None, ""]]
    data = csv_bytes(rows, header)
    # unmapped, the required location, sample and top columns are not found (DESIGN.md section 7)
    assert [e["column"] for e in refusals(db, "schedule.csv", data)] == [
        "Location",
        "Sample",
        "Depth top (m)",
    ]
    mapping = {"Bohrung": "location", "Probe": "sample", "Tiefe von": "top", "Tiefe bis": "base"}

    plan = do_import(db, None, "schedule.csv", data, mapping={**mapping, "Notes": "ignore"})

    assert plan.created.to_dict() == {"locations": 1, "samples": 2, "tests": 0}  # computed from rows
    job, _ = job_named(db, JOB)
    assert stored_samples(db, job.id or 0) == [
        ("BH01", "BH01-U1", 1.2, 1.65, "disturbed", ""),  # no type column: the default type (samples.py)
        ("BH01", "BH01-D2", 2.5, 2.5, "disturbed", ""),  # blank base: a point sample (common practice)
    ]
    assert sample_named(db, "BH01-U1").remarks == ""  # "Notes" (an alias of remarks) mapped to ignore


# --- refusals ---------------------------------------------------------------------------------


def _changed(row: int, column: int, value: Any) -> list[list[Any]]:
    rows = [list(r) for r in ROWS]
    rows[row][column] = value
    return rows


# Each bad file: ROWS with one fault in the row a spreadsheet shows as row 4 (TP02-B1; the
# header is row 1), or a fifth row; the refused (row, column) and the message's start.
BAD_ROWS: dict[str, tuple[list[list[Any]], int, str, str]] = {
    "a sample code twice": (
        [*ROWS, ["TP02", "", None, None, None, "TP02-B1", 1.5, 2.0, "D", "", ""]],
        5,
        "Sample",
        "sample TP02-B1 is already on row 4",
    ),
    "a base above its top": (_changed(2, 7, 0.4), 4, "Depth base (m)", "base 0.4 m is above top 0.5 m"),
    "an unknown location type": (
        _changed(2, 1, "Sonic hole"),
        4,
        "Location type",
        '"Sonic hole" is not a location type we know',
    ),
    "an unknown sample type": (_changed(2, 8, "Bag"), 4, "Sample type", '"Bag" is not a sample type we know'),
    "an unknown test": (
        _changed(2, 10, "Grading by sieving; Permeability"),
        4,
        "Tests",
        'unknown test "Permeability"',
    ),
    "a depth that is not a number": (
        _changed(2, 6, "half a metre"),
        4,
        "Depth top (m)",
        '"half a metre" is not a number',
    ),
}


@pytest.mark.parametrize("case", sorted(BAD_ROWS))
def test_a_refused_row_is_named_by_row_and_column_and_nothing_at_all_is_stored(
    db: Database, case: str
) -> None:
    rows, row, column, message = BAD_ROWS[case]
    data = csv_bytes(rows)
    before = table_counts(db)

    previewed = refusals(db, "schedule.csv", data, dry_run=True)
    confirmed = refusals(db, "schedule.csv", data)

    # DESIGN.md section 7: the row a spreadsheet program shows and the file's header
    assert [(e["row"], e["column"]) for e in confirmed] == [(row, column)]
    assert confirmed[0]["message"].startswith(message)  # the reader's words (server/exchange/spreadsheet.py)
    assert previewed == confirmed  # the dry run refuses alike (DESIGN.md section 7)
    # one transaction: the valid rows beside it, the job and its client are not stored either
    assert table_counts(db) == before


def test_a_refused_xlsx_cell_is_named_by_the_row_a_spreadsheet_program_shows(db: Database) -> None:
    rows = [
        ROWS[0],
        [None] * len(HEADER),
        ["TP02", "TP", None, None, None, "TP02-B1", "c. 0.5", 1.0, "B", "", ""],
    ]
    before = table_counts(db)

    errors = refusals(db, "schedule.xlsx", xlsx_bytes(rows))

    # DESIGN.md section 7: header row 1, BH01-U1 row 2, a blank row 3, the bad row 4
    assert errors == [{"row": 4, "column": "Depth top (m)", "message": '"c. 0.5" is not a number'}]
    assert table_counts(db) == before  # nothing stored


def test_a_spreadsheet_for_no_named_job_or_an_unknown_one_without_client_is_refused(db: Database) -> None:
    data = csv_bytes(ROWS)
    before = table_counts(db)

    unnamed = refusals(db, "schedule.csv", data, Target())
    unknown = refusals(db, "schedule.csv", data, Target(JOB))

    # DESIGN.md section 7: for a spreadsheet --job names the job; --client and --title create it
    assert unnamed == [
        {"row": None, "column": "job", "message": "name the job the schedule is for (--job NUMBER)"}
    ]  # server/services/imports.py
    assert [(e["row"], e["column"]) for e in unknown] == [(None, "client")]
    assert unknown[0]["message"].startswith(f"no job has the number {JOB}")  # server/services/imports.py
    assert table_counts(db) == before


def test_a_file_of_another_kind_is_refused_whole(db: Database) -> None:
    errors = refusals(db, "schedule.txt", b"Location,Sample,Top\r\nBH01,BH01-U1,1.2\r\n")

    # DESIGN.md section 7: the format comes from the extension
    assert errors == [
        {"row": 1, "column": "file", "message": "'schedule.txt' is not a .csv, .xlsx or .ags file"}
    ]


# --- a job that exists ------------------------------------------------------------------------


@pytest.mark.parametrize("kind", ["csv", "xlsx", "ags4"])
def test_importing_the_same_file_again_changes_nothing_but_records_the_import(
    db: Database, people: People, kind: str
) -> None:
    filename, data = schedule_file(kind)
    target = NEW_JOB if kind != "ags4" else Target()
    first = do_import(db, people.admin, filename, data, target)
    before, last = table_counts(db), last_event_id(db)

    again = do_import(db, people.admin, filename, data, target)

    # DESIGN.md section 7 / imports.py: the second time everything is "unchanged"
    assert again.outcome(False) == {
        "job": first.job,
        "dry_run": False,
        "created": NONE,
        "updated": NONE,
        "unchanged": first.created.to_dict(),
    }
    events = events_since(db, last)
    assert [(e.entity, e.action) for e in events] == [("job", "import")]  # the import alone is recorded
    assert table_counts(db) == {**before, "audit_event": before["audit_event"] + 1}  # nothing else changes


def test_a_changed_row_updates_a_sample_with_nothing_entered_audited_before_and_after(
    db: Database, people: People
) -> None:
    sample = registered_sample(db, people.admin)
    last = last_event_id(db)
    header = ["Location", "Ground level (m)", "Sample", "Top", "Base", "Type", "Description"]
    rows = [["BH01", 212.4, "BH01-U1", 1.2, 1.6, "", "Firm brown slightly sandy CLAY"]]

    plan = do_import(db, people.tech, "schedule.csv", csv_bytes(rows, header), Target(JOB))

    # computed: BH01 gains its ground level; BH01-U1 its base and description
    assert plan.outcome(False) == {
        "job": JOB,
        "dry_run": False,
        "created": NONE,
        "updated": {"locations": 1, "samples": 1, "tests": 0},
        "unchanged": NONE,
    }
    stored = sample_named(db, "BH01-U1")
    assert (stored.depth_to_m, stored.description) == (1.6, "Firm brown slightly sandy CLAY")  # the file's
    # imports.py: a blank cell (the type) or a column the file lacks (remarks) keeps the stored value
    assert (stored.sample_type, stored.remarks) == ("U100", "Sealed with wax")
    events = events_since(db, last)
    assert [(e.entity, e.action) for e in events] == [
        ("location", "update"),
        ("sample", "update"),
        ("job", "import"),
    ]  # imports.py: every change audited, then the import
    changed = events[1]
    assert (changed.entity_id, changed.actor) == (sample.id, "tech")
    assert changed.before is not None and changed.after is not None
    # audit trail: the values before and after (ISO/IEC 17025 cl. 7.5.2, common practice)
    assert (changed.before["depth_to_m"], changed.after["depth_to_m"]) == (1.65, 1.6)
    assert (changed.before["description"], changed.after["description"]) == (
        "Firm brown CLAY",
        "Firm brown slightly sandy CLAY",
    )
    assert (events[0].before or {}).get("ground_level_m") is None
    assert (events[0].after or {}).get("ground_level_m") == 212.4  # the file's ground level


def test_a_changed_row_updates_a_sample_whose_test_is_only_requested(db: Database, people: People) -> None:
    registered_sample(db, people.admin, methods=("water-content",))
    rows = [["BH01", "", None, None, None, "BH01-U1", 1.2, 1.6, "U", "Firm brown CLAY", "water-content"]]

    plan = do_import(db, people.tech, "schedule.csv", csv_bytes(rows), Target(JOB))

    # imports.py: nothing is entered on BH01-U1 (its one test is requested), so it updates
    assert plan.updated.samples == 1
    assert sample_named(db, "BH01-U1").depth_to_m == 1.6  # the file's base


def test_a_changed_row_is_refused_for_a_sample_with_readings_and_nothing_is_stored(
    db: Database, people: People
) -> None:
    do_import(db, people.admin, "schedule.csv", csv_bytes(ROWS))
    enter_water_content(db, people.tech, "BH01-U1")
    rows = [
        *_changed(0, 6, 1.25),
        ["BH01", "", None, None, None, "BH01-D3", 3.0, None, "D", "", "water-content"],
    ]
    before = table_counts(db)

    errors = refusals(db, "schedule.csv", csv_bytes(rows), Target(JOB))

    # imports.py: a sample with readings can no longer change; named at its row and cell
    assert errors == [
        {
            "row": 2,
            "column": "Depth top (m)",
            "message": "sample BH01-U1 has readings entered and can no longer change (stored 1.2, file 1.25)",
        }
    ]
    assert table_counts(db) == before  # one transaction: the new BH01-D3 is not stored either
    assert sample_named(db, "BH01-U1").depth_from_m == 1.2  # as stored


def test_a_new_job_goes_to_the_registered_client_whatever_the_case_of_its_name(db: Database) -> None:
    client = jobs.create_client(db, None, CLIENT)
    before = table_counts(db)

    plan = do_import(db, None, "schedule.csv", csv_bytes(ROWS), Target(JOB, CLIENT.upper(), TITLE, SITE))

    job, name = job_named(db, JOB)
    assert (job.client_id, name) == (
        client.id,
        CLIENT,
    )  # client names are unique whatever their case (jobs.py)
    after = table_counts(db)
    assert (after["client"], after["job"]) == (before["client"], before["job"] + 1)  # no second client
    assert plan.created.to_dict() == CREATED  # computed from ROWS


# --- the dry run ------------------------------------------------------------------------------


@pytest.mark.parametrize("kind", ["csv", "ags4"])
def test_a_dry_run_stores_nothing_and_reports_the_counts_of_the_import(db: Database, kind: str) -> None:
    filename, data = schedule_file(kind)
    target = NEW_JOB if kind == "csv" else Target()
    before = table_counts(db)

    preview = do_import(db, None, filename, data, target, dry_run=True)

    assert table_counts(db) == before  # DESIGN.md section 7: --dry-run stores nothing, not even an event
    done = do_import(db, None, filename, data, target)
    # DESIGN.md section 7: the same counts, "dry_run" true
    assert preview.outcome(True) == {**done.outcome(False), "dry_run": True}


# --- AGS4 -------------------------------------------------------------------------------------


def test_an_ags4_file_creates_the_job_its_proj_names_with_its_loca_and_samp(db: Database) -> None:
    plan = do_import(db, None, "schedule.ags", ags_bytes(), Target())

    # DESIGN.md section 7: the job is PROJ_ID; counts computed from LOCA and SAMP (no tests in AGS4 SAMP)
    assert plan.outcome(False) == {
        "job": "J2632",
        "dry_run": False,
        "created": {"locations": 2, "samples": 3, "tests": 0},
        "updated": NONE,
        "unchanged": NONE,
    }
    job, client = job_named(db, "J2632")
    assert (job.title, job.site, client) == (TITLE, SITE, CLIENT)  # PROJ_NAME, PROJ_LOC, PROJ_CLNT
    # LOCA_ID, LOCA_TYPE (CP: cable percussion, a borehole), LOCA_NATE, LOCA_NATN, LOCA_GL as written
    assert ("BH01", "borehole", 438120.5, 512340.2, 212.4) in stored_locations(db, job.id or 0)
    assert stored_samples(db, job.id or 0) == [
        ("BH01", "BH01-1", 1.2, 1.65, "U100", "Firm brown slightly sandy CLAY"),  # LOCA_ID-SAMP_REF; U
        ("BH01", "BH01-D3", 3.0, 3.0, "disturbed", ""),  # SAMP_ID; no SAMP_BASE: a point sample; D
        ("HA03", "HA03-1", 0.4, 0.6, "piston", ""),  # SAMP_TOP, SAMP_BASE as written
    ]


def test_ags4_abbreviations_are_read_through_the_file_s_abbr_group(db: Database) -> None:
    do_import(db, None, "schedule.ags", ags_bytes(), Target())

    job, _ = job_named(db, "J2632")
    assert ("HA03", "hand auger", None, None, None) in stored_locations(db, job.id or 0)  # AUG: "Hand auger"
    assert sample_named(db, "HA03-1").sample_type == "piston"  # PST: "Piston" in the file's ABBR


def test_an_ags4_file_into_an_existing_job_leaves_the_job_as_it_is(db: Database) -> None:
    client = jobs.create_client(db, None, "Tarrant Survey Partnership")
    jobs.create_job(db, None, client.id or 0, "J2632", "Spillway, phase 2", "Wendle Moor west")

    do_import(db, None, "schedule.ags", ags_bytes(), Target("J2632"))  # --job may repeat PROJ_ID

    job, name = job_named(db, "J2632")
    # DESIGN.md section 7: PROJ_NAME and PROJ_CLNT only describe a job the import creates
    assert (job.title, job.site, name) == (
        "Spillway, phase 2",
        "Wendle Moor west",
        "Tarrant Survey Partnership",
    )
    assert len(stored_samples(db, job.id or 0)) == 3  # SAMP's three rows


def test_an_ags4_file_for_another_job_than_the_one_named_is_refused(db: Database) -> None:
    errors = refusals(db, "schedule.ags", ags_bytes(), Target("J9999"))

    # imports.py: --job and PROJ_ID must agree; AGS4 errors carry group, line, heading
    assert errors == [
        {
            "group": "PROJ",
            "line": None,
            "heading": "PROJ_ID",
            "message": "the file is for job J2632, not J9999",
        }
    ]


def _broken(old: str, new: str) -> tuple[str, str]:
    text = ags4_text(PROJ, LOCA, SAMP, abbr=OWN_ABBR)
    assert old in text
    return text.replace(old, new), new


@pytest.mark.parametrize(
    ("fault", "rule", "group", "fragment", "heading"),
    [
        # a heading not in the dictionary (AGS Format Rule 9), found on the HEADING line
        (
            ('"SAMP_DESC"', '"SAMP_DESK"'),
            "AGS Format Rule 9",
            "SAMP",
            '"HEADING","LOCA_ID","SAMP_TOP"',
            "SAMP_DESK",
        ),
        # 2DP wants two decimals (AGS Format Rule 8): 1.6 on BH01-1's line
        (('"1.65"', '"1.6"'), "AGS Format Rule 8", "SAMP", '"1.6"', "SAMP_BASE"),
    ],
)
def test_an_ags4_file_python_ags4_refuses_gives_its_group_line_and_heading_and_stores_nothing(
    db: Database, fault: tuple[str, str], rule: str, group: str, fragment: str, heading: str
) -> None:
    text, _ = _broken(*fault)
    before = table_counts(db)

    errors = refusals(db, "schedule.ags", text.encode("ascii"))

    # DESIGN.md section 7: AGS4 errors carry group, line and heading
    assert all(set(e) == {"group", "line", "heading", "message"} for e in errors)
    found = [e for e in errors if e["message"].startswith(f"{rule}: ")]  # python-ags4's rule and words
    assert [(e["group"], e["line"], e["heading"]) for e in found] == [
        (group, line_of(text, fragment), heading)
    ]
    # the file's own errors say why; no PROJ_ID refusal is added for a PROJ that was not read
    assert not [e for e in errors if e["heading"] == "PROJ_ID"]
    assert table_counts(db) == before


# Each fault: extra LOCA or SAMP rows, the refused group, heading, the fragment of its line,
# and the reader's words (server/exchange/ags4_read.py).
BAD_AGS4: dict[str, tuple[list[dict[str, str]], list[dict[str, str]], str, str, str, str]] = {
    # LOCA_TYPE SON, "Sonic drilling" in the file's ABBR: no kind of location we record
    "an abbreviation that maps to no kind": (
        [{"LOCA_ID": "BH04", "LOCA_TYPE": "SON"}],
        [],
        "LOCA",
        "LOCA_TYPE",
        '"DATA","BH04"',
        'LOCA_TYPE "SON" ("Sonic drilling" in the ABBR group) is not a kind of location',
    ),
    # base above the top (DESIGN.md section 7)
    "a base above its top": (
        [],
        [{"LOCA_ID": "BH01", "SAMP_TOP": "5.00", "SAMP_REF": "5", "SAMP_TYPE": "D", "SAMP_BASE": "4.50"}],
        "SAMP",
        "SAMP_BASE",
        '"5.00"',
        "base depth 4.50 m is above the top depth 5.00 m",
    ),
    # BH01 with SAMP_REF 1 again, deeper: a new AGS4 key (Rule 10a), but the code BH01-1 twice
    "a sample code twice": (
        [],
        [{"LOCA_ID": "BH01", "SAMP_TOP": "6.00", "SAMP_REF": "1", "SAMP_TYPE": "D"}],
        "SAMP",
        "SAMP_REF",
        '"6.00"',
        "sample code BH01-1 is already on line ",
    ),
}


@pytest.mark.parametrize("case", sorted(BAD_AGS4))
def test_an_ags4_value_the_reader_refuses_is_named_by_group_line_and_heading(db: Database, case: str) -> None:
    loca, samp, group, heading, fragment, message = BAD_AGS4[case]
    text = ags4_text(PROJ, [*LOCA, *loca], [*SAMP, *samp], abbr=OWN_ABBR)
    before = table_counts(db)

    errors = refusals(db, "schedule.ags", text.encode("ascii"), Target())

    # DESIGN.md section 7: the refused cell's group, file line and heading
    assert [(e["group"], e["line"], e["heading"]) for e in errors] == [
        (group, line_of(text, fragment), heading)
    ]
    assert errors[0]["message"].startswith(message)  # server/exchange/ags4_read.py
    assert table_counts(db) == before  # nothing stored, not even the job PROJ names
