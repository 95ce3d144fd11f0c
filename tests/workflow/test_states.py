"""The workflow table: every move by every role, generated from the table itself.

The cases below cross every Status with every Action and every Role, so a status or action
added to ``server.workflow.states`` is tested the moment it exists. The expected outcome of
each case is read from ``TRANSITIONS`` (the single source of truth), and a few tests check
that table against the workflow DESIGN.md section 4 describes, so a wrong entry in the table
is caught too, not merely copied into the expectations.
"""

from __future__ import annotations

import itertools

import pytest

from server.workflow.states import (
    AMENDED_REVISION_STARTS,
    NEXT_STEP,
    TRANSITIONS,
    Action,
    Move,
    Role,
    Status,
    TransitionRefused,
    can,
    is_editable,
    may_sign,
    move,
)

EVERY_CASE = list(itertools.product(Status, Action, Role))
ALLOWED = [(s, a, r) for s, a, r in EVERY_CASE if (s, a) in TRANSITIONS and r in TRANSITIONS[(s, a)][1]]
FORBIDDEN = [case for case in EVERY_CASE if case not in ALLOWED]


def _case_id(case: tuple[Status, Action, Role]) -> str:
    status, action, role = case
    return f"{role.value}-{action.value}-{status.value}"


def test_the_cases_cover_every_status_action_and_role_exactly_once() -> None:
    assert len(ALLOWED) + len(FORBIDDEN) == len(Status) * len(Action) * len(Role)
    assert set(ALLOWED).isdisjoint(FORBIDDEN)
    # Both kinds exist, so neither parametrised test below runs on an empty list.
    assert ALLOWED and FORBIDDEN


@pytest.mark.parametrize("case", ALLOWED, ids=_case_id)
def test_an_allowed_move_goes_to_the_status_the_table_names(case: tuple[Status, Action, Role]) -> None:
    status, action, role = case
    after, _roles = TRANSITIONS[(status, action)]
    assert move(status.value, action, role.value) == Move(before=status, after=after)


@pytest.mark.parametrize("case", FORBIDDEN, ids=_case_id)
def test_a_move_outside_the_table_or_by_another_role_is_refused(case: tuple[Status, Action, Role]) -> None:
    status, action, role = case
    with pytest.raises(TransitionRefused) as refused:
        move(status.value, action, role.value)
    message = str(refused.value)
    if (status, action) in TRANSITIONS:  # the move exists, but not for this role
        assert message == f"a {role.value} may not {action.value} a test"
    else:
        assert message.startswith(f"a {status.value} test cannot be ")


def test_only_reviewers_and_admins_approve_return_or_amend() -> None:
    # DESIGN.md section 4: the lab manager / reviewer approves, returns and amends; a technician enters
    # readings and hands the test in.
    for (_status, action), (_after, roles) in TRANSITIONS.items():
        if action in (Action.approve, Action.return_, Action.amend, Action.supersede):
            assert roles == {Role.reviewer, Role.admin}, action
        else:
            assert Role.technician in roles, action


def test_the_design_path_from_request_to_approval_is_walkable() -> None:
    # DESIGN.md section 4: requested -> draft -> submitted -> approved, or submitted -> returned -> draft.
    steps = [
        (Status.requested, Action.enter, Role.technician, Status.draft),
        (Status.draft, Action.enter, Role.technician, Status.draft),
        (Status.draft, Action.submit, Role.technician, Status.submitted),
        (Status.submitted, Action.return_, Role.reviewer, Status.returned),
        (Status.returned, Action.enter, Role.technician, Status.draft),
        (Status.draft, Action.submit, Role.technician, Status.submitted),
        (Status.submitted, Action.approve, Role.reviewer, Status.approved),
        # S7 point 5: an amendment leaves the approved revision current until it is approved
        (Status.approved, Action.amend, Role.admin, Status.approved),
        (Status.approved, Action.supersede, Role.reviewer, Status.superseded),
    ]
    for before, action, role, after in steps:
        assert move(before.value, action, role.value).after is after


def test_superseded_is_the_end_of_a_revision() -> None:
    # DESIGN.md section 4: an amended revision stays readable and is never edited again.
    assert not [key for key in TRANSITIONS if key[0] is Status.superseded]


def test_every_status_is_reachable_from_requested() -> None:
    reached = {Status.requested}
    frontier = [Status.requested]
    while frontier:
        here = frontier.pop()
        for (before, _action), (after, _roles) in TRANSITIONS.items():
            if before is here and after not in reached:
                reached.add(after)
                frontier.append(after)
    assert reached == set(Status)


def test_an_unknown_status_is_not_silently_accepted() -> None:
    with pytest.raises(ValueError):
        move("lost", Action.enter, Role.technician.value)


@pytest.mark.parametrize("status", list(Status), ids=lambda s: s.value)
def test_a_status_is_editable_exactly_when_readings_may_be_entered_in_it(status: Status) -> None:
    assert is_editable(status.value) is ((status, Action.enter) in TRANSITIONS)


def test_readings_are_never_edited_once_handed_in_or_approved() -> None:
    # DESIGN.md section 4: an approved test is never edited in place; a submitted one waits for review.
    assert [s for s in Status if is_editable(s.value)] == [Status.requested, Status.draft, Status.returned]
    for status in (Status.submitted, Status.approved, Status.superseded):
        assert not is_editable(status.value)


def test_nobody_approves_a_test_they_entered_when_the_setting_is_on() -> None:
    # DESIGN.md section 4: "By default nobody approves a test they entered."
    assert may_sign(7, {7}) is False
    assert may_sign(7, {3, 7}, self_approval_forbidden=True) is False


def test_someone_who_did_not_enter_the_readings_may_approve_with_the_setting_on() -> None:
    assert may_sign(7, {3}) is True
    assert may_sign(7, set()) is True


def test_the_author_may_approve_when_the_laboratory_turns_the_setting_off() -> None:
    assert may_sign(7, {7}, self_approval_forbidden=False) is True
    assert may_sign(7, {3}, self_approval_forbidden=False) is True


def test_every_status_has_a_next_step_to_show() -> None:
    assert set(NEXT_STEP) == set(Status)
    for status in Status:
        assert NEXT_STEP[status].strip(), status


@pytest.mark.parametrize("case", EVERY_CASE, ids=_case_id)
def test_a_page_offers_a_move_exactly_when_the_table_allows_it(case: tuple[Status, Action, Role]) -> None:
    status, action, role = case
    assert can(status.value, action, role.value) is (case in ALLOWED)


def test_an_amended_revision_opens_where_readings_may_be_corrected_and_handed_in_again() -> None:
    # DESIGN.md section 4: an amendment opens a new revision; its readings may be corrected before
    # it is signed again, so it starts in a status that is editable and can be handed in.
    assert is_editable(AMENDED_REVISION_STARTS.value)
    assert (AMENDED_REVISION_STARTS, Action.submit) in TRANSITIONS
