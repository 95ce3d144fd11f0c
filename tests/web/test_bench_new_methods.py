"""The bench sheets of the methods of DESIGN.md section 8 over HTTP, on SQLite and PostgreSQL:
each page renders, a worked example typed field by field through ``POST /tests/{id}/fields`` is
stored and its results shown with their names, units and rounding, and a refused value comes
back at its field with nothing stored.

The worked examples are our own numbers, each result hand-worked from the formula of the
standard named beside it (not taken from the engine).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from html import unescape

import pytest
from fastapi.testclient import TestClient
from httpx import Response

from server.db.session import Database
from server.db.tables import LabTest
from server.engine import METHODS
from server.engine.rounding import reported
from server.services import bench, jobs
from server.services.readings_paths import value_at
from server.web.bench_charts import _peak_parabola, compaction_chart
from server.web.bench_forms import RESULT_LINES
from tests.conftest import PASSWORDS, People
from tests.support.http import csrf_of, post_form, sign_in
from tests.support.scenario import small_job

LINES = {line.key: line for line in RESULT_LINES}


@dataclass(frozen=True)
class Worked:
    """A worked example: the fields typed (readings path -> text), the results it must give
    (hand-worked), each row's result shown beside it (dom id of the row -> result key, value),
    and the codes of the quality remarks it raises."""

    fields: dict[str, str]
    results: dict[str, float]
    rows: dict[str, tuple[str, float]] = field(default_factory=dict)
    flags: tuple[str, ...] = ()


def _points(typed: list[tuple[str, str]]) -> dict[str, str]:
    """Compaction points typed in this order: (mould + soil, tin + wet soil), tare 10.00 g and
    tin + dry soil 110.00 g each (100 g of dry soil, so the water content is wet - 110 in %)."""
    out: dict[str, str] = {}
    for i, (mould_soil, wet) in enumerate(typed):
        det = f"points.{i}.determinations.0."
        out |= {
            f"points.{i}.mould_soil_g": mould_soil,
            det + "tare_g": "10.00",
            det + "wet_tare_g": wet,
            det + "dry_tare_g": "110.00",
        }
    return out


WORKED: dict[str, Worked] = {
    # ASTM D854-14 eq. 1: Gt = ms / (ms + m4 - m3) = 10.000 / (10.000 + 80.000 - 86.250) = 2.66667;
    # at 20 °C G20 = Gt (eq. 2) and rho_s = Gt rho_w(20 °C) = 2.666667 x 0.998207 = 2.661885 Mg/m³
    # (rho_w(20 °C) = 998.207 kg/m³ for air-free water: Tanaka et al. 2001, Metrologia 38, from memory).
    "particle-density": Worked(
        {
            "determinations.0.pycnometer_g": "30.000",
            "determinations.0.pycnometer_soil_g": "40.000",
            "determinations.0.pycnometer_soil_water_g": "86.250",
            "determinations.0.pycnometer_water_g": "80.000",
            "determinations.0.temperature_c": "20.0",
        },
        {"particle_density_mg_m3": 2.661885, "specific_gravity": 8.0 / 3.0},
        {"out-determinations-0": ("particle_density_mg_m3", 2.661885)},
    ),
    # BS 1377-2:1990 cl. 6.5: LS = (1 - 128.8 / 140.0) x 100 = 8.0 %; a cracked bar is flagged.
    "linear-shrinkage": Worked(
        {"mould_length_mm": "140.0", "oven_dry_length_mm": "128.8", "condition": "cracked"},
        {"linear_shrinkage": 8.0},
        flags=("shrinkage-bar-cracked",),
    ),
    # BS 1377-2:1990 cl. 7.2: V = pi 38.00² x 76.00 / 4 = 86 192.74 mm³, rho = 172.39 / 86.19274
    # = 2.000053 Mg/m³; ASTM D2216: w = (65.00 - 55.00) / (55.00 - 15.00) = 25.0 %; rho_d = rho / 1.25
    # = 1.600042; e = 2.70 / 1.600042 - 1 = 0.687456, n = e / (1 + e) = 0.407392, S = w rho_s / e
    # = 25 x 2.70 / 0.687456 = 98.1881 % (phase relations, Head 2006 vol. 1 ch. 3, from memory).
    "density": Worked(
        {
            "specimens.0.mass_g": "172.39",
            "specimens.0.diameter_mm": "38.00",
            "specimens.0.height_mm": "76.00",
            "water_content.determinations.0.container": "T-3",
            "water_content.determinations.0.tare_g": "15.00",
            "water_content.determinations.0.wet_tare_g": "65.00",
            "water_content.determinations.0.dry_tare_g": "55.00",
            "particle_density_mg_m3": "2.70",
        },
        {
            "bulk_density_mg_m3": 2.000053,
            "water_content": 25.0,
            "dry_density_mg_m3": 1.600042,
            "void_ratio": 0.687456,
            "porosity": 0.407392,
            "degree_of_saturation": 98.1881,
        },
        {
            "out-specimens-0": ("bulk_density_mg_m3", 2.000053),
            "out-water_content-determinations-0": ("water_content", 25.0),
        },
    ),
    # BS 1377-3:1990 cl. 4: (30.000 - 29.500) / (30.000 - 20.000) = 5.0 % and
    # (31.000 - 30.480) / (31.000 - 21.000) = 5.2 %, mean 5.1 %; 550 °C is outside ASTM D2974-14's
    # 440 ± 40 °C and 750 ± 38 °C, flagged.
    "loss-on-ignition": Worked(
        {
            "furnace_c": "550",
            "determinations.0.crucible_g": "20.000",
            "determinations.0.crucible_dry_g": "30.000",
            "determinations.0.crucible_ignited_g": "29.500",
            "determinations.1.crucible_g": "21.000",
            "determinations.1.crucible_dry_g": "31.000",
            "determinations.1.crucible_ignited_g": "30.480",
        },
        {"organic_content": 5.1},
        {"out-determinations-0": ("organic_content", 5.0), "out-determinations-1": ("organic_content", 5.2)},
        ("furnace-temperature-nonstandard",),
    ),
    # BS 1377-4:1990 cl. 3.3.5: rho = (m - 4000) / 1000, rho_d = rho / (1 + w/100); the points typed
    # out of order give (w, rho_d) = (10, 1.70), (12, 1.78), (14, 1.82), (16, 1.80), (18, 1.74)
    # (e.g. 5993.6 g: 1.9936 / 1.12 = 1.78). The parabola through (12, 1.78), (14, 1.82), (16, 1.80)
    # (DESIGN.md section 8) has slopes 0.02 and -0.01, curvature -0.0075, so its vertex is at
    # w = (12 + 14 + 0.02 / 0.0075) / 2 = 14.3333 % and rho_d = 1.78 + 0.02 x 2.3333 - 0.0075 x 2.3333
    # x 0.3333 = 1.820833 Mg/m³ (14 + 1/3 % and 1.82 + 1/1200 exactly).
    "compaction": Worked(
        {
            "effort": "standard",
            "mould_volume_cm3": "1000.0",
            "mould_g": "4000.0",
            "particle_density_mg_m3": "2.70",
            **_points(
                [
                    ("6074.8", "124.00"),
                    ("5870.0", "120.00"),
                    ("6053.2", "128.00"),
                    ("5993.6", "122.00"),
                    ("6088.0", "126.00"),
                ]
            ),
        },
        {"maximum_dry_density_mg_m3": 1.82 + 1.0 / 1200.0, "optimum_water_content": 14.0 + 1.0 / 3.0},
    ),
}

# A refusal of each sheet, at its field: (fields typed first, the wrong field, its text, the
# engine's words, in part).
REFUSALS: dict[str, tuple[dict[str, str], str, str, str]] = {
    "particle-density": (
        {k: v for k, v in WORKED["particle-density"].fields.items() if not k.endswith("pycnometer_soil_g")},
        "determinations.0.pycnometer_soil_g",
        "29.000",  # below the empty pycnometer: no soil (common practice)
        "there is no dry soil",
    ),
    "linear-shrinkage": (
        {"mould_length_mm": "140.0"},
        "oven_dry_length_mm",
        "141.0",  # a bar does not lengthen in the oven (BS 1377-2:1990 cl. 6.5, common practice)
        "a bar does not grow in the oven",
    ),
    "density": (
        {k: v for k, v in WORKED["density"].fields.items() if k != "particle_density_mg_m3"},
        "particle_density_mg_m3",
        "1.50",  # below the dry density 1.60: no voids (phase relations, common practice)
        "the soil would have no voids",
    ),
    "loss-on-ignition": (
        {
            k: v
            for k, v in WORKED["loss-on-ignition"].fields.items()
            if k.startswith("determinations.0.") and not k.endswith("ignited_g")
        },
        "determinations.0.crucible_ignited_g",
        "30.500",  # above the dry mass 30.000: ignition adds no mass (BS 1377-3:1990 cl. 4)
        "ignition does not add mass",
    ),
    "compaction": (
        {"mould_g": "4000.0"},
        "points.0.mould_soil_g",
        "3990.0",  # lighter than the empty mould (common practice)
        "is not above the mould",
    ),
}
NEW_METHODS = sorted(WORKED)


def _test_of(db: Database, people: People, method: str) -> int:
    return small_job(db, people.admin, method=method).test_id


def _stored(db: Database, test_id: int) -> LabTest:
    with db.session() as s:
        test = s.get(LabTest, test_id)
    assert test is not None
    return test


def _type(client: TestClient, test_id: int, fields: dict[str, str]) -> None:
    """Type each field on its own, as the bench saves it: one request per field."""
    token = csrf_of(client.get(f"/tests/{test_id}"))
    for path, text in fields.items():
        reply = _save(client, test_id, token, path, text)
        assert reply.status_code == 200, (path, reply.text)
        assert reply.json()["stored"] == [path]


def _save(client: TestClient, test_id: int, token: str, path: str, text: str) -> Response:
    body = {"changes": [{"path": path, "value": text, "base": ""}]}
    return client.post(f"/tests/{test_id}/fields", json=body, headers={"X-CSRF-Token": token})


def _shown(page: str, key: str) -> str:
    """The text of the results panel's line for ``key`` (label, value and unit)."""
    found = re.search(rf'<div class="result" id="res-{key}"><dt>(.*?)</dt><dd><b>(.*?)</b>', page)
    assert found, f"no result line {key}"
    return unescape(f"{found.group(1)}: {found.group(2)}")


def _row_out(page: str, dom: str) -> str:
    found = re.search(rf'<div class="row-out" id="{dom}"[^>]*>(.*?)</div>', page, re.S)
    assert found, f"no row {dom}"
    return unescape(re.sub(r"<[^>]+>", "", found.group(1)))


@pytest.mark.parametrize("method", NEW_METHODS)
def test_each_new_method_has_a_bench_page_with_every_field_of_its_worked_example(
    app_client: TestClient, db: Database, people: People, method: str
) -> None:
    test_id = _test_of(db, people, method)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    page = app_client.get(f"/tests/{test_id}")
    assert page.status_code == 200
    assert f"<h1>{METHODS[method].title} " in page.text
    for path in WORKED[method].fields:
        assert f'name="r.{path}"' in page.text, path
    assert 'name="r.equipment.0.id"' in page.text  # the instruments used, as every sheet has
    assert "Results appear here as the readings are typed." in page.text


@pytest.mark.parametrize("method", NEW_METHODS)
def test_a_worked_example_typed_field_by_field_is_stored_and_its_results_shown(
    app_client: TestClient, db: Database, people: People, method: str
) -> None:
    worked = WORKED[method]
    test_id = _test_of(db, people, method)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    _type(app_client, test_id, worked.fields)

    stored = _stored(db, test_id)
    assert stored.results is not None and stored.status == "draft"
    for key, value in worked.results.items():
        assert stored.results[key] == pytest.approx(value, rel=2e-6), key
    assert sorted(f["code"] for f in stored.flags or []) == sorted(worked.flags)

    page = app_client.get(f"/tests/{test_id}").text
    for key, value in worked.results.items():
        line = LINES[key]
        unit = f" {line.unit}" if line.unit else ""
        assert _shown(page, key) == f"{line.label}: {reported(key, value)}{unit}"
    for dom, (key, value) in worked.rows.items():
        assert reported(key, value) in _row_out(page, dom)
    for code in worked.flags:
        message = next(f["message"] for f in stored.flags or [] if f["code"] == code)
        assert unescape(message) in unescape(page)
    assert 'id="to-correct"' not in page


@pytest.mark.parametrize("method", NEW_METHODS)
def test_a_wrong_value_is_refused_at_its_field_and_nothing_of_it_is_stored(
    app_client: TestClient, db: Database, people: People, method: str
) -> None:
    before, path, text, words = REFUSALS[method]
    test_id = _test_of(db, people, method)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    _type(app_client, test_id, before)
    version = _stored(db, test_id).version

    reply = _save(app_client, test_id, csrf_of(app_client.get(f"/tests/{test_id}")), path, text)
    assert reply.status_code == 422
    errors = reply.json()["errors"]
    assert [e["path"] for e in errors] == [path] and words in errors[0]["message"]
    stored = _stored(db, test_id)
    assert stored.version == version and value_at(stored.readings, path) is None
    # the sheet as typed shows the refusal beside the field
    typed = {f"r.{p}": v for p, v in {**before, path: text}.items()}
    fragment = post_form(
        app_client, f"/tests/{test_id}", f"/tests/{test_id}/preview", typed, headers={"HX-Request": "true"}
    )
    dom = "err-r-" + path.replace(".", "-")
    error = re.search(
        rf'<span class="field-error" id="{dom}" data-kind="invalid"[^>]*>(.*?)</span>', fragment.text
    )
    assert error and words in unescape(error.group(1))


def test_the_compaction_page_draws_the_points_the_peak_and_the_air_voids_lines(
    app_client: TestClient, db: Database, people: People
) -> None:
    test_id = _test_of(db, people, "compaction")
    sign_in(app_client, "tech", PASSWORDS["tech"])
    _type(app_client, test_id, WORKED["compaction"].fields)
    page = app_client.get(f"/tests/{test_id}").text
    svg = re.search(r'<svg[^>]*aria-label="Compaction curve".*?</svg>', page, re.S)
    assert svg
    for name in ("Compacted points", "Parabola through the peak", "Zero air voids", "5 % air voids"):
        assert f">{name}</text>" in svg.group(0)
    # one line each: the parabola and the 0, 5 and 10 % air-voids lines
    assert svg.group(0).count('class="series"') == 4


def test_the_parabola_drawn_passes_through_the_peak_and_its_neighbours() -> None:
    points = [(10.0, 1.70), (12.0, 1.78), (14.0, 1.82), (16.0, 1.80), (18.0, 1.74)]
    # the vertex hand-worked in WORKED["compaction"] (parabola through the middle three points)
    curve = _peak_parabola(points, (14.0 + 1.0 / 3.0, 1.82 + 1.0 / 1200.0))
    assert curve[0] == pytest.approx((12.0, 1.78)) and curve[-1] == pytest.approx((16.0, 1.80))
    assert curve[len(curve) // 2] == pytest.approx((14.0, 1.82))
    assert max(y for _, y in curve) <= 1.82 + 1.0 / 1200.0 + 1e-12


def test_without_a_particle_density_the_compaction_chart_has_no_air_voids_lines() -> None:
    results = {
        "compaction_points": [
            {"water_content": w, "dry_density_mg_m3": d}
            for w, d in ((10.0, 1.70), (12.0, 1.78), (14.0, 1.76))
        ],
        # hand-worked vertex of the parabola through the three: slopes 0.04 and -0.01, curvature
        # -0.0125, w = (10 + 12 + 0.04 / 0.0125) / 2 = 12.6, rho_d = 1.70 + 0.104 - 0.0195 = 1.7845
        "optimum_water_content": 12.6,
        "maximum_dry_density_mg_m3": 1.7845,
    }
    svg = compaction_chart(results)
    assert svg is not None and "air voids" not in svg and svg.count('class="series"') == 1
    assert compaction_chart({"compaction_points": []}) is None


def test_density_takes_the_particle_density_of_its_samples_particle_density_test(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin, method="density")
    (solids,) = jobs.request_tests(db, people.admin, [job.sample_id], ["particle-density"])
    assert solids.id is not None
    changes = [bench.Change(p, v) for p, v in WORKED["particle-density"].fields.items()]
    bench.save_changes(db, people.tech, solids.id, changes)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    fields = {k: v for k, v in WORKED["density"].fields.items() if k != "particle_density_mg_m3"}
    _type(app_client, job.test_id, fields)
    page = app_client.get(f"/tests/{job.test_id}").text
    # e = rho_s / rho_d - 1 = 2.661885 / 1.600042 - 1 = 0.663635 (both worked above)
    assert _shown(page, "void_ratio") == f"Void ratio e: {reported('void_ratio', 0.663635)}"
    assert "taken from" in page and f"test {solids.id} (draft)" in page
