"""Alembic environment: migrates the database named by the caller or by the settings."""

from __future__ import annotations

from alembic import context
from sqlalchemy import Connection
from sqlmodel import SQLModel

from server.config import get_settings
from server.db import tables  # noqa: F401  (every table must be imported before the metadata is read)
from server.db.session import make_engine

target_metadata = SQLModel.metadata


def _run(connection: Connection) -> None:
    context.configure(
        connection=connection,
        target_metadata=target_metadata,
        render_as_batch=connection.dialect.name == "sqlite",
        compare_type=True,
    )
    with context.begin_transaction():
        context.run_migrations()


def run_migrations_online() -> None:
    url = context.config.attributes.get("database_url") or get_settings().database_url
    engine = make_engine(url)
    with engine.connect() as connection:
        _run(connection)
    engine.dispose()


if context.is_offline_mode():
    raise SystemExit("offline migrations are not supported; run `claybench migrate`")
run_migrations_online()
