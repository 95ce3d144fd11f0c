"""Control charts of the reference soils, and the quality flags they raise on the review desk.

A point is a test of a sample linked to the reference soil (``reference_sample``), handed in or
approved, newest revision only (a superseded revision was replaced by its amendment), in the
order it was handed in, valued by one result key at full precision. Its technician is the person
who handed it in: the actor of the test's last ``submit`` audit event, or failing one, of its last
``readings`` event (the review desk names readings authors the same way,
``server.db.review_queries.AUTHOR_ACTIONS``).

The laboratory's chart judges every point against all earlier points (``server.quality.
control_chart``). Filtered to one technician, the chart judges that person's points against
their own history alone, so that one person's bias is not hidden in everyone's spread.

A point beyond the action limits of the laboratory's chart is an error flag on every test of the
same method handed in the same day (UTC): whatever put the reference soil out of control may have
touched them too (ISO/IEC 17025:2017 cl. 7.7.3). The flags are computed when asked for, never
stored on the tests, so an approved test's record does not change.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from datetime import date, datetime
from typing import Any

from sqlmodel import Session, col, select

from server.db.queries import TestRow, test_rows, users_by_id
from server.db.session import Database
from server.db.tables import AuditEvent, LabTest, ReferenceSample, ReferenceSoil, User
from server.engine.rounding import reported
from server.quality import control_chart
from server.services import quality_duplicates
from server.services.errors import NotFound

CHARTED_STATUSES = ("submitted", "approved")
CHART_KEYS = ("liquid_limit", "plastic_limit", "plasticity_index", "water_content")
"""Result keys charted by default; a soil's assigned values may add others."""

OUT_OF_CONTROL = "reference-soil-out-of-control"
RUN_RULE = "reference-soil-run-rule"
DUPLICATE_OUTSIDE = "duplicate-outside-precision"


def handed_in_by(s: Session, test_ids: Iterable[int]) -> dict[int, int]:
    """test id -> the user who handed it in (last ``submit``), else who last entered readings."""
    wanted = sorted(set(test_ids))
    if not wanted:
        return {}
    rows = s.exec(
        select(AuditEvent.entity_id, AuditEvent.actor_id, AuditEvent.action)
        .where(
            AuditEvent.entity == "lab_test",
            col(AuditEvent.entity_id).in_(wanted),
            col(AuditEvent.action).in_(("submit", "readings")),
            col(AuditEvent.actor_id).is_not(None),
        )
        .order_by(col(AuditEvent.id))
    ).all()
    submitted: dict[int, int] = {}
    entered: dict[int, int] = {}
    for entity_id, actor_id, action in rows:
        (submitted if action == "submit" else entered)[entity_id] = actor_id or 0
    return {tid: submitted.get(tid) or entered[tid] for tid in wanted if tid in submitted or tid in entered}


def _number(value: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
        return None
    return float(value)


def _when(test: LabTest) -> datetime:
    return test.submitted_at or test.approved_at or test.updated_at


@dataclass
class ChartPoint:
    row: TestRow
    at: datetime
    technician: User | None
    value: float
    judged: control_chart.JudgedPoint


@dataclass
class Chart:
    soil: ReferenceSoil
    method: str
    key: str
    technician: User | None  # the filter, None: everyone
    points: list[ChartPoint]
    technicians: list[User]  # everyone with a point on the laboratory's chart
    assigned: float | None  # the soil's assigned value for this method and key

    @property
    def current(self) -> control_chart.Limits | None:
        """The limits the next result will be judged against (None before enough history)."""
        kept = [p.value for p in self.points if p.judged.zone != "action"]
        return control_chart.limits_of(kept) if len(kept) >= control_chart.MIN_HISTORY else None

    @property
    def violations(self) -> list[tuple[ChartPoint, control_chart.Violation]]:
        return [(p, v) for p in self.points for v in p.judged.violations]


def _reference_rows(s: Session, soil_ids: Sequence[int], method: str) -> list[tuple[int, TestRow]]:
    """(soil id, test row) of the charted tests of these soils by this method, in hand-in order."""
    links = dict(
        s.exec(
            select(ReferenceSample.sample_id, ReferenceSample.reference_soil_id).where(
                col(ReferenceSample.reference_soil_id).in_(list(soil_ids))
            )
        ).all()
    )
    if not links:
        return []
    rows = test_rows(
        s,
        col(LabTest.sample_id).in_(list(links)),
        LabTest.method == method,
        col(LabTest.status).in_(CHARTED_STATUSES),
    )
    # An approved revision whose amendment is handed in too: the amendment is the result now.
    replaced = {r.test.previous_revision_id for r in rows}
    rows = [r for r in rows if r.test.id not in replaced]
    rows.sort(key=lambda r: (_when(r.test), r.test.id or 0))
    return [(links[r.test.sample_id], r) for r in rows]


def _judged_points(
    rows: Sequence[TestRow], key: str, who: dict[int, int], people: dict[int, User]
) -> list[ChartPoint]:
    valued = [(r, v) for r in rows if (v := _number((r.test.results or {}).get(key))) is not None]
    judged = control_chart.judge([v for _, v in valued])
    return [
        ChartPoint(r, _when(r.test), people.get(who.get(r.test.id or 0, 0)), v, j)
        for (r, v), j in zip(valued, judged, strict=True)
    ]


def chart(db: Database, soil_id: int, method: str, key: str, technician_id: int | None = None) -> Chart:
    with db.session() as s:
        soil = s.get(ReferenceSoil, soil_id)
        if soil is None:
            raise NotFound(f"reference soil {soil_id} is not in the register")
        rows = [r for _, r in _reference_rows(s, [soil_id], method)]
        who = handed_in_by(s, [r.test.id or 0 for r in rows])
        people = users_by_id(s, who.values())
    everyone = _judged_points(rows, key, who, people)
    technicians = sorted(
        {p.technician.id: p.technician for p in everyone if p.technician}.values(), key=lambda u: u.full_name
    )
    technician = people.get(technician_id or 0)
    points = everyone
    if technician_id is not None:
        own = [r for r in rows if who.get(r.test.id or 0) == technician_id]
        points = _judged_points(own, key, who, people)
    assigned = _number(((soil.assigned_values or {}).get(method) or {}).get(key))
    return Chart(soil, method, key, technician, points, technicians, assigned)


def chart_choices(db: Database, soil_id: int) -> list[tuple[str, str]]:
    """(method, key) pairs this soil has results or assigned values for, in a stable order."""
    with db.session() as s:
        soil = s.get(ReferenceSoil, soil_id)
        if soil is None:
            raise NotFound(f"reference soil {soil_id} is not in the register")
        samples = s.exec(
            select(ReferenceSample.sample_id).where(ReferenceSample.reference_soil_id == soil_id)
        ).all()
        tests = (
            s.exec(
                select(LabTest.method, LabTest.results).where(
                    col(LabTest.sample_id).in_(list(samples)), col(LabTest.status).in_(CHARTED_STATUSES)
                )
            ).all()
            if samples
            else []
        )
    found: set[tuple[str, str]] = set()
    for method, results in tests:
        found |= {(method, k) for k in CHART_KEYS if _number((results or {}).get(k)) is not None}
    for method, values in (soil.assigned_values or {}).items():
        found |= {(method, k) for k in values}
    return sorted(
        found, key=lambda mk: (mk[0], CHART_KEYS.index(mk[1]) if mk[1] in CHART_KEYS else 99, mk[1])
    )


def _day(at: datetime) -> date:
    return at.date()  # stored and handed back as UTC (server.db.tables.UTCDateTime)


def quality_flags(db: Database, test_id: int) -> list[dict[str, str]]:
    """The quality flags a reviewer sees on a test beyond the engine's: the reference soils' charts
    of its method on the day it was handed in, and its duplicate pair's verdict."""
    with db.session() as s:
        test = s.get(LabTest, test_id)
        if test is None:
            raise NotFound(f"test {test_id} does not exist")
        soil_rows = s.exec(select(ReferenceSoil)).all()
        soils = {x.id or 0: x for x in soil_rows}
        rows = _reference_rows(s, list(soils), test.method) if test.submitted_at else []
    flags: list[dict[str, str]] = []
    if test.submitted_at:
        day = _day(test.submitted_at)
        by_soil: dict[int, list[TestRow]] = {}
        for soil_id, row in rows:
            by_soil.setdefault(soil_id, []).append(row)
        for soil_id, soil_rows_of in sorted(by_soil.items(), key=lambda kv: soils[kv[0]].code):
            assigned = (soils[soil_id].assigned_values or {}).get(test.method) or {}
            keys = [*CHART_KEYS, *(k for k in assigned if k not in CHART_KEYS)]  # as chart_choices
            for key in keys:
                for p in _judged_points(soil_rows_of, key, {}, {}):
                    if _day(p.at) != day:
                        continue
                    for v in p.judged.violations:
                        code = OUT_OF_CONTROL if v.severity == "error" else RUN_RULE
                        flags.append(
                            {
                                "code": code,
                                "severity": v.severity,
                                "message": (
                                    f"reference soil {soils[soil_id].code}, {key.replace('_', ' ')} "
                                    f"{reported(key, p.value)} on {day.isoformat()} "
                                    f"(test {p.row.test.id}): {v.message}"
                                ),
                            }
                        )
    for pair in quality_duplicates.pairs(db, test_id=test_id):
        for c in pair.checks:
            if c.verdict == "outside":
                flags.append(
                    {
                        "code": DUPLICATE_OUTSIDE,
                        "severity": "warning",
                        "message": (
                            f"duplicate tests {pair.first.test.id} and {pair.second.test.id}: "
                            f"{c.key.replace('_', ' ')} differ by {c.difference:.1f}, more than the "
                            f"acceptable range {c.acceptable_range:.1f} ({c.standard})"
                        ),
                    }
                )
    return flags
