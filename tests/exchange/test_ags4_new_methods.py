"""The AGS4 export of the S12 methods (DESIGN.md sections 7 and 8): particle density under LPDN,
density under LDEN, linear shrinkage under LLIN, loss on ignition under GCHM (determinand LOI),
compaction under CMPG with its points under CMPT, each file passing python-ags4's checker with
zero errors.

Group and heading names, units, data types and abbreviations are those of the AGS4 standard
dictionary 4.1.1 that python-ags4 1.2.0 ships (tests/exchange/test_ags4_write.py holds the new
groups' headings and codes against it, read with python-ags4's own reader). The job is
made through the real services (requested, entered, handed in, approved) on SQLite and
PostgreSQL; its check values are the hand-worked ones of tests.reports.test_report_new_methods.
"""

from __future__ import annotations

from datetime import date
from pathlib import Path
from typing import Any

import pytest

from server.db.session import Database
from server.engine import METHODS
from server.engine.rounding import reported
from server.exchange.ags4_write import (
    JobExport,
    LocationRecord,
    SampleRecord,
    TestRecord,
    ags4_text,
)
from server.exchange.job_export import job_export
from tests.conftest import People
from tests.exchange.test_ags4_write import _tables
from tests.reports.test_report_new_methods import (
    DRY,
    G_T,
    LS,
    MOULD_SOIL,
    ORGANIC,
    RHO,
    RHO_D,
    RHO_MAX,
    RHO_W_20,
    W_OPT,
    new_methods_job,
)
from tests.support.ags4_files import checker_errors

ISSUED_ON = date(2026, 12, 4)
NEW_GROUPS = ("LPDN", "LDEN", "LLIN", "GCHM", "CMPG", "CMPT")


# -- a job through the services ----------------------------------------------------------------------


@pytest.fixture
def exported(db: Database, people: People) -> str:
    job_id = new_methods_job(db, people)
    with db.session() as s:
        export = job_export(s, job_id)
    return ags4_text(export, issued_on=ISSUED_ON)


def _one(tables: dict[str, list[dict[str, str]]], group: str) -> dict[str, str]:
    (row,) = tables[group]
    return row


def test_a_job_of_the_new_methods_passes_the_checker_with_zero_errors(exported: str, tmp_path: Path) -> None:
    assert checker_errors(exported, tmp_path) == {}  # AGS4 rules 1 to 20, python-ags4 1.2.0
    assert set(NEW_GROUPS) <= set(_tables(exported, tmp_path))


def test_particle_density_and_density_are_written_as_reported(exported: str, tmp_path: Path) -> None:
    tables = _tables(exported, tmp_path)
    lpdn = _one(tables, "LPDN")
    mean_gs = sum(G_T) / 2
    assert lpdn["LPDN_PDEN"] == reported(
        "particle_density_mg_m3", mean_gs * RHO_W_20
    )  # XN: the report's text
    assert lpdn["LPDN_TYPE"] == "SMALL PYK"
    assert f"specific gravity at 20 DegC {reported('specific_gravity', mean_gs)}" in lpdn["LPDN_REM"]
    lden = _one(tables, "LDEN")
    assert (lden["LDEN_TYPE"], lden["LDEN_SMTY"], lden["LDEN_MC"]) == ("LINEAR", "CYLINDER", "20.0")
    assert (lden["LDEN_BDEN"], lden["LDEN_DDEN"]) == (f"{RHO:.2f}", f"{RHO_D:.2f}")  # 2DP: 1.98, 1.65
    assert "void ratio" in lden["LDEN_REM"] and "(particle density 2.70 Mg/m3)" in lden["LDEN_REM"]


def test_shrinkage_and_loss_on_ignition_are_written_as_reported(exported: str, tmp_path: Path) -> None:
    tables = _tables(exported, tmp_path)
    llin = _one(tables, "LLIN")
    # LS = 8.14 % (hand-worked, BS 1377-2:1990 cl. 6.5) under LLIN_LS, type 0DP (AGS4 dictionary 4.1.1)
    assert llin["LLIN_LS"] == f"{LS:.0f}" == "8"
    assert llin["LLIN_REM"] == "Bar cracked while drying"
    gchm = _one(tables, "GCHM")
    assert (gchm["GCHM_CODE"], gchm["GCHM_TTYP"], gchm["GCHM_UNIT"]) == ("LOI", "SOLID_TOTAL", "%")
    assert gchm["GCHM_RESL"] == reported("organic_content", ORGANIC)  # type U: the report's text
    assert gchm["GCHM_REM"] == "Ignited at 440 DegC"
    assert gchm["GCHM_METH"] == METHODS["loss-on-ignition"].standard


def test_compaction_is_one_cmpg_row_and_a_cmpt_row_per_point_in_order_of_water_content(
    exported: str, tmp_path: Path
) -> None:
    tables = _tables(exported, tmp_path)
    cmpg = _one(tables, "CMPG")
    assert (cmpg["CMPG_TYPE"], cmpg["CMPG_PDEN"]) == ("2.5KG", "2.70")
    assert cmpg["CMPG_MAXD"] == f"{RHO_MAX:.2f}"  # 2DP
    assert cmpg["CMPG_MCOP"] == f"{W_OPT:.0f}"  # 2SF of 14.3 % is "14"
    points = [(r["CMPT_TESN"], r["CMPT_MC"], r["CMPT_DDEN"]) for r in tables["CMPT"]]
    # CMPT_DDEN 3DP: the reported 0.01 Mg/m³ padded (the module's rule: report, then the type)
    expected = [(str(i), f"{w:.1f}", f"{DRY[w]:.2f}0") for i, w in enumerate(sorted(MOULD_SOIL), start=1)]
    assert points == expected
    assert {r["CMPG_TESN"] for r in tables["CMPT"]} == {cmpg["CMPG_TESN"]}  # AGS4 rule 10c: the parent's key


# -- hand-made records for the edge cases --------------------------------------------------------------


def _export(method: str, results: dict[str, Any], readings: dict[str, Any] | None = None) -> JobExport:
    return JobExport(
        number="HM-12",
        client="Brackenmoor Aggregates",
        locations=[LocationRecord("TP1", "trial pit")],
        samples=[SampleRecord("TP1", "TP1-B1", 0.5, 0.8, "bulk")],
        tests=[TestRecord("TP1-B1", method, 1, 1, results, readings or {})],
        standards={m: METHODS[m].standard for m in METHODS},
    )


def test_a_file_with_only_loss_on_ignition_lists_its_result_unit_in_unit(tmp_path: Path) -> None:
    text = ags4_text(
        _export("loss-on-ignition", {"organic_content": 5.786}, {"furnace_c": "440"}), issued_on=ISSUED_ON
    )
    assert checker_errors(text, tmp_path) == {}  # AGS4 rule 15: a PU value must be listed in UNIT
    assert "%" in {r["UNIT_UNIT"] for r in _tables(text, tmp_path)["UNIT"]}


def test_a_compaction_without_a_peak_has_no_maximum_and_says_why(tmp_path: Path) -> None:
    results = {  # the highest point is the wettest: no maximum claimed (DESIGN.md section 8)
        "compaction_points": [
            {"water_content": 10.0, "dry_density_mg_m3": 1.70},
            {"water_content": 12.0, "dry_density_mg_m3": 1.75},
            {"water_content": 14.0, "dry_density_mg_m3": 1.79},
        ]
    }
    text = ags4_text(_export("compaction", results, {"effort": "modified"}), issued_on=ISSUED_ON)
    assert checker_errors(text, tmp_path) == {}
    tables = _tables(text, tmp_path)
    cmpg = _one(tables, "CMPG")
    assert cmpg.get("CMPG_MAXD", "") == "" and cmpg.get("CMPG_MCOP", "") == ""
    assert "do not bracket a peak" in cmpg["CMPG_REM"] and cmpg["CMPG_TYPE"] == "4.5KG"
    assert len(tables["CMPT"]) == 3


def test_a_density_without_a_particle_density_has_no_voids_remark(tmp_path: Path) -> None:
    results = {"bulk_density_mg_m3": 1.9845, "dry_density_mg_m3": 1.6537, "water_content": 20.0}
    text = ags4_text(_export("density", results), issued_on=ISSUED_ON)
    assert checker_errors(text, tmp_path) == {}
    lden = _one(_tables(text, tmp_path), "LDEN")
    assert lden.get("LDEN_REM", "") == "" and lden["LDEN_BDEN"] == "1.98"  # 2DP, AGS4 dictionary 4.1.1


def test_a_test_with_no_result_yet_writes_no_row(tmp_path: Path) -> None:
    for method in ("particle-density", "density", "linear-shrinkage", "loss-on-ignition", "compaction"):
        text = ags4_text(_export(method, {}), issued_on=ISSUED_ON)
        assert checker_errors(text, tmp_path) == {}
        assert not set(NEW_GROUPS) & set(_tables(text, tmp_path)), method


def test_a_particle_density_taken_from_the_samples_test_is_written_as_one_typed(tmp_path: Path) -> None:
    # The density and compaction methods give the particle density they computed with
    # (particle_density_used_mg_m3), typed or linked from a particle-density test (linked_inputs).
    density = {
        "bulk_density_mg_m3": 1.9845,
        "dry_density_mg_m3": 1.6537,
        "water_content": 20.0,
        "void_ratio": 0.6127,
        "particle_density_used_mg_m3": 2.668,
    }
    lden = _one(_tables(ags4_text(_export("density", density), issued_on=ISSUED_ON), tmp_path), "LDEN")
    assert "void ratio" in lden["LDEN_REM"] and "(particle density 2.67 Mg/m3)" in lden["LDEN_REM"]
    compaction = {
        "compaction_points": [
            {"water_content": 10.0, "dry_density_mg_m3": 1.70},
            {"water_content": 12.0, "dry_density_mg_m3": 1.75},
            {"water_content": 14.0, "dry_density_mg_m3": 1.72},
        ],
        "particle_density_used_mg_m3": 2.668,
    }
    text = ags4_text(_export("compaction", compaction, {"effort": "standard"}), issued_on=ISSUED_ON)
    assert checker_errors(text, tmp_path) == {}
    assert _one(_tables(text, tmp_path), "CMPG")["CMPG_PDEN"] == "2.67"  # 0.01 Mg/m³ (rounding.py)
