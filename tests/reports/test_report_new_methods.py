"""The certified report of the S12 methods (particle density, linear shrinkage, density, loss on
ignition, compaction), issued through the real services on SQLite and PostgreSQL: the tests are
requested, their readings saved and handed in, approved with a signature and issued; the stored
PDF is read back with pypdf.

Check values are hand-worked from the formulas of the standards each method follows, written out
beside each reading; what the report prints is that value rounded by the engine's reporting rule
(``server.engine.rounding.reported``), so a change of that rule moves the expected text with it.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from io import BytesIO
from typing import Any

import pytest
from pypdf import PdfReader
from sqlmodel import select

from server.db.session import Database
from server.db.tables import Report, ReportAgs4, User
from server.engine.rounding import reported
from server.reports.pdf import render_report_pdf
from server.reports.view import build_view
from server.services import jobs, reports
from tests.conftest import PASSWORDS, People
from tests.reports.issued import approve
from tests.support.scenario import determination, small_job

BASE = "http://lab.example"

# -- readings and their hand-worked values ---------------------------------------------------------

# Small pycnometer, water at 20 °C. ASTM D854-14 eq. 1 (BS 1377-2:1990 cl. 8.3 writes the same
# ratio): Gt = (m2 - m1) / ((m2 - m1) + m4 - m3); at 20 °C the specific gravity at 20 °C is Gt
# itself (ASTM D854-14 eq. 2, K = 1), and rho_s = Gt rho_w(20 °C).
PARTICLE_DENSITY = {
    "determinations": [
        {  # Gt = 10.000 / (10.000 + 80.000 - 86.250) = 2.66667 (hand-worked)
            "pycnometer_g": 30.000,
            "pycnometer_soil_g": 40.000,
            "pycnometer_soil_water_g": 86.250,
            "pycnometer_water_g": 80.000,
            "temperature_c": 20.0,
        },
        {  # Gt = 10.000 / (10.000 + 81.000 - 87.260) = 2.67380 (hand-worked)
            "pycnometer_g": 31.000,
            "pycnometer_soil_g": 41.000,
            "pycnometer_soil_water_g": 87.260,
            "pycnometer_water_g": 81.000,
            "temperature_c": 20.0,
        },
    ]
}
G_T = (10.000 / (10.000 + 80.000 - 86.250), 10.000 / (10.000 + 81.000 - 87.260))
# rho_w(20 °C) = 0.9982 Mg/m³ (Tanaka et al. 2001, from memory); any value from 0.9980 to 0.9984
# gives the same rounded particle densities below (hand-worked).
RHO_W_20 = 0.9982

# BS 1377-2:1990 cl. 6.5: LS = (1 - L_D / L_0) x 100 = (1 - 128.6 / 140.0) x 100 = 8.14 % (DESIGN.md
# section 8 example, hand-worked).
SHRINKAGE = {"mould_length_mm": 140.0, "oven_dry_length_mm": 128.6, "condition": "cracked"}
LS = (1.0 - 128.6 / 140.0) * 100.0

# Linear measurement (BS 1377-2:1990 cl. 7.2): V = pi D² H / 4 = pi 38.1² 76.2 / 4 mm³ = 86.875 cm³,
# rho = 172.40 / 86.875 = 1.9845 Mg/m³; w = (34.00 - 30.00) / (30.00 - 10.00) = 20.0 % (ASTM D2216
# formula); rho_d = rho / (1 + w); e = rho_s / rho_d - 1, n = e / (1 + e), S = w rho_s / e with
# rho_w = 1.00 (DESIGN.md section 8; phase relations, e.g. Head 2006 vol. 1 ch. 3, from memory).
DENSITY = {
    "specimens": [{"mass_g": 172.40, "diameter_mm": 38.1, "height_mm": 76.2}],
    "water_content": {"determinations": [determination("D1", 10.00, 34.00, 30.00)]},
    "particle_density_mg_m3": 2.70,
}
RHO = 172.40 / (math.pi * 38.1**2 * 76.2 / 4.0 / 1000.0)
RHO_D = RHO / 1.20
E = 2.70 / RHO_D - 1.0
N = E / (1.0 + E)
S_R = 20.0 * 2.70 / E

# BS 1377-3:1990 cl. 4 (ASTM D2974-14 as 100 - ash): (m_dry - m_ignited) / (m_dry - m_crucible) x 100:
# 0.584 / 10.053 = 5.809 % and 0.578 / 10.030 = 5.763 %, mean 5.786 % (hand-worked).
IGNITION = {
    "determinations": [
        {"crucible_g": 21.402, "crucible_dry_g": 31.455, "crucible_ignited_g": 30.871},
        {"crucible_g": 20.950, "crucible_dry_g": 30.980, "crucible_ignited_g": 30.402},
    ],
    "furnace_c": 440,
}
ORGANIC = ((31.455 - 30.871) / (31.455 - 21.402) * 100.0 + (30.980 - 30.402) / (30.980 - 20.950) * 100.0) / 2

# Compaction, 944 cm³ mould of 4250 g (ASTM D698-12 4 in. mould). Each point's w from one tin,
# (wet - 30.00) / (30.00 - 10.00): 10, 12, 14, 16, 18 %; rho_d = (m - 4250) / 944 / (1 + w)
# (ASTM D698-12 and BS 1377-4:1990 cl. 3.3.5 calculations). Typed out of order on purpose: the
# engine takes them in order of water content (DESIGN.md section 8).
MOULD_SOIL = {10: 6015.28, 12: 6131.96, 14: 6208.61, 16: 6221.07, 18: 6188.22}
COMPACTION = {
    "effort": "standard",
    "mould_volume_cm3": 944.0,
    "mould_g": 4250.0,
    "particle_density_mg_m3": 2.70,
    "points": [
        {
            "mould_soil_g": MOULD_SOIL[w],
            "determinations": [determination(f"K{w}", 10.00, 30.00 + w / 5, 30.00)],
        }
        for w in (12, 10, 16, 14, 18)
    ],
}
DRY = {w: (m - 4250.0) / 944.0 / (1 + w / 100) for w, m in MOULD_SOIL.items()}
# The vertex of the parabola through the highest point (14 %) and its neighbours, equal spacing
# h = 2 %: x* = x1 + h (y0 - y2) / (2 (y0 - 2 y1 + y2)), y* = y1 - (y0 - y2)² / (8 (y0 - 2 y1 + y2))
# (hand-worked from the three-point parabola; DESIGN.md section 8 names the construction).
_CURV = DRY[12] - 2 * DRY[14] + DRY[16]
W_OPT = 14 + 2 * (DRY[12] - DRY[16]) / (2 * _CURV)
RHO_MAX = DRY[14] - (DRY[12] - DRY[16]) ** 2 / (8 * _CURV)
# Zero air voids, rho_d = 1 / (1/rho_s + w/100) with rho_w = 1.00 (BS 1377-4:1990 cl. 3.3.5, from memory).
ZAV = {w: 1.0 / (1.0 / 2.70 + w / 100.0) for w in MOULD_SOIL}

# ASTM D2487 organic criterion: LL oven-dried / LL not dried = 41 / 62 = 0.66 < 0.75, LL >= 50: OH
# (the classification module's own example readings).
CLASSIFICATION = {
    "liquid_limit": 62.0,
    "plastic_limit": 38.0,
    "liquid_limit_oven_dried": 41.0,
    "fines": 93.0,
    "sand": 7.0,
    "gravel": 0.0,
}

READINGS: dict[str, dict[str, Any]] = {
    "particle-density": PARTICLE_DENSITY,
    "linear-shrinkage": SHRINKAGE,
    "density": DENSITY,
    "loss-on-ignition": IGNITION,
    "compaction": COMPACTION,
    "classification": CLASSIFICATION,
}


# -- the issued report ------------------------------------------------------------------------------


@dataclass
class Issued:
    db: Database
    report: Report
    pages: list[str]  # each page's text, whitespace folded

    def page(self, title: str) -> str:
        """The text of a test's page and the one it runs on to."""
        at = next(i for i, p in enumerate(self.pages) if f"Test details: BH1 / BH1-S1 — {title}" in p)
        return " ".join(self.pages[at : at + 2])


def new_methods_job(db: Database, people: People) -> int:
    """Job T-100, sample BH1-S1 with an approved test of each S12 method and a classification."""
    job = small_job(db, people.admin, description="Soft dark grey organic CLAY", method="particle-density")
    approve(db, people, job.test_id, PARTICLE_DENSITY)
    others = [m for m in READINGS if m != "particle-density"]
    for test in jobs.request_tests(db, people.admin, [job.sample_id], others):
        approve(db, people, test.id or 0, READINGS[test.method])
    return job.job_id


@pytest.fixture
def issued(db: Database, people: People) -> Issued:
    job_id = new_methods_job(db, people)
    report = reports.issue_report(db, people.review, job_id, BASE, password=PASSWORDS["review"])
    with db.session() as s:
        stored = s.get(Report, report.id)
        assert stored is not None
    pages = [" ".join((p.extract_text() or "").split()) for p in PdfReader(BytesIO(stored.pdf)).pages]
    return Issued(db, stored, pages)


def test_particle_density_prints_the_mean_the_specific_gravity_and_each_determination(issued: Issued) -> None:
    page = issued.page("Particle density (small pycnometer)")
    mean_gs = sum(G_T) / 2
    assert f"Particle density, ρs {reported('particle_density_mg_m3', mean_gs * RHO_W_20)} Mg/m³" in page
    assert f"Specific gravity of the solids at 20 °C, Gs {reported('specific_gravity', mean_gs)}" in page
    for gt in G_T:  # each determination's rho_s beside its weighings, in input order
        assert reported("particle_density_mg_m3", gt * RHO_W_20) in page
    assert "Mean of 2 determinations" in page and "ρs (Mg/m³)" in page
    assert "86.25" in page and "87.26" in page  # the readings as entered


def test_linear_shrinkage_prints_the_result_with_the_bars_condition(issued: Issued) -> None:
    page = issued.page("Linear shrinkage")
    assert f"Linear shrinkage, LS {reported('linear_shrinkage', LS)} %" in page
    assert "Condition of the bar after drying cracked" in page
    # the engine's flag as a quality remark, by its name (server/reports/names.py), not its code
    assert "Shrinkage bar cracked" in page and "shrinkage-bar-cracked" not in page


def test_density_prints_bulk_and_dry_density_void_ratio_porosity_and_saturation(issued: Issued) -> None:
    page = issued.page("Bulk and dry density (linear measurement)")
    for text in (
        "Water content, w 20.0 %",  # ASTM D2216 Method B: 0.1 %
        f"Bulk density, ρ {reported('bulk_density_mg_m3', RHO)} Mg/m³",
        f"Dry density, ρd {reported('dry_density_mg_m3', RHO_D)} Mg/m³",
        f"Void ratio, e {reported('void_ratio', E)}",
        f"Porosity, n (fraction) {reported('porosity', N)}",
        f"Degree of saturation, Sr {reported('degree_of_saturation', S_R)} %",
        "Particle density used (as entered) 2.70 Mg/m³",  # by its rule, 0.01 Mg/m³ (engine/rounding.py)
        "ρw = 1.00 Mg/m³",
    ):
        assert text in page, text


def test_loss_on_ignition_prints_the_organic_content_and_the_furnace_temperature(issued: Issued) -> None:
    page = issued.page("Organic content by loss on ignition")
    assert (
        f"Organic content by loss on ignition, of the dry mass {reported('organic_content', ORGANIC)} %"
        in page
    )
    assert "Furnace temperature 440 °C" in page
    assert "overstate the organic content of clays" in page  # the caution beside the result


def test_compaction_page_prints_the_maximum_the_points_and_the_chart(issued: Issued) -> None:
    page = issued.page("Compaction (dry density and water content)")
    rho_max, w_opt = reported("maximum_dry_density_mg_m3", RHO_MAX), reported("optimum_water_content", W_OPT)
    assert f"Maximum dry density, ρd,max {rho_max} Mg/m³" in page
    assert f"Optimum water content, wopt {w_opt} %" in page
    assert "Compactive effort standard (2.5 kg rammer)" in page
    rows = " ".join(
        f"{i} {w:.1f} {reported('dry_density_mg_m3', DRY[w])} {reported('dry_density_mg_m3', ZAV[w])}"
        for i, w in enumerate(sorted(MOULD_SOIL), start=1)
    )
    assert rows in page  # in order of water content, with the zero-air-voids dry density
    # the chart's own text: the maximum marked, the three air-voids lines named, the axes
    assert f"ρd,max = {rho_max} Mg/m³, wopt = {w_opt} %" in page
    for va in ("0", "5", "10"):
        assert f"{va} % air voids" in page
    assert "Dry density, ρd (Mg/m³)" in page and "Water content, w (%)" in page
    # each point's tins in one table, led by the point's number as typed (the first is tin K12)
    assert "Points — determinations Point # Container Tare (g) Wet soil + tare (g)" in page
    assert "1 1 K12 10.0 32.4 30.0 2 1 K10 10.0 32.0 30.0" in page


def test_the_compaction_chart_draws_points_the_curve_through_the_peak_and_the_air_voids_lines(
    issued: Issued,
) -> None:
    with issued.db.session() as s:
        issuer = s.get(User, issued.report.issued_by_id)
        assert issuer is not None
        data, _ = reports.new_report_data(
            s, issued.report.job_id, issuer, issued.report.issued_at, BASE, number=issued.report.number
        )
    (section,) = [x for x in build_view(data).sections if x.method == "compaction"]
    svg = section.curve_svg
    assert svg.count('class="air-voids"') == 3  # 0, 5 and 10 % (BS 1377-4:1990 Figure 6, common practice)
    assert svg.count('class="compaction-curve"') == 1 and 'class="maximum-marker"' in svg
    assert svg.count("<circle") == len(MOULD_SOIL)  # one marker per point
    assert "parabola" in section.curve_caption
    assert "2.70 Mg/m³ (as entered)" in section.curve_caption  # 0.01 Mg/m³ (rounding.py)


def test_the_classification_prints_the_organic_content_beside_the_liquid_limit_ratio(issued: Issued) -> None:
    page = issued.page("Soil classification (USCS and AASHTO)")
    assert "USCS (ASTM D2487) OH" in page  # ASTM D2487: organic, LL 62 >= 50
    assert f"Liquid limit oven-dried / not dried {reported('oven_dried_ll_ratio', 41.0 / 62.0)}" in page
    assert "Organic by the liquid-limit ratio (ASTM D2487: below 0.75) yes" in page
    organic = reported("organic_content", ORGANIC)
    assert f"Organic content by loss on ignition at 440 °C (its own test) {organic} %" in page
    assert "does not change the group" in page and "common practice" in page  # the cautions


def test_the_report_lists_each_methods_standard(issued: Issued) -> None:
    flat = " ".join(issued.pages)
    for standard in (
        "ASTM D854-14",
        "BS 1377-2:1990 cl. 6.5",
        "BS 1377-2:1990 cl. 7.2",
        "ASTM D2974-14",
        "ASTM D698-12",
    ):  # each method's own standard (server.engine METHODS)
        assert standard in flat


def test_the_same_report_data_render_the_same_bytes_as_the_stored_pdf(issued: Issued) -> None:
    with issued.db.session() as s:
        issuer = s.get(User, issued.report.issued_by_id)
        assert issuer is not None
        data, _ = reports.new_report_data(
            s, issued.report.job_id, issuer, issued.report.issued_at, BASE, number=issued.report.number
        )
    assert render_report_pdf(data) == issued.report.pdf


def test_the_ags4_file_frozen_with_the_report_carries_the_new_groups(issued: Issued) -> None:
    with issued.db.session() as s:
        frozen = s.exec(select(ReportAgs4).where(ReportAgs4.report_id == issued.report.id)).one()
    text = frozen.data.decode("ascii")
    for group in ("LPDN", "LLIN", "LDEN", "GCHM", "CMPG", "CMPT"):  # AGS4 dictionary 4.1.1 groups
        assert f'"GROUP","{group}"' in text


def test_the_pdf_reads_in_words_with_no_zero_uncertainty_and_no_signed_zero(issued: Issued) -> None:
    # S9 points 3-5, on both databases: method names not ids (server/reports/names.py), U to two
    # significant figures (GUM, JCGM 100:2008, 7.2.6) so never "± 0", no "-0.0" (common practice)
    text = " ".join(issued.pages)
    for method_id in READINGS:
        assert f"({method_id})" not in text and f": {method_id}" not in text
    assert not re.search(r"± 0(\.0+)? ", text), "an uncertainty printed as zero"
    assert not re.search(r"(?<![\w.])-0\.0+\b", text), "a rounded zero printed with a sign"
    assert "Summary of results" in issued.pages[1] and "Approval of each test" not in " ".join(
        issued.pages[:3]
    )
    assert all(page.strip() for page in issued.pages)
