"""Every move of the workflow table, by every role, made through the real services and database.

tests/workflow/test_states.py checks the pure table; this file checks that the use-cases obey
it. The cases are generated from ``TRANSITIONS``: each status is reached by a path the table
itself allows (found by a breadth-first walk from ``requested``), then every action is tried
by every role. An allowed move must land on the status the table names and write its audit
event; a forbidden one must be refused and change nothing (status, version, audit trail). A
refusal may come first from another rule (handing in a test with no readings is refused for the
missing readings), but a move the table has only for other roles must be refused as forbidden. A
status or action added to the table is tested here the moment it exists; an action with no
use-case behind it fails ``test_every_action_of_the_table_has_a_use_case``.
"""

from __future__ import annotations

import itertools
from collections import deque
from collections.abc import Callable

import pytest
from sqlmodel import col, func, select

from server.db.session import Database
from server.db.tables import AuditEvent, LabTest, User
from server.services import amendments, bench, review
from server.services.errors import Conflict, Forbidden, Invalid
from server.workflow.states import TRANSITIONS, Action, Role, Status
from tests.conftest import PASSWORDS, People
from tests.support.scenario import ATTERBERG
from tests.workflow.flows import Lab, version

Path = list[tuple[Action, Role]]


def _paths() -> dict[Status, Path]:
    """The shortest way to each status from ``requested``, read from the table."""
    found: dict[Status, Path] = {Status.requested: []}
    queue = deque([Status.requested])
    while queue:
        here = queue.popleft()
        for (before, action), (after, roles) in TRANSITIONS.items():
            if before is here and after not in found:
                # The bench does the bench's work; a reviewer does the desk's.
                role = Role.technician if Role.technician in roles else Role.reviewer
                found[after] = [*found[here], (action, role)]
                queue.append(after)
    return found


PATHS = _paths()
CASES = list(itertools.product(Status, Action, Role))


def _readings(n: int) -> dict[str, object]:
    """The scenario's readings with a different container name each time, so every save changes
    something (an identical save stores nothing and moves nothing, by design)."""
    natural = dict(ATTERBERG["water_content"]["determinations"][0], container=f"N{n}")
    return {**ATTERBERG, "water_content": {"determinations": [natural]}}


class Desk:
    """Who does what: a technician enters, ``review2`` signs the steps on the way, and the
    person under test is someone who has touched nothing yet (so segregation of duties never
    hides a role refusal)."""

    def __init__(self, db: Database, people: People):
        self.db = db
        self.lab = Lab(db, people.admin)
        self.people = people
        self.saves = 0
        self.way: dict[Role, User] = {Role.technician: people.tech, Role.reviewer: people.review2}
        self.actor: dict[Role, User] = {
            Role.technician: people.tech,
            Role.reviewer: people.review,
            Role.admin: people.admin,
        }

    def act(self, action: Action, person: User, test_id: int) -> int:
        """Take one action through its use-case; returns the id of the resulting test row."""
        seen = version(self.db, test_id)
        do: dict[Action, Callable[[], int]] = {
            Action.enter: lambda: self._enter(person, test_id, seen),
            Action.submit: lambda: bench.submit(self.db, person, test_id, seen).id or 0,
            Action.approve: lambda: (
                review.approve(self.db, person, test_id, PASSWORDS[person.username], seen).id or 0
            ),
            Action.return_: lambda: (
                review.return_test(self.db, person, test_id, "re-weigh tin", seen).id or 0
            ),
            Action.amend: lambda: (
                amendments.amend(self.db, person, test_id, "copying error on the sheet", seen).id or 0
            ),
            Action.supersede: lambda: self._supersede(person, test_id, seen),
        }
        return do[action]()

    def _supersede(self, person: User, test_id: int, seen: int) -> int:
        """A revision is superseded by approving its amendment: ``review2`` opens it, the bench
        hands it in, and ``person`` signs it (the move under test)."""
        opener = self.people.review2 if person.id != self.people.review2.id else self.people.review
        amended = amendments.amend(self.db, opener, test_id, "copying error on the sheet", seen).id or 0
        self._enter(self.people.tech, amended, version(self.db, amended))
        bench.submit(self.db, self.people.tech, amended, version(self.db, amended))
        review.approve(self.db, person, amended, PASSWORDS[person.username], version(self.db, amended))
        return test_id

    def _enter(self, person: User, test_id: int, seen: int) -> int:
        self.saves += 1
        return bench.save_readings(self.db, person, test_id, _readings(self.saves), seen).test.id or 0

    def test_in(self, status: Status) -> int:
        """A fresh test brought to ``status`` along the table's own path."""
        test_id = self.lab.new_test()
        for action, role in PATHS[status]:
            new_id = self.act(action, self.way[role], test_id)
            if action is not Action.amend:  # amending leaves this row superseded and opens another
                test_id = new_id
        return test_id


def _state(db: Database, test_id: int) -> tuple[str, int, int]:
    with db.session() as s:
        test = s.get(LabTest, test_id)
        events = s.exec(
            select(func.count()).select_from(AuditEvent).where(col(AuditEvent.entity) == "lab_test")
        ).one()
    assert test is not None
    return test.status, test.version, int(events)


def test_every_status_of_the_table_is_reached_by_a_path_the_table_allows() -> None:
    assert set(PATHS) == set(Status)


def test_every_action_of_the_table_has_a_use_case(db: Database, people: People) -> None:
    desk = Desk(db, people)
    test_id = desk.lab.new_test()
    for action in Action:  # an action the Desk does not know raises KeyError here
        try:
            desk.act(action, people.admin, test_id)
        except (Conflict, Forbidden, Invalid):
            pass


def test_every_move_by_every_role_goes_through_the_services_as_the_table_says(
    db: Database, people: People
) -> None:
    desk = Desk(db, people)
    checked = 0
    # A refused move changes nothing, so one test per status serves every refusal; each allowed
    # move gets a fresh test.
    shared = {status: desk.test_in(status) for status in Status}
    for status, action, role in CASES:
        rule = TRANSITIONS.get((status, action))
        allowed = rule is not None and role in rule[1]
        test_id = desk.test_in(status) if allowed else shared[status]
        before = _state(db, test_id)
        assert before[0] == status.value, (status, PATHS[status])
        if allowed:
            assert rule is not None
            desk.act(action, desk.actor[role], test_id)
            status_after, version_after, events_after = _state(db, test_id)
            assert status_after == rule[0].value, (status, action, role)
            # superseding first opens the amendment it approves: one more version of the row
            steps = 2 if action is Action.supersede else 1
            assert version_after == before[1] + steps and events_after > before[2], (status, action, role)
        else:
            with pytest.raises((Conflict, Forbidden, Invalid)) as refused:
                desk.act(action, desk.actor[role], test_id)
            assert str(refused.value), (status, action, role)
            if rule is not None:  # the move exists, only not for this role: 403, not 409
                assert isinstance(refused.value, Forbidden), (status, action, role)
            if action is Action.supersede and rule is not None:
                # the amendment was opened (by another person) before the refused signature
                assert _state(db, test_id)[0] == before[0], (status, action, role)
            else:
                assert _state(db, test_id) == before, (status, action, role)
        checked += 1
    assert checked == len(Status) * len(Action) * len(Role)
