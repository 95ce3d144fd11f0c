"""Rounding for reporting: values are kept at full precision and rounded only when shown.

Round half up (not Python's half-to-even), as laboratories and the standards' worked
examples round (common practice). The number of decimals per result key is the rule the
method names: limits and indices derived from them to whole numbers (ASTM D4318 cl. 1.5
reporting), water content to 0.1 % (ASTM D2216 Method B).
"""

from __future__ import annotations

from decimal import ROUND_HALF_UP, Decimal

DECIMALS: dict[str, int] = {
    "water_content": 1,
    "liquid_limit": 0,
    "plastic_limit": 0,
    "plasticity_index": 0,
    "flow_index": 1,
    "liquidity_index": 2,
    "consistency_index": 2,
    "activity": 2,
    "clay_fraction": 0,
    "sensitivity": 1,
    "undrained_strength_kpa": 1,
    "group_index": 0,
    # grading: percentages to 1 % (ASTM D6913 reports percent passing to the nearest 1 %, from
    # memory); sizes to 0.001 mm at most; Cu and Cc to 0.1 and 0.01 (common practice)
    "gravel": 0,
    "sand": 0,
    "fines": 0,
    "silt": 0,
    "clay": 0,
    "percent_passing": 0,
    "percent_finer": 0,
    "d10_mm": 4,
    "d30_mm": 4,
    "d60_mm": 4,
    "diameter_mm": 4,
    "cu": 1,
    "cc": 2,
    # strength: kPa to 0.1, strain to 0.1 % (common practice)
    "remoulded_strength_kpa": 1,
    "unconfined_strength_kpa": 1,
    "remoulded_unconfined_strength_kpa": 1,
    "strain_at_failure_pct": 1,
    "undisturbed_penetration_mm": 1,
    "remoulded_penetration_mm": 1,
    "sieve_mass_loss_pct": 1,
    # Atterberg detail: each determination to 0.1 % like the water content (ASTM D2216 Method B),
    # blow counts whole, cone penetrations to 0.1 mm (BS 1377-2:1990 cl. 4.3 dial reading),
    # r2 to 0.001; indicative correlations to the precision their sources quote (common practice)
    "water_content_determinations": 1,
    "plastic_limit_determinations": 1,
    "blows": 0,
    "penetration_mm": 1,
    "r2": 3,
    "compression_index_undisturbed": 2,
    "compression_index_remoulded": 2,
    "remoulded_undrained_strength_kpa": 1,
    "undrained_strength_ratio_nc": 2,
    "swell_potential": 1,
    # densities to 0.01 Mg/m³ (BS 1377-2:1990 cl. 7.2 and 8.3, BS 1377-4:1990 cl. 3.3, from memory),
    # specific gravity to 0.01 (ASTM D854-14, from memory); linear shrinkage to a whole per cent
    # (BS 1377-2:1990 cl. 6.5, from memory); organic content to 0.1 % (BS 1377-3:1990 cl. 4, from
    # memory); optimum water content to 0.1 % like the water content (ASTM D698-12, from memory);
    # void ratio and porosity to 0.001, saturation to 1 % (common practice)
    "particle_density_mg_m3": 2,
    "particle_density_determinations": 2,
    "specific_gravity": 2,
    "linear_shrinkage": 0,
    "bulk_density_mg_m3": 2,
    "bulk_density_determinations": 2,
    "dry_density_mg_m3": 2,
    "void_ratio": 3,
    "porosity": 3,
    "degree_of_saturation": 0,
    "organic_content": 1,
    "organic_content_determinations": 1,
    "maximum_dry_density_mg_m3": 2,
    "particle_density_used_mg_m3": 2,
    "optimum_water_content": 1,
    "oven_dried_ll_ratio": 2,  # a ratio to 0.01 against its 0.75 criterion (common practice)
}


def round_half_up(value: float, decimals: int = 0) -> float:
    """Round half away from zero at ``decimals`` places, via the decimal text of ``value``."""
    q = Decimal(1).scaleb(-decimals)
    return float(Decimal(repr(value)).quantize(q, rounding=ROUND_HALF_UP))


def reported(key: str, value: float | None) -> str:
    """The text a report shows for a result: rounded by the key's rule, '—' when absent."""
    if value is None:
        return "—"
    decimals = DECIMALS.get(key, 2)
    return f"{round_half_up(value, decimals):.{decimals}f}"
