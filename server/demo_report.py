"""The demo job's further tests, so its report carries everything a certified report prints.

Grading by sieving and hydrometer (grading curves, clay fraction, activity), classification
(USCS group and AASHTO group with group index), laboratory vane and unconfined compression
(undrained strength, sensitivity), and one recorded deviation from a standard. All fictional.

Readings are made backwards from chosen values (fractions, clay fraction, strengths), checked
through the engine, then entered, handed in and approved through the services like any test.
"""

from __future__ import annotations

import math
import random
from dataclasses import dataclass
from typing import Any

from sqlmodel import col, select

from server.db.session import Database
from server.db.tables import LabTest, Location, Sample, User
from server.engine import evaluate
from server.engine.indices import reported_limit
from server.services import bench, jobs, review


@dataclass(frozen=True)
class Grading:
    fines: float  # % passing 75 µm
    sand: float
    gravel: float
    clay: float  # % finer than 2 µm, of the whole sample


@dataclass(frozen=True)
class Strength:
    method: str  # "vane" or "unconfined-compression"
    cu_kpa: float  # undisturbed undrained strength
    sensitivity: float
    deviation: str = ""


# Which samples get which further tests (sample codes of server.demo.LOCATIONS, all approved there).
GRADINGS: dict[str, Grading] = {
    "BH01-U1": Grading(78.0, 20.0, 2.0, 24.0),
    "BH01-U2": Grading(94.0, 6.0, 0.0, 48.0),
    "BH02-D1": Grading(55.0, 40.0, 5.0, 16.0),
}
STRENGTHS: dict[str, Strength] = {
    "BH01-U1": Strength("vane", 42.0, 2.8),
    "BH01-U2": Strength("unconfined-compression", 96.0, 2.2),
    "BH01-U3": Strength(
        "vane",
        17.5,
        5.6,
        "Vane inserted 30 mm from the end of the tube sample, not at mid-length: the middle of the sample "
        "was disturbed in extrusion",
    ),
}
SIEVES_MM = (37.5, 19.0, 9.5, 4.75, 2.0, 0.85, 0.425, 0.25, 0.15, 0.075)
HYDROMETER_MINUTES = (1, 2, 5, 15, 30, 60, 250, 1440)


def sieve_readings(g: Grading, rng: random.Random) -> dict[str, Any]:
    """500 g washed on 75 µm; retained masses spreading the gravel and sand over the stack."""
    sand_share = {2.0: 0.85, 0.85: 0.65, 0.425: 0.45, 0.25: 0.3, 0.15: 0.15, 0.075: 0.0}
    gravel_share = {37.5: 1.0, 19.0: 0.7, 9.5: 0.3, 4.75: 0.0}
    passing = [100.0 - g.gravel * (1.0 - gravel_share[s]) if s in gravel_share
               else g.fines + g.sand * sand_share[s] for s in SIEVES_MM]
    dry = 500.0
    retained = [round((a - b) * dry / 100.0, 1) for a, b in zip([100.0, *passing[:-1]], passing, strict=True)]
    pan = round(rng.uniform(0.2, 1.0), 1)
    return {"dry_mass_g": dry, "washed_dry_mass_g": round(sum(retained) + pan, 1), "pan_g": pan,
            "sieves": [{"size_mm": s, "retained_g": m} for s, m in zip(SIEVES_MM, retained, strict=True)]}


def _hydrometer(first: float, last: float, rng: random.Random) -> dict[str, Any]:
    """A 50 g specimen (Gs 2.65, 152H): percent of specimen falling from ``first`` to ``last``
    linearly in log time; reading = zero reading + percent / 2 (a = 1, W = 50 g; ASTM D422 form)."""
    span = math.log(1440.0)
    readings = []
    for m in HYDROMETER_MINUTES:
        pct = first + (last - first) * math.log(m) / span
        readings.append({"minutes": m, "reading": round(5.0 + pct * 0.5, 1),
                         "temperature_c": round(rng.uniform(19.5, 21.5), 1)})
    return {"dry_mass_g": 50.0, "specific_gravity": 2.65, "meniscus_correction": 1.0,
            "zero_readings": [{"temperature_c": 20.0, "reading": 5.0}], "readings": readings}


def grading_readings(g: Grading, rng: random.Random) -> dict[str, Any]:
    """Sieve and hydrometer readings whose clay fraction comes within 0.5 % of ``g.clay``
    (the last hydrometer reading adjusted by a few secant steps through the engine)."""
    sieve = sieve_readings(g, rng)
    p2 = g.fines + g.sand * 0.85
    first = min(95.0, 0.95 * g.fines / p2 * 100.0)
    seed = rng.random()

    def clay_for(last: float) -> tuple[float, dict[str, Any]]:
        readings = {"sieve": sieve, "hydrometer": _hydrometer(first, last, random.Random(seed))}
        return float(evaluate("grading", readings).results.get("clay_fraction") or 0.0), readings

    a, b = 0.5 * g.clay / p2 * 100.0, 1.0 * g.clay / p2 * 100.0
    ca, readings = clay_for(a)
    cb, readings = clay_for(b)
    for _ in range(8):
        if abs(cb - g.clay) < 0.5 or cb == ca:
            break
        a, b, ca = b, b + (g.clay - cb) * (b - a) / (cb - ca), cb
        cb, readings = clay_for(b)
    return readings


def _vane(cu: float, st: float) -> dict[str, Any]:
    """Torques on a 12.7 x 25.4 mm vane: T = cu pi D^2 (H/2 + D/6) (ASTM D4648 form)."""
    d, h = 0.0127, 0.0254
    k = math.pi * d * d * (h / 2.0 + d / 6.0) * 1000.0  # N·m per kPa
    return {"diameter_mm": 12.7, "height_mm": 25.4,
            "undisturbed": {"torque_nm": round(cu * k, 4)}, "remoulded": {"torque_nm": round(cu / st * k, 4)}}


def _ucs_specimen(qu: float, strain_at_peak: float) -> dict[str, Any]:
    """A 38 x 76 mm specimen to 15 % strain: stress qu (e/ef) exp(1 - e/ef), loads area-corrected."""
    d, h = 38.0, 76.0
    area0 = math.pi * (d / 1000.0) ** 2 / 4.0
    readings = []
    for i in range(16):
        e = i * 0.01
        stress = qu * (e / strain_at_peak) * math.exp(1.0 - e / strain_at_peak)
        load = stress * 1000.0 * area0 / (1.0 - e)
        readings.append({"deformation_mm": round(e * h, 2), "load_n": round(load, 1)})
    return {"diameter_mm": d, "height_mm": h, "readings": readings}


def strength_readings(s: Strength) -> dict[str, Any]:
    if s.method == "vane":
        readings = _vane(s.cu_kpa, s.sensitivity)
    else:
        readings = {"undisturbed": _ucs_specimen(2.0 * s.cu_kpa, 0.04),
                    "remoulded": _ucs_specimen(2.0 * s.cu_kpa / s.sensitivity, 0.10)}
    if s.deviation:
        readings["deviation"] = s.deviation
    return readings


def _approved_results(db: Database, job_id: int, sample_code: str, method: str) -> dict[str, Any]:
    with db.session() as s:
        test = s.exec(
            select(LabTest)
            .join(Sample, col(Sample.id) == LabTest.sample_id)
            .join(Location, col(Location.id) == Sample.location_id)
            .where(Location.job_id == job_id, Sample.code == sample_code, LabTest.method == method,
                   LabTest.status == "approved")
        ).one()
    return test.results or {}


def classification_readings(atterberg: dict[str, Any], grading: dict[str, Any]) -> dict[str, Any]:
    """What the classification takes from the approved limits (as reported) and the grading."""
    fractions = {k: grading[k] for k in ("fines", "sand", "gravel", "cu", "cc") if grading.get(k) is not None}
    if atterberg.get("nonplastic"):
        return {"nonplastic": True, **fractions}
    return {"liquid_limit": reported_limit(atterberg["liquid_limit"]),
            "plastic_limit": reported_limit(atterberg["plastic_limit"]), **fractions}


def add_report_tests(
    db: Database,
    admin: User,
    job_id: int,
    tech: User,
    signers: list[tuple[User, str]],
    rng: random.Random,
) -> None:
    """Request, enter, hand in and approve the further tests; signers take turns approving."""
    samples: dict[str, int] = {}
    with db.session() as s:
        for sample in s.exec(
            select(Sample)
            .join(Location, col(Location.id) == Sample.location_id)
            .where(Location.job_id == job_id)
        ):
            samples[sample.code] = sample.id or 0
    turn = 0

    def run(code: str, method: str, readings: dict[str, Any]) -> dict[str, Any]:
        nonlocal turn
        (test,) = jobs.request_tests(db, admin, [samples[code]], [method], assigned_to_id=tech.id)
        saved = bench.save_readings(db, tech, test.id or 0, readings, test.version)
        handed = bench.submit(db, tech, test.id or 0, saved.test.version)
        signer, password = signers[turn % len(signers)]
        turn += 1
        return review.approve(db, signer, test.id or 0, password, handed.version).results or {}

    for code, g in GRADINGS.items():
        graded = run(code, "grading", grading_readings(g, rng))
        run(code, "classification", classification_readings(_approved_results(db, job_id, code, "atterberg"),
                                                              graded))
    for code, st in STRENGTHS.items():
        run(code, st.method, strength_readings(st))
