"""Density and viscosity of water against temperature, checked against IAPWS and `iapws`."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st
from iapws import IAPWS95
from iapws._iapws import _Viscosity

from server.engine.water_properties import viscosity_iapws2008, water_density, water_viscosity

ATMOSPHERE_MPA = 0.101325
TEMPERATURES_C = [10.0 + 0.5 * i for i in range(41)]  # 10 to 30 °C, the range of a sedimentation room


@pytest.fixture(scope="module")
def iapws95_at_one_atmosphere() -> dict[float, IAPWS95]:
    return {t: IAPWS95(T=t + 273.15, P=ATMOSPHERE_MPA) for t in TEMPERATURES_C}


def test_viscosity_at_20_c_is_1_0016_mpa_s() -> None:
    # IAPWS 2008 viscosity of liquid water at 20 °C and 0.1 MPa: 1.0016 mPa·s (REFERENCES.md, computed
    # with the `iapws` package; 1001.6 µPa·s in the IAPWS 2008 release's tables, from memory).
    assert water_viscosity(20.0) * 1000.0 == pytest.approx(1.0016, abs=5e-5)


@pytest.mark.parametrize(
    ("temperature_k", "density", "micro_pa_s"),
    [
        (298.15, 998.0, 889.735100),  # IAPWS 2008 Table 4; also the `iapws` docstring of _Viscosity
        (298.15, 1200.0, 1437.649467),  # IAPWS 2008 Table 4 (from memory)
        (373.15, 1000.0, 307.883622),  # IAPWS 2008 Table 4 (from memory)
        (433.15, 1.0, 14.538324),  # IAPWS 2008 Table 4 (from memory)
        (873.15, 600.0, 77.430195),  # IAPWS 2008 Table 4; also the `iapws` docstring of _Viscosity
        (1173.15, 400.0, 64.154608),  # IAPWS 2008 Table 4 (from memory)
    ],
)
def test_viscosity_matches_the_iapws_2008_verification_table(
    temperature_k: float, density: float, micro_pa_s: float
) -> None:
    assert viscosity_iapws2008(temperature_k, density) * 1e6 == pytest.approx(micro_pa_s, abs=2e-6)


@pytest.mark.parametrize("temperature_k", [283.15, 293.15, 303.15, 373.15, 873.15])
@pytest.mark.parametrize("density", [1.0, 400.0, 998.0, 1100.0])
def test_viscosity_formula_agrees_with_the_iapws_package(temperature_k: float, density: float) -> None:
    # `iapws` _Viscosity implements the same IAPWS 2008 equations 10-12 (without critical enhancement
    # when no phase data are passed).
    assert viscosity_iapws2008(temperature_k, density) == pytest.approx(
        _Viscosity(density, temperature_k), rel=1e-12
    )


@pytest.mark.parametrize("temperature_c", TEMPERATURES_C)
def test_density_agrees_with_iapws95_to_one_ppm(
    temperature_c: float, iapws95_at_one_atmosphere: dict[float, IAPWS95]
) -> None:
    # Tanaka et al. (2001) against IAPWS-95 at 0.101325 MPa via `iapws`: within about 1 ppm over 0-40 °C.
    assert water_density(temperature_c) == pytest.approx(
        iapws95_at_one_atmosphere[temperature_c].rho, rel=1.5e-6
    )


@pytest.mark.parametrize("temperature_c", TEMPERATURES_C)
def test_viscosity_agrees_with_iapws_at_one_atmosphere(
    temperature_c: float, iapws95_at_one_atmosphere: dict[float, IAPWS95]
) -> None:
    # `iapws` IAPWS95(T, P).mu: IAPWS 2008 viscosity at the IAPWS-95 density.
    assert water_viscosity(temperature_c) == pytest.approx(
        iapws95_at_one_atmosphere[temperature_c].mu, rel=2e-6
    )


def test_density_is_greatest_near_4_c() -> None:
    # Tanaka et al. (2001) eq. 1: the maximum, a5 = 999.974950 kg/m³, lies at t = -a1 = 3.983035 °C.
    assert water_density(3.983035) == pytest.approx(999.974950, abs=1e-9)
    assert water_density(3.983035) > water_density(3.5)
    assert water_density(3.983035) > water_density(4.5)


def test_density_at_20_c_matches_the_tanaka_table() -> None:
    # Tanaka et al. (2001) Table 1 at 20 °C: 998.2067 kg/m³ (from memory; IAPWS-95 gives 998.2072).
    assert water_density(20.0) == pytest.approx(998.2067, abs=1e-4)


@pytest.mark.parametrize("temperature_c", [-0.5, 40.5, 95.0])
def test_refuses_a_temperature_outside_the_density_formula(temperature_c: float) -> None:
    with pytest.raises(ValueError, match="outside 0 to 40 °C"):
        water_density(temperature_c)
    with pytest.raises(ValueError, match="outside 0 to 40 °C"):
        water_viscosity(temperature_c)


@given(st.floats(min_value=0.0, max_value=39.9), st.floats(min_value=0.01, max_value=5.0))
def test_viscosity_falls_as_water_warms(t: float, rise: float) -> None:
    # Liquid water at 1 atm gets less viscous with temperature over 0-40 °C (common practice).
    warmer = min(t + rise, 40.0)
    assert water_viscosity(warmer) < water_viscosity(t)
