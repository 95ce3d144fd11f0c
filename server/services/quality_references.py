"""The reference soil register, and which samples are portions of a reference soil.

A reference soil is a homogenised stock the laboratory tests again and again (ISO/IEC 17025:2017
cl. 7.7.1 b, "use of reference materials or quality control materials"); each portion is booked
in as an ordinary sample of an internal job and linked here, so its tests are the points of the
soil's control charts. Every change is one transaction with its audit event; nothing is deleted
(a used-up soil is deactivated, a wrongly linked sample is unlinked, both recorded).
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from typing import Any

from sqlmodel import Session, col, select

from server.db.queries import same_name
from server.db.session import Database
from server.db.tables import Job, ReferenceSample, ReferenceSoil, Sample, User
from server.engine import METHODS
from server.services import audit
from server.services.errors import Conflict, NotFound
from server.services.fields import Checks, refuse
from server.services.review import required_reason

CODE_MAX, NAME_MAX, DESCRIPTION_MAX = 32, 200, 1000  # the columns of server.db.tables.ReferenceSoil
RESULT_KEY = re.compile(r"^[a-z][a-z0-9_]{0,39}$")  # DESIGN.md section 3 result keys
ASSIGNED_LIMIT = 1e6  # no index result is near a million (common practice): a typing slip


def assigned_problems(checks: Checks, assigned: Mapping[str, Any]) -> dict[str, dict[str, float]]:
    """Assigned values as ``{method id: {result key: number}}``, every bad entry refused on the
    ``assigned_values`` field at once."""
    clean: dict[str, dict[str, float]] = {}
    for method, values in assigned.items():
        if method not in METHODS:
            checks.add("assigned_values", f"{method!r} is not a method id (such as atterberg)")
            continue
        if not isinstance(values, Mapping):
            checks.add("assigned_values", f"the values of {method} must be result keys with numbers")
            continue
        for key, value in values.items():
            if not RESULT_KEY.match(str(key)):
                checks.add("assigned_values", f"{key!r} is not a result key (such as liquid_limit)")
            elif (
                isinstance(value, bool)
                or not isinstance(value, int | float)
                or not math.isfinite(value)
                or abs(value) > ASSIGNED_LIMIT
            ):
                checks.add("assigned_values", f"{method} {key}: the assigned value must be a number")
            else:
                clean.setdefault(method, {})[str(key)] = float(value)
    return clean


def _checked(code: str, name: str, description: str, assigned: Mapping[str, Any]) -> tuple[Any, ...]:
    checks = Checks()
    code = checks.code("code", code, "the code", CODE_MAX).upper()
    name = checks.text("name", name, "the name", NAME_MAX, required=True)
    description = checks.text("description", description, "the description", DESCRIPTION_MAX)
    clean = assigned_problems(checks, assigned)
    checks.done()
    return code, name, description, clean


def _json(soil: ReferenceSoil) -> dict[str, Any]:
    return soil.model_dump(mode="json", exclude={"created_at"})


def _soil(s: Session, soil_id: int) -> ReferenceSoil:
    found = s.get(ReferenceSoil, soil_id)
    if found is None:
        raise NotFound(f"reference soil {soil_id} is not in the register")
    return found


def _code_taken(s: Session, code: str, other_than: int | None = None) -> bool:
    stmt = select(ReferenceSoil.id).where(ReferenceSoil.code == code)
    return any(found != other_than for found in s.exec(stmt).all())


def add_soil(
    db: Database,
    actor: User,
    code: str,
    name: str,
    description: str = "",
    assigned: Mapping[str, Any] | None = None,
) -> ReferenceSoil:
    code, name, description, clean = _checked(code, name, description, assigned or {})
    with db.transaction() as s:
        if _code_taken(s, code):
            refuse("code", f"reference soil {code} is already in the register")
        soil = ReferenceSoil(code=code, name=name, description=description, assigned_values=clean)
        s.add(soil)
        s.flush()
        audit.record(s, actor, "reference_soil", soil.id or 0, "create", after=_json(soil))
        return soil


def update_soil(
    db: Database,
    actor: User,
    soil_id: int,
    code: str,
    name: str,
    description: str,
    assigned: Mapping[str, Any],
    active: bool,
) -> ReferenceSoil:
    """Change a soil's entry; its code may change (the tests point at it by id), never to one in use."""
    code, name, description, clean = _checked(code, name, description, assigned)
    with db.transaction() as s:
        soil = _soil(s, soil_id)
        if _code_taken(s, code, other_than=soil_id):
            refuse("code", f"reference soil {code} is already in the register")
        before = _json(soil)
        soil.code, soil.name, soil.description = code, name, description
        soil.assigned_values, soil.active = clean, active
        s.add(soil)
        s.flush()
        after = _json(soil)
        if after != before:
            audit.record(s, actor, "reference_soil", soil_id, "update", before=before, after=after)
        return soil


def soils(db: Database, *, active_only: bool = False) -> list[ReferenceSoil]:
    with db.session() as s:
        stmt = select(ReferenceSoil).order_by(col(ReferenceSoil.code))
        if active_only:
            stmt = stmt.where(col(ReferenceSoil.active).is_(True))
        return list(s.exec(stmt).all())


def soil(db: Database, soil_id: int) -> ReferenceSoil:
    with db.session() as s:
        return _soil(s, soil_id)


def link_sample(db: Database, actor: User, sample_id: int, soil_id: int) -> ReferenceSample:
    """Record that a sample is a portion of a reference soil (its tests join the soil's charts)."""
    with db.transaction() as s:
        sample = s.get(Sample, sample_id)
        if sample is None:
            refuse("sample_id", f"sample {sample_id} does not exist")
        found = s.get(ReferenceSoil, soil_id)
        if found is None:
            refuse("reference_soil_id", f"reference soil {soil_id} is not in the register")
        if not found.active:
            refuse("reference_soil_id", f"reference soil {found.code} is no longer in use")
        if s.get(ReferenceSample, sample_id) is not None:
            raise Conflict(f"sample {sample.code} is already a portion of a reference soil")
        link = ReferenceSample(sample_id=sample_id, reference_soil_id=soil_id, linked_by_id=actor.id or 0)
        s.add(link)
        s.flush()
        after = {"sample_id": sample_id, "reference_soil_id": soil_id, "reference_soil": found.code}
        audit.record(s, actor, "reference_sample", sample_id, "link", after=after)
        return link


def unlink_sample(db: Database, actor: User, sample_id: int, reason: str) -> None:
    """A sample wrongly linked: the link goes, the audit event keeps what it was and why."""
    why = required_reason(reason, "unlink a sample from its reference soil")
    with db.transaction() as s:
        link = s.get(ReferenceSample, sample_id)
        if link is None:
            raise NotFound(f"sample {sample_id} is not linked to a reference soil")
        before = {"sample_id": sample_id, "reference_soil_id": link.reference_soil_id}
        s.delete(link)
        audit.record(s, actor, "reference_sample", sample_id, "unlink", before=before, reason=why)


def find_sample(db: Database, job_code: str, sample_code: str) -> int:
    """The id of a sample named as a person reads it off the label: job number and sample code,
    whatever their case (typed from a label, not copied)."""
    checks = Checks()
    job = checks.code("job_code", job_code, "the job number")
    code = checks.code("sample_code", sample_code, "the sample code")
    checks.done()
    with db.session() as s:
        found = s.exec(
            select(Sample.id)
            .join(Job, col(Job.id) == Sample.job_id)
            .where(same_name(Job.code, job), same_name(Sample.code, code))
        ).first()
    if found is None:
        refuse("sample_code", f"job {job} has no sample {code}")
    return found


def portions(db: Database, soil_id: int) -> list[Sample]:
    with db.session() as s:
        stmt = (
            select(Sample)
            .join(ReferenceSample, col(ReferenceSample.sample_id) == Sample.id)
            .where(ReferenceSample.reference_soil_id == soil_id)
            .order_by(col(Sample.id))
        )
        return list(s.exec(stmt).all())
