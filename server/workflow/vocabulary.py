"""The words the register of work may use: kinds of location, types of sample, the condition
of a sample on receipt, and the family of standards a job is tested to.

Pure, like the state table: pages, the import of schedules (spreadsheet or AGS4) and the API
all check a value here, so a word accepted by one front door is accepted by every other.
Each vocabulary maps our stored id to the label people read; ``*_id`` functions turn what a
person or a file wrote (our id, our label, or the trade's usual abbreviation) into the id.
"""

from __future__ import annotations

import re

LOCATION_KINDS: dict[str, str] = {
    "borehole": "Borehole",
    "trial pit": "Trial pit",
    "window sample": "Window sample",
    "hand auger": "Hand auger",
    "other": "Other",
}

# The abbreviations of AGS4 LOCA_TYPE that site teams write (AGS4 standard abbreviations list,
# common practice), read as our kinds: percussion and rotary holes are boreholes.
_LOCATION_ABBREVIATIONS: dict[str, str] = {
    "bh": "borehole",
    "cp": "borehole",
    "rc": "borehole",
    "ro": "borehole",
    "rp": "borehole",
    "cp+rc": "borehole",
    "cp+ro": "borehole",
    "tp": "trial pit",
    "tt": "trial pit",
    "ws": "window sample",
    "wls": "window sample",
    "ha": "hand auger",
}

SAMPLE_TYPES: dict[str, str] = {
    "U100": "U100 open-drive tube",
    "UT100": "UT100 thin-walled tube",
    "tube": "Tube (other)",
    "piston": "Piston",
    "block": "Block",
    "core": "Core",
    "bulk": "Bulk",
    "large bulk": "Large bulk",
    "disturbed": "Disturbed",
    "split spoon": "Split spoon (SPT)",
    "liner": "Liner (window sample)",
    "jar": "Jar",
    "water": "Water",
}

# AGS4 SAMP_TYPE abbreviations (AGS4 standard abbreviations list, common practice).
_SAMPLE_ABBREVIATIONS: dict[str, str] = {
    "u": "U100",
    "ut": "UT100",
    "tw": "UT100",
    "p": "piston",
    "blk": "block",
    "c": "core",
    "b": "bulk",
    "lb": "large bulk",
    "d": "disturbed",
    "spt": "split spoon",
    "l": "liner",
    "j": "jar",
    "w": "water",
}

CONDITIONS: dict[str, str] = {
    "intact": "Intact",
    "damaged": "Damaged",
    "leaking": "Leaking",
    "insufficient": "Insufficient material",
    "unlabelled": "Label missing or illegible",
    "disturbed": "Disturbed in transit",
    "dried out": "Dried out",
}
"""The condition of a sample when the laboratory received it (common practice)."""

STANDARDS: dict[str, str] = {
    "astm": "ASTM",
    "bs-iso": "BS / ISO",
}
"""The family of standards a job is tested to; it preselects the methods offered."""

METHODS_BY_STANDARDS: dict[str, tuple[str, ...]] = {
    "astm": (
        "water-content",
        "atterberg",
        "ll-cup-multipoint",
        "ll-cup-one-point",
        "plastic-limit",
        "sieve",
        "hydrometer",
        "grading",
        "classification",
        "vane",
        "unconfined-compression",
        "particle-density",
        "density",
        "loss-on-ignition",
        "compaction",
    ),
    "bs-iso": (
        "water-content",
        "atterberg",
        "ll-cone",
        "plastic-limit",
        "sieve",
        "hydrometer",
        "grading",
        "classification",
        "vane",
        "fall-cone-strength",
        "unconfined-compression",
        "particle-density",
        "linear-shrinkage",
        "density",
        "loss-on-ignition",
        "compaction",
    ),
}
"""The methods a job's family of standards offers first, in the order a lab lists them: the
cup liquid limit for ASTM D4318, the fall cone for BS 1377-2 and ISO 17892-12."""

LIQUID_LIMIT_BY_STANDARDS: dict[str, str] = {"astm": "ll-cup-multipoint", "bs-iso": "ll-cone"}

_FOLD = re.compile(r"[\s_\-]+")


def fold(text: str) -> str:
    """Text compared without case, spaces, underscores or hyphens."""
    return _FOLD.sub("", text.strip().lower())


def _lookup(text: str, ids: dict[str, str], abbreviations: dict[str, str]) -> str | None:
    key = fold(text)
    if not key:
        return None
    for stored, label in ids.items():
        if key in (fold(stored), fold(label)):
            return stored
    return abbreviations.get(key) or next((v for k, v in abbreviations.items() if fold(k) == key), None)


def location_kind_id(text: str) -> str | None:
    """Our id for a kind of location written as our id, our label or an AGS4 abbreviation."""
    return _lookup(text, LOCATION_KINDS, _LOCATION_ABBREVIATIONS)


def sample_type_id(text: str) -> str | None:
    """Our id for a sample type written as our id, our label or an AGS4 abbreviation."""
    return _lookup(text, SAMPLE_TYPES, _SAMPLE_ABBREVIATIONS)


def condition_id(text: str) -> str | None:
    return _lookup(text, CONDITIONS, {})


def standards_id(text: str) -> str | None:
    return _lookup(text, STANDARDS, {"bs": "bs-iso", "iso": "bs-iso", "bsiso": "bs-iso", "en": "bs-iso"})
