"""The ``density`` method: bulk and dry density of specimens by linear measurement.

Readings (masses g, lengths mm, densities Mg/m³)::

    {"specimens": [{"mass_g": 172.40, "diameter_mm": 38.1, "height_mm": 76.2}, ...],
     "water_content": {"determinations": [determination, ...]},
     "particle_density_mg_m3": 2.70,
     "length_resolution_mm": 0.01, "balance": {"resolution_g": 0.01}}

``particle_density_mg_m3`` is optional; ``length_resolution_mm`` (default 0.01 mm, callipers,
common practice) and ``balance`` give the uncertainties. ``water_content`` holds water-content
readings (DESIGN.md section 3), read by ``water_content`` like every other water content; it
inherits the balance of the whole set unless it names its own.

Conventions (DESIGN.md section 8):

- each specimen's bulk density rho = m / V with V = pi D^2 H / 4 (a right cylinder measured with
  callipers: BS 1377-2:1990 cl. 7.2; ISO 17892-2:2014 linear-measurement method; ASTM D7263-21
  Method A); the bulk density is the mean of the specimens' densities, not pooled mass over
  pooled volume;
- dry density rho_d = rho / (1 + w/100) from the water content of the set;
- with a particle density: void ratio e = rho_s/rho_d - 1, porosity n = e/(1 + e) as a fraction,
  and degree of saturation S = w rho_s / (e rho_w) in %, with rho_w = 1.00 Mg/m³
  (``phase_relations``); without one, these three are absent.

Results: ``bulk_density_mg_m3``, ``bulk_density_determinations`` (each specimen's, input order,
None where refused), ``water_content`` and ``water_content_determinations`` (as the
``water-content`` method writes them), ``dry_density_mg_m3``, and with a particle density
``void_ratio``, ``porosity`` and ``degree_of_saturation``. ``uncertainty`` holds
``bulk_density_mg_m3``, ``water_content`` and ``dry_density_mg_m3`` as {"u", "U", "k": 2} (GUM
first order: u_rel(rho)^2 = (u_m/m)^2 + (2 u_D/D)^2 + (u_H/H)^2 per specimen, then the mean's);
the particle density is taken as exact, so the void ratio, porosity and saturation carry none.

Refused: a mass, diameter or height not above zero; a particle density not above 1 Mg/m³, above
6 Mg/m³ (beyond any soil mineral, common practice) or not above the dry density (no voids).

Flags: ``saturation-above-100`` (warning) when the computed degree of saturation exceeds 100 %:
the measurements, the water content or the particle density are out (common practice).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from server.engine import phase_relations as pr
from server.engine.contract import Outcome, method
from server.engine.equipment import check_equipment
from server.engine.readings import Readings, fmt
from server.engine.uncertainty import Balance, expanded, read_balance, u_mean
from server.engine.water_content import aligned_items, water_content_part

DEFAULT_LENGTH_RESOLUTION_MM = 0.01  # callipers reading to 0.01 mm (common practice)


@dataclass(frozen=True, slots=True)
class Specimen:
    """A measured cylinder: mass (g), diameter and height (mm)."""

    mass_g: float
    diameter_mm: float
    height_mm: float

    @property
    def volume_cm3(self) -> float:
        """V = pi D^2 H / 4, in cm³."""
        return math.pi * self.diameter_mm**2 * self.height_mm / 4.0 / 1000.0

    @property
    def bulk_density_mg_m3(self) -> float:
        """rho = m / V; g/cm³ is Mg/m³ (BS 1377-2:1990 cl. 7.2)."""
        return self.mass_g / self.volume_cm3

    def u_bulk_density(self, u_mass_g: float, u_length_mm: float) -> float:
        """u(rho) = rho sqrt((u_m/m)^2 + (2 u_D/D)^2 + (u_H/H)^2) (JCGM 100:2008 cl. 5.1.6)."""
        rel = math.sqrt(
            (u_mass_g / self.mass_g) ** 2
            + (2.0 * u_length_mm / self.diameter_mm) ** 2
            + (u_length_mm / self.height_mm) ** 2
        )
        return self.bulk_density_mg_m3 * rel


def read_specimen(r: Readings) -> Specimen | None:
    mass = r.number("mass_g", name="specimen mass", unit="g", above=0.0)
    d = r.number("diameter_mm", name="specimen diameter", unit="mm", above=0.0, maximum=1000.0)
    h = r.number("height_mm", name="specimen height", unit="mm", above=0.0, maximum=1000.0)
    if mass is None or d is None or h is None:
        return None
    return Specimen(mass, d, h)


def _water_content(r: Readings, out: Outcome, balance: Balance) -> tuple[float, float] | None:
    """The set's water content and its standard uncertainty, through ``water_content``."""
    wr = r.child("water_content", label="water content")
    if wr is None:
        return None
    check_equipment(wr, out, out.tested_on)
    found = water_content_part(wr, out, read_balance(wr, balance))
    return None if found is None else (found.value, found.u)


@method(
    "density",
    title="Bulk and dry density (linear measurement)",
    standard="BS 1377-2:1990 cl. 7.2; ISO 17892-2:2014; ASTM D7263-21 Method A",
)
def density_method(r: Readings, out: Outcome) -> None:
    """Bulk density (mean of specimens), dry density and, with rho_s, e, n and S."""
    balance = read_balance(r)
    res = r.number(
        "length_resolution_mm", name="length resolution", unit="mm", required=False, above=0.0, maximum=10.0
    )
    rho_s = pr.read_particle_density(r, out)
    specimens = [
        None if item is None else read_specimen(item)
        for item in aligned_items(r, "specimens", noun="specimen", min_items=1)
    ]
    out.results["bulk_density_determinations"] = [
        None if s is None else s.bulk_density_mg_m3 for s in specimens
    ]
    water = _water_content(r, out, balance)
    if r.has_errors_under("specimens") or not specimens:
        return
    good = [s for s in specimens if s is not None]
    rho = sum(s.bulk_density_mg_m3 for s in good) / len(good)
    out.results["bulk_density_mg_m3"] = rho
    unc = out.results.setdefault("uncertainty", {})
    u_rho: float | None = None
    if not r.has_errors_under("length_resolution_mm"):
        u_len = (DEFAULT_LENGTH_RESOLUTION_MM if res is None else res) / math.sqrt(12.0)
        u_rho = u_mean([s.u_bulk_density(balance.u_mass, u_len) for s in good])
        unc["bulk_density_mg_m3"] = expanded(u_rho)
    if water is None:
        return
    w, u_w = water
    rho_d = pr.dry_density(rho, w)
    out.results["dry_density_mg_m3"] = rho_d
    if u_rho is not None:
        unc["dry_density_mg_m3"] = expanded(pr.u_dry_density(rho, u_rho, w, u_w))
    if rho_s is None:
        return
    if rho_s <= rho_d:
        r.refuse(
            "particle_density_mg_m3",
            f"particle density ({fmt(rho_s, 'Mg/m³')}) is not above the dry "
            f"density ({rho_d:.3f} Mg/m³): the soil would have no voids",
        )
        return
    e = pr.void_ratio(rho_s, rho_d)
    s_r = pr.degree_of_saturation(w, rho_s, e)
    out.results["void_ratio"] = e
    out.results["porosity"] = pr.porosity(e)
    out.results["degree_of_saturation"] = s_r
    if s_r > 100.0:
        out.flag(
            "saturation-above-100",
            "warning",
            f"the degree of saturation works out at {s_r:.1f} %, above 100 %: check the dimensions, the "
            "masses, the water content and the particle density",
        )
