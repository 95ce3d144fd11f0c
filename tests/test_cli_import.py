"""``claybench import``, run as a real process against a real database (DESIGN.md section 7).

The files are the fictional Wendle Moor schedules of tests/services/test_imports.py; the
database is the test's own (SQLite or PostgreSQL), handed to the command as DATABASE_URL.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from server.db.session import Database
from tests.services.test_imports import (
    CLIENT,
    CREATED,
    JOB,
    NONE,
    ROWS,
    SITE,
    TITLE,
    ags_bytes,
    csv_bytes,
    events_since,
    job_named,
    last_event_id,
    stored_samples,
    table_counts,
)
from tests.support.ags4_files import line_of
from tests.test_cli import claybench

NEW_JOB = ["--job", JOB, "--client", CLIENT, "--title", TITLE, "--site", SITE]


def run_import(path: Path, *args: str, url: str) -> tuple[int, dict[str, object]]:
    """The command's exit status and the JSON it printed (the whole of its stdout)."""
    done = claybench(
        "import", str(path), *args, env={"DATABASE_URL": url, "CLAYBENCH_DATA_DIR": str(path.parent)}
    )
    assert done.stderr == "", done.stderr  # nothing but the JSON is said
    printed: dict[str, object] = json.loads(done.stdout)
    return done.returncode, printed


def test_an_import_prints_its_outcome_as_json_and_exits_0(
    tmp_path: Path, database_url: str, db: Database
) -> None:
    path = tmp_path / "schedule.csv"
    path.write_bytes(csv_bytes(ROWS))
    first = last_event_id(db)

    code, printed = run_import(path, *NEW_JOB, "--user", "tech", url=database_url)

    assert code == 0  # DESIGN.md section 7
    # DESIGN.md section 7, exactly: job, dry_run, created, updated, unchanged; counts computed from ROWS
    assert printed == {"job": JOB, "dry_run": False, "created": CREATED, "updated": NONE, "unchanged": NONE}
    job, client = job_named(db, JOB)
    assert (job.title, job.site, client) == (TITLE, SITE, CLIENT)  # --client, --title, --site create it
    assert len(stored_samples(db, job.id or 0)) == 3  # ROWS
    (event,) = [e for e in events_since(db, first) if e.action == "import"]
    assert (event.entity, event.entity_id, event.actor) == ("job", job.id, "tech")  # --user names the actor


def test_a_refused_file_exits_2_with_row_numbered_errors_and_stores_nothing(
    tmp_path: Path, database_url: str, db: Database
) -> None:
    path = tmp_path / "schedule.csv"
    rows = [ROWS[0], [*ROWS[1][:6], "2,5,0", *ROWS[1][7:]], ROWS[2]]  # BH01-D2's top, on row 3
    path.write_bytes(csv_bytes(rows))
    before = table_counts(db)

    code, printed = run_import(path, *NEW_JOB, url=database_url)

    assert code == 2  # DESIGN.md section 7
    # DESIGN.md section 7: the row a spreadsheet program shows (header row 1) and the file's header
    assert printed == {
        "errors": [{"row": 3, "column": "Depth top (m)", "message": '"2,5,0" is not a number'}]
    }
    assert table_counts(db) == before  # nothing stored: not the job, the client, nor the valid rows


def test_a_dry_run_prints_the_counts_and_stores_nothing(
    tmp_path: Path, database_url: str, db: Database
) -> None:
    path = tmp_path / "schedule.csv"
    path.write_bytes(csv_bytes(ROWS))
    before = table_counts(db)

    code, printed = run_import(path, *NEW_JOB, "--dry-run", url=database_url)

    assert code == 0
    # DESIGN.md section 7: the same outcome, "dry_run" true; counts computed from ROWS
    assert printed == {"job": JOB, "dry_run": True, "created": CREATED, "updated": NONE, "unchanged": NONE}
    assert table_counts(db) == before  # --dry-run: nothing stored


def test_an_ags4_file_is_read_by_its_extension_and_creates_the_job_its_proj_names(
    tmp_path: Path, database_url: str, db: Database
) -> None:
    path = tmp_path / "wendle-moor.ags"
    path.write_bytes(ags_bytes())

    code, printed = run_import(path, url=database_url)  # no --job: AGS4 names its own (PROJ_ID)

    assert code == 0
    created = {"locations": 2, "samples": 3, "tests": 0}  # computed from LOCA and SAMP
    assert printed == {
        "job": "J2632",
        "dry_run": False,
        "created": created,
        "updated": NONE,
        "unchanged": NONE,
    }
    job, client = job_named(db, "J2632")
    assert (job.title, job.site, client) == (TITLE, SITE, CLIENT)  # PROJ_NAME, PROJ_LOC, PROJ_CLNT


def test_a_refused_ags4_file_exits_2_with_group_line_and_heading(
    tmp_path: Path, database_url: str, db: Database
) -> None:
    path = tmp_path / "wendle-moor.ags"
    text = ags_bytes().decode("ascii").replace('"1.65"', '"1.6"')  # 2DP wants 1.65 (AGS Format Rule 8)
    path.write_bytes(text.encode("ascii"))
    before = table_counts(db)

    code, printed = run_import(path, url=database_url)

    assert code == 2
    errors = printed["errors"]
    assert isinstance(errors, list)
    # DESIGN.md section 7: AGS4 errors carry group, line and heading; python-ags4's rule and words
    assert [(e["group"], e["line"], e["heading"]) for e in errors] == [
        ("SAMP", line_of(text, '"1.6"'), "SAMP_BASE")
    ]
    assert errors[0]["message"].startswith("AGS Format Rule 8: ")
    assert table_counts(db) == before


@pytest.mark.parametrize(
    ("name", "column", "message"),
    [
        # DESIGN.md section 7: the format comes from the extension (.csv, .xlsx, .ags)
        ("schedule.ods", "file", "'schedule.ods' is not a .csv, .xlsx or .ags file"),
        ("missing.csv", "file", "cannot read "),  # server/cli.py: a file that is not there
    ],
)
def test_a_file_of_another_kind_or_none_at_all_exits_2(
    tmp_path: Path, name: str, column: str, message: str
) -> None:
    path = tmp_path / name
    if name != "missing.csv":
        path.write_bytes(csv_bytes(ROWS))
    url = f"sqlite:///{tmp_path / 'untouched.sqlite3'}"

    code, printed = run_import(path, "--job", JOB, url=url)

    assert code == 2
    errors = printed["errors"]
    assert isinstance(errors, list) and len(errors) == 1
    error = errors[0]
    assert (error["column"], error["message"][: len(message)]) == (column, message)
    assert set(error) == {"row", "column", "message"}  # the spreadsheet shape (DESIGN.md section 7)
    assert not (tmp_path / "untouched.sqlite3").exists()  # refused before the database was opened
