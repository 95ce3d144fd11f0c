"""The demo job's issued report, read back from the stored PDF: every item a certified report
must carry (S5 point 1, DESIGN.md section 5), pages that are not blank, and the same bytes when
the same report data are rendered again.

The demo is loaded once for this module into its own SQLite file, through the services. Check
values are the demo's stored results, printed by the engine's reporting rule
(``server.engine.rounding``: LL, PL and PI as whole numbers per ASTM D4318, w to 0.1 % per ASTM
D2216), and the demo's own fictional names.
"""

from __future__ import annotations

import hashlib
import re
import subprocess
import tempfile
from collections.abc import Iterator
from dataclasses import dataclass
from io import BytesIO
from pathlib import Path
from typing import Any

import pytest
from pypdf import PdfReader
from sqlmodel import col, select

from server.config import Settings
from server.db.session import Database
from server.db.tables import AuditEvent, Job, LabTest, Report, Sample, User
from server.demo import LOGINS, SCHEDULE_JOB, SCHEDULE_RECEIVED, load_demo
from server.demo_report import STRENGTHS
from server.engine.rounding import reported
from server.reports.data import DEFAULT_CAUTIONS
from server.reports.pdf import render_report_pdf
from server.services.reports import REPORT_MEANING, new_report_data

BASE = "http://127.0.0.1:8000"


@dataclass
class Demo:
    db: Database
    report: Report
    pages: list[str]
    flat: str  # all pages, whitespace folded
    results: dict[tuple[str, str], dict[str, Any]]  # (sample code, method) -> approved results


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Demo]:
    data_dir = tmp_path_factory.mktemp("demo")
    settings = Settings(
        data_dir=data_dir,
        DATABASE_URL=f"sqlite:///{data_dir / 'demo.sqlite3'}",
        secret_key="d" * 48,
        public_base_url=BASE,
    )
    info = load_demo(settings)
    db = Database(settings.database_url)
    with db.session() as s:
        report = s.exec(select(Report).where(Report.number == info.report_number)).one()
        results = {
            (code, method): res or {}
            for code, method, res in s.exec(
                select(Sample.code, LabTest.method, LabTest.results)
                .join(Sample, col(Sample.id) == LabTest.sample_id)
                .where(LabTest.status == "approved")
            )
        }
    pages = [p.extract_text() or "" for p in PdfReader(BytesIO(report.pdf)).pages]
    # a word hyphenated at a line end (U+2010, pyphen's patterns for lang="en") is read whole
    yield Demo(db, report, pages, " ".join(" ".join(pages).replace("\u2010\n", "").split()), results)
    db.dispose()


def _summary_row(demo: Demo, code: str) -> str:
    page = next(" ".join(p.split()) for p in demo.pages if "Values are rounded for reporting only" in p)
    found = re.search(rf"\b{re.escape(code)}\b(.*?)(?=\bBH0\d-|\bTP0\d-|w water content)", page)
    assert found, f"no summary row for {code}"
    return found.group(1).strip()


def test_prints_the_laboratory_client_job_number_revision_and_issue_date(demo: Demo) -> None:
    first = " ".join(demo.pages[0].split())
    for item in (
        "Fellgate Soils Laboratory",
        "Selwyn Moor Water Company",
        "SMW-2611",
        "Tarn Hollow reservoir embankment raising",
        f"{demo.report.number} revision 1",
        f"Issue date {demo.report.issued_at.date().isoformat()}",
    ):
        assert item in first


def test_numbers_every_page_n_of_m_and_prints_the_fingerprint_and_verify_address(demo: Demo) -> None:
    total = len(demo.pages)
    address = f"{BASE}/verify?number={demo.report.number}&revision=1"
    for n, text in enumerate(demo.pages, start=1):
        assert f"page {n} of {total}" in text
        assert demo.report.fingerprint in text and address in text


def test_summary_has_one_row_per_reported_sample_with_every_index(demo: Demo) -> None:
    u1 = demo.results[("BH01-U1", "atterberg")]
    row = _summary_row(demo, "BH01-U1")
    keys = (
        "water_content",
        "liquid_limit",
        "plastic_limit",
        "plasticity_index",
        "liquidity_index",
        "consistency_index",
    )
    expected = [reported(key, u1[key]) for key in keys]
    assert row.startswith("1.00 1.45 U100 " + " ".join(expected)), row  # depth, type, w, LL, PL, PI, LI, CI
    grading = demo.results[("BH01-U1", "grading")]
    clay = grading["clay_fraction"]
    activity = u1["plasticity_index"] / clay  # A = PI / clay fraction (Skempton 1953)
    vane = demo.results[("BH01-U1", "vane")]
    classified = demo.results[("BH01-U1", "classification")]
    gi = reported("group_index", classified["group_index"])
    tail = (
        f"{reported('activity', activity)} {reported('clay_fraction', clay)} "
        f"{reported('sensitivity', vane['sensitivity'])} {classified['uscs_symbol']} "
        f"{classified['uscs_name']} {classified['aashto_group']} ({gi})"
    )
    assert tail in row, row
    approved_samples = {code for code, _ in demo.results}
    for code in approved_samples:
        _summary_row(demo, code)


def test_marks_the_non_plastic_sample_np(demo: Demo) -> None:
    assert demo.results[("BH02-D3", "atterberg")]["nonplastic"] is True  # demo: PL 25 above LL 24
    assert "NP NP" in _summary_row(demo, "BH02-D3")  # ASTM D4318: PL and PI reported NP


def test_per_test_pages_carry_readings_each_water_content_fitted_curve_and_remarks(demo: Demo) -> None:
    at = next(i for i, p in enumerate(demo.pages) if "Test details: BH01 / BH01-U1 — Atterberg" in p)
    page = " ".join(" ".join(demo.pages[at : at + 2]).split())  # the test's page and the one it runs on to
    u1 = demo.results[("BH01-U1", "atterberg")]
    assert "Readings as entered" in page and "Quality remarks" in page
    assert "Least-squares line: w =" in page and "Flow curve" in page
    for w in u1["water_content_determinations"]:
        w_value = w["water_content"] if isinstance(w, dict) else w
        assert reported("water_content", w_value) in page
    for name in (
        "Grading by sieving and sedimentation",
        "Undrained strength by laboratory vane",
        "Soil classification (USCS and AASHTO)",
        "Unconfined compressive strength",
    ):
        assert f"— {name}" in demo.flat


def test_draws_and_labels_the_charts(demo: Demo) -> None:
    chart = " ".join(next(p for p in demo.pages if "Plasticity chart (ASTM D2487)" in p).split())
    plastic = [
        code
        for (code, method), r in demo.results.items()
        if method == "atterberg" and not r.get("nonplastic")
    ]
    for code in plastic:
        assert code in chart  # every plotted sample labelled (the chart's labels and its table)
    for location in ("BH01", "BH02"):
        assert f"{location}: w, LL and PL against depth" in demo.flat
    assert "BH01: grading curves" in demo.flat and "Particle size (mm, log scale)" in demo.flat
    assert "Activity chart (Skempton 1953)" in demo.flat and "Clay fraction, finer than 2 µm (%)" in demo.flat


def test_names_methods_deviation_approvers_and_the_signature_meaning(demo: Demo) -> None:
    assert "Methods followed and deviations" in demo.flat
    for standard in ("ASTM D4318-17", "ASTM D2216-19", "ASTM D4648", "ASTM D2166", "AASHTO M 145"):
        assert standard in demo.flat
    deviation = next(s.deviation for s in STRENGTHS.values() if s.deviation)
    assert " ".join(deviation.split()) in demo.flat
    with demo.db.session() as s:
        issuer = s.get(User, demo.report.issued_by_id)
    assert issuer is not None and f"Signed by {issuer.full_name} Role Reviewer" in demo.flat
    assert " ".join(REPORT_MEANING.split()) in demo.flat
    for username, full_name, *_ in LOGINS:
        if username in ("review", "review2"):
            assert full_name in demo.flat  # each test's approver, beside its own signature


def test_keeps_interpretation_apart_marked_as_opinion_and_prints_the_cautions(demo: Demo) -> None:
    opinion = [" ".join(p.split()) for p in demo.pages if "Opinion and interpretation" in p]
    assert opinion and "indicative only" in opinion[0] and "Terzaghi & Peck" in " ".join(opinion)
    assert not any("Terzaghi & Peck" in " ".join(p.split()) for p in demo.pages if "Test details" in p)
    for caution in DEFAULT_CAUTIONS:
        assert caution in demo.flat


def test_no_page_is_blank_when_rasterised(demo: Demo) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "report.pdf"
        path.write_bytes(demo.report.pdf)
        subprocess.run(
            ["pdftoppm", "-r", "20", "-gray", str(path), str(Path(tmp) / "p")],
            check=True,
            capture_output=True,
        )
        images = sorted(Path(tmp).glob("p-*.pgm"))
        assert len(images) == len(demo.pages)
        for image in images:
            parts = image.read_bytes().split(maxsplit=4)
            assert parts[0] == b"P5" and parts[3] == b"255"  # binary PGM, pdftoppm -gray (Netpbm format)
            pixels = parts[4]
            dark = sum(1 for v in pixels if v < 200)
            # Header, text, tables and the footer's QR code ink well over 1 % of a page (common practice).
            assert dark > len(pixels) * 0.01, image.name


def test_the_same_report_data_render_the_same_bytes_as_the_stored_pdf(demo: Demo) -> None:
    with demo.db.session() as s:
        issuer = s.get(User, demo.report.issued_by_id)
        assert issuer is not None
        data, _ = new_report_data(
            s, demo.report.job_id, issuer, demo.report.issued_at, BASE, number=demo.report.number
        )
    again = render_report_pdf(data)
    assert hashlib.sha256(again).hexdigest() == demo.report.sha256


def test_the_demo_has_a_job_started_from_an_imported_schedule_with_part_of_it_received(demo: Demo) -> None:
    with demo.db.session() as s:
        job = s.exec(select(Job).where(Job.code == SCHEDULE_JOB)).one()
        rows = list(s.exec(select(Sample).where(Sample.job_id == job.id).order_by(col(Sample.code))))
        imported = s.exec(
            select(AuditEvent).where(AuditEvent.entity == "job", AuditEvent.action == "import")
        ).one()
    assert len(rows) == 5  # the demo's own schedule has five samples
    assert sorted(x.code for x in rows if x.received_at) == sorted(SCHEDULE_RECEIVED)
    assert imported.entity_id == job.id and imported.after["created"]["samples"] == 5


def _page_texts(pdf: bytes) -> list[str]:
    """Each page's text by pdftotext (poppler), the reader a person's viewer is closest to."""
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "report.pdf"
        path.write_bytes(pdf)
        out = []
        for n in range(1, len(PdfReader(BytesIO(pdf)).pages) + 1):
            done = subprocess.run(
                ["pdftotext", "-f", str(n), "-l", str(n), str(path), "-"],
                check=True,
                capture_output=True,
                text=True,
            )
            out.append(done.stdout)
    return out


def test_the_cover_leads_with_the_signature_and_the_summary_and_no_page_is_empty(demo: Demo) -> None:
    # S9 point 5: the authorising signature on page 1, the summary of results on page 2, the
    # approvals of each test in one table after the opinion section, not in pages 1-3
    pages = _page_texts(demo.report.pdf)
    assert "Authorising signatory of this report" in pages[0]
    assert "Summary of results" in pages[1] and "Values are rounded for reporting only" in pages[1]
    assert not any("Approval of each test" in p for p in pages[:3])
    approvals = next(i for i, p in enumerate(pages) if "Approval of each test" in p)
    opinion = next(i for i, p in enumerate(pages) if "Opinion and interpretation" in p)
    assert approvals >= opinion
    for n, text in enumerate(pages, start=1):
        body = [
            line
            for line in text.splitlines()
            if line.strip()
            and "Fellgate Soils Laboratory" not in line
            and "Report SMW" not in line
            and "page " not in line
            and "fingerprint" not in line
            and "Verify this report" not in line
            and not re.fullmatch(r"[0-9a-f]{64}", line.strip())
        ]
        assert body, f"page {n} carries nothing but its header and footer"


def test_prints_words_not_ids_and_uncertainty_as_a_metrologist_writes_it(demo: Demo) -> None:
    # S9 points 3 and 4: method and flag names (server/reports/names.py), U to two significant
    # figures (GUM, JCGM 100:2008, 7.2.6), never "± 0", never "-0.0" (common practice)
    from server.engine import METHODS  # noqa: PLC0415 (the registry, only for this check)
    from server.reports.names import FLAG_NAMES  # noqa: PLC0415

    text = demo.flat
    for method_id in METHODS:
        assert f"({method_id})" not in text and f": {method_id};" not in text, method_id
    raised = {f["code"] for f in _demo_flags(demo)}
    for code in raised:
        assert code not in text and FLAG_NAMES[code] in text, code
    assert not re.search(r"± 0(\.0+)? ", text), "an uncertainty printed as zero"
    assert not re.search(r"(?<![\w.])[-−]0\.0+\b", text), "a rounded zero printed with a sign"
    assert "± " in text and "(k = 2)" in text and "JCGM 100:2008" in text


def test_typesets_symbols_and_writes_cl_alone_with_its_reason(demo: Demo) -> None:
    # S9 point 5: σ′v and exponents typeset, no "sigma'v", "PI^" or "CL, —"; the symbol alone
    # with a note saying why no group name is given (ASTM D2487 names the soil from its grading)
    text = demo.flat
    assert "sigma'v" not in text and "^" not in text and "CL, —" not in text
    assert "σ′" in text and "2.16 × 10" in text
    assert "USCS group symbol CL alone" in text


def _demo_flags(demo: Demo) -> list[dict[str, Any]]:
    with demo.db.session() as s:
        rows = s.exec(select(LabTest.flags).where(LabTest.status == "approved")).all()
    return [f for flags in rows for f in flags or []]
