"""Use-cases for the laboratory's registers: containers (tins with a known tare), calibrated
equipment, and the laboratory details printed on reports; and the look-ups the bench uses.

Every change is one transaction with its audit event. Records are never deleted: a tin that is
lost or damaged, or an instrument taken out of service, is deactivated, so that readings which
name it still point at a record.

Calibration state follows the engine's rule (server/engine/equipment.py): an instrument is in
calibration up to and including its due date (common practice: a certificate is "valid until").
A bench warning 30 days ahead gives time to book the recalibration (common practice).
"""

from __future__ import annotations

import enum
import re
from collections.abc import Callable
from dataclasses import dataclass
from datetime import UTC, date, datetime
from typing import Any

from sqlmodel import Session, select

from server.db.register_queries import container_by_code, equipment_by_code
from server.db.session import Database
from server.db.tables import Container, Equipment, Laboratory, User, utcnow
from server.engine import FieldError
from server.services import audit, jobs
from server.services.errors import Conflict, Invalid, NotFound, invalid
from server.services.fields import Checks

EQUIPMENT_KINDS: dict[str, str] = {
    "balance": "Balance",
    "oven": "Drying oven",
    "cup-device": "Liquid limit cup device",
    "cone": "Fall cone",
    "vane": "Laboratory vane",
    "load-frame": "Load frame",
    "hydrometer": "Hydrometer",
    "sieve": "Sieve",
    "thermometer": "Thermometer",
    "pycnometer": "Pycnometer",
    "mould": "Compaction mould",
    "rammer": "Compaction rammer",
    "callipers": "Callipers",
    "furnace": "Muffle furnace",
}
"""The kinds of instrument the register keeps, with the name shown for each."""

WARN_DAYS = 30
IN_CALIBRATION, DUE_SOON, PAST_DUE = "in calibration", "due within 30 days", "past due"
STATE_MARK = {IN_CALIBRATION: "✔", DUE_SOON: "⚠", PAST_DUE: "✖"}

MAX_TARE_G = 5000.0  # a dish heavier than 5 kg is a typing or unit slip (common practice)
LAB_NAME_MAX = 200  # the columns of server.db.tables.Laboratory and Equipment
LAB_ADDRESS_MAX = 500
LAB_ACCREDITATION_MAX = 200
EQUIPMENT_DESCRIPTION_MAX = 200
MAX_CAPACITY_G = 1_000_000.0  # 1 t: more than any laboratory balance weighs (common practice)
_CODE = re.compile(r"^[A-Z0-9][A-Z0-9._/-]{0,31}$")


def _code(raw: str, what: str) -> str:
    """A register code as written on the item: upper case, letters, digits and . _ / -."""
    code = raw.strip().upper()
    if not code:
        raise invalid("code", f"a {what} code is required")
    if not _CODE.match(code):
        raise invalid(
            "code", f"{what} code {raw.strip()!r} must be up to 32 letters, digits, '.', '_', '/' or '-'"
        )
    return code


def _tare(tare_g: float) -> float:
    if not tare_g > 0:  # also refuses NaN
        raise invalid("tare_g", f"tare must be more than 0 g, not {tare_g:g} g")
    if tare_g > MAX_TARE_G:
        raise invalid("tare_g", f"tare {tare_g:g} g is above {MAX_TARE_G:g} g; check the units (grams)")
    return float(tare_g)


def _description(description: str) -> str:
    """An instrument's description, refused when longer than its column holds."""
    checks = Checks()
    text = checks.text("description", description, "the description", EQUIPMENT_DESCRIPTION_MAX)
    checks.done()
    return text


def _kind(kind: str) -> str:
    if kind not in EQUIPMENT_KINDS:
        raise invalid("kind", f"kind must be one of {', '.join(EQUIPMENT_KINDS)}")
    return kind


class Keep(enum.Enum):
    """A value an update leaves as it is (where None means "none recorded")."""

    AS_IS = "as is"


def _capacity(kind: str, capacity_g: float | None) -> float | None:
    """A balance's capacity in grams (optional); only a balance has one. The bench copies it into
    the readings, where the engine refuses any mass above it (server/engine/equipment.py)."""
    if capacity_g is None:
        return None
    if kind != "balance":
        raise invalid("capacity_g", "only a balance has a capacity; leave it blank for this kind")
    if not 0 < capacity_g <= MAX_CAPACITY_G:  # also refuses NaN
        raise invalid(
            "capacity_g",
            f"capacity must be more than 0 g and at most {MAX_CAPACITY_G:g} g, not {capacity_g:g} g",
        )
    return float(capacity_g)


def _due(due: date | None) -> date:
    if due is None:
        raise invalid("calibration_due", "a calibration (or check) due date is required")
    return due


def _container_json(c: Container) -> dict[str, Any]:
    return c.model_dump(mode="json")


# --- containers -------------------------------------------------------------------------------


def add_container(
    db: Database, actor: User, code: str, tare_g: float, checked_at: datetime | None = None
) -> Container:
    """Add a tin to the register with its weighed empty mass."""
    errors = container_problems(code, tare_g)
    if errors:
        raise Invalid(errors)
    code, tare = _code(code, "container"), _tare(tare_g)
    with db.transaction() as s:
        if container_by_code(s, code):
            raise Conflict(f"container {code} is already in the register")
        container = Container(code=code, tare_g=tare, checked_at=checked_at or utcnow())
        s.add(container)
        s.flush()
        audit.record(s, actor, "container", container.id or 0, "create", after=_container_json(container))
        return container


def reweigh_container(
    db: Database, actor: User, container_id: int, tare_g: float, reason: str = ""
) -> Container:
    """Record a new tare for a tin (tins are re-weighed from time to time; the old tare is in the
    audit trail, and readings already taken keep the tare they were taken with)."""
    tare = _tare(tare_g)
    with db.transaction() as s:
        container = _get(s, Container, container_id, "container")
        before = _container_json(container)
        container.tare_g, container.checked_at = tare, utcnow()
        s.add(container)
        s.flush()
        audit.record(
            s,
            actor,
            "container",
            container_id,
            "reweigh",
            before=before,
            after=_container_json(container),
            reason=reason.strip() or None,
        )
        return container


def set_container_active(
    db: Database, actor: User, container_id: int, active: bool, reason: str = ""
) -> Container:
    """Take a tin out of use (lost, dented, replaced) or back into use; never deleted."""
    with db.transaction() as s:
        container = _get(s, Container, container_id, "container")
        before = _container_json(container)
        container.active = active
        s.add(container)
        audit.record(
            s,
            actor,
            "container",
            container_id,
            "activate" if active else "deactivate",
            before=before,
            after=_container_json(container),
            reason=reason.strip() or None,
        )
        return container


# --- equipment --------------------------------------------------------------------------------


def add_equipment(
    db: Database,
    actor: User,
    code: str,
    kind: str,
    description: str,
    calibration_due: date | None,
    capacity_g: float | None = None,
) -> Equipment:
    """Add an instrument with the date its calibration (or periodic check) falls due, and for a
    balance its capacity (the heaviest mass it weighs)."""
    errors = equipment_problems(code, kind, calibration_due, capacity_g=capacity_g)
    if errors:
        raise Invalid(errors)
    code = _code(code, "equipment")
    with db.transaction() as s:
        if equipment_by_code(s, code):
            raise Conflict(f"equipment {code} is already in the register")
        item = Equipment(
            code=code,
            kind=kind,
            description=_description(description),
            calibration_due=calibration_due,
            capacity_g=_capacity(kind, capacity_g),
        )
        s.add(item)
        s.flush()
        audit.record(s, actor, "equipment", item.id or 0, "create", after=item.model_dump(mode="json"))
        return item


def update_equipment(
    db: Database,
    actor: User,
    equipment_id: int,
    description: str,
    calibration_due: date | None,
    reason: str = "",
    capacity_g: float | None | Keep = Keep.AS_IS,
) -> Equipment:
    """Change an instrument's description, due date (after a recalibration, say) or, for a
    balance, its capacity (None: none recorded; left as it is unless given)."""
    due = _due(calibration_due)
    with db.transaction() as s:
        item = _get(s, Equipment, equipment_id, "equipment")
        capacity = item.capacity_g if isinstance(capacity_g, Keep) else _capacity(item.kind, capacity_g)
        before = item.model_dump(mode="json")
        item.description, item.calibration_due, item.capacity_g = _description(description), due, capacity
        s.add(item)
        s.flush()
        audit.record(
            s,
            actor,
            "equipment",
            equipment_id,
            "update",
            before=before,
            after=item.model_dump(mode="json"),
            reason=reason.strip() or None,
        )
        return item


def set_equipment_active(
    db: Database, actor: User, equipment_id: int, active: bool, reason: str = ""
) -> Equipment:
    """Take an instrument out of service or back into it; never deleted."""
    with db.transaction() as s:
        item = _get(s, Equipment, equipment_id, "equipment")
        before = item.model_dump(mode="json")
        item.active = active
        s.add(item)
        audit.record(
            s,
            actor,
            "equipment",
            equipment_id,
            "activate" if active else "deactivate",
            before=before,
            after=item.model_dump(mode="json"),
            reason=reason.strip() or None,
        )
        return item


# --- laboratory details -----------------------------------------------------------------------


def set_laboratory(db: Database, actor: User, name: str, address: str, accreditation: str) -> Laboratory:
    """The laboratory's name, address and accreditation as printed on every report."""
    checks = Checks()
    if not name.strip():
        checks.add("name", "the laboratory's name is required (it is printed on every report)")
    name = checks.text("name", name, "the laboratory's name", LAB_NAME_MAX)
    address = checks.text("address", address, "the address", LAB_ADDRESS_MAX)
    accreditation = checks.text("accreditation", accreditation, "the accreditation", LAB_ACCREDITATION_MAX)
    checks.done()
    return jobs.set_laboratory(db, actor, name, address, accreditation)


def laboratory(db: Database) -> Laboratory | None:
    """The laboratory's details, or None before an admin has entered them."""
    with db.session() as s:
        return s.exec(select(Laboratory)).first()


# --- look-ups for the bench -------------------------------------------------------------------


@dataclass(frozen=True)
class CalibrationState:
    state: str  # IN_CALIBRATION, DUE_SOON or PAST_DUE
    days_left: int | None  # days until the due date (negative: days past it); None without a date


def calibration_state(due: date | None, on: date) -> CalibrationState:
    """Whether an instrument may be used on a day: in calibration up to and including its due
    date, with a warning in the last 30 days. An instrument with no due date is treated as past
    due: a calibration that cannot be shown must not be relied on (ISO/IEC 17025:2017 cl. 6.4.13)."""
    if due is None:
        return CalibrationState(PAST_DUE, None)
    days = (due - on).days
    if days < 0:
        return CalibrationState(PAST_DUE, days)
    return CalibrationState(DUE_SOON if days <= WARN_DAYS else IN_CALIBRATION, days)


def today() -> date:
    """The laboratory's calendar day (UTC, like every stored timestamp)."""
    return datetime.now(UTC).date()


def container_lookup(db: Database, code: str) -> dict[str, Any]:
    """What the bench fills in when a tin is picked: ``{"code", "tare_g", "active"}``."""
    with db.session() as s:
        found = container_by_code(s, code)
    if found is None:
        raise NotFound(f"container {code.strip() or '(blank)'} is not in the register")
    return {"code": found.code, "tare_g": found.tare_g, "active": found.active}


def equipment_view(item: Equipment, on: date) -> dict[str, Any]:
    """An instrument as the bench shows it, with the entry its readings carry (``reading``): its
    id and due date, and a balance's capacity, which bounds the masses (server/engine/equipment.py)."""
    state = calibration_state(item.calibration_due, on)
    due = item.calibration_due.isoformat() if item.calibration_due else None
    reading: dict[str, Any] = {"id": item.code, "calibration_due": due}
    if item.capacity_g is not None:
        reading["capacity_g"] = item.capacity_g
    return {
        "code": item.code,
        "kind": item.kind,
        "description": item.description,
        "calibration_due": due,
        "capacity_g": item.capacity_g,
        "state": state.state,
        "days_left": state.days_left,
        "active": item.active,
        "reading": reading,
    }


def equipment_lookup(db: Database, code: str, on: date | None = None) -> dict[str, Any]:
    with db.session() as s:
        found = equipment_by_code(s, code)
    if found is None:
        raise NotFound(f"equipment {code.strip() or '(blank)'} is not in the register")
    return equipment_view(found, on or today())


# --- helpers ----------------------------------------------------------------------------------


def _get(s: Session, table: type[Any], record_id: int, what: str) -> Any:
    found = s.get(table, record_id)
    if found is None:
        raise NotFound(f"{what} {record_id} is not in the register")
    return found


def container_problems(code: str, tare_g: float | None) -> list[FieldError]:
    """Every refusal of a new container at once; ``tare_g`` None: not readable, checked by the caller."""
    checks: list[Callable[[], object]] = [lambda: _code(code, "container")]
    if tare_g is not None:
        checks.append(lambda: _tare(tare_g))
    return _collect(*checks)


def equipment_problems(
    code: str,
    kind: str,
    calibration_due: date | None,
    due_unreadable: bool = False,
    *,
    capacity_g: float | None = None,
) -> list[FieldError]:
    """Every refusal of a new instrument at once; with ``due_unreadable`` the date is the caller's."""
    checks: list[Callable[[], object]] = [lambda: _code(code, "equipment"), lambda: _kind(kind)]
    if not due_unreadable:
        checks.append(lambda: _due(calibration_due))
    if kind in EQUIPMENT_KINDS:
        checks.append(lambda: _capacity(kind, capacity_g))
    return _collect(*checks)


def _collect(*checks: Callable[[], object]) -> list[FieldError]:
    """Run every check and gather their refusals, so a form shows all its problems at once."""
    errors: list[FieldError] = []
    for check in checks:
        try:
            check()
        except Invalid as exc:
            errors.extend(exc.errors)
    return errors
