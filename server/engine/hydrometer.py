"""Sedimentation (hydrometer) analysis: Stokes diameter and percent finer of each reading.

What is implemented, and from where (clause numbers of ASTM D422, withdrawn in 2016, are
cited from memory):

- Effective depth of the 152H hydrometer, L = 16.3 - 0.1641 R (cm) with R the reading
  corrected for the meniscus only (ASTM D422-63(2007) cl. 14.4 and Table 2; the line itself is
  printed in textbooks, e.g. Das, Principles of Geotechnical Engineering). We keep lengths in
  mm: L = 163.0 - 1.641 R. A lab may enter the calibration line of its own instrument.
- Particle diameter from Stokes' law, D = sqrt(18 eta L / ((Gs - 1) rho_w g t)) (ASTM D422
  cl. 14.4 in the form D = K sqrt(L/t); ASTM D7928 and ISO 17892-4:2016 write Stokes' law
  directly). eta and rho_w are computed for the temperature of each reading
  (``water_properties``) instead of being read from a printed table.
- Percent finer of the specimen, P = a (R - Cc) / W x 100 with a = 1.65 Gs / (2.65 (Gs - 1)),
  the specific-gravity correction of a hydrometer graduated for Gs = 2.65 (ASTM D422 cl. 14.3
  and Table 1 footnote; from memory). Cc is the composite correction: the reading of the
  152H in a control cylinder of the same dispersant solution at the same temperature, read at
  the top of the meniscus, so that it covers dispersant, temperature and meniscus together
  (composite correction as in Head, Manual of Soil Laboratory Testing, vol. 1, 3rd ed. 2006,
  section on sedimentation; from memory).
- The composite correction comes per reading, or from control-cylinder ("zero") readings at
  one or more temperatures, interpolated linearly in temperature (a calibration against
  temperature, as in Head 2006; from memory).
- The result relates to the specimen, which ASTM D7928-21 (cl. 3.2.3, "sedimentation
  sample") takes from the material passing a separation sieve (2.0 mm by default). Percent finer of the whole
  sample is the specimen's percent times the percent of the sample passing that sieve.

ASTM D7928 computes percent finer from mass-per-volume readings with its own equations;
we do not claim its equations, only its vocabulary (separation sieve, sedimentation
specimen) and the range of the 152H scale, -5 to 60 g/L (ASTM E100, from memory).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from server.engine.water_properties import water_density, water_viscosity

STANDARD_GRAVITY = 9.80665  # m/s², CGPM 1901 (the conventional value; local g differs < 0.3 %)


@dataclass(frozen=True, slots=True)
class Hydrometer:
    """A hydrometer's effective-depth calibration and the range of its scale (g/L)."""

    type: str
    depth_at_zero_mm: float
    depth_per_unit_mm: float
    min_reading: float
    max_reading: float

    def effective_depth_mm(self, reading_meniscus_corrected: float) -> float:
        """L = a - b R, R corrected for the meniscus only (ASTM D422 cl. 14.4, Table 2)."""
        return self.depth_at_zero_mm - self.depth_per_unit_mm * reading_meniscus_corrected


# ASTM 152H (ASTM E100): L = 16.3 - 0.1641 R cm (ASTM D422 Table 2), scale -5 to 60 g/L.
HYDROMETER_152H = Hydrometer("152H", 163.0, 1.641, -5.0, 60.0)
HYDROMETERS: dict[str, Hydrometer] = {"152H": HYDROMETER_152H}


def gs_factor(gs: float) -> float:
    """a = 1.65 Gs / (2.65 (Gs - 1)): the 152H is graduated for Gs = 2.65 (ASTM D422 Table 1 note)."""
    return 1.65 * gs / (2.65 * (gs - 1.0))


def stokes_diameter_mm(depth_mm: float, minutes: float, temperature_c: float, gs: float) -> float:
    """Diameter (mm) of the largest particle still in suspension at depth L after time t.

    Stokes' law, D = sqrt(18 eta L / ((Gs - 1) rho_w g t)) (ASTM D422 cl. 14.4; ISO 17892-4),
    in SI units inside: L in m, t in s, eta in Pa·s (IAPWS 2008), rho_w in kg/m³.
    """
    eta = water_viscosity(temperature_c)
    rho = water_density(temperature_c)
    d_m = math.sqrt(18.0 * eta * (depth_mm / 1000.0)
                    / ((gs - 1.0) * rho * STANDARD_GRAVITY * minutes * 60.0))
    return d_m * 1000.0


def percent_finer(reading: float, composite_correction: float, dry_mass_g: float, gs: float) -> float:
    """Percent of the specimen finer than the Stokes diameter, a (R - Cc) / W x 100 (ASTM D422 cl. 14.3)."""
    return gs_factor(gs) * (reading - composite_correction) / dry_mass_g * 100.0


def composite_from_zero_readings(zero: Sequence[tuple[float, float]], temperature_c: float) -> float:
    """Composite correction at a temperature from control-cylinder readings (temperature, reading).

    One zero reading applies at every temperature; two or more are joined by straight lines in
    temperature and the end lines carried beyond (the caller flags that). Head (2006), from memory.
    """
    pts = sorted(zero)
    if len(pts) == 1:
        return pts[0][1]
    if temperature_c <= pts[0][0]:
        (t0, c0), (t1, c1) = pts[0], pts[1]
    elif temperature_c >= pts[-1][0]:
        (t0, c0), (t1, c1) = pts[-2], pts[-1]
    else:
        i = next(k for k in range(1, len(pts)) if pts[k][0] >= temperature_c)
        (t0, c0), (t1, c1) = pts[i - 1], pts[i]
    return c0 + (c1 - c0) * (temperature_c - t0) / (t1 - t0)


@dataclass(frozen=True, slots=True)
class Point:
    """One evaluated reading: time, diameter, percent finer (of the whole sample) and its parts."""

    minutes: float
    diameter_mm: float
    percent_finer: float
    specimen_percent: float
    reading: float
    composite_correction: float
    depth_mm: float
    correction_from_zero_readings: bool


def u_interpolated_percent(
    target_mm: float,
    lo: Point,
    hi: Point,
    *,
    scale: float,
    depth_per_unit_mm: float,
    dry_mass_g: float,
    u_reading: float,
    u_mass_g: float,
    common_correction: bool,
) -> float:
    """Standard uncertainty of percent finer read at ``target_mm`` between two readings.

    GUM first-order propagation (JCGM 100:2008 cl. 5.1.2, eq. 10), analytic sensitivities,
    uncorrelated inputs except as noted. P* = (1 - s) P_lo + s P_hi with s = (x* - x_lo) /
    (x_hi - x_lo), x = ln D. P_i = K (R_i - C_i) with K = ``scale`` (a x separation passing /
    W, in % per g/L); x_i = ln sqrt(L_i) + const, L_i = a - b (R_i + Cm). Inputs: the two
    readings and the meniscus correction (u of the hydrometer scale resolution), the composite
    corrections (one common input when taken from the zero readings, two independent inputs
    when typed per reading), and the dry mass W (balance). Gs, temperature, time and the
    separation-sieve percentage are taken as exact: their effect on a clay fraction is small
    beside the scale resolution, a choice stated here rather than hidden.
    """
    x_lo, x_hi = math.log(lo.diameter_mm), math.log(hi.diameter_mm)
    span = x_hi - x_lo
    s = (math.log(target_mm) - x_lo) / span
    dp = hi.percent_finer - lo.percent_finer
    d_xlo = dp * (s - 1.0) / span
    d_xhi = -dp * s / span
    dx_lo = -depth_per_unit_mm / (2.0 * lo.depth_mm)  # d x_lo / d R_lo (and / d Cm)
    dx_hi = -depth_per_unit_mm / (2.0 * hi.depth_mm)
    c_r_lo = (1.0 - s) * scale + d_xlo * dx_lo
    c_r_hi = s * scale + d_xhi * dx_hi
    c_cm = d_xlo * dx_lo + d_xhi * dx_hi
    p_star = (1.0 - s) * lo.percent_finer + s * hi.percent_finer
    c_w = -p_star / dry_mass_g
    if common_correction:
        corr = scale * scale
    else:
        corr = ((1.0 - s) * scale) ** 2 + (s * scale) ** 2
    var = (c_r_lo * c_r_lo + c_r_hi * c_r_hi + c_cm * c_cm + corr) * u_reading * u_reading
    var += c_w * c_w * u_mass_g * u_mass_g
    return math.sqrt(var)
