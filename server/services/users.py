"""Use-cases for people: create a user, check a sign-in."""

from __future__ import annotations

from sqlmodel import select

from server.auth.passwords import hash_password, password_problem, verify_password
from server.db.session import Database
from server.db.tables import User
from server.services import audit
from server.services.errors import Conflict, invalid
from server.workflow.states import Role


def create_user(
    db: Database, actor: User | None, username: str, full_name: str, role: str, password: str
) -> User:
    """Add a user; the audit event records who added whom, never the password."""
    username = username.strip().lower()
    if not username or not username.replace("-", "").replace(".", "").replace("_", "").isalnum():
        raise invalid("username", "username must be letters, digits, '.', '-' or '_'")
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
            full_name=full_name.strip() or username,
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
    """The active user with this username and password, or None (same cost either way)."""
    with db.session() as s:
        user = s.exec(select(User).where(User.username == username.strip().lower())).first()
    ok = verify_password(password, user.password_hash if user else None)
    if user is None or not ok or not user.active:
        return None
    return user
