"""Running the Alembic migrations from code (the CLI, the demo and the tests all use this)."""

from __future__ import annotations

from alembic import command
from alembic.config import Config

from server.config import ROOT


def alembic_config(database_url: str) -> Config:
    """An Alembic config pointing at migrations/ and the given database."""
    cfg = Config(toml_file=str(ROOT / "pyproject.toml"))
    cfg.attributes["database_url"] = database_url
    return cfg


def upgrade(database_url: str, revision: str = "head") -> None:
    """Bring the database's schema up to ``revision`` (the newest by default)."""
    command.upgrade(alembic_config(database_url), revision)


def downgrade(database_url: str, revision: str) -> None:
    """Take the schema back to ``revision`` (used by the migration tests)."""
    command.downgrade(alembic_config(database_url), revision)
