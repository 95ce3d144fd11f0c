"""Use-cases at the bench: save readings as a draft, field by field or whole, and hand a test in.

One mechanism stores a draft: ``save_changes``. A change sets one field (a dotted path into the
readings, see ``readings_paths``) or, with the path ``""``, the whole readings. Two guards keep
two people from overwriting each other silently, and a save may use either or both:

- the field guard: a change carries the value its author last saw at that path (``base``);
  when the stored value is neither that nor the new value, somebody else changed the field
  meanwhile, and the save is refused with both values (``FieldConflicts``, HTTP 409). Two
  tablets typing into different fields of one test never disturb each other.
- the version guard: the whole test's ``version`` the author last saw (``expected_version``),
  for a whole-sheet save or the API, where no per-field base is known.

Readings are checked by the engine on every save. A value entered wrong is refused and
nothing is stored; a value not entered yet is fine in a draft (the technician is still
typing), but a test is handed in only when the engine accepts every field. Each stored change
bumps the version and writes one audit event whose ``after.readings`` are the stored readings.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

from sqlmodel import Session

from server.db.queries import bump_test
from server.db.session import Database
from server.db.tables import LabTest, User, utcnow
from server.engine import Evaluation, FieldError, evaluate
from server.services import audit
from server.services.errors import Conflict, Invalid, NotFound
from server.services.readings_paths import PathError, same, value_at, with_changes
from server.workflow.states import Action, Move, TransitionRefused, move


class _Unchecked:
    def __repr__(self) -> str:
        return "UNCHECKED"


UNCHECKED: Any = _Unchecked()


@dataclass(frozen=True)
class Change:
    """Set the field at ``path`` to ``value`` (None clears it); ``""`` is the whole readings.

    ``base`` is the value its author last saw there; leave it UNCHECKED when the save is
    guarded by the test's version instead.
    """

    path: str
    value: Any
    base: Any = UNCHECKED


@dataclass(frozen=True)
class FieldConflict:
    """A field somebody else changed after the author last saw it: both values, nothing lost."""

    path: str
    theirs: Any  # stored now
    yours: Any  # what the refused change wanted to store


class FieldConflicts(Conflict):
    """Fields changed meanwhile by another person or device; nothing of the save was stored."""

    def __init__(self, conflicts: list[FieldConflict]):
        self.conflicts = conflicts
        n = len(conflicts)
        super().__init__(
            f"another device changed {'this field' if n == 1 else f'{n} of these fields'} meanwhile; "
            "both values are kept: choose which to keep"
        )


@dataclass
class Saved:
    test: LabTest
    evaluation: Evaluation
    changed: bool = True  # False when the readings were already so (nothing stored, no event)
    paths: list[str] = field(default_factory=list)


def load_test(session: Session, test_id: int, *, for_update: bool = False) -> LabTest:
    """The test, locked against concurrent writers when ``for_update`` (PostgreSQL row lock;
    SQLite's ``BEGIN IMMEDIATE`` already serialises writers)."""
    test = session.get(LabTest, test_id, with_for_update=for_update or None)
    if test is None:
        raise NotFound(f"test {test_id} does not exist")
    return test


def change_status(
    session: Session, actor: User, test: LabTest, action: Action, expected_version: int, **values: Any
) -> str:
    """Apply an allowed move under the optimistic lock; returns the status before it."""
    step = _allowed(test, action, actor)
    if test.version != expected_version or not bump_test(
        session, test, expected_version, status=step.after.value, **values
    ):
        raise Conflict("this test was changed by someone else meanwhile; reload to see their change")
    return step.before.value


def _allowed(test: LabTest, action: Action, actor: User) -> Move:
    try:
        return move(test.status, action, actor.role)
    except TransitionRefused as exc:
        raise Conflict(str(exc)) from exc


def save_changes(
    db: Database,
    actor: User,
    test_id: int,
    changes: Sequence[Change],
    expected_version: int | None = None,
) -> Saved:
    """Store changes to a test's draft readings in one transaction (see the module docstring).

    Refused with ``FieldConflicts`` when a field's ``base`` is stale, ``Conflict`` when the
    version is stale or the test may not be edited, ``Invalid`` when the readings that would
    result hold a wrong value (anywhere: a change may make another field wrong, such as a wet
    mass below the dry mass already stored). Nothing is stored on any refusal.
    """
    with db.transaction() as s:
        test = load_test(s, test_id, for_update=True)
        _allowed(test, Action.enter, actor)
        if expected_version is not None and test.version != expected_version:
            raise Conflict("this test was changed by someone else meanwhile; reload to see their change")
        stored = test.readings or {}
        try:
            conflicts = [
                FieldConflict(c.path, theirs, c.value)
                for c in changes
                if c.base is not UNCHECKED
                and not same(theirs := value_at(stored, c.path), c.base)
                and not same(theirs, c.value)
            ]
            readings = with_changes(stored, [(c.path, c.value) for c in changes])
        except PathError as exc:
            raise Invalid([FieldError(("readings",), str(exc))]) from exc
        if conflicts:
            raise FieldConflicts(conflicts)
        ev = evaluate(test.method, readings)
        wrong = [e for e in ev.errors if e.kind != "missing"]
        if wrong:
            raise Invalid(wrong)
        paths = [c.path for c in changes if not same(value_at(stored, c.path), value_at(readings, c.path))]
        if readings == stored:
            return Saved(test, ev, changed=False)
        before = {"status": test.status, "readings": test.readings}
        change_status(
            s,
            actor,
            test,
            Action.enter,
            test.version,
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
            after={"status": test.status, "readings": readings, "fields": paths},
        )
    return Saved(test, ev, changed=True, paths=paths)


def save_readings(
    db: Database, actor: User, test_id: int, readings: dict[str, Any], expected_version: int
) -> Saved:
    """Store the whole readings as the draft of a test (API, import, demo), under the version guard."""
    return save_changes(db, actor, test_id, [Change("", readings)], expected_version)


def submit(db: Database, actor: User, test_id: int, expected_version: int) -> LabTest:
    """Hand the stored draft in for review: only when the engine accepts every reading."""
    with db.transaction() as s:
        test = load_test(s, test_id, for_update=True)
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


def draft_with(test: LabTest, changes: Sequence[Change]) -> dict[str, Any]:
    """The test's stored readings with these changes applied, as a preview would see them."""
    return with_changes(test.readings, [(c.path, c.value) for c in changes])


def preview(method: str, readings: dict[str, Any]) -> Evaluation:
    """What the engine makes of readings typed so far; stores nothing."""
    return evaluate(method, readings)
