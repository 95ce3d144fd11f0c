"""The report view: rounding for show, NP and dashes, one summary row per sample, opinion kept apart."""

from __future__ import annotations

import dataclasses
import hashlib
import json
from datetime import date
from typing import Any

import pytest

from server.reports.data import (
    DEFAULT_CAUTIONS,
    LabInfo,
    ReportData,
    RevisionNote,
    Signatory,
    TestEntry,
    canonical_json,
    content_fingerprint,
)
from server.reports.figures import grading_points
from server.reports.formatting import MINUS, moment
from server.reports.quantities import readings_tables, result_lines
from server.reports.summary import summary_row
from server.reports.view import TestSection, build_view, section_for


def entry(
    results: dict[str, Any],
    sample: str = "S1",
    location: str = "BH1",
    method: str = "atterberg",
    readings: dict[str, Any] | None = None,
    flags: list[dict[str, str]] | None = None,
) -> TestEntry:
    return TestEntry(
        sample,
        location,
        1.2,
        1.65,
        "U100",
        "Firm brown CLAY",
        method,
        results,
        readings or {},
        flags or [],
        revision=0,
    )


def report(*tests: TestEntry) -> ReportData:
    """A fictional report of our own (Hollin Brook footbridge)."""
    return ReportData(
        lab=LabInfo("Kestrel Vale Soils Laboratory"),
        client_name="Hollin Brook Parish Council",
        job_code="J-2025-031",
        job_title="Hollin Brook footbridge",
        site="East abutment",
        report_number="R-2025-031-01",
        revision=0,
        issue_date=date(2025, 3, 14),
        issued_at_iso="2025-03-14T16:05:00+00:00",
        approver=Signatory(
            "Dr Ada Marsh",
            "Laboratory manager",
            "Approves the results for issue",
            "2025-03-14T15:58:00+00:00",
        ),
        verify_url="https://claybench.example/verify/R-2025-031-01",
        tests=list(tests),
    )


def test_rounds_summary_values_by_each_keys_rule() -> None:
    row = summary_row(
        [
            entry(
                {
                    "water_content": 32.946,  # to 0.1 % (ASTM D2216 Method B) -> 32.9
                    "liquid_limit": 39.66975,  # Das problem set LL 39.67, whole number (ASTM D4318) -> 40
                    "plastic_limit": 21.205,  # Liu & Evett worked example PL 21.2 -> 21
                    "plasticity_index": 19.0,
                    "liquidity_index": 0.6287,  # two decimals (server.engine.rounding) -> 0.63
                    "consistency_index": 0.3713,
                    "activity": 0.6129,
                    "clay_fraction": 31.0,
                    "sensitivity": 3.25,  # one decimal, half up (common practice) -> 3.3
                    "uscs_symbol": "CL",
                    "uscs_name": "Lean clay",
                    "aashto_group": "A-6",
                    "group_index": 11.0,
                }
            )
        ]
    )
    assert (row.water_content, row.liquid_limit, row.plastic_limit, row.plasticity_index) == (
        "32.9",
        "40",
        "21",
        "19",
    )
    assert (row.liquidity_index, row.consistency_index, row.activity) == ("0.63", "0.37", "0.61")
    assert (row.clay_fraction, row.sensitivity) == ("31", "3.3")
    assert (row.uscs_symbol, row.uscs_name, row.aashto) == ("CL", "Lean clay", "A-6 (11)")
    assert (row.depth_from, row.depth_to) == ("1.20", "1.65")


def test_rounds_a_limit_of_exactly_one_half_up() -> None:
    row = summary_row([entry({"liquid_limit": 42.5, "plastic_limit": 20.5})])
    assert (row.liquid_limit, row.plastic_limit) == ("43", "21")  # round half up (common practice)


def test_shows_a_dash_for_every_missing_result() -> None:
    row = summary_row([entry({})])
    values = dataclasses.astuple(row)[5:]
    assert set(values) == {"—"}


def test_shows_np_for_the_limits_of_a_non_plastic_soil() -> None:
    # ASTM D4318: report NP when LL or PL cannot be determined or PL >= LL.
    row = summary_row([entry({"nonplastic": True, "water_content": 18.42})])
    assert (row.liquid_limit, row.plastic_limit, row.plasticity_index) == ("NP", "NP", "NP")
    assert (row.liquidity_index, row.consistency_index, row.activity) == ("—", "—", "—")
    with_ll = summary_row([entry({"nonplastic": True, "liquid_limit": 24.2, "plastic_limit": 25.1})])
    assert (with_ll.liquid_limit, with_ll.plastic_limit, with_ll.plasticity_index) == ("24", "NP", "NP")


def test_gives_one_summary_row_per_sample_from_all_its_tests() -> None:
    limits = entry({"liquid_limit": 55.0, "plastic_limit": 27.0, "plasticity_index": 28.0})
    vane = entry({"sensitivity": 3.2, "undrained_strength_kpa": 41.0}, method="vane")
    other = entry({"water_content": 20.0}, sample="S2")
    view = build_view(report(limits, vane, other))
    assert [(r.sample, r.liquid_limit, r.sensitivity) for r in view.summary] == [
        ("S1", "55", "3.2"),
        ("S2", "—", "—"),
    ]
    assert len(view.sections) == 3  # every test keeps its own details page


def test_keeps_interpretation_out_of_the_measured_results() -> None:
    cc = {"value": 0.267, "unit": "", "source": "Terzaghi & Peck (1967)", "note": "Cc = 0.009 (LL - 10)"}
    t = entry({"liquid_limit": 39.67, "interpretation": {"compression_index": cc}})
    assert all("ompression" not in line.label for line in result_lines(t.results))
    view = build_view(report(t))
    (e,) = view.interpretation
    assert (e.quantity, e.value, e.source.unescape(), e.sample) == (
        "Compression index",
        "0.27",
        "Terzaghi & Peck (1967)",
        "BH1 / S1",
    )
    assert e.note == f"C<sub>c</sub> = 0.009 (LL {MINUS} 10)"  # typeset: subscript and a real minus


def test_puts_each_rows_water_content_beside_its_readings() -> None:
    readings = {
        "liquid_limit": {
            "method": "ll-cone",
            "cone": "80g-30deg",
            "trials": [
                {
                    "container": "C-1",
                    "penetration_mm": [15.7, 15.9],
                    "tare_g": 20.10,
                    "wet_tare_g": 45.0,
                    "dry_tare_g": 36.89,
                },
                {
                    "container": "C-2",
                    "penetration_mm": [18.0, 18.2],
                    "tare_g": 20.05,
                    "wet_tare_g": 44.9,
                    "dry_tare_g": 36.39,
                },
            ],
        }
    }
    results = {
        "liquid_limit_trials": [
            {"penetration_mm": 15.8, "water_content": 48.3},
            {"penetration_mm": 18.1, "water_content": 52.14},
        ]
    }
    tables, others = readings_tables("atterberg", readings, results)
    (table,) = tables
    assert table.title == "Liquid limit — trials"
    assert table.columns == (
        "#",
        "Container",
        "Cone penetration (mm)",
        "Tare (g)",
        "Wet soil + tare (g)",
        "Dry soil + tare (g)",
        "w (%)",
    )
    assert table.rows[0] == ("1", "C-1", "15.7, 15.9", "20.1", "45.0", "36.89", "48.3")
    assert table.rows[1][-1] == "52.1"  # to 0.1 % (ASTM D2216 Method B)
    assert [(o.label, o.value) for o in others] == [
        ("Liquid limit — method", "Liquid limit, fall cone"),  # its name, not the id
        ("Liquid limit — cone", "80g-30deg"),
    ]


def test_matches_plastic_limit_determinations_to_their_own_water_contents() -> None:
    readings = {"determinations": [{"tare_g": 11.56, "wet_tare_g": 20.47, "dry_tare_g": 18.93}]}
    tables, _ = readings_tables(
        "plastic-limit",
        readings,
        {"plastic_limit_determinations": [20.93], "water_content_determinations": [99.0]},
    )
    assert tables[0].rows[0][-1] == "20.9"  # Liu & Evett worked example, first determination


def test_shows_flags_with_their_severity_in_words() -> None:
    flag = {"code": "pl-determinations-apart", "severity": "warning", "message": "repeat the test"}
    (section,) = build_view(report(entry({}, flags=[flag]))).sections
    (line,) = section.flags
    assert (line.severity, line.code, line.message) == (
        "Warning",
        "pl-determinations-apart",
        "repeat the test",
    )


def test_shows_expanded_uncertainty_with_its_coverage_factor() -> None:
    lines = result_lines(
        {"water_content": 32.946, "uncertainty": {"water_content": {"u": 0.03, "U": 0.06, "k": 2.0}}}
    )
    # JCGM 100:2008 cl. 6.3.3 (U = k u) and 7.2.6 (U to two significant figures): 0.060; w keeps its
    # reporting rule's 0.1 % (ASTM D2216), coarser than U, and says so
    assert (lines[0].value, lines[0].uncertainty, lines[0].coarser) == ("32.9", "± 0.060 (k = 2)", True)


def test_plots_plastic_samples_only_and_names_repeated_codes_by_location() -> None:
    a = entry({"liquid_limit": 40.0, "plasticity_index": 19.0}, sample="S1", location="BH1")
    b = entry({"liquid_limit": 55.0, "plasticity_index": 28.0}, sample="S1", location="BH2")
    np_silt = entry({"nonplastic": True}, sample="S2")
    view = build_view(report(a, b, np_silt))
    assert [(p.label, p.symbol) for p in view.chart_points] == [
        ("BH1/S1", "CL"),
        ("BH2/S1", "CH"),
    ]  # ASTM D2487
    assert "BH1/S1" in view.plasticity_chart_svg


def test_draws_the_flow_curve_only_where_trials_exist() -> None:
    trials = [{"blows": 23, "water_content": 41.0}, {"blows": 27, "water_content": 40.1}]
    one_point, no_ll = build_view(
        report(entry({"liquid_limit_trials": trials}), entry({}, sample="S2"))
    ).sections
    assert one_point.curve_svg.startswith("<svg") and "no line is fitted" in one_point.curve_caption
    assert no_ll.curve_svg == ""


def test_fingerprint_is_the_sha256_of_the_canonical_json() -> None:
    data = report(entry({"liquid_limit": 39.67}))
    text = canonical_json(data)
    assert json.loads(text)["issue_date"] == "2025-03-14"
    assert text == json.dumps(json.loads(text), sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    assert content_fingerprint(data) == hashlib.sha256(text.encode("utf-8")).hexdigest()


def test_fingerprint_changes_when_a_result_changes_and_not_otherwise() -> None:
    one = report(entry({"liquid_limit": 39.67}))
    assert content_fingerprint(one) == content_fingerprint(report(entry({"liquid_limit": 39.67})))
    assert content_fingerprint(one) != content_fingerprint(report(entry({"liquid_limit": 39.68})))


def test_refuses_a_value_that_is_not_a_finite_number_in_the_fingerprint() -> None:
    with pytest.raises(ValueError, match="finite"):
        content_fingerprint(report(entry({"liquid_limit": float("nan")})))


def test_default_cautions_cover_the_four_statements_of_the_design() -> None:
    text = " ".join(DEFAULT_CAUTIONS)
    assert "only to the samples as received and tested" in text
    assert "shall not be reproduced except in full" in text
    assert "indicative only" in text
    assert "responsible engineer" in text and "local codes and licensed practice" in text


def test_report_data_cannot_be_changed_after_it_is_built() -> None:
    data = report()
    with pytest.raises(dataclasses.FrozenInstanceError):
        data.revision = 2  # type: ignore[misc]
    assert isinstance(data.tests, tuple)


def test_shows_the_signature_time_in_utc_or_with_its_offset() -> None:
    assert moment("2025-03-14T15:58:00+00:00") == "2025-03-14 15:58 UTC"
    assert moment("2025-03-14T16:58:00+01:00") == "2025-03-14 16:58 UTC+01:00"
    assert moment("not a time") == "not a time"
    assert build_view(report()).signed_at == "2025-03-14 15:58 UTC"


def test_summary_takes_uscs_and_aashto_from_the_classification_and_clay_from_the_grading() -> None:
    limits = entry(
        {
            "liquid_limit": 38.0,
            "plastic_limit": 19.0,
            "plasticity_index": 19.0,
            "clay_fraction": 31.0,
            "activity": 0.6129,
            "uscs_symbol": "CL",
        }
    )
    grading = entry({"clay_fraction": 24.06, "fines": 78.0}, method="grading")
    classified = entry(
        {"uscs_symbol": "CL", "uscs_name": "Lean clay with sand", "aashto_group": "A-6", "group_index": 14},
        method="classification",
    )
    row = summary_row([limits, classified, grading])
    assert (row.uscs_name, row.aashto, row.clay_fraction) == ("Lean clay with sand", "A-6 (14)", "24")
    assert row.activity == "0.79"  # A = PI / clay = 19 / 24.06 = 0.790 (Skempton 1953), from the shown values


def test_grading_points_prefer_the_combined_curve_largest_size_first() -> None:
    results = {
        "grading_curve": [{"size_mm": 2.0, "percent_passing": 60.0}],
        "combined_curve": [
            {"size_mm": 0.002, "percent_passing": 9.0, "source": "hydrometer"},
            {"size_mm": 2.0, "percent_passing": 60.0, "source": "sieve"},
        ],
    }
    assert grading_points(results) == [(2.0, 60.0), (0.002, 9.0)]
    hydro = {
        "hydrometer_points": [
            {"diameter_mm": 0.03, "percent_finer": 45.0},
            {"diameter_mm": 0.0, "percent_finer": 1},
        ]
    }
    assert grading_points(hydro) == [(0.03, 45.0)]  # a size of zero cannot sit on a log axis


def test_view_has_a_depth_profile_per_location_and_grading_and_activity_charts() -> None:
    a = entry(
        {
            "water_content": 24.0,
            "liquid_limit": 38.0,
            "plastic_limit": 19.0,
            "plasticity_index": 19.0,
            "clay_fraction": 24.0,
        },
        location="BH1",
    )
    curve = [{"size_mm": 2.0, "percent_passing": 90.0}, {"size_mm": 0.002, "percent_passing": 24.0}]
    g = entry({"combined_curve": curve}, location="BH1", method="grading")
    b = entry(
        {"water_content": 30.0, "liquid_limit": 50.0, "plastic_limit": 25.0, "plasticity_index": 25.0},
        location="BH2",
        sample="S2",
    )
    view = build_view(report(a, g, b))
    assert [f.title for f in view.depth_profiles] == ["Location BH1", "Location BH2"]
    assert [f.title for f in view.grading_charts] == ["Location BH1"]
    assert view.activity_chart is not None
    assert [(p.sample, p.clay_fraction, p.plasticity_index, p.activity) for p in view.activity_points] == [
        ("BH1 / S1", "24", "19", "0.79")
    ]  # 19 / 24 = 0.79 (Skempton 1953)
    assert [s.first_of_sample for s in view.sections] == [True, False, True]  # a sample's tests follow on


def test_lists_each_tests_approval_and_each_amendment_with_its_reason() -> None:
    signed = Signatory("Marta Quill", "Reviewer", "Reviewed and approved", "2025-03-14T10:00:00+00:00")
    amended = dataclasses.replace(
        entry({"liquid_limit": 40.0}), revision=2, approval=signed, amendment_reason="Tin re-weighed"
    )
    view = build_view(
        dataclasses.replace(
            report(amended, entry({}, sample="S2")), history=[RevisionNote(1, "2025-03-01", "ab" * 32)]
        )
    )
    (line,) = view.approvals
    assert (line.sample, line.name, line.role, line.meaning, line.signed_at) == (
        "BH1 / S1",
        "Marta Quill",
        "Reviewer",
        "Reviewed and approved",
        "2025-03-14 10:00 UTC",
    )
    (change,) = view.amendments
    assert (change.revision, change.reason) == (2, "Tin re-weighed")
    assert view.history[0].revision == 1 and view.sections[0].approval.startswith("Marta Quill, Reviewer")


def _section(
    method: str, results: dict[str, object], readings: dict[str, object] | None = None
) -> TestSection:
    made = TestEntry("S1", "BH1", 1.0, 1.5, "U100", "Firm CLAY", method, results, readings or {})
    return section_for(0, made)


def test_a_linked_particle_density_is_named_on_the_density_page() -> None:
    # The engine's own keys (server/engine/phase_relations.py, services/linked_inputs.py).
    results = {
        "bulk_density_mg_m3": 1.98,
        "dry_density_mg_m3": 1.65,
        "void_ratio": 0.62,
        "particle_density_used_mg_m3": 2.668,
        "linked_inputs": {
            "particle_density_mg_m3": {
                "value": 2.668,
                "test_id": 12,
                "method": "particle-density",
                "status": "approved",
            }
        },
    }
    section = _section("density", results)
    assert any(line.label == "Particle density used (from test 12)" for line in section.results)
    assert any("is taken from the" in n and "(test 12) of the same sample" in n for n in section.notes)
    assert not any("No particle density" in n for n in section.notes)


def test_the_plasticity_descriptor_states_its_table_and_end_point_rule() -> None:
    basis = {
        "table": "Burmister (1949), plasticity by PI",
        "end_points": "a shared end point takes the lower class",
    }
    section = _section("atterberg", {"plasticity_index": 10.0, "plasticity_basis": basis})
    assert (
        "Plasticity descriptor: Burmister (1949), plasticity by PI; a shared end point takes the lower class"
        in (section.notes)
    )
