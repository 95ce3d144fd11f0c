"""Two reviewers acting on one test at the same moment: one result and one clear conflict.

Each reviewer acts on the version they saw (optimistic locking). The test row is locked for the
change (FOR UPDATE on PostgreSQL, BEGIN IMMEDIATE on SQLite), so the second reviewer waits for
the first, then finds the version moved on and is told who acted first; nothing is overwritten.
"""

from __future__ import annotations

import threading
from collections.abc import Callable

from sqlmodel import select

from server.db.session import Database
from server.db.tables import AuditEvent, LabTest, User
from server.services import review
from server.services.errors import Conflict, ServiceError
from tests.conftest import PASSWORDS, People
from tests.workflow.flows import Lab, load, version


def _race(*acts: Callable[[], object]) -> list[object]:
    """Run the acts at once (released together by a barrier); each gives its result or refusal."""
    start = threading.Barrier(len(acts))
    outcomes: list[object] = [None] * len(acts)

    def run(i: int) -> None:
        start.wait()
        try:
            outcomes[i] = acts[i]()
        except ServiceError as exc:
            outcomes[i] = exc

    threads = [threading.Thread(target=run, args=(i,)) for i in range(len(acts))]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=30)
    return outcomes


def _approve(db: Database, who: User, test_id: int, seen: int) -> Callable[[], object]:
    return lambda: review.approve(db, who, test_id, PASSWORDS[who.username], seen)


def _events(db: Database, test_id: int, action: str) -> list[AuditEvent]:
    with db.session() as s:
        return list(
            s.exec(
                select(AuditEvent).where(AuditEvent.entity_id == test_id, AuditEvent.action == action)
            ).all()
        )


def test_two_reviewers_approving_at_once_give_one_approval_and_one_conflict_naming_the_first(
    db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "CC-1")
    test_id = lab.submitted(people.tech)
    seen = version(db, test_id)
    outcomes = _race(_approve(db, people.review, test_id, seen), _approve(db, people.review2, test_id, seen))
    approved = [o for o in outcomes if isinstance(o, LabTest)]
    refused = [o for o in outcomes if isinstance(o, Conflict)]
    assert len(approved) == 1 and len(refused) == 1, outcomes
    test = load(db, test_id)
    winner = people.review if test.approved_by_id == people.review.id else people.review2
    assert (test.status, test.version) == ("approved", seen + 1)
    assert len(_events(db, test_id, "approve")) == 1
    message = str(refused[0])
    assert message.startswith(f"{winner.full_name} approved this test at ")
    assert message.endswith(
        "after you opened it; your approval was not applied and nothing was changed"
        " (reload to see it as it is now)"
    )


def test_an_approval_and_a_return_at_once_give_one_outcome_and_one_conflict(
    db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "CC-2")
    test_id = lab.submitted(people.tech)
    seen = version(db, test_id)
    outcomes = _race(
        _approve(db, people.review, test_id, seen),
        lambda: review.return_test(db, people.review2, test_id, "tin L2 cracked", seen),
    )
    assert sum(isinstance(o, LabTest) for o in outcomes) == 1, outcomes
    assert sum(isinstance(o, Conflict) for o in outcomes) == 1, outcomes
    test = load(db, test_id)
    assert test.status in ("approved", "returned") and test.version == seen + 1
    # Whichever won, the other left no trace: one status event after the hand-in.
    assert len(_events(db, test_id, "approve")) + len(_events(db, test_id, "return")) == 1
