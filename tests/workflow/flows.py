"""Building tests in a given state through the real services (helpers, no fixtures).

``Lab`` makes one client and job, then a fresh sample with one requested test whenever asked,
so one database holds as many independent tests as a check needs.
"""

from __future__ import annotations

from datetime import date
from typing import Any

from server.db.session import Database
from server.db.tables import LabTest, User
from server.services import bench, jobs, review, samples
from tests.conftest import PASSWORDS
from tests.support.scenario import ATTERBERG, NATURAL

READINGS: dict[str, dict[str, Any]] = {"atterberg": ATTERBERG, "water-content": {"determinations": NATURAL}}
# A water content run with a balance past its calibration due date: one error flag
# (equipment-calibration-expired; ISO/IEC 17025:2017 cl. 6.4.7, calibrated equipment).
EXPIRED_BALANCE: dict[str, Any] = {
    "determinations": NATURAL,
    "tested_on": "2026-03-01",
    "equipment": [{"id": "BAL-1", "calibration_due": "2026-01-01"}],
}
# Why the error remark of EXPIRED_BALANCE stands, as a technician records it at hand-in
# (every error remark needs one: ISO/IEC 17025:2017 cl. 7.5.1; wording of our own).
STANDS = {"equipment-calibration-expired": "BAL-1 was checked against a reference weight on the day"}


class Lab:
    def __init__(self, db: Database, admin: User, code: str = "WF-1", due: date | None = None):
        self.db = db
        self.admin = admin
        client = jobs.create_client(db, admin, f"Client of {code}")
        self.job = jobs.create_job(db, admin, client.id or 0, code, f"Job {code}", "Workflow site", due)
        self.location = samples.add_location(db, admin, self.job.id or 0, "BH1")
        self.samples = 0

    def new_test(self, method: str = "atterberg") -> int:
        """A new sample with one requested test; returns the test's id."""
        self.samples += 1
        depth = float(self.samples)
        sample = samples.add_sample(
            self.db, self.admin, self.location.id or 0, f"S{self.samples}", depth, depth + 0.45, "U100"
        )
        (test,) = jobs.request_tests(self.db, self.admin, [sample.id or 0], [method])
        return test.id or 0

    def submitted(
        self, enterer: User, method: str = "atterberg", readings: dict[str, Any] | None = None
    ) -> int:
        """A handed-in test: the scenario's Atterberg set (one warning flag: plastic-limit
        determinations 0.65 % apart, BS 1377-2:1990 cl. 5), or a water content with none."""
        test_id = self.new_test(method)
        saved = bench.save_readings(self.db, enterer, test_id, readings or READINGS[method], 1)
        bench.submit(self.db, enterer, test_id, saved.test.version, STANDS)
        return test_id

    def approved(self, enterer: User, signer: User) -> int:
        test_id = self.submitted(enterer)
        review.approve(self.db, signer, test_id, PASSWORDS[signer.username], version(self.db, test_id))
        return test_id


def version(db: Database, test_id: int) -> int:
    return load(db, test_id).version


def load(db: Database, test_id: int) -> LabTest:
    with db.session() as s:
        test = s.get(LabTest, test_id)
    assert test is not None, test_id
    return test
