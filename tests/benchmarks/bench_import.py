"""Benchmark of importing a sample schedule: the whole import against the floor of reading the
same file and inserting the same rows with no checks, side by side.

Run from the repository root::

    python tests/benchmarks/bench_import.py [--rows 5000] [--repeat 3]
    python tests/benchmarks/bench_import.py --smoke      # CI: 200 rows, one round

A fictional schedule of ``--rows`` samples (ten to a borehole, one requested test on every
other one) is written as CSV. Each round, in a new throw-away SQLite database:

1. **floor**: ``csv.reader`` over the bytes, then one bulk INSERT of the locations and of the
   samples through SQLAlchemy Core, in one transaction: what any import must at least do;
2. **import**: ``services.imports.import_schedule`` end to end (read, check every cell, plan
   against the job, store with an audit event for every record, in one transaction);
3. **re-import**: the same file again, which must change nothing.

It prints each median, the ratio of the import to the floor, and the import's rows a second.
The target is a ratio of 40 or less: the import checks and audits every row, and writes one
audit event for each record it creates, so it is many times the bare insert (``--check`` exits
1 when the ratio is missed). Times are CPU time of this process. Compare ratios, never absolute
times across runs. Not collected by pytest.
"""

from __future__ import annotations

import argparse
import csv
import io
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from sqlalchemy import insert  # noqa: E402
from sqlmodel import select  # noqa: E402

from server.db.migrate import upgrade  # noqa: E402
from server.db.session import Database  # noqa: E402
from server.db.tables import Client, Job, Location, Sample, User, utcnow  # noqa: E402
from server.exchange.spreadsheet import read_spreadsheet  # noqa: E402
from server.services import imports  # noqa: E402
from server.services.users import create_user  # noqa: E402

TARGET_RATIO = 40.0
HEADER = "Location,Location type,Sample,Depth top (m),Depth base (m),Sample type,Description,Tests\n"


def schedule_csv(rows: int) -> bytes:
    """A fictional schedule: ten samples a borehole, a test on every other sample."""
    lines = [HEADER]
    for n in range(rows):
        hole, depth = f"BH{n // 10 + 1:04d}", 0.5 + (n % 10) * 1.5
        test = "water-content" if n % 2 else ""
        lines.append(
            f"{hole},borehole,{hole}-S{n % 10 + 1:02d},{depth:.2f},{depth + 0.45:.2f},U100,Firm CLAY,{test}\n"
        )
    return "".join(lines).encode()


def fresh_database(folder: Path, n: int) -> tuple[Database, User]:
    url = f"sqlite:///{folder / f'bench-{n}.sqlite3'}"
    upgrade(url)
    db = Database(url)
    admin = create_user(db, None, "admin", "Bench Admin", "admin", "bench-import-password")
    return db, admin


def floor(db: Database, data: bytes) -> float:
    """Parse the CSV and bulk-insert its rows, unchecked, in one transaction (CPU seconds)."""
    start = time.process_time()
    rows = list(csv.reader(io.StringIO(data.decode())))[1:]
    with db.transaction() as s:
        client = Client(name="Floor client")
        s.add(client)
        s.flush()
        job = Job(code="FLOOR", title="Floor", site="", client_id=client.id or 0, received_at=utcnow())
        s.add(job)
        s.flush()
        codes = sorted({r[0] for r in rows})
        s.execute(insert(Location), [{"job_id": job.id, "code": c, "kind": "borehole"} for c in codes])
        ids = {loc.code: loc.id for loc in s.exec(select(Location).where(Location.job_id == job.id))}
        s.execute(
            insert(Sample),
            [
                {
                    "job_id": job.id,
                    "location_id": ids[r[0]],
                    "code": r[2],
                    "depth_from_m": float(r[3]),
                    "depth_to_m": float(r[4]),
                    "sample_type": r[5],
                    "description": r[6],
                }
                for r in rows
            ],
        )
    return time.process_time() - start


def full_import(db: Database, admin: User, data: bytes) -> tuple[float, imports.ImportPlan]:
    start = time.process_time()
    schedule = read_spreadsheet("bench.csv", data)
    target = imports.Target("BENCH-1", "Bench client", "Benchmark job", "Nowhere")
    plan = imports.import_schedule(db, admin, schedule, target, source="bench.csv")
    return time.process_time() - start, plan


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rows", type=int, default=5000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--smoke", action="store_true", help="200 rows, one round (CI)")
    parser.add_argument("--check", action="store_true", help=f"exit 1 when the ratio exceeds {TARGET_RATIO}")
    args = parser.parse_args()
    rows, repeat = (200, 1) if args.smoke else (args.rows, args.repeat)
    data = schedule_csv(rows)
    floors, fulls, again = [], [], []
    with tempfile.TemporaryDirectory() as folder:
        for n in range(repeat):
            db, _ = fresh_database(Path(folder), 2 * n)
            floors.append(floor(db, data))
            db.dispose()
            db, admin = fresh_database(Path(folder), 2 * n + 1)
            seconds, plan = full_import(db, admin, data)
            fulls.append(seconds)
            assert plan.created.samples == rows, plan.outcome(False)
            seconds, plan = full_import(db, admin, data)
            again.append(seconds)
            assert plan.unchanged.samples == rows and plan.created.samples == 0, plan.outcome(False)
            db.dispose()
    base, whole, second = (statistics.median(x) for x in (floors, fulls, again))
    ratio = whole / base
    print(f"schedule of {rows} samples, {repeat} round(s), CPU seconds (median)")
    print(f"  floor (parse + bulk insert, unchecked)  {base:8.3f} s")
    print(f"  import (checked, audited, one go)       {whole:8.3f} s   {rows / whole:8.0f} rows/s")
    print(f"  re-import (changes nothing)             {second:8.3f} s   {rows / second:8.0f} rows/s")
    print(f"  ratio import / floor                    {ratio:8.1f}   (target <= {TARGET_RATIO:g})")
    return 1 if args.check and ratio > TARGET_RATIO else 0


if __name__ == "__main__":
    sys.exit(main())
