"""Amending an approved test: never in place, always as a new revision with a reason.

ISO/IEC 17025:2017 cl. 7.5.2 and 7.8.8: a change to a technical record or an issued result
keeps the original, records what changed and why, and identifies the change. So the approved
row moves to ``superseded`` (by the workflow table) and stays readable as it was; a new row
with ``revision + 1`` points back to it, starts as a draft with the same readings, and carries
the reason. The person who amended it counts as an author of the new revision, so another
reviewer signs it. Reports that carried the old revision then need re-issue
(``server.db.review_queries.needs_reissue`` derives that; nothing is stored for it).
"""

from __future__ import annotations

import copy
from dataclasses import dataclass
from typing import Any

from sqlmodel import select

from server.db.session import Database
from server.db.tables import LabTest, User
from server.services import audit
from server.services.bench import change_status
from server.services.errors import Conflict
from server.services.readings_paths import same
from server.services.review import allowed, locked_test, required_reason
from server.workflow.states import AMENDED_REVISION_STARTS, Action


def amend(db: Database, actor: User, test_id: int, reason: str, expected_version: int) -> LabTest:
    """Open the next revision of an approved test; returns the new revision (a draft). The
    approved revision stays the current one, on the job and in reports, until the amendment
    is approved (``review.approve`` then supersedes it); one amendment of a revision is open
    at a time."""
    reason = required_reason(reason, "amend an approved test")
    with db.transaction() as s:
        old = locked_test(s, test_id, expected_version, "amendment")
        allowed(old, Action.amend, actor.role)
        open_amendment = s.exec(select(LabTest).where(LabTest.previous_revision_id == old.id)).first()
        if open_amendment is not None:
            raise Conflict(
                f"revision {open_amendment.revision} of this test amends it already "
                f"({open_amendment.status}): finish that amendment instead"
            )
        before = change_status(s, actor, old, Action.amend, expected_version)
        new = LabTest(
            sample_id=old.sample_id,
            method=old.method,
            status=AMENDED_REVISION_STARTS.value,
            revision=old.revision + 1,
            previous_revision_id=old.id,
            amendment_reason=reason,
            readings=copy.deepcopy(old.readings),
            results=copy.deepcopy(old.results),
            flags=copy.deepcopy(old.flags),
            requested_by_id=old.requested_by_id,
            assigned_to_id=old.assigned_to_id,
        )
        s.add(new)
        s.flush()
        audit.record(
            s,
            actor,
            "lab_test",
            old.id or 0,
            "open_amendment",
            before={"status": before},
            after={"status": old.status, "amended_by": new.id},
            reason=reason,
        )
        audit.record(
            s,
            actor,
            "lab_test",
            new.id or 0,
            "amend",
            before={"revision_of": old.id, "revision": old.revision},
            after={
                "status": new.status,
                "revision": new.revision,
                "previous_revision_id": old.id,
                "sample_id": new.sample_id,
                "method": new.method,
                "readings": new.readings,
            },
            reason=reason,
        )
        return new


# -- what changed between two revisions (pure) ---------------------------------------------------


def path_label(path: tuple[str | int, ...]) -> str:
    """A JSON path in words: list positions counted from 1, as the sheet numbers its rows."""
    parts: list[str] = []
    for p in path:
        if isinstance(p, int) and parts:
            parts[-1] = f"{parts[-1]} #{p + 1}"
        else:
            parts.append(f"#{p + 1}" if isinstance(p, int) else p)
    return " › ".join(parts)


def path_key(path: tuple[str | int, ...]) -> str:
    """The last named part of a path: the result or reading key (whose rounding rule applies)."""
    named = [p for p in path if isinstance(p, str)]
    return named[-1] if named else ""


@dataclass(frozen=True)
class Leaf:
    """One value of a JSON document and where it sits."""

    path: tuple[str | int, ...]
    value: Any

    @property
    def label(self) -> str:
        return path_label(self.path)

    @property
    def key(self) -> str:
        return path_key(self.path)


@dataclass(frozen=True)
class Change:
    """One field that differs: where it is, what it was, what it is."""

    path: tuple[str | int, ...]
    before: Any
    after: Any

    @property
    def label(self) -> str:
        return path_label(self.path)

    @property
    def key(self) -> str:
        return path_key(self.path)

    @property
    def kind(self) -> str:
        if self.before is _ABSENT:
            return "added"
        if self.after is _ABSENT:
            return "removed"
        return "changed"


class _Absent:
    def __repr__(self) -> str:
        return "—"

    def __str__(self) -> str:
        return "—"


_ABSENT: Any = _Absent()


def _leaves(value: Any, path: tuple[str | int, ...] = ()) -> dict[tuple[str | int, ...], Any]:
    if isinstance(value, dict):
        out: dict[tuple[str | int, ...], Any] = {}
        for k, v in value.items():
            out.update(_leaves(v, (*path, str(k))))
        return out or {path: {}}
    if isinstance(value, list):
        out = {}
        for i, v in enumerate(value):
            out.update(_leaves(v, (*path, i)))
        return out or {path: []}
    return {path: value}


def leaves(doc: dict[str, Any] | None) -> list[Leaf]:
    """Every value of a JSON document (readings or results) with its path, in document order."""
    return [Leaf(path, value) for path, value in _leaves(doc or {}).items() if path]


def changes(before: dict[str, Any] | None, after: dict[str, Any] | None) -> list[Change]:
    """Every leaf that differs between two JSON documents (readings or results), in the order of
    the newer document, then what the newer one no longer has.

    A number is compared exactly as stored (full precision), a reading typed as text as typed:
    "38.10" for "38.1" is a change of the record (a digit more was read), a corrected 38.01 is a
    change; a reading stored as a JSON number (before readings kept their text) and the same
    reading re-typed are not (38.1 and "38.1", see ``readings_paths.same``).
    """
    old, new = _leaves(before or {}), _leaves(after or {})
    found = []
    for path in [*new, *(p for p in old if p not in new)]:
        a, b = old.get(path, _ABSENT), new.get(path, _ABSENT)
        if isinstance(a, str) != isinstance(b, str) and a is not _ABSENT and b is not _ABSENT and same(a, b):
            continue
        if a != b or isinstance(a, bool) != isinstance(b, bool):
            found.append(Change(path, a, b))
    return [c for c in found if c.path]
