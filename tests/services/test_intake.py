"""The register of work through its services: clients, jobs, locations and samples.

Every refusal names its field (several at once when several are wrong) and stores nothing;
every create and edit leaves an audit event with the actor, before and after. A sample is never
deleted: once readings are entered its identity is fixed, and it leaves the work by withdrawal.
The scenario (Marlow Vale Civils, job MV-2026-014, Harrow Lane culvert) is fictional.

Sources named beside the check values, in short: "field-level" is DESIGN.md section 7 (errors
carry the field they refuse); "one transaction" is STYLE.md (one transaction per use-case, so a
refusal stores nothing); "audit" is DESIGN.md section 4 (who, what, before, after, why);
"as given" is a value this test typed in.
"""

from __future__ import annotations

import inspect
from dataclasses import dataclass, replace
from datetime import UTC, datetime
from typing import Any

import pytest
from sqlmodel import select

from server.db.session import Database
from server.db.tables import Client, Job, LabTest, Sample
from server.services import bench, jobs, reports, samples
from server.services.errors import Invalid
from server.services.samples import LocationForm, SampleForm
from tests.conftest import PASSWORDS, People
from tests.reports.issued import approve
from tests.support.records import audit_events, refused_fields, row_count, row_counts
from tests.support.scenario import NATURAL

BASE = "http://lab.example"
JOB = "MV-2026-014"
EMAIL = "lab.orders@marlowvale.example"


# --- helpers ------------------------------------------------------------------------------------


def _sample(db: Database, sample_id: int) -> Sample:
    with db.session() as s:
        found = s.get(Sample, sample_id)
    assert found is not None
    return found


@dataclass
class Site:
    client_id: int
    job_id: int
    bh01: int  # location id


def _site(db: Database, people: People, code: str = JOB) -> Site:
    """Marlow Vale Civils, a job (MV-2026-014 unless named) and its borehole BH01 (fictional)."""
    with db.session() as s:
        client = s.exec(select(Client).where(Client.name == "Marlow Vale Civils")).first()
    if client is None:
        client = jobs.create_client(db, people.admin, "Marlow Vale Civils", "Dana Okafor", EMAIL)
    job = jobs.create_job(db, people.admin, client.id or 0, code, "Harrow Lane culvert", "Harrow Lane")
    bh01 = samples.add_location(db, people.admin, job.id or 0, "BH01")
    return Site(client.id or 0, job.id or 0, bh01.id or 0)


def _entered(db: Database, people: People, site: Site, code: str = "BH01-U1") -> tuple[int, int]:
    """A U100 at 1.20-1.65 m, "Firm brown CLAY", with a water content whose readings the
    technician has saved through the bench service."""
    sample = samples.add_sample(
        db, people.admin, site.bh01, code, 1.20, 1.65, "U100", "Firm brown CLAY", methods=["water-content"]
    )
    with db.session() as s:
        test = s.exec(select(LabTest).where(LabTest.sample_id == sample.id)).one()
    bench.save_readings(db, people.tech, test.id or 0, {"determinations": NATURAL}, test.version)
    return sample.id or 0, test.id or 0


# --- clients ------------------------------------------------------------------------------------


def test_registering_a_client_is_audited_with_its_fields_and_the_actor(db: Database, people: People) -> None:
    made = jobs.create_client(db, people.admin, "  Marlow Vale Civils ", "Dana Okafor", EMAIL, "1 Quay Row")
    # surrounding blanks stripped (fields.Checks.text), the rest as given
    assert (made.name, made.contact, made.email) == ("Marlow Vale Civils", "Dana Okafor", EMAIL)
    (event,) = audit_events(db, "client", made.id)  # one event per create (audit)
    assert (event.action, event.actor, event.actor_id) == ("create", "admin", people.admin.id)  # audit
    assert event.before is None and event.after is not None  # nothing before a create (audit)
    assert (event.after["name"], event.after["email"]) == ("Marlow Vale Civils", EMAIL)  # as stored


def test_a_client_name_is_unique_whatever_its_case(db: Database, people: People) -> None:
    jobs.create_client(db, people.admin, "Marlow Vale Civils")
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        jobs.create_client(db, people.admin, "MARLOW vale civils")
    assert refused_fields(refused) == {"name"}  # one firm, one record (jobs.create_client docstring)
    assert row_counts(db) == before  # one transaction


@pytest.mark.parametrize(
    "email",
    [
        EMAIL,  # common practice
        "",  # an e-mail is optional (jobs.client_values)
        "d.okafor+labs@marlow-vale.example",  # "+" is in atext (RFC 5322 cl. 3.2.3)
    ],
)
def test_a_client_email_that_looks_like_an_address_or_none_is_accepted(
    db: Database, people: People, email: str
) -> None:
    made = jobs.create_client(db, people.admin, "Marlow Vale Civils", email=email)
    assert made.email == email  # as given


@pytest.mark.parametrize(
    "email",
    [
        "marlowvale.example",  # no @ (RFC 5322 cl. 3.4.1 addr-spec)
        "orders@marlowvale",  # no dot in the domain (fields._EMAIL, common practice)
        "dana okafor@marlowvale.example",  # a space is not in atext (RFC 5322 cl. 3.2.3)
        "orders@@marlowvale.example",  # two @ (RFC 5322 cl. 3.4.1 addr-spec)
        "o" * 250 + "@mv.example",  # 261 characters, beyond 254 (RFC 5321 cl. 4.5.3.1.3 with errata)
    ],
)
def test_a_client_email_that_is_not_an_address_is_refused_at_its_field(
    db: Database, people: People, email: str
) -> None:
    with pytest.raises(Invalid) as refused:
        jobs.create_client(db, people.admin, "Marlow Vale Civils", email=email)
    assert refused_fields(refused) == {"email"}  # field-level
    assert row_count(db, Client) == 0  # one transaction


def test_a_client_with_several_mistakes_is_refused_at_each_field_and_nothing_is_stored(
    db: Database, people: People
) -> None:
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        # blank name (required), contact of 201 (at most 200), not an e-mail: jobs.client_values
        jobs.create_client(db, people.admin, "  ", "D" * 201, "not-an-address")
    assert refused_fields(refused) == {"name", "contact", "email"}  # field-level, all at once (fields.Checks)
    assert row_counts(db) == before  # one transaction


def test_editing_a_client_keeps_before_and_after_in_the_audit(db: Database, people: People) -> None:
    made = jobs.create_client(db, people.admin, "Marlow Vale Civils", "Dana Okafor", EMAIL)
    new_email = "d.okafor@marlowvale.example"
    jobs.update_client(
        db, people.review, made.id or 0, "Marlow Vale Civils Ltd", "Dana Okafor", new_email, ""
    )
    event = audit_events(db, "client", made.id)[-1]
    assert (event.action, event.actor) == ("update", "review")  # audit
    assert event.before is not None and event.after is not None  # audit
    assert (event.before["name"], event.before["email"]) == ("Marlow Vale Civils", EMAIL)  # as registered
    assert (event.after["name"], event.after["email"]) == ("Marlow Vale Civils Ltd", new_email)  # as given


def test_a_client_can_change_the_case_of_its_own_name_but_not_take_another_clients(
    db: Database, people: People
) -> None:
    made = jobs.create_client(db, people.admin, "Marlow Vale Civils")
    jobs.create_client(db, people.admin, "Quarry End Surveys")
    edited = jobs.update_client(db, people.admin, made.id or 0, "MARLOW VALE CIVILS", "", "", "")
    assert edited.name == "MARLOW VALE CIVILS"  # no clash with itself (jobs._unique_client_name)
    with pytest.raises(Invalid) as refused:
        jobs.update_client(db, people.admin, made.id or 0, "quarry end surveys", "", "", "")
    assert refused_fields(refused) == {"name"}  # unique whatever the case (jobs.create_client docstring)


# --- jobs ---------------------------------------------------------------------------------------


def test_a_job_is_registered_with_its_details_and_audited(db: Database, people: People) -> None:
    client = jobs.create_client(db, people.admin, "Marlow Vale Civils")
    job = jobs.create_job(
        db,
        people.review,
        client.id or 0,
        JOB,
        "Harrow Lane culvert",
        "Harrow Lane, Marlow Vale",
        "2026-11-20",
        order_reference="PO 55120",
        received_on="2026-11-06",
        standards="bs-iso",
    )
    assert job.received_at == datetime(2026, 11, 6, tzinfo=UTC)  # the day at 00:00 UTC (jobs.job_values)
    # as given
    assert (job.standards, job.order_reference, str(job.due_date)) == ("bs-iso", "PO 55120", "2026-11-20")
    (event,) = audit_events(db, "job", job.id)  # one event per create (audit)
    assert (event.action, event.actor, event.before) == ("create", "review", None)  # audit
    assert event.after is not None
    assert (event.after["code"], event.after["standards"]) == (JOB, "bs-iso")  # as given
    assert event.after["due_date"] == "2026-11-20"  # a date as ISO 8601 text in the audit JSON (computed)


def test_a_job_without_a_title_is_titled_by_its_number(db: Database, people: People) -> None:
    client = jobs.create_client(db, people.admin, "Marlow Vale Civils")
    assert jobs.create_job(db, people.admin, client.id or 0, JOB).title == JOB  # jobs.job_values


@pytest.mark.parametrize("standards", ["astm", "bs-iso"])  # the two families (vocabulary.STANDARDS)
def test_a_job_is_tested_to_either_family_of_standards(db: Database, people: People, standards: str) -> None:
    client = jobs.create_client(db, people.admin, "Marlow Vale Civils")
    job = jobs.create_job(db, people.admin, client.id or 0, JOB, standards=standards)
    assert job.standards == standards  # as given


@pytest.mark.parametrize("standards", ["din", "", "BS 1377"])  # not ids of vocabulary.STANDARDS
def test_an_unknown_family_of_standards_is_refused_at_its_field(
    db: Database, people: People, standards: str
) -> None:
    client = jobs.create_client(db, people.admin, "Marlow Vale Civils")
    with pytest.raises(Invalid) as refused:
        jobs.create_job(db, people.admin, client.id or 0, JOB, standards=standards)
    assert refused_fields(refused) == {"standards"}  # field-level
    assert row_count(db, Job) == 0  # one transaction


def test_a_duplicate_job_number_is_refused_at_its_field_and_nothing_is_stored(
    db: Database, people: People
) -> None:
    site = _site(db, people)
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        jobs.create_job(db, people.admin, site.client_id, f" {JOB} ", "Another culvert")  # blanks stripped
    assert refused_fields(refused) == {"code"}  # the job number is unique in the laboratory (tables.Job)
    assert row_counts(db) == before  # one transaction


def test_a_job_form_with_several_mistakes_names_each_field_and_stores_nothing(
    db: Database, people: People
) -> None:
    client = jobs.create_client(db, people.admin, "Marlow Vale Civils")
    before = row_counts(db)
    form = jobs.JobForm(
        client.id or 0,
        code="",  # required (jobs.job_values)
        title="T" * 201,  # at most 200 (jobs.job_values)
        received_on="06/11/2026",  # not YYYY-MM-DD (fields.Checks.day)
        due_date="2026-02-30",  # no 30 February (computed)
        standards="jis",  # not in vocabulary.STANDARDS
    )
    with pytest.raises(Invalid) as refused:
        jobs.save_job(db, people.admin, form)
    everything = {"code", "title", "received_on", "due_date", "standards"}  # the five typed above
    assert refused_fields(refused) == everything  # field-level, all at once (fields.Checks)
    assert row_counts(db) == before  # one transaction


def test_a_due_date_before_the_received_date_is_refused_at_the_due_date(db: Database, people: People) -> None:
    client = jobs.create_client(db, people.admin, "Marlow Vale Civils")
    with pytest.raises(Invalid) as refused:
        jobs.create_job(
            db, people.admin, client.id or 0, JOB, due_date="2026-11-05", received_on="2026-11-06"
        )
    assert refused_fields(refused) == {"due_date"}  # common practice: work is not due before it arrives
    assert row_count(db, Job) == 0  # one transaction


def test_a_job_for_a_client_that_is_not_registered_is_refused(db: Database, people: People) -> None:
    with pytest.raises(Invalid) as refused:
        jobs.create_job(db, people.admin, 9999, JOB)  # no client 9999 in a fresh database
    assert refused_fields(refused) == {"client_id"}  # field-level (jobs._job_checks)
    assert row_count(db, Job) == 0  # one transaction


def test_editing_a_job_keeps_before_and_after_and_its_received_date(db: Database, people: People) -> None:
    client = jobs.create_client(db, people.admin, "Marlow Vale Civils")
    job = jobs.create_job(db, people.admin, client.id or 0, JOB, "Harrow Lane", received_on="2026-11-06")
    form = jobs.JobForm(client.id or 0, JOB, "Harrow Lane culvert replacement", due_date="2026-11-27")
    edited = jobs.save_job(db, people.review, form, job.id)
    # a blank received date keeps the one registered (jobs.job_in)
    assert edited.received_at == datetime(2026, 11, 6, tzinfo=UTC)
    event = audit_events(db, "job", job.id)[-1]
    assert (event.action, event.actor) == ("update", "review")  # audit
    assert event.before is not None and event.after is not None  # audit
    assert (event.before["title"], event.before["due_date"]) == ("Harrow Lane", None)  # as registered
    assert event.after["title"] == "Harrow Lane culvert replacement"  # as given
    assert event.after["due_date"] == "2026-11-27"  # as given


def test_a_job_cannot_take_the_number_of_another_job(db: Database, people: People) -> None:
    site = _site(db, people)
    other = jobs.create_job(db, people.admin, site.client_id, "MV-2026-015", "Harrow Lane outfall")
    with pytest.raises(Invalid) as refused:
        jobs.save_job(db, people.admin, jobs.JobForm(site.client_id, JOB, "Harrow Lane outfall"), other.id)
    assert refused_fields(refused) == {"code"}  # unique in the laboratory (tables.Job)


def test_the_job_number_changes_freely_until_a_report_is_issued_then_is_locked(
    db: Database, people: People
) -> None:
    site = _site(db, people, "MV-2026-41")
    slip = jobs.JobForm(site.client_id, JOB, "Harrow Lane culvert")
    assert jobs.save_job(db, people.admin, slip, site.job_id).code == JOB  # no report yet (jobs.save_job)
    sample = samples.add_sample(
        db, people.admin, site.bh01, "BH01-U1", 1.20, 1.65, "U100", "Firm brown CLAY", methods=["atterberg"]
    )
    with db.session() as s:
        test = s.exec(select(LabTest).where(LabTest.sample_id == sample.id)).one()
    approve(db, people, test.id or 0)
    reports.issue_report(db, people.review, site.job_id, BASE, password=PASSWORDS["review"])
    events = len(audit_events(db, "job", site.job_id))
    renumbered = jobs.JobForm(site.client_id, "MV-2026-140", "Harrow Lane")
    with pytest.raises(Invalid) as refused:
        jobs.save_job(db, people.admin, renumbered, site.job_id)
    assert refused_fields(refused) == {"code"}  # the number is printed on the report (DESIGN.md section 5)
    with db.session() as s:
        stored = s.get(Job, site.job_id)
    assert stored is not None
    assert (stored.code, stored.title) == (JOB, "Harrow Lane culvert")  # one transaction: the title neither
    assert len(audit_events(db, "job", site.job_id)) == events  # one transaction: no event
    retitled = jobs.JobForm(site.client_id, JOB, "Harrow Lane, phase 1")
    kept = jobs.save_job(db, people.admin, retitled, site.job_id)
    assert kept.title == "Harrow Lane, phase 1"  # the other details still change (jobs.save_job docstring)


# --- locations ----------------------------------------------------------------------------------


def test_adding_a_location_is_audited_with_its_fields(db: Database, people: People) -> None:
    site = _site(db, people)
    pit = samples.add_location(db, people.tech, site.job_id, "TP01", "trial pit", "451203,5", 218440, "62,4")
    assert (pit.kind, pit.northing) == ("trial pit", 218440.0)  # as given
    assert (pit.easting, pit.ground_level_m) == (451203.5, 62.4)  # decimal comma (fields.Checks.number)
    (event,) = audit_events(db, "location", pit.id)  # one event per create (audit)
    assert (event.action, event.actor, event.before) == ("create", "tech", None)  # audit
    assert event.after is not None
    assert (event.after["code"], event.after["kind"]) == ("TP01", "trial pit")  # as given


def test_a_location_code_is_unique_in_its_job_but_not_across_jobs(db: Database, people: People) -> None:
    site = _site(db, people)
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        samples.add_location(db, people.admin, site.job_id, "BH01", "trial pit")
    assert refused_fields(refused) == {"code"}  # unique in its job (tables.Location uq_location_job_code)
    assert row_counts(db) == before  # one transaction
    other = _site(db, people, "MV-2026-015")  # adds a BH01 of its own to another job
    assert other.bh01 != site.bh01  # another record (tables.Location: unique per job only)


def test_a_location_with_several_mistakes_names_each_field_and_stores_nothing(
    db: Database, people: People
) -> None:
    site = _site(db, people)
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        samples.add_location(
            db,
            people.admin,
            site.job_id,
            "",  # required (samples.location_values)
            "well",  # not in vocabulary.LOCATION_KINDS
            "abc",  # not a number (fields.Checks.number)
            2e7,  # beyond COORDINATE_MAX 1e7 m (samples.py, common practice)
            9500,  # above GROUND_LEVEL_RANGE 9000 m (samples.py)
        )
    everything = {"code", "kind", "easting", "northing", "ground_level_m"}  # the five typed above
    assert refused_fields(refused) == everything  # field-level, all at once (fields.Checks)
    assert row_counts(db) == before  # one transaction


def test_editing_a_location_keeps_before_and_after_and_refuses_a_code_in_use(
    db: Database, people: People
) -> None:
    site = _site(db, people)
    samples.add_location(db, people.admin, site.job_id, "BH02")
    samples.update_location(
        db, people.review, site.bh01, LocationForm("BH01A", "borehole", ground_level_m=58.1)
    )
    event = audit_events(db, "location", site.bh01)[-1]
    assert (event.action, event.actor) == ("update", "review")  # audit
    assert event.before is not None and event.after is not None  # audit
    assert (event.before["code"], event.before["ground_level_m"]) == ("BH01", None)  # as added by _site
    assert (event.after["code"], event.after["ground_level_m"]) == ("BH01A", 58.1)  # as given
    with pytest.raises(Invalid) as refused:
        samples.update_location(db, people.review, site.bh01, LocationForm("BH02"))
    assert refused_fields(refused) == {"code"}  # unique in its job (tables.Location)


# --- samples: registration ----------------------------------------------------------------------


def test_a_sample_is_registered_with_its_tests_requested_in_the_same_go(db: Database, people: People) -> None:
    site = _site(db, people)
    sample = samples.add_sample(
        db,
        people.tech,
        site.bh01,
        "BH01-U1",
        1.20,
        1.65,  # a U100 drive of 0.45 m (common practice)
        "U100",
        "Firm brown slightly sandy CLAY",
        methods=["atterberg", "water-content"],
    )
    (created,) = audit_events(db, "sample", sample.id)  # one event per create (audit)
    assert (created.action, created.actor, created.before) == ("create", "tech", None)  # audit
    assert created.after is not None
    after = (created.after["code"], created.after["depth_from_m"], created.after["depth_to_m"])
    assert after == ("BH01-U1", 1.20, 1.65)  # as given
    with db.session() as s:
        methods = sorted(t.method for t in s.exec(select(LabTest).where(LabTest.sample_id == sample.id)))
    assert methods == ["atterberg", "water-content"]  # as given (samples.add_sample)
    assert [e.action for e in audit_events(db, "lab_test")] == [
        "request",
        "request",
    ]  # one event a test (audit)


def test_a_blank_base_is_the_top_of_a_point_sample(db: Database, people: People) -> None:
    site = _site(db, people)
    for n, base in enumerate((None, "", "  "), 1):
        made = samples.add_sample(db, people.admin, site.bh01, f"BH01-D{n}", 2.5, base)
        assert (made.depth_from_m, made.depth_to_m) == (2.5, 2.5)  # common practice (samples.SampleForm)


def test_depths_with_a_decimal_comma_are_read(db: Database, people: People) -> None:
    site = _site(db, people)
    made = samples.add_sample(db, people.admin, site.bh01, "BH01-U1", "1,25", " 1,70 ", "U100")
    assert (made.depth_from_m, made.depth_to_m) == (1.25, 1.70)  # decimal comma (fields.Checks.number)


def test_the_deepest_depth_accepted_is_1000_m(db: Database, people: People) -> None:
    site = _site(db, people)
    made = samples.add_sample(db, people.admin, site.bh01, "BH01-C9", 999.5, 1000)
    assert made.depth_to_m == 1000.0  # DEPTH_MAX_M (server/exchange/schedule.py, common practice)


@pytest.mark.parametrize(
    "top",
    [
        "NaN",  # not a finite number (fields.Checks.number)
        float("nan"),  # IEEE 754 not-a-number
        "inf",  # fields._NUMBER has no words
        float("inf"),  # IEEE 754 infinity
        float("-inf"),  # IEEE 754 infinity
        "1e400",  # overflows to infinity in a double (IEEE 754, computed)
        "abc",  # not a number
        "1.2.3",  # not a number
        "1,250.5",  # a thousands separator is not a decimal comma (common practice)
        1000.5,  # beyond DEPTH_MAX_M 1000 m (schedule.py, common practice)
        "1e4",  # 10 000 m (computed)
        -0.1,  # above ground (samples.sample_values: from 0)
    ],
)
def test_a_depth_that_is_not_a_finite_number_within_1000_m_is_refused_at_its_field(
    db: Database, people: People, top: Any
) -> None:
    site = _site(db, people)
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        samples.add_sample(db, people.admin, site.bh01, "BH01-U1", top, 1.0)
    assert refused_fields(refused) == {"depth_from_m"}  # field-level
    assert row_counts(db) == before  # one transaction


def test_a_bad_base_is_refused_at_the_base_alone(db: Database, people: People) -> None:
    site = _site(db, people)
    with pytest.raises(Invalid) as refused:
        samples.add_sample(db, people.admin, site.bh01, "BH01-U1", 1.2, "abc")
    assert refused_fields(refused) == {"depth_to_m"}  # field-level
    (error,) = refused.value.errors  # not also "above the top": the base was never read (samples.py)
    assert "must be a number" in error.message  # fields.Checks.number


def test_a_base_above_the_top_is_refused_at_the_base(db: Database, people: People) -> None:
    site = _site(db, people)
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        samples.add_sample(db, people.admin, site.bh01, "BH01-U1", 1.65, 1.20)
    assert refused_fields(refused) == {"depth_to_m"}  # base not above top (tables.Sample depth_order)
    assert row_counts(db) == before  # one transaction


def test_a_sample_with_several_mistakes_names_each_field_and_stores_nothing(
    db: Database, people: People
) -> None:
    site = _site(db, people)
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        samples.add_sample(
            db,
            people.admin,
            site.bh01,
            "BH01\tU1",  # a tab: not one line of printable characters (fields.Checks.code)
            "abc",  # not a number
            "1e400",  # not finite (computed)
            "bucket",  # not in vocabulary.SAMPLE_TYPES
            "C" * 1001,  # DESCRIPTION_MAX 1000 (schedule.py)
            "R" * 1001,  # REMARKS_MAX 1000 (schedule.py)
        )
    everything = {"code", "depth_from_m", "depth_to_m", "sample_type", "description", "remarks"}
    assert refused_fields(refused) == everything  # field-level, all at once (fields.Checks)
    assert row_counts(db) == before  # one transaction


def test_a_sample_code_is_unique_in_its_job_but_not_across_jobs(db: Database, people: People) -> None:
    site = _site(db, people)
    samples.add_sample(db, people.admin, site.bh01, "BH01-U1", 1.2, 1.65, "U100")
    bh02 = samples.add_location(db, people.admin, site.job_id, "BH02")
    before = row_counts(db)
    for location_id in (site.bh01, bh02.id or 0):  # at the same or another location of the job
        with pytest.raises(Invalid) as refused:
            samples.add_sample(db, people.admin, location_id, "BH01-U1", 3.0, 3.45, "U100")
        assert refused_fields(refused) == {"code"}  # unique in its job (tables.Sample uq_sample_job_code)
    assert row_counts(db) == before  # one transaction
    other = _site(db, people, "MV-2026-015")
    made = samples.add_sample(db, people.admin, other.bh01, "BH01-U1", 1.2, 1.65, "U100")
    assert made.job_id == other.job_id  # the same code in another job is another sample (tables.Sample)


def test_an_unknown_method_leaves_no_sample_behind(db: Database, people: People) -> None:
    site = _site(db, people)
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        # "slake" is not one of server.engine.METHODS
        samples.add_sample(db, people.admin, site.bh01, "BH01-U1", 1.2, 1.65, methods=["atterberg", "slake"])
    assert refused_fields(refused) == {"methods"}  # field-level (jobs.requests_in)
    assert row_counts(db) == before  # one transaction: the sample went back with the refusal


def test_a_sample_at_a_location_that_does_not_exist_is_refused(db: Database, people: People) -> None:
    _site(db, people)
    with pytest.raises(Invalid) as refused:
        samples.add_sample(db, people.admin, 9999, "BH01-U1", 1.2)  # no location 9999 in a fresh database
    assert refused_fields(refused) == {"location_id"}  # field-level (samples._location_of_job)
    assert row_count(db, Sample) == 0  # one transaction


# --- samples: corrections -----------------------------------------------------------------------


def test_a_sample_with_tests_requested_but_nothing_entered_can_be_corrected_entirely(
    db: Database, people: People
) -> None:
    site = _site(db, people)
    bh02 = samples.add_location(db, people.admin, site.job_id, "BH02")
    made = samples.add_sample(
        db, people.admin, site.bh01, "BH01-U1", 1.2, 1.65, "U100", methods=["atterberg"]
    )
    form = SampleForm("BH02-U1", "2,00", "2,45", "UT100", "Soft grey CLAY", "label smudged")
    samples.update_sample(db, people.review, made.id or 0, bh02.id or 0, form)
    stored = _sample(db, made.id or 0)
    # a requested test holds no readings, so the identity is still open (samples.update_sample docstring)
    assert (stored.location_id, stored.code, stored.sample_type) == (bh02.id, "BH02-U1", "UT100")  # as given
    assert (stored.depth_from_m, stored.depth_to_m) == (2.0, 2.45)  # decimal comma (fields.Checks.number)
    event = audit_events(db, "sample", made.id)[-1]
    assert (event.action, event.actor) == ("update", "review")  # audit
    assert event.before is not None and event.after is not None  # audit
    assert (event.before["code"], event.before["location_id"]) == ("BH01-U1", site.bh01)  # as registered
    assert (event.after["code"], event.after["location_id"]) == ("BH02-U1", bh02.id)  # as given


def test_saving_a_sample_unchanged_writes_no_audit_event(db: Database, people: People) -> None:
    site = _site(db, people)
    made = samples.add_sample(db, people.admin, site.bh01, "BH01-U1", 1.2, 1.65, "U100")
    unchanged = SampleForm("BH01-U1", "1,2", 1.65, "U100")  # 1,2 is 1.2 (fields.Checks.number)
    samples.update_sample(db, people.admin, made.id or 0, site.bh01, unchanged)
    assert [e.action for e in audit_events(db, "sample", made.id)] == [
        "create"
    ]  # samples.change_in: no change


@pytest.mark.parametrize(
    ("change", "field"),
    [  # samples.IDENTITY: what names a sample on its results
        ({"location": "BH02"}, "location_id"),  # moved
        ({"code": "BH01-U1A"}, "code"),  # renamed
        ({"depth_from_m": 1.25}, "depth_from_m"),  # given another top
        ({"depth_to_m": 1.70}, "depth_to_m"),  # given another base
        ({"sample_type": "UT100"}, "sample_type"),  # retyped
    ],
)
def test_a_sample_with_readings_keeps_its_identity(
    db: Database, people: People, change: dict[str, Any], field: str
) -> None:
    site = _site(db, people)
    bh02 = samples.add_location(db, people.admin, site.job_id, "BH02")
    sample_id, _ = _entered(db, people, site)
    location_id = (bh02.id or 0) if "location" in change else site.bh01
    form = replace(
        SampleForm("BH01-U1", 1.20, 1.65, "U100", "Firm brown CLAY"),  # as registered by _entered
        **{k: v for k, v in change.items() if k != "location"},
    )
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        samples.update_sample(db, people.admin, sample_id, location_id, form)
    assert refused_fields(refused) == {
        field
    }  # results name the sample (samples.py docstring; DESIGN.md section 5)
    assert row_counts(db) == before  # one transaction
    stored = _sample(db, sample_id)
    identity = (stored.location_id, stored.code, stored.depth_from_m, stored.depth_to_m, stored.sample_type)
    assert identity == (site.bh01, "BH01-U1", 1.20, 1.65, "U100")  # as registered by _entered


def test_a_sample_with_readings_still_takes_a_corrected_description_and_remarks(
    db: Database, people: People
) -> None:
    site = _site(db, people)
    sample_id, test_id = _entered(db, people, site)
    described = "Firm brown slightly gravelly CLAY"
    form = SampleForm("BH01-U1", 1.20, 1.65, "U100", described, "top 20 mm disturbed")
    samples.update_sample(db, people.review, sample_id, site.bh01, form)
    stored = _sample(db, sample_id)
    assert (stored.description, stored.remarks) == (described, "top 20 mm disturbed")  # as given
    event = audit_events(db, "sample", sample_id)[-1]
    assert event.action == "update" and event.before is not None and event.after is not None  # audit
    assert event.before["description"] == "Firm brown CLAY"  # as registered by _entered
    assert event.after["description"] == described  # as given
    with db.session() as s:
        test = s.get(LabTest, test_id)
    assert test is not None and test.readings == {"determinations": NATURAL}  # as saved by _entered


# --- samples: withdrawal, never deletion --------------------------------------------------------


def test_there_is_no_way_to_delete_a_sample_or_any_record_of_intake() -> None:
    names = [n for module in (samples, jobs) for n, _ in inspect.getmembers(module, inspect.isfunction)]
    assert not [n for n in names if "delete" in n or "remove" in n]  # never deleted (samples.py docstring)


@pytest.mark.parametrize("reason", ["", "   "])  # blank after stripping (review.required_reason)
def test_withdrawing_a_sample_needs_a_reason(db: Database, people: People, reason: str) -> None:
    site = _site(db, people)
    made = samples.add_sample(db, people.admin, site.bh01, "BH01-U1", 1.2, 1.65, "U100")
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        samples.withdraw_sample(db, people.review, made.id or 0, reason)
    assert refused_fields(refused) == {"reason"}  # field-level (review.required_reason)
    assert row_counts(db) == before  # one transaction
    assert _sample(db, made.id or 0).withdrawn_at is None  # one transaction


def test_a_withdrawal_reason_is_at_most_1000_characters(db: Database, people: People) -> None:
    site = _site(db, people)
    made = samples.add_sample(db, people.admin, site.bh01, "BH01-U1", 1.2, 1.65, "U100")
    with pytest.raises(Invalid) as refused:
        samples.withdraw_sample(db, people.review, made.id or 0, "x" * 1001)  # review.MAX_REASON 1000
    assert refused_fields(refused) == {"reason"}  # field-level


def test_a_withdrawn_sample_keeps_its_row_its_tests_and_the_reason_in_the_audit(
    db: Database, people: People
) -> None:
    site = _site(db, people)
    sample_id, test_id = _entered(db, people, site)
    reason = "Tube crushed in transit; material unrepresentative"
    samples.withdraw_sample(db, people.review, sample_id, f"  {reason} ")
    stored = _sample(db, sample_id)  # still there (tables.Sample docstring: never deleted)
    assert stored.withdrawn_at is not None
    assert abs((datetime.now(UTC) - stored.withdrawn_at).total_seconds()) < 60  # now, within a slow run
    assert stored.withdrawn_by_id == people.review.id  # the actor (samples.withdraw_sample)
    assert stored.withdrawn_reason == reason  # as given, blanks stripped (review.required_reason)
    assert stored.code == "BH01-U1"  # as registered by _entered
    with db.session() as s:
        # its tests are kept as they are (samples.withdraw_sample docstring)
        assert s.get(LabTest, test_id) is not None
    event = audit_events(db, "sample", sample_id)[-1]
    assert (event.action, event.actor, event.reason) == ("withdraw", "review", reason)  # audit: who, why
    assert event.before is not None and event.after is not None  # audit
    assert (event.before["withdrawn_at"], event.before["withdrawn_reason"]) == (None, None)  # not withdrawn
    assert event.after["withdrawn_reason"] == reason  # as given
    assert event.after["withdrawn_by_id"] == people.review.id  # the actor


def test_a_sample_is_withdrawn_once(db: Database, people: People) -> None:
    site = _site(db, people)
    made = samples.add_sample(db, people.admin, site.bh01, "BH01-U1", 1.2, 1.65, "U100")
    samples.withdraw_sample(db, people.review, made.id or 0, "Duplicate of BH01-U2")
    events = len(audit_events(db, "sample", made.id))
    with pytest.raises(Invalid) as refused:
        samples.withdraw_sample(db, people.admin, made.id or 0, "Sample lost")
    assert refused_fields(refused) == {"reason"}  # field-level (samples.withdraw_sample)
    stored = _sample(db, made.id or 0)
    assert stored.withdrawn_reason == "Duplicate of BH01-U2"  # the first withdrawal's, as given
    assert stored.withdrawn_by_id == people.review.id  # the first withdrawal's actor
    assert len(audit_events(db, "sample", made.id)) == events  # one transaction: no event


def test_a_withdrawn_sample_refuses_new_tests_and_edits(db: Database, people: People) -> None:
    site = _site(db, people)
    gone = samples.add_sample(db, people.admin, site.bh01, "BH01-U1", 1.2, 1.65, "U100")
    kept = samples.add_sample(db, people.admin, site.bh01, "BH01-U2", 2.0, 2.45, "U100")
    samples.withdraw_sample(db, people.review, gone.id or 0, "Tube empty on extrusion")
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        jobs.request_tests(db, people.review, [kept.id or 0, gone.id or 0], ["water-content"])
    assert refused_fields(refused) == {"sample_ids"}  # field-level (jobs.requests_in)
    described = SampleForm("BH01-U1", 1.2, 1.65, "U100", "Soft CLAY")
    with pytest.raises(Invalid) as refused:
        samples.update_sample(db, people.review, gone.id or 0, site.bh01, described)
    assert refused_fields(refused) == {"code"}  # field-level (samples.update_sample)
    assert row_counts(db) == before  # one transaction: not even the request for BH01-U2
    assert _sample(db, gone.id or 0).description == ""  # as registered
