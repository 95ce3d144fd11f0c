"""The demo scenario: a fictional laboratory, client and job, loaded through the real services.

Everything here is invented for demonstration. Readings are made backwards from chosen
limits (masses to 0.01 g, as a balance would give), so the engine recovers limits close to the
chosen ones; every test state appears, one report is issued and one client link is open.
Because the data goes through the services, the demo's audit trail is as real as any other.
"""

from __future__ import annotations

import math
import random
from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import UTC, date, datetime, timedelta
from pathlib import Path
from typing import Any

from sqlalchemy.engine import make_url
from sqlmodel import col, select

from server.config import Settings
from server.db.migrate import upgrade
from server.db.session import Database
from server.db.tables import Job, Report, User
from server.demo_report import add_report_tests
from server.engine import METHODS
from server.exchange.spreadsheet import read_spreadsheet
from server.services import bench, imports, jobs, links, receipt, registers, reports, review, samples
from server.services.users import create_user

DEMO_JOB = "SMW-2611"
LOGINS = (
    ("tech", "Tamsin Okafor", "technician", "bench-demo-2026"),
    ("review", "Ravi Lindqvist", "reviewer", "review-demo-2026"),
    ("review2", "Marta Quill", "reviewer", "review2-demo-2026"),
    ("admin", "Ada Brennan", "admin", "admin-demo-2026"),
)


@dataclass(frozen=True)
class DemoSoil:
    code: str
    depth: tuple[float, float]
    sample_type: str
    description: str
    ll: float
    pl: float
    w: float
    state: str  # the test status the demo leaves it in
    grading: dict[str, float] = field(default_factory=dict)


LOCATIONS: dict[tuple[str, str], tuple[DemoSoil, ...]] = {
    ("BH01", "borehole"): (
        DemoSoil(
            "BH01-U1",
            (1.00, 1.45),
            "U100",
            "Firm brown slightly sandy CLAY",
            38,
            19,
            24,
            "approved",
            {"clay_fraction": 24, "fines": 78, "sand": 20, "gravel": 2},
        ),
        DemoSoil(
            "BH01-U2",
            (2.50, 2.95),
            "U100",
            "Stiff grey-brown fissured CLAY",
            62,
            26,
            28,
            "approved",
            {"clay_fraction": 48, "fines": 94, "sand": 6, "gravel": 0},
        ),
        DemoSoil(
            "BH01-U3",
            (4.00, 4.45),
            "U100",
            "Soft grey silty CLAY with shell fragments",
            44,
            22,
            49,
            "approved",
            {"clay_fraction": 30},
        ),
        DemoSoil("BH01-D4", (6.00, 6.45), "disturbed", "Grey clayey SILT", 41, 30, 33, "submitted"),
    ),
    ("BH02", "borehole"): (
        DemoSoil(
            "BH02-D1",
            (0.80, 1.20),
            "disturbed",
            "Brown sandy CLAY",
            32,
            17,
            18,
            "approved",
            {"fines": 55, "sand": 40, "gravel": 5},
        ),
        DemoSoil("BH02-U2", (2.00, 2.45), "U100", "Very soft dark grey CLAY", 71, 31, 78, "draft"),
        DemoSoil(
            "BH02-D3",
            (3.50, 3.95),
            "disturbed",
            "Light brown SILT, non-plastic",
            24,
            25,
            21,
            "approved",
            {"fines": 88, "sand": 12, "gravel": 0},
        ),
        DemoSoil("BH02-U4", (5.00, 5.45), "U100", "Firm grey CLAY", 47, 23, 30, "returned"),
    ),
    ("TP03", "trial pit"): (
        DemoSoil("TP03-B1", (0.50, 0.80), "bulk", "Reddish brown gravelly CLAY", 35, 18, 16, "requested"),
        DemoSoil("TP03-B2", (1.20, 1.50), "bulk", "Brown silty CLAY", 48, 21, 26, "requested"),
        DemoSoil("TP03-B3", (2.00, 2.30), "bulk", "Grey fat CLAY", 58, 24, 31, "submitted"),
        DemoSoil("TP03-B4", (3.00, 3.30), "bulk", "Brown sandy SILT", 30, 24, 22, "draft"),
    ),
}


# The container register: tins T-01 to T-40, each with a tare weighed to 0.01 g (fictional).
_TIN_RNG = random.Random(40)
TINS: dict[str, float] = {f"T-{i:02d}": round(_TIN_RNG.uniform(11.0, 16.0), 2) for i in range(1, 41)}

# The equipment register: (code, kind, description, days from today to the calibration due date).
# BAL-02 is past its due date: the demo test weighed on it carries an error flag for the reviewer.
EQUIPMENT: tuple[tuple[str, str, str, int], ...] = (
    ("BAL-01", "balance", "Top-pan balance, 600 g x 0.01 g, bench 1", 200),
    ("BAL-02", "balance", "Top-pan balance, 600 g x 0.01 g, bench 2", -12),
    ("OVN-01", "oven", "Drying oven, 105-110 °C", 120),
    ("CUP-01", "cup-device", "Liquid limit cup device, hand-operated", 20),
    ("CONE-01", "cone", "Fall cone, 80 g / 30°", 90),
    ("VANE-01", "vane", "Laboratory vane, 12.7 mm blade", 150),
    ("LF-01", "load-frame", "Load frame, 10 kN, for unconfined compression", 60),
    ("HYD-01", "hydrometer", "Hydrometer 152H", 300),
    ("SV-063", "sieve", "Test sieve, 63 µm, 200 mm diameter", 180),
)
PAST_DUE_BALANCE = "BAL-02"
WEIGHED_ON_PAST_DUE = "TP03-B3"  # a handed-in test the reviewer sees flagged
CAPACITIES_G = {"BAL-01": 600.0, "BAL-02": 600.0}  # the balances' capacities: a heavier mass is refused
# Why an error remark stands, as the demo's technician records it at hand-in (fictional).
HAND_IN_REASONS = {
    "equipment-calibration-expired": (
        "BAL-02 was checked against the 200 g reference weight on the morning of the test and "
        "read within 0.01 g; its recalibration is booked"
    ),
}


def _determination(rng: random.Random, w: float, tin: str) -> dict[str, Any]:
    """Masses to 0.01 g that give water content ``w`` (%) within rounding, in a tin of the
    register (its registered tare)."""
    tare = TINS[tin]
    dry = rng.uniform(18.0, 30.0)
    return {
        "container": tin,
        "tare_g": tare,
        "wet_tare_g": round(tare + dry * (1 + w / 100), 2),
        "dry_tare_g": round(tare + dry, 2),
    }


def atterberg_readings(soil: DemoSoil, rng: random.Random) -> dict[str, Any]:
    """A full Atterberg set whose flow curve passes near (25 blows, LL)."""
    flow_index = 0.25 * soil.ll  # a plausible slope for the demo, not a correlation
    tins = rng.sample(sorted(TINS), 8)  # eight different tins of the register for one set
    trials = []
    for i, blows in enumerate((34, 27, 21, 16)):
        w = soil.ll - flow_index * math.log10(blows / 25)
        trials.append({"blows": blows, **_determination(rng, w, tins[2 + i])})
    readings: dict[str, Any] = {
        "water_content": {
            "determinations": [_determination(rng, soil.w, tins[0]), _determination(rng, soil.w, tins[1])]
        },
        "liquid_limit": {"method": "ll-cup-multipoint", "trials": trials},
        "plastic_limit": {
            "determinations": [_determination(rng, soil.pl, tins[6]), _determination(rng, soil.pl, tins[7])]
        },
    }
    readings.update(soil.grading)
    return readings


@dataclass
class DemoInfo:
    database_url: str
    job_code: str
    report_number: str
    link_url: str | None  # None when an existing demo was kept: a link's token is stored hashed only
    kept: bool = False

    def summary(self, address: str) -> str:
        """What a person needs to try the demo, with the address the app really serves on."""
        head = (
            "Claybench demo kept as it was (all names and data are fictional); --fresh starts afresh."
            if self.kept
            else "Claybench demo is ready (all names and data are fictional)."
        )
        lines = [head, "", f"  database     {self.database_url}", f"  sign in at   {address}/signin", ""]
        lines += [f"  {role:<11} {name:<9} password {pw}" for name, _, role, pw in LOGINS]
        lines += ["", f"  job {self.job_code}: issued report {self.report_number}"]
        lines.append(
            f"  client link  {self.link_url}"
            if self.link_url
            else "  client link  make one on the job page (Links): a kept link's address is not stored"
        )
        return "\n".join([*lines, ""])


Progress = Callable[[str], None]


def _quiet(step: str) -> None:
    """No progress lines (the default for tests and other callers)."""


def _reset_sqlite(url: str) -> None:
    parsed = make_url(url)
    if parsed.get_backend_name() != "sqlite" or not parsed.database:
        raise SystemExit(
            "the demo starts afresh only on an SQLite database; unset DATABASE_URL or drop --fresh"
        )
    for suffix in ("", "-wal", "-shm"):
        Path(parsed.database + suffix).unlink(missing_ok=True)


def load_demo(
    settings: Settings, *, reset: bool = True, seed: int = 2611, progress: Progress = _quiet
) -> DemoInfo:
    """Create the demo database and fill it through the services, each step told to ``progress``.

    With ``reset`` an SQLite demo database is deleted first. Without it an existing demo is kept
    untouched (a person's work in it survives), and a database that holds anything else is refused
    rather than mixed with the demo."""
    if reset:
        progress(f"removing the old demo database ({settings.database_url})")
        _reset_sqlite(settings.database_url)
    progress("bringing the database schema up to date")
    upgrade(settings.database_url)
    db = Database(settings.database_url)
    try:
        kept = _existing_demo(db, settings)
        if kept is not None:
            progress(f"keeping the demo already in {settings.database_url}")
            return kept
        return _fill(db, settings, random.Random(seed), progress)
    finally:
        db.dispose()


def _existing_demo(db: Database, settings: Settings) -> DemoInfo | None:
    """The demo already in the database, or None for an empty one; refuses a database with other
    data, so that the demo never writes into a laboratory's own records."""
    with db.session() as s:
        job = s.exec(select(Job).where(Job.code == DEMO_JOB)).first()
        anyone = s.exec(select(User.id).limit(1)).first()
        if job is None:
            if anyone is not None:
                raise SystemExit(
                    f"{settings.database_url} holds data that is not the demo: point DATABASE_URL at "
                    "another database (or unset it), or pass --fresh to replace an SQLite demo file"
                )
            return None
        number = s.exec(select(Report.number).where(Report.job_id == job.id).order_by(col(Report.id))).first()
    return DemoInfo(settings.database_url, job.code, number or "(none)", None, kept=True)


def _fill(db: Database, settings: Settings, rng: random.Random, progress: Progress) -> DemoInfo:
    progress("adding the demo users and the laboratory")
    users: dict[str, User] = {}
    for username, full_name, role, password in LOGINS:
        users[username] = create_user(db, None, username, full_name, role, password)
    admin, tech, reviewer = users["admin"], users["tech"], users["review"]
    jobs.set_laboratory(
        db,
        admin,
        "Fellgate Soils Laboratory",
        "Unit 4, Quarry Lane, Fellgate FG2 7QL",
        "Demonstration laboratory (fictional); no accreditation",
    )
    progress("filling the registers: 40 tins and the instruments")
    equipment = _fill_registers(db, admin)
    client = jobs.create_client(
        db, admin, "Selwyn Moor Water Company", "Design office, reservoir safety team"
    )
    job = jobs.create_job(
        db,
        admin,
        client.id or 0,
        DEMO_JOB,
        "Tarn Hollow reservoir embankment raising",
        "Tarn Hollow, Selwyn Moor",
        due_date=date.today() + timedelta(days=14),
    )
    delivered = datetime.now(UTC).replace(second=0, microsecond=0) - timedelta(days=3)
    for (code, kind), soils in LOCATIONS.items():
        progress(
            f"job {job.code}, {code}: receiving {len(soils)} samples and taking their tests to their states"
        )
        samples.add_location(db, admin, job.id or 0, code, kind)
        for soil in soils:
            row = receipt.ReceiptRow(
                soil.code,
                code,
                *soil.depth,
                soil.sample_type,
                soil.description,
                "intact",
                "Cold room, rack A",
            )
            sample = receipt.receive_sample(db, tech, job.id or 0, row, delivered).sample
            (test,) = jobs.request_tests(db, admin, [sample.id or 0], ["atterberg"], assigned_to_id=tech.id)
            readings = {**atterberg_readings(soil, rng), **_bench_equipment(soil, equipment)}
            _advance(db, test.id or 0, soil, readings, tech, reviewer)
    signers = [(users[name], pw) for name, _, _, pw in LOGINS if name in ("review", "review2")]
    progress(f"job {job.code}: grading, classification and strength tests for the report")
    add_report_tests(db, admin, job.id or 0, tech, signers, rng)  # grading, classification, strength
    progress(f"job {job.code}, TP04: a test of every other method")
    _every_bench_page(db, job.id or 0, admin, tech)
    progress(f"job {job.code}: issuing the report (rendering its PDF takes a few seconds)")
    signing = next(pw for name, *_, pw in LOGINS if name == reviewer.username)
    report = reports.issue_report(db, reviewer, job.id or 0, settings.public_base_url, password=signing)
    progress(f"job {job.code}: opening a client link to the issued report")
    link = links.create_link(db, reviewer, job.id or 0, 30, "Selwyn Moor design office")
    progress(f"job {SCHEDULE_JOB}: importing a client's sample schedule and receiving part of it")
    _scheduled_job(db, admin, tech, client.name)
    return DemoInfo(
        settings.database_url,
        job.code,
        report.number,
        f"{settings.public_base_url.rstrip('/')}/share/{link.token}",
    )


# A second job as a client's schedule arrives: imported from a CSV file like any other, with
# part of the delivery booked in and the rest still expected (fictional).
SCHEDULE_JOB = "SMW-2640"
SCHEDULE_CSV = "".join(
    line + "\n"
    for line in (
        "Location,Location type,Easting (m),Northing (m),Ground level (m),"
        "Sample,Depth top (m),Depth base (m),Sample type,Description,Tests",
        "WS01,window sample,398120.5,512044.2,211.35,WS01-L1,0.50,1.50,liner,Soft brown sandy CLAY,"
        "water-content",
        "WS01,window sample,398120.5,512044.2,211.35,WS01-L2,1.50,2.50,liner,Firm grey CLAY,"
        "water-content; atterberg",
        "WS02,window sample,398161.0,512031.7,210.90,WS02-L1,0.40,1.40,liner,Soft brown silty CLAY,"
        "water-content",
        "WS02,window sample,398161.0,512031.7,210.90,WS02-L2,1.40,2.40,liner,Firm grey silty CLAY,"
        "water-content; atterberg",
        "HA01,hand auger,398140.2,512060.9,211.80,HA01-D1,0.30,,disturbed,Brown sandy topsoil,",
    )
)
SCHEDULE_RECEIVED = ("WS01-L1", "WS01-L2", "WS02-L1")


def _scheduled_job(db: Database, admin: User, tech: User, client: str) -> None:
    """The spillway job: its schedule imported through the import service, then three of its
    five samples received at the bench (the others are still expected)."""
    schedule = read_spreadsheet("spillway-schedule.csv", SCHEDULE_CSV.encode())
    target = imports.Target(SCHEDULE_JOB, client, "Tarn Hollow spillway channel", "Tarn Hollow, Selwyn Moor")
    imports.import_schedule(db, admin, schedule, target, source="spillway-schedule.csv")
    with db.session() as s:
        job = s.exec(select(Job).where(Job.code == SCHEDULE_JOB)).one()
    arrived = datetime.now(UTC).replace(second=0, microsecond=0) - timedelta(hours=2)
    for code in SCHEDULE_RECEIVED:
        row = receipt.ReceiptRow(code, condition="intact", stored_at="Cold room, rack B")
        receipt.receive_sample(db, tech, job.id or 0, row, arrived)


def _fill_registers(db: Database, admin: User) -> dict[str, dict[str, Any]]:
    """The container and equipment registers; returns each instrument's entry for readings."""
    for code, tare in TINS.items():
        registers.add_container(db, admin, code, tare)
    today = registers.today()
    entries = {}
    for code, kind, description, days in EQUIPMENT:
        item = registers.add_equipment(
            db, admin, code, kind, description, today + timedelta(days=days), CAPACITIES_G.get(code)
        )
        entries[code] = registers.equipment_view(item, today)["reading"]
    return entries


def _bench_equipment(soil: DemoSoil, entries: dict[str, dict[str, Any]]) -> dict[str, Any]:
    """The test date and the instruments used, as the bench records them from the register."""
    balance = PAST_DUE_BALANCE if soil.code == WEIGHED_ON_PAST_DUE else "BAL-01"
    return {
        "tested_on": registers.today().isoformat(),
        "equipment": [entries[balance], entries["OVN-01"], entries["CUP-01"]],
    }


def _advance(
    db: Database, test_id: int, soil: DemoSoil, readings: dict[str, Any], tech: User, reviewer: User
) -> None:
    """Take a requested test to the demo state through the same use-cases a person would."""
    if soil.state == "requested":
        return
    if soil.state == "draft":
        readings = {
            **readings,
            "plastic_limit": {"determinations": readings["plastic_limit"]["determinations"][:1]},
        }
    saved = bench.save_readings(db, tech, test_id, readings, 1)
    if soil.state == "draft":
        return
    reasons = {
        c: HAND_IN_REASONS[c] for c in bench.error_flag_codes(saved.evaluation) if c in HAND_IN_REASONS
    }
    test = bench.submit(db, tech, test_id, saved.test.version, reasons)
    password = next(pw for name, *_, pw in LOGINS if name == reviewer.username)
    if soil.state == "approved":
        review.approve(db, reviewer, test_id, password, test.version)
    elif soil.state == "returned":
        review.return_test(
            db,
            reviewer,
            test_id,
            "The tin of trial 3 differs from its registered tare by 0.4 g; re-weigh it and correct trial 3.",
            test.version,
        )


def _every_bench_page(db: Database, job_id: int, admin: User, tech: User) -> None:
    """A bulk sample from a fourth pit with a test of every other method: most requested, the
    fall-cone liquid limit and the sieving part-typed (drafts), so that every bench page opens."""
    rng = random.Random(7)
    location = samples.add_location(db, admin, job_id, "TP04", "trial pit")
    sample = samples.add_sample(
        db, admin, location.id or 0, "TP04-B1", 1.00, 1.40, "bulk", "Brown slightly gravelly sandy CLAY"
    )
    methods = [m for m in sorted(METHODS) if m != "atterberg"]
    drafts: dict[str, dict[str, Any]] = {
        "ll-cone": {
            "cone": "80g-30deg",
            "trials": [
                {"penetration_mm": [15.8, 16.0], **_determination(rng, 34.0, "T-21")},
                {"penetration_mm": [18.9, 19.1], **_determination(rng, 36.5, "T-22")},
            ],
        },
        "sieve": {
            "dry_mass_g": 1508.4,
            "sieves": [{"size_mm": 37.5, "retained_g": 0.0}, {"size_mm": 20.0, "retained_g": 96.3}],
        },
    }
    for test in jobs.request_tests(db, admin, [sample.id or 0], methods, assigned_to_id=tech.id):
        if test.method in drafts:
            bench.save_readings(db, tech, test.id or 0, drafts[test.method], test.version)
