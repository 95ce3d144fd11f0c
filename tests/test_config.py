"""Settings refuse what would be unsafe on a laboratory's live server, and say which setting."""

from __future__ import annotations

from pathlib import Path

import pytest
from pydantic import ValidationError

from server.config import Settings

OWN_KEY = "a3f9c1d27e5b4608b9d1e2f3a4b5c6d7e8f90123"  # 40 characters, nobody's example


def _production(tmp_path: Path, **values: str) -> Settings:
    return Settings(environment="production", data_dir=tmp_path, **values)  # type: ignore[arg-type]


@pytest.mark.parametrize(
    "values",
    [
        {},  # no key: one would be generated per machine, and replicas would disagree
        {"secret_key": "change-me-please-change-me-please-000"},  # docker-compose's example
        {"secret_key": "password" * 5},
    ],
    ids=["missing", "example", "password"],
)
def test_production_refuses_a_missing_or_example_secret_key(tmp_path: Path, values: dict[str, str]) -> None:
    with pytest.raises(ValidationError, match="CLAYBENCH_SECRET_KEY must be set"):
        _production(tmp_path, **values)


@pytest.mark.parametrize(
    ("field", "password"),
    [("DATABASE_URL", "change-me-too"), ("DATABASE_URL", "postgres"), ("migrate_database_url", "secret")],
)
def test_production_refuses_example_database_passwords_without_repeating_them(
    tmp_path: Path, field: str, password: str
) -> None:
    url = f"postgresql+psycopg://claybench:{password}@db:5432/claybench"
    with pytest.raises(ValidationError) as refused:
        _production(tmp_path, secret_key=OWN_KEY, **{field: url})
    assert "has an example password" in str(refused.value)
    assert f":{password}@" not in str(refused.value).split("input_value")[0]  # the message names no secret


def test_production_starts_with_secrets_of_its_own_and_turns_on_https_only_cookies(tmp_path: Path) -> None:
    url = "postgresql+psycopg://claybench:Vq8-kLp2-Zr71@db:5432/claybench"
    settings = _production(tmp_path, secret_key=OWN_KEY, DATABASE_URL=url)
    assert settings.https_only_cookies and settings.production
    assert not (tmp_path / "secret_key").exists()  # nothing generated


def test_development_keeps_working_without_any_secret(tmp_path: Path) -> None:
    settings = Settings(data_dir=tmp_path)
    assert not settings.https_only_cookies
    assert len(settings.resolved_secret_key()) >= 32  # generated once into the data folder


def test_metrics_are_on_loopback_by_default_and_a_port_out_of_range_is_refused_by_name(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    for name in ("CLAYBENCH_METRICS_HOST", "CLAYBENCH_METRICS_PORT"):
        monkeypatch.delenv(name, raising=False)
    default = Settings(data_dir=tmp_path)
    assert (default.metrics_host, default.metrics_port) == ("127.0.0.1", 9464)
    monkeypatch.setenv("CLAYBENCH_METRICS_PORT", "70000")  # TCP ports end at 65535 (RFC 793)
    with pytest.raises(ValidationError, match="metrics_port"):
        Settings(data_dir=tmp_path)
    monkeypatch.setenv("CLAYBENCH_METRICS_PORT", "0")  # off
    assert Settings(data_dir=tmp_path).metrics_port == 0
