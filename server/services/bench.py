"""Use-cases at the bench: save readings as a draft, hand a test in.

Readings are checked by the engine on every save. A value entered wrong is refused and
nothing is stored; a value not entered yet is fine in a draft (the technician is still
typing) but a test is handed in only when the engine accepts every field.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from sqlmodel import Session

from server.db.queries import bump_test
from server.db.session import Database
from server.db.tables import LabTest, User, utcnow
from server.engine import Evaluation, evaluate
from server.services import audit
from server.services.errors import Conflict, Invalid, NotFound
from server.workflow.states import Action, TransitionRefused, move


@dataclass
class Saved:
    test: LabTest
    evaluation: Evaluation


def load_test(session: Session, test_id: int) -> LabTest:
    test = session.get(LabTest, test_id)
    if test is None:
        raise NotFound(f"test {test_id} does not exist")
    return test


def change_status(
    session: Session, actor: User, test: LabTest, action: Action, expected_version: int, **values: Any
) -> str:
    """Apply an allowed move under the optimistic lock; returns the status before it."""
    try:
        step = move(test.status, action, actor.role)
    except TransitionRefused as exc:
        raise Conflict(str(exc)) from exc
    if test.version != expected_version or not bump_test(
        session, test, expected_version, status=step.after.value, **values
    ):
        raise Conflict("this test was changed by someone else meanwhile; reload to see their change")
    return step.before.value


def save_readings(
    db: Database, actor: User, test_id: int, readings: dict[str, Any], expected_version: int
) -> Saved:
    """Store readings as the draft of a test, with the engine's results and flags."""
    with db.transaction() as s:
        test = load_test(s, test_id)
        ev = evaluate(test.method, readings)
        wrong = [e for e in ev.errors if e.kind != "missing"]
        if wrong:
            raise Invalid(wrong)
        before = {"status": test.status, "readings": test.readings}
        change_status(
            s,
            actor,
            test,
            Action.enter,
            expected_version,
            readings=readings,
            results=ev.results,
            flags=[f.to_dict() for f in ev.flags],
        )
        audit.record(
            s,
            actor,
            "lab_test",
            test_id,
            "readings",
            before=before,
            after={"status": test.status, "readings": readings},
        )
    return Saved(test, ev)


def submit(db: Database, actor: User, test_id: int, expected_version: int) -> LabTest:
    """Hand a draft in for review: only when the engine accepts every reading."""
    with db.transaction() as s:
        test = load_test(s, test_id)
        ev = evaluate(test.method, test.readings or {})
        if ev.errors:
            raise Invalid(ev.errors)
        before = change_status(
            s, actor, test, Action.submit, expected_version, submitted_at=utcnow(), return_reason=None
        )
        audit.record(
            s, actor, "lab_test", test_id, "submit", before={"status": before}, after={"status": test.status}
        )
        return test


def preview(method: str, readings: dict[str, Any]) -> Evaluation:
    """What the engine makes of readings typed so far; stores nothing."""
    return evaluate(method, readings)
