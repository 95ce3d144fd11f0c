"""The certified report PDF: what it prints, that it escapes, that it is reproducible, that it is not blank.

The job is fictional (our own scenario). Results are written as the engine gives them; the
check values name where each number comes from.
"""

from __future__ import annotations

import hashlib
import os
import subprocess
import tempfile
from dataclasses import replace
from datetime import date
from io import BytesIO
from pathlib import Path
from typing import Any

import pytest
from pypdf import PdfReader

from server.reports.data import (
    DEFAULT_CAUTIONS,
    LabInfo,
    MethodNote,
    ReportData,
    Signatory,
    TestEntry,
    content_fingerprint,
)
from server.reports.pdf import check_url, qr_svg, render_report_html, render_report_pdf

UNTRUSTED = "<script>alert(1)</script> & <b>"


def _det(container: str, tare: float, wet: float, dry: float) -> dict[str, Any]:
    return {"container": container, "tare_g": tare, "wet_tare_g": wet, "dry_tare_g": dry}


def lean_clay(
    sample: str = "S1",
    location: str = "BH1",
    description: str = "Firm brown sandy CLAY",
) -> TestEntry:
    """A CL sample: the liquid-limit trials and fit of Das's multipoint example, the PL of Liu & Evett."""
    results = {
        "water_content": 32.946,
        "water_content_determinations": [32.780, 33.112],  # ASTM D2216 formula on the masses below
        "liquid_limit_method": "ll-cup-multipoint",
        # Das, Principles of Geotechnical Engineering, problem set: N 15/20/28, w 42.0/40.8/39.1.
        "liquid_limit_trials": [
            {"blows": 15, "water_content": 42.0},
            {"blows": 20, "water_content": 40.8},
            {"blows": 28, "water_content": 39.1},
        ],
        # Least squares of w on log10 N of those points (computed): LL 39.67, If 10.72 (REFERENCES.md).
        "flow_curve": {
            "x": "blows",
            "log_x": True,
            "slope": -10.72468960148271,
            "intercept": 54.662225750847284,
            "r2": 0.9970743789609344,
            "target_x": 25,
        },
        "liquid_limit": 39.66975307634563,
        "flow_index": 10.72468960148271,
        # Liu & Evett, Soil Properties, worked example: 20.9 % and 21.5 %, PL 21.2.
        "plastic_limit_determinations": [20.93, 21.48],
        "plastic_limit": 21.205,
        "plasticity_index": 19.0,  # 40 - 21 from the whole-number limits (REFERENCES.md, Indices)
        "nonplastic": False,
        "liquidity_index": 0.6287,
        "consistency_index": 0.3713,
        "clay_fraction": 31.0,
        "activity": 0.6129,
        "uscs_symbol": "CL",  # ASTM D2487: LL < 50, PI 19 above the A-line (14.6)
        "uscs_name": "Lean clay",
        "aashto_group": "A-6",
        "group_index": 11.0,
        "plasticity_chart": {"liquid_limit": 39.67, "plasticity_index": 19.0, "symbol": "CL"},
        "uncertainty": {"water_content": {"u": 0.03, "U": 0.06, "k": 2.0}},
        "interpretation": {
            "compression_index": {
                "value": 0.267,
                "unit": "",
                "source": "Terzaghi & Peck (1967)",
                "note": "Cc = 0.009 (LL - 10), undisturbed clay of low sensitivity",
            },
        },
    }
    readings = {
        "water_content": {
            "determinations": [_det("T-17", 15.20, 45.62, 38.11), _det("T-04", 14.88, 46.96, 38.98)]
        },
        "liquid_limit": {
            "method": "ll-cup-multipoint",
            "trials": [
                {"blows": 15, **_det("L-1", 16.02, 38.77, 32.04)},
                {"blows": 20, **_det("L-2", 15.87, 39.10, 32.37)},
                {"blows": 28, **_det("L-3", 16.11, 39.55, 32.95)},
            ],
        },
        "plastic_limit": {
            "determinations": [_det("P-1", 11.56, 20.47, 18.93), _det("P-2", 11.68, 21.27, 19.57)]
        },
        "clay_fraction": 31.0,
        "fines": 86.0,
    }
    flags = [
        {
            "code": "blows-bands-not-covered",
            "severity": "warning",
            "message": "the trials do not fall one each in the 25-35, 20-30 and 15-25 blow bands",
        }
    ]
    return TestEntry(
        sample,
        location,
        1.20,
        1.65,
        "U100",
        description,
        "atterberg",
        results,
        readings,
        flags,
        revision=0,
        method_title="Atterberg limits",
    )


def nonplastic_silt() -> TestEntry:
    """A non-plastic silt: no thread could be rolled, so PL and PI are NP (ASTM D4318)."""
    results = {
        "water_content": 18.42,
        "water_content_determinations": [18.42],
        "nonplastic": True,
        "uscs_symbol": "ML",
        "uscs_name": "Silt",
    }
    readings = {"water_content": {"determinations": [_det("T-22", 15.01, 43.70, 39.24)]}}
    return TestEntry(
        "S2",
        "BH1",
        3.00,
        3.45,
        "B",
        "Loose grey clayey SILT",
        "atterberg",
        results,
        readings,
        revision=1,
        method_title="Atterberg limits",
    )


def fat_clay() -> TestEntry:
    """A CH sample from the fall cone: REFERENCES.md's USCS example (86 % fines, LL 55, PI 28 -> CH)."""
    results = {
        "water_content": 41.3,
        "water_content_determinations": [41.3],
        "liquid_limit_method": "ll-cone",
        "cone": "80g-30deg",
        "liquid_limit_trials": [
            {"penetration_mm": 15.8, "water_content": 48.3, "drops_mm": [15.7, 15.9]},
            {"penetration_mm": 18.1, "water_content": 52.1, "drops_mm": [18.0, 18.2]},
            {"penetration_mm": 20.9, "water_content": 56.4, "drops_mm": [20.8, 21.0]},
            {"penetration_mm": 23.6, "water_content": 60.6, "drops_mm": [23.5, 23.7]},
        ],
        # Least squares of w on penetration of those points (computed): LL 54.98 at 20 mm.
        "flow_curve": {
            "x": "penetration_mm",
            "log_x": False,
            "slope": 1.5715532286212919,
            "intercept": 23.54755671902268,
            "r2": 0.999776532937812,
            "target_x": 20.0,
        },
        "liquid_limit": 54.97862129144852,
        "plastic_limit_determinations": [26.8, 27.1],
        "plastic_limit": 26.95,
        "plasticity_index": 28.0,
        "nonplastic": False,
        "uscs_symbol": "CH",  # REFERENCES.md USCS example: 86 % fines, LL 55, PI 28 -> CH
        "uscs_name": "Fat clay",
        "aashto_group": "A-7-6",
        "group_index": 20.0,
        "sensitivity": 3.2,
    }
    readings = {
        "water_content": {"determinations": [_det("T-31", 15.33, 52.20, 41.43)]},
        "liquid_limit": {
            "method": "ll-cone",
            "cone": "80g-30deg",
            "trials": [
                {"penetration_mm": [15.7, 15.9], **_det("C-1", 20.10, 45.00, 36.89)},
                {"penetration_mm": [18.0, 18.2], **_det("C-2", 20.05, 44.90, 36.39)},
                {"penetration_mm": [20.8, 21.0], **_det("C-3", 20.12, 45.70, 36.53)},
                {"penetration_mm": [23.5, 23.7], **_det("C-4", 20.08, 46.10, 36.30)},
            ],
        },
        "plastic_limit": {
            "determinations": [_det("P-7", 11.60, 21.00, 19.01), _det("P-8", 11.52, 20.84, 18.86)]
        },
    }
    return TestEntry(
        "S3",
        "TP2",
        0.50,
        None,
        "B",
        "Stiff dark grey CLAY",
        "atterberg",
        results,
        readings,
        revision=0,
        method_title="Atterberg limits",
    )


def fictional_job(tests: list[TestEntry] | None = None) -> ReportData:
    """Report of a small fictional job of our own: Hollin Brook footbridge."""
    return ReportData(
        lab=LabInfo(
            "Kestrel Vale Soils Laboratory",
            "Unit 4, Mill Lane\nKestrel Vale KV3 9QP",
            "Quality system to ISO/IEC 17025 (fictional)",
        ),
        client_name="Hollin Brook Parish Council",
        job_code="J-2025-031",
        job_title="Hollin Brook footbridge",
        site="Hollin Brook, east abutment",
        report_number="R-2025-031-01",
        revision=0,
        issue_date=date(2025, 3, 14),
        issued_at_iso="2025-03-14T16:05:00+00:00",
        approver=Signatory(
            "Dr Ada Marsh",
            "Laboratory manager",
            "Reviewed the readings, calculations and flags and approves the results for issue",
            "2025-03-14T15:58:00+00:00",
        ),
        verify_url="https://claybench.example/verify/R-2025-031-01",
        tests=tests if tests is not None else [lean_clay(), nonplastic_silt(), fat_clay()],
        methods=[
            MethodNote("Water content", "ASTM D2216-19, Method B"),
            MethodNote("Liquid limit, cup multipoint", "ASTM D4318-17, Method A"),
            MethodNote(
                "Liquid limit, fall cone 80 g",
                "BS 1377-2:1990 cl. 4.3",
                "Specimens air-dried before test (client request)",
            ),
            MethodNote("Plastic limit", "ASTM D4318-17"),
        ],
    )


def summary_page(pages: list[str]) -> str:
    return next(p for p in pages if "Values are rounded for reporting only" in p)


@pytest.fixture(scope="module")
def report() -> ReportData:
    return fictional_job()


@pytest.fixture(scope="module")
def pdf_bytes(report: ReportData) -> bytes:
    return render_report_pdf(report)


@pytest.fixture(scope="module")
def pages(pdf_bytes: bytes) -> list[str]:
    return [p.extract_text() or "" for p in PdfReader(BytesIO(pdf_bytes)).pages]


def test_renders_a_pdf_document(pdf_bytes: bytes) -> None:
    assert pdf_bytes.startswith(b"%PDF-")


def test_prints_sample_ids_limits_and_symbols(pages: list[str]) -> None:
    text = "\n".join(pages)
    for sample in ("BH1", "S1", "S2", "TP2", "S3"):
        assert sample in text
    summary = summary_page(pages)
    # CL sample: LL 39.67 -> 40, PL 21.2 -> 21, PI 19 (Das problem set; Liu & Evett; ASTM D4318 whole numbers)
    assert "40 21 19" in summary
    # CH sample: LL 54.98 -> 55, PL 26.95 -> 27, PI 28 (REFERENCES.md USCS example)
    assert "55 27 28" in summary
    # Non-plastic silt: PL and PI NP (ASTM D4318)
    assert "NP NP" in summary
    for symbol in ("CL", "ML", "CH"):
        assert symbol in summary
    assert "A-6 (11)" in summary and "A-7-6 (20)" in summary


def test_prints_the_water_content_to_one_decimal(pages: list[str]) -> None:
    summary = summary_page(pages)
    assert "32.9" in summary  # 32.946 % to 0.1 % (ASTM D2216 Method B)
    assert "18.4" in summary


def test_prints_each_caution(pages: list[str]) -> None:
    text = " ".join(" ".join(pages).split())
    for caution in DEFAULT_CAUTIONS:
        assert caution in text


def test_numbers_every_page_as_page_n_of_m(pages: list[str]) -> None:
    total = len(pages)
    assert total >= 6  # title, summary, chart, three tests, opinion
    for n, text in enumerate(pages, start=1):
        assert f"page {n} of {total}" in text


def test_prints_the_content_fingerprint_and_verify_url_on_every_page(
    pages: list[str],
    report: ReportData,
) -> None:
    fp = content_fingerprint(report)
    for text in pages:
        assert fp in text
        assert report.verify_url in text


def test_prints_the_signature_block_and_the_opinion_section_apart(pages: list[str]) -> None:
    text = " ".join(" ".join(pages).split())
    assert "Dr Ada Marsh" in text and "Laboratory manager" in text
    assert "Meaning of this signature" in text
    flat = [" ".join(p.split()) for p in pages]
    opinion = [p for p in flat if "Opinion and interpretation" in p and "Terzaghi & Peck (1967)" in p]
    assert opinion, "the correlation must sit under the opinion heading"
    details = [p for p in flat if "Test details" in p]
    assert not any("Terzaghi & Peck" in p for p in details)


def test_prints_readings_each_water_content_and_quality_remarks(pages: list[str]) -> None:
    cl_page = next(p for p in pages if "Test details: BH1 / S1" in p)
    assert "T-17" in cl_page and "45.62" in cl_page  # masses as typed
    assert "32.8" in cl_page and "33.1" in cl_page  # each determination's w to 0.1 %
    assert "LL = 40 at N = 25" in cl_page  # flow curve label (Das problem set, LL 39.67)
    assert "blows-bands-not-covered" not in cl_page  # the check by its name (server/reports/names.py)
    assert "Blow counts do not span 25" in " ".join(cl_page.split())
    ch_page = next(p for p in pages if "Test details: TP2 / S3" in p)
    assert "LL = 55 at 20 mm" in ch_page  # cone curve: LL at 20 mm (BS 1377-2:1990 cl. 4.3)


def test_lists_methods_and_deviations(pages: list[str]) -> None:
    # a word hyphenated at a line end (U+2010, by pyphen's patterns for lang="en") read whole
    text = " ".join(" ".join(pages).replace("\u2010\n", "").split())
    assert "ASTM D4318-17, Method A" in text
    assert "Specimens air-dried before test (client request)" in text


def test_two_renders_give_identical_bytes(report: ReportData, pdf_bytes: bytes) -> None:
    again = render_report_pdf(report)
    assert hashlib.sha256(again).hexdigest() == hashlib.sha256(pdf_bytes).hexdigest()


def test_a_different_issue_record_gives_different_bytes(report: ReportData, pdf_bytes: bytes) -> None:
    other = render_report_pdf(replace(report, revision=1))
    assert other != pdf_bytes


def test_writes_the_creation_date_from_the_issue_record(pdf_bytes: bytes) -> None:
    info = PdfReader(BytesIO(pdf_bytes)).metadata
    assert info is not None
    assert str(info["/CreationDate"]).startswith("D:20250314160500")


def test_restores_the_source_date_epoch_after_rendering(
    report: ReportData, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "12345")
    render_report_pdf(report)
    assert os.environ["SOURCE_DATE_EPOCH"] == "12345"


def test_untrusted_text_is_escaped_in_html_and_literal_in_the_pdf(report: ReportData) -> None:
    hostile = replace(report, tests=[lean_clay(sample=UNTRUSTED, description=UNTRUSTED)])
    html = render_report_html(hostile)
    assert "<script>" not in html and "<b>" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &lt;b&gt;" in html
    pdf = render_report_pdf(hostile)
    text = "\n".join(p.extract_text() or "" for p in PdfReader(BytesIO(pdf)).pages)
    assert UNTRUSTED in text


def _non_white_pixels(ppm: bytes) -> tuple[int, int]:
    """(non-white, total) pixels of a binary PPM (P6, maxval 255), pdftoppm's default output."""
    parts = ppm.split(maxsplit=4)
    assert parts[0] == b"P6" and parts[3] == b"255"
    width, height = int(parts[1]), int(parts[2])
    data = parts[4]
    assert len(data) == width * height * 3
    dark = sum(1 for i in range(0, len(data), 3) if min(data[i], data[i + 1], data[i + 2]) < 200)
    return dark, width * height


def test_first_page_is_not_blank_when_rasterised(pdf_bytes: bytes) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "report.pdf"
        path.write_bytes(pdf_bytes)
        out = subprocess.run(
            [
                "/usr/bin/pdftoppm",
                "-r",
                "30",
                "-f",
                "1",
                "-l",
                "1",
                "-singlefile",
                str(path),
                str(Path(tmp) / "page"),
            ],
            capture_output=True,
            check=True,
        )
        assert out.returncode == 0
        dark, total = _non_white_pixels((Path(tmp) / "page.ppm").read_bytes())
    # Text, rules and the QR code ink well over 1 % of page 1; a blank page has none (common practice).
    assert dark > total * 0.01


def test_summary_page_is_landscape(pdf_bytes: bytes) -> None:
    reader = PdfReader(BytesIO(pdf_bytes))
    for page in reader.pages:
        if "Values are rounded for reporting only" in (page.extract_text() or ""):
            box = page.mediabox
            assert float(box.width) > float(box.height)  # A4 landscape: 842 x 595 pt (ISO 216)
            break
    else:
        pytest.fail("no summary page")
    first = reader.pages[0].mediabox
    assert round(float(first.width)) == 595 and round(float(first.height)) == 842  # A4 portrait (ISO 216)


def test_the_qr_code_holds_the_verify_address_with_the_content_fingerprint(report: ReportData) -> None:
    fp = content_fingerprint(report)
    assert check_url(report, fp) == f"{report.verify_url}?sha256={fp}"
    html = render_report_html(report)
    assert qr_svg(check_url(report, fp)) in html  # segno draws the same code for the same text


def test_says_plainly_that_pages_print_the_content_fingerprint_not_the_file_hash(pages: list[str]) -> None:
    text = " ".join(" ".join(pages).split())
    assert "A file cannot print the SHA-256 of its own bytes" in text
    assert "SHA-256 of this report's content (not of the PDF file)" in text


def test_a_preview_is_marked_on_every_page_and_an_issued_report_is_not(report: ReportData) -> None:
    assert "PREVIEW — NOT ISSUED" in render_report_html(report, preview=True)
    assert "PREVIEW" not in render_report_html(report)
