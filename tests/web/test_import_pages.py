"""Importing a schedule from the page: upload, preview, header mapping, confirm.

Files are written by the tests (CSV by hand, XLSX with openpyxl, AGS4 with
``tests/support/ags4_files``). Nothing is stored by a preview; the confirmation stores the
previewed bytes in one transaction. The scenario (the Alder Brook embankment) is fictional.
"""

from __future__ import annotations

import io
import re

import openpyxl
from fastapi.testclient import TestClient
from httpx import Response
from sqlmodel import col, func, select

from server.db.session import Database
from server.db.tables import AuditEvent, Client, Job, LabTest, Location, Sample, StagedImport
from server.services import bench, jobs
from tests.conftest import PASSWORDS, People
from tests.support.ags4_files import ags4_text
from tests.support.http import csrf_of, sign_in
from tests.support.scenario import ATTERBERG

SCHEDULE_CSV = (
    "Location,Location type,Sample,Depth top (m),Depth base (m),Sample type,Description,Tests\n"
    "BH1,borehole,BH1-U1,1.00,1.45,U100,Firm brown CLAY,atterberg\n"
    "BH1,borehole,BH1-D2,2.50,,disturbed,Soft grey CLAY,water-content\n"
    "TP2,trial pit,TP2-B1,0.50,1.00,bulk,Made ground,\n"
)


def _job(db: Database, people: People) -> Job:
    client = jobs.create_client(db, people.admin, "Alder Brook Drainage Board")
    return jobs.create_job(db, people.admin, client.id or 0, "AB-2026-12", "Flood embankment", "Alder Brook")


def _counts(db: Database) -> tuple[int, ...]:
    with db.session() as s:
        return tuple(
            int(s.exec(select(func.count()).select_from(t)).one())
            for t in (Client, Job, Location, Sample, LabTest)
        )


def _upload(
    client: TestClient, page: str, name: str, content: bytes, fields: dict[str, str] | None = None
) -> Response:
    form = client.get(page)
    job_id = re.findall(r'name="job_id" value="(\d+)"', form.text)  # the page's own hidden field
    return client.post(
        "/import/preview",
        data={"csrf_token": csrf_of(form), **dict(zip(["job_id"], job_id, strict=False)), **(fields or {})},
        files={"file": (name, content, "application/octet-stream")},
    )


def _hidden(page: Response, name: str) -> str:
    found = re.search(rf'name="{name}" value="([^"]*)"', page.text)
    assert found, f"no hidden {name}"
    return found.group(1)


def _confirm(client: TestClient, preview: Response, **extra: str) -> Response:
    data = {"csrf_token": csrf_of(preview), "token": _hidden(preview, "token"), **extra}
    job_id = re.search(r'name="job_id" value="(\d+)"', preview.text)
    if job_id:
        data["job_id"] = job_id.group(1)
    return client.post("/import/confirm", data=data, follow_redirects=False)


def test_a_csv_schedule_is_previewed_stored_only_on_confirmation_and_reimported_unchanged(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    before = _counts(db)
    preview = _upload(app_client, f"/jobs/{job.id}/import", "schedule.csv", SCHEDULE_CSV.encode())
    assert preview.status_code == 200, re.findall(r"(?:field-error|<li>)[^\n]*", preview.text)
    assert all(code in preview.text for code in ("BH1-U1", "BH1-D2", "TP2-B1"))
    assert "Nothing refused" in preview.text
    assert _counts(db) == before  # a preview stores nothing (DESIGN.md section 7)

    done = _confirm(app_client, preview)
    assert done.status_code == 303 and done.headers["location"] == f"/jobs/{job.id}?done=imported"
    with db.session() as s:
        stored = {x.code: x for x in s.exec(select(Sample).where(Sample.job_id == job.id))}
        methods = sorted(s.exec(select(LabTest.method)))
        staged = s.exec(select(func.count()).select_from(StagedImport)).one()
        (event,) = s.exec(select(AuditEvent).where(AuditEvent.action == "import"))
    assert sorted(stored) == ["BH1-D2", "BH1-U1", "TP2-B1"]
    assert stored["BH1-D2"].depth_to_m == 2.5  # a blank base is the top (common practice: a point sample)
    assert methods == ["atterberg", "water-content"]
    assert staged == 0  # the staged file is gone once imported
    assert event.actor_id == people.review.id and "schedule.csv" in event.after["file"]
    assert event.after["created"] == {"locations": 2, "samples": 3, "tests": 2}  # computed from the file

    again = _upload(app_client, f"/jobs/{job.id}/import", "schedule.csv", SCHEDULE_CSV.encode())
    unchanged = re.findall(r"<td>unchanged</td>", again.text)
    assert len(unchanged) == 3  # re-importing the same file changes nothing (DESIGN.md section 7)
    counts = _counts(db)
    assert _confirm(app_client, again).status_code == 303
    assert _counts(db) == counts


def test_every_refused_cell_is_shown_with_its_row_and_nothing_can_be_confirmed(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    bad = (
        "Location,Location type,Sample,Depth top (m),Depth base (m),Sample type,Tests\n"
        "BH1,borehole,BH1-U1,1.00,1.45,U100,atterberg\n"
        "BH1,borehole,BH1-U1,2.00,2.45,U100,\n"  # duplicate sample code
        "BH1,borehole,BH1-U3,3.00,2.00,U100,\n"  # base above top
        "BH9,cave,BH9-1,1.00,,U100,\n"  # unknown location kind
        "BH1,borehole,BH1-U5,5.00,,bucket,\n"  # unknown sample type
        "BH1,borehole,BH1-U6,6.00,,U100,tea test\n"  # unknown test
        "BH1,borehole,BH1-U7,seven,,U100,\n"  # not a number
    )
    before = _counts(db)
    preview = _upload(app_client, f"/jobs/{job.id}/import", "bad.csv", bad.encode())
    assert preview.status_code == 422
    for row in range(3, 9):  # each bad line by the row number a spreadsheet shows (header = row 1)
        assert f"<td>row {row}</td>" in preview.text, row
    assert "BH1-U1" in preview.text and "refused" in preview.text
    assert 'action="/import/confirm"' not in preview.text  # no confirmation offered
    assert _counts(db) == before


def test_an_unrecognised_header_can_be_mapped_by_hand_and_the_mapping_is_used_on_confirm(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    odd = "Hole,Specimen no.,Top depth (m),Type\nBH1,BH1-U1,1.00,U100\nBH1,BH1-U2,2.00,U100\n"
    preview = _upload(app_client, f"/jobs/{job.id}/import", "odd.csv", odd.encode())
    assert preview.status_code == 422 and "not recognised" in preview.text
    token = _hidden(preview, "token")
    mapped = app_client.post(
        "/import/preview",
        data={
            "csrf_token": csrf_of(preview),
            "token": token,
            "job_id": str(job.id),
            "map_header": ["Specimen no.", "Top depth (m)"],
            "map_field": ["sample", "top"],
        },
    )
    assert mapped.status_code == 200 and "Nothing refused" in mapped.text
    confirm_form = mapped.text.split('action="/import/confirm"')[1]
    done = app_client.post(
        "/import/confirm",
        data={
            "csrf_token": csrf_of(mapped),
            "token": token,
            "job_id": str(job.id),
            "map_header": re.findall(r'name="map_header" value="([^"]*)"', confirm_form),
            "map_field": re.findall(r'name="map_field" value="([^"]*)"', confirm_form),
        },
        follow_redirects=False,
    )
    assert done.status_code == 303
    with db.session() as s:
        assert sorted(s.exec(select(Sample.code))) == ["BH1-U1", "BH1-U2"]


def test_an_xlsx_schedule_written_with_openpyxl_is_imported(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    book = openpyxl.Workbook()
    sheet = book.active
    assert sheet is not None
    sheet.append(["location", "SAMPLE", "depth_top [m]", "Depth Base (m)", "sample_type"])
    sheet.append(["BH1", "BH1-U1", 1.0, 1.45, "U100"])
    sheet.append(["BH1", "BH1-U2", 2.5, 2.95, "U100"])
    out = io.BytesIO()
    book.save(out)
    sign_in(app_client, "review", PASSWORDS["review"])
    preview = _upload(app_client, f"/jobs/{job.id}/import", "schedule.xlsx", out.getvalue())
    assert preview.status_code == 200, preview.text[-2000:]
    assert _confirm(app_client, preview).status_code == 303
    with db.session() as s:
        assert sorted(s.exec(select(Sample.depth_to_m))) == [1.45, 2.95]


def test_an_ags4_file_creates_its_job_from_proj_loca_and_samp(
    app_client: TestClient, db: Database, people: People
) -> None:
    text = ags4_text(
        {
            "PROJ_ID": "AB-2026-40",
            "PROJ_NAME": "Alder Brook outfall",
            "PROJ_LOC": "Marrowby",
            "PROJ_CLNT": "Fenwick & Dale",
        },
        [
            {
                "LOCA_ID": "BH1",
                "LOCA_TYPE": "CP",
                "LOCA_NATE": "412345.60",
                "LOCA_NATN": "287654.30",
                "LOCA_GL": "42.10",
            }
        ],
        [
            {
                "LOCA_ID": "BH1",
                "SAMP_TOP": "1.00",
                "SAMP_REF": "1",
                "SAMP_TYPE": "U",
                "SAMP_BASE": "1.45",
                "SAMP_DESC": "Firm CLAY",
            }
        ],
    )
    sign_in(app_client, "review", PASSWORDS["review"])
    preview = _upload(app_client, "/import", "outfall.ags", text.encode("ascii"))
    assert preview.status_code == 200, preview.text[-2000:]
    assert "AB-2026-40" in preview.text and "a new job, for Fenwick &amp; Dale" in preview.text
    done = _confirm(app_client, preview)
    assert done.status_code == 303
    with db.session() as s:
        job = s.exec(select(Job).where(Job.code == "AB-2026-40")).one()
        loc = s.exec(select(Location).where(Location.job_id == job.id)).one()
        client = s.get(Client, job.client_id)
    assert (job.title, job.site) == ("Alder Brook outfall", "Marrowby")  # PROJ_NAME, PROJ_LOC (AGS4 PROJ)
    assert client is not None and client.name == "Fenwick & Dale"  # PROJ_CLNT
    assert (loc.code, loc.easting, loc.ground_level_m) == ("BH1", 412345.6, 42.1)


def test_a_broken_ags4_file_shows_the_checkers_errors_with_group_line_and_heading(
    app_client: TestClient, db: Database, people: People
) -> None:
    text = ags4_text(
        {"PROJ_ID": "AB-2026-41", "PROJ_NAME": "Outfall", "PROJ_CLNT": "Fenwick & Dale"},
        [{"LOCA_ID": "BH1", "LOCA_TYPE": "CP"}],
        [{"LOCA_ID": "BH1", "SAMP_TOP": "1.00", "SAMP_REF": "1", "SAMP_TYPE": "U"}],
    )
    heading = next(line for line in text.splitlines() if line.startswith('"HEADING","LOCA_ID","SAMP_TOP"'))
    broken = text.replace(heading, heading.replace('"SAMP_TOP"', '"SAMP_TOPX"'))  # not in the dictionary
    sign_in(app_client, "review", PASSWORDS["review"])
    preview = _upload(app_client, "/import", "broken.ags", broken.encode("ascii"))
    assert preview.status_code == 422
    assert re.search(r"SAMP line \d+|SAMP_TOPX", preview.text)
    assert _counts(db)[1] == 0


def test_a_changed_row_is_refused_for_a_sample_with_readings(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    first = _upload(app_client, f"/jobs/{job.id}/import", "schedule.csv", SCHEDULE_CSV.encode())
    assert _confirm(app_client, first).status_code == 303
    with db.session() as s:
        test = s.exec(select(LabTest).where(LabTest.method == "atterberg")).one()
    bench.save_readings(db, people.tech, test.id or 0, ATTERBERG, test.version)
    changed = SCHEDULE_CSV.replace("BH1-U1,1.00,1.45", "BH1-U1,1.10,1.55").replace(
        "Soft grey CLAY", "Soft grey silty CLAY"
    )
    preview = _upload(app_client, f"/jobs/{job.id}/import", "schedule.csv", changed.encode())
    assert preview.status_code == 422 and "has readings entered" in preview.text
    assert re.search(r"<td>row 2</td>\s*<td>✖ refused</td>", preview.text)
    assert re.search(r"<td>row 3</td>\s*<td>changed</td>", preview.text)  # nothing entered on BH1-D2


def test_an_upload_that_is_not_a_schedule_is_refused_at_the_file_field(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    for name, content in (("notes.txt", b"hello"), ("empty.csv", b""), ("bin.xlsx", b"\x00\x01garbage")):
        reply = _upload(app_client, f"/jobs/{job.id}/import", name, content)
        assert reply.status_code == 422, name
        assert 'id="err-file"' in reply.text or "refused" in reply.text, name
    with db.session() as s:
        assert s.exec(select(func.count()).select_from(Sample)).one() == 0


def test_a_staged_file_is_only_confirmed_by_the_person_who_uploaded_it(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    preview = _upload(app_client, f"/jobs/{job.id}/import", "schedule.csv", SCHEDULE_CSV.encode())
    token = _hidden(preview, "token")
    app_client.post("/signout", data={"csrf_token": csrf_of(preview)})
    sign_in(app_client, "review2", PASSWORDS["review2"])
    page = app_client.get(f"/jobs/{job.id}/import")
    reply = app_client.post(
        "/import/confirm",
        data={"csrf_token": csrf_of(page), "token": token, "job_id": str(job.id)},
        follow_redirects=False,
    )
    assert reply.status_code == 422 and "upload it again" in reply.text
    with db.session() as s:
        assert s.exec(select(func.count()).select_from(Sample)).one() == 0


def test_technicians_cannot_import_but_may_download_the_templates(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    assert app_client.get(f"/jobs/{job.id}/import").status_code == 403
    csv_template = app_client.get("/imports/template.csv")
    assert csv_template.status_code == 200 and csv_template.content.startswith(b"\xef\xbb\xbfLocation,")
    xlsx = app_client.get("/imports/template.xlsx")
    sheet = openpyxl.load_workbook(io.BytesIO(xlsx.content)).active
    assert sheet is not None and sheet["A1"].value == "Location"
    with db.session() as s:
        assert (
            s.exec(
                select(func.count()).select_from(AuditEvent).where(col(AuditEvent.action) == "import")
            ).one()
            == 0
        )
