"""Build a big generated laboratory on PostgreSQL: 100,000 samples, 300,000 tests and 1,000,000
audit events (issue S11 point 3), for the page benchmark ``bench_big_lab.py``.

Run from the repository root with the PostgreSQL dev server of ``/tmp/pgenv``::

    python tests/benchmarks/build_big_lab.py                 # claybench_big, full size (minutes)
    python tests/benchmarks/build_big_lab.py --scale 0.01    # a small version (seconds)

The database (``--database``, default ``claybench_big``) is dropped and created afresh on the
server named by CLAYBENCH_TEST_POSTGRES_URL, and migrated by Alembic (``server.db.migrate``).

How the rows are made:

- The shapes come from the real code. First a template laboratory is built through the services
  in a throw-away SQLite file: one sample per method, readings from ``server/api/examples.py``
  saved by ``bench.save_readings`` (so results and flags are the engine's), handed in, approved
  by a reviewer, one returned, one amended and approved again. Each generated test copies the
  readings, results and flags of its method's template test, and each generated audit event is
  built as the service that writes it builds it; the builder checks that every generated event
  of an action carries the same keys as the template's real event of that action.
- The people (an admin, two reviewers, three technicians) are created through
  ``services.users`` in the big database, so that they can sign in (``PASSWORD``).
- Everything else is invented, fictional and seeded (``--seed``): 400 clients, jobs of every size
  (mostly 1 to 40 samples, some of a few hundred, and one job of 1,000 samples, ``BIG_JOB``),
  boreholes and trial pits, samples, two to four tests a sample in every status (requested,
  draft, submitted i.e. waiting for review, returned, approved, and superseded by an approved
  amendment), and an issued report for most finished jobs. Older jobs are mostly finished;
  jobs of the last months are still being tested. Short of the audit target, technicians'
  earlier saves of a sheet (a ``readings`` event before the last one) make up the difference.
- Reports are placeholders: ``pdf`` holds a few bytes that say so (no report is rendered), with
  their SHA-256; no AGS4 file is frozen with them (as for reports issued before files were).
- The audit trail is a valid hash chain (``server.services.audit_chain``): events are given ids
  in the order of their times, each hashed with the chain's own functions and linked to the one
  before; ``claybench audit verify`` walks it (a minute at full size).

Rows go in with PostgreSQL's COPY (psycopg's ``cursor.copy``) with explicit ids; the id
sequences are moved past them afterwards. It prints the time of each step and the rows of each
table. Not collected by pytest.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import math
import os
import random
import sys
import tempfile
import time
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass, field
from datetime import UTC, date, datetime, timedelta
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import psycopg  # noqa: E402
from sqlalchemy import create_engine, text  # noqa: E402
from sqlalchemy.engine import make_url  # noqa: E402
from sqlmodel import col, select  # noqa: E402

from server.api.examples import EXAMPLES  # noqa: E402
from server.db.migrate import upgrade  # noqa: E402
from server.db.session import Database  # noqa: E402
from server.db.tables import AuditEvent, LabTest, User  # noqa: E402
from server.services import amendments, audit_chain, bench, jobs, review, samples  # noqa: E402
from server.services.users import create_user  # noqa: E402

PG_ENV = "CLAYBENCH_TEST_POSTGRES_URL"
DATABASE = "claybench_big"
PASSWORD = "big-lab-password-1"
BIG_JOB = "J-BIG-1000"  # the job of 1,000 samples
FULL = {"samples": 100_000, "tests": 300_000, "events": 1_000_000, "clients": 400}
PEOPLE = (
    ("big-admin", "Avery Admin (generated)", "admin"),
    ("big-review", "Rowan Reviewer (generated)", "reviewer"),
    ("big-review2", "Sasha Second-Reviewer (generated)", "reviewer"),
    ("big-tech", "Tobi Technician (generated)", "technician"),
    ("big-tech2", "Tali Technician (generated)", "technician"),
    ("big-tech3", "Theo Technician (generated)", "technician"),
)
MEANING = review.DEFAULT_MEANING
RETURN_REASON = "Trial masses look transposed: please check the sheet against the balance printout"
AMEND_REASON = "Tin tare re-weighed after the report: corrected from the register"
FLAG_REASON = "Checked on the day against the balance record; the result stands as measured"
PLACEHOLDER_PDF = b"%PDF-1.7\n% placeholder of the generated big laboratory: no report was rendered\n%%EOF\n"

_PLACES = (
    "Amberley Harrowgate Kestle Larchmere Moorfield Nettlecombe Oakhurst Pellworth Quarrendon "
    "Rushmere Saltings Thornleigh Upwater Vellacott Wrenfold Yarrowby Ashcombe Brackenhurst "
    "Cinderford Dunmere Elmstead Fenwick Gorsley Hollins Ivybridge"
).split()
_KINDS = ("Ground Engineering", "Civils", "Infrastructure", "Developments", "Consulting", "Homes")
_FEATURES = ("bypass", "school extension", "flood bank", "reservoir", "rail sidings", "housing", "bridge")
_DESCRIPTIONS = (
    "Firm brown slightly sandy CLAY",
    "Stiff grey fissured CLAY",
    "Soft grey silty CLAY with shell fragments",
    "Firm orange-brown mottled grey CLAY",
    "Dense brown clayey SAND",
    "Very stiff dark grey CLAY with claystone lithorelicts",
)
_SAMPLE_TYPES = ("U100", "UT100", "bulk", "disturbed", "block", "tube")


# -- the template laboratory, made by the services ------------------------------------------------


@dataclass
class Template:
    """What the real code produced for each method and each audited action."""

    tests: dict[str, LabTest]  # method -> the approved test (readings, results, flags, flag reasons)
    keys: dict[str, tuple[frozenset[str], frozenset[str]]]  # action -> keys of before, after
    fields: dict[str, list[str]]  # method -> the "fields" a save of the whole readings lists


def build_template(folder: Path) -> Template:
    """One sample per method through the services in an SQLite file; the tests and events it made."""
    url = f"sqlite:///{folder / 'template.sqlite3'}"
    upgrade(url)
    db = Database(url)
    admin = create_user(db, None, "tpl-admin", "Template Admin", "admin", PASSWORD)
    reviewer = create_user(db, None, "tpl-review", "Template Reviewer", "reviewer", PASSWORD)
    reviewer2 = create_user(db, None, "tpl-review2", "Template Reviewer Two", "reviewer", PASSWORD)
    tech = create_user(db, None, "tpl-tech", "Template Technician", "technician", PASSWORD)
    client = jobs.create_client(db, admin, "Template Client (generated)")
    job = jobs.create_job(
        db, admin, client.id or 0, "TPL-1", "Template job", "Nowhere", due_date=date(2026, 12, 31)
    )
    location = samples.add_location(db, admin, job.id or 0, "BH1")
    approved: dict[str, int] = {}
    for n, method in enumerate([*EXAMPLES, "returned", "amended"]):
        sample = samples.add_sample(
            db, admin, location.id or 0, f"BH1-S{n + 1}", n + 0.5, n + 0.95, "U100", _DESCRIPTIONS[0]
        )
        real = method if method in EXAMPLES else "atterberg"
        (test,) = jobs.request_tests(db, admin, [sample.id or 0], [real])
        saved = bench.save_readings(db, tech, test.id or 0, EXAMPLES[real], test.version)
        reasons = {code: FLAG_REASON for code in bench.error_flag_codes(saved.evaluation)}
        test = bench.submit(db, tech, test.id or 0, saved.test.version, reasons)
        if method == "returned":
            review.return_test(db, reviewer, test.id or 0, RETURN_REASON, test.version)
            continue
        test = review.approve(db, reviewer, test.id or 0, PASSWORD, test.version, meaning=MEANING)
        if method == "amended":
            new = amendments.amend(db, reviewer, test.id or 0, AMEND_REASON, test.version)
            new = bench.submit(db, tech, new.id or 0, new.version, reasons)
            review.approve(db, reviewer2, new.id or 0, PASSWORD, new.version, meaning=MEANING)
            continue
        approved[method] = test.id or 0
    with db.session() as s:
        tests = {m: s.get(LabTest, i) for m, i in approved.items()}
        keys: dict[str, tuple[frozenset[str], frozenset[str]]] = {}
        fields: dict[str, list[str]] = {}
        for e in s.exec(select(AuditEvent).order_by(col(AuditEvent.id))):
            action = f"{e.entity}:{e.action}"
            keys.setdefault(action, (frozenset(e.before or {}), frozenset(e.after or {})))
            method = next((m for m, i in approved.items() if i == e.entity_id), None)
            if action == "lab_test:readings" and e.after and method:
                fields[method] = list(e.after["fields"])
    db.dispose()
    return Template({m: t for m, t in tests.items() if t is not None}, keys, fields)


# -- the generated laboratory ------------------------------------------------------------------


@dataclass
class Event:
    at: datetime
    actor_id: int | None
    actor: str
    entity: str
    entity_id: int
    action: str
    before: dict[str, Any] | None = None
    after: dict[str, Any] | None = None
    reason: str | None = None
    typed_at: datetime | None = None  # generated entries were typed online: none


@dataclass
class Lab:
    """The generated rows, as tuples in the column order of ``COLUMNS``, and the audit events."""

    rows: dict[str, list[tuple[Any, ...]]] = field(default_factory=dict)
    events: list[Event] = field(default_factory=list)

    def add(self, table: str, row: tuple[Any, ...]) -> None:
        self.rows.setdefault(table, []).append(row)


COLUMNS: dict[str, tuple[str, ...]] = {
    "client": ("id", "name", "contact", "email", "postal_address"),
    "job": (
        "id", "code", "title", "site", "client_id", "order_reference", "due_date", "received_at",
        "standards", "notes",
    ),
    "location": ("id", "job_id", "code", "kind", "easting", "northing", "ground_level_m"),
    "sample": (
        "id", "job_id", "location_id", "code", "depth_from_m", "depth_to_m", "sample_type",
        "description", "remarks", "received_at", "received_by_id", "condition", "stored_at",
        "withdrawn_at", "withdrawn_by_id", "withdrawn_reason",
    ),
    "lab_test": (
        "id", "sample_id", "method", "status", "revision", "previous_revision_id", "amendment_reason",
        "version", "readings", "results", "flags", "requested_by_id", "assigned_to_id", "created_at",
        "updated_at", "submitted_at", "approved_at", "approved_by_id", "approver_role",
        "signature_meaning", "return_reason", "flag_reasons",
    ),
    "report": (
        "id", "job_id", "number", "revision", "status", "issued_at", "issued_by_id", "sha256",
        "fingerprint", "pdf", "superseded_by_id", "signature_meaning", "overlap_decision",
    ),
    "report_test": ("report_id", "test_id"),
    "audit_event": (
        "id", "at", "actor_id", "actor", "entity", "entity_id", "action", "before", "after", "reason",
        "typed_at", "prev_sha256", "sha256",
    ),
}  # fmt: skip


def _naive(at: datetime) -> datetime:
    """Stored as naive UTC, as ``tables.UTCDateTime`` stores every time."""
    return at.astimezone(UTC).replace(tzinfo=None)


def _j(value: Any) -> str | None:
    return None if value is None else json.dumps(value)


def _job_sizes(rng: random.Random, total: int) -> list[int]:
    """Sample counts of the jobs: one of 1,000 (when the lab is big enough), a few of a few
    hundred, and mostly small ones, adding up to ``total``."""
    sizes = [1000] if total >= 5000 else [max(1, total // 10)]
    left = total - sizes[0]
    while left > 0:
        roll = rng.random()
        size = (
            rng.randint(100, 400)
            if roll < 0.01
            else rng.randint(41, 99)
            if roll < 0.08
            else rng.randint(1, 40)
        )
        size = min(size, left)
        sizes.append(size)
        left -= size
    rng.shuffle(sizes)
    return sizes


RECENT_DAYS = 220  # jobs younger than this are still being tested (the rest mostly finished)
# About 1 % of the tests wait for review (some 3,000 at full size: two or three days of a busy
# laboratory's output, common practice), and as many again were returned.
_RECENT_MIX = (
    ("requested", 0.50),
    ("draft", 0.32),
    ("submitted", 0.02),
    ("returned", 0.01),
    ("approved", 0.15),
)
_OPEN_MIX = (
    ("requested", 0.04),
    ("draft", 0.08),
    ("submitted", 0.01),
    ("returned", 0.01),
    ("approved", 0.86),
)


def _pick(rng: random.Random, mix: Sequence[tuple[str, float]]) -> str:
    roll, acc = rng.random(), 0.0
    for status, p in mix:
        acc += p
        if roll < acc:
            return status
    return mix[-1][0]


class Generator:
    """Makes the rows and events of the lab; ``next_id`` hands out ids per table."""

    def __init__(self, template: Template, users: dict[str, User], scale: float, seed: int, now: datetime):
        self.t = template
        self.u = users
        self.rng = random.Random(seed)
        self.now = now
        self.target = {k: max(1, round(v * scale)) for k, v in FULL.items()}
        self.lab = Lab()
        self.ids: dict[str, int] = {}
        self.methods = list(template.tests)

    def next_id(self, table: str) -> int:
        self.ids[table] = self.ids.get(table, 0) + 1
        return self.ids[table]

    def event(
        self, at: datetime, who: User | None, entity: str, entity_id: int, action: str, **kw: Any
    ) -> None:
        self.lab.events.append(
            Event(
                at,
                who.id if who else None,
                who.username if who else "system",
                entity,
                entity_id,
                action,
                **kw,
            )
        )

    def build(self) -> Lab:
        clients = [self.client(n) for n in range(self.target["clients"])]
        sizes = _job_sizes(self.rng, self.target["samples"])
        tests_per_sample = self.target["tests"] / self.target["samples"]
        for n, size in enumerate(sizes):
            self.job(n, size, self.rng.choice(clients), tests_per_sample)
        self.pad_readings()
        return self.lab

    def client(self, n: int) -> int:
        cid = self.next_id("client")
        place = _PLACES[n % len(_PLACES)]
        name = f"{place} {_KINDS[n % len(_KINDS)]} {n // (len(_PLACES)) + 1:03d} (generated)"
        row = (cid, name, f"Contact {n:03d}", f"contact{n:03d}@example.invalid", f"{n} High Street, {place}")
        self.lab.add("client", row)
        at = self.now - timedelta(days=800 - n % 60)
        self.event(
            at,
            self.u["big-admin"],
            "client",
            cid,
            "create",
            after=dict(zip(COLUMNS["client"], row, strict=True)),
        )
        return cid

    def job(self, n: int, size: int, client_id: int, tests_per_sample: float) -> None:
        rng, admin = self.rng, self.u["big-admin"]
        jid = self.next_id("job")
        age = rng.uniform(0.2, 365.0)
        received = self.now - timedelta(days=age)
        due = (received + timedelta(days=rng.randint(10, 30))).date()
        code = BIG_JOB if size == 1000 else f"J{received:%y}-{n + 1:05d}"
        standards = rng.choice(("astm", "bs-iso"))
        place = rng.choice(_PLACES)
        row = (
            jid, code, f"{place} {rng.choice(_FEATURES)} ground investigation", f"{place} (fictional)",
            client_id, f"PO-{jid:06d}", due, _naive(received), standards, "",
        )  # fmt: skip
        self.lab.add("job", row)
        after = dict(zip(COLUMNS["job"], row, strict=True))
        after.update(due_date=due.isoformat(), received_at=received.isoformat())
        self.event(received, admin, "job", jid, "create", after=after)
        phase = "recent" if age < RECENT_DAYS else ("reported" if rng.random() < 0.7 else "open")
        per_location = rng.randint(4, 12) if size < 1000 else 50
        n_locations = max(1, math.ceil(size / per_location))
        approved_tests: list[int] = []
        superseded: list[int] = []
        last_approval = received
        made = 0
        for k in range(n_locations):
            lid = self.next_id("location")
            kind = "borehole" if rng.random() < 0.7 else "trial pit"
            lcode = f"{'BH' if kind == 'borehole' else 'TP'}{k + 1:02d}"
            loc = (
                lid,
                jid,
                lcode,
                kind,
                round(rng.uniform(400000, 500000), 1),
                round(rng.uniform(100000, 300000), 1),
                round(rng.uniform(5, 90), 2),
            )
            self.lab.add("location", loc)
            self.event(
                received + timedelta(minutes=k),
                admin,
                "location",
                lid,
                "create",
                after=dict(zip(COLUMNS["location"], loc, strict=True)),
            )
            depth = 0.5
            for s in range(min(per_location, size - made)):
                made += 1
                sid = self.next_id("sample")
                top = round(depth, 2)
                base = round(top + 0.45, 2)
                depth += rng.choice((0.5, 1.0, 1.5))
                sample_type = rng.choice(_SAMPLE_TYPES)
                got = received + timedelta(hours=rng.randint(1, 30))
                smp = (
                    sid, jid, lid, f"{lcode}-{sample_type[0].upper()}{s + 1}", top, base, sample_type,
                    rng.choice(_DESCRIPTIONS), "", _naive(got), self.u["big-tech"].id, "intact",
                    f"Rack {rng.randint(1, 40)}", None, None, None,
                )  # fmt: skip
                self.lab.add("sample", smp)
                after = dict(zip(COLUMNS["sample"], smp, strict=True))
                after.update(received_at=got.isoformat())
                self.event(
                    received + timedelta(minutes=k, seconds=s + 1),
                    admin,
                    "sample",
                    sid,
                    "create",
                    after=after,
                )
                k_tests = 3 if tests_per_sample == 3 else round(tests_per_sample)
                k_tests = rng.choice((2, 3, 3, 4)) if k_tests == 3 else k_tests
                for method in rng.sample(self.methods, min(k_tests, len(self.methods))):
                    status = (
                        "approved"
                        if phase == "reported"
                        else _pick(rng, _RECENT_MIX if phase == "recent" else _OPEN_MIX)
                    )
                    done = self.test(
                        sid, method, status, received + timedelta(minutes=k, seconds=s + 2), phase
                    )
                    if done is not None:
                        tid, approved_at, old_id = done
                        approved_tests.append(tid)
                        last_approval = max(last_approval, approved_at)
                        if old_id is not None:
                            superseded.append(old_id)
        if phase == "reported" and approved_tests:
            self.report(jid, code, [*approved_tests, *superseded], last_approval + timedelta(days=1))

    def test(
        self, sid: int, method: str, status: str, requested: datetime, phase: str
    ) -> tuple[int, datetime, int | None] | None:
        """One test through its life up to ``status``; (id, approval time, id of the revision an
        amendment superseded) when it ended approved."""
        rng, tpl = self.rng, self.t.tests[method]
        admin = self.u["big-admin"]
        tech = self.u[rng.choice(("big-tech", "big-tech2", "big-tech3"))]
        signer = self.u[rng.choice(("big-review", "big-review2"))]
        tid = self.next_id("lab_test")
        latest = self.now - timedelta(minutes=5)
        step = lambda at, hours: min(at + timedelta(hours=rng.uniform(1, hours)), latest)  # noqa: E731
        self.event(
            requested,
            admin,
            "lab_test",
            tid,
            "request",
            after={"sample_id": sid, "method": method, "status": "requested", "assigned_to_id": None},
        )
        values: dict[str, Any] = dict(
            id=tid, sample_id=sid, method=method, status=status, revision=1, previous_revision_id=None,
            amendment_reason=None, version=1, readings=None, results=None, flags=None,
            requested_by_id=admin.id, assigned_to_id=None, created_at=requested, updated_at=requested,
            submitted_at=None, approved_at=None, approved_by_id=None, approver_role=None,
            signature_meaning=None, return_reason=None, flag_reasons=None,
        )  # fmt: skip
        old_id: int | None = None
        if status != "requested":
            entered = step(requested, 72)
            self.readings_event(entered, tech, tid, method, "requested")
            values.update(
                version=2, readings=tpl.readings, results=tpl.results, flags=tpl.flags, updated_at=entered
            )
        if status in ("submitted", "returned", "approved"):
            handed = step(values["updated_at"], 24)
            self.submit_event(handed, tech, tid, tpl.flag_reasons)
            values.update(version=3, submitted_at=handed, updated_at=handed, flag_reasons=tpl.flag_reasons)
        if status == "returned":
            back = step(values["updated_at"], 24)
            self.event(
                back,
                signer,
                "lab_test",
                tid,
                "return",
                before={"status": "submitted"},
                after={"status": "returned", "return_reason": RETURN_REASON},
                reason=RETURN_REASON,
            )
            values.update(version=4, return_reason=RETURN_REASON, updated_at=back)
        if status == "approved":
            signed = step(values["updated_at"], 48)
            self.approve_event(signed, signer, tid)
            values.update(
                version=4,
                approved_at=signed,
                approved_by_id=signer.id,
                approver_role=signer.role,
                signature_meaning=MEANING,
                updated_at=signed,
            )
            if phase != "recent" and rng.random() < 0.005:  # amended since, and the amendment approved
                return self.amended(values, tech, signer)
        self.lab.add("lab_test", _test_row(values))
        return (tid, values["approved_at"], old_id) if status == "approved" else None

    def amended(self, old: dict[str, Any], tech: User, signer: User) -> tuple[int, datetime, int | None]:
        """Revision 2 of an approved test, approved by the other reviewer; revision 1 superseded."""
        rng = self.rng
        other = self.u["big-review2" if signer.username == "big-review" else "big-review"]
        new_id = self.next_id("lab_test")
        opened = min(old["approved_at"] + timedelta(days=rng.uniform(3, 20)), self.now - timedelta(hours=3))
        handed, signed = opened + timedelta(hours=1), opened + timedelta(hours=2)
        tid = old["id"]
        self.event(
            opened,
            signer,
            "lab_test",
            tid,
            "open_amendment",
            before={"status": "approved"},
            after={"status": "approved", "amended_by": new_id},
            reason=AMEND_REASON,
        )
        self.event(
            opened,
            signer,
            "lab_test",
            new_id,
            "amend",
            before={"revision_of": tid, "revision": 1},
            after={
                "status": "draft",
                "revision": 2,
                "previous_revision_id": tid,
                "sample_id": old["sample_id"],
                "method": old["method"],
                "readings": old["readings"],
            },
            reason=AMEND_REASON,
        )
        self.submit_event(handed, tech, new_id, old["flag_reasons"])
        self.approve_event(signed, other, new_id)
        self.event(
            signed,
            other,
            "lab_test",
            tid,
            "supersede",
            before={"status": "approved"},
            after={"status": "superseded", "superseded_by": new_id},
            reason=AMEND_REASON,
        )
        self.lab.add(
            "lab_test", _test_row({**old, "status": "superseded", "version": 6, "updated_at": signed})
        )
        new = {
            **old,
            "id": new_id,
            "status": "approved",
            "revision": 2,
            "previous_revision_id": tid,
            "amendment_reason": AMEND_REASON,
            "version": 3,
            "created_at": opened,
            "updated_at": signed,
            "submitted_at": handed,
            "approved_at": signed,
            "approved_by_id": other.id,
            "approver_role": other.role,
        }
        self.lab.add("lab_test", _test_row(new))
        return new_id, signed, tid

    def readings_event(self, at: datetime, tech: User, tid: int, method: str, before_status: str) -> None:
        tpl = self.t.tests[method]
        self.event(
            at,
            tech,
            "lab_test",
            tid,
            "readings",
            before={"status": before_status, "readings": None},
            after={"status": "draft", "readings": tpl.readings, "fields": self.t.fields.get(method, [""])},
        )

    def submit_event(self, at: datetime, tech: User, tid: int, reasons: dict[str, Any] | None) -> None:
        after: dict[str, Any] = {"status": "submitted"}
        if reasons:
            after["flag_reasons"] = reasons
        self.event(at, tech, "lab_test", tid, "submit", before={"status": "draft"}, after=after)

    def approve_event(self, at: datetime, signer: User, tid: int) -> None:
        after = {
            "status": "approved",
            "signed_by": signer.full_name,
            "signed_by_id": signer.id,
            "role": signer.role,
            "meaning": MEANING,
            "signed_at": at.isoformat(),
        }
        self.event(at, signer, "lab_test", tid, "approve", before={"status": "submitted"}, after=after)

    def report(self, jid: int, code: str, test_ids: list[int], issued: datetime) -> None:
        rid = self.next_id("report")
        issued = min(issued, self.now - timedelta(minutes=1))
        signer = self.u["big-review"]
        sha = hashlib.sha256(PLACEHOLDER_PDF).hexdigest()
        number = f"{code}-R01"
        fingerprint = hashlib.sha256(f"{number}:{test_ids}".encode()).hexdigest()
        self.lab.add(
            "report",
            (
                rid,
                jid,
                number,
                1,
                "issued",
                _naive(issued),
                signer.id,
                sha,
                fingerprint,
                PLACEHOLDER_PDF,
                None,
                MEANING,
                "",
            ),
        )
        for tid in test_ids:
            self.lab.add("report_test", (rid, tid))
        after = {
            "number": number,
            "revision": 1,
            "sha256": sha,
            "fingerprint": fingerprint,
            "ags4_sha256": None,
            "tests": test_ids,
            "signed_by": signer.username,
            "signature_meaning": MEANING,
        }
        self.event(issued, signer, "report", rid, "issue", after=after)

    def pad_readings(self) -> None:
        """Earlier saves of sheets that were entered (a readings event before the last one), up to
        the audit target; the lab's own events stay as they are when there are already more."""
        entered = [e for e in self.lab.events if e.action == "readings"]
        short = self.target["events"] - len(self.lab.events)
        for e in self.rng.sample(entered, min(max(short, 0), len(entered))):
            self.lab.events.append(replace_at(e, e.at - timedelta(minutes=self.rng.randint(2, 90))))


def replace_at(e: Event, at: datetime) -> Event:
    return Event(at, e.actor_id, e.actor, e.entity, e.entity_id, e.action, e.before, e.after, e.reason)


def _test_row(values: dict[str, Any]) -> tuple[Any, ...]:
    out = []
    for name in COLUMNS["lab_test"]:
        v = values[name]
        if name in ("readings", "results", "flags", "flag_reasons"):
            v = _j(v)
        elif isinstance(v, datetime):
            v = _naive(v)
        out.append(v)
    return tuple(out)


# -- checks, chain and load ----------------------------------------------------------------------


def check_shapes(template: Template, events: Iterable[Event]) -> None:
    """Every generated event carries the keys the real service put in that action's event."""
    seen: set[str] = set()
    for e in events:
        action = f"{e.entity}:{e.action}"
        if action in seen:
            continue
        seen.add(action)
        real = template.keys.get(action)
        if real is None:
            if action != "report:issue":  # no report is rendered in the template (see the docstring)
                raise SystemExit(f"no real event of {action} to compare with")
            continue
        got = (frozenset(e.before or {}), frozenset(e.after or {}))
        if got != real:
            raise SystemExit(
                f"{action}: generated keys {sorted(got[1])} differ from the real {sorted(real[1])}"
            )


def chained(events: list[Event], first_id: int, head: str) -> Iterator[tuple[Any, ...]]:
    """The events as audit_event rows in time order, ids from ``first_id``, in one hash chain
    continuing from ``head`` (``audit_chain``'s own content and hash)."""
    events.sort(key=lambda e: e.at)
    plain_cache: dict[int, str] = {}

    def dumped(value: dict[str, Any] | None) -> str | None:
        if value is None:
            return None
        key = id(value)
        if key not in plain_cache:
            plain_cache[key] = json.dumps(value)
        return plain_cache[key]

    prev = head
    for n, e in enumerate(events):
        # The stored value is what the hash covers: the row's own JSON read back as PostgreSQL
        # will hand it back (a whole float as an integer is taken care of by content_of).
        sha = audit_chain.chain_hash(audit_chain.content_of(e), prev)  # type: ignore[arg-type]
        yield (
            first_id + n,
            _naive(e.at),
            e.actor_id,
            e.actor,
            e.entity,
            e.entity_id,
            e.action,
            dumped(e.before),
            dumped(e.after),
            e.reason,
            None,
            prev,
            sha,
        )
        prev = sha


def _copy(conn: psycopg.Connection[Any], table: str, rows: Iterable[tuple[Any, ...]]) -> int:
    columns = COLUMNS[table]
    n = 0
    with conn.cursor() as cur:
        with cur.copy(f'COPY "{table}" ({", ".join(columns)}) FROM STDIN') as copy:
            for row in rows:
                copy.write_row(row)
                n += 1
    return n


def _raw(url: str) -> str:
    return make_url(url).set(drivername="postgresql").render_as_string(hide_password=False)


def drop_database(admin_url: str, name: str) -> None:
    engine = create_engine(admin_url, isolation_level="AUTOCOMMIT")
    with engine.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
    engine.dispose()


def fresh_database(admin_url: str, name: str) -> str:
    engine = create_engine(admin_url, isolation_level="AUTOCOMMIT")
    with engine.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    engine.dispose()
    return make_url(admin_url).set(database=name).render_as_string(hide_password=False)


def build(
    url_or_admin: str, *, database: str = DATABASE, scale: float = 1.0, seed: int = 2612
) -> dict[str, Any]:
    """Make the lab in a fresh database on the server; what it made and how long each step took."""
    timings: dict[str, float] = {}
    started = time.perf_counter()

    def lap(step: str) -> None:
        timings[step] = time.perf_counter() - started - sum(timings.values())
        print(f"  {step:<34} {timings[step]:7.1f} s", flush=True)

    url = fresh_database(url_or_admin, database)
    upgrade(url)
    lap("create and migrate")
    with tempfile.TemporaryDirectory() as tmp:
        template = build_template(Path(tmp))
    lap("template lab (services)")
    db = Database(url)
    users = {name: create_user(db, None, name, full, role, PASSWORD) for name, full, role in PEOPLE}
    with db.session() as s:
        first_event = int(s.exec(select(AuditEvent.id).order_by(col(AuditEvent.id).desc())).first() or 0) + 1
        head = audit_chain.GENESIS
        newest = s.exec(select(AuditEvent.sha256).order_by(col(AuditEvent.id).desc())).first()
        head = newest or head
    db.dispose()
    lap("people (services)")
    now = datetime.now(UTC) - timedelta(minutes=10)
    lab = Generator(template, users, scale, seed, now).build()
    check_shapes(template, lab.events)
    lap("generate rows")
    counts: dict[str, int] = {}
    with psycopg.connect(_raw(url)) as conn:
        for table in ("client", "job", "location", "sample", "lab_test", "report", "report_test"):
            counts[table] = _copy(conn, table, lab.rows.get(table, []))
            lab.rows.pop(table, None)
        conn.commit()
        lap("COPY records")
        counts["audit_event"] = _copy(conn, "audit_event", chained(lab.events, first_event, head))
        conn.commit()
        lap("hash chain and COPY audit events")
        with conn.cursor() as cur:
            for table in ("client", "job", "location", "sample", "lab_test", "report", "audit_event"):
                sequence = f"pg_get_serial_sequence('\"{table}\"', 'id')"
                cur.execute(f'SELECT setval({sequence}, (SELECT max(id) FROM "{table}"))')
        conn.commit()
        conn.autocommit = True
        with conn.cursor() as cur:
            cur.execute("VACUUM ANALYZE")
    lap("sequences, VACUUM ANALYZE")
    return {"url": url, "counts": counts, "timings": timings, "seconds": time.perf_counter() - started}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0] if __doc__ else None)
    parser.add_argument("--scale", type=float, default=1.0, help="fraction of the full size (default 1)")
    parser.add_argument("--database", default=DATABASE, help=f"database to (re)create (default {DATABASE})")
    parser.add_argument("--seed", type=int, default=2612)
    args = parser.parse_args()
    admin_url = os.environ.get(PG_ENV)
    if not admin_url:
        raise SystemExit(f"{PG_ENV} is not set: source /tmp/pgenv first")
    print(f"Building {args.database} at scale {args.scale:g}")
    made = build(admin_url, database=args.database, scale=args.scale, seed=args.seed)
    print(f"Built in {made['seconds']:.1f} s:")
    for table, n in made["counts"].items():
        print(f"  {table:<12} {n:>10,}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
