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

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from sqlalchemy import Connection
from sqlmodel import Session

from server.db.queries import bump_test, test_and_session_for_change, test_for_change
from server.db.session import Database
from server.db.tables import LabTest, User, UserSession, utcnow
from server.engine import Evaluation, FieldError, evaluate
from server.services import audit, offline, readings_shape
from server.services.errors import Conflict, Invalid, NotFound
from server.services.linked_inputs import evaluate_test
from server.services.linked_inputs import linked as linked_to_others
from server.services.readings_paths import PathError, same, value_at, with_changes
from server.services.sessions import ByCookie, LookUpFirst
from server.workflow.states import Action, Move, TransitionRefused, move


class _Unchecked:
    def __repr__(self) -> str:
        return "UNCHECKED"


UNCHECKED: Any = _Unchecked()


@dataclass(frozen=True)
class Change:
    """Set the field at ``path`` to ``value`` (None clears it); ``""`` is the whole readings.

    ``base`` is the value its author last saw there; leave it UNCHECKED when the save is
    guarded by the test's version instead. ``typed_at`` is the typing stamp of a tablet that
    kept the change while offline (its own clock; see ``offline.typing_times``).
    """

    path: str
    value: Any
    base: Any = UNCHECKED
    typed_at: datetime | None = None


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
    signed_in: tuple[User, UserSession] | None = None  # the session read with the test (``ByCookie``)


def load_test(session: Session, test_id: int, *, for_update: bool = False) -> LabTest:
    """The test, locked against concurrent writers when ``for_update`` (PostgreSQL row lock;
    SQLite's ``BEGIN IMMEDIATE`` already serialises writers)."""
    test = session.get(LabTest, test_id, with_for_update=for_update or None)
    if test is None:
        raise NotFound(f"test {test_id} does not exist")
    return test


def change_status(
    session: Session | Connection,
    actor: User,
    test: LabTest,
    action: Action,
    expected_version: int,
    **values: Any,
) -> str:
    """Apply an allowed move under the optimistic lock; returns the status before it. Its audit
    event follows in the same transaction, so on PostgreSQL the UPDATE also takes the chain's lock
    and reads its head (one round trip less for the event, on every field the bench saves)."""
    step = _allowed(test, action, actor)
    conn = session.connection() if isinstance(session, Session) else session
    head = audit.locked_head_column(conn)
    bumped = test.version == expected_version and bump_test(
        session, test, expected_version, also=head, status=step.after.value, **values
    )
    if not bumped:
        raise Conflict("this test was changed by someone else meanwhile; reload to see their change")
    if head is not None:
        audit.remember_head(conn, bumped.also)
    return step.before.value


def _allowed(test: LabTest, action: Action, actor: User) -> Move:
    try:
        return move(test.status, action, actor.role)
    except TransitionRefused as exc:
        raise Conflict(str(exc)) from exc


def save_changes(
    db: Database,
    actor: User | ByCookie,
    test_id: int,
    changes: Sequence[Change] | Callable[[str], Sequence[Change]],
    expected_version: int | None = None,
    *,
    typed_by: int | None = None,
    sent_at: datetime | None = None,
) -> Saved:
    """Store changes to a test's draft readings in one transaction (see the module docstring).

    ``changes`` may be a function of the test's method, called once the test is read: the bench
    page turns typed text into values by the method's sheet, and so needs no read of its own
    before the save. Whatever it raises refuses the save, with nothing stored.

    Refused with ``FieldConflicts`` when a field's ``base`` is stale, ``Conflict`` when the
    version is stale or the test may not be edited, ``Invalid`` when the readings that would
    result hold a wrong value (anywhere: a change may make another field wrong, such as a wet
    mass below the dry mass already stored). Nothing is stored on any refusal.

    Entries a tablet kept offline name their typist (``typed_by``, a user id) and carry typing
    stamps (``Change.typed_at``, and the batch's ``sent_at``): they are refused with
    ``offline.OtherTypist`` unless the typist is ``actor``, and the event says when they were
    typed when that was noticeably before they arrived (``offline`` module docstring).

    It runs on every field typed at the bench, so it is Core statements on a bare connection
    (``Database.write``): read and lock the test, update it under its version, add the event.
    ``actor`` may be the person a session cookie names, not yet read (``ByCookie``): they are
    read with the test's lock, and ``LookUpFirst`` is raised, nothing stored, unless theirs is
    the usual session (or when there is no such test: whether that is a 404 or a sign-in is for
    the ordinary look-up to say).
    """
    signed_in = None
    with db.write() as conn:
        if isinstance(actor, ByCookie):
            test, found = test_and_session_for_change(conn, test_id, actor.token_sha256)
            if test is None:
                raise LookUpFirst()
            signed_in = actor.person(found)
            actor = signed_in[0]
        else:
            test = test_for_change(conn, test_id)
        if test is None:
            raise NotFound(f"test {test_id} does not exist")
        if callable(changes):
            changes = changes(test.method)
        if typed_by is not None and typed_by != actor.id:  # the refusal names the typist: a read
            with Session(bind=conn) as s:
                offline.check_typist(s, actor, typed_by)
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
        ev = evaluate_test(conn, test, readings, by_standards=False)
        # Readings sent whole (the API, an import) must be of the method's shape as sent (before
        # blanks are tidied away); a field saved from the bench is one of its sheet's, which are.
        shape = [e for c in changes if c.path == "" for e in readings_shape.refusals(test.method, c.value)]
        wrong = readings_shape.together([e for e in ev.errors if e.kind != "missing"], shape)
        if wrong:
            raise Invalid(wrong)
        paths = [c.path for c in changes if not same(value_at(stored, c.path), value_at(readings, c.path))]
        if readings == stored:
            return Saved(test, ev, changed=False, signed_in=signed_in)
        before = {"status": test.status, "readings": test.readings}
        typing = offline.typing_times(
            {c.path: c.typed_at for c in changes if c.typed_at is not None and c.path in paths},
            sent_at=sent_at,
            arrival=utcnow(),
            not_before=test.created_at,
        )
        change_status(
            conn,
            actor,
            test,
            Action.enter,
            test.version,
            readings=readings,
            results=ev.results,
            flags=[f.to_dict() for f in ev.flags],
        )
        audit.record(
            conn,
            actor,
            "lab_test",
            test_id,
            "readings",
            before=before,
            after={"status": test.status, "readings": readings, "fields": paths, **typing.after()},
            typed_at=typing.at,
        )
    return Saved(test, ev, changed=True, paths=paths, signed_in=signed_in)


def save_readings(
    db: Database, actor: User, test_id: int, readings: dict[str, Any], expected_version: int
) -> Saved:
    """Store the whole readings as the draft of a test (API, import, demo), under the version guard."""
    return save_changes(db, actor, test_id, [Change("", readings)], expected_version)


def error_flag_codes(ev: Evaluation) -> list[str]:
    """The codes of an evaluation's error-severity flags, each once, in the engine's order: the
    remarks a technician must explain to hand the test in (one reason covers every flag of a code)."""
    return list(dict.fromkeys(f.code for f in ev.flags if f.severity == "error"))


def flag_reasons(ev: Evaluation, reasons: Mapping[str, str] | None) -> dict[str, str]:
    """The reason given for each error flag that stands, checked; every missing or empty one is
    refused at its field (``("reasons", code)``). Reasons for flags that do not stand are dropped.

    The words must say something (``review.required_reason``: at least 10 characters of real
    words): the reviewer reads them beside the flag, and the record keeps them (ISO/IEC
    17025:2017 cl. 7.5.1, the record of a result includes what was noticed about it).
    """
    from server.services.review import required_reason  # review imports this module

    given = reasons or {}
    kept: dict[str, str] = {}
    errors: list[FieldError] = []
    for code in error_flag_codes(ev):
        try:
            kept[code] = required_reason(
                given.get(code) or "", "hand the test in with this error remark standing"
            )
        except Invalid as exc:
            errors += [FieldError(("reasons", code), f"error remark {code}: {e.message}") for e in exc.errors]
    if errors:
        raise Invalid(errors)
    return kept


def submit(
    db: Database,
    actor: User,
    test_id: int,
    expected_version: int,
    reasons: Mapping[str, str] | None = None,
) -> LabTest:
    """Hand the stored draft in for review: only when the engine accepts every reading, and with
    a reason (``reasons``: flag code -> words) for every error-severity flag that stands.

    An error flag (equipment past its calibration date, a water content above 1000 %) does not
    refuse a reading, since the readings may be right (a peat, a balance checked the same day);
    but a test is not handed in with one until the technician records why the result stands.
    The reasons are given with each hand-in (a test returned and handed in again states them
    again: the bench page offers the earlier words), stored in ``flag_reasons`` and in the
    hand-in's audit event, and shown to the reviewer beside the flag.
    """
    with db.transaction() as s:
        test = load_test(s, test_id, for_update=True)
        ev = evaluate_test(s, test)
        if ev.errors:
            raise Invalid(ev.errors)
        kept = flag_reasons(ev, reasons)
        flags = [f.to_dict() for f in ev.flags]
        linked = {"results": ev.results, "flags": flags} if linked_to_others(test.method) else {}
        before = change_status(
            s,
            actor,
            test,
            Action.submit,
            expected_version,
            **linked,  # handed in with the linked values of now (``linked_inputs``), then kept
            submitted_at=utcnow(),
            return_reason=None,
            flag_reasons=kept or None,
        )
        after: dict[str, Any] = {"status": test.status}
        if kept:
            after["flag_reasons"] = kept
        audit.record(s, actor, "lab_test", test_id, "submit", before={"status": before}, after=after)
        return test


def draft_with(test: LabTest, changes: Sequence[Change]) -> dict[str, Any]:
    """The test's stored readings with these changes applied, as a preview would see them."""
    return with_changes(test.readings, [(c.path, c.value) for c in changes])


def preview(db: Database, test: LabTest, readings: dict[str, Any]) -> Evaluation:
    """What the engine makes of readings typed so far for this test (with the values it takes
    from its sample's other tests, ``linked_inputs``); stores nothing."""
    if not linked_to_others(test.method):
        return evaluate(test.method, readings)
    return db.read(lambda conn: evaluate_test(conn, test, readings))
