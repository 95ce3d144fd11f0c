"""Settings: one object, read from the environment (prefix ``CLAYBENCH_``, plus ``DATABASE_URL``).

The app must start with no configuration at all on a laboratory's own machine, so the
defaults point at a local data folder: the SQLite database and, when no secret key is given,
a generated key kept in that folder (so sessions survive a restart). Outside development a
weak or missing key given explicitly is refused rather than silently used.
"""

from __future__ import annotations

import secrets
from functools import lru_cache
from pathlib import Path

from pydantic import Field, model_validator
from pydantic_settings import BaseSettings, SettingsConfigDict

ROOT = Path(__file__).resolve().parents[1]
"""The repository root: templates/, static/ and migrations/ live beside the package."""


class Settings(BaseSettings):
    """Everything that differs between a laptop demo, a lab server and a test run."""

    model_config = SettingsConfigDict(env_prefix="CLAYBENCH_", extra="ignore")

    environment: str = "development"
    data_dir: Path = Field(default=Path("data"))
    database_url: str = Field(default="", validation_alias="DATABASE_URL")
    # The schema's owner, for `claybench migrate` only; the app itself connects with
    # DATABASE_URL, on PostgreSQL a role that may not change the audit trail (README).
    migrate_database_url: str = ""
    secret_key: str = ""
    public_base_url: str = "http://127.0.0.1:8000"
    https_only_cookies: bool = False
    self_approval_forbidden: bool = True
    session_max_age_s: int = 12 * 3600
    # Requests each API token may make (the ``limits`` library's notation). Counted in the
    # process's memory: one app process shares one count; several processes each count their own.
    api_rate_limit: str = "600/minute"

    @model_validator(mode="after")
    def _fill_defaults(self) -> Settings:
        if not self.database_url:
            self.database_url = f"sqlite:///{(self.data_dir / 'claybench.sqlite3').as_posix()}"
        if not self.migrate_database_url:
            self.migrate_database_url = self.database_url
        if self.environment != "development" and self.secret_key and len(self.secret_key) < 32:
            raise ValueError("CLAYBENCH_SECRET_KEY must be at least 32 characters outside development")
        return self

    def resolved_secret_key(self) -> str:
        """The signing key: the configured one, or one generated once and kept in the data folder."""
        if self.secret_key:
            return self.secret_key
        path = self.data_dir / "secret_key"
        if path.exists():
            return path.read_text().strip()
        self.data_dir.mkdir(parents=True, exist_ok=True)
        key = secrets.token_urlsafe(48)
        path.write_text(key)
        path.chmod(0o600)
        return key


@lru_cache
def get_settings() -> Settings:
    """The process-wide settings, read once; tests build their own ``Settings`` instead."""
    return Settings()
