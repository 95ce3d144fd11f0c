"""The PostgreSQL roles of migrations/postgres-init/10-roles.sql: the application's role reads and
adds audit events but may not change or remove one, while it changes every other table.

The script itself is run with psql, as the PostgreSQL image runs it, with role names of this
test's own (roles belong to the whole server, which other tests share).
"""

from __future__ import annotations

import os
import shutil
import subprocess
import uuid
from collections.abc import Iterator
from dataclasses import dataclass

import pytest
from sqlalchemy import Engine, create_engine, text
from sqlalchemy.engine import make_url
from sqlalchemy.exc import ProgrammingError
from sqlmodel import select

from server.config import ROOT
from server.db.migrate import upgrade
from server.db.session import Database
from server.db.tables import User
from server.services import jobs
from server.services.audit_chain import verify
from server.services.users import create_user
from tests.conftest import PG_ENV

SCRIPT = ROOT / "migrations" / "postgres-init" / "10-roles.sql"

pytestmark = [pytest.mark.postgres, pytest.mark.parametrize("backend", ["postgresql"])]


def _psql() -> str:
    found = shutil.which("psql")
    if found is None:
        if os.environ.get("CLAYBENCH_REQUIRE_POSTGRES") == "1":
            pytest.fail("psql is needed to run the role script (package postgresql-client)")
        pytest.skip("psql is not installed")
    return found


def _as(url: str, user: str) -> str:
    return make_url(url).set(username=user, password=None).render_as_string(hide_password=False)


def run_script(database_url: str, owner: str, app: str) -> None:
    """The role script, in the given database, as the server's superuser."""
    libpq = make_url(database_url).set(drivername="postgresql").render_as_string(hide_password=False)
    done = subprocess.run(
        [_psql(), libpq, "-X", "-q", "-f", str(SCRIPT)],
        env={**os.environ, "CLAYBENCH_OWNER_ROLE": owner, "CLAYBENCH_APP_ROLE": app},
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )
    assert done.returncode == 0, done.stdout + done.stderr


@dataclass
class Roles:
    owner: str
    app: str


@pytest.fixture
def roles() -> Iterator[Roles]:
    """Two role names of this test; dropped afterwards (with anything granted to them)."""
    admin = os.environ.get(PG_ENV)
    if not admin:
        pytest.skip(f"no PostgreSQL server for the tests ({PG_ENV} not set)")
    tag = uuid.uuid4().hex[:8]
    made = Roles(owner=f"claybench_owner_{tag}", app=f"claybench_app_{tag}")
    yield made
    engine = create_engine(admin, isolation_level="AUTOCOMMIT")
    with engine.connect() as conn:
        for name in (made.app, made.owner):
            conn.execute(text(f'DROP ROLE IF EXISTS "{name}"'))
    engine.dispose()


@pytest.fixture
def empty_database() -> Iterator[str]:
    """A database with nothing in it, like the one the PostgreSQL image creates at first start."""
    admin = os.environ.get(PG_ENV)
    if not admin:
        pytest.skip(f"no PostgreSQL server for the tests ({PG_ENV} not set)")
    name = f"claybench_r_{uuid.uuid4().hex[:10]}"
    engine = create_engine(admin, isolation_level="AUTOCOMMIT")
    with engine.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    yield make_url(admin).set(database=name).render_as_string(hide_password=False)
    with engine.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
    engine.dispose()


def _refused(engine: Engine, statement: str) -> str:
    with pytest.raises(ProgrammingError) as refused, engine.begin() as conn:
        conn.execute(text(statement))
    return str(refused.value)


def _shows_the_apps_privileges(app_url: str) -> None:
    """As the application: add and read through the services, change a client, but never an event."""
    db = Database(app_url)
    try:
        with db.session() as s:
            admin = s.exec(select(User).where(User.role == "admin")).first()
        assert admin is not None  # tests/conftest.py's template, or the one added below
        client = jobs.create_client(db, admin, "Role Test Client")  # INSERT into client and audit_event
        jobs.update_client(db, admin, client.id or 0, "Role Test Client Ltd", "", "", "")  # UPDATE client
        assert verify(db) is None  # SELECT on audit_event
        for statement in (
            "UPDATE audit_event SET action = 'forged'",
            "DELETE FROM audit_event",
            "TRUNCATE audit_event",
        ):
            assert "permission denied for table audit_event" in _refused(db.engine, statement)
        with db.engine.begin() as conn:  # the other tables: changed and removed as the app needs
            assert conn.execute(text("UPDATE client SET contact = 'desk' WHERE id = :id"), {"id": client.id})
            conn.execute(text("DELETE FROM staged_import"))
        assert verify(db) is None
    finally:
        db.dispose()


# ``roles`` comes first in each test's arguments: set up first, it is torn down last, once the
# database holding everything granted to the roles is gone.


def test_a_new_server_set_up_by_the_script_then_migrated_by_the_owner(
    roles: Roles, empty_database: str, backend: str
) -> None:
    run_script(empty_database, roles.owner, roles.app)
    upgrade(_as(empty_database, roles.owner))  # migrations run as the owner, not the superuser
    app = Database(_as(empty_database, roles.app))
    try:
        create_user(app, None, "admin", "Admin Person", "admin", "admin-password-1")  # INSERT into user
    finally:
        app.dispose()
    _shows_the_apps_privileges(_as(empty_database, roles.app))


def test_an_existing_database_given_the_roles_by_the_script(roles: Roles, database_url: str) -> None:
    owner = make_url(database_url).username or "postgres"  # the tables' owner: who migrated them
    run_script(database_url, owner, roles.app)
    _shows_the_apps_privileges(_as(database_url, roles.app))
