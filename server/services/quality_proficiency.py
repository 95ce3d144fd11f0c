"""Proficiency rounds: the laboratory's result in an interlaboratory comparison, with its z score
and verdict (``server.quality.proficiency``; ISO/IEC 17025:2017 cl. 7.7.2 a).

The result is typed as reported to the scheme, or copied from the approved test it came from
(only a reviewed result goes out to a scheme, common practice); a copied result is kept as
copied, so the entry still says what was reported when the test is amended later. Entries are
changed with an audit event and never deleted.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from typing import Any

import sqlalchemy as sa
from sqlmodel import Session, col, select

from server.db.queries import users_by_id
from server.db.session import Database
from server.db.tables import LabTest, ProficiencyRound, User
from server.engine import METHODS
from server.quality import proficiency
from server.services import audit
from server.services.errors import NotFound
from server.services.fields import Checks, Day, Number, refuse
from server.services.quality_references import RESULT_KEY

VALUE_LIMIT = 1e6  # no index result is near a million (common practice): a typing slip
SIGMA_PT_MIN = 1e-6  # below any scheme's σpt in a soil result's units; keeps z finite (common practice)


@dataclass(frozen=True)
class RoundForm:
    """A round as typed (text from a page, numbers from elsewhere)."""

    scheme: str
    round_code: str
    method: str
    result_key: str
    assigned_value: Number
    sigma_pt: Number
    round_date: Day
    result: Number = None
    test_id: int | None = None


def _checked(s: Session, form: RoundForm) -> dict[str, Any]:
    checks = Checks()
    values: dict[str, Any] = {
        "scheme": checks.text("scheme", form.scheme, "the scheme", 100, required=True),
        "round_code": checks.code("round_code", form.round_code, "the round", 32),
        "method": checks.choice("method", form.method, "the method", {m: m for m in sorted(METHODS)}),
        "result_key": checks.text("result_key", form.result_key, "the result key", 40, required=True),
        "assigned_value": checks.number(
            "assigned_value",
            form.assigned_value,
            "the assigned value",
            "the result's unit",
            -VALUE_LIMIT,
            VALUE_LIMIT,
            required=True,
        ),
        "sigma_pt": checks.number(
            "sigma_pt", form.sigma_pt, "σpt", "the result's unit", 0.0, VALUE_LIMIT, required=True
        ),
        "round_date": checks.day("round_date", form.round_date, "the round date", required=True),
    }
    if values["result_key"] and not RESULT_KEY.match(values["result_key"]):
        checks.add("result_key", f"{values['result_key']!r} is not a result key (such as liquid_limit)")
    if values["sigma_pt"] is not None and values["sigma_pt"] < SIGMA_PT_MIN:
        checks.add("sigma_pt", f"σpt must be at least {SIGMA_PT_MIN:g}: a scheme's standard deviation")
    typed = checks.number(
        "result", form.result, "the laboratory's result", "the result's unit", -VALUE_LIMIT, VALUE_LIMIT
    )
    if form.test_id is None and typed is None and not checks.errors_for("result"):
        checks.add("result", "type the laboratory's result, or name the test it came from")
    if form.test_id is not None and typed is not None:
        checks.add("result", "give the result or the test it came from, not both")
    values["result"], values["test_id"] = typed, form.test_id
    if form.test_id is not None and not checks.errors:
        test = s.get(LabTest, form.test_id)
        if test is None:
            checks.add("test_id", f"test {form.test_id} does not exist")
        elif test.status != "approved":
            checks.add(
                "test_id", f"test {form.test_id} is {test.status}: only an approved result is reported"
            )
        elif test.method != values["method"]:
            checks.add("test_id", f"test {form.test_id} is {test.method}, not {values['method']}")
        else:
            found = (test.results or {}).get(values["result_key"])
            if isinstance(found, bool) or not isinstance(found, int | float):
                checks.add("test_id", f"test {form.test_id} has no {values['result_key']} result")
            else:
                values["result"] = float(found)
    checks.done()
    return values


def _taken(s: Session, values: dict[str, Any], other_than: int | None = None) -> bool:
    stmt = select(ProficiencyRound.id).where(
        ProficiencyRound.scheme == values["scheme"],
        ProficiencyRound.round_code == values["round_code"],
        ProficiencyRound.method == values["method"],
        ProficiencyRound.result_key == values["result_key"],
    )
    return any(found != other_than for found in s.exec(stmt).all())


def _json(entry: ProficiencyRound) -> dict[str, Any]:
    return entry.model_dump(mode="json", exclude={"entered_at"})


_TAKEN = "this scheme's round already has an entry for this method and result key"


def add_round(db: Database, actor: User, form: RoundForm) -> ProficiencyRound:
    with db.transaction() as s:
        values = _checked(s, form)
        if _taken(s, values):
            refuse("round_code", _TAKEN)
        entry = ProficiencyRound(**values, entered_by_id=actor.id or 0)
        s.add(entry)
        s.flush()
        audit.record(s, actor, "proficiency_round", entry.id or 0, "create", after=_json(entry))
        return entry


def update_round(
    db: Database, actor: User, round_id: int, form: RoundForm, reason: str = ""
) -> ProficiencyRound:
    with db.transaction() as s:
        entry = s.get(ProficiencyRound, round_id)
        if entry is None:
            raise NotFound(f"proficiency round entry {round_id} does not exist")
        values = _checked(s, form)
        if _taken(s, values, other_than=round_id):
            refuse("round_code", _TAKEN)
        before = _json(entry)
        for name, value in values.items():
            setattr(entry, name, value)
        s.add(entry)
        s.flush()
        audit.record(
            s,
            actor,
            "proficiency_round",
            round_id,
            "update",
            before=before,
            after=_json(entry),
            reason=reason.strip() or None,
        )
        return entry


@dataclass
class RoundView:
    entry: ProficiencyRound
    z: float
    verdict: proficiency.Verdict
    entered_by: User | None


def rounds(db: Database) -> list[RoundView]:
    """Every entry, newest round first, with its z and verdict."""
    with db.session() as s:
        entries = s.exec(
            select(ProficiencyRound).order_by(
                sa.desc(col(ProficiencyRound.round_date)),
                col(ProficiencyRound.scheme),
                col(ProficiencyRound.id),
            )
        ).all()
        people = users_by_id(s, [e.entered_by_id for e in entries])
    out = []
    for e in entries:
        z = proficiency.z_score(e.result, e.assigned_value, e.sigma_pt)
        out.append(RoundView(e, z, proficiency.verdict(z), people.get(e.entered_by_id)))
    return out


def round_entry(db: Database, round_id: int) -> ProficiencyRound:
    with db.session() as s:
        entry = s.get(ProficiencyRound, round_id)
        if entry is None:
            raise NotFound(f"proficiency round entry {round_id} does not exist")
        return entry


def as_form(entry: ProficiencyRound) -> dict[str, str]:
    """An entry as the page's form shows it for editing."""
    return {
        "scheme": entry.scheme,
        "round_code": entry.round_code,
        "method": entry.method,
        "result_key": entry.result_key,
        "assigned_value": f"{entry.assigned_value:g}",
        "sigma_pt": f"{entry.sigma_pt:g}",
        "round_date": entry.round_date.isoformat() if isinstance(entry.round_date, date) else "",
        "result": "" if entry.test_id else f"{entry.result:g}",
        "test_id": str(entry.test_id or ""),
    }
