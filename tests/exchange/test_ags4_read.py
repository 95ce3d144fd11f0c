"""Reading a schedule from an AGS4 file: real files, written by tests.support.ags4_files and
checked by python-ags4's own checker (DESIGN.md section 7)."""

from __future__ import annotations

from pathlib import Path

import pytest

from server.exchange.ags4_read import read_ags4
from server.exchange.schedule import CODE_MAX, DEPTH_MAX_M, DESCRIPTION_MAX, ROWS_MAX, CellError, Schedule
from tests.support.ags4_files import Group, ags4_text, checker_errors, line_of

# A fictional job: a flood embankment, three holes, four samples.
PROJ = {
    "PROJ_ID": "J2607",
    "PROJ_NAME": "Alder Brook flood embankment",
    "PROJ_LOC": "Marrowby",
    "PROJ_CLNT": "Fenwick & Dale Consulting",
}
LOCA = [
    {
        "LOCA_ID": "BH1",
        "LOCA_TYPE": "CP+RC",
        "LOCA_NATE": "412345.60",
        "LOCA_NATN": "287654.30",
        "LOCA_GL": "42.10",
    },
    {"LOCA_ID": "TP2", "LOCA_TYPE": "TP", "LOCA_GL": "41.85"},
    {"LOCA_ID": "HA3", "LOCA_TYPE": "HAND"},
]
SAMP = [
    {
        "LOCA_ID": "BH1",
        "SAMP_TOP": "1.00",
        "SAMP_REF": "1",
        "SAMP_TYPE": "U",
        "SAMP_BASE": "1.45",
        "SAMP_DESC": 'Firm brown "sandy" CLAY, with gravel',
    },
    {"LOCA_ID": "BH1", "SAMP_TOP": "2.50", "SAMP_REF": "2", "SAMP_TYPE": "D", "SAMP_REM": "Point sample"},
    {"LOCA_ID": "TP2", "SAMP_TOP": "0.50", "SAMP_TYPE": "B", "SAMP_ID": "TP2-B1", "SAMP_BASE": "1.00"},
    {"LOCA_ID": "HA3", "SAMP_TOP": "0.30", "SAMP_TYPE": "JR"},
]
# Codes of the file's own, described in its ABBR group (AGS Format Rule 16).
OWN_ABBR = [
    {"ABBR_HDNG": "LOCA_TYPE", "ABBR_CODE": "HAND", "ABBR_DESC": "Hand auger"},
    {"ABBR_HDNG": "SAMP_TYPE", "ABBR_CODE": "JR", "ABBR_DESC": "Jar"},
]


def schedule_text(
    loca: list[dict[str, str]] | None = None,
    samp: list[dict[str, str]] | None = None,
    proj: dict[str, str] | None = None,
    types: dict[str, str] | None = None,
    extra: dict[str, Group] | None = None,
) -> str:
    """The fictional job's file, with some of its groups replaced."""
    return ags4_text(
        PROJ if proj is None else proj,
        LOCA if loca is None else loca,
        SAMP if samp is None else samp,
        extra=extra,
        abbr=OWN_ABBR,
        types=types,
    )


def with_sample(**values: str) -> list[dict[str, str]]:
    """The job's samples and one more, at BH1."""
    return [*SAMP, {"LOCA_ID": "BH1", "SAMP_TOP": "4.00", "SAMP_TYPE": "D", **values}]


def read(text: str) -> Schedule:
    return read_ags4(text.encode("ascii"))


def only_error(schedule: Schedule) -> CellError:
    assert len(schedule.errors) == 1, schedule.errors
    return schedule.errors[0]


def errors_of(schedule: Schedule, rule: str) -> list[CellError]:
    return [e for e in schedule.errors if e.message.startswith(f"{rule}: ")]


# --- the test writer --------------------------------------------------------------------------


def test_the_writer_s_valid_file_passes_python_ags4_s_checker_with_zero_errors(tmp_path: Path) -> None:
    moisture = Group(  # an extra results group, written as given (LNMC of the 4.1.1 dictionary)
        ["LOCA_ID", "SAMP_TOP", "SAMP_REF", "SAMP_TYPE", "SAMP_ID", "SPEC_REF", "SPEC_DPTH", "LNMC_MC"],
        ["", "m", "", "", "", "", "m", "%"],
        ["ID", "2DP", "X", "PA", "ID", "X", "2DP", "X"],
        [
            {
                "LOCA_ID": "BH1",
                "SAMP_TOP": "1.00",
                "SAMP_REF": "1",
                "SAMP_TYPE": "U",
                "SPEC_REF": "1",
                "SPEC_DPTH": "1.20",
                "LNMC_MC": "24",
            }
        ],
    )
    text = schedule_text(extra={"LNMC": moisture})

    assert checker_errors(text, tmp_path) == {}  # every AGS Format rule python-ags4 1.2 checks
    assert "\r\n" in text and "\n" not in text.replace("\r\n", "")  # AGS Format Rule 2a: CRLF
    assert line_of(text, '"GROUP","LNMC"') > line_of(text, '"GROUP","SAMP"')  # extra groups after SAMP


# --- a valid file -----------------------------------------------------------------------------


def test_a_valid_file_is_read_to_its_project_locations_and_samples() -> None:
    text = schedule_text()
    schedule = read(text)

    assert schedule.errors == []
    assert schedule.format == "ags4"
    project = schedule.project
    assert project is not None
    # DESIGN.md section 7: the job is PROJ_ID, title PROJ_NAME, site PROJ_LOC, client PROJ_CLNT
    assert (project.number, project.title, project.site, project.client) == (
        "J2607",
        "Alder Brook flood embankment",
        "Marrowby",
        "Fenwick & Dale Consulting",
    )
    bh1, tp2, ha3 = schedule.locations
    assert (bh1.code, bh1.kind) == ("BH1", "borehole")  # CP+RC: cable percussion then rotary cored
    assert (bh1.easting, bh1.northing, bh1.ground_level_m) == (412345.60, 287654.30, 42.10)  # as written
    assert (tp2.kind, tp2.easting, tp2.ground_level_m) == ("trial pit", None, 41.85)  # TP; blank is None
    assert ha3.kind == "hand auger"  # the file's own HAND, described "Hand auger" in its ABBR
    assert [loc.origin.line for loc in schedule.locations] == [
        line_of(text, '"DATA","BH1"'),
        line_of(text, '"DATA","TP2"'),
        line_of(text, '"DATA","HA3"'),
    ]  # the file's own lines
    first = schedule.samples[0]
    assert (first.location, first.code, first.top_m, first.base_m) == (
        "BH1",
        "BH1-1",
        1.0,
        1.45,
    )  # as written
    assert first.sample_type == "U100"  # U: undisturbed open-drive sample (AGS4 abbreviations list)
    assert first.description == 'Firm brown "sandy" CLAY, with gravel'  # doubled quotes read back (Rule 5)
    assert first.origin.group == "SAMP"
    assert first.origin.line == line_of(text, '"DATA","BH1","1.00"')
    assert [s.sample_type for s in schedule.samples] == [
        "U100",
        "disturbed",
        "bulk",
        "jar",
    ]  # U, D, B, JR "Jar"
    assert schedule.samples[1].remarks == "Point sample"  # SAMP_REM as written


def test_sample_codes_come_from_samp_id_else_location_and_samp_ref_else_location_type_and_top() -> None:
    codes = [sample.code for sample in read(schedule_text()).samples]

    # SAMP_REF 1 and 2 in BH1; SAMP_ID TP2-B1; HA3 with neither: type JR at 0.30 m
    assert codes == ["BH1-1", "BH1-2", "TP2-B1", "HA3-JR0.30"]


def test_a_blank_base_depth_makes_a_point_sample_at_its_top_depth() -> None:
    point = read(schedule_text()).samples[1]

    assert (point.top_m, point.base_m) == (2.5, 2.5)  # base = top for a point sample (common practice)


def test_each_line_names_the_headings_its_fields_came_from() -> None:
    schedule = read(schedule_text())

    assert schedule.locations[0].columns == {
        "location": "LOCA_ID",
        "location_type": "LOCA_TYPE",
        "easting": "LOCA_NATE",
        "northing": "LOCA_NATN",
        "ground_level": "LOCA_GL",
    }  # the spreadsheet reader's field names (spreadsheet.FIELDS) -> AGS4 4.1.1 LOCA headings
    by_ref, by_id = schedule.samples[0].columns, schedule.samples[2].columns
    assert (by_ref["sample"], by_id["sample"]) == ("SAMP_REF", "SAMP_ID")  # where each code came from
    assert by_ref["top"] == "SAMP_TOP" and by_ref["base"] == "SAMP_BASE"  # AGS4 SAMP


def test_a_file_saved_in_windows_1252_is_read() -> None:
    text = schedule_text(samp=with_sample(SAMP_ID="BH1-D4", SAMP_REM="Labelled by Renée"))

    schedule = read_ags4(text.encode("cp1252"))

    # AGS Format Rule 1 as python-ags4 reads it: extended ASCII (code points 160-255) is allowed
    assert schedule.errors == []
    assert schedule.samples[-1].remarks == "Labelled by Renée"


# --- the checker's refusals -------------------------------------------------------------------


def test_a_heading_not_in_the_dictionary_is_refused_by_rule_9_at_its_heading() -> None:
    text = schedule_text().replace('"SAMP_DESC"', '"SAMP_DESK"')

    schedule = read(text)

    (error,) = errors_of(schedule, "AGS Format Rule 9")  # names from the dictionary or DICT (Rule 9)
    assert (error.origin.group, error.origin.line, error.column) == (
        "SAMP",
        line_of(text, '"HEADING","LOCA_ID","SAMP_TOP"'),
        "SAMP_DESK",
    )
    assert (schedule.project, schedule.locations, schedule.samples) == (None, [], [])  # nothing read


def test_an_unquoted_field_is_refused_by_rule_5_in_the_group_its_line_stands_in() -> None:
    text = schedule_text().replace('"41.85"', "41.85")  # TP2's ground level, last on its line

    (error,) = errors_of(read(text), "AGS Format Rule 5")  # every field in double quotes (Rule 5)

    assert (error.origin.group, error.origin.line, error.column) == (
        "LOCA",
        line_of(text, '"DATA","TP2"'),
        "",
    )


def test_a_unit_missing_from_the_unit_group_is_refused_by_rule_15() -> None:
    text = schedule_text().replace('"DATA","m","metre"\r\n', "")

    (error,) = errors_of(read(text), "AGS Format Rule 15")  # every unit used listed in UNIT (Rule 15)

    assert (error.origin.group, error.origin.line, error.column) == (
        "UNIT",
        None,
        "",
    )  # the checker names no line
    assert 'Unit "m" not found' in error.message


def test_a_value_not_of_its_heading_s_type_is_refused_by_rule_8_at_its_line_and_heading() -> None:
    text = schedule_text(samp=with_sample(SAMP_REF="3", SAMP_BASE="4.5"))  # 2DP wants 4.50

    (error,) = errors_of(read(text), "AGS Format Rule 8")  # values as their TYPE says (Rule 8)

    assert (error.origin.group, error.origin.line, error.column) == (
        "SAMP",
        line_of(text, '"DATA","BH1","4.00"'),
        "SAMP_BASE",
    )


def test_a_blank_proj_id_is_refused_by_rule_10b_at_its_line_and_heading() -> None:
    text = schedule_text(proj={**PROJ, "PROJ_ID": ""})

    (error,) = errors_of(read(text), "AGS Format Rule 10b")  # REQUIRED fields filled (Rule 10b)

    assert (error.origin.group, error.origin.line, error.column) == (
        "PROJ",
        line_of(text, '"DATA","","Alder Brook'),
        "PROJ_ID",
    )


def test_a_file_without_a_proj_group_is_refused_by_rule_13() -> None:
    text = schedule_text()
    text = text[text.index('"GROUP","TRAN"') :]

    (error,) = errors_of(read(text), "AGS Format Rule 13")  # one PROJ group per file (Rule 13)

    assert (error.origin.group, error.column) == ("PROJ", "")


def test_a_sample_whose_location_is_not_in_loca_is_refused_once_by_rule_10c() -> None:
    text = schedule_text(samp=[*SAMP, {"LOCA_ID": "BH9", "SAMP_TOP": "1.00", "SAMP_TYPE": "D"}])

    error = only_error(read(text))  # said once: by the checker, not again by the reader

    assert error.message.startswith("AGS Format Rule 10c: ")  # a parent row for every child (Rule 10c)
    assert (error.origin.group, error.origin.line) == ("SAMP", line_of(text, '"DATA","BH9"'))


# --- the reader's own refusals ----------------------------------------------------------------


def test_a_base_above_the_top_is_refused_at_samp_base() -> None:
    text = schedule_text(samp=with_sample(SAMP_REF="3", SAMP_BASE="3.50"))

    schedule = read(text)

    error = only_error(schedule)  # base >= top (DESIGN.md section 7, as the spreadsheet reader)
    assert (error.origin.group, error.origin.line, error.column) == (
        "SAMP",
        line_of(text, '"DATA","BH1","4.00"'),
        "SAMP_BASE",
    )
    assert "above the top depth" in error.message
    assert [s.code for s in schedule.samples] == ["BH1-1", "BH1-2", "TP2-B1", "HA3-JR0.30"]  # the rest kept


def test_a_depth_that_is_not_a_number_is_refused_where_the_file_types_it_as_text() -> None:
    rows = with_sample(SAMP_REF="3")
    rows[-1]["SAMP_TOP"] = "four"
    text = schedule_text(samp=rows, types={"SAMP_TOP": "X"})  # X passes the checker's Rule 8

    error = only_error(read(text))  # depths are numbers (DESIGN.md section 7)

    assert (error.origin.group, error.origin.line, error.column) == (
        "SAMP",
        line_of(text, '"DATA","BH1","four"'),
        "SAMP_TOP",
    )
    assert "must be a number of metres, not 'four'" in error.message


def test_a_depth_deeper_than_any_hole_is_refused() -> None:
    deep = f"{DEPTH_MAX_M + 200:.2f}"  # 1200.00 m: a slip of unit or typing (common practice)
    text = schedule_text(samp=with_sample(SAMP_REF="3", SAMP_BASE=deep))

    error = only_error(read(text))

    assert (error.origin.line, error.column) == (line_of(text, deep), "SAMP_BASE")
    assert "outside 0 m to 1,000 m" in error.message  # DEPTH_MAX_M, schedule.py


def test_a_blank_top_depth_is_refused() -> None:
    text = schedule_text(samp=with_sample(SAMP_REF="3", SAMP_TOP=""))

    error = only_error(read(text))  # every sample has its top depth (DESIGN.md section 7)

    assert (error.origin.line, error.column) == (line_of(text, '"DATA","BH1","","3"'), "SAMP_TOP")


@pytest.mark.parametrize(
    ("easting", "data_type"),
    [
        ("1e999", "X"),  # infinite as a float; typed as text, so the checker's Rule 8 lets it by
        (
            "20000000",
            "U",
        ),  # beyond COORDINATE_MAX: grid coordinates stay below ten million m (common practice)
    ],
)
def test_a_coordinate_that_is_not_finite_or_off_any_grid_is_refused(easting: str, data_type: str) -> None:
    loca = [*LOCA, {"LOCA_ID": "BH4", "LOCA_TYPE": "CP", "LOCA_NATE": easting}]
    text = schedule_text(loca=loca, types={"LOCA_NATE": data_type})  # a file may declare its own TYPE

    error = only_error(read(text))  # coordinates finite (DESIGN.md section 7), as the spreadsheet reader

    assert (error.origin.group, error.origin.line, error.column) == (
        "LOCA",
        line_of(text, '"DATA","BH4"'),
        "LOCA_NATE",
    )
    assert f"easting {easting} m is outside" in error.message


def test_an_abbreviation_that_maps_to_nothing_is_refused_naming_the_code_and_its_description() -> None:
    text = schedule_text(samp=with_sample(SAMP_REF="3", SAMP_TYPE="ES"))  # in the AGS4 abbreviations list

    error = only_error(read(text))

    assert (error.origin.line, error.column) == (line_of(text, '"DATA","BH1","4.00"'), "SAMP_TYPE")
    # ES: "Soil sample for environmental testing" (AGS4 standard abbreviations, dictionary 4.1.1)
    assert '"ES" ("Soil sample for environmental testing" in the ABBR group)' in error.message


def test_a_sample_code_met_twice_is_refused_on_the_later_line() -> None:
    text = schedule_text(samp=with_sample(SAMP_REF="1"))  # BH1-1 again, at 4.00 m: a new key (Rule 10a)

    schedule = read(text)

    error = only_error(schedule)  # codes unique in a job (DESIGN.md section 7, the Sample table)
    first_line = line_of(text, '"DATA","BH1","1.00"')
    assert (error.origin.line, error.column) == (line_of(text, '"DATA","BH1","4.00"'), "SAMP_REF")
    assert f"already on line {first_line}" in error.message
    assert [s.code for s in schedule.samples].count("BH1-1") == 1


def test_a_samp_id_equal_to_a_code_made_from_samp_ref_is_refused_as_twice() -> None:
    text = schedule_text(samp=with_sample(SAMP_ID="BH1-2"))  # BH1-2 is also BH1 with SAMP_REF 2

    error = only_error(read(text))

    assert (error.origin.line, error.column) == (line_of(text, "BH1-2"), "SAMP_ID")


def test_a_location_code_met_twice_is_refused_on_the_later_line() -> None:
    text = schedule_text(loca=[*LOCA, {"LOCA_ID": "TP2 ", "LOCA_TYPE": "TP"}])  # distinct to the checker

    schedule = read(text)

    error = only_error(schedule)  # blanks around a value are not part of it (common practice)
    assert (error.origin.group, error.origin.line, error.column) == (
        "LOCA",
        line_of(text, '"DATA","TP2 "'),
        "LOCA_ID",
    )
    assert [loc.code for loc in schedule.locations] == ["BH1", "TP2", "HA3"]


def test_a_location_code_too_long_is_refused_once_and_its_samples_left_out() -> None:
    long_code = "BH" + "1" * (CODE_MAX - 1)  # one past CODE_MAX, the width of the tables' codes
    loca = [*LOCA, {"LOCA_ID": long_code, "LOCA_TYPE": "CP"}]
    samp = [*SAMP, {"LOCA_ID": long_code, "SAMP_TOP": "1.00", "SAMP_TYPE": "D", "SAMP_ID": "BH9-1"}]
    text = schedule_text(loca=loca, samp=samp)

    schedule = read(text)

    error = only_error(schedule)
    assert (error.origin.group, error.origin.line, error.column) == (
        "LOCA",
        line_of(text, f'"DATA","{long_code}"'),
        "LOCA_ID",
    )
    assert f"{CODE_MAX + 1} characters long; at most {CODE_MAX}" in error.message
    assert "BH9-1" not in [s.code for s in schedule.samples]


def test_a_sample_code_too_long_is_refused() -> None:
    text = schedule_text(samp=with_sample(SAMP_ID="S" * (CODE_MAX + 1)))  # CODE_MAX, schedule.py

    error = only_error(read(text))

    assert (error.origin.group, error.origin.line, error.column) == (
        "SAMP",
        line_of(text, "S" * (CODE_MAX + 1)),
        "SAMP_ID",
    )


def test_a_job_number_too_long_is_refused_and_names_no_project() -> None:
    text = schedule_text(proj={**PROJ, "PROJ_ID": "J" * (CODE_MAX + 1)})  # a job's code: CODE_MAX wide

    schedule = read(text)

    error = only_error(schedule)
    assert (error.origin.group, error.origin.line, error.column) == (
        "PROJ",
        line_of(text, "J" * (CODE_MAX + 1)),
        "PROJ_ID",
    )
    assert schedule.project is None


def test_a_description_too_long_is_refused() -> None:
    long_text = "Firm CLAY " * (DESCRIPTION_MAX // 10) + "."  # DESCRIPTION_MAX + 1 characters
    text = schedule_text(samp=with_sample(SAMP_REF="3", SAMP_DESC=long_text))

    error = only_error(read(text))

    assert (error.origin.line, error.column) == (line_of(text, '"DATA","BH1","4.00"'), "SAMP_DESC")


def test_more_samples_than_a_schedule_holds_are_refused_whole() -> None:
    rows = [
        {"LOCA_ID": "BH1", "SAMP_TOP": "1.00", "SAMP_TYPE": "D", "SAMP_ID": f"S{n}"}
        for n in range(ROWS_MAX + 1)
    ]
    text = schedule_text(samp=rows)

    schedule = read(text)

    error = only_error(schedule)  # ROWS_MAX, schedule.py: refused whole rather than half-read
    assert (error.origin.group, error.origin.line, error.column) == (
        "SAMP",
        line_of(text, '"GROUP","SAMP"'),
        "",
    )
    assert schedule.samples == []


# --- not an AGS4 file at all ------------------------------------------------------------------


@pytest.mark.parametrize(
    ("data", "words"),
    [
        (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "not text"),  # a picture: control bytes (Rule 1)
        (b"\x81\x8d\x8f\x90\x9d", "not text"),  # neither UTF-8 nor Windows-1252 (both undefined there)
        (b"", "empty"),
        (b"\r\n\r\n", "empty"),
    ],
)
def test_bytes_that_are_not_an_ags4_file_are_refused_cleanly(data: bytes, words: str) -> None:
    schedule = read_ags4(data)

    error = only_error(schedule)
    assert words in error.message
    assert error.to_dict() == {
        "group": "",
        "line": None,
        "heading": "",
        "message": error.message,
    }  # section 7
    assert (schedule.project, schedule.locations, schedule.samples) == (None, [], [])
