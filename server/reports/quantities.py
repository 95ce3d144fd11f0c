"""One test's results and readings as printed: labels, units, rounding and tables (pure).

Result lines come in the order a reader expects (``RESULT_LABELS``), then the further keys in a
fixed order, the same on every backend; readings are shown as they were typed, each list of rows
as a table with the value computed for each row beside it.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from server.reports.formatting import NP, finite, humanise, show, typed, with_u
from server.reports.names import method_name
from server.reports.summary import NP_KEYS, aashto, limit, nonplastic


@dataclass(frozen=True)
class ResultLine:
    label: str
    value: str
    unit: str = ""
    uncertainty: str = ""
    coarser: bool = False  # the value as reported, coarser than the last figure of its uncertainty


@dataclass(frozen=True)
class Table:
    title: str
    columns: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]


# Result lines in the order a reader expects; LL, PL and PI carry no % sign (ASTM D4318 report
# clause, from memory), water content and clay fraction do.
RESULT_LABELS: tuple[tuple[str, str, str], ...] = (
    ("water_content", "Water content, w", "%"),
    ("liquid_limit", "Liquid limit, LL", ""),
    ("plastic_limit", "Plastic limit, PL", ""),
    ("plasticity_index", "Plasticity index, PI", ""),
    ("flow_index", "Flow index, If", ""),
    ("liquidity_index", "Liquidity index, LI", ""),
    ("consistency_index", "Consistency index, CI", ""),
    ("activity", "Activity, A", ""),
    ("clay_fraction", "Clay fraction, < 2 µm", "%"),
    ("sensitivity", "Sensitivity, St", ""),
    ("undrained_strength_kpa", "Undrained shear strength, cu", "kPa"),
)
# Labels and units of further result keys (grading, strength, classification detail).
_OTHER_LABELS: dict[str, tuple[str, str]] = {
    "gravel": ("Gravel, 4.75 to 75 mm", "%"),
    "sand": ("Sand, 0.075 to 4.75 mm", "%"),
    "fines": ("Fines, < 0.075 mm", "%"),
    "silt": ("Silt, 0.002 to 0.075 mm", "%"),
    "clay": ("Clay, < 0.002 mm", "%"),
    "percent_passing_2mm": ("Passing 2 mm", "%"),
    "percent_passing_0_425mm": ("Passing 0.425 mm", "%"),
    "sieve_mass_loss_pct": ("Sieve mass loss", "%"),
    "cu": ("Coefficient of uniformity, Cu", ""),
    "cc": ("Coefficient of curvature, Cc", ""),
    "uscs_borderline": ("USCS borderline symbol", ""),
    "remoulded_strength_kpa": ("Remoulded undrained strength, cu,r", "kPa"),
    "unconfined_strength_kpa": ("Unconfined compressive strength, qu", "kPa"),
    "remoulded_unconfined_strength_kpa": ("Remoulded unconfined strength, qu,r", "kPa"),
    "strain_at_failure_pct": ("Strain at failure", "%"),
    "remoulded_strain_at_failure_pct": ("Remoulded strain at failure", "%"),
    "sensitivity_class": ("Sensitivity class (Skempton & Northey 1952)", ""),
    # S12 methods (DESIGN.md section 8): densities in Mg/m³, porosity as a fraction
    "particle_density_mg_m3": ("Particle density, ρs", "Mg/m³"),
    "specific_gravity": ("Specific gravity of the solids at 20 °C, Gs", ""),
    "bulk_density_mg_m3": ("Bulk density, ρ", "Mg/m³"),
    "dry_density_mg_m3": ("Dry density, ρd", "Mg/m³"),
    "void_ratio": ("Void ratio, e", ""),
    "porosity": ("Porosity, n (fraction)", ""),
    "degree_of_saturation": ("Degree of saturation, Sr", "%"),
    "linear_shrinkage": ("Linear shrinkage, LS", "%"),
    "organic_content": ("Organic content by loss on ignition, of the dry mass", "%"),
    "maximum_dry_density_mg_m3": ("Maximum dry density, ρd,max", "Mg/m³"),
    "optimum_water_content": ("Optimum water content, wopt", "%"),
    "bs_plasticity_symbol": ("Plasticity chart symbol (BS 5930)", ""),
    "bs_plasticity_term": ("Plasticity term (BS 5930)", ""),
    "oven_dried_ll_ratio": ("Liquid limit oven-dried / not dried", ""),
    "organic": ("Organic by the liquid-limit ratio (ASTM D2487: below 0.75)", ""),
}
_NOT_SHOWN = {
    "interpretation",
    "plasticity_chart",
    "flow_curve",
    "nonplastic",
    "uncertainty",
    "uscs_symbol",
    "uscs_name",
    "aashto_group",
    "group_index",
    "liquid_limit_method",
    "air_voids_lines",
    "zero_air_voids",
    "compaction_points",
}
_COLUMN_LABELS = {
    "container": "Container",
    "blows": "Blows, N",
    "penetration_mm": "Cone penetration (mm)",
    "tare_g": "Tare (g)",
    "wet_tare_g": "Wet soil + tare (g)",
    "dry_tare_g": "Dry soil + tare (g)",
}
_COLUMN_LABELS |= {  # the S12 readings (DESIGN.md section 8), in the order they are typed
    "pycnometer_g": "Pycnometer, m1 (g)",
    "pycnometer_soil_g": "+ dry soil, m2 (g)",
    "pycnometer_soil_water_g": "+ soil + water, m3 (g)",
    "pycnometer_water_g": "+ water, m4 (g)",
    "crucible_g": "Crucible (g)",
    "crucible_dry_g": "+ dry soil (g)",
    "crucible_ignited_g": "+ ignited soil (g)",
    "mould_soil_g": "Mould + soil (g)",
    "mass_g": "Mass (g)",
    "diameter_mm": "Diameter (mm)",
    "height_mm": "Height (mm)",
}
# Columns in this order, the rest after them as stored: PostgreSQL's JSONB keeps no key order.
_COLUMN_ORDER = tuple(_COLUMN_LABELS)
# A computed column beside the rows of a readings list: (method, list) -> (result key holding one
# value per row, column heading, the key whose rounding applies), as each water content is shown.
_PER_ROW: dict[tuple[str, str], tuple[str, str, str]] = {
    ("particle-density", "determinations"): (
        "particle_density_determinations",
        "ρs (Mg/m³)",
        "particle_density_mg_m3",
    ),
    ("loss-on-ignition", "determinations"): (
        "organic_content_determinations",
        "Organic content (%)",
        "organic_content",
    ),
    ("density", "specimens"): ("bulk_density_determinations", "ρ (Mg/m³)", "bulk_density_mg_m3"),
}


def result_lines(results: Mapping[str, Any]) -> tuple[ResultLine, ...]:
    """The measured results of one test, rounded, with units and expanded uncertainty (k = 2)."""
    unc = results.get("uncertainty")
    unc = unc if isinstance(unc, Mapping) else {}
    lines: list[ResultLine] = []

    def line(key: str, label: str, unit: str, text: str) -> ResultLine:
        """The value with its expanded uncertainty as GUM 7.2.6 writes it (formatting.with_u);
        "NP" and text stand alone."""
        u = unc.get(key)
        if text == NP or not isinstance(u, Mapping) or finite(results.get(key)) is None:
            return ResultLine(label, text, unit)
        shown_u = with_u(key, results.get(key), u.get("U"), u.get("k"))
        return ResultLine(label, shown_u.value, unit, shown_u.u_text, shown_u.coarser)

    for key, label, unit in RESULT_LABELS:
        if key in NP_KEYS and (key in results or nonplastic(results)):
            lines.append(line(key, label, unit, limit(key, results)))
        elif results.get(key) is not None:
            lines.append(line(key, label, unit, show(key, results[key])))
    if results.get("uscs_symbol") or results.get("uscs_name"):
        symbol, name = results.get("uscs_symbol"), results.get("uscs_name")
        # the symbol alone where no group name applies; uscs_note says why
        text = ", ".join(str(v) for v in (symbol, name) if v) if symbol else show("uscs_name", name)
        lines.append(ResultLine("USCS (ASTM D2487)", text))
    if results.get("aashto_group"):
        lines.append(ResultLine("AASHTO group (GI), M 145", aashto(results)))
    known = {k for k, _, _ in RESULT_LABELS} | _NOT_SHOWN
    # Labelled keys in the table's order, then the rest by name: the same order on every backend
    # (PostgreSQL's JSONB keeps no key order).
    order = {key: i for i, key in enumerate(_OTHER_LABELS)}
    for key, value in sorted(results.items(), key=lambda kv: (order.get(kv[0], len(order)), kv[0])):
        if key in known or key.endswith(("_trials", "_determinations")):
            continue
        if isinstance(value, Mapping | list | tuple) or value is None:
            continue
        label, unit = _OTHER_LABELS.get(key, (humanise(key), ""))
        lines.append(line(key, label, unit, show(key, value)))
    return tuple(lines)


# The readings a USCS group name needs, as a reader calls them (ASTM D2487-17 cl. 11-12).
_NAME_INPUTS = {
    "fines": "the fines content",
    "sand": "the sand content",
    "gravel": "the gravel content",
    "cu": "the coefficient of uniformity",
    "cc": "the coefficient of curvature",
}


def uscs_note(results: Mapping[str, Any], flag_messages: Sequence[str] = ()) -> str:
    """Why a USCS symbol stands without its group name: what the name needs that the test did
    not have, or the engine's own remark; empty when the name is given."""
    if not results.get("uscs_symbol") or results.get("uscs_name"):
        return ""
    missing = results.get("uscs_name_missing")
    if isinstance(missing, list) and missing:
        needs = [_NAME_INPUTS.get(str(k), humanise(str(k)).lower()) for k in missing]
        listed = needs[0] if len(needs) == 1 else ", ".join(needs[:-1]) + " and " + needs[-1]
        return (
            f"USCS group symbol {results['uscs_symbol']} alone: the group name (ASTM D2487) needs "
            f"{listed}, not measured in this test."
        )
    reason = next(iter(flag_messages), "")
    return f"USCS group symbol {results['uscs_symbol']} alone: " + (
        f"{reason}."
        if reason
        else "the group name (ASTM D2487) needs the grading, not measured in this test."
    )


def _per_row_w(results: Mapping[str, Any], path: tuple[str, ...], method: str) -> list[Any] | None:
    """The engine's water content of each row of a readings list, found by where the list sits."""
    last = path[-1]
    parent = path[-2] if len(path) > 1 else method
    if last == "trials":
        rows = results.get("liquid_limit_trials")
        if isinstance(rows, list):
            return [row.get("water_content") if isinstance(row, Mapping) else row for row in rows]
        return None
    if last == "determinations":
        if parent.replace("-", "_").startswith("plastic_limit"):
            key = "plastic_limit_determinations"
        else:
            key = "water_content_determinations"
        rows = results.get(key)
        if isinstance(rows, list):
            return [row.get("water_content") if isinstance(row, Mapping) else row for row in rows]
    return None


def _is_rows(value: Any) -> bool:
    """A readings list printed as a table: a non-empty list of objects."""
    return isinstance(value, list | tuple) and bool(value) and all(isinstance(v, Mapping) for v in value)


def _per_row(
    results: Mapping[str, Any], path: tuple[str, ...], method: str
) -> tuple[str, str, list[Any]] | None:
    """The computed column of a readings list: its heading, the key whose rounding applies, and
    one value per row: each water content, or the method's own (``_PER_ROW``)."""
    own = _PER_ROW.get((method, path[-1])) if len(path) == 1 else None
    if own is not None:
        values = results.get(own[0])
        return (own[1], own[2], list(values)) if isinstance(values, list) else None
    ws = _per_row_w(results, path, method)
    return None if ws is None else ("w (%)", "water_content", ws)


def _nested_table(title: str, noun: str, parents: Sequence[Mapping[str, Any]], key: str) -> Table:
    """One table of the rows each parent row holds under ``key``, each led by its parent's number."""
    children = [
        (i + 1, j + 1, child)
        for i, parent in enumerate(parents)
        if _is_rows(parent.get(key))
        for j, child in enumerate(parent[key])
    ]
    cols: list[str] = [c for c in _COLUMN_ORDER if any(c in child for _, _, child in children)]
    for _, _, child in children:
        cols += [str(k) for k in child if str(k) not in cols and not _is_rows(child[k])]
    head = (noun, "#", *(_COLUMN_LABELS.get(c, humanise(c)) for c in cols))
    rows = tuple((str(i), str(j), *(typed(child.get(c)) for c in cols)) for i, j, child in children)
    return Table(title, head, rows)


def readings_tables(
    method: str, readings: Mapping[str, Any], results: Mapping[str, Any]
) -> tuple[tuple[Table, ...], tuple[ResultLine, ...]]:
    """The readings as typed: lists of rows as tables (with each row's water content), the rest as lines."""
    tables: list[Table] = []
    others: list[ResultLine] = []

    def walk(obj: Mapping[str, Any], path: tuple[str, ...]) -> None:
        for key, value in obj.items():
            here = (*path, str(key))
            label = " — ".join([humanise(here[0]), *(humanise(p).lower() for p in here[1:])])
            if isinstance(value, Mapping):
                walk(value, here)
            elif _is_rows(value):
                nested = {str(k) for row in value for k, v in row.items() if _is_rows(v)}
                cols: list[str] = [c for c in _COLUMN_ORDER if any(c in row for row in value)]
                for row in value:
                    cols += [str(k) for k in row if str(k) not in cols and str(k) not in nested]
                computed = _per_row(results, here, method)
                head = ["#", *(_COLUMN_LABELS.get(c, humanise(c)) for c in cols)]
                if computed is not None:
                    head.append(computed[0])
                rows: list[tuple[str, ...]] = []
                for i, row in enumerate(value):
                    cells = [str(i + 1), *(typed(row.get(c)) for c in cols)]
                    if computed is not None:
                        _, key, values = computed
                        cells.append(show(key, values[i] if i < len(values) else None))
                    rows.append(tuple(cells))
                tables.append(Table(label, tuple(head), tuple(rows)))
                for key in sorted(nested):  # rows within rows (a compaction point's determinations)
                    noun = "Point" if here[-1] == "points" else "Row"
                    tables.append(_nested_table(f"{label} — {humanise(key).lower()}", noun, value, key))
            else:
                # a method named inside the readings (the Atterberg set's liquid-limit method) by its name
                text = method_name(value) if key == "method" and isinstance(value, str) else typed(value)
                others.append(ResultLine(label, text))

    walk(readings, ())
    return tuple(tables), tuple(others)


def linked_notes(results: Mapping[str, Any]) -> list[str]:
    """A sentence for each value a test took from another test of its sample or from its job's
    family of standards (``services.linked_inputs``), so the report says where it came from."""
    notes = []
    for path, source in (results.get("linked_inputs") or {}).items():
        if not isinstance(source, Mapping):
            continue
        field = humanise(str(path).rpartition(".")[2].replace("_mg_m3", ""))
        if "test_id" in source:
            notes.append(
                f"{field.capitalize()} {typed(source.get('value'))} is taken from the "
                f"{method_name(str(source.get('method')))} test (test {source['test_id']}) "
                "of the same sample."
            )
        else:
            notes.append(
                f"{field.capitalize()}: {typed(source.get('value'))}, as the job's standards "
                f"({typed(source.get('standards'))}) ask."
            )
    return notes


def particle_density_used(results: Mapping[str, Any]) -> tuple[str, str] | None:
    """The particle density a density or compaction test computed with, as text, and where it
    came from ("as entered", or the particle-density test that gave it); None without one."""
    value = results.get("particle_density_used_mg_m3")
    if not finite(value):
        return None
    source = (results.get("linked_inputs") or {}).get("particle_density_mg_m3")
    where = (
        f"from test {source['test_id']}"
        if isinstance(source, Mapping) and "test_id" in source
        else "as entered"
    )
    return show("particle_density_mg_m3", value), where


def plasticity_basis_note(results: Mapping[str, Any]) -> str | None:
    """The plasticity descriptor's table and its rule at shared end points, as the engine states them."""
    basis = results.get("plasticity_basis")
    if not isinstance(basis, Mapping) or not basis.get("table"):
        return None
    return f"Plasticity descriptor: {basis['table']}; {basis.get('end_points', '')}".rstrip("; ")
