"""A small job built through the services, and readings with published check values.

The readings reproduce published worked examples, so results can be checked against them:
- liquid limit trials: Das, Principles of Geotechnical Engineering (problem set; N = 15, 20,
  28 with w = 42.0, 40.8, 39.1 %), least squares in log10 N gives LL 39.67 -> reported 40;
- plastic limit: Liu & Evett, Soil Properties: Testing, Measurement and Evaluation (worked
  example; 20.9 % and 21.5 %, PL 21.2 -> reported 21);
- natural water content: ASTM D2216 cl. 12.1 formula, (36.00 - 30.00) / (30.00 - 10.00) = 30.0 %.
Masses are chosen so that w = (wet - dry) / (dry - tare) gives those water contents exactly.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from server.db.session import Database
from server.db.tables import User
from server.services import jobs, samples


def determination(tin: str, tare: float, wet: float, dry: float) -> dict[str, Any]:
    return {"container": tin, "tare_g": tare, "wet_tare_g": wet, "dry_tare_g": dry}


LL_TRIALS = [
    {"blows": 15, **determination("L1", 10.00, 38.40, 30.00)},  # w = 42.0 %
    {"blows": 20, **determination("L2", 10.00, 38.16, 30.00)},  # w = 40.8 %
    {"blows": 28, **determination("L3", 10.00, 37.82, 30.00)},  # w = 39.1 %
]
PL_DETERMINATIONS = [
    determination("P1", 11.56, 20.47, 18.93),  # w = 20.9 % (Liu & Evett)
    determination("P2", 11.68, 21.27, 19.57),  # w = 21.5 % (Liu & Evett)
]
NATURAL = [determination("N1", 10.00, 36.00, 30.00)]  # w = 30.0 %

ATTERBERG: dict[str, Any] = {
    "water_content": {"determinations": NATURAL},
    "liquid_limit": {"method": "ll-cup-multipoint", "trials": LL_TRIALS},
    "plastic_limit": {"determinations": PL_DETERMINATIONS},
}


def form_fields(readings: dict[str, Any], prefix: str = "r") -> list[tuple[str, str]]:
    """Readings JSON flattened to bench-form fields, as a browser would post them."""
    out: list[tuple[str, str]] = []
    if isinstance(readings, dict):
        for key, value in readings.items():
            out += form_fields(value, f"{prefix}.{key}")
    elif isinstance(readings, list):
        for i, value in enumerate(readings):
            out += form_fields(value, f"{prefix}.{i}")
    else:
        out.append((prefix, str(readings)))
    return out


@dataclass
class Job:
    job_id: int
    sample_id: int
    test_id: int


def small_job(
    db: Database, admin: User, *, description: str = "Firm brown CLAY", method: str = "atterberg"
) -> Job:
    """One client, job, borehole and sample with one requested test."""
    client = jobs.create_client(db, admin, "Test Client Ltd")
    job = jobs.create_job(db, admin, client.id or 0, "T-100", "Test job", "Test site")
    location = samples.add_location(db, admin, job.id or 0, "BH1")
    sample = samples.add_sample(db, admin, location.id or 0, "BH1-S1", 1.0, 1.45, "U100", description)
    (test,) = jobs.request_tests(db, admin, [sample.id or 0], [method])
    return Job(job.id or 0, sample.id or 0, test.id or 0)
