"""Shared fixtures: real databases built by the migrations, on SQLite and on PostgreSQL.

The PostgreSQL server is started by .ci/run (or by you) and named by
CLAYBENCH_TEST_POSTGRES_URL (a URL to its maintenance database). Each test gets a fresh
database: an SQLite file copied from one migrated once per run, or a PostgreSQL database
created from a migrated template. Without a server the PostgreSQL cases are skipped, unless
CLAYBENCH_REQUIRE_POSTGRES=1 (as in CI), where that is an error.
"""

from __future__ import annotations

import os
import shutil
import uuid
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import pytest
from fastapi.testclient import TestClient
from hypothesis import settings as hypothesis_settings
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url
from sqlmodel import select

from server.config import Settings
from server.db.migrate import upgrade
from server.db.session import Database
from server.db.tables import User
from server.main import create_app
from server.services.users import create_user

# CI explores the same generated cases on every run, so a run fails only for a change in the code;
# developers' runs stay random and keep finding new cases (their failures are saved by hypothesis).
hypothesis_settings.register_profile("ci", derandomize=True, database=None)
if os.environ.get("CI"):
    hypothesis_settings.load_profile("ci")

PG_ENV = "CLAYBENCH_TEST_POSTGRES_URL"
BACKENDS = ["sqlite", "postgresql"]
PASSWORDS = {
    "tech": "tech-password-1",
    "review": "review-password-1",
    "review2": "review2-password-1",
    "admin": "admin-password-1",
}


def _pg_admin_url() -> str | None:
    url = os.environ.get(PG_ENV)
    if url:
        return url
    if os.environ.get("CLAYBENCH_REQUIRE_POSTGRES") == "1":
        pytest.fail(f"{PG_ENV} is not set but CLAYBENCH_REQUIRE_POSTGRES=1: start the test server first")
    return None


PEOPLE = (("tech", "technician"), ("review", "reviewer"), ("review2", "reviewer"), ("admin", "admin"))


def _prepare_template(url: str) -> None:
    """Migrate, then add the test users once (argon2 hashing is deliberately slow)."""
    upgrade(url)
    database = Database(url)
    for name, role in PEOPLE:
        create_user(database, None, name, f"{name.title()} Person", role, PASSWORDS[name])
    database.dispose()


@pytest.fixture(scope="session")
def sqlite_template(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("template") / "template.sqlite3"
    _prepare_template(f"sqlite:///{path}")
    return path


@pytest.fixture(scope="session")
def pg_template() -> Iterator[tuple[str, str] | None]:
    """(admin URL, template database name) with the schema migrated once per run."""
    admin = _pg_admin_url()
    if admin is None:
        yield None
        return
    name = f"claybench_tpl_{uuid.uuid4().hex[:8]}"
    engine = create_engine(admin, isolation_level="AUTOCOMMIT")
    with engine.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    _prepare_template(make_url(admin).set(database=name).render_as_string(hide_password=False))
    yield admin, name
    with engine.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
    engine.dispose()


@pytest.fixture
def database_url(
    backend: str, tmp_path: Path, sqlite_template: Path, pg_template: tuple[str, str] | None
) -> Iterator[str]:
    """A fresh, migrated database for one test, on the backend of this run of the test."""
    if backend == "sqlite":
        path = tmp_path / "claybench.sqlite3"
        shutil.copy(sqlite_template, path)
        yield f"sqlite:///{path}"
        return
    if pg_template is None:
        pytest.skip(f"no PostgreSQL server for the tests ({PG_ENV} not set)")
    admin, template = pg_template
    name = f"claybench_t_{uuid.uuid4().hex[:10]}"
    engine = create_engine(admin, isolation_level="AUTOCOMMIT")
    with engine.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}" TEMPLATE "{template}"'))
    yield make_url(admin).set(database=name).render_as_string(hide_password=False)
    with engine.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
    engine.dispose()


@pytest.fixture(params=BACKENDS)
def backend(request: pytest.FixtureRequest) -> str:
    """Every test that uses a database runs once on SQLite and once on PostgreSQL."""
    return str(request.param)


@pytest.fixture
def db(database_url: str) -> Iterator[Database]:
    database = Database(database_url)
    yield database
    database.dispose()


@pytest.fixture
def settings(tmp_path: Path, database_url: str) -> Settings:
    return Settings(
        data_dir=tmp_path / "data",
        DATABASE_URL=database_url,
        secret_key="t" * 48,
        public_base_url="http://testserver",
    )


@dataclass
class People:
    tech: User
    review: User
    review2: User
    admin: User


@pytest.fixture
def people(db: Database) -> People:
    """The four test users every test database starts with (see ``_prepare_template``)."""
    with db.session() as s:
        found = {u.username: u for u in s.exec(select(User))}
    return People(**{name: found[name] for name, _ in PEOPLE})


@pytest.fixture
def app_client(settings: Settings, db: Database) -> Iterator[TestClient]:
    with TestClient(create_app(settings, db), base_url="http://testserver") as client:
        yield client


@pytest.fixture
def second_client(app_client: TestClient) -> Iterator[TestClient]:
    """Another browser on the same app, with cookies of its own (another desk, a copied cookie)."""
    with TestClient(app_client.app, base_url="http://testserver") as other:
        yield other
