"""``claybench export``, run as a real process against the test's own database (DESIGN.md
section 7): CSV and AGS4 to standard output, XLSX to a file, refusals as JSON with exit status 2.

The job is the one of tests/exchange/test_results_sheet.py, with its sourced check values.
"""

from __future__ import annotations

import csv
import io
import json
import os
import subprocess
import sys
from pathlib import Path
from typing import Any

import openpyxl

from server.db.session import Database
from server.exchange.results_sheet import FULL
from tests.conftest import People
from tests.exchange.test_results_sheet import build_job
from tests.support.ags4_files import checker_errors
from tests.support.scenario import small_job


def export(*args: str, url: str, data_dir: Path) -> subprocess.CompletedProcess[bytes]:
    """The command as a script runs it, its output kept as bytes (XLSX is binary)."""
    return subprocess.run(
        [sys.executable, "-m", "server.cli", "export", *args],
        capture_output=True,
        env={**os.environ, "DATABASE_URL": url, "CLAYBENCH_DATA_DIR": str(data_dir)},
        timeout=120,
        check=False,
    )


def refusal(done: subprocess.CompletedProcess[bytes]) -> dict[str, Any]:
    assert done.returncode == 2, done.stderr  # DESIGN.md section 7: a refusal exits 2
    printed: dict[str, Any] = json.loads(done.stdout)
    return printed


def test_csv_goes_to_standard_output(tmp_path: Path, database_url: str, db: Database, people: People) -> None:
    build_job(db, people)

    done = export("T-100", "--format", "csv", url=database_url, data_dir=tmp_path)

    assert done.returncode == 0, done.stderr
    assert done.stdout.startswith(b"\xef\xbb\xbf")  # UTF-8 with the BOM, as the file download
    rows = list(csv.DictReader(io.StringIO(done.stdout.decode("utf-8-sig"), newline="")))
    assert [r["Sample"] for r in rows] == ["BH1-S1", "BH2-S1"]  # the withdrawn and unapproved left out
    assert rows[0]["Liquid limit LL (%)"] == "40"  # Das, ASTM D4318 whole numbers
    assert round(float(rows[0]["Liquid limit LL (%)" + FULL]), 2) == 39.67  # Das: least squares


def test_xlsx_goes_to_the_file_named_by_o(
    tmp_path: Path, database_url: str, db: Database, people: People
) -> None:
    build_job(db, people)
    target = tmp_path / "T-100.xlsx"

    done = export("T-100", "--format", "xlsx", "-o", str(target), url=database_url, data_dir=tmp_path)

    assert done.returncode == 0, done.stderr
    said = json.loads(done.stdout)
    # computed: two samples, four approved tests (tests/exchange/test_results_sheet.py)
    assert said == {
        "job": "T-100",
        "format": "xlsx",
        "file": str(target),
        "bytes": target.stat().st_size,
        "samples": 2,
        "tests": 4,
    }
    book = openpyxl.load_workbook(target)
    assert book.sheetnames == ["Summary", "water-content", "atterberg", "classification", "vane"]
    assert book["Summary"]["B2"].value == "BH1"  # the first sample's location


def test_an_unknown_job_exits_2_naming_it(tmp_path: Path, database_url: str, db: Database) -> None:
    done = export("NO-SUCH-JOB", "--format", "csv", url=database_url, data_dir=tmp_path)

    message = "there is no job numbered 'NO-SUCH-JOB'"
    assert refusal(done) == {"errors": [{"field": "job", "message": message}]}


def test_a_job_with_nothing_approved_exits_2_and_writes_nothing(
    tmp_path: Path, database_url: str, db: Database, people: People
) -> None:
    small_job(db, people.admin)  # T-100 with one requested test, nothing approved
    target = tmp_path / "out.xlsx"

    done = export("T-100", "--format", "xlsx", "-o", str(target), url=database_url, data_dir=tmp_path)

    (error,) = refusal(done)["errors"]
    assert error["field"] == "tests" and "no approved test" in error["message"]
    assert not target.exists()


def test_ags4_goes_to_standard_output_and_passes_the_ags_checker(
    tmp_path: Path, database_url: str, db: Database, people: People
) -> None:
    build_job(db, people)

    done = export("T-100", "--format", "ags4", url=database_url, data_dir=tmp_path)

    assert done.returncode == 0, done.stderr
    text = done.stdout.decode("ascii")  # AGS Format Rule 1: ASCII
    assert text.startswith('"GROUP","PROJ"\r\n')  # AGS Format Rules 2a, 5: quoted, CRLF
    assert checker_errors(text, tmp_path) == {}  # python-ags4's checker: zero errors (DESIGN.md section 7)
    assert '"BH1-S2"' not in text and '"BH1-S3"' not in text  # withdrawn, not approved: left out
