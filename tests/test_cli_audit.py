"""``claybench audit verify``, run as a real process (as a scheduled check of the trail would run it)."""

from __future__ import annotations

from pathlib import Path

from server.db.session import Database
from tests.conftest import People
from tests.services.test_audit_chain import events, forge_after, remove_event, some_work
from tests.test_cli import claybench


def _verify(database_url: str, tmp_path: Path) -> tuple[int, str]:
    done = claybench(
        "audit", "verify", env={"DATABASE_URL": database_url, "CLAYBENCH_DATA_DIR": str(tmp_path / "data")}
    )
    assert done.stderr == "", done.stderr
    return done.returncode, done.stdout


def test_verify_passes_on_a_fresh_trail_and_prints_its_head(
    db: Database, people: People, database_url: str, tmp_path: Path
) -> None:
    some_work(db, people)
    trail = events(db)
    code, out = _verify(database_url, tmp_path)
    assert code == 0, out
    assert f"checked {len(trail)} audit events: trail intact" in out
    assert trail[-1].sha256 in out


def test_verify_exits_1_naming_the_event_that_was_changed(
    db: Database, people: People, database_url: str, tmp_path: Path
) -> None:
    some_work(db, people)
    target = events(db)[-2]
    forge_after(db, target.id or 0, '{"code": "AC-1", "title": "Rewritten"}')
    code, out = _verify(database_url, tmp_path)
    assert code == 1, out
    assert f"event {target.id}: changed:" in out


def test_verify_exits_1_naming_the_event_after_a_removed_one(
    db: Database, people: People, database_url: str, tmp_path: Path
) -> None:
    some_work(db, people)
    trail = events(db)
    remove_event(db, trail[3].id or 0)
    code, out = _verify(database_url, tmp_path)
    assert code == 1, out
    assert f"event {trail[4].id}: removed:" in out
