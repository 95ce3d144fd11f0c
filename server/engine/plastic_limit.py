"""Plastic limit: the water content at which a rolled thread crumbles.

Two or more determinations (threads of 3.2 mm, ASTM D4318-17; 3 mm, BS 1377-2:1990 cl. 5),
averaged (ASTM D4318-17; BS 1377-2:1990 cl. 5). BS 1377-2 asks for a repeat
when two determinations differ by more than 0.5 % water content.
"""

from __future__ import annotations

from server.engine.contract import Outcome
from server.engine.readings import Readings
from server.engine.uncertainty import Balance, Measured
from server.engine.water_content import averaged_determinations

# BS 1377-2:1990 cl. 5: repeat when the two results differ by more than 0.5 % (confirmed).
MAX_SPREAD = 0.5
_TOL = 1e-9


def plastic_limit_part(r: Readings, out: Outcome, balance: Balance) -> Measured | None:
    """The plastic limit as the mean of two or more determinations, with its uncertainty;
    flagged when they are further apart than BS 1377-2 allows."""
    found = averaged_determinations(r, out, balance, "plastic_limit", min_items=2)
    if found is None:
        return None
    good, pl = found
    values = [d.water_content for d in good]
    spread = max(values) - min(values)
    if spread > MAX_SPREAD + _TOL:
        out.flag("pl-determinations-apart", "warning",
                 f"the plastic-limit determinations are {spread:.2f} % apart, more than {MAX_SPREAD} % "
                 "(BS 1377-2:1990 cl. 5): repeat the test")
    return pl
