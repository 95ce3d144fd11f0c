"""Control-chart series of the reference soils and the flags they raise on the review desk
(server/services/quality_charts.py), through the real bench and review services.

Water contents are typed as masses: tare 10.00 g, dry 30.00 g and wet 30.00 + w/5 g give
w = (wet - dry) / (dry - tare) x 100 (ASTM D2216 cl. 12.1 formula) exactly the w wanted.
The history is the ten results of tests/quality/test_control_chart.py (mean 30.0, σ 0.8165,
action limits 27.551 and 32.449, hand-worked there).
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import timedelta

import pytest

from server.db.session import Database
from server.db.tables import LabTest, User
from server.services import bench, jobs, quality_charts, samples
from server.services import quality_references as refs
from tests.conftest import People
from tests.support.scenario import determination

HISTORY = [30.0, 31.0, 29.0, 30.0, 31.0, 29.0, 30.0, 31.0, 29.0, 30.0]


def water(w: float) -> dict[str, object]:
    return {"determinations": [determination("N1", 10.00, 30.00 + w / 5, 30.00)]}


@dataclass
class ReferenceLab:
    people: People
    job_id: int
    location_id: int
    soil_id: int
    made: int = 0


def reference_lab(db: Database, people: People) -> ReferenceLab:
    """An internal job whose samples are portions of reference soil RS-1."""
    client = jobs.create_client(db, people.admin, "Our own laboratory")
    job = jobs.create_job(db, people.admin, client.id or 0, "QC-2026", "Reference soil checks", "Laboratory")
    location = samples.add_location(db, people.admin, job.id or 0, "STOCK")
    soil = refs.add_soil(
        db, people.review, "RS-1", "Grey clay stock", "", {"water-content": {"water_content": 30}}
    )
    return ReferenceLab(people, job.id or 0, location.id or 0, soil.id or 0)


def handed_in(db: Database, lab: ReferenceLab, who: User, w: float, *, reference: bool = True) -> int:
    """A new portion (or, ``reference=False``, an ordinary sample) with a water-content test of
    ``w`` handed in by ``who``; returns the test id."""
    lab.made += 1
    sample = samples.add_sample(db, lab.people.admin, lab.location_id, f"P{lab.made}", 0.0, 0.0, "bulk", "")
    if reference:
        refs.link_sample(db, lab.people.admin, sample.id or 0, lab.soil_id)
    (test,) = jobs.request_tests(db, lab.people.admin, [sample.id or 0], ["water-content"])
    saved = bench.save_readings(db, who, test.id or 0, water(w), test.version)
    return bench.submit(db, who, test.id or 0, saved.test.version).id or 0


def test_points_are_the_handed_in_tests_in_order_with_who_handed_them_in(
    db: Database, people: People
) -> None:
    lab = reference_lab(db, people)
    for i, w in enumerate(HISTORY):
        handed_in(db, lab, people.tech if i % 2 == 0 else people.review2, w)
    chart = quality_charts.chart(db, lab.soil_id, "water-content", "water_content")
    assert [p.value for p in chart.points] == pytest.approx(HISTORY)
    assert [p.technician.username if p.technician else None for p in chart.points] == ["tech", "review2"] * 5
    assert chart.assigned == 30.0
    assert {u.username for u in chart.technicians} == {"tech", "review2"}
    assert chart.current is not None and chart.current.mean == pytest.approx(30.0)  # hand-worked


def test_a_point_beyond_the_action_limit_flags_that_days_tests_of_the_method(
    db: Database, people: People
) -> None:
    lab = reference_lab(db, people)
    for w in HISTORY:
        handed_in(db, lab, people.tech, w)
    ordinary = handed_in(db, lab, people.tech, 22.0, reference=False)
    handed_in(db, lab, people.tech, 33.0)  # z = 3 / 0.8165 = 3.67 > 3 (hand-worked)
    chart = quality_charts.chart(db, lab.soil_id, "water-content", "water_content")
    assert [(v.rule, v.severity) for _, v in chart.violations] == [("beyond-3s", "error")]
    flags = quality_charts.quality_flags(db, ordinary)
    assert [(f["code"], f["severity"]) for f in flags] == [("reference-soil-out-of-control", "error")]
    assert "RS-1" in flags[0]["message"]


def test_a_test_handed_in_another_day_gets_no_flag(db: Database, people: People) -> None:
    lab = reference_lab(db, people)
    for w in [*HISTORY, 33.0]:
        handed_in(db, lab, people.tech, w)
    ordinary = handed_in(db, lab, people.tech, 22.0, reference=False)
    with db.transaction() as s:  # as if handed in the day before (setting up the record only)
        test = s.get(LabTest, ordinary)
        assert test is not None and test.submitted_at is not None
        test.submitted_at -= timedelta(days=1)
        s.add(test)
    assert quality_charts.quality_flags(db, ordinary) == []


def test_a_technicians_chart_judges_their_points_against_their_own_history(
    db: Database, people: People
) -> None:
    lab = reference_lab(db, people)
    for w in HISTORY:
        handed_in(db, lab, people.tech, w)
    handed_in(db, lab, people.review2, 33.0)
    own = quality_charts.chart(db, lab.soil_id, "water-content", "water_content", people.review2.id)
    assert [p.value for p in own.points] == pytest.approx([33.0])
    assert own.points[0].judged.zone == "no limits"  # one point: no history of their own
    everyone = quality_charts.chart(db, lab.soil_id, "water-content", "water_content")
    assert everyone.points[-1].judged.zone == "action"


def test_the_chart_choices_are_the_methods_and_keys_the_soil_has(db: Database, people: People) -> None:
    lab = reference_lab(db, people)
    handed_in(db, lab, people.tech, 30.0)
    assert quality_charts.chart_choices(db, lab.soil_id) == [("water-content", "water_content")]
