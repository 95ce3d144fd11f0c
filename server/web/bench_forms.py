"""The bench sheets: which inputs each method's page shows, as data rendered by one template.

A sheet is a list of sections; a section is either a table of rows (determinations, trials,
sieves, readings) at a JSON path, or a few single values. Every input is named by its path in
the method's readings (DESIGN.md section 3, ``server/api/examples.py``), so what the technician
types is exactly what the engine receives, and the engine's refusal of a field comes back to
that field. Adding a method means adding its sheet here; no template changes.

An input (or section) may depend on a choice made on the same sheet (``When``): the trials of
an Atterberg set ask for blows with the cup and for cone drops with the fall cone. A row may hold
a short list of its own at fixed indices (a compaction point's one or two water-content tins,
``determinations.0.tare_g``), so that the table, its added rows and its paths stay one level deep.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

from server.engine.compaction import EFFORTS
from server.engine.liquid_limit import CONE, LL_METHODS, MULTIPOINT, ONE_POINT
from server.engine.shrinkage import CONDITIONS as BAR_CONDITIONS
from server.web.forms import MAX_TEXT, typed_value


@dataclass(frozen=True)
class Option:
    value: str | int
    label: str


@dataclass(frozen=True)
class When:
    """Shown only while the choice at ``path`` (a readings path) is one of ``values``."""

    path: str
    values: tuple[str | int, ...]


@dataclass(frozen=True)
class Input:
    """One field: ``key`` is its readings path (inside the row, for a table)."""

    key: str
    label: str
    unit: str = ""
    kind: str = "decimal"  # decimal | integer | text | date | choice | flag
    options: tuple[Option, ...] = ()
    hint: str = ""
    when: When | None = None

    @property
    def inputmode(self) -> str:
        return {"decimal": "decimal", "integer": "numeric"}.get(self.kind, "text")

    def value(self, text: str) -> Any:
        """The readings value of what was typed or tapped (None when blank)."""
        typed = text.strip()
        if not typed:
            return None
        if self.kind in ("text", "date"):  # a date as the picker gives it, YYYY-MM-DD
            return typed[:MAX_TEXT]
        if self.kind == "flag":
            return True if typed == "true" else typed[:MAX_TEXT]
        if self.kind == "choice":
            for option in self.options:
                if str(option.value) == typed:
                    return option.value
            return typed[:MAX_TEXT]  # the engine refuses it with its own words
        return typed_value(typed)


@dataclass(frozen=True)
class Output:
    """A per-row result shown beside the row: ``results[result_key][row][field]``.

    ``align``: the engine lists this result in its own order (sieves coarsest first, valid
    readings only), so a row's entry is the one whose ``align`` value equals the row's typed one.
    """

    label: str
    result_key: str
    field: str | None = None
    unit: str = "%"
    rounding: str = "water_content"
    align: str | None = None


@dataclass(frozen=True)
class Rows:
    """A table of repeated readings at ``path`` (a JSON list of objects)."""

    path: str
    title: str
    noun: str
    inputs: tuple[Input, ...]
    rows: int  # rows shown at first (one spare row is always added below the typed ones)
    max_rows: int
    outputs: tuple[Output, ...] = ()
    when: When | None = None
    note: str = ""


@dataclass(frozen=True)
class Values:
    """A few single values, each at its own readings path."""

    title: str
    inputs: tuple[Input, ...]
    when: When | None = None
    note: str = ""


Section = Rows | Values


@dataclass(frozen=True)
class ResultLine:
    """How the results panel shows one result key."""

    key: str
    label: str
    unit: str = ""


# -- building blocks --------------------------------------------------------------------------

MASSES = (
    Input("container", "Tin no.", kind="text"),
    Input("tare_g", "Empty tin", "g"),
    Input("wet_tare_g", "Tin + wet soil", "g"),
    Input("dry_tare_g", "Tin + dry soil", "g"),
)
WATER = Output("Water content", "water_content_determinations")
TRIAL_WATER = Output("Water content", "liquid_limit_trials", "water_content")
BLOWS = Input("blows", "Blows", "blows", kind="integer")
DROPS = (
    Input("penetration_mm.0", "Drop 1", "mm"),
    Input("penetration_mm.1", "Drop 2", "mm"),
    Input("penetration_mm.2", "Drop 3", "mm", hint="if drops 1 and 2 differ by 0.5 to 1 mm"),
)
MEAN_DROP = Output("Mean penetration", "liquid_limit_trials", "penetration_mm", "mm", "penetration_mm")
TRIAL_LL = Output("Liquid limit of this trial", "liquid_limit_trials", "liquid_limit")
CONES = (
    Option("80g-30deg", "80 g / 30° cone (LL at 20 mm)"),
    Option("60g-60deg", "60 g / 60° cone (LL at 10 mm)"),
)
ANGLES = (Option(30, "30°"), Option(60, "60°"))
LL_METHOD_NAMES = {
    MULTIPOINT: "Cup, three or more trials",
    ONE_POINT: "Cup, one point",
    CONE: "Fall cone",
}
assert set(LL_METHOD_NAMES) == set(LL_METHODS)


def _flag(key: str, label: str) -> Input:
    return Input(key, label, kind="flag")


def _cannot(key: str = "not_determinable", label: str = "Cannot be determined (non-plastic)") -> Values:
    return Values("If the test cannot be done", (_flag(key, label),))


def _masses_rows(path: str, title: str, rows: int, max_rows: int, result_key: str) -> Rows:
    return Rows(path, title, "determination", MASSES, rows, max_rows, (Output("Water content", result_key),))


def _cup_rows(path: str, *, rows: int, max_rows: int, outputs: tuple[Output, ...]) -> Rows:
    return Rows(
        path,
        "Trials",
        "trial",
        (BLOWS, *MASSES),
        rows,
        max_rows,
        outputs,
        note="Blows to close the groove, then the water content specimen of each trial.",
    )


def _cone_rows(path: str) -> Rows:
    return Rows(
        path,
        "Trials",
        "trial",
        (*DROPS, *MASSES),
        4,
        8,
        (MEAN_DROP, TRIAL_WATER),
        note="Two cone drops per trial; a third when they differ by 0.5 to 1 mm.",
    )


def _atterberg_ll() -> tuple[Section, ...]:
    method = "liquid_limit.method"
    cup = When(method, (MULTIPOINT, ONE_POINT))
    cone = When(method, (CONE,))
    methods = tuple(Option(m, LL_METHOD_NAMES[m]) for m in LL_METHODS)
    return (
        Values(
            "Liquid limit",
            (
                Input(method, "Method", kind="choice", options=methods),
                Input("liquid_limit.cone", "Cone", kind="choice", options=CONES, when=cone),
                _flag("liquid_limit.not_determinable", "Cannot be determined (non-plastic)"),
            ),
            note="Choose the method first: the trials below ask for what it needs.",
        ),
        Rows(
            "liquid_limit.trials",
            "Liquid-limit trials",
            "trial",
            (
                replace(BLOWS, when=cup),
                *(replace(drop, when=cone) for drop in DROPS),
                *MASSES,
            ),
            4,
            8,
            (MEAN_DROP, TRIAL_WATER, TRIAL_LL),
        ),
    )


def _sieve(prefix: str = "") -> tuple[Section, ...]:
    return (
        Values(
            "Specimen",
            (
                Input(f"{prefix}dry_mass_g", "Dry mass before sieving", "g"),
                Input(f"{prefix}washed_dry_mass_g", "Dry mass after washing on 75 µm", "g", hint="optional"),
                Input(f"{prefix}pan_g", "Mass in the pan", "g", hint="optional: checks the mass recovered"),
            ),
        ),
        Rows(
            f"{prefix}sieves",
            "Sieves",
            "sieve",
            (Input("size_mm", "Aperture", "mm"), Input("retained_g", "Mass retained", "g")),
            8,
            24,
            (Output("Passing", "grading_curve", "percent_passing", "%", "percent_passing", align="size_mm"),),
            note="Any order; the mass retained on each sieve alone.",
        ),
    )


def _hydrometer(prefix: str = "", *, combined: bool = False) -> tuple[Section, ...]:
    own = (
        ()
        if combined
        else (
            Input(
                f"{prefix}separation_passing_pct", "Passing the separation sieve", "%", hint="default 100 %"
            ),
            Input(f"{prefix}passing_75um_pct", "Passing 75 µm", "%", hint="optional: gives the silt"),
        )
    )
    point = "hydrometer_points"
    return (
        Values(
            "Sedimentation specimen",
            (
                Input(f"{prefix}dry_mass_g", "Dry mass of the specimen", "g"),
                Input(f"{prefix}specific_gravity", "Specific gravity of the solids, Gs"),
                Input(
                    f"{prefix}hydrometer.type",
                    "Hydrometer",
                    kind="choice",
                    options=(Option("152H", "152H (g/L)"),),
                ),
                Input(f"{prefix}hydrometer.id", "Hydrometer id", kind="text", hint="optional"),
                Input(f"{prefix}meniscus_correction", "Meniscus correction", "g/L"),
                Input(f"{prefix}separation_sieve_mm", "Separation sieve", "mm", hint="default 2 mm"),
                *own,
            ),
        ),
        Rows(
            f"{prefix}zero_readings",
            "Zero readings (control cylinder)",
            "zero reading",
            (Input("temperature_c", "Temperature", "°C"), Input("reading", "Reading", "g/L")),
            2,
            8,
            note="Leave empty when each reading carries its own composite correction.",
        ),
        Rows(
            f"{prefix}readings",
            "Hydrometer readings",
            "reading",
            (
                Input("minutes", "Time", "min"),
                Input("reading", "Reading", "g/L"),
                Input("temperature_c", "Temperature", "°C"),
                Input("composite_correction", "Composite correction", "g/L", hint="optional"),
            ),
            6,
            24,
            (
                Output("Diameter", point, "diameter_mm", "mm", "diameter_mm", align="minutes"),
                Output("Finer", point, "percent_finer", "%", "percent_finer", align="minutes"),
            ),
            note="Time from the start of sedimentation.",
        ),
    )


def _ucs(specimen: str, title: str) -> tuple[Section, ...]:
    return (
        Values(
            f"{title}: size",
            (
                Input(f"{specimen}.diameter_mm", "Diameter", "mm"),
                Input(f"{specimen}.height_mm", "Height", "mm"),
            ),
        ),
        Rows(
            f"{specimen}.readings",
            f"{title}: load readings",
            "reading",
            (Input("deformation_mm", "Axial deformation", "mm"), Input("load_n", "Axial load", "N")),
            8,
            60,
        ),
    )


def _cone_drops(specimen: str, title: str) -> Values:
    return Values(
        title,
        tuple(Input(f"{specimen}.penetration_mm.{i}", f"Drop {i + 1}", "mm") for i in range(3)),
    )


# -- density, compaction and the other S12 methods (DESIGN.md section 8) -------------------------

BAR_CONDITION_NAMES = {
    "intact": "Intact",
    "cracked": "Cracked (pieces fitted together)",
    "curled": "Curled (mean of top and bottom faces)",
}
assert set(BAR_CONDITION_NAMES) == set(BAR_CONDITIONS)
EFFORT_NAMES = {
    "standard": "Standard (2.5 kg rammer)",
    "modified": "Modified (4.5 kg rammer)",
}
assert set(EFFORT_NAMES) == set(EFFORTS)
BALANCE_RESOLUTION = Input("balance.resolution_g", "Balance reads to", "g", hint="default 0.01 g")
PARTICLE_DENSITY_HINT = "blank: from this sample's particle-density test"


def _resolution(*inputs: Input) -> Values:
    """The instruments' resolutions the engine's uncertainty needs (as the vane's sheet asks)."""
    return Values("Instrument resolution (optional)", (*inputs, BALANCE_RESOLUTION))


def _callipers(default: str) -> Input:
    return Input("length_resolution_mm", "Callipers read to", "mm", hint=f"default {default}")


def _tins(path: str) -> tuple[Input, ...]:
    """A row's water-content tins at ``path`` (a list of mass determinations), as the inputs of
    the water-content sheet (``MASSES``): the first asked for, a second one optional."""
    first = tuple(replace(inp, key=f"{path}.0.{inp.key}") for inp in MASSES)
    second = tuple(
        replace(
            inp,
            key=f"{path}.1.{inp.key}",
            label=f"2nd {inp.label[0].lower()}{inp.label[1:]}",
            hint="optional",
        )
        for inp in MASSES
    )
    return (*first, *second)


def _compaction() -> tuple[Section, ...]:
    efforts = tuple(Option(e, EFFORT_NAMES[e]) for e in EFFORTS)
    return (
        Values(
            "Mould and rammer",
            (
                Input("effort", "Compactive effort", kind="choice", options=efforts),
                Input("mould_volume_cm3", "Mould volume", "cm³", hint="from the mould's calibration"),
                Input("mould_g", "Mould with base plate", "g"),
                Input("particle_density_mg_m3", "Particle density", "Mg/m³", hint=PARTICLE_DENSITY_HINT),
            ),
            note="The particle density draws the air-voids lines on the chart.",
        ),
        Rows(
            "points",
            "Compaction points",
            "point",
            (
                Input("mould_soil_g", "Mould + compacted soil", "g"),
                *_tins("determinations"),
            ),
            5,
            10,
            (
                Output("Water content", "compaction_point_results", "water_content", "%", "water_content"),
                Output(
                    "Dry density",
                    "compaction_point_results",
                    "dry_density_mg_m3",
                    "Mg/m³",
                    "dry_density_mg_m3",
                ),
            ),
            note="Each point: the mould with its compacted soil, then the water-content tin of that "
            "soil. Any order: the points are taken in order of water content.",
        ),
        _resolution(),
    )


# Every sheet ends with the test date and the instruments used. The bench fills each tin's empty
# mass, each instrument's calibration due date and a balance's capacity from the registers
# (static/bench.js); the engine flags an instrument used after its due date and refuses a mass
# above the capacity of the balance named (server/engine/equipment.py).
TEST_DATE = Values("Test date", (Input("tested_on", "Date tested", kind="date"),))
EQUIPMENT = Rows(
    "equipment",
    "Instruments used",
    "instrument",
    (
        Input("id", "Instrument no.", kind="text"),
        Input("calibration_due", "Calibration due", kind="date", hint="from the register"),
        Input("capacity_g", "Capacity", "g", hint="a balance's, from the register"),
    ),
    2,
    8,
    note="Type an instrument's number: its calibration state comes from the register.",
)
INSTRUMENTS: dict[str, str] = {
    "particle-density": "the balance, the oven, each pycnometer and the thermometer",
    "linear-shrinkage": "the shrinkage mould, the oven and the callipers",
    "density": "the balance, the callipers and the oven",
    "loss-on-ignition": "the balance, the oven and the furnace",
    "compaction": "the mould, the rammer, the balance and the oven",
}
"""The instruments a method's table of instruments names in its note, where the sheet says."""


def _conditions(method: str) -> tuple[Section, ...]:
    uses = INSTRUMENTS.get(method)
    if uses is None:
        return (TEST_DATE, EQUIPMENT)
    note = f"List {uses} by number: each one's calibration state comes from the register."
    return (TEST_DATE, replace(EQUIPMENT, note=note))


_SHEETS: dict[str, tuple[Section, ...]] = {
    "water-content": (
        _masses_rows("determinations", "Determinations", 2, 8, "water_content_determinations"),
    ),
    "ll-cup-multipoint": (
        _cup_rows("trials", rows=4, max_rows=8, outputs=(TRIAL_WATER,)),
        _cannot(),
    ),
    "ll-cup-one-point": (
        _cup_rows("trials", rows=2, max_rows=2, outputs=(TRIAL_WATER, TRIAL_LL)),
        _cannot(),
    ),
    "ll-cone": (
        Values("Cone", (Input("cone", "Cone", kind="choice", options=CONES),)),
        _cone_rows("trials"),
        _cannot(),
    ),
    "plastic-limit": (
        _masses_rows("determinations", "Threads", 2, 6, "plastic_limit_determinations"),
        _cannot(label="Threads will not roll (non-plastic)"),
    ),
    "atterberg": (
        _masses_rows(
            "water_content.determinations", "Natural water content", 2, 6, "water_content_determinations"
        ),
        *_atterberg_ll(),
        _masses_rows("plastic_limit.determinations", "Plastic limit", 2, 6, "plastic_limit_determinations"),
        Values(
            "Plastic limit cannot be determined",
            (_flag("plastic_limit.not_determinable", "Threads will not roll (non-plastic)"),),
        ),
        Values(
            "From the particle-size test (% of dry mass)",
            (
                Input("clay_fraction", "Finer than 2 µm", "%"),
                Input("fines", "Fines, finer than 75 µm", "%"),
                Input("sand", "Sand", "%"),
                Input("gravel", "Gravel", "%"),
            ),
            note="Optional: gives the activity and the soil group.",
        ),
    ),
    "sieve": _sieve(),
    "hydrometer": _hydrometer(),
    "grading": (
        *_sieve("sieve."),
        *_hydrometer("hydrometer.", combined=True),
    ),
    "vane": (
        Values(
            "Vane",
            (Input("diameter_mm", "Vane diameter", "mm"), Input("height_mm", "Vane height", "mm")),
        ),
        Values(
            "Peak torque",
            (
                Input("undisturbed.torque_nm", "Undisturbed", "N·m"),
                Input("remoulded.torque_nm", "Remoulded", "N·m", hint="optional: gives the sensitivity"),
            ),
        ),
        Values(
            "Instrument resolution (optional)",
            (
                Input("torque_resolution_nm", "Torque", "N·m"),
                Input("length_resolution_mm", "Length", "mm"),
            ),
        ),
    ),
    "fall-cone-strength": (
        Values(
            "Cone",
            (
                Input("cone_mass_g", "Cone mass", "g"),
                Input("cone_angle_deg", "Cone angle", kind="choice", options=ANGLES),
                Input("cone_factor", "Cone factor", hint="default 0.8 at 30°, 0.27 at 60°"),
            ),
        ),
        _cone_drops("undisturbed", "Undisturbed specimen: penetration"),
        _cone_drops("remoulded", "Remoulded specimen: penetration (optional)"),
    ),
    "unconfined-compression": (
        *_ucs("undisturbed", "Undisturbed specimen"),
        *_ucs("remoulded", "Remoulded specimen (optional)"),
        Values(
            "Instrument resolution (optional)",
            (Input("load_resolution_n", "Load", "N"), Input("length_resolution_mm", "Length", "mm")),
        ),
    ),
    "classification": (
        Values(
            "Limits",
            (
                Input("liquid_limit", "Liquid limit", "%"),
                Input("plastic_limit", "Plastic limit", "%"),
                Input("plasticity_index", "Plasticity index", "%", hint="optional with the plastic limit"),
                Input(
                    "liquid_limit_oven_dried", "Liquid limit, oven-dried", "%", hint="optional: organic check"
                ),
                _flag("nonplastic", "Non-plastic"),
                _flag("peat", "Peat or highly organic soil (by eye)"),
            ),
        ),
        Values(
            "Grading (% of dry mass)",
            (
                Input("gravel", "Gravel", "%"),
                Input("sand", "Sand", "%"),
                Input("fines", "Fines, finer than 75 µm", "%"),
                Input("percent_passing_2mm", "Passing 2 mm", "%"),
                Input("percent_passing_0_425mm", "Passing 425 µm", "%"),
            ),
        ),
        Values(
            "Grading curve (coarse soils)",
            (
                Input("d10_mm", "D10", "mm"),
                Input("d30_mm", "D30", "mm"),
                Input("d60_mm", "D60", "mm"),
                Input("cu", "Uniformity Cu"),
                Input("cc", "Curvature Cc"),
            ),
            note="Needed for a coarse soil with 12 % fines or less: D10, D30, D60, or Cu and Cc.",
        ),
    ),
    "particle-density": (
        Rows(
            "determinations",
            "Pycnometer determinations",
            "determination",
            (
                Input("pycnometer_g", "Pycnometer, empty", "g"),
                Input("pycnometer_soil_g", "Pycnometer + dry soil", "g"),
                Input("pycnometer_soil_water_g", "Pycnometer + soil + water", "g"),
                Input("pycnometer_water_g", "Pycnometer + water", "g"),
                Input("temperature_c", "Water temperature", "°C"),
            ),
            2,
            6,
            (
                Output(
                    "Particle density",
                    "particle_density_determinations",
                    None,
                    "Mg/m³",
                    "particle_density_mg_m3",
                ),
            ),
            note="Oven-dried soil. Fill to the mark for each weighing with water; note its temperature.",
        ),
        _resolution(),
    ),
    "linear-shrinkage": (
        Values(
            "Bar",
            (
                Input("mould_length_mm", "Mould length", "mm", hint="inside length"),
                Input("oven_dry_length_mm", "Oven-dry length of the bar", "mm"),
                Input(
                    "condition",
                    "Condition of the bar",
                    kind="choice",
                    options=tuple(Option(c, BAR_CONDITION_NAMES[c]) for c in BAR_CONDITIONS),
                ),
            ),
        ),
        Values("Instrument resolution (optional)", (_callipers("0.1 mm"),)),
    ),
    "density": (
        Rows(
            "specimens",
            "Specimens",
            "specimen",
            (
                Input("mass_g", "Mass", "g"),
                Input("diameter_mm", "Diameter", "mm"),
                Input("height_mm", "Height", "mm"),
            ),
            1,
            6,
            (Output("Bulk density", "bulk_density_determinations", None, "Mg/m³", "bulk_density_mg_m3"),),
            note="Each specimen a trimmed right cylinder, measured with callipers.",
        ),
        _masses_rows("water_content.determinations", "Water content", 2, 6, "water_content_determinations"),
        Values(
            "Particle density (optional)",
            (Input("particle_density_mg_m3", "Particle density", "Mg/m³", hint=PARTICLE_DENSITY_HINT),),
            note="Gives the void ratio, the porosity and the degree of saturation.",
        ),
        _resolution(_callipers("0.01 mm")),
    ),
    "loss-on-ignition": (
        Values("Furnace", (Input("furnace_c", "Furnace temperature", "°C", hint="440 °C usually"),)),
        Rows(
            "determinations",
            "Determinations",
            "determination",
            (
                Input("crucible_g", "Crucible, empty", "g"),
                Input("crucible_dry_g", "Crucible + oven-dry soil", "g"),
                Input("crucible_ignited_g", "Crucible + ignited soil", "g"),
            ),
            2,
            6,
            (Output("Organic content", "organic_content_determinations", rounding="organic_content"),),
        ),
        _resolution(),
    ),
    "compaction": _compaction(),
}
SHEETS: dict[str, tuple[Section, ...]] = {
    method: (*sections, *_conditions(method)) for method, sections in _SHEETS.items()
}

# The results panel, in this order, each shown when the engine gave it.
RESULT_LINES: tuple[ResultLine, ...] = (
    ResultLine("water_content", "Water content w", "%"),
    ResultLine("liquid_limit", "Liquid limit LL", "%"),
    ResultLine("plastic_limit", "Plastic limit PL", "%"),
    ResultLine("plasticity_index", "Plasticity index PI"),
    ResultLine("liquidity_index", "Liquidity index LI"),
    ResultLine("consistency_index", "Consistency index CI"),
    ResultLine("flow_index", "Flow index"),
    ResultLine("activity", "Activity A"),
    ResultLine("uscs_symbol", "Soil group (USCS)"),
    ResultLine("uscs_name", "Group name"),
    ResultLine("aashto_group", "AASHTO group"),
    ResultLine("group_index", "Group index"),
    ResultLine("gravel", "Gravel", "%"),
    ResultLine("sand", "Sand", "%"),
    ResultLine("fines", "Fines", "%"),
    ResultLine("silt", "Silt", "%"),
    ResultLine("clay_fraction", "Clay, finer than 2 µm", "%"),
    ResultLine("d10_mm", "D10", "mm"),
    ResultLine("d30_mm", "D30", "mm"),
    ResultLine("d60_mm", "D60", "mm"),
    ResultLine("cu", "Uniformity Cu"),
    ResultLine("cc", "Curvature Cc"),
    ResultLine("sieve_mass_loss_pct", "Mass not recovered", "%"),
    ResultLine("undisturbed_penetration_mm", "Mean penetration, undisturbed", "mm"),
    ResultLine("remoulded_penetration_mm", "Mean penetration, remoulded", "mm"),
    ResultLine("cone_factor", "Cone factor"),
    ResultLine("unconfined_strength_kpa", "Unconfined strength qu", "kPa"),
    ResultLine("strain_at_failure_pct", "Strain at failure", "%"),
    ResultLine("undrained_strength_kpa", "Undrained strength cu", "kPa"),
    ResultLine("remoulded_unconfined_strength_kpa", "Remoulded qu", "kPa"),
    ResultLine("remoulded_strength_kpa", "Remoulded strength", "kPa"),
    ResultLine("sensitivity", "Sensitivity St"),
    ResultLine("sensitivity_class", "Sensitivity"),
    ResultLine("particle_density_mg_m3", "Particle density ρs", "Mg/m³"),
    ResultLine("specific_gravity", "Specific gravity Gs at 20 °C"),
    ResultLine("linear_shrinkage", "Linear shrinkage LS", "%"),
    ResultLine("bulk_density_mg_m3", "Bulk density ρ", "Mg/m³"),
    ResultLine("dry_density_mg_m3", "Dry density ρd", "Mg/m³"),
    ResultLine("particle_density_used_mg_m3", "Particle density used ρs", "Mg/m³"),
    ResultLine("void_ratio", "Void ratio e"),
    ResultLine("porosity", "Porosity n"),
    ResultLine("degree_of_saturation", "Degree of saturation Sr", "%"),
    ResultLine("organic_content", "Organic content (loss on ignition)", "%"),
    ResultLine("maximum_dry_density_mg_m3", "Maximum dry density", "Mg/m³"),
    ResultLine("optimum_water_content", "Optimum water content", "%"),
)


def input_at(method: str, path: str) -> Input | None:
    """The input of ``method``'s sheet that ``path`` names (a table's row index included), if any."""
    for section in SHEETS.get(method, ()):
        if isinstance(section, Values):
            for inp in section.inputs:
                if inp.key == path:
                    return inp
            continue
        head = section.path + "."
        if not path.startswith(head):
            continue
        index, _, key = path[len(head) :].partition(".")
        if not (index.isdigit() and index.isascii()) or int(index) >= section.max_rows:
            continue
        for inp in section.inputs:
            if inp.key == key:
                return inp
    return None
