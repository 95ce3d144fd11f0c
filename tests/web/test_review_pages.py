"""The review desk over HTTP: the queue's order, filters and counts, batch signing, the review
page (the results as reported, flags and curves first, the readings as the PDF's tables, every
stored value folded away, changes against the earlier revision), the confirmation and next test
after a decision, a wrong password at its field, amending, the conflict message, and the job
page's note of reports that need re-issue. Methods, flags, states and events by their names
(server/reports/names.py), the ids only in tooltips and links."""

from __future__ import annotations

import copy
import re

import pytest
from fastapi.testclient import TestClient

from server.db.session import Database
from server.reports.names import event_name, flag_name, method_name, state_name
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


_TAG = re.compile(r"<[^>]*>")


def _words(html: str) -> str:
    """The text a person reads: the page without its tags (and so without attributes, where
    the ids stay as tooltips and links)."""
    return " ".join(_TAG.sub(" ", html).split())


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
    assert "3 tests handed in" in _words(reply.text)


def test_the_queue_names_methods_and_flags_in_words_with_the_ids_in_tooltips(
    app_client: TestClient, db: Database, people: People
) -> None:
    _lab, clean, warned, failed = _three(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = app_client.get("/review")
    text = _words(reply.text)
    for method in ("atterberg", "water-content"):
        assert method_name(method) in text and f'title="{method}"' in reply.text
        assert method not in text  # the id only as a tooltip or a filter's value
    # EXPIRED_BALANCE: a balance past its calibration date (ISO/IEC 17025:2017 cl. 6.4.7)
    assert "✖ Error: " + flag_name("equipment-calibration-expired") in text
    assert (
        "equipment-calibration-expired" not in text and 'title="equipment-calibration-expired"' in reply.text
    )
    assert flag_name("pl-determinations-apart") in text  # BS 1377-2:1990 cl. 5 (the scenario's PL pair)
    assert f'<option value="atterberg" >{method_name("atterberg")} (1)</option>' in reply.text
    for test_id in (clean, warned, failed):
        assert f'href="/review/{test_id}"' in reply.text


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
    assert "2 tests approved and signed." in app_client.get("/review?approved=2").text  # one plural helper
    assert "1 test approved and signed." in app_client.get("/review?approved=1").text


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
    assert (
        'title="pl-determinations-apart"' in reply.text and flag_name("pl-determinations-apart") in reply.text
    )
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


def test_the_review_page_leads_with_the_results_as_reported_then_the_readings_then_every_stored_value(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "RV-7")
    test_id = lab.submitted(people.tech)
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = app_client.get(f"/review/{test_id}")
    html = reply.text
    assert f"<title>Review BH1 / S1 · {method_name('atterberg')} · Claybench</title>" in html
    results = {line.label: (line.value, line.unit) for line in reply.context["report"].results}  # type: ignore[attr-defined]
    # Das least squares LL 39.67 at 25 blows, shown to a whole number (DESIGN.md section 3: limits
    # to whole numbers, water content to 0.1 %); w = (36.00 - 30.00) / 20.00 = 30.0 % (ASTM D2216 cl. 12.1)
    assert results["Liquid limit, LL"][0] == "40" and results["Water content, w"] == ("30.0", "%")
    summary, readings, stored, decision = (
        html.index(f'id="{part}"') for part in ("summary", "readings", "stored", "decision")
    )
    assert summary < readings < stored < decision  # the decision bar is last: sticky at the bottom
    assert '<details class="card" id="stored">' in html  # folded away, never open by default
    tables = {t.title: t for t in reply.context["report"].readings}  # type: ignore[attr-defined]
    trials = tables["Liquid limit — trials"]
    assert trials.columns[-1] == "w (%)" and [r[2] for r in trials.rows] == ["15", "20", "28"]  # Das blows
    text = _words(html)
    shown = text.split("Every value as stored")[0]  # what is read before the folded stored values
    assert "atterberg" not in shown  # the method by its name, the id in a tooltip
    assert not re.search(r"\d\.\d{5,}", shown)  # no full-precision number (issue S9: 0.21599999999999997)
    assert event_name("lab_test", "submit") in text and state_name("submitted") in text  # the history
    assert ">tech<" not in html and "Tech Person" in text  # who, by name


def test_a_decision_redirects_to_the_desk_which_confirms_it_and_offers_the_next_test(
    app_client: TestClient, db: Database, people: People
) -> None:
    _lab, clean, warned, failed = _three(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    path = f"/review/{warned}"
    signed = {"version": str(version(db, warned)), "password": PASSWORDS["review"]}
    done = post_form(app_client, path, f"{path}/approve", signed, follow_redirects=False)
    assert done.status_code == 303 and done.headers["location"] == f"/review?decided={warned}"
    desk = app_client.get(done.headers["location"])
    assert desk.context["decided"].text.startswith(
        f"✔ Approved and signed: {method_name('atterberg')} on BH1 / S2"
    )  # type: ignore[attr-defined]
    assert desk.context["next_up"].row.test.id == failed  # type: ignore[attr-defined]  # errors first
    assert f'id="next-test" href="/review/{failed}"' in desk.text
    path = f"/review/{failed}"
    back = {"version": str(version(db, failed)), "reason": "re-weigh N1 on a calibrated balance"}
    done = post_form(app_client, path, f"{path}/return", back, follow_redirects=False)
    assert done.status_code == 303 and done.headers["location"] == f"/review?decided={failed}"
    desk = app_client.get(done.headers["location"])
    assert desk.context["decided"].text.startswith("↩ Returned to the bench: " + method_name("water-content"))  # type: ignore[attr-defined]
    assert desk.context["next_up"].row.test.id == clean  # type: ignore[attr-defined]
    assert (load(db, warned).status, load(db, failed).status) == ("approved", "returned")
    # The address says which test, never what happened: a test nobody decided on confirms nothing false.
    untouched = app_client.get(f"/review?decided={clean}").context["decided"].text  # type: ignore[attr-defined]
    assert "Approved" not in untouched and state_name("submitted") in untouched


def test_a_wrong_password_keeps_the_review_page_with_the_message_at_the_password_field(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "RV-8")
    test_id = lab.submitted(people.tech)
    sign_in(app_client, "review", PASSWORDS["review"])
    path = f"/review/{test_id}"
    reply = post_form(
        app_client, path, f"{path}/approve", {"version": str(version(db, test_id)), "password": "not it"}
    )
    assert reply.status_code == 422 and reply.template.name == "pages/review.html"  # type: ignore[attr-defined]
    assert reply.context["errors"]["password"].startswith("the password does not match")  # type: ignore[attr-defined]
    field = re.search(r'<input id="password"[^>]*>', reply.text)
    assert field and 'aria-invalid="true"' in field[0] and 'aria-describedby="err-password"' in field[0]
    assert 'id="err-password" role="alert">the password does not match' in reply.text
    assert load(db, test_id).status == "submitted" and load(db, test_id).approved_by_id is None
