"""The ``loss-on-ignition`` method: organic content as the mass lost on ignition of dry soil.

Readings (masses g, temperature °C)::

    {"determinations": [{"crucible_g": 21.402, "crucible_dry_g": 31.455,
                         "crucible_ignited_g": 30.871}, ...],
     "furnace_c": 440, "balance": {"resolution_g": 0.001}}

Formula: organic content = (m_dry - m_ignited) / (m_dry - m_crucible) x 100, in per cent of the
oven-dried mass: the loss on ignition (BS 1377-3:1990 cl. 4), which ASTM D2974-14 writes as
100 - ash content, the ash content being the ignited mass over the oven-dried mass (its
sections 1.1.3-1.1.4 and 4.3-4.4). The determinations are averaged; each one's value is kept.

The furnace temperature is recorded, and the arithmetic is the same at any temperature
(DESIGN.md section 8). ASTM D2974-14 ignites at 440 ± 40 °C (Method C, general purposes) or at
750 ± 38 °C (Method D, peat used as fuel) (its section 1.1, confirmed in a public abstract);
BS 1377-3 at 440 ± 25 °C (from memory), inside the first window. A temperature outside both ASTM
windows is flagged: the result is then not one either practice recognises.

Results: ``organic_content`` (%), ``organic_content_determinations`` (input order, None where
refused), and ``uncertainty`` of the mean as {"u", "U", "k": 2}: the GUM first-order law over the
three weighings of each determination (``uncertainty.Balance``), then the uncertainty of the mean.

Refused: a furnace temperature not above 0 °C or above 1200 °C; no dry soil (the dry mass not above
the crucible), an ignited mass above the dry mass (ignition does not add mass) or below the crucible.

Flags: ``furnace-temperature-nonstandard`` (warning).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from server.engine.contract import Outcome, method
from server.engine.readings import Readings, fmt
from server.engine.uncertainty import expanded, read_balance, u_mean
from server.engine.water_content import aligned_items

# ASTM D2974-14 sections 1.1.3 and 1.1.4 (confirmed in a public abstract): (nominal, tolerance), °C.
IGNITION_TEMPERATURES_C: tuple[tuple[float, float], ...] = ((440.0, 40.0), (750.0, 38.0))
MAX_FURNACE_C = 1200.0  # above any muffle furnace used for soils (common practice)


@dataclass(frozen=True, slots=True)
class Ignition:
    """One determination: crucible, crucible with oven-dry soil, crucible after ignition (g)."""

    crucible_g: float
    dry_g: float
    ignited_g: float

    @property
    def organic_content(self) -> float:
        """(m_dry - m_ignited) / (m_dry - m_crucible) x 100 (BS 1377-3:1990 cl. 4; ASTM D2974-14)."""
        return (self.dry_g - self.ignited_g) / (self.dry_g - self.crucible_g) * 100.0

    def u_organic_content(self, u_mass_g: float) -> float:
        """u with a = m_dry - m_ignited, b = m_dry - m_crucible: d/dm_dry = 100 (b - a)/b^2,
        d/dm_ignited = -100/b, d/dm_crucible = 100 a/b^2 (JCGM 100:2008 eq. 10)."""
        a = self.dry_g - self.ignited_g
        b = self.dry_g - self.crucible_g
        return u_mass_g * 100.0 * math.sqrt(((b - a) / (b * b)) ** 2 + (1.0 / b) ** 2 + (a / (b * b)) ** 2)


def read_ignition(r: Readings) -> Ignition | None:
    crucible = r.number("crucible_g", name="crucible", unit="g", minimum=0.0)
    dry = r.number("crucible_dry_g", name="crucible and dry soil", unit="g", minimum=0.0)
    ignited = r.number("crucible_ignited_g", name="crucible and ignited soil", unit="g", minimum=0.0)
    if crucible is None or dry is None or ignited is None:
        return None
    if dry <= crucible:
        r.refuse(
            "crucible_dry_g",
            f"crucible and dry soil ({fmt(dry, 'g')}) is not above the crucible "
            f"({fmt(crucible, 'g')}): there is no dry soil",
        )
        return None
    if ignited > dry:
        r.refuse(
            "crucible_ignited_g",
            f"crucible and ignited soil ({fmt(ignited, 'g')}) is above crucible and "
            f"dry soil ({fmt(dry, 'g')}): ignition does not add mass",
        )
        return None
    if ignited < crucible:
        r.refuse(
            "crucible_ignited_g",
            f"crucible and ignited soil ({fmt(ignited, 'g')}) is below the crucible ({fmt(crucible, 'g')})",
        )
        return None
    return Ignition(crucible, dry, ignited)


def nonstandard_temperature(furnace_c: float) -> bool:
    """True outside both ASTM D2974-14 windows, 440 ± 40 °C and 750 ± 38 °C."""
    return not any(abs(furnace_c - t) <= tol for t, tol in IGNITION_TEMPERATURES_C)


@method(
    "loss-on-ignition",
    title="Organic content by loss on ignition",
    standard="ASTM D2974-14; BS 1377-3:1990 cl. 4",
)
def loss_on_ignition_method(r: Readings, out: Outcome) -> None:
    """Organic content in % of the dry mass, the mean of the determinations; the furnace recorded."""
    balance = read_balance(r)
    furnace = r.number("furnace_c", name="furnace temperature", unit="°C", above=0.0, maximum=MAX_FURNACE_C)
    if furnace is not None and nonstandard_temperature(furnace):
        out.flag(
            "furnace-temperature-nonstandard",
            "warning",
            f"the furnace was at {fmt(furnace, '°C')}: ASTM D2974 ignites at 440 ± 40 °C or 750 ± 38 °C "
            "and BS 1377-3 at 440 ± 25 °C",
        )
    rows = [
        None if item is None else read_ignition(item)
        for item in aligned_items(r, "determinations", noun="determination", min_items=1)
    ]
    out.results["organic_content_determinations"] = [None if d is None else d.organic_content for d in rows]
    if r.has_errors_under("determinations") or not rows:
        return
    good = [d for d in rows if d is not None]
    out.results["organic_content"] = sum(d.organic_content for d in good) / len(good)
    out.results.setdefault("uncertainty", {})["organic_content"] = expanded(
        u_mean([d.u_organic_content(balance.u_mass) for d in good])
    )
