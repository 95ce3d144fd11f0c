"""POST /api/v1/calculations: the calculation contract over HTTP (DESIGN.md section 3)."""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient

from tests.support.bad_inputs import BAD_ATTERBERG
from tests.support.scenario import ATTERBERG, PL_DETERMINATIONS


def test_computes_a_plastic_limit_with_its_flags(app_client: TestClient) -> None:
    reply = app_client.post(
        "/api/v1/calculations",
        json={"method": "plastic-limit", "readings": {"determinations": PL_DETERMINATIONS}},
    )
    assert reply.status_code == 200, reply.text
    body = reply.json()
    assert body["method"] == "plastic-limit" and isinstance(body["flags"], list)
    # Liu & Evett, Soil Properties (worked example): 20.9 % and 21.5 %, PL 21.2 %
    assert body["results"]["plastic_limit"] == pytest.approx(21.2, abs=0.05)


def test_computes_the_atterberg_set_at_full_precision(app_client: TestClient) -> None:
    body = app_client.post("/api/v1/calculations", json={"method": "atterberg", "readings": ATTERBERG}).json()
    results = body["results"]
    # Das, Principles of Geotechnical Engineering (problem set): least squares in log10 N gives LL 39.67
    assert results["liquid_limit"] == pytest.approx(39.67, abs=0.01)
    # ASTM D4318 cl. 3.1.x: PI = LL - PL from the reported whole numbers, 40 - 21
    assert results["plasticity_index"] == 19
    # ASTM D2487 Fig. 4: LL 40, PI 19 is above the A-line (14.6) with PI > 7
    assert results["uscs_symbol"] == "CL"
    # LI = (w - PL) / PI = (30.0 - 21) / 19 (definition; PI from the reported limits)
    assert results["liquidity_index"] == pytest.approx(9 / 19, abs=1e-3)


@pytest.mark.parametrize("case", sorted(BAD_ATTERBERG))
def test_refuses_bad_readings_field_by_field(app_client: TestClient, case: str) -> None:
    readings, path, word = BAD_ATTERBERG[case]
    reply = app_client.post("/api/v1/calculations", json={"method": "atterberg", "readings": readings})
    assert reply.status_code == 422
    errors = reply.json()["detail"]
    hit = [e for e in errors if e["loc"] == ["readings", *path]]
    assert hit, f"no error at {path}: {errors}"
    assert word in hit[0]["msg"]


def test_names_the_trial_and_both_masses_when_dry_exceeds_wet(app_client: TestClient) -> None:
    readings, _, _ = BAD_ATTERBERG["dry mass above wet mass"]
    errors = app_client.post(
        "/api/v1/calculations", json={"method": "atterberg", "readings": readings}
    ).json()["detail"]
    message = next(e["msg"] for e in errors if e["loc"][-1] == "dry_tare_g")
    assert "trial 2" in message and "38.5 g" in message and "38.16 g" in message


def test_refuses_an_unknown_method(app_client: TestClient) -> None:
    reply = app_client.post("/api/v1/calculations", json={"method": "no-such-test", "readings": {}})
    assert reply.status_code == 422
    assert reply.json()["detail"][0]["loc"] == ["method"]


def test_refuses_a_body_that_is_not_the_contract(app_client: TestClient) -> None:
    assert app_client.post("/api/v1/calculations", json={"readings": {}}).status_code == 422
    assert (
        app_client.post("/api/v1/calculations", json={"method": "atterberg", "readings": [1, 2]}).status_code
        == 422
    )


def test_lists_the_methods_with_their_standards(app_client: TestClient) -> None:
    methods = {m["id"]: m for m in app_client.get("/api/v1/methods").json()}
    assert {"water-content", "ll-cup-multipoint", "plastic-limit", "atterberg"} <= set(methods)
    assert "D4318" in methods["ll-cup-multipoint"]["standard"]


def test_documents_the_contract_in_the_openapi_schema(app_client: TestClient) -> None:
    schema = app_client.get("/openapi.json").json()
    assert "/api/v1/calculations" in schema["paths"]
    assert not any(p.startswith("/tests") or p.startswith("/review") for p in schema["paths"])
