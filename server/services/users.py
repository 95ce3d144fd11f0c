"""Use-cases for people: create a user, check a sign-in, and the admin's changes to people
(name, role, activation, password reset), each audited in the same transaction."""

from __future__ import annotations

from sqlmodel import Session, select

from server.auth.passwords import hash_password, password_problem, verify_password
from server.db.session import Database
from server.db.tables import User
from server.services import audit, sessions
from server.services.errors import Conflict, Forbidden, NotFound, invalid
from server.workflow.states import Role

USERNAME_MAX = 64  # the column's length (server.db.tables.User)
FULL_NAME_MAX = 200


def create_user(
    db: Database, actor: User | None, username: str, full_name: str, role: str, password: str
) -> User:
    """Add a user; the audit event records who added whom, never the password.

    ``actor`` None is the machine's own operator (the ``create-user`` command, the demo);
    a person doing it in the app must be an admin.
    """
    if actor is not None:
        _admin(actor)
    username = username.strip().lower()
    if not username or not username.replace("-", "").replace(".", "").replace("_", "").isalnum():
        raise invalid("username", "username must be letters, digits, '.', '-' or '_'")
    if len(username) > USERNAME_MAX:
        raise invalid("username", f"the username is limited to {USERNAME_MAX} characters")
    full_name = " ".join(full_name.split())
    if len(full_name) > FULL_NAME_MAX:
        raise invalid("full_name", f"the full name is limited to {FULL_NAME_MAX} characters")
    if role not in set(Role):
        raise invalid("role", f"role must be one of {', '.join(r.value for r in Role)}")
    problem = password_problem(password)
    if problem:
        raise invalid("password", problem)
    with db.transaction() as s:
        if s.exec(select(User).where(User.username == username)).first():
            raise Conflict(f"user {username!r} exists already")
        user = User(
            username=username,
            full_name=full_name or username,
            role=role,
            password_hash=hash_password(password),
        )
        s.add(user)
        s.flush()
        audit.record(
            s,
            actor,
            "user",
            user.id or 0,
            "create",
            after={"username": username, "full_name": user.full_name, "role": role},
        )
        return user


def authenticate(db: Database, username: str, password: str) -> User | None:
    """The active user with this username and password, or None (same cost either way: an
    unknown name is checked against a dummy hash, so the answer's timing does not tell)."""
    typed = username.strip().lower()
    user = None
    if typed and len(typed) <= USERNAME_MAX and "\x00" not in typed:
        with db.session() as s:
            user = s.exec(select(User).where(User.username == typed)).first()
    ok = verify_password(password, user.password_hash if user else None)
    if user is None or not ok or not user.active:
        return None
    return user


# -- the admin's management of people (every change audited, never the password itself) ---------


def _admin(actor: User) -> None:
    if actor.role != Role.admin.value or not actor.active:
        raise Forbidden("only an admin manages users")


def _load(s: Session, user_id: int) -> User:
    user = s.get(User, user_id)
    if user is None:
        raise NotFound(f"user {user_id} does not exist")
    return user


def _other_active_admins(s: Session, user_id: int) -> int:
    return len(
        s.exec(
            select(User.id).where(User.role == Role.admin.value, User.active == True, User.id != user_id)  # noqa: E712
        ).all()
    )


def _reason(reason: str) -> str | None:
    reason = reason.strip()
    if len(reason) > 1000:
        raise invalid("reason", "the reason is limited to 1000 characters")
    return reason or None


def update_user(
    db: Database, actor: User, user_id: int, *, full_name: str, role: str, reason: str = ""
) -> User:
    """Change a person's name or role. The last active admin keeps the admin role, so the
    laboratory is never left without someone who can manage users."""
    _admin(actor)
    full_name = " ".join(full_name.split())
    if not full_name:
        raise invalid("full_name", "a full name is required: it is printed beside signatures")
    if len(full_name) > FULL_NAME_MAX:
        raise invalid("full_name", f"the full name is limited to {FULL_NAME_MAX} characters")
    if role not in set(Role):
        raise invalid("role", f"role must be one of {', '.join(r.value for r in Role)}")
    why = _reason(reason)
    with db.transaction() as s:
        user = _load(s, user_id)
        before = {"full_name": user.full_name, "role": user.role}
        after = {"full_name": full_name, "role": role}
        if before == after:
            return user
        if user.role == Role.admin.value and role != Role.admin.value and user.active:
            if not _other_active_admins(s, user_id):
                raise invalid("role", "this is the last active admin: make someone else admin first")
        user.full_name, user.role = full_name, role
        s.add(user)
        audit.record(
            s,
            actor,
            "user",
            user_id,
            "role" if before["role"] != role else "rename",
            before=before,
            after=after,
            reason=why,
        )
        return user


def set_active(db: Database, actor: User, user_id: int, active: bool, reason: str = "") -> User:
    """Deactivate (or reactivate) a person. A deactivated user cannot sign in, every session of
    theirs ends at once (the session version moves on), and their past signatures stay valid:
    the user is never deleted, so approvals keep naming them."""
    _admin(actor)
    why = _reason(reason)
    if not active and not why:
        raise invalid("reason", "say why the account is deactivated")
    with db.transaction() as s:
        user = _load(s, user_id)
        if user.active == active:
            return user
        if not active and user.id == actor.id:
            raise invalid("active", "you cannot deactivate your own account")
        if not active and user.role == Role.admin.value and not _other_active_admins(s, user_id):
            raise invalid("active", "this is the last active admin: make someone else admin first")
        user.active = active
        s.add(user)
        ended = 0 if active else sessions.end_all(s, user_id, "deactivated")
        audit.record(
            s,
            actor,
            "user",
            user_id,
            "activate" if active else "deactivate",
            before={"active": not active},
            after={"active": active} | ({"sessions_ended": ended} if ended else {}),
            reason=why,
        )
        return user


def reset_password(db: Database, actor: User, user_id: int, new_password: str, reason: str = "") -> User:
    """Set a new password for a person; their open sessions end. The event records that the
    password was reset, never the password or its hash."""
    _admin(actor)
    problem = password_problem(new_password)
    if problem:
        raise invalid("password", problem)
    why = _reason(reason)
    new_hash = hash_password(new_password)
    with db.transaction() as s:
        user = _load(s, user_id)
        user.password_hash = new_hash
        s.add(user)
        ended = sessions.end_all(s, user_id, "password reset")
        audit.record(
            s,
            actor,
            "user",
            user_id,
            "password",
            after={"password": "reset", "sessions_ended": ended},
            reason=why,
        )
        return user


def change_own_password(db: Database, user: User, current: str, new: str, keep_session: int | None) -> int:
    """A person sets a new password, proving the current one; every other session of theirs
    ends (this browser stays signed in). Returns how many sessions ended."""
    if not verify_password(current, user.password_hash):
        raise invalid("current_password", "the current password is not right")
    problem = password_problem(new)
    if problem:
        raise invalid("new_password", problem)
    if verify_password(new, user.password_hash):
        raise invalid("new_password", "the new password must differ from the current one")
    new_hash = hash_password(new)
    with db.transaction() as s:
        stored = _load(s, user.id or 0)
        stored.password_hash = new_hash
        s.add(stored)
        ended = sessions.end_all(s, user.id or 0, "password changed", keep=keep_session)
        audit.record(
            s, user, "user", user.id or 0, "password", after={"password": "changed", "sessions_ended": ended}
        )
        return ended


def record_refused_sign_in(db: Database, username: str, address: str, why: str) -> None:
    """Write a refused sign-in (wrong password, unknown name, inactive account, throttled)
    to the audit trail for the admins' sign-in page. No one is signed in, so the event's actor
    is the system; the name as typed and the address say who tried."""
    typed = username.replace("\x00", "").strip().lower()[:USERNAME_MAX]  # PostgreSQL text holds no NUL
    with db.transaction() as s:
        known = s.exec(select(User.id).where(User.username == typed)).first() if typed else None
        audit.record(
            s,
            None,
            "sign-in",
            known or 0,
            "refused",
            after={"username": typed, "address": address[:64], "why": why},
        )


def user_named(db: Database, username: str) -> User:
    """The active user with this username (the command line acts in a person's name)."""
    with db.session() as s:
        user = s.exec(select(User).where(User.username == username.strip().lower())).first()
    if user is None or not user.active:
        raise NotFound(f"no active user is named {username.strip()!r}")
    return user
