"""Use-cases at the reviewer's desk: approve with a signature, return with a reason.

The signature is the reviewer's password entered again at the moment of approval; the record
keeps who signed, when, in what role and what the signature means (DESIGN.md section 4).
"""

from __future__ import annotations

from server.auth.passwords import verify_password
from server.db.queries import readings_authors
from server.db.session import Database
from server.db.tables import LabTest, User, utcnow
from server.services import audit
from server.services.bench import change_status, load_test
from server.services.errors import Forbidden, invalid
from server.workflow.states import Action, may_sign

DEFAULT_MEANING = "Reviewed and approved: readings checked, results verified against the method"


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
    with db.transaction() as s:
        signer = s.get(User, actor.id)
        if signer is None or not signer.active or not verify_password(password, signer.password_hash):
            raise invalid("password", "the password does not match: the signature was not applied")
        test = load_test(s, test_id)
        if not may_sign(signer.id or 0, readings_authors(s, test_id), self_approval_forbidden):
            raise Forbidden("you entered readings of this test, so another reviewer must approve it")
        now = utcnow()
        before = change_status(
            s,
            signer,
            test,
            Action.approve,
            expected_version,
            approved_at=now,
            approved_by_id=signer.id,
            approver_role=signer.role,
            signature_meaning=meaning,
        )
        audit.record(
            s,
            signer,
            "lab_test",
            test_id,
            "approve",
            before={"status": before},
            after={
                "status": test.status,
                "signed_by": signer.full_name,
                "role": signer.role,
                "meaning": meaning,
                "signed_at": now.isoformat(),
            },
        )
        return test


def return_test(db: Database, actor: User, test_id: int, reason: str, expected_version: int) -> LabTest:
    """Send a submitted test back to the bench; the reason is required and shown there."""
    reason = reason.strip()
    if not reason:
        raise invalid("reason", "a reason is required to return a test")
    with db.transaction() as s:
        test = load_test(s, test_id)
        before = change_status(s, actor, test, Action.return_, expected_version, return_reason=reason)
        audit.record(
            s,
            actor,
            "lab_test",
            test_id,
            "return",
            before={"status": before},
            after={"status": test.status},
            reason=reason,
        )
        return test
