"""The ``particle-density`` method: particle density and specific gravity by the small pycnometer.

Readings (masses g, temperatures °C; soil oven-dried before it goes into the pycnometer)::

    {"determinations": [{"pycnometer_g": 30.12, "pycnometer_soil_g": 40.15,
                         "pycnometer_soil_water_g": 86.45, "pycnometer_water_g": 80.17,
                         "temperature_c": 21.0}, ...],
     "balance": {"resolution_g": 0.001}}

Formula, with m1 the empty pycnometer, m2 with the dry soil, m3 with soil and water filled to
the mark, m4 filled with water only, all at the temperature T of the determination:

- ms = m2 - m1 (dry soil), Gt = ms / (ms + m4 - m3): the specific gravity of the solids at T,
  the mass of soil over the mass of the water it displaces (ASTM D854-14 eq. 1 as
  Gt = Ms / (M_pw,t - (M_pws,t - Ms)); BS 1377-2:1990 cl. 8.3, which writes the same ratio as
  rho_s = (m2 - m1) / ((m4 - m1) - (m3 - m2)); ISO 17892-3:2015).
- particle density rho_s = Gt rho_w(T) in Mg/m³, with rho_w(T) of air-free water from
  ``water_properties`` (the module the hydrometer uses; Tanaka et al. 2001, within about 1 ppm of
  IAPWS-95): the displaced water is weighed at T, so its volume is its mass over rho_w(T).
  BS 1377-2 takes the density of water as 1 Mg/m³; the difference is 0.1 % to 0.3 % at room
  temperature, and we use the water's actual density.
- specific gravity at 20 °C, G20 = Gt rho_w(T) / rho_w(20 °C) (ASTM D854-14 eq. 2 with the
  temperature coefficient K = rho_w(T) / rho_w(20 °C) computed instead of read from its
  Table 2).

Results: ``particle_density_mg_m3`` (the mean of the determinations), ``specific_gravity`` (the
mean of each determination's G20), ``particle_density_determinations`` (each determination's
rho_s in input order, None where refused), and ``uncertainty`` of the first two as {"u", "U",
"k": 2}: the GUM first-order law over the four masses of each determination (balance resolution
and calibration, ``uncertainty.Balance``), then the uncertainty of the mean; the water density's
own uncertainty (ppm) is neglected.

Refused: a temperature outside 0-40 °C (the water-density formula's range), no dry soil
(m2 not above m1), a pycnometer with water not heavier than the empty one (m4 <= m1), soil and
water not heavier than the soil alone (m3 <= m2), soil and water not heavier than water alone
(m3 <= m4: solids lighter than water) and soil that displaces no water (m3 >= m4 + ms).

Flags: ``particle-density-spread`` (warning) when the determinations differ by more than
0.03 Mg/m³, the repeatability BS 1377-2:1990 cl. 8.3 asks for before a mean is reported (from
memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from server.engine.contract import Outcome, method
from server.engine.readings import Readings, fmt
from server.engine.uncertainty import Balance, expanded, read_balance, u_mean
from server.engine.water_content import aligned_items
from server.engine.water_properties import MAX_TEMPERATURE_C, MIN_TEMPERATURE_C, water_density

SPREAD_LIMIT_MG_M3 = 0.03
"""Largest difference between particle-density determinations before they are repeated
(BS 1377-2:1990 cl. 8.3, from memory)."""

REFERENCE_TEMPERATURE_C = 20.0  # ASTM D854-14: specific gravity is reported at 20 °C


@dataclass(frozen=True, slots=True)
class Pycnometer:
    """One determination: the four weighings (g) and the water temperature (°C)."""

    empty_g: float
    soil_g: float
    soil_water_g: float
    water_g: float
    temperature_c: float

    @property
    def specific_gravity_at_t(self) -> float:
        """Gt = ms / (ms + m4 - m3) (ASTM D854-14 eq. 1)."""
        ms = self.soil_g - self.empty_g
        return ms / (ms + self.water_g - self.soil_water_g)

    @property
    def particle_density_mg_m3(self) -> float:
        """rho_s = Gt rho_w(T), rho_w in Mg/m³ (BS 1377-2:1990 cl. 8.3 with the water's density at T)."""
        return self.specific_gravity_at_t * water_density(self.temperature_c) / 1000.0

    def u_specific_gravity_at_t(self, u_mass_g: float) -> float:
        """u(Gt) from four independent weighings: dGt/dm2 = (m4 - m3)/D^2 = -dGt/dm1 and
        dGt/dm3 = ms/D^2 = -dGt/dm4, with D = ms + m4 - m3 (JCGM 100:2008 eq. 10)."""
        ms = self.soil_g - self.empty_g
        d = ms + self.water_g - self.soil_water_g
        c_soil = (self.water_g - self.soil_water_g) / (d * d)
        c_water = ms / (d * d)
        return u_mass_g * math.sqrt(2.0 * c_soil * c_soil + 2.0 * c_water * c_water)


def specific_gravity_20c(particle_density_mg_m3: float) -> float:
    """G20 = rho_s / rho_w(20 °C) = Gt rho_w(T) / rho_w(20 °C) (ASTM D854-14 eq. 2)."""
    return particle_density_mg_m3 * 1000.0 / water_density(REFERENCE_TEMPERATURE_C)


def _mass(r: Readings, key: str, name: str) -> float | None:
    return r.number(key, name=name, unit="g", minimum=0.0)


def read_pycnometer(r: Readings) -> Pycnometer | None:
    """One determination, each impossible weighing refused at its field."""
    m1 = _mass(r, "pycnometer_g", "pycnometer")
    m2 = _mass(r, "pycnometer_soil_g", "pycnometer and soil")
    m3 = _mass(r, "pycnometer_soil_water_g", "pycnometer, soil and water")
    m4 = _mass(r, "pycnometer_water_g", "pycnometer and water")
    t = r.number(
        "temperature_c",
        name="water temperature",
        unit="°C",
        minimum=MIN_TEMPERATURE_C,
        maximum=MAX_TEMPERATURE_C,
    )
    if m1 is None or m2 is None or m3 is None or m4 is None or t is None:
        return None
    ok = True
    if m2 <= m1:
        r.refuse(
            "pycnometer_soil_g",
            f"pycnometer and soil ({fmt(m2, 'g')}) is not above the pycnometer "
            f"({fmt(m1, 'g')}): there is no dry soil",
        )
        ok = False
    if m4 <= m1:
        r.refuse(
            "pycnometer_water_g",
            f"pycnometer and water ({fmt(m4, 'g')}) is not above the pycnometer ({fmt(m1, 'g')})",
        )
        ok = False
    if not ok:
        return None
    if m3 <= m2:
        r.refuse(
            "pycnometer_soil_water_g",
            f"pycnometer, soil and water ({fmt(m3, 'g')}) is not above pycnometer and soil ({fmt(m2, 'g')})",
        )
        return None
    if m3 <= m4:
        r.refuse(
            "pycnometer_soil_water_g",
            f"pycnometer, soil and water ({fmt(m3, 'g')}) is not above "
            f"pycnometer and water ({fmt(m4, 'g')}): the solids would be "
            "lighter than water",
        )
        return None
    if m3 >= m4 + (m2 - m1):
        r.refuse(
            "pycnometer_soil_water_g",
            f"pycnometer, soil and water ({fmt(m3, 'g')}) is not below "
            f"pycnometer and water plus the soil ({fmt(m4 + m2 - m1, 'g')}): "
            "the soil would displace no water",
        )
        return None
    return Pycnometer(m1, m2, m3, m4, t)


@method(
    "particle-density",
    title="Particle density (small pycnometer)",
    standard="ASTM D854-14; BS 1377-2:1990 cl. 8.3; ISO 17892-3:2015",
)
def particle_density_method(r: Readings, out: Outcome) -> None:
    """Particle density and specific gravity at 20 °C, the mean of the determinations."""
    balance: Balance = read_balance(r)
    rows = [
        None if item is None else read_pycnometer(item)
        for item in aligned_items(r, "determinations", noun="determination", min_items=1)
    ]
    out.results["particle_density_determinations"] = [
        None if p is None else p.particle_density_mg_m3 for p in rows
    ]
    if r.has_errors_under("determinations") or not rows:
        return
    good = [p for p in rows if p is not None]
    densities = [p.particle_density_mg_m3 for p in good]
    gravities = [specific_gravity_20c(rho) for rho in densities]
    u_rho = [
        p.u_specific_gravity_at_t(balance.u_mass) * water_density(p.temperature_c) / 1000.0 for p in good
    ]
    rho_s = sum(densities) / len(densities)
    out.results["particle_density_mg_m3"] = rho_s
    out.results["specific_gravity"] = sum(gravities) / len(gravities)
    u = u_mean(u_rho)
    unc = out.results.setdefault("uncertainty", {})
    unc["particle_density_mg_m3"] = expanded(u)
    unc["specific_gravity"] = expanded(specific_gravity_20c(u))
    spread = max(densities) - min(densities)
    if spread > SPREAD_LIMIT_MG_M3:
        out.flag(
            "particle-density-spread",
            "warning",
            f"the determinations differ by {spread:.3f} Mg/m³, more than {SPREAD_LIMIT_MG_M3} Mg/m³ "
            "(BS 1377-2 cl. 8.3): repeat the test",
        )
