"""The AGS4 export of approved results (S8 point 1, DESIGN.md section 7): checked by python-ags4's
own checker (zero errors), read back by our own import (S6) to the same locations and samples.

Files come from records built through the real services (a generated job with a test of every
method, on SQLite and on PostgreSQL), from the demo job, and from hand-made records for the
formatting rules. Check values name their source: the AGS4 Format Rules as python-ags4 1.2.0
checks them, the 4.1.1 standard dictionary python-ags4 ships (read here with python-ags4's own
reader, not ours), the engine's reporting rule (``server.engine.rounding``), or the worked
examples of tests.support.scenario.
"""

from __future__ import annotations

import random
from collections.abc import Iterator
from dataclasses import replace
from datetime import date
from pathlib import Path
from typing import Any

import pytest
from hypothesis import given
from hypothesis import strategies as st
from python_ags4 import AGS4, check
from sqlmodel import col, select

from server.config import Settings
from server.db.session import Database
from server.db.tables import Job, LabTest, Location, Sample
from server.demo import load_demo
from server.demo_report import Grading, Strength, classification_readings, grading_readings, strength_readings
from server.engine import METHODS
from server.exchange.ags4_read import read_ags4
from server.exchange.ags4_write import (
    DICTIONARY_FILE,
    EXPORTED_METHODS,
    LOCATION_CODES,
    REPORTED_TYPES,
    SAMPLE_CODES,
    TRAN_AGS,
    JobExport,
    LocationRecord,
    SampleRecord,
    TestRecord,
    ags4_text,
    definitions,
    number_text,
)
from server.exchange.job_export import job_export
from server.services import bench, jobs, samples
from server.services.errors import Invalid, NotFound
from server.workflow.vocabulary import LOCATION_KINDS, SAMPLE_TYPES, location_kind_id, sample_type_id
from tests.conftest import People
from tests.reports.issued import amend_and_approve, approve
from tests.support.ags4_files import checker_errors
from tests.support.scenario import ATTERBERG, LL_TRIALS, NATURAL, PL_DETERMINATIONS, determination, small_job

ISSUED_ON = date(2026, 12, 3)


# -- reading a file back ---------------------------------------------------------------------------


def _tables(text: str, folder: Path) -> dict[str, list[dict[str, str]]]:
    """The file's groups as python-ags4 reads them: DATA rows only, values as written."""
    path = folder / "read.ags"
    path.write_bytes(text.encode("ascii"))
    tables, _ = AGS4.AGS4_to_dataframe(str(path))
    return {name: [r for r in df.to_dict("records") if r["HEADING"] == "DATA"] for name, df in tables.items()}


def _reimported(text: str) -> tuple[set[tuple[Any, ...]], set[tuple[Any, ...]]]:
    """Locations and samples as our own AGS4 import (S6) reads the file."""
    schedule = read_ags4(text.encode("ascii"))
    assert schedule.errors == []
    assert schedule.project is not None
    locations = {(x.code, x.kind, x.easting, x.northing, x.ground_level_m) for x in schedule.locations}
    found = {(x.location, x.code, x.top_m, x.base_m, x.sample_type) for x in schedule.samples}
    return locations, found


def _exported(export: JobExport) -> tuple[set[tuple[Any, ...]], set[tuple[Any, ...]]]:
    """The same, from the records the file was written from (depths to the 0.01 m of SAMP_TOP,
    AGS4 dictionary 4.1.1 type 2DP)."""
    locations = {(x.code, x.kind, x.easting, x.northing, x.ground_level_m) for x in export.locations}
    found = {
        (x.location, x.code, round(x.top_m, 2), round(x.base_m, 2), x.sample_type) for x in export.samples
    }
    return locations, found


def _row(tables: dict[str, list[dict[str, str]]], group: str, sample: str, spec: str = "1") -> dict[str, str]:
    rows = [r for r in tables[group] if r["SAMP_ID"] == sample and r.get("SPEC_REF", spec) == spec]
    assert len(rows) == 1, (group, sample, rows)
    return rows[0]


# -- the dictionary ----------------------------------------------------------------------------------


def test_the_dictionary_read_is_the_one_python_ags4_checks_4_1_1_files_against() -> None:
    # python-ags4 1.2.0, check.STANDARD_DICT_FILES
    assert check.STANDARD_DICT_FILES[TRAN_AGS] == DICTIONARY_FILE


@pytest.fixture(scope="module")
def standard() -> dict[str, list[dict[str, str]]]:
    """The 4.1.1 dictionary as python-ags4's own reader gives it."""
    import python_ags4

    path = Path(python_ags4.__file__).parent / DICTIONARY_FILE
    tables, _ = AGS4.AGS4_to_dataframe(str(path))
    return {
        name: [r for r in tables[name].to_dict("records") if r["HEADING"] == "DATA"]
        for name in ("DICT", "ABBR")
    }


@pytest.mark.parametrize(
    ("group", "heading", "unit", "data_type"),
    [  # AGS4 dictionary 4.1.1, each group's DICT rows
        ("LNMC", "LNMC_MC", "%", "X"),
        ("LLPL", "LLPL_LL", "%", "0DP"),
        ("LLPL", "LLPL_PL", "%", "XN"),
        ("LLPL", "LLPL_PI", "", "0DP"),
        ("GRAG", "GRAG_CLAY", "%", "1DP"),
        ("GRAT", "GRAT_SIZE", "mm", "3SF"),
        ("GRAT", "GRAT_PERP", "%", "0DP"),
        ("LVAN", "LVAN_VNPK", "kPa", "XN"),
        ("LFCN", "LFCN_FCPK", "kPa", "2SF"),
        ("LUCT", "LUCT_UCS", "kPa", "0DP"),
        ("SAMP", "SAMP_TOP", "m", "2DP"),
        ("LOCA", "LOCA_NATE", "m", "2DP"),
        ("LPDN", "LPDN_PDEN", "Mg/m3", "XN"),  # the S12 methods' groups
        ("LDEN", "LDEN_MC", "%", "X"),
        ("LDEN", "LDEN_BDEN", "Mg/m3", "2DP"),
        ("LDEN", "LDEN_DDEN", "Mg/m3", "2DP"),
        ("LLIN", "LLIN_LS", "%", "0DP"),
        ("GCHM", "GCHM_CODE", "", "PA"),
        ("GCHM", "GCHM_RESL", "", "U"),
        ("GCHM", "GCHM_UNIT", "", "PU"),
        ("CMPG", "CMPG_MAXD", "Mg/m3", "2DP"),
        ("CMPG", "CMPG_MCOP", "%", "2SF"),
        ("CMPG", "CMPG_PDEN", "Mg/m3", "XN"),
        ("CMPT", "CMPT_MC", "%", "X"),
        ("CMPT", "CMPT_DDEN", "Mg/m3", "3DP"),
    ],
)
def test_headings_carry_the_standard_dictionarys_unit_and_type(
    group: str, heading: str, unit: str, data_type: str
) -> None:
    found = next(h for h in definitions(group) if h.name == heading)
    assert (found.unit, found.data_type) == (unit, data_type)


def test_standard_headings_follow_the_dictionary_in_order_unit_and_type_but_for_the_stated_two(
    standard: dict[str, list[dict[str, str]]],
) -> None:
    for group in (
        *("PROJ", "TRAN", "LOCA", "SAMP", "LNMC", "LLPL", "GRAG", "GRAT", "LVAN", "LFCN", "LUCT"),
        *("LPDN", "LDEN", "LLIN", "GCHM", "CMPG", "CMPT"),  # the S12 methods' groups: no heading of ours
    ):
        expected = [
            (r["DICT_HDNG"], r["DICT_UNIT"], r["DICT_DTYP"])
            for r in standard["DICT"]
            if r["DICT_TYPE"] == "HEADING" and r["DICT_GRP"] == group
        ]
        ours = [(h.name, h.unit, h.data_type) for h in definitions(group)][: len(expected)]
        differing = {name for (name, _, t), (_, _, e) in zip(ours, expected, strict=True) if t != e}
        assert [(n, u) for n, u, _ in ours] == [(n, u) for n, u, _ in expected]
        assert differing == set(REPORTED_TYPES) & {n for n, _, _ in expected}


@pytest.mark.parametrize(
    ("heading", "code"),
    [  # AGS4 dictionary 4.1.1 ABBR rows
        ("LPDN_TYPE", "SMALL PYK"),  # "Small pyknometer"
        ("LDEN_TYPE", "LINEAR"),  # "Linear measurement"
        ("LDEN_SMTY", "CYLINDER"),
        ("GCHM_CODE", "LOI"),  # "Loss on ignition (as %)"
        ("GCHM_TTYP", "SOLID_TOTAL"),
        ("CMPG_TYPE", "2.5KG"),  # the standard effort's rammer
        ("CMPG_TYPE", "4.5KG"),  # "4.5kg Heavy compaction", the modified effort's
    ],
)
def test_the_codes_the_s12_groups_use_are_the_standard_lists_own(
    standard: dict[str, list[dict[str, str]]], heading: str, code: str
) -> None:
    assert any(r["ABBR_HDNG"] == heading and r["ABBR_CODE"] == code for r in standard["ABBR"])


def test_headings_of_our_own_are_absent_from_the_standard_dictionary_and_fit_rule_19(
    standard: dict[str, list[dict[str, str]]],
) -> None:
    known = {(r["DICT_GRP"], r["DICT_HDNG"]) for r in standard["DICT"]}
    groups = {r["DICT_GRP"] for r in standard["DICT"]}
    assert "LCLS" not in groups  # AGS4 dictionary 4.1.1 group list
    for group in ("GRAG", "LVAN", "LFCN", "LUCT"):
        own = [h.name for h in definitions(group) if (group, h.name) not in known]
        assert own and all(n.startswith(f"{group}_") and len(n) <= 9 for n in own)  # AGS4 rules 19a, 19b


def test_every_kind_of_location_and_sample_type_has_a_code_our_import_reads_back() -> None:
    # the vocabulary's own lookups (S6): a code written must name the same id again
    assert {kind: location_kind_id(code) for kind, code in LOCATION_CODES.items()} == {
        k: k for k in LOCATION_KINDS
    }
    assert {kind: sample_type_id(code) for kind, code in SAMPLE_CODES.items()} == {k: k for k in SAMPLE_TYPES}


def test_every_method_of_the_engine_has_a_group() -> None:
    assert EXPORTED_METHODS == set(METHODS)  # server.engine.METHODS at S8


# -- numbers in their data types ---------------------------------------------------------------------


@pytest.mark.parametrize(
    ("value", "data_type", "key", "text"),
    [
        (24.04, "1DP", "clay_fraction", "24.0"),  # rounding.DECIMALS clay_fraction 0, padded to 1DP
        (191.98, "0DP", "unconfined_strength_kpa", "192"),  # one rounding, to the type (computed)
        (12.45, "0DP", "unconfined_strength_kpa", "12"),  # not 12.5 then 13 (computed)
        (6.2, "2DP", "undisturbed_penetration_mm", "6.20"),
        (16.327, "2SF", "undrained_strength_kpa", "16"),
        (3.157, "2SF", "remoulded_strength_kpa", "3.2"),
        (9.96, "2SF", None, "10"),  # carried into a new digit: python-ags4 _format_SF writes "10"
        (0.075, "3SF", None, "0.0750"),
        (37.5, "3SF", None, "37.5"),
        (0.001338, "3SF", None, "0.00134"),
        (30.0, "X", "water_content", "30.0"),  # reported(): ASTM D2216 Method B, 0.1 %
        (39.66975, "0DP", "liquid_limit", "40"),  # Das worked example, LL 39.67 reported 40
        (2.5, "0DP", None, "3"),  # half up, as server.engine.rounding rounds (common practice)
        (-0.004, "2DP", None, "0.00"),  # no negative zero
    ],
)
def test_numbers_are_written_as_reported_in_the_headings_type(
    value: float, data_type: str, key: str | None, text: str
) -> None:
    assert number_text(value, data_type, key) == text


@given(st.floats(min_value=1e-6, max_value=1e6), st.sampled_from(["1SF", "2SF", "3SF", "4SF"]))
def test_significant_figures_are_what_python_ags4s_rule_8_check_writes_again(
    value: float, data_type: str
) -> None:
    text = number_text(value, data_type)
    # AGS4 rule 8 as python-ags4 1.2.0 checks nSF: the value formatted again must be the same text
    assert AGS4._format_SF(float(text), data_type) == text


# -- hand-made records: every group, awkward text ------------------------------------------------------


def _test(
    sample: str,
    method: str,
    results: dict[str, Any],
    readings: dict[str, Any] | None = None,
    test_id: int = 1,
    revision: int = 1,
) -> TestRecord:
    return TestRecord(sample, method, revision, test_id, results, readings or {})


HAND_MADE = JobExport(
    number="HM-7",
    title='Quarry "north" extension, phase 2',
    site="Øyvik Road – Brackenmoor",
    client="Brackenmoor Aggregates",
    laboratory="Harrowdene Soils Laboratory",
    locations=[
        LocationRecord("BH1", "borehole", 412345.6, 287654.3, 42.1),
        LocationRecord("TP1", "trial pit"),
        LocationRecord("X1", "other"),
    ],
    samples=[
        SampleRecord("BH1", "BH1-U1", 1.0, 1.45, "U100", 'Firm brown "sandy" CLAY,\nwith gravel ≤ 20 mm'),
        SampleRecord("TP1", "TP1-B1", 0.5, 0.8, "bulk", "Grey SAND, grains 75–425 µm"),
        SampleRecord("X1", "X1-T1", 2.0, 2.0, "tube", "Tube (other), point sample", "Remark: café"),
    ],
    tests=[
        _test(
            "BH1-U1",
            "atterberg",
            {
                "water_content": 30.0,
                "liquid_limit": 39.67,
                "plastic_limit": 21.22,
                "plasticity_index": 19.0,
                "nonplastic": False,
                "liquid_limit_method": "ll-cone",
                "cone": "80g-30deg",
                "liquid_limit_trials": [{}, {}, {}],
            },
            {"deviation": "Air-dried – by request"},
        ),
        _test(
            "TP1-B1",
            "sieve",
            {
                "gravel": 0.0,
                "sand": 96.8,
                "fines": 3.2,
                "cu": 3.64,
                "cc": 0.964,
                "percent_passing_0_425mm": 40.2,
                "grading_curve": [
                    {"size_mm": 2.0, "percent_passing": 90.0},
                    {"size_mm": 0.075, "percent_passing": 3.2},
                ],
            },
            {"dry_mass_g": "500.0"},
        ),
        _test(
            "X1-T1",
            "fall-cone-strength",
            {
                "undisturbed_penetration_mm": 6.2,
                "undrained_strength_kpa": 16.33,
                "remoulded_strength_kpa": 3.157,
                "sensitivity": 5.17,
            },
            {"cone_mass_g": "80.0", "cone_angle_deg": 30},
        ),
        _test("X1-T1", "visual-inspection", {"remark": "photographed"}, test_id=9),  # not a method: no group
    ],
    standards={m: METHODS[m].standard for m in METHODS},
)


def test_hand_made_records_pass_the_checker_with_zero_errors(tmp_path: Path) -> None:
    text = ags4_text(HAND_MADE, issued_on=ISSUED_ON)
    assert checker_errors(text, tmp_path) == {}  # AGS4 rules 1 to 20, python-ags4 1.2.0
    assert text.isascii()  # AGS4 rule 1
    assert all(line.endswith("\r") for line in text.split("\n")[:-1])  # AGS4 rule 2a


def test_hand_made_records_read_back_to_the_same_locations_and_samples() -> None:
    text = ags4_text(HAND_MADE, issued_on=ISSUED_ON)
    assert _reimported(text) == _exported(HAND_MADE)


def test_text_is_written_in_ascii_with_its_quotes_and_commas_kept(tmp_path: Path) -> None:
    tables = _tables(ags4_text(HAND_MADE, issued_on=ISSUED_ON), tmp_path)
    assert tables["PROJ"][0]["PROJ_NAME"] == 'Quarry "north" extension, phase 2'  # AGS4 rule 5: "" inside
    assert tables["PROJ"][0]["PROJ_LOC"] == "Oyvik Road - Brackenmoor"  # AGS4 rule 1: ASCII
    descriptions = {r["SAMP_ID"]: r["SAMP_DESC"] for r in tables["SAMP"]}
    assert descriptions["BH1-U1"] == 'Firm brown "sandy" CLAY, with gravel <= 20 mm'  # one line (rule 2a)
    assert descriptions["TP1-B1"] == "Grey SAND, grains 75-425 um"


def test_cu_and_cc_keep_the_reports_decimals_and_the_fall_cone_its_own_group(tmp_path: Path) -> None:
    tables = _tables(ags4_text(HAND_MADE, issued_on=ISSUED_ON), tmp_path)
    grag = _row(tables, "GRAG", "TP1-B1")
    assert (grag["GRAG_UC"], grag["GRAG_CC"]) == ("3.6", "0.96")  # rounding.DECIMALS cu 1, cc 2
    assert (grag["GRAG_ASND"], grag["GRAG_AFIN"]) == ("97", "3")  # rounding.DECIMALS sand, fines 0
    assert "LLPL_425" not in _row(tables, "LLPL", "BH1-U1")  # no grading of that sample: no column
    lfcn = _row(tables, "LFCN", "X1-T1")
    # AGS4 dictionary 4.1.1 LFCN: CMAS 0DP g, CANG 0DP deg, PENA 2DP mm, FCPK/FCRM 2SF kPa
    assert (lfcn["LFCN_CMAS"], lfcn["LFCN_CANG"], lfcn["LFCN_PENA"]) == ("80", "30", "6.20")
    assert (lfcn["LFCN_FCPK"], lfcn["LFCN_FCRM"], lfcn["LFCN_SENS"]) == ("16", "3.2", "5.2")


def test_the_cone_method_is_written_with_the_dictionarys_abbreviations(tmp_path: Path) -> None:
    tables = _tables(ags4_text(HAND_MADE, issued_on=ISSUED_ON), tmp_path)
    llpl = _row(tables, "LLPL", "BH1-U1")
    # AGS4 dictionary 4.1.1 ABBR: LLPL_TYPE "FALL CONE", LLPL_CONE "80g/30deg"
    assert (llpl["LLPL_TYPE"], llpl["LLPL_CONE"], llpl["LLPL_POIN"]) == ("FALL CONE", "80g/30deg", "THREE")
    assert (llpl["LLPL_LL"], llpl["LLPL_PL"], llpl["LLPL_PI"]) == ("40", "21", "19")  # reported whole numbers
    assert llpl["LLPL_DEV"] == "Air-dried - by request"
    abbr = {(r["ABBR_HDNG"], r["ABBR_CODE"]): (r["ABBR_DESC"], r["ABBR_LIST"]) for r in tables["ABBR"]}
    assert abbr[("LLPL_TYPE", "FALL CONE")] == ("Fall cone", "AGS4")
    assert abbr[("SAMP_TYPE", "U")] == ("Undisturbed sample - open drive", "AGS4")
    assert abbr[("LLPL_POIN", "THREE")] == ("Three point", "Claybench")  # the list has ONE and FOUR only
    assert abbr[("LOCA_TYPE", "BH")] == ("Borehole", "Claybench")


def test_a_method_without_a_group_is_left_out(tmp_path: Path) -> None:
    text = ags4_text(HAND_MADE, issued_on=ISSUED_ON)
    assert "photographed" not in text.lower() and "visual" not in text.lower()


def test_the_same_records_in_any_order_give_the_same_bytes() -> None:
    first = ags4_text(HAND_MADE, issued_on=ISSUED_ON)
    shuffled = replace(
        HAND_MADE,
        locations=HAND_MADE.locations[::-1],
        samples=HAND_MADE.samples[::-1],
        tests=HAND_MADE.tests[::-1],
    )
    assert ags4_text(shuffled, issued_on=ISSUED_ON) == first
    assert "2026-12-03" in first  # TRAN_DATE from the given date, not the clock


def test_a_non_plastic_result_is_np_under_llpl_pl_and_has_no_pi(tmp_path: Path) -> None:
    export = replace(
        HAND_MADE,
        tests=[
            _test(
                "BH1-U1",
                "atterberg",
                {
                    "water_content": 21.0,
                    "liquid_limit": 24.2,
                    "plastic_limit": 25.1,
                    "nonplastic": True,
                    "liquid_limit_method": "ll-cup-multipoint",
                },
            )
        ],
    )
    text = ags4_text(export, issued_on=ISSUED_ON)
    assert checker_errors(text, tmp_path) == {}
    llpl = _row(_tables(text, tmp_path), "LLPL", "BH1-U1")
    # AGS4 dictionary 4.1.1 LLPL_PL (XN): "38 or NP"; ASTM D4318: NP when PL >= LL
    assert (llpl["LLPL_LL"], llpl["LLPL_PL"], llpl.get("LLPL_PI", "")) == ("24", "NP", "")


def test_records_that_do_not_hold_together_are_refused() -> None:
    with pytest.raises(ValueError, match="BH9"):
        ags4_text(
            replace(HAND_MADE, tests=[_test("BH9-U1", "water-content", {"water_content": 1.0})]),
            issued_on=ISSUED_ON,
        )


# -- a job with a test of every method, through the services ------------------------------------------

CLEAN_SAND_SIEVE = {  # 500 g washed on 75 µm: passing 100, 90, 70, 40, 20, 8, 3 % (computed)
    "dry_mass_g": 500.0,
    "washed_dry_mass_g": 500.0 - 15.0,
    "pan_g": 0.0,
    "sieves": [
        {"size_mm": s, "retained_g": m}
        for s, m in (
            (4.75, 0.0),
            (2.0, 50.0),
            (0.85, 100.0),
            (0.425, 150.0),
            (0.25, 100.0),
            (0.15, 60.0),
            (0.075, 25.0),
        )
    ],
}
HYDROMETER = {  # server.engine.grading_methods docstring example
    "dry_mass_g": 50.0,
    "specific_gravity": 2.70,
    "hydrometer": {"type": "152H", "id": "H-04"},
    "meniscus_correction": 1.0,
    "zero_readings": [{"temperature_c": 18.0, "reading": 6.5}, {"temperature_c": 24.0, "reading": 5.5}],
    "separation_sieve_mm": 2.0,
    "separation_passing_pct": 96.4,
    "passing_75um_pct": 71.8,
    "readings": [
        {"minutes": 1, "reading": 46.0, "temperature_c": 21.0},
        {"minutes": 2, "reading": 42.5, "temperature_c": 21.0},
        {"minutes": 1440, "reading": 14.0, "temperature_c": 20.5, "composite_correction": 6.0},
    ],
}
READINGS: dict[str, dict[str, Any]] = {
    "water-content": {"determinations": NATURAL},
    "atterberg": ATTERBERG,
    "ll-cup-multipoint": {"trials": LL_TRIALS},
    "ll-cup-one-point": {
        "trials": [
            {"blows": 23, **determination("L4", 10.00, 38.20, 30.00)},
            {"blows": 27, **determination("L5", 10.00, 38.00, 30.00)},
        ]
    },
    "ll-cone": {
        "cone": "80g-30deg",
        "trials": [
            {"penetration_mm": [15.8, 16.0], **determination("C1", 10.0, 36.4, 30.0)},
            {"penetration_mm": [19.9, 20.1], **determination("C2", 10.0, 37.0, 30.0)},
            {"penetration_mm": [23.8, 24.0], **determination("C3", 10.0, 37.6, 30.0)},
        ],
    },
    "plastic-limit": {"determinations": PL_DETERMINATIONS},
    "sieve": CLEAN_SAND_SIEVE,
    "hydrometer": HYDROMETER,
    "grading": grading_readings(Grading(78.0, 20.0, 2.0, 24.0), random.Random(5)),
    "vane": strength_readings(Strength("vane", 42.0, 2.8)),
    "fall-cone-strength": {
        "cone_mass_g": "80.0",
        "cone_angle_deg": "30",
        "undisturbed": {"penetration_mm": ["6.1", "6.3"]},
        "remoulded": {"penetration_mm": [14.2, 14.0]},
    },
    "unconfined-compression": strength_readings(Strength("unconfined-compression", 96.0, 2.2)),
}
NONPLASTIC = {**ATTERBERG, "plastic_limit": {"not_determinable": True}}

# location (kind, easting, northing, ground level) -> samples (code, top, base, type, methods)
PLAN: dict[
    tuple[str, str, float | None, float | None, float | None],
    list[tuple[str, float, float, str, tuple[str, ...]]],
] = {
    ("BH1", "borehole", 412345.6, 287654.3, 42.1): [
        ("BH1-U1", 1.0, 1.45, "U100", ("water-content", "atterberg", "grading", "vane")),
        ("BH1-U2", 2.0, 2.45, "UT100", ("ll-cup-multipoint", "plastic-limit", "unconfined-compression")),
        ("BH1-P3", 3.0, 3.45, "piston", ("ll-cup-one-point", "fall-cone-strength")),
    ],
    ("TP1", "trial pit", None, None, 41.85): [
        ("TP1-B1", 0.5, 0.8, "bulk", ("ll-cone", "sieve")),
        ("TP1-D2", 1.2, 1.5, "disturbed", ("hydrometer", "atterberg")),
    ],
    ("WS1", "window sample", 412400.0, 287700.0, None): [("WS1-L1", 0.3, 1.3, "liner", ("water-content",))],
    ("HA1", "hand auger", None, None, None): [("HA1-J1", 0.2, 0.2, "jar", ("water-content",))],
}


def _every_kind_job(db: Database, people: People) -> int:
    """Job EK-1: every method approved on a sample, the classification from BH1-U1's own results,
    a non-plastic set on TP1-D2; also a withdrawn sample and a test only handed in, both left out."""
    admin = people.admin
    jobs.set_laboratory(db, admin, "Harrowdene Soils Laboratory", "Harrowdene", "")
    client = jobs.create_client(db, admin, "Brackenmoor Water Ltd")
    job = jobs.create_job(db, admin, client.id or 0, "EK-1", "Every kind of test", "Øyvik Road – Brackenmoor")
    sample_ids: dict[str, int] = {}
    for (loc, kind, east, north, gl), rows in PLAN.items():
        location = samples.add_location(db, admin, job.id or 0, loc, kind, east, north, gl)
        for code, top, base, sample_type, methods in rows:
            sample = samples.add_sample(
                db, admin, location.id or 0, code, top, base, sample_type, f"Sample {code}"
            )
            sample_ids[code] = sample.id or 0
            for test in jobs.request_tests(db, admin, [sample.id or 0], methods):
                nonplastic = code == "TP1-D2" and test.method == "atterberg"
                approve(db, people, test.id or 0, NONPLASTIC if nonplastic else READINGS[test.method])
    with db.session() as s:
        approved = {
            t.method: t.results or {}
            for t in s.exec(select(LabTest).where(LabTest.sample_id == sample_ids["BH1-U1"]))
        }
    (classify,) = jobs.request_tests(db, admin, [sample_ids["BH1-U1"]], ["classification"])
    approve(db, people, classify.id or 0, classification_readings(approved["atterberg"], approved["grading"]))
    location_id = _location_id(db, sample_ids["BH1-U1"])
    gone = samples.add_sample(db, admin, location_id, "BH1-U9", 9.0, 9.45, "U100")
    (test,) = jobs.request_tests(db, admin, [gone.id or 0], ["water-content"])
    approve(db, people, test.id or 0, READINGS["water-content"])
    samples.withdraw_sample(db, admin, gone.id or 0, "Tube split in transit")
    waiting = samples.add_sample(db, admin, location_id, "BH1-U8", 8.0, 8.45, "U100")
    (test,) = jobs.request_tests(db, admin, [waiting.id or 0], ["water-content"])
    saved = bench.save_readings(db, people.tech, test.id or 0, READINGS["water-content"], test.version)
    bench.submit(db, people.tech, test.id or 0, saved.test.version)
    return job.id or 0


def _location_id(db: Database, sample_id: int) -> int:
    with db.session() as s:
        sample = s.get(Sample, sample_id)
        assert sample is not None
        return sample.location_id


@pytest.fixture
def every_kind(db: Database, people: People) -> tuple[int, JobExport, str]:
    job_id = _every_kind_job(db, people)
    with db.session() as s:
        export = job_export(s, job_id)
    return job_id, export, ags4_text(export, issued_on=ISSUED_ON)


def test_a_job_with_every_kind_of_test_passes_the_checker_with_zero_errors(
    every_kind: tuple[int, JobExport, str], tmp_path: Path
) -> None:
    _, _, text = every_kind
    assert checker_errors(text, tmp_path) == {}  # AGS4 rules 1 to 20, python-ags4 1.2.0
    groups = set(_tables(text, tmp_path))
    assert groups == {
        "PROJ",
        "TRAN",
        "UNIT",
        "TYPE",
        "ABBR",
        "DICT",
        "LOCA",
        "SAMP",
        "LNMC",
        "LLPL",
        "GRAG",
        "GRAT",
        "LVAN",
        "LFCN",
        "LUCT",
        "LCLS",
    }


def test_it_reads_back_to_the_jobs_locations_and_samples_with_approved_results(
    every_kind: tuple[int, JobExport, str],
) -> None:
    _, export, text = every_kind
    locations, found = _reimported(text)
    assert (locations, found) == _exported(export)
    expected = {(code, top, base, kind) for rows in PLAN.values() for code, top, base, kind, _ in rows}
    assert {(c, t, b, k) for _, c, t, b, k in found} == expected  # PLAN, as registered
    assert ("BH1", "borehole", 412345.6, 287654.3, 42.1) in locations


def test_withdrawn_samples_and_tests_not_approved_are_left_out(
    every_kind: tuple[int, JobExport, str],
) -> None:
    _, export, text = every_kind
    assert {s.code for s in export.samples}.isdisjoint({"BH1-U9", "BH1-U8"})
    assert "BH1-U9" not in text and "BH1-U8" not in text


def test_results_are_the_reports_values(every_kind: tuple[int, JobExport, str], tmp_path: Path) -> None:
    _, _, text = every_kind
    tables = _tables(text, tmp_path)
    lnmc = {(r["SAMP_ID"], r["SPEC_REF"]): r["LNMC_MC"] for r in tables["LNMC"]}
    # ASTM D2216 formula: (36.00 - 30.00) / (30.00 - 10.00) = 30.0 %, from the water content test
    # and from the Atterberg set's natural water content (two specimens of BH1-U1)
    assert lnmc[("BH1-U1", "1")] == lnmc[("BH1-U1", "2")] == "30.0"
    llpl = _row(tables, "LLPL", "BH1-U1")
    # Das worked example LL 39.67 -> 40; Liu & Evett PL 21.2 -> 21; PI 40 - 21 (ASTM D4318)
    assert (llpl["LLPL_LL"], llpl["LLPL_PL"], llpl["LLPL_PI"], llpl["LLPL_TYPE"]) == (
        "40",
        "21",
        "19",
        "CASAGRANDE",
    )
    assert llpl["LLPL_425"] == "87"  # the grading's own passing 0.425 mm, reported to 1 % (computed)
    assert _row(tables, "LLPL", "TP1-D2")["LLPL_PL"] == "NP"  # ASTM D4318: PL not determinable
    assert _row(tables, "LLPL", "TP1-B1")["LLPL_CONE"] == "80g/30deg"  # AGS4 dictionary 4.1.1 ABBR
    assert _row(tables, "LLPL", "BH1-P3")["LLPL_POIN"] == "ONE"  # AGS4 dictionary 4.1.1 ABBR
    grag = _row(tables, "GRAG", "TP1-B1")
    assert grag["GRAG_UC"] and grag["GRAG_CC"]  # the clean sand reaches D10 (computed)
    types = {r["GRAT_TYPE"] for r in tables["GRAT"] if r["SAMP_ID"] == "BH1-U1"}
    assert types == {"WS", "HY"}  # AGS4 dictionary 4.1.1 ABBR GRAT_TYPE: wet sieve, hydrometer
    assert _row(tables, "LVAN", "BH1-U1")["LVAN_VNPK"] == "42.0"  # demo_report vane made for 42 kPa
    luct = [r["LUCT_TYPE"] for r in tables["LUCT"]]
    assert luct == ["UNDISTURBED", "REMOULDED"]
    assert _row(tables, "LCLS", "BH1-U1")["LCLS_USCS"] == "CL"  # LL 40, PI 19 above the A-line (ASTM D2487)
    assert {r["TEST_STAT"] for g in ("LNMC", "LLPL", "GRAG") for r in tables[g]} == {"Approved, revision 1"}


def test_exporting_again_gives_the_same_bytes(every_kind: tuple[int, JobExport, str], db: Database) -> None:
    job_id, _, text = every_kind
    with db.session() as s:
        again = ags4_text(job_export(s, job_id), issued_on=ISSUED_ON)
    assert again == text


# -- exactly the revisions a report carried -----------------------------------------------------------


def test_named_revisions_are_exported_as_they_were_even_after_an_amendment(
    db: Database, people: People, tmp_path: Path
) -> None:
    job = small_job(db, people.admin)
    approve(db, people, job.test_id)
    amended = amend_and_approve(db, people, job.test_id)
    with db.session() as s:
        frozen = job_export(s, job.job_id, [job.test_id])
        current = job_export(s, job.job_id)
    assert [t.test_id for t in frozen.tests] == [job.test_id]
    assert [t.test_id for t in current.tests] == [amended]
    for export, w, status in (
        (frozen, "30.0", "Approved, revision 1"),
        (current, "28.7", "Approved, revision 2"),
    ):
        text = ags4_text(export, issued_on=ISSUED_ON)
        assert checker_errors(text, tmp_path) == {}
        lnmc = _row(_tables(text, tmp_path), "LNMC", "BH1-S1")
        # w = (36.00 - 30.00) / (30.00 - 10.00) = 30.0 %; amended dry mass 30.20: 5.80 / 20.20 = 28.7 %
        assert (lnmc["LNMC_MC"], lnmc["TEST_STAT"]) == (w, status)


def test_naming_a_revision_never_approved_or_of_another_job_is_refused(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    with db.session() as s:
        with pytest.raises(Invalid, match="never approved"):
            job_export(s, job.job_id, [job.test_id])
        with pytest.raises(NotFound):
            job_export(s, job.job_id, [job.test_id + 1000])
        with pytest.raises(Invalid, match="no approved test"):
            job_export(s, job.job_id)


# -- the demo job -------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Iterator[tuple[Database, int]]:
    data_dir = tmp_path_factory.mktemp("demo-ags4")
    settings = Settings(
        data_dir=data_dir,
        DATABASE_URL=f"sqlite:///{data_dir / 'demo.sqlite3'}",
        secret_key="d" * 48,
        public_base_url="http://127.0.0.1:8000",
    )
    info = load_demo(settings)
    db = Database(settings.database_url)
    with db.session() as s:
        job_id = s.exec(select(Job).where(Job.code == info.job_code)).one().id or 0
    yield db, job_id
    db.dispose()


def test_the_demo_jobs_export_passes_the_checker_and_reads_back_to_its_samples(
    demo: tuple[Database, int], tmp_path: Path
) -> None:
    db, job_id = demo
    with db.session() as s:
        export = job_export(s, job_id)
        approved = {
            (loc, x.code, round(x.depth_from_m, 2), round(x.depth_to_m, 2), x.sample_type)
            for x, loc in s.exec(
                select(Sample, Location.code)
                .join(Location, col(Location.id) == Sample.location_id)
                .join(LabTest, col(LabTest.sample_id) == Sample.id)
                .where(
                    Location.job_id == job_id,
                    LabTest.status == "approved",
                    col(Sample.withdrawn_at).is_(None),
                )
            )
        }
    text = ags4_text(export, issued_on=ISSUED_ON)
    assert checker_errors(text, tmp_path) == {}  # AGS4 rules 1 to 20, python-ags4 1.2.0
    _, found = _reimported(text)
    assert found == approved  # the demo's samples with approved tests (server.demo)
    assert _row(_tables(text, tmp_path), "LLPL", "BH02-D3")["LLPL_PL"] == "NP"  # demo: PL 25 >= LL 24
