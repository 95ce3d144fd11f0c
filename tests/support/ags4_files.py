"""AGS4 text for tests, written the way python-ags4's checker wants it.

``ags4_text`` writes PROJ, TRAN, UNIT, TYPE, ABBR, LOCA and SAMP (then any extra groups) from
plain rows: the headings of the standard dictionary python-ags4 ships, in its order (AGS Format
Rule 7), every field quoted (Rule 5), CRLF line ends (Rule 2a), the units, types and
abbreviations used listed in UNIT, TYPE and ABBR (Rules 15, 17, 16), TRAN_RCON "+" and
TRAN_DLIM "|" (Rule 11; a comma as TRAN_RCON trips the quoting check). Valid rows give a file
the checker passes with zero errors; a test that wants a fault writes a valid file and then
breaks it by hand, so that the fault is the only thing wrong.
"""

from __future__ import annotations

from functools import cache
from pathlib import Path
from typing import NamedTuple

import python_ags4
from python_ags4 import AGS4, check

TRAN_AGS = "4.1.1"  # python-ags4's default dictionary (python_ags4.check.LATEST_DICT_VERSION)
RECORD_CONCATENATOR = "+"  # TRAN_RCON

# The TRAN row of every file written here: one issue, by a fictional sender.
TRAN_ROW = {
    "TRAN_ISNO": "1",
    "TRAN_DATE": "2026-01-15",
    "TRAN_PROD": "Claybench test suite",
    "TRAN_STAT": "Draft",
    "TRAN_AGS": TRAN_AGS,
    "TRAN_RECV": "Claybench soils laboratory",
    "TRAN_DLIM": "|",
    "TRAN_RCON": RECORD_CONCATENATOR,
}

_ORDER = ("PROJ", "TRAN", "UNIT", "TYPE", "ABBR", "LOCA", "SAMP")  # the usual order of a file

# Informational entries of python-ags4's report, not errors (STACK-NOTES.md).
INFORMATION = ("Metadata", "Summary of data")


class Group(NamedTuple):
    """A group written as given: headings, their units and types (one each), and rows."""

    headings: list[str]
    units: list[str]
    types: list[str]
    rows: list[dict[str, str]]


@cache
def _dictionary() -> dict[str, list[dict[str, str]]]:
    """The standard dictionary's DICT, UNIT, TYPE and ABBR rows, read once per test run."""
    path = Path(python_ags4.__file__).parent / check.STANDARD_DICT_FILES[TRAN_AGS]
    tables, _ = AGS4.AGS4_to_dataframe(str(path))
    return {
        name: [row for row in tables[name].to_dict("records") if row["HEADING"] == "DATA"]
        for name in ("DICT", "UNIT", "TYPE", "ABBR")
    }


def _standard(name: str, rows: list[dict[str, str]]) -> Group:
    """A dictionary group: its KEY and REQUIRED headings plus those the rows use, in the
    dictionary's order, with the dictionary's units and types."""
    defined = [
        row for row in _dictionary()["DICT"] if row["DICT_TYPE"] == "HEADING" and row["DICT_GRP"] == name
    ]
    known = {row["DICT_HDNG"] for row in defined}
    used = {heading for row in rows for heading in row}
    if used - known:
        raise ValueError(f"not in the {TRAN_AGS} dictionary's {name} group: {sorted(used - known)}")
    chosen = [
        row
        for row in defined
        if row["DICT_HDNG"] in used or any(word in row["DICT_STAT"] for word in ("KEY", "REQUIRED"))
    ]
    return Group(
        [row["DICT_HDNG"] for row in chosen],
        [row["DICT_UNIT"] for row in chosen],
        [row["DICT_DTYP"] for row in chosen],
        rows,
    )


def _retyped(group: Group, types: dict[str, str]) -> Group:
    """The group with some headings' TYPE replaced (a file may declare its own, Rule 8)."""
    return group._replace(types=[types.get(h, t) for h, t in zip(group.headings, group.types, strict=True)])


_CODE_HEADING = {"UNIT": "UNIT_UNIT", "TYPE": "TYPE_TYPE", "ABBR": "ABBR_CODE"}


def _described(table: str, code: str, abbr_heading: str | None = None) -> str:
    """The dictionary's description of a unit, a type or (under ``abbr_heading``) an
    abbreviation; a test that uses one the dictionary lacks must describe it itself."""
    for row in _dictionary()[table]:
        if row[_CODE_HEADING[table]] == code and row.get("ABBR_HDNG") == abbr_heading:
            return str(row[f"{table}_DESC"])
    raise ValueError(
        f"{table} {abbr_heading or ''} {code!r} is not in the {TRAN_AGS} dictionary: describe it"
    )


def _abbreviations(groups: list[Group], abbr: list[dict[str, str]]) -> list[dict[str, str]]:
    """An ABBR row for every code of every PA heading (Rule 16), a test's own rows first."""
    rows = {(row["ABBR_HDNG"], row["ABBR_CODE"]): row for row in abbr}
    for group in groups:
        for heading, data_type in zip(group.headings, group.types, strict=True):
            if data_type != "PA":
                continue
            for value in (row.get(heading, "") for row in group.rows):
                for code in filter(None, value.split(RECORD_CONCATENATOR)):
                    if (heading, code) not in rows:
                        description = _described("ABBR", code, heading)
                        rows[(heading, code)] = {
                            "ABBR_HDNG": heading,
                            "ABBR_CODE": code,
                            "ABBR_DESC": description,
                        }
    return list(rows.values())


def _field(value: str) -> str:
    return '"' + value.replace('"', '""') + '"'


def _lines(name: str, group: Group) -> list[str]:
    """One group as AGS4 lines, every field quoted, the group closed by a blank line."""
    rows = [["GROUP", name], ["HEADING", *group.headings], ["UNIT", *group.units], ["TYPE", *group.types]]
    rows += [["DATA", *(row.get(h, "") for h in group.headings)] for row in group.rows]
    return [",".join(_field(value) for value in row) for row in rows] + [""]


def ags4_text(
    proj: dict[str, str],
    loca: list[dict[str, str]],
    samp: list[dict[str, str]],
    extra: dict[str, Group] | None = None,
    abbr: list[dict[str, str]] | None = None,
    types: dict[str, str] | None = None,
) -> str:
    """An AGS4 file (dictionary ``TRAN_AGS``) with the given PROJ row, LOCA and SAMP rows.

    Rows map headings to the text written (blank when left out). ``extra`` groups are written
    as given, after SAMP; ``abbr`` rows define (or redescribe) abbreviations, the standard list
    describes the rest; ``types`` replaces the dictionary's TYPE of a heading in PROJ, LOCA and
    SAMP. An empty LOCA or SAMP is left out (Rule 2: a group has DATA rows).
    """
    groups = {"PROJ": _standard("PROJ", [proj]), "TRAN": _standard("TRAN", [TRAN_ROW])}
    groups.update((name, _standard(name, rows)) for name, rows in (("LOCA", loca), ("SAMP", samp)) if rows)
    groups = {name: _retyped(group, types or {}) for name, group in groups.items()}
    extra = extra or {}
    abbreviations = _abbreviations([*groups.values(), *extra.values()], abbr or [])
    if abbreviations:
        groups["ABBR"] = _standard("ABBR", abbreviations)
    groups["UNIT"], groups["TYPE"] = _standard("UNIT", []), _standard("TYPE", [])
    every = [*groups.values(), *extra.values()]
    units = sorted({unit for group in every for unit in group.units if unit})
    data_types = sorted({data_type for group in every for data_type in group.types})
    groups["UNIT"] = groups["UNIT"]._replace(
        rows=[{"UNIT_UNIT": unit, "UNIT_DESC": _described("UNIT", unit)} for unit in units]
    )
    groups["TYPE"] = groups["TYPE"]._replace(
        rows=[{"TYPE_TYPE": t, "TYPE_DESC": _described("TYPE", t)} for t in data_types]
    )
    ordered = [(name, groups[name]) for name in _ORDER if name in groups] + list(extra.items())
    return "\r\n".join(line for name, group in ordered for line in _lines(name, group)) + "\r\n"


def checker_errors(text: str, folder: Path) -> dict[str, list[dict[str, object]]]:
    """python-ags4's report on ``text`` (written to ``folder``), errors only."""
    path = folder / "checked.ags"
    path.write_bytes(text.encode("utf-8"))
    report = AGS4.check_file(str(path))
    return {
        rule: entries
        for rule, entries in report.items()
        if rule not in INFORMATION and not rule.startswith("FYI")
    }


def line_of(text: str, fragment: str) -> int:
    """The number of the first line of ``text`` containing ``fragment`` (line 1 is the first)."""
    for number, line in enumerate(text.split("\r\n"), start=1):
        if fragment in line:
            return number
    raise ValueError(f"{fragment!r} is not in the file")
