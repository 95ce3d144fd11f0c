"""The demo scenario: a fictional laboratory, client and job, loaded through the real services.

Everything here is invented for demonstration. Readings are made backwards from chosen
limits (masses to 0.01 g, as a balance would give), so the engine recovers limits close to the
chosen ones; every test state appears, one report is issued and one client link is open.
Because the data goes through the services, the demo's audit trail is as real as any other.
"""

from __future__ import annotations

import math
import random
from dataclasses import dataclass, field
from datetime import date, timedelta
from pathlib import Path
from typing import Any

from sqlalchemy.engine import make_url

from server.config import Settings
from server.db.migrate import upgrade
from server.db.session import Database
from server.db.tables import User
from server.services import bench, jobs, links, reports, review
from server.services.users import create_user

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


def _determination(rng: random.Random, w: float, tin: str) -> dict[str, Any]:
    """Masses to 0.01 g that give water content ``w`` (%) within rounding."""
    tare = round(rng.uniform(11.0, 16.0), 2)
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
    trials = []
    for i, blows in enumerate((34, 27, 21, 16)):
        w = soil.ll - flow_index * math.log10(blows / 25)
        trials.append({"blows": blows, **_determination(rng, w, f"L{i + 1:02d}")})
    readings: dict[str, Any] = {
        "water_content": {
            "determinations": [_determination(rng, soil.w, "N01"), _determination(rng, soil.w, "N02")]
        },
        "liquid_limit": {"method": "ll-cup-multipoint", "trials": trials},
        "plastic_limit": {
            "determinations": [_determination(rng, soil.pl, "P01"), _determination(rng, soil.pl, "P02")]
        },
    }
    readings.update(soil.grading)
    return readings


@dataclass
class DemoInfo:
    database_url: str
    job_code: str
    report_number: str
    link_url: str

    def summary(self) -> str:
        lines = [
            "Claybench demo is ready (all names and data are fictional).",
            "",
            f"  database     {self.database_url}",
            "  sign in at   http://127.0.0.1:8000/signin",
            "",
        ]
        lines += [f"  {role:<11} {name:<9} password {pw}" for name, _, role, pw in LOGINS]
        lines += [
            "",
            f"  job {self.job_code}: issued report {self.report_number}",
            f"  client link  {self.link_url}",
            "",
        ]
        return "\n".join(lines)


def _reset_sqlite(url: str) -> None:
    parsed = make_url(url)
    if parsed.get_backend_name() != "sqlite" or not parsed.database:
        raise SystemExit("the demo resets only an SQLite database; unset DATABASE_URL or pass --keep")
    for suffix in ("", "-wal", "-shm"):
        Path(parsed.database + suffix).unlink(missing_ok=True)


def load_demo(settings: Settings, *, reset: bool = True, seed: int = 2611) -> DemoInfo:
    """Create (or recreate) the demo database and fill it through the services."""
    if reset:
        _reset_sqlite(settings.database_url)
    upgrade(settings.database_url)
    db = Database(settings.database_url)
    try:
        return _fill(db, settings, random.Random(seed))
    finally:
        db.dispose()


def _fill(db: Database, settings: Settings, rng: random.Random) -> DemoInfo:
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
    client = jobs.create_client(
        db, admin, "Selwyn Moor Water Company", "Design office, reservoir safety team"
    )
    job = jobs.create_job(
        db,
        admin,
        client.id or 0,
        "SMW-2611",
        "Tarn Hollow reservoir embankment raising",
        "Tarn Hollow, Selwyn Moor",
        due_date=date.today() + timedelta(days=14),
    )
    for (code, kind), soils in LOCATIONS.items():
        location = jobs.add_location(db, admin, job.id or 0, code, kind)
        for soil in soils:
            sample = jobs.add_sample(
                db, admin, location.id or 0, soil.code, *soil.depth, soil.sample_type, soil.description
            )
            (test,) = jobs.request_tests(db, admin, [sample.id or 0], ["atterberg"], assigned_to_id=tech.id)
            _advance(db, test.id or 0, soil, atterberg_readings(soil, rng), tech, reviewer)
    report = reports.issue_report(db, reviewer, job.id or 0, settings.public_base_url)
    link = links.create_link(db, reviewer, job.id or 0, 30, "Selwyn Moor design office")
    return DemoInfo(
        settings.database_url,
        job.code,
        report.number,
        f"{settings.public_base_url.rstrip('/')}/share/{link.token}",
    )


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
    test = bench.submit(db, tech, test_id, saved.test.version)
    password = next(pw for name, *_, pw in LOGINS if name == reviewer.username)
    if soil.state == "approved":
        review.approve(db, reviewer, test_id, password, test.version)
    elif soil.state == "returned":
        review.return_test(
            db,
            reviewer,
            test_id,
            "Tin L03 tare differs from the register by 0.4 g; re-weigh the tin and correct trial 3.",
            test.version,
        )
