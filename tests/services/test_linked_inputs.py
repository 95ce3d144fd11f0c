"""The hydrometer, density and compaction tests take the particle density of their sample's
particle-density test when their own field is blank: named in the results, the readings left as
entered, flagged while the source is not approved, and frozen once handed in."""

from __future__ import annotations

import copy
from typing import Any

from server.api.examples import EXAMPLES
from server.db.session import Database
from server.db.tables import LabTest
from server.engine import evaluate
from server.services import bench, jobs, review, samples
from server.services.linked_inputs import LINKED
from tests.conftest import PASSWORDS, People
from tests.support.scenario import ATTERBERG, small_job


def _without(method: str, key: str) -> dict[str, Any]:
    readings = copy.deepcopy(EXAMPLES[method])
    readings.pop(key)
    return readings


def _stored(db: Database, test_id: int) -> LabTest:
    with db.session() as s:
        test = s.get(LabTest, test_id)
        assert test is not None
        return test


def _particle_density(db: Database, people: People, sample_id: int, *, approve: bool) -> LabTest:
    (test,) = jobs.request_tests(db, people.admin, [sample_id], ["particle-density"])
    saved = bench.save_readings(db, people.tech, test.id or 0, EXAMPLES["particle-density"], test.version)
    if approve:
        handed = bench.submit(db, people.tech, test.id or 0, saved.test.version)
        review.approve(db, people.review, test.id or 0, PASSWORDS["review"], handed.version)
    return _stored(db, test.id or 0)


def test_a_blank_specific_gravity_is_the_approved_particle_density_tests(
    db: Database, people: People
) -> None:
    job = small_job(db, people.admin, method="hydrometer")
    source = _particle_density(db, people, job.sample_id, approve=True)
    gs = source.results["specific_gravity"]  # type: ignore[index]
    readings = _without("hydrometer", "specific_gravity")
    saved = bench.save_readings(db, people.tech, job.test_id, readings, 1)
    assert saved.evaluation.ok, saved.evaluation.errors
    stored = _stored(db, job.test_id)
    assert "specific_gravity" not in (stored.readings or {})  # kept as entered
    linked = (stored.results or {})[LINKED]["specific_gravity"]
    assert linked == {"value": gs, "test_id": source.id, "method": "particle-density", "status": "approved"}
    # The same results as with that value typed in (the link only fills the blank field).
    typed = evaluate("hydrometer", {**readings, "specific_gravity": gs}).results
    assert (stored.results or {})["hydrometer_points"] == typed["hydrometer_points"]
    assert not [f for f in stored.flags or [] if f["code"] == "linked-value-not-approved"]


def test_a_typed_value_wins_over_the_link(db: Database, people: People) -> None:
    job = small_job(db, people.admin, method="hydrometer")
    _particle_density(db, people, job.sample_id, approve=True)
    saved = bench.save_readings(db, people.tech, job.test_id, EXAMPLES["hydrometer"], 1)
    assert LINKED not in saved.evaluation.results


def test_a_source_not_yet_approved_is_used_and_flagged(db: Database, people: People) -> None:
    job = small_job(db, people.admin, method="density")
    source = _particle_density(db, people, job.sample_id, approve=False)
    saved = bench.save_readings(
        db, people.tech, job.test_id, _without("density", "particle_density_mg_m3"), 1
    )
    results = saved.evaluation.results
    assert results[LINKED]["particle_density_mg_m3"]["test_id"] == source.id
    assert "void_ratio" in results
    flags = [f for f in saved.evaluation.flags if f.code == "linked-value-not-approved"]
    assert len(flags) == 1 and flags[0].severity == "warning" and str(source.id) in flags[0].message


def test_without_a_source_the_field_is_still_missing(db: Database, people: People) -> None:
    job = small_job(db, people.admin, method="hydrometer")
    ev = bench.preview(db, _stored(db, job.test_id), _without("hydrometer", "specific_gravity"))
    assert [e for e in ev.errors if e.loc == ("readings", "specific_gravity")]


def test_a_handed_in_test_keeps_the_value_it_was_handed_in_with(db: Database, people: People) -> None:
    job = small_job(db, people.admin, method="density")
    source = _particle_density(db, people, job.sample_id, approve=False)
    saved = bench.save_readings(
        db, people.tech, job.test_id, _without("density", "particle_density_mg_m3"), 1
    )
    handed = bench.submit(db, people.tech, job.test_id, saved.test.version)
    before = (handed.results or {})[LINKED]
    changed = copy.deepcopy(EXAMPLES["particle-density"])
    changed["determinations"][0]["pycnometer_soil_g"] += 0.5  # the source test is changed afterwards
    bench.save_readings(db, people.tech, source.id or 0, changed, source.version)
    again = bench.preview(db, _stored(db, job.test_id), _stored(db, job.test_id).readings or {})
    assert again.results[LINKED] == before


def _atterberg_on(db: Database, people: People, standards: str) -> int:
    client = jobs.create_client(db, people.admin, f"Client {standards}")
    job = jobs.create_job(db, people.admin, client.id or 0, f"J-{standards}", standards=standards)
    location = samples.add_location(db, people.admin, job.id or 0, "BH1")
    sample = samples.add_sample(db, people.admin, location.id or 0, "S1", 1.0, 1.45, "U100", "Firm CLAY")
    (test,) = jobs.request_tests(db, people.admin, [sample.id or 0], ["atterberg"])
    return test.id or 0


def test_a_bs_iso_job_describes_plasticity_in_bs_5930_terms(db: Database, people: People) -> None:
    test_id = _atterberg_on(db, people, "bs-iso")
    saved = bench.save_readings(db, people.tech, test_id, ATTERBERG, 1)
    assert "bs_plasticity_term" not in saved.evaluation.results  # a save does not look the job up
    shown = bench.preview(db, _stored(db, test_id), ATTERBERG)
    assert shown.results[LINKED] == {"plasticity_terms": {"value": "bs5930", "standards": "bs-iso"}}
    handed = bench.submit(db, people.tech, test_id, saved.test.version)
    # BS 5930:2015 plasticity chart via the engine; the term itself is the engine's (tests/engine).
    assert (handed.results or {})["bs_plasticity_term"] == shown.results["bs_plasticity_term"]
    assert "plasticity_terms" not in (handed.readings or {})


def test_an_astm_job_and_a_sheet_that_chose_keep_uscs_terms(db: Database, people: People) -> None:
    astm = _atterberg_on(db, people, "astm")
    assert "bs_plasticity_term" not in bench.preview(db, _stored(db, astm), ATTERBERG).results
    bs = _atterberg_on(db, people, "bs-iso")
    chosen = bench.preview(db, _stored(db, bs), {**ATTERBERG, "plasticity_terms": "uscs"})
    assert "bs_plasticity_term" not in chosen.results and LINKED not in chosen.results
