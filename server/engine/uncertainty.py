"""Standard uncertainty of every reported Atterberg value.

Method: the first-order law of propagation of uncertainty of the GUM (JCGM 100:2008 cl. 5.1.2,
eq. 10), u_c^2(y) = sum (df/dx_i)^2 u^2(x_i), with uncorrelated inputs. The inputs are:

- each balance reading, with the resolution read as a rectangular distribution of half-width
  resolution/2 (JCGM 100:2008 cl. F.2.2.1, u = resolution / sqrt(12)) combined with the standard
  uncertainty stated on the balance's calibration certificate;
- for a limit read off a fitted line, the standard error of the fitted mean at the target
  (Draper & Smith, Applied Regression Analysis, 1998, ch. 3), added in quadrature to the
  propagated mass uncertainty. The residual scatter already holds part of the weighing error,
  so this double-counts a little: a deliberate, conservative choice.

Treating the calibration error of the three readings of one determination as uncorrelated is
also conservative: a common offset cancels in the differences that form a water content.
Expanded uncertainty U = k u with k = 2 (about 95 % coverage, JCGM 100:2008 cl. 6.3.3).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from server.engine.readings import Readings

COVERAGE_FACTOR = 2.0

# Balance readability of 0.01 g: ASTM D2216-19 and ASTM D4318-17 ask for a balance
# readable to 0.01 g for specimens of this size (from memory).
DEFAULT_RESOLUTION_G = 0.01
# Calibration standard uncertainty of half the readability when the certificate value is not
# given: an assumption of ours, stated so a lab can replace it (common practice).
DEFAULT_CALIBRATION_U_G = 0.005


@dataclass(frozen=True, slots=True)
class Balance:
    """What is known of the balance that weighed the specimens."""

    resolution_g: float = DEFAULT_RESOLUTION_G
    calibration_u_g: float = DEFAULT_CALIBRATION_U_G

    @property
    def u_mass(self) -> float:
        """Standard uncertainty of one mass reading, in grams (JCGM 100:2008 cl. F.2.2.1)."""
        return math.sqrt(self.resolution_g**2 / 12.0 + self.calibration_u_g**2)


DEFAULT_BALANCE = Balance()


@dataclass(slots=True)
class Measured:
    """A value with its standard uncertainty."""

    value: float
    u: float


def read_balance(r: Readings, inherited: Balance = DEFAULT_BALANCE) -> Balance:
    """The optional ``"balance": {"resolution_g": .., "calibration_u_g": ..}`` of some readings.

    A part of an Atterberg set without its own balance uses the set's (``inherited``).
    """
    if not r.present("balance"):
        return inherited
    b = r.child("balance", label="balance")
    if b is None:
        return inherited
    res = b.number("resolution_g", name="balance resolution", unit="g", required=False, above=0.0,
                   maximum=10.0)
    cal = b.number("calibration_u_g", name="balance calibration uncertainty", unit="g",
                   required=False, minimum=0.0, maximum=10.0)
    return Balance(inherited.resolution_g if res is None else res,
                   inherited.calibration_u_g if cal is None else cal)


def u_water_content(tare_g: float, wet_tare_g: float, dry_tare_g: float, u_mass_g: float) -> float:
    """Standard uncertainty of w = 100 (Mw - Md) / (Md - Mt), in % water content.

    Sensitivities: dw/dMw = 100/b, dw/dMd = -100 (a + b)/b^2, dw/dMt = 100 a/b^2, with
    a = Mw - Md (water) and b = Md - Mt (dry soil); each reading has u = ``u_mass_g``.
    """
    a = wet_tare_g - dry_tare_g
    b = dry_tare_g - tare_g
    c_wet = 100.0 / b
    c_dry = 100.0 * (a + b) / (b * b)
    c_tare = 100.0 * a / (b * b)
    return u_mass_g * math.sqrt(c_wet * c_wet + c_dry * c_dry + c_tare * c_tare)


def u_mean(us: list[float]) -> float:
    """Standard uncertainty of the mean of independent values: sqrt(sum u_i^2) / n."""
    return math.sqrt(sum(u * u for u in us)) / len(us)


def u_linear(coefficients: list[float], us: list[float]) -> float:
    """Standard uncertainty of y = sum c_i x_i with independent x_i (JCGM 100:2008 eq. 10)."""
    return math.sqrt(sum((c * u) ** 2 for c, u in zip(coefficients, us, strict=True)))


def combine(*us: float) -> float:
    """Root sum of squares of independent components."""
    return math.sqrt(sum(u * u for u in us))


def u_difference(u_a: float, u_b: float) -> float:
    """Standard uncertainty of a - b, independent (PI = LL - PL)."""
    return math.sqrt(u_a * u_a + u_b * u_b)


def u_index(w: float, ll: float, pl: float, u_w: float, u_ll: float, u_pl: float) -> float:
    """Standard uncertainty of LI = (w - PL)/(LL - PL); the same for CI = 1 - LI.

    Sensitivities: dLI/dw = 1/PI, dLI/dLL = -LI/PI, dLI/dPL = -CI/PI.
    """
    pi = ll - pl
    li = (w - pl) / pi
    ci = 1.0 - li
    return math.sqrt(u_w * u_w + (li * u_ll) ** 2 + (ci * u_pl) ** 2) / abs(pi)


def expanded(u: float, k: float = COVERAGE_FACTOR) -> dict[str, float]:
    """The standard uncertainty with its expanded value beside it, as results carry it."""
    return {"u": u, "U": k * u, "k": k}
