"""Values a test takes from another test of the same sample when its own field is left blank.

The hydrometer needs the specific gravity of the solids, and the density and compaction methods
a particle density for void ratio, saturation and the air-voids lines. A laboratory measures it
once per sample (``particle-density``, small pycnometer) rather than typing an assumed 2.65 into
every test. So when such a field is blank, the engine is given the value of the sample's
particle-density test; the readings stay as entered (the field stays blank), and the results
name where the value came from (``LINKED``) so a reviewer and the report can say so.

Which test: the sample's current particle-density test that has the value: an approved one
before any other, then the newest. A value from a test not yet approved is used (the bench
shows live results) but flagged. A test that is no longer editable (handed in, approved) keeps
the value it was handed in with: it is re-evaluated from its stored ``linked_inputs``, never
from a particle-density test amended since.

The job's family of standards gives a blank choice its value the same way (``BY_STANDARDS``):
an Atterberg set of a job tested to BS 1377 / ISO 17892 is described in the BS 5930 plasticity
terms unless its sheet says otherwise. A bench save (the hottest path there is) does not look
the family up (``by_standards=False``): the page's live results do, and the hand-in stores them.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, cast

from sqlalchemy import Connection, Table, bindparam, case
from sqlalchemy import select as core_select
from sqlmodel import Session

from server.db.tables import Job, LabTest, Sample
from server.engine import Evaluation, evaluate
from server.engine.contract import Flag
from server.services.readings_paths import value_at, with_changes
from server.workflow.states import Status

LINKED = "linked_inputs"
"""The results key: {readings path: {"value", "test_id", "method", "status"}} for a value from
another test, {readings path: {"value", "standards"}} for one from the job's family."""


@dataclass(frozen=True)
class Link:
    """Where a value goes in a method's readings (``path``, when blank and its parent object is
    there), and which result of which method of the same sample gives it."""

    path: str
    method: str
    key: str


_SOLIDS = ("particle-density", "specific_gravity")
_DENSITY = ("particle-density", "particle_density_mg_m3")
LINKS: dict[str, tuple[Link, ...]] = {
    "hydrometer": (Link("specific_gravity", *_SOLIDS),),
    "grading": (Link("hydrometer.specific_gravity", *_SOLIDS),),
    "density": (Link("particle_density_mg_m3", *_DENSITY),),
    "compaction": (Link("particle_density_mg_m3", *_DENSITY),),
}

BY_STANDARDS: dict[str, dict[str, dict[str, Any]]] = {
    "atterberg": {"bs-iso": {"plasticity_terms": "bs5930"}},
}
"""method -> the job's family of standards -> readings path -> the value a blank field takes."""

_EDITABLE = frozenset({Status.requested, Status.draft, Status.returned})
_LAB_TEST = cast(Table, LabTest.__table__)  # type: ignore[attr-defined]
_SAMPLE = cast(Table, Sample.__table__)  # type: ignore[attr-defined]
_JOB = cast(Table, Job.__table__)  # type: ignore[attr-defined]
_SOURCES = (
    core_select(_LAB_TEST.c.id, _LAB_TEST.c.method, _LAB_TEST.c.status, _LAB_TEST.c.results)
    .where(
        _LAB_TEST.c.sample_id == bindparam("sample_id"),
        _LAB_TEST.c.method.in_(bindparam("methods", expanding=True)),
        _LAB_TEST.c.status != Status.superseded.value,
    )
    .order_by(case((_LAB_TEST.c.status == Status.approved.value, 0), else_=1), _LAB_TEST.c.id.desc())
)


_STANDARDS = (core_select(_JOB.c.standards).join_from(_SAMPLE, _JOB, _SAMPLE.c.job_id == _JOB.c.id)).where(
    _SAMPLE.c.id == bindparam("sample_id")
)


def _by_standards(db: Connection | Session, test: LabTest) -> dict[str, dict[str, Any]]:
    """The blank-field values the test's job's family of standards gives (one query)."""
    family = db.execute(_STANDARDS, {"sample_id": test.sample_id}).scalar()
    values = BY_STANDARDS[test.method].get(str(family), {})
    return {path: {"value": value, "standards": family} for path, value in values.items()}


def _fresh(db: Connection | Session, sample_id: int, links: tuple[Link, ...]) -> dict[str, dict[str, Any]]:
    """Each link's value from the sample's tests now (one query whatever the links)."""
    rows = db.execute(_SOURCES, {"sample_id": sample_id, "methods": sorted({k.method for k in links})})
    found: dict[str, dict[str, Any]] = {}
    for row in rows:
        for link in links:
            value = (row.results or {}).get(link.key)
            if link.path not in found and row.method == link.method and isinstance(value, int | float):
                found[link.path] = {
                    "value": value,
                    "test_id": row.id,
                    "method": row.method,
                    "status": row.status,
                }
    return found


def linked(method: str) -> bool:
    """Whether a test of this method may take values from its sample's tests or job."""
    return method in LINKS or method in BY_STANDARDS


def _fits(readings: Mapping[str, Any], path: str) -> bool:
    """A blank field whose parent object is there (a grading without its hydrometer part takes
    no specific gravity: that would ask for the rest of a hydrometer analysis)."""
    parent = path.rpartition(".")[0]
    return value_at(readings, path) in (None, "") and (
        not parent or isinstance(value_at(readings, parent), Mapping)
    )


def evaluate_test(
    db: Connection | Session,
    test: LabTest,
    readings: Mapping[str, Any] | None = None,
    *,
    by_standards: bool = True,
) -> Evaluation:
    """The engine's evaluation of a test's readings (its stored ones unless given), with the
    linked values of its sample and job filled into the fields left blank (module docstring)."""
    readings = dict((test.readings or {}) if readings is None else readings)
    links = LINKS.get(test.method, ())
    from_standards = by_standards and test.method in BY_STANDARDS
    if not links and not from_standards:
        return evaluate(test.method, readings)
    if test.status not in _EDITABLE:
        available = dict((test.results or {}).get(LINKED) or {})
    else:
        available = _fresh(db, test.sample_id, links) if links else {}
        if from_standards:
            available.update(_by_standards(db, test))
    used = {path: value for path, value in available.items() if _fits(readings, path)}
    if not used:
        return evaluate(test.method, readings)
    ev = evaluate(test.method, with_changes(readings, [(p, u["value"]) for p, u in used.items()]))
    ev.results[LINKED] = used
    for path, source in used.items():
        if "test_id" in source and source["status"] != Status.approved:
            ev.flags.append(
                Flag(
                    "linked-value-not-approved",
                    "warning",
                    f"{path} {source['value']} is taken from {source['method']} test {source['test_id']}, "
                    f"which is not approved yet ({source['status']})",
                )
            )
    return ev
