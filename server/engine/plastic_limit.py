"""Plastic limit: the water content at which a rolled thread crumbles.

Two or more determinations (threads of 3.2 mm, ASTM D4318-17; 3 mm, BS 1377-2:1990 cl. 5),
averaged (ASTM D4318-17; BS 1377-2:1990 cl. 5). BS 1377-2 asks for a repeat
when two determinations differ by more than 0.5 % water content.
"""

from __future__ import annotations

from server.engine.contract import Outcome
from server.engine.readings import Readings
from server.engine.uncertainty import Balance, Measured, expanded, u_mean, u_water_content
from server.engine.water_content import mean, read_determinations

# BS 1377-2:1990 cl. 5: repeat when the two results differ by more than 0.5 % (confirmed).
MAX_SPREAD = 0.5
_TOL = 1e-9


def plastic_limit_part(r: Readings, out: Outcome, balance: Balance) -> Measured | None:
    """The plastic limit as the mean of the determinations, with its uncertainty.

    Writes ``plastic_limit_determinations`` (one entry per row, None where refused) and, when
    every row is good, ``plastic_limit``.
    """
    dets = read_determinations(r, "determinations", noun="determination", min_items=2)
    ws = [None if d is None else d.water_content for d in dets]
    out.results["plastic_limit_determinations"] = ws
    if r.has_errors_under("determinations"):
        return None
    good = [d for d in dets if d is not None]
    values = [d.water_content for d in good]
    spread = max(values) - min(values)
    if spread > MAX_SPREAD + _TOL:
        out.flag("pl-determinations-apart", "warning",
                 f"the plastic-limit determinations are {spread:.2f} % apart, more than {MAX_SPREAD} % "
                 "(BS 1377-2:1990 cl. 5): repeat the test")
    pl = mean(values)
    u = u_mean([u_water_content(d.tare_g, d.wet_tare_g, d.dry_tare_g, balance.u_mass) for d in good])
    out.results["plastic_limit"] = pl
    out.results.setdefault("uncertainty", {})["plastic_limit"] = expanded(u)
    return Measured(pl, u)
