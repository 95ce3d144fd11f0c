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

from limits import parse_many
from pydantic import Field, model_validator
from pydantic_settings import BaseSettings, SettingsConfigDict
from sqlalchemy.engine import make_url

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
    # Cookies only over HTTPS (and HSTS sent): on by default when environment is "production".
    https_only_cookies: bool = False
    self_approval_forbidden: bool = True
    # A session ends after this long without a request, and in any case this long after sign-in.
    session_idle_s: int = Field(default=8 * 3600, ge=60, le=366 * 86400)
    session_max_age_s: int = Field(default=7 * 86400, ge=60, le=366 * 86400)
    # Requests each API token may make (the ``limits`` library's notation). Counted in the
    # process's memory: one app process shares one count; several processes each count their own.
    api_rate_limit: str = "600/minute"
    # Failed guesses allowed before a wait, in growing windows (``limits`` notation, ";" between
    # tiers): wrong passwords per account and per address, unknown share links or API tokens
    # per address. Counted in ``throttle_storage`` (a ``limits`` storage URI).
    signin_throttle_account: str = "5/minute;10/15 minutes;20/hour"
    signin_throttle_address: str = "20/minute;60/hour"
    token_throttle_address: str = "20/minute;100/hour"
    throttle_storage: str = "memory://"
    # Where `claybench serve` exports Prometheus metrics: a port of its own, never the app's, on
    # loopback unless told otherwise; port 0 turns it off (server/observability/metrics.py).
    metrics_host: str = "127.0.0.1"
    metrics_port: int = Field(default=9464, ge=0, le=65535)
    # A report render stops after this long or past this much memory (address space) and is
    # shown as failed, to be retried: a runaway render must not hold a worker or the machine.
    render_time_limit_s: float = Field(default=600.0, gt=0, le=86400)
    render_memory_limit_mb: int = Field(default=2048, ge=256, le=1024 * 1024)

    @model_validator(mode="after")
    def _fill_defaults(self) -> Settings:
        if not self.database_url:
            self.database_url = f"sqlite:///{(self.data_dir / 'claybench.sqlite3').as_posix()}"
        for name in ("signin_throttle_account", "signin_throttle_address", "token_throttle_address"):
            try:
                parse_many(getattr(self, name))
            except ValueError as exc:
                raise ValueError(f"CLAYBENCH_{name.upper()}: {exc}") from exc
        if self.production and "https_only_cookies" not in self.model_fields_set:
            self.https_only_cookies = True
        if not self.migrate_database_url:
            self.migrate_database_url = self.database_url
        if self.environment != "development" and self.secret_key and len(self.secret_key) < 32:
            raise ValueError("CLAYBENCH_SECRET_KEY must be at least 32 characters outside development")
        if self.production:
            self._refuse_defaults()
        return self

    def _refuse_defaults(self) -> None:
        """A live server starts only with secrets of its own: a key set by its operator (not one
        generated into a data folder that every replica would generate differently) and database
        passwords that are not an example's."""
        if not self.secret_key or _is_placeholder(self.secret_key):
            raise ValueError("CLAYBENCH_SECRET_KEY must be set to a random value of your own in production")
        for name, url in (
            ("DATABASE_URL", self.database_url),
            ("CLAYBENCH_MIGRATE_DATABASE_URL", self.migrate_database_url),
        ):
            password = make_url(url).password
            if password is not None and _is_placeholder(str(password)):
                raise ValueError(f"{name} has an example password: set one of your own in production")

    @property
    def production(self) -> bool:
        """A laboratory's live server: HTTPS-only cookies by default and HSTS."""
        return self.environment == "production"

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


PLACEHOLDERS = ("change-me", "changeme", "change_me", "replace-me", "example", "secret", "password")
"""Words of example secrets (ours in docker-compose.yml and the README, and the usual ones):
a secret that starts with one, or is a bare role name, is nobody's own (common practice)."""


def _is_placeholder(secret: str) -> bool:
    low = secret.strip().lower()
    return low in ("", "postgres", "claybench", "admin") or low.startswith(PLACEHOLDERS)


@lru_cache
def get_settings() -> Settings:
    """The process-wide settings, read once; tests build their own ``Settings`` instead."""
    return Settings()
