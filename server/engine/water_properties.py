"""Density and viscosity of liquid water at atmospheric pressure, against temperature.

A sedimentation (hydrometer) analysis needs both at the temperature of each reading: Stokes'
law gives the particle diameter from the settling velocity through the dynamic viscosity and
the density of the water (ASTM D7928; ISO 17892-4). Older practice read them from a printed
table (ASTM D422 Table 2, via the constant K); we compute them from published formulations so
that any temperature the thermometer shows gets its own value.

- Density: Tanaka, Girard, Davis, Peuto & Bignell (2001), "Recommended table for the density
  of water between 0 °C and 40 °C based on recent experimental reports", Metrologia 38,
  301-309, eq. 1: air-free water of standard isotopic composition at 101.325 kPa, valid from
  0 °C to 40 °C. Over that range it agrees with IAPWS-95 at 0.101325 MPa to about 1 ppm
  (checked in the tests against the `iapws` package).
- Viscosity: IAPWS (2008), "Release on the IAPWS Formulation 2008 for the Viscosity of
  Ordinary Water Substance" (Huber, Perkins, Laesecke, Friend, Sengers, Assael, Metaxa,
  Vogel, Mares & Miyagawa, J. Phys. Chem. Ref. Data 38 (2009) 101-125), eqs. 10-12, with the
  critical enhancement factor set to 1 as the release allows away from the critical point,
  evaluated at the density above. 1.0016 mPa·s at 20 °C.

This module is pure Python on purpose: the engine imports only the standard library.
"""

from __future__ import annotations

import math
from functools import lru_cache

MIN_TEMPERATURE_C = 0.0
MAX_TEMPERATURE_C = 40.0  # the range of the Tanaka et al. (2001) density formula

# Tanaka et al. (2001) eq. 1 coefficients (a1..a4 in °C or °C², a5 in kg/m³).
_A1 = -3.983035
_A2 = 301.797
_A3 = 522528.9
_A4 = 69.34881
_A5 = 999.974950

# IAPWS 2008 reference constants: critical temperature (K), critical density (kg/m³), and the
# reference viscosity 1 µPa·s in which the reduced viscosity is expressed.
_T_STAR = 647.096
_RHO_STAR = 322.0
_MU_STAR = 1.0e-6

# IAPWS 2008 Table 1 (eq. 11): coefficients H_i of the dilute-gas viscosity mu_0.
_H0 = (1.67752, 2.20462, 0.6366564, -0.241605)

# IAPWS 2008 Table 2 (eq. 12): the non-zero coefficients H_ij of mu_1, grouped by i; each row
# lists (j, H_ij).
_H1: tuple[tuple[tuple[int, float], ...], ...] = (
    ((0, 5.20094e-1), (1, 2.22531e-1), (2, -2.81378e-1), (3, 1.61913e-1), (4, -3.25372e-2)),
    ((0, 8.50895e-2), (1, 9.99115e-1), (2, -9.06851e-1), (3, 2.57399e-1)),
    ((0, -1.08374), (1, 1.88797), (2, -7.72479e-1)),
    ((0, -2.89555e-1), (1, 1.26613), (2, -4.89837e-1), (4, 6.98452e-2), (6, -4.35673e-3)),
    ((2, -2.57040e-1), (5, 8.72102e-3)),
    ((1, 1.20573e-1), (6, -5.93264e-4)),
)


def _check_range(temperature_c: float) -> None:
    if not MIN_TEMPERATURE_C <= temperature_c <= MAX_TEMPERATURE_C:
        raise ValueError(
            f"water temperature {temperature_c:g} °C is outside {MIN_TEMPERATURE_C:g} to "
            f"{MAX_TEMPERATURE_C:g} °C, the range of the density formula"
        )


@lru_cache(maxsize=512)
def water_density(temperature_c: float) -> float:
    """Density of air-free water at 101.325 kPa in kg/m³ (Tanaka et al. 2001, eq. 1).

    rho = a5 [1 - (t + a1)^2 (t + a2) / (a3 (t + a4))], t in °C. Cached because a test's
    readings share a handful of temperatures.
    """
    _check_range(temperature_c)
    t = temperature_c
    return _A5 * (1.0 - (t + _A1) ** 2 * (t + _A2) / (_A3 * (t + _A4)))


def viscosity_iapws2008(temperature_k: float, density_kg_m3: float) -> float:
    """Dynamic viscosity in Pa·s at a temperature (K) and density (kg/m³), IAPWS 2008.

    mu = mu* mu_0(T) mu_1(T, rho) with T and rho reduced by the critical constants:
    mu_0 = 100 sqrt(T) / sum_i H_i / T^i (eq. 11), mu_1 = exp[rho sum_i (1/T - 1)^i
    sum_j H_ij (rho - 1)^j] (eq. 12); the critical factor mu_2 is taken as 1 (eq. 10 note),
    as in the release's own verification values (its Table 4).
    """
    t_r = temperature_k / _T_STAR
    rho_r = density_kg_m3 / _RHO_STAR
    mu0 = 100.0 * math.sqrt(t_r) / sum(h / t_r**i for i, h in enumerate(_H0))
    inv_t = 1.0 / t_r - 1.0
    dr = rho_r - 1.0
    total = 0.0
    for i, row in enumerate(_H1):
        total += inv_t**i * sum(h * dr**j for j, h in row)
    mu1 = math.exp(rho_r * total)
    return _MU_STAR * mu0 * mu1


@lru_cache(maxsize=512)
def water_viscosity(temperature_c: float) -> float:
    """Dynamic viscosity of liquid water at atmospheric pressure in Pa·s (IAPWS 2008).

    Evaluated at the density of ``water_density`` at the same temperature; 1.0016 mPa·s at
    20 °C. Cached because a test's readings share a handful of temperatures.
    """
    return viscosity_iapws2008(temperature_c + 273.15, water_density(temperature_c))
