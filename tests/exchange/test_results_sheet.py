"""The spreadsheets of a job's approved results (DESIGN.md section 7), built through the real
services and read back as a client's database would read them: openpyxl and the csv module.

The job: T-100 with BH1-S1 (Atterberg set, water content typed as text at the bench, vane) and
BH2-S1 (classification), all approved; BH1-S2 withdrawn after approval, BH1-S3 handed in but
not approved, and BH2-S1's classification with an amendment open. Check values:
- LL 40, PL 21, PI 19, w 30.0 %: the published examples of tests/support/scenario.py (Das; Liu &
  Evett; ASTM D2216 cl. 12.1), rounded as ASTM D4318 reports limits (whole numbers) and ASTM
  D2216 the water content (0.1 %);
- sensitivity 0.0142 / 0.0035 = 4.057 -> 4.1 (ASTM D4648: St = cu / cu,r, the same vane, so
  the torque ratio; 0.1 by the reporting rule of server/engine/rounding.py);
- CL "Lean clay" (ASTM D2487 Fig. 1: LL 41, PI 19 above the A-line 0.73 (41 - 20) = 15.3, under
  15 % retained on the 75 µm sieve) and A-7-6 with GI 17 (AASHTO M 145: LL 41, PI 19 > LL - 30;
  GI = 51 (0.2 + 0.005) + 0.01 * 71 * 9 = 16.8 -> 17).
"""

from __future__ import annotations

import csv
import io
import math
import re
from dataclasses import dataclass
from typing import Any

import openpyxl
import pytest
from openpyxl.worksheet.worksheet import Worksheet

from server.api.examples import EXAMPLES
from server.db.session import Database
from server.db.tables import LabTest, Sample
from server.exchange.results_sheet import (
    FULL,
    METHOD_HEADERS,
    ResultsExport,
    load_results,
    results_csv,
    results_xlsx,
    unit_of,
)
from server.services import amendments, bench, jobs, samples
from server.services.errors import Invalid, NotFound
from tests.conftest import People
from tests.reports.issued import approve
from tests.support.scenario import small_job

# A water content typed at the bench: decimal text, trailing zeros as read off the balance
# (w = (36.00 - 30.00) / (30.00 - 10.00) = 30.0 %, ASTM D2216 cl. 12.1).
TYPED_WATER_CONTENT: dict[str, Any] = {
    "determinations": [{"container": "N2", "tare_g": "10.00", "wet_tare_g": "36.00", "dry_tare_g": "30.00"}]
}
WITHDRAWAL = "Sample bag split open in transit and the soil was mixed with another"
AMENDMENT = "Fines re-measured after a second wash through the sieve"


@dataclass
class Built:
    job_id: int
    job_code: str
    approved: list[int]  # the test revisions the spreadsheets must carry
    left_out: list[int]  # tests of a withdrawn sample, handed in only, an open amendment
    withdrawn_sample: str
    unapproved_sample: str


def build_job(db: Database, people: People, *, description: str = "Firm brown CLAY") -> Built:
    """The job of the module docstring, every step through the services."""
    job = small_job(db, people.admin, description=description)
    with db.session() as s:
        first = s.get(Sample, job.sample_id)
        assert first is not None
        bh1 = first.location_id
    approve(db, people, job.test_id)  # the Atterberg set on BH1-S1
    water, vane = jobs.request_tests(db, people.admin, [job.sample_id], ["water-content", "vane"])
    approve(db, people, water.id or 0, TYPED_WATER_CONTENT)
    approve(db, people, vane.id or 0, EXAMPLES["vane"])

    bh2 = samples.add_location(db, people.admin, job.job_id, "BH2")
    other = samples.add_sample(db, people.admin, bh2.id or 0, "BH2-S1", 0.5, 0.8, "bulk", "Brown sandy CLAY")
    (classified,) = jobs.request_tests(db, people.admin, [other.id or 0], ["classification"])
    approve(db, people, classified.id or 0, EXAMPLES["classification"])
    with db.session() as s:
        version = (s.get(LabTest, classified.id) or LabTest()).version
    amendment = amendments.amend(db, people.review, classified.id or 0, AMENDMENT, version)

    gone = samples.add_sample(db, people.admin, bh1, "BH1-S2", 2.0, 2.45, "U100", "Stiff grey CLAY")
    (gone_test,) = jobs.request_tests(db, people.admin, [gone.id or 0], ["atterberg"])
    approve(db, people, gone_test.id or 0)
    samples.withdraw_sample(db, people.admin, gone.id or 0, WITHDRAWAL)

    waiting = samples.add_sample(db, people.admin, bh1, "BH1-S3", 3.0, 3.45, "U100", "Soft grey CLAY")
    (waiting_test,) = jobs.request_tests(db, people.admin, [waiting.id or 0], ["water-content"])
    saved = bench.save_readings(db, people.tech, waiting_test.id or 0, TYPED_WATER_CONTENT, 1)
    bench.submit(db, people.tech, waiting_test.id or 0, saved.test.version)
    return Built(
        job.job_id,
        "T-100",
        [job.test_id, water.id or 0, vane.id or 0, classified.id or 0],
        [gone_test.id or 0, waiting_test.id or 0, amendment.id or 0],
        "BH1-S2",
        "BH1-S3",
    )


def stored(db: Database, test_ids: list[int]) -> list[LabTest]:
    with db.session() as s:
        return [t for t in (s.get(LabTest, i) for i in test_ids) if t is not None]


def export_of(db: Database, job_id: int) -> ResultsExport:
    with db.session() as s:
        return load_results(s, job_id)


def workbook(data: bytes) -> openpyxl.Workbook:
    return openpyxl.load_workbook(io.BytesIO(data))


def records(sheet: Worksheet) -> list[dict[str, Any]]:
    """A sheet's rows as dicts by header."""
    rows = list(sheet.iter_rows(values_only=True))
    headers = [str(h) for h in rows[0]]
    return [dict(zip(headers, row, strict=True)) for row in rows[1:]]


def leaves(node: Any, path: tuple[str, ...] = ()) -> list[tuple[str, Any]]:
    """Every value of stored JSON that is not an object or list, by dotted path."""
    if isinstance(node, dict):
        return [leaf for k, v in node.items() for leaf in leaves(v, (*path, str(k)))]
    if isinstance(node, list):
        return [leaf for i, v in enumerate(node) for leaf in leaves(v, (*path, str(i)))]
    return [(".".join(path), node)]


def as_xlsx_keeps_it(value: float) -> float:
    """openpyxl writes numbers with 16 significant digits (openpyxl.compat.strings.safe_string,
    "%.16g"): the value a workbook gives back."""
    return float(f"{value:.16g}")


def rounds_to(text: str, value: float) -> bool:
    """The report's text is the value rounded half up at the decimals it shows (ASTM D4318 /
    D2216 reporting: rounded only when shown), so it is within half a unit of its last digit."""
    decimals = len(text.split(".")[1]) if "." in text else 0
    return abs(float(text) - value) <= 0.5 * 10**-decimals + 1e-9


NUMBER_TEXT = re.compile(r"^-?[0-9]+(\.[0-9]+)?$")


def test_the_workbook_holds_every_approved_value_as_reported_and_in_full(
    db: Database, people: People
) -> None:
    built = build_job(db, people)
    book = workbook(results_xlsx(export_of(db, built.job_id)))

    # one sheet per method present (the withdrawn sample's and the unapproved test's methods
    # are present through the approved ones)
    assert book.sheetnames == ["Summary", "water-content", "atterberg", "classification", "vane"]
    lines: dict[tuple[int, str, str], dict[str, Any]] = {}
    for name in book.sheetnames[1:]:
        sheet = book[name]
        assert [c.value for c in sheet[1]] == list(METHOD_HEADERS)
        for row in records(sheet):
            lines[(row["Test"], row["Part"], row["Path"])] = row

    typed = lines[(built.approved[1], "reading", "determinations.0.tare_g")]
    # as entered, every digit read (ISO/IEC 17025:2017 cl. 7.5.1), beside the number it names
    assert (typed["As entered or as reported"], typed["Full precision"]) == ("10.00", 10.0)
    checked = 0
    for test in stored(db, built.approved):
        results = {k: v for k, v in (test.results or {}).items() if k != "interpretation"}
        for path, value in leaves(results):  # the stored results: every value the approval signed
            row = lines.pop((test.id or 0, "result", path))
            shown, full = row["As entered or as reported"], row["Full precision"]
            if isinstance(value, bool):
                assert full is value and shown == ("yes" if value else "no")
            elif isinstance(value, int | float):
                assert full == as_xlsx_keeps_it(value), path  # a number, at full precision
                assert math.isclose(full, value, rel_tol=1e-15)
                if NUMBER_TEXT.match(shown):
                    assert rounds_to(shown, value), (path, shown, value)
                else:
                    assert shown == "NP"  # ASTM D4318: a limit that cannot be determined
            else:
                assert full is None and shown == ("—" if value is None else value)
            checked += 1
        for path, value in leaves(test.readings or {}):  # the readings as stored at the bench
            row = lines.pop((test.id or 0, "reading", path))
            assert row["As entered or as reported"] == (value if isinstance(value, str) else repr(value))
        for flag in test.flags or []:
            row = lines.pop((test.id or 0, "flag", flag["code"]))
            assert flag["message"] in row["As entered or as reported"]
    assert checked > 60  # computed: the four tests' results hold well over 60 values
    assert lines == {}  # and nothing else: no other test's values


def test_the_summary_has_one_row_per_sample_with_the_report_s_text_beside_the_value(
    db: Database, people: People
) -> None:
    built = build_job(db, people)
    rows = records(workbook(results_xlsx(export_of(db, built.job_id)))["Summary"])
    atterberg, classification = (t.results or {} for t in stored(db, [built.approved[0], built.approved[3]]))

    assert [(r["Location"], r["Sample"]) for r in rows] == [("BH1", "BH1-S1"), ("BH2", "BH2-S1")]
    bh1, bh2 = rows
    assert (bh1["Job"], bh1["Depth top (m)"], bh1["Depth base (m)"]) == ("T-100", 1, 1.45)  # as registered
    assert (bh1["Sample type"], bh1["Description"]) == ("U100", "Firm brown CLAY")
    assert bh1["Water content w (%)"] == "30.0"  # ASTM D2216 cl. 12.1, 0.1 %
    assert bh1["Liquid limit LL (%)"] == "40"  # Das, ASTM D4318 whole numbers
    assert bh1["Liquid limit LL (%)" + FULL] == as_xlsx_keeps_it(atterberg["liquid_limit"])
    assert round(bh1["Liquid limit LL (%)" + FULL], 2) == 39.67  # Das: least squares in log10 N
    assert bh1["Plastic limit PL (%)"] == "21"  # Liu & Evett, 21.2 reported whole
    assert round(bh1["Plastic limit PL (%)" + FULL], 1) == 21.2  # Liu & Evett
    assert bh1["Plasticity index PI (%)"] == "19"  # computed: 40 - 21
    assert bh1["Sensitivity St"] == "4.1"  # ASTM D4648: 0.0142 / 0.0035
    assert math.isclose(bh1["Sensitivity St" + FULL], 0.0142 / 0.0035)  # ASTM D4648 torque ratio
    assert bh1["USCS group symbol"] == "CL"  # ASTM D2487 Fig. 4: LL 40, PI 19 above the A-line
    assert (bh2["USCS group symbol"], bh2["USCS group name"]) == ("CL", "Lean clay")  # ASTM D2487 Fig. 1
    assert (bh2["AASHTO group"], bh2["AASHTO group index GI"]) == ("A-7-6", "17")  # AASHTO M 145
    assert bh2["AASHTO group index GI" + FULL] == classification["group_index"]  # as stored
    assert bh2["Water content w (%)"] == "—"  # not tested: the report's dash
    assert bh2["Water content w (%)" + FULL] is None


def test_the_csv_is_the_summary_in_utf8_with_a_byte_order_mark(db: Database, people: People) -> None:
    built = build_job(db, people)
    export = export_of(db, built.job_id)
    data = results_csv(export)

    assert data.startswith(b"\xef\xbb\xbf")  # the BOM Excel needs to read UTF-8 (common practice)
    rows = list(csv.DictReader(io.StringIO(data.decode("utf-8-sig"), newline="")))
    sheet = records(workbook(results_xlsx(export))["Summary"])
    assert list(rows[0]) == list(sheet[0])  # the same columns as the sheet "Summary"
    assert "Clay fraction < 2 µm (%)" in rows[0]  # a unit outside ASCII survives the round trip
    assert [r["Sample"] for r in rows] == ["BH1-S1", "BH2-S1"]
    ll = (stored(db, [built.approved[0]])[0].results or {})["liquid_limit"]
    assert rows[0]["Liquid limit LL (%)"] == "40"  # Das, ASTM D4318 whole numbers
    assert float(rows[0]["Liquid limit LL (%)" + FULL]) == ll  # CSV text gives the stored double exactly
    for csv_row, sheet_row in zip(rows, sheet, strict=True):
        for header, text in csv_row.items():
            value = sheet_row[header]
            if isinstance(value, float | int):
                assert math.isclose(float(text), value, rel_tol=1e-15), header
            else:
                assert text == ("" if value is None else value), header


def test_withdrawn_samples_and_tests_not_approved_are_left_out(db: Database, people: People) -> None:
    built = build_job(db, people)
    export = export_of(db, built.job_id)
    exported = [t.test_id for t in export.tests]
    book = workbook(results_xlsx(export))
    in_sheets = {row["Test"] for name in book.sheetnames[1:] for row in records(book[name])}
    text = results_csv(export).decode("utf-8-sig")
    samples_in_csv = {r["Sample"] for r in csv.DictReader(io.StringIO(text))}

    assert sorted(exported) == sorted(built.approved) == sorted(in_sheets)
    assert not set(built.left_out) & in_sheets
    assert {built.withdrawn_sample, built.unapproved_sample}.isdisjoint(samples_in_csv)
    # an open amendment leaves the approved revision the one exported (DESIGN.md section 4)
    assert [t.entry.revision for t in export.tests if t.entry.method == "classification"] == [1]


def test_the_same_records_give_the_same_bytes(db: Database, people: People) -> None:
    built = build_job(db, people)
    first, again = export_of(db, built.job_id), export_of(db, built.job_id)

    assert results_xlsx(first) == results_xlsx(again)
    assert results_csv(first) == results_csv(again)
    book = workbook(results_xlsx(first))
    newest = max(t.approved_at for t in first.tests if t.approved_at is not None)
    # the workbook's time is the newest approval it carries (a time of the record, not the clock)
    assert book.properties.created == newest.replace(tzinfo=None, microsecond=0)


def test_text_that_looks_like_a_formula_stays_text(db: Database, people: People) -> None:
    formula = '=HYPERLINK("http://example.invalid","click")'
    built = build_job(db, people, description=formula)
    export = export_of(db, built.job_id)
    cell = workbook(results_xlsx(export))["Summary"]["G2"]
    rows = list(csv.DictReader(io.StringIO(results_csv(export).decode("utf-8-sig"))))

    assert (cell.value, cell.data_type) == (formula, "s")  # text, never a formula (OWASP CSV Injection)
    assert rows[0]["Description"] == "'" + formula  # OWASP CSV Injection: a leading apostrophe


def test_a_job_without_approved_tests_or_unknown_is_refused(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    with db.session() as s, pytest.raises(Invalid) as refused:
        load_results(s, job.job_id)
    assert refused.value.errors[0].loc == ("tests",)
    assert "no approved test" in str(refused.value)
    with db.session() as s, pytest.raises(NotFound):
        load_results(s, job.job_id + 1000)


@pytest.mark.parametrize(
    ("path", "unit"),
    [
        (("water_content", "determinations", 0, "tare_g"), "g"),  # DESIGN.md section 3: masses in g
        (("trials", 1, "penetration_mm", 0), "mm"),  # DESIGN.md section 3: lengths in mm
        (("undisturbed", "torque_nm"), "N·m"),  # DESIGN.md section 3: torques in N·m
        (("undrained_strength_kpa",), "kPa"),  # DESIGN.md section 3: stresses in kPa
        (("liquid_limit",), "%"),  # DESIGN.md section 3: water contents in %
        (("percent_passing_2mm",), "%"),  # a percentage, not a size
        (("uncertainty", "water_content", "U"), "%"),  # an uncertainty is in its quantity's unit
        (("uncertainty", "water_content", "k"), ""),  # the coverage factor has none (JCGM 100:2008 6.2)
        (("particle_density_mg_m3",), "Mg/m³"),  # DESIGN.md section 8: densities in Mg/m³
        (("readings", 0, "minutes"), "min"),  # DESIGN.md section 3: times in minutes
        (("blows",), ""),  # a count
    ],
)
def test_each_value_carries_the_unit_its_name_gives(path: tuple[str | int, ...], unit: str) -> None:
    assert unit_of(path) == unit
