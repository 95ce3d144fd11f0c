"""A job's approved results as an AGS4 file, for the client's own geotechnical database
(DESIGN.md section 7).

Pure: plain records in (``JobExport``, built from the database by ``job_export``), text out. The
file is written to pass python-ags4's checker (the AGS association's own library) with zero
errors against the standard dictionary it ships for ``TRAN_AGS`` 4.1.1, whose groups, headings,
units, data types and heading order are read from that dictionary file here, not copied:

- PROJ (the job), TRAN (this issue), UNIT, TYPE and ABBR (every unit, data type and abbreviation
  the file uses, described as the dictionary describes them; AGS Format Rules 15, 17, 16), DICT
  (what the standard dictionary lacks; Rules 9 and 18), LOCA and SAMP;
- one group per kind of result: LNMC (water content), LLPL (liquid and plastic limits, NP where
  the soil is non-plastic), GRAG and GRAT (grading and its curve, sieve and hydrometer points),
  LVAN (laboratory vane), LFCN (fall cone strength: the dictionary's own group for it), LUCT
  (unconfined compression, one row per specimen), and LCLS, a group of our own defined in DICT,
  for the USCS and AASHTO classification, which the 4.1.1 dictionary has no headings for;
- for the S12 methods the dictionary's own groups: LPDN (particle density, LPDN_TYPE "SMALL
  PYK"), LDEN (bulk and dry density, "LINEAR" measurement of a "CYLINDER"), LLIN (linear
  shrinkage), GCHM with determinand "LOI" of the total solid (loss on ignition: the 4.1.1
  dictionary has no group of its own for it; GCHM_UNIT, type PU, is listed in UNIT as Rule 15
  asks), and CMPG with a CMPT row per point (compaction; CMPG_TYPE "2.5KG" or "4.5KG" by the
  rammer of the standard or modified effort). What the dictionary has no heading for (the
  specific gravity, void ratio, porosity and saturation, the bar's condition, the furnace
  temperature) goes in the group's remarks, never under a heading of our own.

Values are the report's: rounded by the rule the engine names for each result key
(``server.engine.rounding``) and then written in the heading's data type (a clay fraction
reported as "24" is "24.0" under GRAG_CLAY, 1DP). Where the type is coarser than the report
(LUCT_UCS, 0DP, against qu to 0.1 kPa) the full-precision value is rounded once, to the type,
so that no value is rounded twice. Two headings keep the report's decimals instead of the
dictionary's type (``REPORTED_TYPES``): 1SF would print Cu 3.6 as "4" and Cc 0.96 as "1", moving
a soil across the well-graded limits of ASTM D2487; the TYPE row of the file states the type
used, as AGS Format Rule 8 asks.

The engine splits gravel, sand and fines at 4.75 mm and 75 µm (ASTM D2487), where the
dictionary's GRAG_GRAV, GRAG_SAND, GRAG_SILT and GRAG_FINE are defined at 2 mm and 63 µm: the
fractions go under headings of our own (GRAG_AGRV, GRAG_ASND, GRAG_ASLT, GRAG_AFIN) whose DICT
rows state the boundaries, rather than under a standard heading whose definition they do not
meet. The clay fraction (< 2 µm), Cu and Cc mean what the dictionary means.

The AGS4 format is ASCII (Rule 1): text typed in the laboratory is transliterated ("–" to "-",
"µm" to "um", accents dropped). Every field is quoted, lines end in CRLF, TRAN_RCON is "+" and
TRAN_DLIM "|" (Rules 2a, 5, 11). Deterministic: rows are ordered here, and the date is a
parameter, never the clock, so the same records give the same bytes.
"""

from __future__ import annotations

import csv
import importlib.util
import re
import unicodedata
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import date
from decimal import ROUND_HALF_UP, Decimal
from functools import cache
from pathlib import Path
from typing import Any

from server.engine.phase_relations import PARTICLE_DENSITY_USED
from server.engine.readings import as_entered, as_number
from server.engine.rounding import DECIMALS, reported
from server.workflow.vocabulary import LOCATION_KINDS, SAMPLE_TYPES

__all__ = [
    "EXPORTED_METHODS",
    "JobExport",
    "LocationRecord",
    "SampleRecord",
    "TestRecord",
    "ags4_text",
    "standard_dictionary",
]

TRAN_AGS = "4.1.1"
# The dictionary file python-ags4 ships for TRAN_AGS 4.1.1 (its check.STANDARD_DICT_FILES; a
# test holds the two together). Found without importing python-ags4's checker, which loads pandas.
DICTIONARY_FILE = "Standard_dictionary_v4_1_1.ags"
DELIMITER = "|"  # TRAN_DLIM
CONCATENATOR = "+"  # TRAN_RCON: a comma trips python-ags4's quoting check (STACK-NOTES.md)
NP = "NP"  # LLPL_PL of a non-plastic soil: the dictionary's own example is "38 or NP" (type XN)
OWN_LIST = "Claybench"  # ABBR_LIST of an abbreviation the standard list lacks
STANDARD_LIST = "AGS4"


# -- the records ---------------------------------------------------------------------------------


@dataclass(frozen=True)
class LocationRecord:
    """A location of the job: code, kind (a ``vocabulary.LOCATION_KINDS`` id), national grid
    easting and northing and ground level, in metres."""

    code: str
    kind: str = "borehole"
    easting: float | None = None
    northing: float | None = None
    ground_level_m: float | None = None


@dataclass(frozen=True)
class SampleRecord:
    """A sample: its location's code, its own code (unique in the job, written as SAMP_ID),
    depths in m, type (a ``vocabulary.SAMPLE_TYPES`` id), description and remarks."""

    location: str
    code: str
    top_m: float
    base_m: float
    sample_type: str = "disturbed"
    description: str = ""
    remarks: str = ""


@dataclass(frozen=True)
class TestRecord:
    """One approved test revision on a sample: the method, the revision and its record id (so
    that a report can freeze exactly what it carried), and results and readings as stored."""

    __test__ = False  # a record, not a pytest test class

    sample: str  # the sample's code
    method: str
    revision: int
    test_id: int
    results: Mapping[str, Any]
    readings: Mapping[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class JobExport:
    """What one AGS4 file says: the job, its laboratory, and the approved tests with the
    locations and samples they were made on. ``standards`` maps a method id to the standard it
    follows, printed in each group's ``*_METH``."""

    number: str
    title: str = ""
    site: str = ""
    client: str = ""
    laboratory: str = ""
    accreditation: str = ""
    locations: Sequence[LocationRecord] = ()
    samples: Sequence[SampleRecord] = ()
    tests: Sequence[TestRecord] = ()
    standards: Mapping[str, str] = field(default_factory=dict)

    def __post_init__(self) -> None:
        for name in ("locations", "samples", "tests"):
            object.__setattr__(self, name, tuple(getattr(self, name)))


# -- the standard dictionary ---------------------------------------------------------------------


@dataclass(frozen=True)
class Heading:
    """A heading as a dictionary defines it (a DICT row of type HEADING)."""

    name: str
    status: str  # "KEY", "REQUIRED", "KEY+REQUIRED" or "OTHER"
    data_type: str
    unit: str
    description: str


@dataclass(frozen=True)
class Dictionary:
    """The parts of an AGS4 dictionary a writer needs: each group's headings in order, the
    groups' descriptions and parents, and the descriptions of units, types and abbreviations."""

    headings: dict[str, tuple[Heading, ...]]
    groups: dict[str, tuple[str, str]]  # group -> (description, parent group)
    units: dict[str, str]
    types: dict[str, str]
    abbreviations: dict[tuple[str, str], str]  # (heading, code) -> description


def _dictionary_path() -> Path:
    spec = importlib.util.find_spec("python_ags4")
    if spec is None or not spec.submodule_search_locations:
        raise RuntimeError("python-ags4 is not installed: its standard dictionary is needed")
    return Path(next(iter(spec.submodule_search_locations))) / DICTIONARY_FILE


@cache
def standard_dictionary() -> Dictionary:
    """The 4.1.1 standard dictionary python-ags4 ships, read once (it is itself an AGS4 file)."""
    groups: dict[str, list[dict[str, str]]] = {}
    current: list[dict[str, str]] | None = None
    names: list[str] = []
    text = _dictionary_path().read_text(encoding="utf-8")
    for fields in csv.reader(text.splitlines()):
        if not fields:
            current = None
        elif fields[0] == "GROUP":
            current = groups.setdefault(fields[1], [])
        elif fields[0] == "HEADING":
            names = fields[1:]
        elif fields[0] == "DATA" and current is not None:
            current.append(dict(zip(names, fields[1:], strict=False)))
    headings: dict[str, list[Heading]] = {}
    described: dict[str, tuple[str, str]] = {}
    for row in groups["DICT"]:
        if row["DICT_TYPE"] == "GROUP":
            described[row["DICT_GRP"]] = (row["DICT_DESC"], row["DICT_PGRP"])
        elif row["DICT_TYPE"] == "HEADING":
            headings.setdefault(row["DICT_GRP"], []).append(
                Heading(
                    row["DICT_HDNG"], row["DICT_STAT"], row["DICT_DTYP"], row["DICT_UNIT"], row["DICT_DESC"]
                )
            )
    return Dictionary(
        headings={group: tuple(found) for group, found in headings.items()},
        groups=described,
        units={row["UNIT_UNIT"]: row["UNIT_DESC"] for row in groups["UNIT"]},
        types={row["TYPE_TYPE"]: row["TYPE_DESC"] for row in groups["TYPE"]},
        abbreviations={(row["ABBR_HDNG"], row["ABBR_CODE"]): row["ABBR_DESC"] for row in groups["ABBR"]},
    )


# -- what the standard dictionary lacks (the file's DICT group) -----------------------------------

OWN_GROUPS: dict[str, tuple[str, str]] = {
    "LCLS": ("Laboratory soil classification: USCS (ASTM D2487) and AASHTO (M 145)", "SAMP"),
}
"""Groups of our own: description and parent group (AGS Format Rule 18)."""

_SPECIMEN_KEYS = ("LOCA_ID", "SAMP_TOP", "SAMP_REF", "SAMP_TYPE", "SAMP_ID", "SPEC_REF", "SPEC_DPTH")


def _key_heading(name: str) -> Heading:
    """A key heading of a laboratory group, as LLPL defines it (the same in every such group)."""
    found = next(h for h in standard_dictionary().headings["LLPL"] if h.name == name)
    return Heading(name, "KEY", found.data_type, found.unit, found.description)


def _sensitivity(group: str, what: str) -> Heading:
    return Heading(
        f"{group}_SENS",
        "OTHER",
        "1DP",
        "",
        f"Sensitivity: undrained strength undisturbed over remoulded ({what})",
    )


@cache
def own_headings() -> dict[str, tuple[Heading, ...]]:
    """Headings of our own, by group, in the order they follow the group's standard headings."""
    return {
        "GRAG": (
            Heading(
                "GRAG_AGRV",
                "OTHER",
                "0DP",
                "%",
                "Percentage of material tested in range 75mm to 4.75mm (gravel, ASTM D2487)",
            ),
            Heading(
                "GRAG_ASND",
                "OTHER",
                "0DP",
                "%",
                "Percentage of material tested in range 4.75mm to 75um (sand, ASTM D2487)",
            ),
            Heading(
                "GRAG_ASLT",
                "OTHER",
                "0DP",
                "%",
                "Percentage of material tested in range 75um to 2um (silt, ASTM D2487 fines split at 2um)",
            ),
            Heading(
                "GRAG_AFIN",
                "OTHER",
                "0DP",
                "%",
                "Percentage of material tested less than 75um (fines, ASTM D2487)",
            ),
        ),
        "LVAN": (_sensitivity("LVAN", "peak and remoulded vane strength"),),
        "LFCN": (_sensitivity("LFCN", "fall cone strengths"),),
        "LUCT": (_sensitivity("LUCT", "half the unconfined compressive strengths"),),
        "LCLS": (
            *(_key_heading(name) for name in _SPECIMEN_KEYS),
            Heading("LCLS_USCS", "OTHER", "X", "", "USCS group symbol (ASTM D2487)"),
            Heading("LCLS_USCN", "OTHER", "X", "", "USCS group name (ASTM D2487)"),
            Heading("LCLS_USBL", "OTHER", "X", "", "USCS borderline symbol, where the soil is on a boundary"),
            Heading("LCLS_AASH", "OTHER", "X", "", "AASHTO soil group (AASHTO M 145)"),
            Heading("LCLS_AAGI", "OTHER", "0DP", "", "AASHTO group index (AASHTO M 145)"),
            Heading("LCLS_METH", "OTHER", "X", "", "Test method"),
            Heading("LCLS_LAB", "OTHER", "X", "", "Name of testing laboratory/organization"),
            Heading("TEST_STAT", "OTHER", "X", "", "Test status"),
        ),
    }


REPORTED_TYPES: dict[str, str] = {"GRAG_UC": "1DP", "GRAG_CC": "2DP"}
"""Headings written to the report's decimals (``rounding.DECIMALS`` cu, cc) rather than the
dictionary's 1SF, which would move a soil across the well-graded limits of ASTM D2487."""


@cache
def definitions(group: str) -> tuple[Heading, ...]:
    """A group's headings in the order the checker expects (AGS Format Rule 7): the standard
    dictionary's, then ours (the checker reads the file's DICT after the standard one)."""
    standard = tuple(
        Heading(h.name, h.status, REPORTED_TYPES.get(h.name, h.data_type), h.unit, h.description)
        for h in standard_dictionary().headings.get(group, ())
    )
    return standard + own_headings().get(group, ())


def _heading(group: str, name: str) -> Heading:
    for heading in definitions(group):
        if heading.name == name:
            return heading
    raise KeyError(f"{name} is not a heading of {group}")


# -- abbreviations -------------------------------------------------------------------------------

# Our kinds of location and sample types as AGS4 codes: the standard list's code where it has one
# that means the same, else a code of our own that ``vocabulary.location_kind_id`` and
# ``sample_type_id`` read back as the same id (so our own import gives back what we wrote).
LOCATION_CODES: dict[str, str] = {
    "borehole": "BH",  # the list's codes name the boring method (CP, RC, ...), which we do not record
    "trial pit": "TP",
    "window sample": "WS",
    "hand auger": "HA",
    "other": "OTHER",
}
SAMPLE_CODES: dict[str, str] = {
    "U100": "U",
    "UT100": "UT",
    "tube": "TUBE",
    "piston": "P",
    "block": "BLK",
    "core": "C",
    "bulk": "B",
    "large bulk": "LB",
    "disturbed": "D",
    "split spoon": "SPT",  # the list's SPTLS is a liner inside the spoon, not the spoon sample
    "liner": "L",
    "jar": "J",
    "water": "W",
}
_POINTS = ("", "ONE", "TWO", "THREE", "FOUR", "FIVE", "SIX", "SEVEN", "EIGHT", "NINE", "TEN")

# Descriptions of the codes of our own (the standard list describes its own).
_OWN_ABBREVIATIONS: dict[tuple[str, str], str] = {
    ("LUCT_TYPE", "REMOULDED"): "Remoulded",
    ("GRAT_TYPE", "WS"): "Wet sieve",
    **{("LOCA_TYPE", code): LOCATION_KINDS[kind] for kind, code in LOCATION_CODES.items()},
    **{("SAMP_TYPE", code): SAMPLE_TYPES[kind] for kind, code in SAMPLE_CODES.items()},
    **{("LLPL_POIN", word): f"{word.title()} point" for word in _POINTS[1:]},
}


def _location_code(kind: str) -> str:
    return LOCATION_CODES.get(kind) or _ascii(kind).upper()


def _sample_code(sample_type: str) -> str:
    return SAMPLE_CODES.get(sample_type) or _ascii(sample_type).upper()


def _described(heading: str, code: str) -> tuple[str, str]:
    """An abbreviation's description and source: the standard list's, else ours, else the
    code itself (a vocabulary id added since, written as its own upper-cased id)."""
    standard = standard_dictionary().abbreviations.get((heading, code))
    if standard:
        return standard, STANDARD_LIST
    own = _OWN_ABBREVIATIONS.get((heading, code))
    if own is None and heading == "LOCA_TYPE":
        own = next((label for kind, label in LOCATION_KINDS.items() if _location_code(kind) == code), None)
    if own is None and heading == "SAMP_TYPE":
        own = next((label for kind, label in SAMPLE_TYPES.items() if _sample_code(kind) == code), None)
    return _ascii(own or code.title()), OWN_LIST


# -- values --------------------------------------------------------------------------------------

_TRANSLITERATION = str.maketrans(
    {
        "\u2013": "-",
        "\u2014": "-",
        "\u2212": "-",
        "\u2018": "'",
        "\u2019": "'",
        "\u201c": '"',
        "\u201d": '"',
        "\u00b5": "u",
        "\u03bc": "u",
        "\u00b0": "deg",
        "\u00d7": "x",
        "\u00b1": "+/-",
        "\u2264": "<=",
        "\u2265": ">=",
        "\u00a0": " ",
        "\u2026": "...",
        "\u00b2": "2",
        "\u00b3": "3",
        "\u00df": "ss",
        "\u00e6": "ae",
        "\u00c6": "AE",
        "\u00f8": "o",
        "\u00d8": "O",
        "\u00b7": ".",
    }
)
_BREAKS = re.compile(r"[\x00-\x1f\x7f]+")


def _ascii(text: str) -> str:
    """Text in ASCII (AGS Format Rule 1): common typography and accents transliterated, line
    breaks and other control characters as one space, anything else as "?"."""
    text = unicodedata.normalize("NFKD", text.translate(_TRANSLITERATION))
    text = "".join(c for c in text if not unicodedata.combining(c))
    return _BREAKS.sub(" ", text).encode("ascii", "replace").decode("ascii").strip()


def _quantize(value: Decimal, places: int) -> Decimal:
    """Round half up (away from zero) at ``places`` decimals, as the engine rounds."""
    return value.quantize(Decimal(1).scaleb(-places), rounding=ROUND_HALF_UP)


def _fixed(value: Decimal, places: int) -> str:
    rounded = _quantize(value, places)
    return f"{abs(rounded) if rounded == 0 else rounded:.{max(places, 0)}f}"


def _sf_places(value: Decimal, figures: int) -> int:
    """Decimals that ``figures`` significant figures of ``value`` take (negative: tens, ...)."""
    return figures - 1 - value.adjusted()


def _significant(value: Decimal, figures: int) -> str:
    """``figures`` significant figures, written as python-ags4's checker writes them (so that
    its Rule 8 check, which formats the value again and compares, finds the same text)."""
    if value == 0:
        return "0"
    places = _sf_places(value, figures)
    rounded = _quantize(value, places)
    if rounded.adjusted() != value.adjusted():  # carried into a new digit (9.96 -> 10.0)
        places = _sf_places(rounded, figures)
        rounded = _quantize(rounded, places)
    return f"{rounded:.{max(places, 0)}f}"


def number_text(value: float, data_type: str, key: str | None = None) -> str:
    """A number written in an AGS4 data type (nDP, nSF, or text for X and XN), from the value
    as stored; ``key`` names the result whose reporting rule (``rounding.DECIMALS``) applies.

    Reported first, then written in the type: where the type keeps more decimals than the
    report, the reported value is padded ("24" as 1DP is "24.0"); where it keeps fewer, the
    stored value is rounded once, to the type.
    """
    exact = Decimal(repr(float(value)))
    report_places = DECIMALS.get(key, 2) if key is not None else None
    if data_type.endswith("DP"):
        places = int(data_type[:-2])
        if report_places is not None and report_places < places:
            exact = _quantize(exact, report_places)
        return _fixed(exact, places)
    if data_type.endswith("SF"):
        figures = int(data_type[:-2])
        if report_places is not None and report_places < _sf_places(exact, figures):
            exact = _quantize(exact, report_places)
        return _significant(exact, figures)
    if key is not None:
        return reported(key, float(value))
    return _fixed(exact, report_places if report_places is not None else 2)


def _number(value: Any) -> float | None:
    """A stored result or reading as a number (readings may be decimal text), else None."""
    return as_number(value)


# -- rows ----------------------------------------------------------------------------------------

Row = dict[str, str]


@dataclass
class _Rows:
    """The DATA rows of the result groups as they are built, and the specimen numbers given."""

    groups: dict[str, list[Row]] = field(default_factory=dict)
    specimens: dict[tuple[str, str], int] = field(default_factory=dict)

    def add(self, group: str, row: Row) -> None:
        self.groups.setdefault(group, []).append(row)

    def next_specimen(self, group: str, sample: str) -> str:
        """SPEC_REF: 1, 2, ... per group and sample, so that two rows of one sample (two tests,
        or LUCT's undisturbed and remoulded specimens) never share their keys (Rule 10a)."""
        number = self.specimens.get((group, sample), 0) + 1
        self.specimens[(group, sample)] = number
        return str(number)


@dataclass(frozen=True)
class _Context:
    """What every row builder reads besides its own test."""

    export: JobExport
    tests_of: dict[str, list[TestRecord]]  # by sample code, in the file's order


def _keys(sample: SampleRecord, spec_ref: str = "") -> Row:
    """The key fields a sample's rows share with its SAMP row (Rule 10c)."""
    keys = {
        "LOCA_ID": _ascii(sample.location),
        "SAMP_TOP": number_text(sample.top_m, "2DP"),
        "SAMP_TYPE": _sample_code(sample.sample_type),
        "SAMP_ID": _ascii(sample.code),
    }
    if spec_ref:
        keys["SPEC_REF"] = spec_ref
    return keys


class _Cells:
    """One DATA row of a group, filled heading by heading in the heading's own data type."""

    def __init__(self, group: str, keys: Row) -> None:
        self.group = group
        self.row: Row = dict(keys)

    def number(self, heading: str, value: Any, key: str | None = None) -> None:
        number = _number(value)
        if number is not None:
            self.row[heading] = number_text(number, _heading(self.group, heading).data_type, key)

    def text(self, heading: str, value: Any) -> None:
        if isinstance(value, str) and value.strip():
            _heading(self.group, heading)  # a heading of the group, or a KeyError here
            self.row[heading] = _ascii(value)


def _common(cells: _Cells, ctx: _Context, test: TestRecord, standard: str | None = None) -> None:
    """Test method (the standard the test's method follows, unless ``standard`` is given),
    laboratory, accreditation, status and deviation, where the group has the heading."""
    prefix = cells.group
    names = {h.name for h in definitions(prefix)}
    if standard is None:
        standard = ctx.export.standards.get(test.method, "")
    for heading, value in (
        (f"{prefix}_METH", standard),
        (f"{prefix}_LAB", ctx.export.laboratory),
        (f"{prefix}_CRED", ctx.export.accreditation),
        ("TEST_STAT", f"Approved, revision {test.revision}"),
        (f"{prefix}_DEV", test.readings.get("deviation")),
    ):
        if heading in names:
            cells.text(heading, value)


def _lnmc(ctx: _Context, rows: _Rows, test: TestRecord, sample: SampleRecord) -> None:
    """LNMC_MC: the water content as reported (type X, so the report's text: "30.0")."""
    w = _number(test.results.get("water_content"))
    if w is None:
        return
    cells = _Cells("LNMC", _keys(sample, rows.next_specimen("LNMC", sample.code)))
    cells.text("LNMC_MC", reported("water_content", w))
    _common(cells, ctx, test, ctx.export.standards.get("water-content", ""))
    if test.method != "water-content":  # an Atterberg set's deviation is written with its limits
        cells.row.pop("LNMC_DEV", None)
    rows.add("LNMC", cells.row)


_CUP = ("ll-cup-multipoint", "ll-cup-one-point")
_LIMIT_METHODS = ("atterberg", "ll-cup-multipoint", "ll-cup-one-point", "ll-cone", "plastic-limit")


def _percent_passing_425(ctx: _Context, sample: SampleRecord) -> float | None:
    """Percent passing 0.425 mm from the sample's own grading (LLPL_425), if it has one."""
    for method in ("grading", "sieve"):
        for other in ctx.tests_of.get(sample.code, []):
            found = _number(other.results.get("percent_passing_0_425mm"))
            if other.method == method and found is not None:
                return found
    return None


def _llpl(ctx: _Context, rows: _Rows, test: TestRecord, sample: SampleRecord) -> None:
    """LLPL: LL, PL (NP for a non-plastic soil, ASTM D4318), PI, the method (LLPL_TYPE, and
    LLPL_CONE and LLPL_POIN per the dictionary's abbreviations) and LLPL_425."""
    r = test.results
    nonplastic = r.get("nonplastic") is True
    ll, pl, pi = (_number(r.get(k)) for k in ("liquid_limit", "plastic_limit", "plasticity_index"))
    if ll is None and pl is None and not nonplastic:
        return
    cells = _Cells("LLPL", _keys(sample, rows.next_specimen("LLPL", sample.code)))
    cells.number("LLPL_LL", ll, "liquid_limit")
    if nonplastic:
        cells.text("LLPL_PL", NP)
    else:
        cells.number("LLPL_PL", pl, "plastic_limit")
        cells.number("LLPL_PI", pi, "plasticity_index")
    cells.number("LLPL_425", _percent_passing_425(ctx, sample), "percent_passing")
    ll_method = r.get("liquid_limit_method") if test.method == "atterberg" else test.method
    parts = [str(ll_method)] if ll_method in (*_CUP, "ll-cone") else []
    if test.method in ("atterberg", "plastic-limit"):
        parts.append("plastic-limit")
    standards = dict.fromkeys(ctx.export.standards.get(p, "") for p in parts)  # once each, in order
    _common(cells, ctx, test, "; ".join(s for s in standards if s))
    if ll_method in _CUP:
        cells.text("LLPL_TYPE", "CASAGRANDE")
    elif ll_method == "ll-cone":
        cells.text("LLPL_TYPE", "FALL CONE")
        cone = r.get("cone")
        if isinstance(cone, str) and cone:
            cells.text("LLPL_CONE", cone.replace("-", "/"))
    trials = r.get("liquid_limit_trials")
    if ll_method == "ll-cup-one-point":
        cells.text("LLPL_POIN", "ONE")
    elif ll_method in ("ll-cup-multipoint", "ll-cone") and isinstance(trials, list) and trials:
        cells.text("LLPL_POIN", _POINTS[len(trials)] if len(trials) < len(_POINTS) else str(len(trials)))
    rows.add("LLPL", cells.row)


_GRADING_METHODS = ("sieve", "hydrometer", "grading")


def _sieve_type(readings: Any) -> str:
    """GRAT_TYPE of a sieving: wet sieve when the specimen was washed on 75 µm, else dry."""
    washed = isinstance(readings, Mapping) and readings.get("washed_dry_mass_g") not in (None, "")
    return "WS" if washed else "DS"


def _curve(test: TestRecord) -> list[tuple[float, float, str]]:
    """(size mm, percent passing, GRAT_TYPE) of a grading test, coarsest first."""
    r, rd = test.results, test.readings
    sieving = rd.get("sieve") if test.method == "grading" else rd
    points: list[tuple[float, float, str]] = []
    if test.method == "hydrometer":
        rows, size_key, pct_key = r.get("hydrometer_points"), "diameter_mm", "percent_finer"
    else:
        rows = r.get("combined_curve" if test.method == "grading" else "grading_curve")
        size_key, pct_key = "size_mm", "percent_passing"
    for row in rows if isinstance(rows, list) else []:
        if not isinstance(row, Mapping):
            continue
        size, pct = _number(row.get(size_key)), _number(row.get(pct_key))
        if size is None or pct is None or size <= 0:
            continue
        hydrometer = test.method == "hydrometer" or row.get("source") == "hydrometer"
        points.append((size, pct, "HY" if hydrometer else _sieve_type(sieving)))
    return sorted(points, key=lambda p: -p[0])


def _grag(ctx: _Context, rows: _Rows, test: TestRecord, sample: SampleRecord) -> None:
    """GRAG (Cu, Cc, the fractions) and a GRAT row for each point of the curve."""
    r = test.results
    spec = rows.next_specimen("GRAG", sample.code)
    cells = _Cells("GRAG", _keys(sample, spec))
    cells.number("GRAG_UC", r.get("cu"), "cu")
    cells.number("GRAG_CC", r.get("cc"), "cc")
    cells.number("GRAG_CLAY", r.get("clay_fraction"), "clay_fraction")
    for heading, key in (
        ("GRAG_AGRV", "gravel"),
        ("GRAG_ASND", "sand"),
        ("GRAG_ASLT", "silt"),
        ("GRAG_AFIN", "fines"),
    ):
        cells.number(heading, r.get(key), key)
    _common(cells, ctx, test)
    rows.add("GRAG", cells.row)
    sizes: set[str] = set()
    for size, pct, kind in _curve(test):
        point = _Cells("GRAT", _keys(sample, spec))
        point.number("GRAT_SIZE", size)
        if point.row["GRAT_SIZE"] in sizes:  # GRAT_SIZE is a key (Rule 10a): the first point stands
            continue
        sizes.add(point.row["GRAT_SIZE"])
        point.number("GRAT_PERP", pct, "percent_passing")
        point.text("GRAT_TYPE", kind)
        rows.add("GRAT", point.row)


def _lvan(ctx: _Context, rows: _Rows, test: TestRecord, sample: SampleRecord) -> None:
    """LVAN: peak and remoulded vane strength (type XN, so the report's text), the vane's size."""
    r, rd = test.results, test.readings
    cells = _Cells("LVAN", _keys(sample, rows.next_specimen("LVAN", sample.code)))
    for heading, key in (("LVAN_VNPK", "undrained_strength_kpa"), ("LVAN_VNRM", "remoulded_strength_kpa")):
        value = _number(r.get(key))
        if value is not None:
            cells.text(heading, reported(key, value))
    cells.number("LVAN_SIZE", rd.get("diameter_mm"))
    cells.number("LVAN_VLEN", rd.get("height_mm"))
    _common(cells, ctx, test)
    cells.text("LVAN_TYPE", "LV")
    cells.number("LVAN_SENS", r.get("sensitivity"), "sensitivity")
    rows.add("LVAN", cells.row)


def _lfcn(ctx: _Context, rows: _Rows, test: TestRecord, sample: SampleRecord) -> None:
    """LFCN: the cone, the mean penetration and the undisturbed and remoulded strengths."""
    r, rd = test.results, test.readings
    cells = _Cells("LFCN", _keys(sample, rows.next_specimen("LFCN", sample.code)))
    cells.number("LFCN_CMAS", rd.get("cone_mass_g"))
    cells.number("LFCN_CANG", rd.get("cone_angle_deg"))
    cells.number("LFCN_PENA", r.get("undisturbed_penetration_mm"), "undisturbed_penetration_mm")
    cells.number("LFCN_FCPK", r.get("undrained_strength_kpa"), "undrained_strength_kpa")
    cells.number("LFCN_FCRM", r.get("remoulded_strength_kpa"), "remoulded_strength_kpa")
    _common(cells, ctx, test)
    cells.number("LFCN_SENS", r.get("sensitivity"), "sensitivity")
    rows.add("LFCN", cells.row)


def _luct(ctx: _Context, rows: _Rows, test: TestRecord, sample: SampleRecord) -> None:
    """LUCT: one row per specimen tested (undisturbed, remoulded), qu and the strain at failure."""
    r, rd = test.results, test.readings
    for specimen, prefix, code in (
        ("undisturbed", "", "UNDISTURBED"),
        ("remoulded", "remoulded_", "REMOULDED"),
    ):
        qu = _number(r.get(f"{prefix}unconfined_strength_kpa"))
        if qu is None:
            continue
        cells = _Cells("LUCT", _keys(sample, rows.next_specimen("LUCT", sample.code)))
        cells.text("LUCT_TYPE", code)
        size = rd.get(specimen)
        if isinstance(size, Mapping):
            cells.number("LUCT_DIA", size.get("diameter_mm"))
            cells.number("LUCT_SLEN", size.get("height_mm"))
        cells.number("LUCT_UCS", qu, "unconfined_strength_kpa")
        cells.number("LUCT_STRA", r.get(f"{prefix}strain_at_failure_pct"), "strain_at_failure_pct")
        _common(cells, ctx, test)
        if not prefix:
            cells.number("LUCT_SENS", r.get("sensitivity"), "sensitivity")
        rows.add("LUCT", cells.row)


def _lcls(ctx: _Context, rows: _Rows, test: TestRecord, sample: SampleRecord) -> None:
    """LCLS (our group): USCS symbol, name and borderline symbol; AASHTO group and index."""
    r = test.results
    cells = _Cells("LCLS", _keys(sample, rows.next_specimen("LCLS", sample.code)))
    for heading, key in (
        ("LCLS_USCS", "uscs_symbol"),
        ("LCLS_USCN", "uscs_name"),
        ("LCLS_USBL", "uscs_borderline"),
        ("LCLS_AASH", "aashto_group"),
    ):
        cells.text(heading, r.get(key))
    cells.number("LCLS_AAGI", r.get("group_index"), "group_index")
    _common(cells, ctx, test)
    rows.add("LCLS", cells.row)


def _remarks(*parts: str) -> str:
    """A REM cell from the parts that say something, joined as sentences."""
    return "; ".join(p for p in parts if p)


def _lpdn(ctx: _Context, rows: _Rows, test: TestRecord, sample: SampleRecord) -> None:
    """LPDN: the mean particle density (type XN, so the report's text) by the small pycnometer.
    The dictionary has no heading for the specific gravity: it goes in the remarks."""
    r = test.results
    rho_s = _number(r.get("particle_density_mg_m3"))
    if rho_s is None:
        return
    cells = _Cells("LPDN", _keys(sample, rows.next_specimen("LPDN", sample.code)))
    cells.text("LPDN_PDEN", reported("particle_density_mg_m3", rho_s))
    cells.text("LPDN_TYPE", "SMALL PYK")
    determinations = [d for d in r.get("particle_density_determinations") or [] if _number(d) is not None]
    gs = _number(r.get("specific_gravity"))
    cells.text(
        "LPDN_REM",
        _remarks(
            f"Mean of {len(determinations)} determinations" if len(determinations) > 1 else "",
            f"specific gravity at 20 DegC {reported('specific_gravity', gs)}" if gs is not None else "",
        ),
    )
    _common(cells, ctx, test)
    rows.add("LPDN", cells.row)


def _lden(ctx: _Context, rows: _Rows, test: TestRecord, sample: SampleRecord) -> None:
    """LDEN: bulk and dry density by linear measurement of cylinders, with the water content.
    The dictionary has no headings for void ratio, porosity and saturation: remarks."""
    r = test.results
    bulk = _number(r.get("bulk_density_mg_m3"))
    if bulk is None:
        return
    cells = _Cells("LDEN", _keys(sample, rows.next_specimen("LDEN", sample.code)))
    cells.text("LDEN_TYPE", "LINEAR")
    cells.text("LDEN_SMTY", "CYLINDER")
    w = _number(r.get("water_content"))
    if w is not None:
        cells.text("LDEN_MC", reported("water_content", w))
    cells.number("LDEN_BDEN", bulk, "bulk_density_mg_m3")
    cells.number("LDEN_DDEN", r.get("dry_density_mg_m3"), "dry_density_mg_m3")
    specimens = [d for d in r.get("bulk_density_determinations") or [] if _number(d) is not None]
    voids = [
        f"{label} {reported(key, value)}{unit}"
        for key, label, unit in (
            ("void_ratio", "void ratio", ""),
            ("porosity", "porosity", ""),
            ("degree_of_saturation", "degree of saturation", " %"),
        )
        if (value := _number(r.get(key))) is not None
    ]
    rho_s = _number(r.get(PARTICLE_DENSITY_USED))  # typed, or from the sample's particle-density test
    cells.text(
        "LDEN_REM",
        _remarks(
            f"Bulk density the mean of {len(specimens)} specimens" if len(specimens) > 1 else "",
            ", ".join(voids) + f" (particle density {reported('particle_density_mg_m3', rho_s)} Mg/m3)"
            if voids and rho_s is not None
            else "",
        ),
    )
    _common(cells, ctx, test)
    rows.add("LDEN", cells.row)


_BAR_CONDITIONS = {"cracked": "Bar cracked while drying", "curled": "Bar curled while drying"}


def _llin(ctx: _Context, rows: _Rows, test: TestRecord, sample: SampleRecord) -> None:
    """LLIN: linear shrinkage (0DP), LLIN_425 from the sample's grading, the bar's condition."""
    ls = _number(test.results.get("linear_shrinkage"))
    if ls is None:
        return
    cells = _Cells("LLIN", _keys(sample, rows.next_specimen("LLIN", sample.code)))
    cells.number("LLIN_LS", ls, "linear_shrinkage")
    cells.number("LLIN_425", _percent_passing_425(ctx, sample), "percent_passing")
    condition = test.readings.get("condition")
    cells.text("LLIN_REM", _BAR_CONDITIONS.get(str(condition), ""))
    _common(cells, ctx, test)
    rows.add("LLIN", cells.row)


def _gchm_loss_on_ignition(ctx: _Context, rows: _Rows, test: TestRecord, sample: SampleRecord) -> None:
    """GCHM, determinand LOI ("Loss on ignition (as %)" in the dictionary's list), of the total
    solid, in %; the dictionary has no heading for the furnace temperature: remarks."""
    organic = _number(test.results.get("organic_content"))
    if organic is None:
        return
    cells = _Cells("GCHM", _keys(sample, rows.next_specimen("GCHM", sample.code)))
    cells.text("GCHM_CODE", "LOI")
    cells.text("GCHM_TTYP", "SOLID_TOTAL")
    cells.number("GCHM_RESL", organic, "organic_content")
    cells.text("GCHM_UNIT", "%")
    cells.text("GCHM_NAME", "Organic content by loss on ignition")
    if _number(test.readings.get("furnace_c")) is not None:
        cells.text("GCHM_REM", f"Ignited at {as_entered(test.readings.get('furnace_c'))} DegC")
    _common(cells, ctx, test)
    rows.add("GCHM", cells.row)


_COMPACTION_TYPES = {"standard": "2.5KG", "modified": "4.5KG"}  # the rammer, AGS4 ABBR CMPG_TYPE


def _cmpg(ctx: _Context, rows: _Rows, test: TestRecord, sample: SampleRecord) -> None:
    """CMPG (the test: rammer, particle density, maximum and optimum) and a CMPT row per point,
    numbered in order of water content as the engine sorts them."""
    r, rd = test.results, test.readings
    points = [p for p in r.get("compaction_points") or [] if isinstance(p, Mapping)]
    if not points:
        return
    keys = {**_keys(sample, rows.next_specimen("CMPG", sample.code)), "CMPG_TESN": "1"}
    cells = _Cells("CMPG", keys)
    cells.text("CMPG_TYPE", _COMPACTION_TYPES.get(str(rd.get("effort")), ""))
    rho_s = _number(r.get(PARTICLE_DENSITY_USED))
    if rho_s is not None:
        cells.text("CMPG_PDEN", reported("particle_density_mg_m3", rho_s))
    maximum = _number(r.get("maximum_dry_density_mg_m3"))
    cells.number("CMPG_MAXD", maximum, "maximum_dry_density_mg_m3")
    cells.number("CMPG_MCOP", r.get("optimum_water_content"), "optimum_water_content")
    if maximum is None:
        cells.text("CMPG_REM", "No maximum dry density: the points do not bracket a peak")
    _common(cells, ctx, test)
    rows.add("CMPG", cells.row)
    for number, point in enumerate(points, start=1):
        w = _number(point.get("water_content"))
        row = _Cells("CMPT", {**keys, "CMPT_TESN": str(number)})
        if w is not None:
            row.text("CMPT_MC", reported("water_content", w))
        row.number("CMPT_DDEN", point.get("dry_density_mg_m3"), "dry_density_mg_m3")
        rows.add("CMPT", row.row)


Builder = Callable[[_Context, _Rows, TestRecord, SampleRecord], None]

# Which groups each method's results go to, in the order written.
METHOD_GROUPS: dict[str, tuple[Builder, ...]] = {
    "water-content": (_lnmc,),
    "atterberg": (_lnmc, _llpl),
    "ll-cup-multipoint": (_llpl,),
    "ll-cup-one-point": (_llpl,),
    "ll-cone": (_llpl,),
    "plastic-limit": (_llpl,),
    "sieve": (_grag,),
    "hydrometer": (_grag,),
    "grading": (_grag,),
    "vane": (_lvan,),
    "fall-cone-strength": (_lfcn,),
    "unconfined-compression": (_luct,),
    "classification": (_lcls,),
    "particle-density": (_lpdn,),
    "density": (_lden,),
    "linear-shrinkage": (_llin,),
    "loss-on-ignition": (_gchm_loss_on_ignition,),
    "compaction": (_cmpg,),
}
EXPORTED_METHODS = frozenset(METHOD_GROUPS)
"""Methods whose results the file carries; tests of any other method are left out."""

RESULT_GROUPS = (
    "LNMC",
    "LLPL",
    "GRAG",
    "GRAT",
    "LVAN",
    "LFCN",
    "LUCT",
    "LCLS",
    "LPDN",
    "LDEN",
    "LLIN",
    "GCHM",
    "CMPG",
    "CMPT",
)


# -- groups --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Group:
    """A group as written: its headings with their units and types, and its DATA rows."""

    name: str
    headings: tuple[Heading, ...]
    rows: tuple[Row, ...]


def _group(name: str, rows: Iterable[Row]) -> _Group:
    """A group with its KEY and REQUIRED headings and those its rows fill, in dictionary order."""
    rows = tuple(rows)
    used = {heading for row in rows for heading, value in row.items() if value}
    known = {h.name for h in definitions(name)}
    if used - known:
        raise ValueError(f"not headings of {name}: {sorted(used - known)}")
    chosen = tuple(
        h for h in definitions(name) if h.name in used or "KEY" in h.status or "REQUIRED" in h.status
    )
    return _Group(name, chosen, rows)


def _project(export: JobExport) -> _Group:
    row = {
        "PROJ_ID": _ascii(export.number),
        "PROJ_NAME": _ascii(export.title),
        "PROJ_LOC": _ascii(export.site),
        "PROJ_CLNT": _ascii(export.client),
    }
    return _group("PROJ", [row])


def _transmission(
    export: JobExport,
    issued_on: date,
    produced_by: str,
    issue: str,
    status: str,
    recipient: str | None,
    description: str | None,
) -> _Group:
    row = {
        "TRAN_ISNO": _ascii(issue),
        "TRAN_DATE": issued_on.isoformat(),
        "TRAN_PROD": _ascii(produced_by),
        "TRAN_STAT": _ascii(status),
        "TRAN_DESC": _ascii(description or f"Approved laboratory test results of job {export.number}"),
        "TRAN_AGS": TRAN_AGS,
        "TRAN_RECV": _ascii(recipient if recipient is not None else export.client) or "Not stated",
        "TRAN_DLIM": DELIMITER,
        "TRAN_RCON": CONCATENATOR,
        "TRAN_REM": "Approved results only, rounded as the laboratory reports them",
    }
    return _group("TRAN", [row])


def _locations(export: JobExport) -> _Group:
    rows = []
    for loc in sorted(export.locations, key=lambda loc: loc.code):
        cells = _Cells("LOCA", {"LOCA_ID": _ascii(loc.code), "LOCA_TYPE": _location_code(loc.kind)})
        cells.number("LOCA_NATE", loc.easting)
        cells.number("LOCA_NATN", loc.northing)
        cells.number("LOCA_GL", loc.ground_level_m)
        rows.append(cells.row)
    return _group("LOCA", rows)


def _sample_order(sample: SampleRecord) -> tuple[str, float, str]:
    return (sample.location, sample.top_m, sample.code)


def _samples(samples: Sequence[SampleRecord]) -> _Group:
    rows = []
    for sample in samples:
        cells = _Cells("SAMP", _keys(sample))
        cells.number("SAMP_BASE", sample.base_m)
        cells.text("SAMP_REM", sample.remarks)
        cells.text("SAMP_DESC", sample.description)
        rows.append(cells.row)
    return _group("SAMP", rows)


def _dict_group(groups: Sequence[_Group]) -> _Group | None:
    """DICT rows for our own groups and headings that the file uses (Rules 9 and 18)."""
    rows: list[Row] = []
    for group in groups:
        if group.name in OWN_GROUPS:
            description, parent = OWN_GROUPS[group.name]
            rows.append(
                {"DICT_TYPE": "GROUP", "DICT_GRP": group.name, "DICT_DESC": description, "DICT_PGRP": parent}
            )
        own = {h.name for h in own_headings().get(group.name, ())}
        for h in group.headings:
            if h.name in own:
                rows.append(
                    {
                        "DICT_TYPE": "HEADING",
                        "DICT_GRP": group.name,
                        "DICT_HDNG": h.name,
                        "DICT_STAT": h.status,
                        "DICT_DTYP": h.data_type,
                        "DICT_DESC": h.description,
                        "DICT_UNIT": h.unit,
                    }
                )
    return _group("DICT", rows) if rows else None


def _abbreviations(groups: Sequence[_Group]) -> _Group | None:
    """An ABBR row for every code under every PA heading (Rule 16), sorted."""
    used: set[tuple[str, str]] = set()
    for group in groups:
        for h in group.headings:
            if h.data_type != "PA":
                continue
            for row in group.rows:
                used.update((h.name, code) for code in row.get(h.name, "").split(CONCATENATOR) if code)
    rows = []
    for heading, code in sorted(used):
        description, source = _described(heading, code)
        rows.append({"ABBR_HDNG": heading, "ABBR_CODE": code, "ABBR_DESC": description, "ABBR_LIST": source})
    return _group("ABBR", rows) if rows else None


def _described_in(table: dict[str, str], what: str, code: str) -> str:
    found = table.get(code)
    if not found:
        raise ValueError(f"{what} {code!r} is not in the {TRAN_AGS} dictionary: describe it")
    return found


def _units_and_types(groups: Sequence[_Group]) -> tuple[_Group, _Group]:
    """UNIT and TYPE: every unit and data type the file uses, the DICT rows' own and the
    values of PU headings included (Rules 15 and 17), described as the dictionary describes them."""
    table = standard_dictionary()
    units = {h.unit for g in groups for h in g.headings if h.unit}
    units |= {
        row[h.name]
        for g in groups
        for h in g.headings
        if h.data_type == "PU"
        for row in g.rows
        if row.get(h.name)
    }
    units |= {row["DICT_UNIT"] for g in groups if g.name == "DICT" for row in g.rows if row.get("DICT_UNIT")}
    types = {h.data_type for g in groups for h in g.headings} | {"X"}  # UNIT's and TYPE's own
    types |= {row["DICT_DTYP"] for g in groups if g.name == "DICT" for row in g.rows if row.get("DICT_DTYP")}
    unit = _group(
        "UNIT", [{"UNIT_UNIT": u, "UNIT_DESC": _described_in(table.units, "unit", u)} for u in sorted(units)]
    )
    kind = _group(
        "TYPE",
        [{"TYPE_TYPE": t, "TYPE_DESC": _described_in(table.types, "data type", t)} for t in sorted(types)],
    )
    return unit, kind


def _field(value: str) -> str:
    return '"' + value.replace('"', '""') + '"'


def _lines(group: _Group) -> list[str]:
    """One group as AGS4 lines, every field quoted, the group closed by a blank line."""
    names = [h.name for h in group.headings]
    rows = [
        ["GROUP", group.name],
        ["HEADING", *names],
        ["UNIT", *(h.unit for h in group.headings)],
        ["TYPE", *(h.data_type for h in group.headings)],
    ]
    rows += [["DATA", *(row.get(name, "") for name in names)] for row in group.rows]
    return [",".join(_field(value) for value in row) for row in rows] + [""]


def ags4_text(
    export: JobExport,
    *,
    issued_on: date,
    produced_by: str = "Claybench",
    issue: int | str = 1,
    status: str = "Final",
    recipient: str | None = None,
    description: str | None = None,
) -> str:
    """The AGS4 file (dictionary 4.1.1) of ``export``: ASCII text with CRLF line ends.

    ``issued_on`` is TRAN_DATE, ``issue`` TRAN_ISNO, ``produced_by`` TRAN_PROD, ``status``
    TRAN_STAT; TRAN_RECV is ``recipient``, by default the client; TRAN_DESC is ``description``,
    by default the job's approved results. Locations and samples are
    written in code and depth order, each test's rows in the order of its sample and method;
    tests of methods outside ``EXPORTED_METHODS`` are left out. Raises ValueError when a sample
    names a location, or a test a sample, that the export does not hold.
    """
    locations = {loc.code for loc in export.locations}
    samples = {s.code: s for s in export.samples}
    for sample in export.samples:
        if sample.location not in locations:
            raise ValueError(f"sample {sample.code} names location {sample.location}, not in the export")
    for test in export.tests:
        if test.sample not in samples:
            raise ValueError(f"a {test.method} test names sample {test.sample}, not in the export")
    ordered = sorted(export.samples, key=_sample_order)
    rank = {s.code: i for i, s in enumerate(ordered)}
    tests = sorted(export.tests, key=lambda t: (rank[t.sample], t.method, t.revision, t.test_id))
    tests_of: dict[str, list[TestRecord]] = {}
    for test in tests:
        tests_of.setdefault(test.sample, []).append(test)
    ctx = _Context(export, tests_of)
    rows = _Rows()
    for test in tests:
        for build in METHOD_GROUPS.get(test.method, ()):
            build(ctx, rows, test, samples[test.sample])

    body = [
        _project(export),
        _transmission(export, issued_on, produced_by, str(issue), status, recipient, description),
    ]
    data: list[_Group] = []
    if export.locations:
        data.append(_locations(export))
    if ordered:
        data.append(_samples(ordered))
    data += [_group(name, rows.groups[name]) for name in RESULT_GROUPS if rows.groups.get(name)]
    dictionary = _dict_group(data)
    described = [*body, *data, *([dictionary] if dictionary else [])]
    abbreviations = _abbreviations(described)
    if abbreviations:
        described.append(abbreviations)
    unit, kind = _units_and_types([*described, _group("UNIT", []), _group("TYPE", [])])
    groups = [
        *body,
        unit,
        kind,
        *([abbreviations] if abbreviations else []),
        *([dictionary] if dictionary else []),
        *data,
    ]
    return "\r\n".join(line for group in groups for line in _lines(group)) + "\r\n"
