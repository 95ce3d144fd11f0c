"""Grading (particle-size distribution) by sieving, and reading a grading curve.

Percent passing a sieve is the dry mass that went through it over the total dry mass of the
specimen: P = 100 (M - C) / M, where C is the cumulative mass retained on that sieve and every
coarser one (ASTM D6913/D6913M-17, calculation for single sieve-set sieving). Fines washed
through the 75 µm sieve before sieving count as passing every sieve, so the cumulative
retained of the washed specimen is what enters C. Clause numbers of D6913 are not cited
here because we had no copy at hand (from memory).

A characteristic diameter D_p (D10, D30, D60) is read off the curve by straight-line
interpolation of percent passing against log10 of the size between the two neighbouring
points, the semi-log grading chart of ASTM D6913 and ASTM D2487 (from memory that both read
D-values this way; it is common practice). Nothing is extrapolated beyond the measured sizes.

Cu = D60 / D10 and Cc = D30^2 / (D10 D60) (ASTM D2487-17, terminology, section 3). The
gravel, sand and fines split uses the No. 4 (4.75 mm) and No. 200 (75 µm) sieves as ASTM
D2487-17 section 3 defines gravel, sand and fines.

All functions here take and return plain numbers: a curve is a sequence of
``(size_mm, percent_passing)`` pairs in any order.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

GRAVEL_SAND_MM = 4.75  # No. 4 sieve: gravel is retained on it (ASTM D2487-17 section 3)
SAND_FINES_MM = 0.075  # No. 200 sieve: fines pass it (ASTM D2487-17 section 3)
CLAY_SILT_MM = 0.002  # 2 µm: clay-size fraction, as activity uses it (Skempton 1953)

Curve = Sequence[tuple[float, float]]


def percent_passing(dry_mass_g: float, cumulative_retained_g: Sequence[float]) -> list[float]:
    """Percent passing each sieve, 100 (M - C) / M (ASTM D6913-17).

    ``cumulative_retained_g`` is in the order of the sieves, coarsest first; the caller
    guarantees M > 0.
    """
    return [100.0 * (dry_mass_g - c) / dry_mass_g for c in cumulative_retained_g]


def cumulative(retained_g: Sequence[float]) -> list[float]:
    """Running sum of the masses retained on each sieve, coarsest first."""
    out: list[float] = []
    total = 0.0
    for m in retained_g:
        total += m
        out.append(total)
    return out


def _ascending(curve: Curve) -> list[tuple[float, float]]:
    return sorted(curve)  # by size, then percent: sizes of one curve are distinct in practice


def size_at_percent(curve: Curve, percent: float) -> float | None:
    """The size (mm) at which the curve passes ``percent``, or None outside the curve.

    Semi-log interpolation between neighbours (common practice). The curve is walked
    from the finest size upward and the first segment that spans ``percent`` is used, so a
    flat stretch exactly at ``percent`` gives its finest size and a curve that is not
    monotone still gives one defined answer (the caller flags the non-monotone curve).
    """
    pts = _ascending(curve)
    for (d_lo, p_lo), (d_hi, p_hi) in zip(pts, pts[1:], strict=False):
        if p_lo == p_hi:
            if p_lo == percent:
                return d_lo
            continue
        if percent == p_lo:  # exactly on a point: its own size, not a rounded exp(log(size))
            return d_lo
        if percent == p_hi:
            return d_hi
        if min(p_lo, p_hi) <= percent <= max(p_lo, p_hi):
            s = (percent - p_lo) / (p_hi - p_lo)
            d = math.exp(math.log(d_lo) + s * (math.log(d_hi) - math.log(d_lo)))
            return min(max(d, d_lo), d_hi)  # no rounding step outside the segment
    if len(pts) == 1 and pts[0][1] == percent:
        return pts[0][0]
    return None


def percent_at_size(curve: Curve, size_mm: float) -> float | None:
    """Percent passing at ``size_mm`` read off the curve (semi-log), or None outside it."""
    pts = _ascending(curve)
    for d, p in pts:
        if d == size_mm:
            return p
    for (d_lo, p_lo), (d_hi, p_hi) in zip(pts, pts[1:], strict=False):
        if d_lo < size_mm < d_hi:
            s = (math.log(size_mm) - math.log(d_lo)) / (math.log(d_hi) - math.log(d_lo))
            return p_lo + s * (p_hi - p_lo)
    return None


def boundary_percent(curve: Curve, size_mm: float) -> float | None:
    """Percent passing at a class boundary, using what the curve proves beyond its ends.

    Inside the curve it is ``percent_at_size``. Above the coarsest sieve the answer is 100 %
    only if the coarsest sieve already passes 100 %; below the finest sieve it is 0 % only if
    nothing passed the finest sieve. Otherwise the boundary is not known (None).
    """
    found = percent_at_size(curve, size_mm)
    if found is not None or not curve:
        return found
    pts = _ascending(curve)
    if size_mm > pts[-1][0] and pts[-1][1] >= 100.0:
        return 100.0
    if size_mm < pts[0][0] and pts[0][1] <= 0.0:
        return 0.0
    return None


def uniformity_coefficient(d10: float, d60: float) -> float:
    """Cu = D60 / D10 (ASTM D2487-17 section 3)."""
    return d60 / d10


def curvature_coefficient(d10: float, d30: float, d60: float) -> float:
    """Cc = D30^2 / (D10 x D60) (ASTM D2487-17 section 3)."""
    return d30 * d30 / (d10 * d60)


def is_monotone(curve: Curve) -> bool:
    """True when percent passing never rises as the size falls (a physical grading curve)."""
    pts = _ascending(curve)
    return all(p_lo <= p_hi for (_, p_lo), (_, p_hi) in zip(pts, pts[1:], strict=False))


def u_percent_passing(dry_mass_g: float, cumulative_g: float, n_weighings: int, u_mass_g: float) -> float:
    """Standard uncertainty of P = 100 (M - C)/M (GUM first order, JCGM 100:2008 eq. 10).

    C is the sum of ``n_weighings`` independent weighings, each with standard uncertainty
    ``u_mass_g``, and M is one more. Sensitivities: dP/dC = -100/M, dP/dM = 100 C / M^2.
    """
    c_c = 100.0 / dry_mass_g
    c_m = 100.0 * cumulative_g / (dry_mass_g * dry_mass_g)
    return u_mass_g * math.sqrt(n_weighings * c_c * c_c + c_m * c_m)
