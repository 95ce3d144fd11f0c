"""Relations between the densities, water content and voids of a soil (the phase relations).

Densities are in Mg/m³, water contents in per cent of the dry mass, and the density of water
is taken as 1.00 Mg/m³ wherever it turns a water content into a volume (DESIGN.md section 8;
BS 1377-2:1990 cl. 7 and BS 1377-4:1990 cl. 3 do the same).

- dry density rho_d = rho / (1 + w/100) (BS 1377-2:1990 cl. 7.2; ISO 17892-2:2014; ASTM D7263-21)
- void ratio e = rho_s / rho_d - 1, porosity n = e / (1 + e) (a fraction), degree of saturation
  S = w rho_s / (e rho_w) in % (definitions; e.g. Head, Manual of Soil Laboratory Testing vol. 1,
  3rd ed. 2006, ch. 3, from memory)
- dry density at air voids Va (%): rho_d = (1 - Va/100) / (1/rho_s + w/(100 rho_w))
  (BS 1377-4:1990 cl. 3.3.5, from memory); Va = 0 is the zero-air-voids (saturation) line.
"""

from __future__ import annotations

import math

from server.engine.contract import Outcome
from server.engine.readings import Readings

WATER_DENSITY_MG_M3 = 1.00  # rho_w for the phase relations (DESIGN.md section 8)


def dry_density(bulk_density_mg_m3: float, water_content_pct: float) -> float:
    """rho_d = rho / (1 + w/100)."""
    return bulk_density_mg_m3 / (1.0 + water_content_pct / 100.0)


def u_dry_density(bulk_density_mg_m3: float, u_bulk: float, water_content_pct: float, u_w: float) -> float:
    """u(rho_d) with d rho_d / d rho = 1/(1 + w) and d rho_d / d w = -rho/(1 + w)^2 (w as a fraction)."""
    f = 1.0 + water_content_pct / 100.0
    return math.hypot(u_bulk / f, bulk_density_mg_m3 * (u_w / 100.0) / (f * f))


def void_ratio(particle_density_mg_m3: float, dry_density_mg_m3: float) -> float:
    """e = rho_s / rho_d - 1."""
    return particle_density_mg_m3 / dry_density_mg_m3 - 1.0


def porosity(void_ratio_value: float) -> float:
    """n = e / (1 + e), a fraction."""
    return void_ratio_value / (1.0 + void_ratio_value)


def degree_of_saturation(
    water_content_pct: float, particle_density_mg_m3: float, void_ratio_value: float
) -> float:
    """S = w rho_s / (e rho_w), in % (w in %). The caller guarantees e > 0."""
    return water_content_pct * particle_density_mg_m3 / (void_ratio_value * WATER_DENSITY_MG_M3)


def air_voids_dry_density(
    water_content_pct: float, particle_density_mg_m3: float, air_voids_pct: float
) -> float:
    """rho_d = (1 - Va/100) / (1/rho_s + w/(100 rho_w)) (BS 1377-4:1990 cl. 3.3.5, from memory)."""
    return (1.0 - air_voids_pct / 100.0) / (
        1.0 / particle_density_mg_m3 + water_content_pct / (100.0 * WATER_DENSITY_MG_M3)
    )


MAX_PARTICLE_DENSITY_MG_M3 = 6.0  # above every soil mineral (common practice)
PARTICLE_DENSITY_USED = "particle_density_used_mg_m3"
"""The results key of the particle density a density or compaction test computed with, typed or
taken from the sample's particle-density test (``services.linked_inputs``): reports and exports
read this one key, not the readings."""


def read_particle_density(r: Readings, out: Outcome) -> float | None:
    """The optional particle density of the density and compaction methods, noted in the results."""
    rho_s = r.number(
        "particle_density_mg_m3",
        name="particle density",
        unit="Mg/m³",
        required=False,
        above=1.0,
        maximum=MAX_PARTICLE_DENSITY_MG_M3,
    )
    if rho_s is not None:
        out.results[PARTICLE_DENSITY_USED] = rho_s
    return rho_s
