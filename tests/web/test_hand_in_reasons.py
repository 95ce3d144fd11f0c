"""An error-severity remark blocks hand-in until the technician records why it stands (S7 point
6); the reason is kept with the record and audited, and the reviewer sees it beside the remark on
the review page and in the queue. A reason is real words (``review.required_reason``).

Source: ISO/IEC 17025:2017 cl. 7.5.1 (the record of a result keeps what was noticed about it);
the check readings are those of tests/workflow/flows.py (a balance past its calibration date,
ISO/IEC 17025:2017 cl. 6.4.13) and a water content above 1000 % (computed, ASTM D2216 formula).
"""

from __future__ import annotations

import re

import pytest
from fastapi.testclient import TestClient

from server.db.session import Database
from server.db.tables import LabTest
from server.services import bench
from server.services.errors import Invalid
from tests.conftest import PASSWORDS, People
from tests.support.http import post_form, sign_in
from tests.support.records import audit_events
from tests.support.scenario import form_fields, small_job
from tests.workflow.flows import EXPIRED_BALANCE

CODE = "equipment-calibration-expired"
WHY = "BAL-1 was checked against the 200 g reference weight that morning"
# ASTM D2216 formula: (40.00 - 12.00) / (12.00 - 10.00) x 100 = 1400 %, above 1000 % (computed)
PEAT = {"determinations": [{"tare_g": "10.00", "wet_tare_g": "40.00", "dry_tare_g": "12.00"}]}


def _test(db: Database, test_id: int) -> LabTest:
    with db.session() as s:
        test = s.get(LabTest, test_id)
    assert test is not None
    return test


def _drafted(db: Database, people: People, readings: dict[str, object] = EXPIRED_BALANCE) -> tuple[int, int]:
    job = small_job(db, people.admin, method="water-content")
    saved = bench.save_readings(db, people.tech, job.test_id, dict(readings), 1)
    return job.test_id, saved.test.version


def test_an_error_remark_without_a_reason_blocks_the_hand_in(db: Database, people: People) -> None:
    test_id, version = _drafted(db, people)
    with pytest.raises(Invalid) as refused:
        bench.submit(db, people.tech, test_id, version)
    assert [e.loc for e in refused.value.errors] == [("reasons", CODE)]
    assert "a reason is required" in refused.value.errors[0].message
    assert _test(db, test_id).status == "draft" and not audit_events(db, "lab_test", test_id, "submit")


@pytest.mark.parametrize("thin", ["", "   ", "ok", "..........", "aaaaaaaaaaaa", "1234567890 !!"])
def test_a_reason_of_no_real_words_is_refused(db: Database, people: People, thin: str) -> None:
    test_id, version = _drafted(db, people)
    with pytest.raises(Invalid) as refused:
        bench.submit(db, people.tech, test_id, version, {CODE: thin})
    assert [e.loc for e in refused.value.errors] == [("reasons", CODE)]
    assert _test(db, test_id).status == "draft"


def test_a_reason_lets_the_test_in_and_is_stored_and_audited(db: Database, people: People) -> None:
    test_id, version = _drafted(db, people)
    handed = bench.submit(
        db, people.tech, test_id, version, {CODE: f"  {WHY} ", "not-standing": "ignored words"}
    )
    assert handed.status == "submitted"
    assert _test(db, test_id).flag_reasons == {CODE: WHY}  # only the remarks that stand, blanks folded
    (event,) = audit_events(db, "lab_test", test_id, "submit")
    assert event.after == {"status": "submitted", "flag_reasons": {CODE: WHY}}


def test_an_implausible_water_content_needs_a_reason_too(db: Database, people: People) -> None:
    test_id, version = _drafted(db, people, PEAT)
    with pytest.raises(Invalid) as refused:
        bench.submit(db, people.tech, test_id, version)
    assert [e.loc for e in refused.value.errors] == [("reasons", "implausible-water-content")]
    reason = {"implausible-water-content": "Fibrous peat: the water content is what the oven gave"}
    assert bench.submit(db, people.tech, test_id, version, reason).status == "submitted"


def test_a_test_without_error_remarks_is_handed_in_without_any_reason(db: Database, people: People) -> None:
    clean = {"determinations": [{"tare_g": 10.00, "wet_tare_g": 36.00, "dry_tare_g": 30.00}]}  # 30.0 %
    test_id, version = _drafted(db, people, clean)
    assert bench.submit(db, people.tech, test_id, version).status == "submitted"
    assert _test(db, test_id).flag_reasons is None


def test_the_bench_asks_for_the_reason_and_the_reviewer_sees_it_beside_the_remark(
    app_client: TestClient, db: Database, people: People
) -> None:
    test_id, version = _drafted(db, people)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/tests/{test_id}"
    page = app_client.get(path)
    assert f'name="reason.{CODE}"' in page.text  # one field per error remark, at hand-in
    hand_in = [*form_fields(EXPIRED_BALANCE), ("version", str(version)), ("then", "submit")]
    refused = post_form(app_client, path, f"{path}/readings", hand_in, follow_redirects=False)
    assert refused.status_code == 422 and _test(db, test_id).status == "draft"
    assert "say why each error remark stands" in refused.text
    assert re.search(rf'id="err-reason-{CODE}">error remark {CODE}: a reason is required', refused.text)
    version = _test(db, test_id).version
    hand_in = [
        *form_fields(EXPIRED_BALANCE),
        ("version", str(version)),
        ("then", "submit"),
        (f"reason.{CODE}", WHY),
    ]
    done = post_form(app_client, path, f"{path}/readings", hand_in, follow_redirects=False)
    assert done.status_code == 303, done.text
    assert _test(db, test_id).status == "submitted" and _test(db, test_id).flag_reasons == {CODE: WHY}

    sign_in(app_client, "review", PASSWORDS["review"])
    review_page = app_client.get(f"/review/{test_id}")
    flags = review_page.text[review_page.text.index('id="flags"') : review_page.text.index('id="readings"')]
    assert "equipment BAL-1 was past its calibration due date" in flags and f"“{WHY}”" in flags
    queue = app_client.get("/review").text
    assert f"stands because: “{WHY}”" in queue


def test_a_hand_in_of_an_autosaved_sheet_carries_its_reasons(
    app_client: TestClient, db: Database, people: People
) -> None:
    """The script's hand-in posts only the version and the reasons: the fields are saved already."""
    test_id, version = _drafted(db, people)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/tests/{test_id}"
    fields = [("version", str(version)), ("then", "submit"), ("autosaved", "1"), (f"reason.{CODE}", WHY)]
    done = post_form(app_client, path, f"{path}/readings", fields, follow_redirects=False)
    assert done.status_code == 303 and _test(db, test_id).flag_reasons == {CODE: WHY}
