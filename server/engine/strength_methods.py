"""The undrained strength methods: ``vane``, ``fall-cone-strength``, ``unconfined-compression``.

Formulas live in ``strength``; this module reads the readings field by field, refuses what
cannot be right, computes each specimen that is valid, and raises the flags.

Each method takes an ``undisturbed`` specimen and an optional ``remoulded`` one; with both,
sensitivity St = cu undisturbed / cu remoulded and its class (Skempton & Northey 1952, via
``descriptors.sensitivity_class``). Resolutions, when stated, give GUM standard uncertainties
in ``results["uncertainty"]`` as {"u", "U", "k": 2}; a rectangular distribution of width one
resolution, u = resolution / sqrt(12) (JCGM 100:2008 cl. F.2.2.1).

``vane`` (laboratory vane, ASTM D4648/D4648M-16)::

    {"diameter_mm": 12.7, "height_mm": 12.7,
     "undisturbed": {"torque_nm": 0.0142},
     "remoulded": {"torque_nm": 0.0035},
     "torque_resolution_nm": 0.0001, "length_resolution_mm": 0.01}

``fall-cone-strength`` (Hansbo 1957; ISO 17892-6:2017)::

    {"cone_mass_g": 80.0, "cone_angle_deg": 30, "cone_factor": 0.8,
     "undisturbed": {"penetration_mm": [6.1, 6.3]},
     "remoulded": {"penetration_mm": [14.2, 14.0]},
     "penetration_resolution_mm": 0.1}

``cone_factor`` defaults to 0.8 for the 30° cone and 0.27 for the 60° cone; the repeat drops of
a specimen are averaged; ``penetration_resolution_mm`` defaults to 0.1 mm.

``unconfined-compression`` (ASTM D2166/D2166M-16)::

    {"undisturbed": {"diameter_mm": 38.0, "height_mm": 76.0,
                     "readings": [{"deformation_mm": 0.0, "load_n": 0.0},
                                  {"deformation_mm": 0.76, "load_n": 61.0},
                                  {"deformation_mm": 1.52, "load_n": 98.0}]},
     "remoulded": {"diameter_mm": 38.0, "height_mm": 76.0, "readings": [...]},
     "load_resolution_n": 0.5, "length_resolution_mm": 0.01}

Results: ``undrained_strength_kpa`` and ``remoulded_strength_kpa`` (cu), ``sensitivity``,
``sensitivity_class``; the fall cone adds ``cone_factor``, ``undisturbed_penetration_mm`` and
``remoulded_penetration_mm``; unconfined compression adds ``stress_strain``
[{"strain_pct", "stress_kpa"}], ``unconfined_strength_kpa`` (qu), ``strain_at_failure_pct``,
``failure_criterion`` ("peak", "strain-15" or "end-of-test") and the same with a
``remoulded_`` prefix.

Flags: ``remoulded-stronger``, ``no-peak-before-15pct``, ``stopped-before-failure``,
``no-readings-before-15pct``, ``specimen-slenderness``, ``specimen-too-small``.
"""

from __future__ import annotations

import math

from server.engine import strength as st
from server.engine.contract import Outcome, method
from server.engine.descriptors import sensitivity_class
from server.engine.readings import Readings, fmt
from server.engine.uncertainty import expanded

DEFAULT_LENGTH_RESOLUTION_MM = 0.01  # callipers reading to 0.01 mm (common practice)
DEFAULT_PENETRATION_RESOLUTION_MM = 0.1  # cone penetrometer dial read to 0.1 mm (common practice)
# ASTM D2166/D2166M-16 section 7: height-to-diameter ratio between 2 and 2.5 (confirmed in a
# public excerpt); smallest specimen diameter 30 mm (from memory).
SLENDERNESS_RANGE = (2.0, 2.5)
MIN_UCS_DIAMETER_MM = 30.0

_SPECIMENS = (("undisturbed", "undisturbed specimen"), ("remoulded", "remoulded specimen"))


def _u_from_resolution(resolution: float) -> float:
    """Standard uncertainty of a reading from its resolution (JCGM 100:2008 cl. F.2.2.1)."""
    return resolution / math.sqrt(12.0)


def _length_u(r: Readings) -> float | None:
    """u of a length reading from the stated (or default) resolution; None if the field is refused."""
    res = r.number("length_resolution_mm", name="length resolution", unit="mm", required=False, above=0.0,
                   maximum=10.0)
    if r.has_errors_under("length_resolution_mm"):
        return None
    return _u_from_resolution(DEFAULT_LENGTH_RESOLUTION_MM if res is None else res)


def _specimen(r: Readings, key: str, label: str) -> Readings | None:
    return r.child(key, label=label, required=(key == "undisturbed"))


def _write_sensitivity(out: Outcome, cu_u: float | None, cu_r: float | None,
                       urel_u: float | None, urel_r: float | None) -> None:
    """St and its class; its uncertainty when both strengths carry one (relative, in quadrature)."""
    if cu_u is None or cu_r is None:
        return
    s = st.sensitivity(cu_u, cu_r)
    out.results["sensitivity"] = s
    out.results["sensitivity_class"] = sensitivity_class(s)
    if s < 1.0:
        out.flag("remoulded-stronger", "warning",
                 f"the remoulded specimen is stronger than the undisturbed one (St = {fmt(round(s, 2))}): "
                 "check that the specimens were not swapped")
    if urel_u is not None and urel_r is not None:
        out.results.setdefault("uncertainty", {})["sensitivity"] = expanded(s * math.hypot(urel_u, urel_r))


def _put_u(out: Outcome, key: str, value: float, urel: float | None) -> None:
    if urel is not None:
        out.results.setdefault("uncertainty", {})[key] = expanded(value * urel)


# -- vane ----------------------------------------------------------------------------------------
@method("vane", title="Undrained strength by laboratory vane", standard="ASTM D4648/D4648M-16")
def vane_method(r: Readings, out: Outcome) -> None:
    """cu = T / [pi D^2 (H/2 + D/6)] for each specimen; sensitivity from the two."""
    d = r.number("diameter_mm", name="vane diameter", unit="mm", above=0.0, maximum=200.0)
    h = r.number("height_mm", name="vane height", unit="mm", above=0.0, maximum=400.0)
    res_t = r.number("torque_resolution_nm", name="torque resolution", unit="N·m", required=False, above=0.0)
    u_l = _length_u(r)
    cus: dict[str, float | None] = {}
    urels: dict[str, float | None] = {}
    for key, label in _SPECIMENS:
        cus[key], urels[key] = None, None
        spec = _specimen(r, key, label)
        if spec is None:
            continue
        torque = spec.number("torque_nm", name="peak torque", unit="N·m", above=0.0, maximum=1000.0)
        if torque is None or d is None or h is None:
            continue
        cus[key] = st.vane_strength_kpa(torque, d, h)
        if res_t is not None and u_l is not None:
            urels[key] = st.u_rel_vane(torque, _u_from_resolution(res_t), d, h, u_l)
    _write_strengths(out, cus, urels)


def _write_strengths(out: Outcome, cus: dict[str, float | None], urels: dict[str, float | None]) -> None:
    cu_u, cu_r = cus["undisturbed"], cus["remoulded"]
    if cu_u is not None:
        out.results["undrained_strength_kpa"] = cu_u
        _put_u(out, "undrained_strength_kpa", cu_u, urels["undisturbed"])
    if cu_r is not None:
        out.results["remoulded_strength_kpa"] = cu_r
        _put_u(out, "remoulded_strength_kpa", cu_r, urels["remoulded"])
    _write_sensitivity(out, cu_u, cu_r, urels["undisturbed"], urels["remoulded"])


# -- fall cone -----------------------------------------------------------------------------------
@method("fall-cone-strength", title="Undrained strength by fall cone",
        standard="ISO 17892-6:2017; Hansbo (1957)")
def fall_cone_method(r: Readings, out: Outcome) -> None:
    """cu = c m g / i^2 from the mean penetration of each specimen; sensitivity from the two."""
    mass = r.number("cone_mass_g", name="cone mass", unit="g", above=0.0, maximum=2000.0)
    angle = r.number("cone_angle_deg", name="cone angle", unit="°", above=0.0, maximum=180.0)
    if angle is not None and angle not in (30.0, 60.0):
        r.refuse("cone_angle_deg", f"cone angle must be 30 or 60°, not {fmt(angle, '°')}")
        angle = None
    factor = r.number("cone_factor", name="cone factor", required=False, above=0.0, maximum=5.0)
    res = r.number("penetration_resolution_mm", name="penetration resolution", unit="mm", required=False,
                   above=0.0, maximum=5.0)
    u_pen = (None if r.has_errors_under("penetration_resolution_mm")
             else _u_from_resolution(DEFAULT_PENETRATION_RESOLUTION_MM if res is None else res))
    if factor is None and angle is not None:
        factor = st.DEFAULT_CONE_FACTOR[int(angle)]
    if factor is not None and not r.has_errors_under("cone_factor"):
        out.results["cone_factor"] = factor
    cus: dict[str, float | None] = {}
    urels: dict[str, float | None] = {}
    for key, label in _SPECIMENS:
        cus[key], urels[key] = None, None
        spec = _specimen(r, key, label)
        if spec is None:
            continue
        pens = spec.numbers("penetration_mm", name="penetration", unit="mm", above=0.0, maximum=100.0)
        if pens is None:
            continue
        mean_pen = sum(pens) / len(pens)
        out.results[f"{key}_penetration_mm"] = mean_pen
        if mass is None or factor is None:
            continue
        cus[key] = st.fall_cone_strength_kpa(mass, mean_pen, factor)
        if u_pen is not None:
            urels[key] = 2.0 * st.u_mean_penetration(pens, u_pen) / mean_pen
    _write_strengths(out, cus, urels)


# -- unconfined compression ----------------------------------------------------------------------
def _read_ucs_specimen(spec: Readings, out: Outcome, prefix: str, u_load: float | None,
                       u_len: float | None) -> tuple[float | None, float | None]:
    """One specimen: its stress-strain curve, qu, failure strain and flags; (cu, relative u)."""
    d = spec.number("diameter_mm", name="specimen diameter", unit="mm", above=0.0, maximum=500.0)
    h = spec.number("height_mm", name="specimen height", unit="mm", above=0.0, maximum=1000.0)
    rows = spec.items("readings", noun="reading", min_items=2)
    pairs: list[tuple[float, float]] = []
    last: float | None = None
    for row in rows:
        dh = row.number("deformation_mm", name="axial deformation", unit="mm", minimum=0.0)
        load = row.number("load_n", name="axial load", unit="N", minimum=0.0)
        if dh is not None and h is not None and dh >= h:
            row.refuse("deformation_mm", f"axial deformation ({fmt(dh, 'mm')}) is not below the "
                                         f"specimen height ({fmt(h, 'mm')})")
            dh = None
        if dh is not None and last is not None and dh < last:
            row.refuse("deformation_mm", f"axial deformation ({fmt(dh, 'mm')}) is below the previous "
                                         f"reading's ({fmt(last, 'mm')})")
            dh = None
        if dh is not None:
            last = dh
        if dh is not None and load is not None:
            pairs.append((dh, load))
    if d is None or h is None:
        return None, None
    name = "remoulded specimen" if prefix else "specimen"
    ratio = h / d
    if not SLENDERNESS_RANGE[0] <= ratio <= SLENDERNESS_RANGE[1]:
        out.flag("specimen-slenderness", "warning",
                 f"{name} height to diameter ratio is {fmt(round(ratio, 2))}; ASTM D2166 asks for 2 to 2.5")
    if d < MIN_UCS_DIAMETER_MM:
        out.flag("specimen-too-small", "warning",
                 f"{name} diameter ({fmt(d, 'mm')}) is below {fmt(MIN_UCS_DIAMETER_MM, 'mm')}")
    curve = st.stress_strain(d, h, pairs)
    out.results[f"{prefix}stress_strain"] = [{"strain_pct": e, "stress_kpa": s} for e, s in curve]
    if spec.has_errors_under():
        return None, None
    fail = st.failure(curve)
    if fail is None:
        out.flag("no-readings-before-15pct", "error",
                 f"no reading of the {name} lies at or below 15 % strain: qu cannot be read")
        return None, None
    out.results[f"{prefix}unconfined_strength_kpa"] = fail.stress_kpa
    out.results[f"{prefix}strain_at_failure_pct"] = fail.strain_pct
    out.results[f"{prefix}failure_criterion"] = fail.criterion
    if fail.criterion == "strain-15":
        out.flag("no-peak-before-15pct", "warning",
                 f"the {name}'s stress was still rising at 15 % strain: qu is the stress at 15 % strain "
                 "(ASTM D2166)")
    elif fail.criterion == "end-of-test":
        out.flag("stopped-before-failure", "warning",
                 f"the {name}'s test stopped at {fmt(round(curve[-1][0], 2))} % strain with no peak and "
                 "before 15 % strain: qu is only a lower bound")
    cu = fail.stress_kpa / 2.0
    urel: float | None = None
    if u_load is not None and u_len is not None and fail.stress_kpa > 0.0:
        dh_f = fail.strain_pct / 100.0 * h
        area_m2 = math.pi * (d / 1000.0) ** 2 / 4.0 / (1.0 - dh_f / h)
        load_f = fail.stress_kpa * 1000.0 * area_m2
        urel = st.u_rel_unconfined(load_f, u_load, d, h, dh_f, u_len)
        _put_u(out, f"{prefix}unconfined_strength_kpa", fail.stress_kpa, urel)
    return cu, urel


@method("unconfined-compression", title="Unconfined compressive strength",
        standard="ASTM D2166/D2166M-16")
def unconfined_method(r: Readings, out: Outcome) -> None:
    """Stress-strain with area correction, qu by the D2166 rule, cu = qu / 2; sensitivity."""
    res_load = r.number("load_resolution_n", name="load resolution", unit="N", required=False, above=0.0)
    u_len = _length_u(r)
    u_load = None if res_load is None or u_len is None else _u_from_resolution(res_load)
    cus: dict[str, float | None] = {}
    urels: dict[str, float | None] = {}
    for key, label in _SPECIMENS:
        cus[key], urels[key] = None, None
        spec = _specimen(r, key, label)
        if spec is None:
            continue
        prefix = "" if key == "undisturbed" else "remoulded_"
        cus[key], urels[key] = _read_ucs_specimen(spec, out, prefix, u_load, u_len)
    _write_strengths(out, cus, urels)
