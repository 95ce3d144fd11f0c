"""Use-cases at the reviewer's desk: approve with a signature (one test or a batch), return with
a reason.

The signature is the reviewer's password entered again at the moment of approval; the record
keeps who signed, when, in what role and what the signature means (DESIGN.md section 4;
ISO/IEC 17025:2017 cl. 7.8.2.1 k: the identification of the person authorising the results).
The password is checked before the write transaction (argon2 takes ~0.1 s and must not hold
the SQLite write lock), then the signer is re-read inside it: a deactivated account or a
password changed meanwhile signs nothing.

Two reviewers acting on one test: the test row is locked for the change (``FOR UPDATE`` on
PostgreSQL; SQLite serialises writers with ``BEGIN IMMEDIATE``) and the version each reviewer
saw is compared, so exactly one acts and the other is told who acted first.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from sqlmodel import Session

from server.auth.passwords import verify_password
from server.db.review_queries import last_event, revision_authors
from server.db.session import Database
from server.db.tables import LabTest, User, utcnow
from server.services import audit
from server.services.bench import change_status
from server.services.errors import Conflict, Forbidden, NotFound, invalid
from server.workflow.states import TRANSITIONS, Action, Role, Status, may_sign

DEFAULT_MEANING = "Reviewed and approved: readings checked, results verified against the method"
MAX_MEANING = 300
MAX_REASON = 1000
MAX_BATCH = 200

_DONE = {
    "approve": "approved",
    "return": "returned",
    "amend": "amended",
    "supersede": "amended",
    "open_amendment": "amended",
    "submit": "handed in",
    "readings": "changed the readings of",
    "request": "requested",
}


@dataclass(frozen=True)
class Signature:
    """What the signer vouched for: checked once, then applied inside the transaction."""

    signer_id: int
    password_hash: str
    meaning: str


def check_signature(db: Database, actor: User, password: str, meaning: str) -> Signature:
    """The signer's password and the meaning of the signature, refused field by field."""
    meaning = " ".join(meaning.split())
    if not meaning:
        raise invalid("meaning", "say what the signature means (for example: reviewed and approved)")
    if len(meaning) > MAX_MEANING:
        raise invalid("meaning", f"the meaning of the signature is limited to {MAX_MEANING} characters")
    with db.session() as s:
        signer = s.get(User, actor.id)
    if signer is None or not signer.active or not verify_password(password, signer.password_hash):
        raise invalid("password", "the password does not match: the signature was not applied")
    return Signature(signer.id or 0, signer.password_hash, meaning)


def signer_in(session: Session, signature: Signature) -> User:
    """The signer, inside the write transaction, unless the account changed since the password
    was checked (deactivated, or its password changed): then nothing is signed."""
    signer = session.get(User, signature.signer_id)
    if signer is None or not signer.active or signer.password_hash != signature.password_hash:
        raise invalid("password", "the account changed while signing: the signature was not applied")
    return signer


def locked_test(session: Session, test_id: int, expected_version: int, verb: str) -> LabTest:
    """The test, locked for this change, or a conflict that says who acted on it first.
    ``verb`` names the refused change in the message ("approval", "return", "amendment")."""
    test = session.get(LabTest, test_id, with_for_update=True)
    if test is None:
        raise NotFound(f"test {test_id} does not exist")
    if test.version != expected_version:
        raise Conflict(stale_message(session, test, verb))
    return test


def allowed(test: LabTest, action: Action, role: str) -> None:
    """Refuse a move the role may never make (403) apart from one the status does not allow (409)."""
    found = TRANSITIONS.get((Status(test.status), action))
    if found is not None and Role(role) not in found[1]:
        raise Forbidden(f"a {role} may not {action.value} a test")


def stale_message(session: Session, test: LabTest, verb: str) -> str:
    """Why the change was refused, naming the person and time of the change that came first."""
    found = last_event(session, "lab_test", test.id or 0)
    what = f"This test changed after you opened it and is now {test.status}"
    if found is not None:
        event, person = found
        who = person.full_name if person else event.actor
        what = f"{who} {_DONE.get(event.action, event.action)} this test at {event.at:%Y-%m-%d %H:%M} UTC"
        if (event.after or {}).get("status") != test.status:
            what += f" and it is now {test.status}"
        what += ", after you opened it"
    return f"{what}; your {verb} was not applied and nothing was changed (reload to see it as it is now)"


def _approve_one(
    session: Session,
    signer: User,
    test: LabTest,
    expected_version: int,
    signature: Signature,
    self_approval_forbidden: bool,
    batch: int | None = None,
) -> None:
    allowed(test, Action.approve, signer.role)
    if not may_sign(signer.id or 0, revision_authors(session, test.id or 0), self_approval_forbidden):
        raise Forbidden(
            f"you entered or amended readings of test {test.id}, so another reviewer must approve it"
        )
    now = utcnow()
    before = change_status(
        session,
        signer,
        test,
        Action.approve,
        expected_version,
        approved_at=now,
        approved_by_id=signer.id,
        approver_role=signer.role,
        signature_meaning=signature.meaning,
    )
    after: dict[str, object] = {
        "status": test.status,
        "signed_by": signer.full_name,
        "signed_by_id": signer.id,
        "role": signer.role,
        "meaning": signature.meaning,
        "signed_at": now.isoformat(),
    }
    if batch is not None:
        after["batch_of"] = batch
    audit.record(session, signer, "lab_test", test.id or 0, "approve", before={"status": before}, after=after)
    if test.previous_revision_id is not None:
        _supersede(session, signer, test)


def _supersede(session: Session, signer: User, amendment: LabTest) -> None:
    """The revision an approved amendment replaces is superseded now, not when the amendment
    was opened: until this signature it was the current approved result (and what reports
    carry); from now on the reports that carry it need re-issue."""
    old = session.get(LabTest, amendment.previous_revision_id)
    if old is None or old.status != Status.approved.value:
        return
    before = change_status(session, signer, old, Action.supersede, old.version)
    audit.record(
        session,
        signer,
        "lab_test",
        old.id or 0,
        "supersede",
        before={"status": before},
        after={"status": old.status, "superseded_by": amendment.id},
        reason=amendment.amendment_reason,
    )


def approve(
    db: Database,
    actor: User,
    test_id: int,
    password: str,
    expected_version: int,
    *,
    meaning: str = DEFAULT_MEANING,
    self_approval_forbidden: bool = True,
) -> LabTest:
    """Sign a submitted test as approved."""
    signature = check_signature(db, actor, password, meaning)
    with db.transaction() as s:
        signer = signer_in(s, signature)
        test = locked_test(s, test_id, expected_version, "approval")
        _approve_one(s, signer, test, expected_version, signature, self_approval_forbidden)
        return test


def approve_batch(
    db: Database,
    actor: User,
    selection: Sequence[tuple[int, int]],
    password: str,
    *,
    meaning: str = DEFAULT_MEANING,
    self_approval_forbidden: bool = True,
) -> list[LabTest]:
    """One signature for several handed-in tests, all or none.

    Only tests with no quality flag at all may be signed together: a flagged test needs its own
    look (ISO/IEC 17025:2017 cl. 7.7.1, results reviewed before release). The batch is refused
    whole when any test has a flag, was entered or amended by the signer, or changed meanwhile.
    ``selection`` is (test id, version seen) pairs.
    """
    wanted = dict(selection)
    if not wanted:
        raise invalid("tests", "choose at least one test to approve")
    if len(wanted) > MAX_BATCH:
        raise invalid("tests", f"a batch is limited to {MAX_BATCH} tests")
    signature = check_signature(db, actor, password, meaning)
    with db.transaction() as s:
        signer = signer_in(s, signature)
        tests = [locked_test(s, tid, wanted[tid], "approval") for tid in sorted(wanted)]  # fixed lock order
        flagged = [t.id for t in tests if t.flags]
        if flagged:
            listed = ", ".join(str(i) for i in flagged)
            raise invalid("tests", f"test(s) {listed} carry quality flags: approve them one at a time")
        for test in tests:
            _approve_one(
                s, signer, test, wanted[test.id or 0], signature, self_approval_forbidden, batch=len(tests)
            )
        return tests


REASON_MIN = 10  # characters: a few words, not "x" or "ok" (ISO/IEC 17025:2017 cl. 7.5.2: the change and why)
REASON_LETTERS_MIN = 5  # letters in it, so that punctuation or digits alone are refused
REASON_DISTINCT_MIN = 4  # different letters, so that "aaaaaaaaaa" or "xyxyxyxyxy" is refused


def required_reason(reason: str, doing: str) -> str:
    """The reason a person gives for a change that needs one (a return, an amendment, a
    withdrawal): real words, of bounded length. A record that says why it changed only
    serves its purpose if the words say something, so "x", "..........", or one letter
    repeated are refused at the field."""
    reason = " ".join(reason.split())
    if not reason:
        raise invalid("reason", f"a reason is required to {doing}")
    if len(reason) > MAX_REASON:
        raise invalid("reason", f"the reason is limited to {MAX_REASON} characters")
    letters = [c.casefold() for c in reason if c.isalpha()]
    too_thin = len(letters) < REASON_LETTERS_MIN or len(set(letters)) < REASON_DISTINCT_MIN
    if len(reason) < REASON_MIN or too_thin:
        raise invalid(
            "reason",
            f"say in a few words why you {doing} (at least {REASON_MIN} characters of real words;"
            " it is kept with the record and may be printed on the report)",
        )
    return reason


def return_test(db: Database, actor: User, test_id: int, reason: str, expected_version: int) -> LabTest:
    """Send a submitted test back to the bench; the reason is required and shown there."""
    reason = required_reason(reason, "return a test")
    with db.transaction() as s:
        test = locked_test(s, test_id, expected_version, "return")
        allowed(test, Action.return_, actor.role)
        before = change_status(s, actor, test, Action.return_, expected_version, return_reason=reason)
        audit.record(
            s,
            actor,
            "lab_test",
            test_id,
            "return",
            before={"status": before},
            after={"status": test.status, "return_reason": reason},
            reason=reason,
        )
        return test
