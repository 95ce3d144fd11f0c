"""Helpers that take tests to approved and reports to issued, through the services only."""

from __future__ import annotations

import copy
from dataclasses import dataclass
from typing import Any

from server.db.session import Database
from server.db.tables import LabTest, Sample
from server.services import amendments, bench, jobs, review, samples
from tests.conftest import PASSWORDS, People
from tests.support.scenario import ATTERBERG, small_job


def approve(
    db: Database,
    people: People,
    test_id: int,
    readings: dict[str, Any] = ATTERBERG,
    version: int = 1,
    signer: str = "review",
) -> None:
    """The technician enters and hands in the readings; a reviewer signs the approval."""
    saved = bench.save_readings(db, people.tech, test_id, readings, version)
    test = bench.submit(db, people.tech, test_id, saved.test.version)
    review.approve(db, getattr(people, signer), test_id, PASSWORDS[signer], test.version)


@dataclass
class TwoSamples:
    job_id: int
    samples: tuple[int, int]
    tests: tuple[int, int]


def two_approved_samples(db: Database, people: People, *, description: str = "Stiff grey CLAY") -> TwoSamples:
    """Job T-100 with BH1-S1 and BH1-S2, an approved Atterberg test on each."""
    job = small_job(db, people.admin)
    with db.session() as s:
        sample = s.get(Sample, job.sample_id)
        assert sample is not None
        location_id = sample.location_id
    second = samples.add_sample(db, people.admin, location_id, "BH1-S2", 2.0, 2.45, "U100", description)
    (test2,) = jobs.request_tests(db, people.admin, [second.id or 0], ["atterberg"])
    approve(db, people, job.test_id)
    approve(db, people, test2.id or 0)
    return TwoSamples(job.job_id, (job.sample_id, second.id or 0), (job.test_id, test2.id or 0))


AMENDMENT_REASON = "Tin N1 re-weighed: dry mass corrected"


def amend_and_approve(db: Database, people: People, test_id: int) -> int:
    """A reviewer amends an approved test, the bench corrects one mass, another reviewer approves.

    Returns the id of the new, approved revision."""
    with db.session() as s:
        test = s.get(LabTest, test_id)
        assert test is not None
        version = test.version
    new = amendments.amend(db, people.review, test_id, AMENDMENT_REASON, version)
    corrected = copy.deepcopy(ATTERBERG)
    corrected["water_content"]["determinations"][0]["dry_tare_g"] = 30.20
    approve(db, people, new.id or 0, corrected, new.version, signer="review2")
    return new.id or 0
