"""Undrained shear strength from the laboratory vane, the fall cone and unconfined compression.

- Laboratory vane: the soil shears on the cylinder swept by the blades, sides and both ends,
  with a uniform stress, so T = cu pi D^2 (H/2 + D/6), and cu = T / [pi D^2 (H/2 + D/6)]
  (ASTM D4648/D4648M-16, calculation; for H = 2D it is 6T / (7 pi D^3)).
- Fall cone: cu = c m g / i^2, with m the cone mass, i the penetration and c a cone factor
  that depends on the cone angle and the soil (Hansbo 1957, Swedish Geotechnical Institute
  Proceedings 14; ISO 17892-6:2017). Defaults 0.8 for the 30° cone and 0.27 for the 60° cone
  (from memory; published c for 30° ranges 0.5-1.33, so it stays a parameter).
- Unconfined compression: axial strain eps = dH / H0, area A = A0 / (1 - eps) (a specimen
  that keeps its volume), stress sigma = P / A; qu is the peak stress, or the stress at 15 %
  strain if that is reached first; cu = qu / 2 (ASTM D2166/D2166M-16, calculation).
- Sensitivity St = cu undisturbed / cu remoulded (Skempton & Northey 1952).

Uncertainties follow the GUM first-order law (JCGM 100:2008 cl. 5.1.2), written as relative
uncertainties because each strength is a product of powers of its inputs (JCGM 100:2008
cl. 5.1.6).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

STANDARD_GRAVITY = 9.80665  # m/s², CGPM 1901
FAILURE_STRAIN_PCT = 15.0  # ASTM D2166/D2166M-16: qu at 15 % strain if no peak comes first

# Hansbo (1957) cone factors by cone apex angle in degrees (from memory).
DEFAULT_CONE_FACTOR: dict[int, float] = {30: 0.8, 60: 0.27}


# -- laboratory vane -----------------------------------------------------------------------------
def vane_constant_m3(diameter_mm: float, height_mm: float) -> float:
    """K = pi D^2 (H/2 + D/6) in m³, so that cu = T / K (ASTM D4648)."""
    d = diameter_mm / 1000.0
    h = height_mm / 1000.0
    return math.pi * d * d * (h / 2.0 + d / 6.0)


def vane_strength_kpa(torque_nm: float, diameter_mm: float, height_mm: float) -> float:
    """Undrained shear strength from the peak vane torque, cu = T / [pi D^2 (H/2 + D/6)], in kPa."""
    return torque_nm / vane_constant_m3(diameter_mm, height_mm) / 1000.0


def u_rel_vane(torque_nm: float, u_torque_nm: float, diameter_mm: float, height_mm: float,
               u_length_mm: float) -> float:
    """Relative standard uncertainty of the vane cu (GUM first order).

    d ln cu / d T = 1/T; d ln cu / d D = -(D H + D^2/2) / (D^2 (H/2 + D/6)); d ln cu / d H =
    -(D^2/2) / (D^2 (H/2 + D/6)), from K = pi D^2 (H/2 + D/6).
    """
    d, h = diameter_mm, height_mm
    k = d * d * (h / 2.0 + d / 6.0)
    c_d = (d * h + d * d / 2.0) / k
    c_h = (d * d / 2.0) / k
    return math.sqrt((u_torque_nm / torque_nm) ** 2 + (c_d * u_length_mm) ** 2 + (c_h * u_length_mm) ** 2)


# -- fall cone -----------------------------------------------------------------------------------
def fall_cone_strength_kpa(cone_mass_g: float, penetration_mm: float, cone_factor: float) -> float:
    """Undrained shear strength cu = c m g / i^2 in kPa (Hansbo 1957; ISO 17892-6)."""
    i = penetration_mm / 1000.0
    return cone_factor * (cone_mass_g / 1000.0) * STANDARD_GRAVITY / (i * i) / 1000.0


def u_mean_penetration(values: Sequence[float], u_reading_mm: float) -> float:
    """Standard uncertainty of a mean penetration: resolution (Type B) and scatter (Type A).

    u^2 = u_res^2 / n + s^2 / n, s the sample standard deviation of the n drops (JCGM 100:2008
    cl. 4.2.3 for the Type A part; the resolution part of each drop is independent).
    """
    n = len(values)
    var = u_reading_mm * u_reading_mm / n
    if n >= 2:
        m = sum(values) / n
        s2 = sum((v - m) ** 2 for v in values) / (n - 1)
        var += s2 / n
    return math.sqrt(var)


# -- unconfined compression ----------------------------------------------------------------------
def stress_strain(diameter_mm: float, height_mm: float,
                  readings: Sequence[tuple[float, float]]) -> list[tuple[float, float]]:
    """(strain %, stress kPa) for each (deformation mm, load N), with A = A0 / (1 - eps).

    ASTM D2166/D2166M-16: sigma = P / A, A = A0 / (1 - eps), eps = dH / H0. The caller
    guarantees each deformation is below the height.
    """
    a0 = math.pi * (diameter_mm / 1000.0) ** 2 / 4.0
    out: list[tuple[float, float]] = []
    for deformation, load in readings:
        eps = deformation / height_mm
        out.append((100.0 * eps, load * (1.0 - eps) / a0 / 1000.0))
    return out


@dataclass(frozen=True, slots=True)
class Failure:
    """Where the specimen failed by the D2166 rule, and which rule gave it.

    ``criterion`` is "peak" (a maximum followed by a lower stress), "strain-15" (still rising
    at 15 % strain: the stress at 15 % is taken) or "end-of-test" (stopped before either).
    ``index`` is the reading at failure, or for "strain-15" the first reading at or past 15 %.
    """

    stress_kpa: float
    strain_pct: float
    criterion: str
    index: int


def failure(curve: Sequence[tuple[float, float]]) -> Failure | None:
    """qu by ASTM D2166: peak stress, or stress at 15 % strain, whichever comes first.

    None when no reading lies at or below 15 % strain (nothing to read qu from).
    """
    within = [i for i, (e, _) in enumerate(curve) if e <= FAILURE_STRAIN_PCT]
    if not within:
        return None
    i_max = max(within, key=lambda i: (curve[i][1], -i))
    s_max = curve[i_max][1]
    if any(s < s_max for _, s in curve[i_max + 1:]):
        return Failure(s_max, curve[i_max][0], "peak", i_max)
    if curve[-1][0] >= FAILURE_STRAIN_PCT:
        k = next(i for i, (e, _) in enumerate(curve) if e >= FAILURE_STRAIN_PCT)
        e1, s1 = curve[k]
        if e1 == FAILURE_STRAIN_PCT or k == 0:
            return Failure(s1, FAILURE_STRAIN_PCT, "strain-15", k)
        e0, s0 = curve[k - 1]
        s15 = s0 + (s1 - s0) * (FAILURE_STRAIN_PCT - e0) / (e1 - e0)
        return Failure(s15, FAILURE_STRAIN_PCT, "strain-15", k)
    return Failure(s_max, curve[i_max][0], "end-of-test", i_max)


def u_rel_unconfined(load_n: float, u_load_n: float, diameter_mm: float, height_mm: float,
                     deformation_mm: float, u_length_mm: float) -> float:
    """Relative standard uncertainty of qu = P (1 - dH/H0) / (pi D^2 / 4) (GUM first order).

    d ln qu / d P = 1/P; d ln qu / d D = -2/D; d ln qu / d dH = -1/(H0 - dH);
    d ln qu / d H0 = dH / (H0 (H0 - dH)). Load and lengths independent.
    """
    rest = height_mm - deformation_mm
    return math.sqrt((u_load_n / load_n) ** 2 + (2.0 * u_length_mm / diameter_mm) ** 2
                     + (u_length_mm / rest) ** 2 + (deformation_mm * u_length_mm / (height_mm * rest)) ** 2)


# -- sensitivity ---------------------------------------------------------------------------------
def sensitivity(cu_undisturbed_kpa: float, cu_remoulded_kpa: float) -> float:
    """St = cu undisturbed / cu remoulded (Skempton & Northey 1952)."""
    return cu_undisturbed_kpa / cu_remoulded_kpa
