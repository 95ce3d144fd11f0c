"""The exact shape of each method's readings: the API's OpenAPI document and its checks.

The engine reads readings field by field and ignores a key it does not know, so a typing slip
in a key (``"tare"`` for ``"tare_g"``) would come back as a missing value rather than as the
mistake it is. Readings that come whole (the API, ``claybench calc``, a whole save) are
therefore checked against a closed model of their method: every key the engine reads for that
method (``server/engine``'s method modules, whose docstrings show the shapes; DESIGN.md section
3), nothing else, each number a JSON number or a decimal string (a string keeps the digits as
read: ``server.engine.readings``).

The models describe shape only. Whether a value makes sense (a dry mass above the wet mass, a
blow count of 300) is the engine's to say, with its own words, as a 422 that the OpenAPI
document lists; so a request these models allow is one the engine accepts or refuses field by
field, never one it cannot read. The checked readings are passed on exactly as they came: the
models never replace what the client sent.
"""

from __future__ import annotations

from typing import Annotated, Any

from pydantic import BaseModel, ConfigDict, Field, PlainValidator, StringConstraints, WithJsonSchema
from pydantic import ValidationError as PydanticError

from server.engine import FieldError
from server.engine.atterberg import PLASTICITY_TERMS
from server.engine.compaction import EFFORTS
from server.engine.liquid_limit import CONES, LL_METHODS
from server.engine.readings import DECIMAL, MAX_NUMBER_TEXT
from server.engine.shrinkage import CONDITIONS as BAR_CONDITIONS

_DECIMAL_TEXT = {"type": "string", "pattern": DECIMAL.pattern, "maxLength": MAX_NUMBER_TEXT}
_BLANK = {"type": "string", "maxLength": 0, "description": "blank: not entered (as a cleared field)"}


def _scalar(*kinds: type) -> Any:
    """A check that the value is of one of these JSON kinds (an object or a list in place of a
    number is a shape error, which tidying would otherwise hide); its sense is the engine's."""

    def check(value: Any) -> Any:
        if (isinstance(value, bool) and bool not in kinds) or not isinstance(value, kinds):
            raise ValueError("a " + " or ".join(_KIND_WORDS[k] for k in kinds) + " is needed")
        return value

    return PlainValidator(check)


_KIND_WORDS = {int: "number", float: "number", str: "text", bool: "true or false"}

# A value of readings is described by its JSON Schema in the OpenAPI document and checked by
# the engine (whose refusal names the field in the words the bench shows); it is kept exactly
# as sent. Text the engine reads as it is (a deviation) is checked here.
Number = Annotated[
    Any,
    _scalar(int, float, str),
    WithJsonSchema(
        {
            "anyOf": [{"type": "number"}, _DECIMAL_TEXT, _BLANK],
            "description": 'a JSON number, or a decimal string that keeps the digits as read ("44.20")',
        }
    ),
]
Count = Annotated[
    Any,
    _scalar(int, float, str),
    WithJsonSchema({"anyOf": [{"type": "integer"}, _DECIMAL_TEXT, _BLANK], "description": "a whole number"}),
]
NotDeterminable = Annotated[
    Any,
    _scalar(bool, str),
    WithJsonSchema(
        {
            "anyOf": [{"type": "boolean"}, {"type": "string", "maxLength": 200}],
            "description": "true (or the reason, in words) when the test cannot be done",
        }
    ),
]
Day = Annotated[
    Any,
    _scalar(str),
    WithJsonSchema(
        {"anyOf": [{"type": "string", "format": "date"}, _BLANK], "description": "a date, YYYY-MM-DD"}
    ),
]
Cone = Annotated[Any, _scalar(str), WithJsonSchema({"type": "string", "enum": list(CONES)})]
LiquidLimitMethod = Annotated[Any, _scalar(str), WithJsonSchema({"type": "string", "enum": list(LL_METHODS)})]
PlasticityTerms = Annotated[
    Any, _scalar(str), WithJsonSchema({"type": "string", "enum": list(PLASTICITY_TERMS)})
]
HydrometerType = Annotated[Any, _scalar(str), WithJsonSchema({"type": "string", "enum": ["152H"]})]
# A container's or hydrometer's id, and an instrument's: the engine's own limits.
Label = Annotated[str, StringConstraints(max_length=40)]
InstrumentId = Annotated[str, StringConstraints(max_length=60)]  # the engine's limit
Text = Annotated[str, StringConstraints(max_length=200)]


MAX_ROWS = 100
"""The most rows of any table in readings: more than any sheet has (60 load readings of an
unconfined compression test), fewer than would make a request a burden."""


class Closed(BaseModel):
    """Readings objects take only the keys they name."""

    model_config = ConfigDict(extra="forbid")


class Balance(Closed):
    resolution_g: Number | None = None
    calibration_u_g: Number | None = None


class Instrument(Closed):
    id: InstrumentId | None = None
    calibration_due: Day | None = None
    capacity_g: Number | None = None


class Conditions(Closed):
    """What any readings (and each part of an Atterberg set) may carry: the test date, the
    instruments used and the balance's figures (``server.engine.equipment``, ``uncertainty``)."""

    tested_on: Day | None = None
    deviation: Text | None = Field(
        None, description="a departure from the standard procedure, for the report"
    )
    equipment: (
        Annotated[
            list[Instrument | None],
            Field(max_length=MAX_ROWS, description="the instruments used, by their register numbers"),
        ]
        | None
    ) = None
    balance: Balance | None = None


class Determination(Closed):
    container: Label | None = None
    tare_g: Number | None = None
    wet_tare_g: Number | None = None
    dry_tare_g: Number | None = None


Drops = Annotated[list[Number | None], Field(max_length=3, description="cone penetrations, mm")]


class CupTrial(Determination):
    blows: Count | None = None


class ConeTrial(Determination):
    penetration_mm: Drops | None = None


class LiquidLimitTrial(Determination):
    """An Atterberg set's trial: blows with the cup, drops with the fall cone."""

    blows: Count | None = None
    penetration_mm: Drops | None = None


class WaterContentReadings(Conditions):
    determinations: (
        Annotated[
            list[Determination | None], Field(max_length=MAX_ROWS, description="mass determinations, g")
        ]
        | None
    ) = None


class PlasticLimitReadings(WaterContentReadings):
    not_determinable: NotDeterminable | None = None


class CupLiquidLimitReadings(Conditions):
    trials: (
        Annotated[
            list[CupTrial | None],
            Field(max_length=MAX_ROWS, description="trials: blows and a mass determination each"),
        ]
        | None
    ) = None
    not_determinable: NotDeterminable | None = None


class ConeLiquidLimitReadings(Conditions):
    cone: Cone | None = None
    trials: (
        Annotated[
            list[ConeTrial | None],
            Field(max_length=MAX_ROWS, description="trials: cone drops and a mass determination each"),
        ]
        | None
    ) = None
    not_determinable: NotDeterminable | None = None


class AtterbergLiquidLimit(Conditions):
    method: LiquidLimitMethod | None = None
    cone: Cone | None = None
    trials: (
        Annotated[
            list[LiquidLimitTrial | None],
            Field(max_length=MAX_ROWS, description="trials of the liquid limit"),
        ]
        | None
    ) = None
    not_determinable: NotDeterminable | None = None


class AtterbergReadings(Conditions):
    water_content: WaterContentReadings | None = None
    liquid_limit: AtterbergLiquidLimit | None = None
    plastic_limit: PlasticLimitReadings | None = None
    clay_fraction: Number | None = None
    fines: Number | None = None
    sand: Number | None = None
    gravel: Number | None = None
    cu: Number | None = None
    cc: Number | None = None
    d10_mm: Number | None = None
    d30_mm: Number | None = None
    d60_mm: Number | None = None
    plasticity_terms: PlasticityTerms | None = None


class SieveRow(Closed):
    size_mm: Number | None = None
    retained_g: Number | None = None
    cumulative_retained_g: Number | None = None


class SieveReadings(Conditions):
    dry_mass_g: Number | None = None
    washed_dry_mass_g: Number | None = None
    pan_g: Number | None = None
    sieves: (
        Annotated[
            list[SieveRow | None],
            Field(max_length=MAX_ROWS, description="sieves, any order: mass retained on each, or cumulative"),
        ]
        | None
    ) = None


class HydrometerMeter(Closed):
    type: HydrometerType | None = None
    id: Label | None = None
    depth_at_zero_mm: Number | None = None
    depth_per_unit_mm: Number | None = None


class ZeroReading(Closed):
    temperature_c: Number | None = None
    reading: Number | None = None


class HydrometerReading(Closed):
    minutes: Number | None = None
    reading: Number | None = None
    temperature_c: Number | None = None
    composite_correction: Number | None = None


class CombinedHydrometerReadings(Conditions):
    """The sedimentation part of a combined grading: its separation sieve comes from the sieving."""

    dry_mass_g: Number | None = None
    specific_gravity: Number | None = None
    hydrometer: HydrometerMeter | None = None
    meniscus_correction: Number | None = None
    separation_sieve_mm: Number | None = None
    reading_resolution: Number | None = None
    zero_readings: (
        Annotated[
            list[ZeroReading | None], Field(max_length=MAX_ROWS, description="control-cylinder readings")
        ]
        | None
    ) = None
    readings: (
        Annotated[
            list[HydrometerReading | None],
            Field(max_length=MAX_ROWS, description="hydrometer readings, time from the start"),
        ]
        | None
    ) = None


class HydrometerReadings(CombinedHydrometerReadings):
    separation_passing_pct: Number | None = None
    passing_75um_pct: Number | None = None


class GradingReadings(Conditions):
    sieve: SieveReadings | None = None
    hydrometer: CombinedHydrometerReadings | None = None


class Torque(Closed):
    torque_nm: Number | None = None


class VaneReadings(Conditions):
    diameter_mm: Number | None = None
    height_mm: Number | None = None
    undisturbed: Torque | None = None
    remoulded: Torque | None = None
    torque_resolution_nm: Number | None = None
    length_resolution_mm: Number | None = None


class Penetrations(Closed):
    penetration_mm: Drops | None = None


class FallConeStrengthReadings(Conditions):
    cone_mass_g: Number | None = None
    cone_angle_deg: Number | None = None
    cone_factor: Number | None = None
    undisturbed: Penetrations | None = None
    remoulded: Penetrations | None = None
    penetration_resolution_mm: Number | None = None


class LoadReading(Closed):
    deformation_mm: Number | None = None
    load_n: Number | None = None


class CompressionSpecimen(Closed):
    diameter_mm: Number | None = None
    height_mm: Number | None = None
    readings: (
        Annotated[
            list[LoadReading | None], Field(max_length=MAX_ROWS, description="axial deformation and load")
        ]
        | None
    ) = None


class UnconfinedCompressionReadings(Conditions):
    undisturbed: CompressionSpecimen | None = None
    remoulded: CompressionSpecimen | None = None
    load_resolution_n: Number | None = None
    length_resolution_mm: Number | None = None


class ClassificationReadings(Conditions):
    liquid_limit: Number | None = None
    plastic_limit: Number | None = None
    plasticity_index: Number | None = None
    liquid_limit_oven_dried: Number | None = None
    nonplastic: NotDeterminable | None = None
    peat: NotDeterminable | None = None
    gravel: Number | None = None
    sand: Number | None = None
    fines: Number | None = None
    percent_passing_2mm: Number | None = None
    percent_passing_0_425mm: Number | None = None
    d10_mm: Number | None = None
    d30_mm: Number | None = None
    d60_mm: Number | None = None
    cu: Number | None = None
    cc: Number | None = None


class PycnometerDetermination(Closed):
    pycnometer_g: Number | None = None
    pycnometer_soil_g: Number | None = None
    pycnometer_soil_water_g: Number | None = None
    pycnometer_water_g: Number | None = None
    temperature_c: Number | None = None


class ParticleDensityReadings(Conditions):
    determinations: (
        Annotated[
            list[PycnometerDetermination | None],
            Field(
                max_length=MAX_ROWS, description="small-pycnometer determinations: masses g, temperature °C"
            ),
        ]
        | None
    ) = None


BarCondition = Annotated[Any, _scalar(str), WithJsonSchema({"type": "string", "enum": list(BAR_CONDITIONS)})]
Effort = Annotated[Any, _scalar(str), WithJsonSchema({"type": "string", "enum": list(EFFORTS)})]


class LinearShrinkageReadings(Conditions):
    mould_length_mm: Number | None = None
    oven_dry_length_mm: Number | None = None
    condition: BarCondition | None = None
    length_resolution_mm: Number | None = None


class DensitySpecimen(Closed):
    mass_g: Number | None = None
    diameter_mm: Number | None = None
    height_mm: Number | None = None


class DensityReadings(Conditions):
    specimens: (
        Annotated[
            list[DensitySpecimen | None],
            Field(max_length=MAX_ROWS, description="measured cylinders: mass g, diameter and height mm"),
        ]
        | None
    ) = None
    water_content: WaterContentReadings | None = None
    particle_density_mg_m3: Number | None = None
    length_resolution_mm: Number | None = None


class IgnitionDetermination(Closed):
    crucible_g: Number | None = None
    crucible_dry_g: Number | None = None
    crucible_ignited_g: Number | None = None


class LossOnIgnitionReadings(Conditions):
    determinations: (
        Annotated[
            list[IgnitionDetermination | None],
            Field(max_length=MAX_ROWS, description="crucible, with dry soil, after ignition, g"),
        ]
        | None
    ) = None
    furnace_c: Number | None = None


class CompactionPoint(Closed):
    mould_soil_g: Number | None = None
    determinations: (
        Annotated[
            list[Determination | None], Field(max_length=MAX_ROWS, description="mass determinations, g")
        ]
        | None
    ) = None


class CompactionReadings(Conditions):
    effort: Effort | None = None
    mould_volume_cm3: Number | None = None
    mould_g: Number | None = None
    particle_density_mg_m3: Number | None = None
    points: (
        Annotated[
            list[CompactionPoint | None],
            Field(max_length=MAX_ROWS, description="compacted specimens: mould and soil, water content"),
        ]
        | None
    ) = None


MODELS: dict[str, type[Closed]] = {
    "water-content": WaterContentReadings,
    "ll-cup-multipoint": CupLiquidLimitReadings,
    "ll-cup-one-point": CupLiquidLimitReadings,
    "ll-cone": ConeLiquidLimitReadings,
    "plastic-limit": PlasticLimitReadings,
    "atterberg": AtterbergReadings,
    "sieve": SieveReadings,
    "hydrometer": HydrometerReadings,
    "grading": GradingReadings,
    "vane": VaneReadings,
    "fall-cone-strength": FallConeStrengthReadings,
    "unconfined-compression": UnconfinedCompressionReadings,
    "classification": ClassificationReadings,
    "particle-density": ParticleDensityReadings,
    "linear-shrinkage": LinearShrinkageReadings,
    "density": DensityReadings,
    "loss-on-ignition": LossOnIgnitionReadings,
    "compaction": CompactionReadings,
}
"""Every engine method's readings model (tests/services/test_readings_shape.py checks that none
is missing)."""


def refusals(method: str, readings: Any) -> list[FieldError]:
    """Every key of ``readings`` that is not of ``method``'s shape, each at its place; none for a
    method the engine does not know (the engine refuses it in its own words)."""
    model = MODELS.get(method)
    if model is None:
        return []
    try:
        model.model_validate(readings)
    except PydanticError as exc:
        return [FieldError(("readings", *e["loc"]), _message(e)) for e in exc.errors()]
    return []


def together(engine: list[FieldError], shape: list[FieldError]) -> list[FieldError]:
    """The engine's refusals, then the shape's at the places the engine did not speak of (the
    engine's words come first: they are the ones the bench shows)."""
    spoken = {e.loc for e in engine}
    return [*engine, *(e for e in shape if e.loc not in spoken)]


_WORDS = {
    "extra_forbidden": "not a reading of this method",
    "model_type": "an object of readings is needed",
    "list_type": "a list of rows is needed",
    "string_type": "text is needed",
}


def _message(error: Any) -> str:
    """Our words for the refusals a client meets most, pydantic's for the rest."""
    if error["type"] == "value_error":
        return str(error["ctx"]["error"])
    return _WORDS.get(str(error["type"]), str(error["msg"]))
