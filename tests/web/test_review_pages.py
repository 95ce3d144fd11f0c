"""The review desk over HTTP: the queue's order, filters and counts, batch signing, the review
page (readings, every computed value, curves, flags, changes against the earlier revision),
amending, the conflict message, and the job page's note of reports that need re-issue."""

from __future__ import annotations

import copy
import re

import pytest
from fastapi.testclient import TestClient

from server.db.session import Database
from server.services import amendments, bench, reports, review
from tests.conftest import PASSWORDS, People
from tests.support.http import post_form, sign_in
from tests.support.renders import run_queued
from tests.support.scenario import ATTERBERG
from tests.workflow.flows import EXPIRED_BALANCE, Lab, load, version


def _three(db: Database, people: People) -> tuple[Lab, int, int, int]:
    """A clean water content handed in first, then an Atterberg set with a warning, then a water
    content with an error flag."""
    lab = Lab(db, people.admin, "RV-1")
    clean = lab.submitted(people.tech, "water-content")
    warned = lab.submitted(people.tech)
    failed = lab.submitted(people.tech, "water-content", EXPIRED_BALANCE)
    return lab, clean, warned, failed


def _ids(reply: object) -> list[int]:
    return [q.row.test.id for q in reply.context["rows"]]  # type: ignore[attr-defined]


def test_the_queue_puts_errors_then_warnings_then_the_rest_and_counts_them(
    app_client: TestClient, db: Database, people: People
) -> None:
    _lab, clean, warned, failed = _three(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = app_client.get("/review")
    assert reply.status_code == 200 and reply.template.name == "pages/review_queue.html"  # type: ignore[attr-defined]
    assert _ids(reply) == [failed, warned, clean]
    counts = reply.context["queue"].counts  # type: ignore[attr-defined]
    assert (
        counts.waiting,
        counts.shown,
        counts.with_error,
        counts.with_warning_only,
        counts.without_flags,
    ) == (
        3,
        3,
        1,
        1,
        1,
    )
    assert counts.by_method == {"water-content": 2, "atterberg": 1}
    assert counts.by_author == {people.tech.id: 3}
    assert "1</b> with an error remark" in reply.text


def test_the_queue_narrows_by_job_method_person_age_and_flags(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab, clean, warned, failed = _three(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    cases = {
        f"job={lab.job.id}": [failed, warned, clean],
        f"job={(lab.job.id or 0) + 99}": [],
        "method=atterberg": [warned],
        f"person={people.tech.id}": [failed, warned, clean],
        f"person={people.review2.id}": [],
        "age=0": [failed, warned, clean],
        "age=1": [],  # handed in moments ago: nothing has waited a day
        "flags=any": [failed, warned],
        "flags=error": [failed],
        "flags=warning": [warned],
        "flags=none": [clean],
        "flags=nonsense&age=soon&job=x": [failed, warned, clean],  # nonsense narrows nothing
    }
    for query, expected in cases.items():
        reply = app_client.get(f"/review?{query}")
        assert reply.status_code == 200, query
        assert _ids(reply) == expected, query
        assert reply.context["queue"].counts.shown == len(expected)  # type: ignore[attr-defined]
        assert reply.context["queue"].counts.waiting == 3  # type: ignore[attr-defined]


def test_only_unflagged_tests_of_others_can_be_ticked_for_a_batch(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab, clean, warned, failed = _three(db, people)
    own = lab.submitted(people.review, "water-content")
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = app_client.get("/review")
    batchable = {q.row.test.id: q.batchable for q in reply.context["rows"]}  # type: ignore[attr-defined]
    assert batchable == {failed: False, warned: False, clean: True, own: False}
    assert f'value="{clean}:{version(db, clean)}"' in reply.text
    assert f'name="test" value="{warned}:' not in reply.text


def test_a_batch_is_signed_with_one_password_and_a_flagged_one_is_refused_whole(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab, clean, warned, _failed = _three(db, people)
    other = lab.submitted(people.tech, "water-content")
    sign_in(app_client, "review", PASSWORDS["review"])
    picked = [("test", f"{clean}:{version(db, clean)}"), ("test", f"{warned}:{version(db, warned)}")]
    refused = post_form(app_client, "/review", "/review/batch", [*picked, ("password", PASSWORDS["review"])])
    assert refused.status_code == 422 and "Nothing was approved" in refused.text
    assert "carry quality flags" in refused.text
    assert (load(db, clean).status, load(db, warned).status) == ("submitted", "submitted")
    picked = [("test", f"{clean}:{version(db, clean)}"), ("test", f"{other}:{version(db, other)}")]
    done = post_form(
        app_client,
        "/review",
        "/review/batch",
        [*picked, ("password", PASSWORDS["review"]), ("meaning", "Checked in a batch")],
        follow_redirects=False,
    )
    assert done.status_code == 303 and done.headers["location"] == "/review?approved=2"
    assert {load(db, i).signature_meaning for i in (clean, other)} == {"Checked in a batch"}
    assert "2 test(s) approved and signed." in app_client.get("/review?approved=2").text


def test_the_review_page_shows_readings_every_computed_value_the_curves_and_every_flag(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "RV-2")
    test_id = lab.submitted(people.tech)
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = app_client.get(f"/review/{test_id}")
    assert reply.status_code == 200 and reply.template.name == "pages/review.html"  # type: ignore[attr-defined]
    ctx = reply.context  # type: ignore[attr-defined]
    raw = {leaf.label: leaf.value for leaf in ctx["raw_readings"]}
    assert raw["liquid_limit › trials #1 › blows"] == 15  # Das problem set, tests/support/scenario.py
    computed = {leaf.label: leaf.value for leaf in ctx["computed"]}
    assert computed["liquid_limit"] == pytest.approx(39.67, abs=0.01)  # Das: least squares at 25 blows
    assert computed["plastic_limit"] == pytest.approx(21.2, abs=0.05)  # Liu & Evett worked example
    stored = load(db, test_id).results or {}
    assert len(ctx["computed"]) >= len(stored)  # every stored result is listed (nested ones as leaves)
    assert [f["code"] for f in ctx["flags"]] == ["pl-determinations-apart"]
    assert "pl-determinations-apart" in reply.text
    assert len(ctx["charts"]) == 2 and all(
        svg.startswith("<svg") for svg in ctx["charts"]
    )  # flow curve, chart
    assert ctx["may_approve"] and ctx["may_return"] and not ctx["may_amend"]


def test_a_technician_may_not_open_the_review_desk(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    assert app_client.get("/review").status_code == 403


def test_returning_without_a_reason_is_refused_at_the_page(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "RV-3")
    test_id = lab.submitted(people.tech)
    sign_in(app_client, "review", PASSWORDS["review"])
    path = f"/review/{test_id}"
    reply = post_form(
        app_client, path, f"{path}/return", {"version": str(version(db, test_id)), "reason": " "}
    )
    assert reply.status_code == 422 and "Not returned: a reason is required" in reply.text
    assert load(db, test_id).status == "submitted"


def test_the_second_of_two_reviewers_gets_a_conflict_that_names_the_first(
    app_client: TestClient, second_client: TestClient, db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "RV-4")
    test_id = lab.submitted(people.tech)
    path = f"/review/{test_id}"
    sign_in(app_client, "review", PASSWORDS["review"])
    sign_in(second_client, "review2", PASSWORDS["review2"])
    seen = str(version(db, test_id))
    first = post_form(
        app_client,
        path,
        f"{path}/approve",
        {"version": seen, "password": PASSWORDS["review"]},
        follow_redirects=False,
    )
    assert first.status_code == 303
    second = post_form(
        second_client, path, f"{path}/approve", {"version": seen, "password": PASSWORDS["review2"]}
    )
    assert second.status_code == 409
    assert re.search(
        r"Not approved: Review Person approved this test at [^;]+, after you opened it; "
        r"your approval was not applied",
        second.text,
    )
    assert load(db, test_id).approved_by_id == people.review.id


def test_amending_opens_the_new_revision_and_its_page_shows_what_changed(
    app_client: TestClient, second_client: TestClient, db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "RV-5")
    first = lab.approved(people.tech, people.review)
    sign_in(app_client, "review2", PASSWORDS["review2"])
    path = f"/review/{first}"
    assert app_client.get(path).context["may_amend"]  # type: ignore[attr-defined]
    no_reason = post_form(
        app_client, path, f"{path}/amend", {"version": str(version(db, first)), "reason": ""}
    )
    assert no_reason.status_code == 422 and load(db, first).status == "approved"
    made = post_form(
        app_client,
        path,
        f"{path}/amend",
        {"version": str(version(db, first)), "reason": "dry mass of N1 mis-keyed"},
        follow_redirects=False,
    )
    assert made.status_code == 303
    second = int(made.headers["location"].rsplit("/", 1)[1])
    corrected = copy.deepcopy(ATTERBERG)
    corrected["water_content"]["determinations"][0]["dry_tare_g"] = 30.10
    saved = bench.save_readings(db, people.tech, second, corrected, version(db, second))
    bench.submit(db, people.tech, second, saved.test.version)

    page = app_client.get(f"/review/{second}")
    ctx = page.context  # type: ignore[attr-defined]
    readings = [(c.label, c.before, c.after) for c in ctx["previous"].readings]
    assert readings == [("water_content › determinations #1 › dry_tare_g", 30.00, 30.10)]
    results = {c.label: (c.before, c.after) for c in ctx["previous"].results}
    # ASTM D2216 cl. 12.1: (36.00 - 30.00) / 20.00 = 30.0 % before, (36.00 - 30.10) / 20.10 after
    assert results["water_content"] == (pytest.approx(30.0), pytest.approx(100 * 5.90 / 20.10))
    assert "dry mass of N1 mis-keyed" in page.text and ctx["blocked_as_author"]  # review2 amended it
    assert [t.revision for t in ctx["chain"]] == [1, 2]

    old_page = app_client.get(path)
    assert old_page.context["later"].id == second  # type: ignore[attr-defined]
    assert not old_page.context["may_amend"]  # type: ignore[attr-defined]
    sign_in(second_client, "review", PASSWORDS["review"])
    assert not second_client.get(f"/review/{second}").context["blocked_as_author"]  # type: ignore[attr-defined]


def test_the_job_page_loads_the_reports_that_need_reissue(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "RV-6")
    first = lab.approved(people.tech, people.review)
    report = reports.issue_report(
        db, people.review, lab.job.id or 0, "http://testserver", password=PASSWORDS["review"]
    )
    sign_in(app_client, "review", PASSWORDS["review"])
    job_page = app_client.get(f"/jobs/{lab.job.id}")
    assert f'hx-get="/jobs/{lab.job.id}/reissue"' in job_page.text
    fragment = f"/jobs/{lab.job.id}/reissue"
    assert app_client.get(fragment, headers={"HX-Request": "true"}).context["reissue"] == []  # type: ignore[attr-defined]
    amendments.amend(db, people.review2, first, "tare re-checked", version(db, first))
    # S7 point 5: while the amendment is open, revision 1 stays current and the report needs nothing
    assert app_client.get(fragment, headers={"HX-Request": "true"}).context["reissue"] == []  # type: ignore[attr-defined]
    review_page = app_client.get(f"/review/{first}")
    second = review_page.context["later"].id  # type: ignore[attr-defined]
    bench.submit(db, people.tech, second, version(db, second))
    assert f'action="/reports/{report.id}/reissue"' not in app_client.get(fragment).text
    # Once the amended revision is approved, the note offers the re-issue; after it, the note is gone.
    review.approve(db, people.review, second, PASSWORDS["review"], version(db, second))
    reply = app_client.get(fragment, headers={"HX-Request": "true"})
    assert reply.template.name == "partials/reissue_list.html" and "<html" not in reply.text  # type: ignore[attr-defined]
    assert "Reports that need re-issue" in reply.text and report.number in reply.text
    full = app_client.get(fragment)
    assert full.template.name == "pages/reissue.html" and "<html" in full.text  # type: ignore[attr-defined]
    review_page = app_client.get(f"/review/{first}")
    assert [r.report.id for r in review_page.context["reissue"]] == [report.id]  # type: ignore[attr-defined]
    ready = app_client.get(fragment)
    assert "Ready to re-issue" in ready.text and f'action="/reports/{report.id}/reissue"' in ready.text
    signed = {"password": PASSWORDS["review"]}  # a re-issue is signed (S7 point 4)
    done = post_form(app_client, fragment, f"/reports/{report.id}/reissue", signed, follow_redirects=False)
    assert done.status_code == 303
    run_queued(db)
    assert app_client.get(fragment, headers={"HX-Request": "true"}).context["reissue"] == []  # type: ignore[attr-defined]
