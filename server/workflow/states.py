"""Test statuses and the table of allowed moves, by role (DESIGN.md section 4).

requested -> draft (readings being entered) -> submitted -> approved, or
submitted -> returned -> draft. An approved revision is never edited: amending it opens a new
draft revision and leaves it the current approved revision; only when that amendment is
approved is it superseded (the "supersede" move, made by approving the amendment), so that a
report never loses a result to an amendment still being typed. The table below is the single
source of truth;
services consult it and tests are generated from it, so a new status cannot go untested.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import StrEnum


class Status(StrEnum):
    requested = "requested"
    draft = "draft"
    submitted = "submitted"
    returned = "returned"
    approved = "approved"
    superseded = "superseded"


class Action(StrEnum):
    enter = "enter"  # save readings
    submit = "submit"
    approve = "approve"
    return_ = "return"
    amend = "amend"
    supersede = "supersede"  # approving the amendment of a revision supersedes that revision


class Role(StrEnum):
    technician = "technician"
    reviewer = "reviewer"
    admin = "admin"


EVERYONE = frozenset(Role)
CHECKERS = frozenset({Role.reviewer, Role.admin})

# (status, action) -> (status after, roles allowed)
TRANSITIONS: dict[tuple[Status, Action], tuple[Status, frozenset[Role]]] = {
    (Status.requested, Action.enter): (Status.draft, EVERYONE),
    (Status.draft, Action.enter): (Status.draft, EVERYONE),
    (Status.returned, Action.enter): (Status.draft, EVERYONE),
    (Status.draft, Action.submit): (Status.submitted, EVERYONE),
    (Status.submitted, Action.approve): (Status.approved, CHECKERS),
    (Status.submitted, Action.return_): (Status.returned, CHECKERS),
    (Status.approved, Action.amend): (Status.approved, CHECKERS),
    (Status.approved, Action.supersede): (Status.superseded, CHECKERS),
}

# An amendment leaves the approved row approved (above) and opens the next revision here: its
# readings are copied and may be corrected before it is handed in and signed again; its
# approval supersedes the row it amends.
AMENDED_REVISION_STARTS = Status.draft

# What a person at the bench or desk is asked to do next, shown beside each test.
NEXT_STEP: dict[Status, str] = {
    Status.requested: "enter readings",
    Status.draft: "finish readings and hand in",
    Status.submitted: "awaiting review",
    Status.returned: "correct and hand in again",
    Status.approved: "ready for a report",
    Status.superseded: "replaced by a later revision",
}


class TransitionRefused(Exception):
    """The move is not allowed from this status, or not for this role."""


@dataclass(frozen=True)
class Move:
    before: Status
    after: Status


def move(status: str, action: Action, role: str) -> Move:
    """The status a test goes to, or ``TransitionRefused`` saying why not."""
    current = Status(status)
    found = TRANSITIONS.get((current, action))
    if found is None:
        raise TransitionRefused(f"a {current.value} test cannot be {_past(action)}")
    after, roles = found
    if Role(role) not in roles:
        raise TransitionRefused(f"a {role} may not {action.value} a test")
    return Move(current, after)


def can(status: str, action: Action, role: str) -> bool:
    """Whether this role may take this action on a test in this status (what a page offers)."""
    found = TRANSITIONS.get((Status(status), action))
    return found is not None and Role(role) in found[1]


def is_editable(status: str) -> bool:
    """Whether readings may still be changed in place (never once submitted or approved)."""
    return (Status(status), Action.enter) in TRANSITIONS


def may_sign(signer_id: int, entered_by: set[int], self_approval_forbidden: bool = True) -> bool:
    """Segregation of duties: nobody approves a test they entered (a setting, on by default)."""
    return not (self_approval_forbidden and signer_id in entered_by)


def _past(action: Action) -> str:
    return {
        Action.enter: "edited",
        Action.submit: "handed in",
        Action.approve: "approved",
        Action.return_: "returned",
        Action.amend: "amended",
        Action.supersede: "superseded",
    }[action]
