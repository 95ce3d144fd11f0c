"""Reading sample schedules from CSV and XLSX files: headers, cells, refusals and templates.

Every file here is real: CSV text encoded as a site team's program would, and XLSX workbooks
written with openpyxl. The contract is DESIGN.md section 7; the limits are those of
``server/exchange/schedule.py``.
"""

from __future__ import annotations

import zipfile
from datetime import datetime
from io import BytesIO
from typing import Any

import openpyxl
import pytest

from server.engine import METHODS
from server.exchange.schedule import CODE_MAX, DESCRIPTION_MAX, REMARKS_MAX, ROWS_MAX, Schedule
from server.exchange.spreadsheet import (
    FIELDS,
    FileRefused,
    HeaderError,
    match_headers,
    normalise_header,
    read_spreadsheet,
    read_table,
    template_csv,
    template_xlsx,
)
from server.workflow.vocabulary import LOCATION_KINDS, SAMPLE_TYPES

HEADER = "Location,Sample,Top,Base"
TESTS_HEADER = "Location,Sample,Top,Tests"
OUT_OF_GRID = "a grid coordinate in metres is less than 10,000,000"


def csv_bytes(*lines: str, encoding: str = "utf-8") -> bytes:
    return ("\r\n".join(lines) + "\r\n").encode(encoding)


def xlsx_bytes(*rows: list[Any]) -> bytes:
    book = openpyxl.Workbook()
    for values in rows:
        book.active.append(values)
    out = BytesIO()
    book.save(out)
    return out.getvalue()


def read_csv(*rows: str, header: str = HEADER) -> Schedule:
    return read_spreadsheet("schedule.csv", csv_bytes(header, *rows))


def refusals(schedule: Schedule) -> list[tuple[int | None, str, str]]:
    return [(error.origin.row, error.column, error.message) for error in schedule.errors]


def only_refusal(schedule: Schedule) -> tuple[int | None, str, str]:
    (refusal,) = refusals(schedule)
    assert schedule.samples == [] or all(s.origin.row != refusal[0] for s in schedule.samples)
    return refusal


# Headers


def test_a_unit_in_brackets_is_ignored_when_headers_are_matched() -> None:
    # DESIGN.md section 7: a unit in brackets is ignored, round or square.
    assert normalise_header("Depth Top (m)") == normalise_header("depth_top")
    assert normalise_header("Depth top [m]") == normalise_header("DEPTH TOP")


def test_headers_are_matched_without_regard_to_case_spaces_or_underscores() -> None:
    # DESIGN.md section 7: case, spaces and underscores are ignored.
    match = match_headers(["  LOCA id ", "Sample_ID", "depth FROM", "Hole Type"])
    assert match.columns == {"location": 0, "sample": 1, "top": 2, "location_type": 3}


# DESIGN.md section 7 lists these headers at least.
DESIGN_ALIASES = {
    "location": ["location", "hole", "borehole", "LOCA_ID"],
    "location_type": ["location_type", "hole type"],
    "sample": ["sample", "sample id", "sample ref", "SAMP_ID"],
    "top": ["depth_top_m", "top", "from", "depth from"],
    "base": ["depth_base_m", "base", "to", "depth to"],
    "sample_type": ["sample_type", "type"],
    "description": ["description"],
    "tests": ["tests", "requested tests"],
}


@pytest.mark.parametrize(("name", "header"), [(n, h) for n, hs in DESIGN_ALIASES.items() for h in hs])
def test_each_header_the_design_lists_gives_its_field(name: str, header: str) -> None:
    assert match_headers([header]).columns == {name: 0}


@pytest.mark.parametrize(
    ("name", "header"),
    [(name, text) for name, column in FIELDS.items() for text in (name, column.label, *column.aliases)],
)
def test_every_label_and_alias_gives_its_own_field_and_no_other(name: str, header: str) -> None:
    assert match_headers([header]).columns == {name: 0}


def test_the_headers_no_field_takes_are_listed_as_unmatched_blank_ones_aside() -> None:
    match = match_headers(["Hole", "Colour", "", "Sample", "From"])
    assert match.unmatched == ["Colour"]
    assert match.missing == []


def test_the_required_fields_without_a_column_are_missing() -> None:
    # A SampleLine cannot stand without a location, a code and a top depth (schedule.py).
    assert match_headers(["Hole", "Base"]).missing == ["sample", "top"]


def test_a_manual_mapping_wins_over_the_aliases() -> None:
    # "Type" is a sample type by its alias; a person says it is the type of location here,
    # and that the sample type is in "Kind of sample".
    mapping = {"Type": "location_type", "Kind of sample": "sample_type"}
    match = match_headers(["Hole", "Type", "Kind of sample"], mapping)
    assert match.columns == {"location": 0, "location_type": 1, "sample_type": 2}


def test_a_column_a_person_maps_to_another_field_frees_the_alias_column() -> None:
    match = match_headers(["Type", "Kind of sample"], {"Kind of sample": "sample_type"})
    assert match.columns == {"sample_type": 1}
    assert match.unmatched == ["Type"]


@pytest.mark.parametrize("ignore", ["", "ignore", " Ignore "])
def test_a_column_mapped_to_ignore_is_not_read(ignore: str) -> None:
    match = match_headers(["Hole", "Notes"], {"Notes": ignore})
    assert match.columns == {"location": 0}
    assert match.unmatched == ["Notes"]


def test_a_mapping_to_an_unknown_field_is_refused_naming_it() -> None:
    with pytest.raises(HeaderError, match='"colour" is not a field we read') as refused:
        match_headers(["Hole", "Colour"], {"Colour": "colour"})
    assert refused.value.column == "Colour"
    assert isinstance(refused.value, ValueError)


def test_a_mapping_of_a_header_the_file_lacks_is_refused() -> None:
    with pytest.raises(HeaderError, match='no column headed "Depth"'):
        match_headers(["Hole"], {"Depth": "top"})


def test_two_columns_mapped_to_one_field_are_refused() -> None:
    with pytest.raises(HeaderError, match='columns "Start" and "End" both give Depth top'):
        match_headers(["Start", "End"], {"Start": "top", "End": "top"})


def test_two_columns_whose_headers_both_name_one_field_are_refused() -> None:
    with pytest.raises(HeaderError, match='columns "Hole" and "Borehole" both give Location'):
        match_headers(["Hole", "Borehole"])


def test_a_header_refusal_is_reported_in_the_schedule_beside_its_header() -> None:
    schedule = read_spreadsheet("s.csv", csv_bytes("Hole,Borehole,Sample,Top", "BH1,BH1,D1,1"))
    assert refusals(schedule) == [
        (
            1,
            "Borehole",
            'columns "Hole" and "Borehole" both give Location: map one of them to another field or ignore it',
        )
    ]


def test_missing_required_headers_are_one_refusal_each_on_row_1_naming_the_accepted_headers() -> None:
    # DESIGN.md section 7: the header is row 1.
    schedule = read_csv("BH1,1.0", header="Hole,Base")
    assert [(row, column) for row, column, _ in refusals(schedule)] == [(1, "Sample"), (1, "Depth top (m)")]
    assert '"sample ref"' in schedule.errors[0].message
    assert '"depth from"' in schedule.errors[1].message
    assert schedule.samples == []


def test_a_manual_mapping_reads_a_column_no_alias_names() -> None:
    data = csv_bytes("Hole,Ref,Top,Kind of sample", "BH1,BH1-D1,1.0,D")
    schedule = read_spreadsheet("s.csv", data, {"Ref": "sample", "Kind of sample": "sample_type"})
    assert schedule.errors == []
    assert [(s.code, s.sample_type) for s in schedule.samples] == [("BH1-D1", "disturbed")]
    assert schedule.samples[0].columns["sample"] == "Ref"


# Files


@pytest.mark.parametrize("filename", ["schedule.xls", "schedule.txt", "schedule", "schedule.ags"])
def test_a_file_that_is_neither_csv_nor_xlsx_is_refused(filename: str) -> None:
    with pytest.raises(FileRefused, match="is not a CSV or XLSX file"):
        read_table(filename, csv_bytes(HEADER))
    with pytest.raises(FileRefused):
        read_spreadsheet(filename, csv_bytes(HEADER))


def test_the_extension_is_read_without_regard_to_case() -> None:
    assert read_table("SCHEDULE.CSV", csv_bytes(HEADER)).format == "csv"
    assert read_table("Schedule.XLSX", xlsx_bytes(["Location"])).format == "xlsx"


def test_a_csv_with_a_byte_order_mark_reads_its_first_header() -> None:
    # Excel's "CSV UTF-8" starts with the byte-order mark (common practice).
    schedule = read_spreadsheet("s.csv", csv_bytes(HEADER, "BH1,D1,1.0,1.5", encoding="utf-8-sig"))
    assert schedule.errors == []
    assert schedule.samples[0].columns["location"] == "Location"


def test_a_windows_1252_csv_is_read() -> None:
    # Excel's plain "CSV" on Windows in western Europe is Windows-1252 (common practice).
    data = csv_bytes(
        "Location,Sample,Top,Description", "BH1,D1,1.0,Argile brune très légère à 20 °C", encoding="cp1252"
    )
    (sample,) = read_spreadsheet("s.csv", data).samples
    assert sample.description == "Argile brune très légère à 20 °C"


def test_a_file_in_neither_utf8_nor_windows_1252_is_refused_whole() -> None:
    # 0x81 is undefined in Windows-1252 and not UTF-8 (the code page's own table).
    schedule = read_spreadsheet("s.csv", csv_bytes(HEADER) + b"BH1,\x81\xff,1.0\r\n")
    assert refusals(schedule) == [
        (1, "file", "the file is not text in UTF-8 or Windows-1252: save it as CSV UTF-8")
    ]


def test_a_utf16_file_named_csv_is_refused_whole() -> None:
    schedule = read_spreadsheet("s.csv", csv_bytes(HEADER, "BH1,D1,1.0,1.5", encoding="utf-16"))
    assert "not plain text" in only_refusal(schedule)[2]


def test_a_semicolon_csv_with_decimal_commas_is_read() -> None:
    # Excel writes ";" and "1,50" where the decimal sign is a comma (common practice).
    data = csv_bytes("Location;Sample;Top;Base;Easting", "BH1;D1;1,50;1,95;412345,5")
    schedule = read_spreadsheet("s.csv", data)
    assert schedule.errors == []
    assert (schedule.samples[0].top_m, schedule.samples[0].base_m) == (1.5, 1.95)
    assert schedule.locations[0].easting == 412345.5


def test_a_tab_separated_file_is_read() -> None:
    schedule = read_spreadsheet("s.csv", csv_bytes("Location\tSample\tTop", "BH1\tD1\t2.5"))
    assert [(s.location, s.code, s.top_m) for s in schedule.samples] == [("BH1", "D1", 2.5)]


def test_a_file_of_one_column_reads_with_a_comma_as_delimiter() -> None:
    table = read_table("s.csv", csv_bytes("Location", "BH1"))
    assert (table.headers, table.rows) == (["Location"], [(2, ["BH1"])])


def test_a_quoted_cell_may_hold_the_delimiter_and_a_line_break_in_one_row() -> None:
    # A spreadsheet program shows a quoted line break inside one cell of one row (RFC 4180).
    data = csv_bytes(HEADER + ",Description", 'BH1,D1,1.0,1.5,"Firm, brown\nCLAY"', "BH1,D2,2.0,2.5,Sand")
    schedule = read_spreadsheet("s.csv", data)
    read = [(s.origin.row, s.description) for s in schedule.samples]
    assert read == [(2, "Firm, brown\nCLAY"), (3, "Sand")]


def test_blank_rows_of_a_csv_are_skipped_and_keep_their_row_numbers() -> None:
    table = read_table("s.csv", csv_bytes(HEADER, "BH1,D1,1.0,1.5", "", ",,,", "BH1,D2,2.0,2.5"))
    assert [number for number, _ in table.rows] == [2, 5]


def test_blank_rows_of_a_workbook_are_skipped_and_keep_their_row_numbers() -> None:
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append(["Location", "Sample", "Top"])
    sheet.append(["BH1", "D1", 1.0])
    sheet.cell(row=6, column=1, value="BH1")
    sheet.cell(row=6, column=2, value="D2")
    sheet.cell(row=6, column=3, value=2.0)
    out = BytesIO()
    book.save(out)
    schedule = read_spreadsheet("s.xlsx", out.getvalue())
    assert [(s.origin.row, s.code) for s in schedule.samples] == [(2, "D1"), (6, "D2")]


def test_text_cells_are_stripped() -> None:
    schedule = read_csv("  BH1 , D1 ,  1.0 ,")
    assert [(s.location, s.code, s.top_m, s.base_m) for s in schedule.samples] == [("BH1", "D1", 1.0, 1.0)]


def test_workbook_numbers_arrive_as_text_without_float_noise() -> None:
    # Python's repr is the shortest text that reads back as the same float (Python docs).
    data = xlsx_bytes(["a", "b", "c", "d", "e"], [2.5, 3.0, 1.45, 412345.678912, 7])
    assert read_table("s.xlsx", data).rows == [(2, ["2.5", "3", "1.45", "412345.678912", "7"])]


def test_workbook_number_cells_give_numbers_to_the_schedule() -> None:
    data = xlsx_bytes(
        ["Location", "Sample", "Top", "Base", "Northing (m)"], ["BH1", 101, 1.45, 3, 286123.456789]
    )
    schedule = read_spreadsheet("s.xlsx", data)
    assert schedule.errors == []
    assert [(s.code, s.top_m, s.base_m) for s in schedule.samples] == [("101", 1.45, 3.0)]
    assert schedule.locations[0].northing == 286123.456789


def test_a_date_in_a_depth_cell_of_a_workbook_is_refused_naming_it() -> None:
    # Excel turns "1.10" into a date in some locales (common practice).
    data = xlsx_bytes(["Location", "Sample", "Top"], ["BH1", "D1", datetime(2026, 1, 10)])
    schedule = read_spreadsheet("s.xlsx", data)
    assert only_refusal(schedule) == (2, "Top", '"2026-01-10T00:00:00" is not a number')


def test_only_the_first_worksheet_is_read() -> None:
    book = openpyxl.Workbook()
    book.active.append(["Location", "Sample", "Top"])
    book.active.append(["BH1", "D1", 1.0])
    book.create_sheet("Notes").append(["Location", "Sample", "Top"])
    book["Notes"].append(["BH9", "D9", 9.0])
    out = BytesIO()
    book.save(out)
    assert [s.code for s in read_spreadsheet("s.xlsx", out.getvalue()).samples] == ["D1"]


def not_a_workbook_zip() -> bytes:
    out = BytesIO()
    with zipfile.ZipFile(out, "w") as archive:
        archive.writestr("readme.txt", "not a workbook")
    return out.getvalue()


@pytest.mark.parametrize(
    "data",
    [
        b"",
        b"not a workbook at all",
        csv_bytes(HEADER, "BH1,D1,1.0,1.5"),
        not_a_workbook_zip(),
        xlsx_bytes(["Location"], ["BH1"])[:300],
    ],
    ids=["empty", "text", "csv", "other zip", "truncated"],
)
def test_a_corrupt_or_foreign_file_named_xlsx_is_refused_cleanly(data: bytes) -> None:
    schedule = read_spreadsheet("s.xlsx", data)
    assert refusals(schedule) == [
        (1, "file", "the file could not be opened as an XLSX workbook: save it again as .xlsx")
    ]
    with pytest.raises(FileRefused):
        read_table("s.xlsx", data)


def test_an_empty_csv_is_refused_for_its_missing_headers() -> None:
    schedule = read_spreadsheet("s.csv", b"")
    assert [(row, column) for row, column, _ in refusals(schedule)] == [
        (1, "Location"),
        (1, "Sample"),
        (1, "Depth top (m)"),
    ]


def test_a_schedule_of_rows_max_rows_is_read_with_blank_rows_aside() -> None:
    rows = [f"BH1,S{n},1.0,1.5" for n in range(ROWS_MAX)]
    schedule = read_spreadsheet("s.csv", csv_bytes(HEADER, *rows, "", ",,,"))
    assert (len(schedule.samples), schedule.errors) == (ROWS_MAX, [])


def test_a_file_of_more_than_rows_max_rows_is_refused_whole() -> None:
    rows = [f"BH1,S{n},1.0,1.5" for n in range(ROWS_MAX + 1)]
    schedule = read_spreadsheet("s.csv", csv_bytes(HEADER, *rows))
    assert schedule.samples == [] and schedule.locations == []
    assert only_refusal(schedule) == (
        1,
        "file",
        "the file has more than 10,000 rows of samples: split it into schedules of at most 10,000 rows",
    )


# Cells


def test_a_sound_row_gives_its_location_and_sample_with_the_headers_used() -> None:
    header = (
        "Hole,Hole type,LOCA_NATE,LOCA_NATN,Ground level (m),Sample ref,From,To,Type,Description,Notes,Tests"
    )
    row = "BH1,BH,412000,286000,52.4,BH1-U1,1.2,1.65,U,Firm CLAY,Sealed,water-content"
    schedule = read_csv(row, header=header)
    assert schedule.errors == []
    (location,) = schedule.locations
    assert (location.code, location.kind, location.easting, location.northing, location.ground_level_m) == (
        "BH1",
        "borehole",
        412000.0,
        286000.0,
        52.4,
    )
    assert location.columns == {
        "location": "Hole",
        "location_type": "Hole type",
        "easting": "LOCA_NATE",
        "northing": "LOCA_NATN",
        "ground_level": "Ground level (m)",
    }
    (sample,) = schedule.samples
    assert (sample.location, sample.code, sample.top_m, sample.base_m, sample.sample_type) == (
        "BH1",
        "BH1-U1",
        1.2,
        1.65,
        "U100",
    )
    assert (sample.description, sample.remarks, sample.tests) == ("Firm CLAY", "Sealed", ("water-content",))
    assert sample.columns == {
        "location": "Hole",
        "sample": "Sample ref",
        "top": "From",
        "base": "To",
        "sample_type": "Type",
        "description": "Description",
        "remarks": "Notes",
        "tests": "Tests",
    }


def test_one_location_line_is_given_per_code_in_first_seen_order() -> None:
    schedule = read_csv("TP2,D1,0.5,", "BH1,D2,1.0,", "TP2,D3,1.0,")
    assert [(line.code, line.origin.row) for line in schedule.locations] == [("TP2", 2), ("BH1", 3)]


def test_a_row_with_a_refused_cell_is_left_out_and_the_others_kept() -> None:
    schedule = read_csv("BH1,D1,1.0,1.5", "BH1,D2,deep,", "BH1,D3,3.0,3.5")
    assert [s.code for s in schedule.samples] == ["D1", "D3"]
    assert [error.origin.row for error in schedule.errors] == [3]


def test_a_refusal_takes_the_shape_the_import_command_prints() -> None:
    # DESIGN.md section 7: {"row": n, "column": "...", "message": "..."}.
    schedule = read_csv("BH1,D1,,")
    assert [error.to_dict() for error in schedule.errors] == [
        {"row": 2, "column": "Top", "message": "the top depth is blank: every sample needs one, in metres"}
    ]


@pytest.mark.parametrize(
    ("row", "column", "message"),
    [
        (",D1,1.0,", "Location", "the location is blank: every row needs its location code"),
        ("BH1,,1.0,", "Sample", "the sample is blank: every row needs its sample code"),
        ("BH1,D1,,1.5", "Top", "the top depth is blank: every sample needs one, in metres"),
    ],
)
def test_a_blank_required_cell_is_refused(row: str, column: str, message: str) -> None:
    # A SampleLine cannot stand without a location, a code and a top depth (schedule.py).
    assert only_refusal(read_csv(row)) == (2, column, message)


def test_a_code_longer_than_the_register_holds_is_refused() -> None:
    # CODE_MAX is the width of the code columns (schedule.py).
    long = "B" * (CODE_MAX + 1)
    assert only_refusal(read_csv(f"{long},D1,1.0,")) == (
        2,
        "Location",
        f'location "{long}" is 33 characters long; a code has at most 32',
    )
    assert only_refusal(read_csv(f"BH1,{long},1.0,"))[2].startswith(f'sample "{long}" is 33 characters')
    assert read_csv(f"{'B' * CODE_MAX},{'D' * CODE_MAX},1.0,").errors == []


@pytest.mark.parametrize(
    "written", ["deep", "1.2.3", "1,2,3", "1.5m", "nan", "NaN", "inf", "-Infinity", "1_0", "1e400"]
)
def test_a_depth_that_is_not_a_finite_number_is_refused_naming_it(written: str) -> None:
    # No value is ever Infinity or NaN (the intake contract); 1e400 overflows a float to infinity (IEEE 754).
    assert only_refusal(read_csv(f'BH1,D1,"{written}",')) == (2, "Top", f'"{written}" is not a number')
    assert only_refusal(read_csv(f'BH1,D1,1.0,"{written}"')) == (2, "Base", f'"{written}" is not a number')


@pytest.mark.parametrize(
    ("written", "value"), [("1,50", 1.5), ("0", 0.0), (".5", 0.5), ("2.", 2.0), ("1e1", 10.0)]
)
def test_a_depth_is_read_as_a_number_of_metres(written: str, value: float) -> None:
    # The decimal comma of continental Excel (common practice); the others are plain decimal forms.
    assert [s.top_m for s in read_csv(f'BH1,D1,"{written}",').samples] == [value]


def test_a_negative_depth_is_refused() -> None:
    # Depths are measured down from ground level (common practice).
    assert only_refusal(read_csv("BH1,D1,-0.5,")) == (
        2,
        "Top",
        "top -0.5 m is negative: depths are measured down from ground level, 0 m or more",
    )


def test_a_depth_beyond_the_deepest_hole_is_refused() -> None:
    # DEPTH_MAX_M = 1000 m, deeper than any site-investigation hole (schedule.py, common practice).
    assert only_refusal(read_csv("BH1,D1,1500,")) == (
        2,
        "Top",
        "top 1500 m is deeper than 1000 m: a typing or unit slip?",
    )
    assert only_refusal(read_csv("BH1,D1,999,1000.5"))[:2] == (2, "Base")
    assert read_csv("BH1,D1,1000,1000").errors == []


def test_a_base_above_its_top_is_refused() -> None:
    # The words are the intake contract's.
    assert only_refusal(read_csv("BH1,D1,1.5,1.2")) == (2, "Base", "base 1.2 m is above top 1.5 m")


def test_a_blank_base_is_the_top_a_point_sample() -> None:
    # A disturbed or jar sample is taken at one depth (common practice).
    (sample,) = read_csv("BH1,D1,2.5,").samples
    assert (sample.top_m, sample.base_m) == (2.5, 2.5)


@pytest.mark.parametrize(
    ("name", "written", "message"),
    [
        ("Easting", "far", '"far" is not a number'),
        ("Easting", "10000000", f"easting 10000000 is out of range: {OUT_OF_GRID}"),
        ("Northing", "-1e7", f"northing -10000000 is out of range: {OUT_OF_GRID}"),
        ("Ground level", "9500", "ground level 9500 m is outside -500 m to 9000 m"),
        ("Ground level", "-600", "ground level -600 m is outside -500 m to 9000 m"),
        ("Ground level", "Infinity", '"Infinity" is not a number'),
    ],
)
def test_a_coordinate_or_ground_level_out_of_range_is_refused(name: str, written: str, message: str) -> None:
    # Coordinates below 1e7 m (national grids, UTM) and ground level from -500 m to 9000 m
    # (the Dead Sea shore to above Everest): the intake contract, common practice.
    schedule = read_csv(f"BH1,D1,1.0,{written}", header=f"Location,Sample,Top,{name}")
    assert only_refusal(schedule) == (2, name, message)


def test_coordinates_and_ground_levels_within_range_are_read() -> None:
    # Bounds as above: 9,999,999 m and -500/9000 m are allowed.
    schedule = read_csv(
        "BH1,D1,1.0,9999999,-9999999,-500",
        "BH2,D2,1.0,0,0,9000",
        header="Location,Sample,Top,Easting,Northing,Ground level",
    )
    assert [(line.easting, line.northing, line.ground_level_m) for line in schedule.locations] == [
        (9999999.0, -9999999.0, -500.0),
        (0.0, 0.0, 9000.0),
    ]


def test_an_unknown_location_type_is_refused_listing_the_accepted_words() -> None:
    message = only_refusal(read_csv("BH1,D1,1.0,shaft", header="Location,Sample,Top,Location type"))[2]
    assert message.startswith('"shaft" is not a location type we know; use one of: borehole, trial pit,')


def test_a_location_type_is_read_by_label_id_or_abbreviation_and_blank_is_not_given() -> None:
    # AGS4 abbreviations BH and TP (AGS4 standard abbreviations list, via vocabulary.py).
    schedule = read_csv(
        "BH1,D1,1.0,BH",
        "TP1,D2,1.0,Trial pit",
        "WS1,D3,1.0,window sample",
        "HA1,D4,1.0,",
        header="Location,Sample,Top,Location type",
    )
    assert [line.kind for line in schedule.locations] == ["borehole", "trial pit", "window sample", None]


def test_an_unknown_sample_type_is_refused_listing_the_accepted_words() -> None:
    message = only_refusal(read_csv("BH1,D1,1.0,bucket", header="Location,Sample,Top,Sample type"))[2]
    assert message.startswith('"bucket" is not a sample type we know; use one of: U100, UT100, tube,')


def test_a_sample_type_is_read_by_id_or_abbreviation_and_blank_is_not_given() -> None:
    # AGS4 abbreviations B and D (AGS4 standard abbreviations list, via vocabulary.py).
    schedule = read_csv(
        "BH1,D1,1.0,B",
        "BH1,D2,2.0,d",
        "BH1,D3,3.0,U100",
        "BH1,D4,4.0,",
        header="Location,Sample,Top,Sample type",
    )
    assert [s.sample_type for s in schedule.samples] == ["bulk", "disturbed", "U100", None]


@pytest.mark.parametrize(("name", "limit"), [("Description", DESCRIPTION_MAX), ("Remarks", REMARKS_MAX)])
def test_a_description_or_remark_longer_than_the_register_holds_is_refused(name: str, limit: int) -> None:
    # DESCRIPTION_MAX and REMARKS_MAX: the register's columns (schedule.py).
    header = f"Location,Sample,Top,{name}"
    assert only_refusal(read_csv(f"BH1,D1,1.0,{'x' * (limit + 1)}", header=header)) == (
        2,
        name,
        f"the {name.lower()} is 1,001 characters long; at most 1,000 fit",
    )
    assert read_csv(f"BH1,D1,1.0,{'x' * limit}", header=header).errors == []


def test_tests_are_read_by_id_or_display_name_separated_by_semicolons_or_commas() -> None:
    # DESIGN.md section 7: method ids or their display names, separated by ";" or ",".
    schedule = read_csv('BH1,D1,1.0,"water-content, Plastic limit; SIEVE"', header=TESTS_HEADER)
    assert schedule.samples[0].tests == ("water-content", "plastic-limit", "sieve")


def test_a_test_whose_display_name_holds_commas_is_read_whole() -> None:
    # The method's title is "Liquid limit, cup, multipoint" (server/engine).
    cell = '"Liquid limit, cup, multipoint, Liquid limit, cup, one-point;atterberg"'
    schedule = read_csv(f"BH1,D1,1.0,{cell}", header=TESTS_HEADER)
    assert schedule.samples[0].tests == ("ll-cup-multipoint", "ll-cup-one-point", "atterberg")


def test_a_test_named_twice_in_one_cell_is_folded_into_one() -> None:
    cell = '"atterberg; Atterberg limits and indices; ;atterberg;"'
    schedule = read_csv(f"BH1,D1,1.0,{cell}", header=TESTS_HEADER)
    assert schedule.samples[0].tests == ("atterberg",)


def test_an_unknown_test_is_refused_naming_it() -> None:
    row, column, message = only_refusal(
        read_csv('BH1,D1,1.0,"atterberg; shear box, permeability"', header=TESTS_HEADER)
    )
    assert (row, column) == (2, "Tests")
    assert message.startswith('unknown test "shear box", "permeability": use method ids (water-content,')


def test_a_sample_code_seen_on_an_earlier_row_is_refused_on_the_later_row() -> None:
    # The words are the intake contract's; sample codes are unique in a job (db/tables.py).
    schedule = read_csv("BH1,BH1-D2,1.0,", "", "BH1,BH1-D1,1.5,", "BH2,BH1-D3,2.0,", "BH2, BH1-D1 ,2.5,")
    assert only_refusal(schedule) == (6, "Sample", "sample BH1-D1 is already on row 4")
    assert [s.code for s in schedule.samples] == ["BH1-D2", "BH1-D1", "BH1-D3"]


def test_sample_codes_differing_in_case_are_two_samples() -> None:
    # The intake contract: codes are compared exactly after stripping.
    assert len(read_csv("BH1,bh1-d1,1.0,", "BH1,BH1-D1,2.0,").samples) == 2


def test_a_location_given_two_types_is_refused_on_the_later_row() -> None:
    schedule = read_csv(
        "BH1,D1,1.0,borehole", "BH1,D2,2.0,", "BH1,D3,3.0,TP", header="Location,Sample,Top,Location type"
    )
    assert only_refusal(schedule) == (
        4,
        "Location type",
        "location BH1 has location type borehole on row 2; this row gives trial pit",
    )
    assert [s.code for s in schedule.samples] == ["D1", "D2"]


def test_a_location_given_two_places_is_refused_on_the_later_row() -> None:
    schedule = read_csv(
        "BH1,D1,1.0,412000.5",
        "BH1,D2,2.0,412000.50",
        "BH1,D3,3.0,412001",
        header="Location,Sample,Top,Easting",
    )
    assert only_refusal(schedule) == (
        4,
        "Easting",
        "location BH1 has easting 412000.5 on row 2; this row gives 412001",
    )


def test_a_later_row_may_give_what_an_earlier_row_left_blank() -> None:
    schedule = read_csv(
        "BH1,D1,1.0,,",
        "BH1,D2,2.0,BH,51.2",
        "BH1,D3,3.0,,51.3",
        header="Location,Sample,Top,Location type,Ground level",
    )
    assert (schedule.locations[0].kind, schedule.locations[0].ground_level_m) == ("borehole", 51.2)
    assert only_refusal(schedule) == (
        4,
        "Ground level",
        "location BH1 has ground level 51.2 on row 3; this row gives 51.3",
    )


def test_every_refused_cell_of_a_row_is_reported() -> None:
    schedule = read_csv(",,-1,x", "BH1,D1,2,1")
    assert refusals(schedule) == [
        (2, "Location", "the location is blank: every row needs its location code"),
        (2, "Sample", "the sample is blank: every row needs its sample code"),
        (2, "Top", "top -1 m is negative: depths are measured down from ground level, 0 m or more"),
        (2, "Base", '"x" is not a number'),
        (3, "Base", "base 1 m is above top 2 m"),
    ]


# Templates


def template_labels() -> list[str]:
    # The intake contract: our canonical headers, with units.
    return [
        "Location",
        "Location type",
        "Easting (m)",
        "Northing (m)",
        "Ground level (m)",
        "Sample",
        "Depth top (m)",
        "Depth base (m)",
        "Sample type",
        "Description",
        "Remarks",
        "Tests",
    ]


def test_the_csv_template_reads_back_without_a_refusal() -> None:
    data = template_csv()
    assert data.startswith(b"\xef\xbb\xbf")  # Excel reads UTF-8 by its byte-order mark (common practice)
    assert read_table("template.csv", data).headers == template_labels()
    schedule = read_spreadsheet("template.csv", data)
    assert (schedule.errors, len(schedule.locations), len(schedule.samples)) == ([], 2, 2)
    assert all(s.code.startswith("EXAMPLE-") for s in schedule.samples)


def test_the_xlsx_template_reads_back_without_a_refusal() -> None:
    data = template_xlsx()
    assert read_table("template.xlsx", data).headers == template_labels()
    schedule = read_spreadsheet("template.xlsx", data)
    assert (schedule.errors, len(schedule.locations), len(schedule.samples)) == ([], 2, 2)
    assert schedule.samples == read_spreadsheet("template.csv", template_csv()).samples


def test_the_xlsx_template_writes_its_numbers_as_numbers() -> None:
    sheet = openpyxl.load_workbook(BytesIO(template_xlsx()))["Schedule"]
    assert [type(cell.value) for cell in sheet[2][2:5]] == [int, int, float]


def test_the_xlsx_template_lists_the_allowed_values_with_their_meanings() -> None:
    book = openpyxl.load_workbook(BytesIO(template_xlsx()))
    assert book.sheetnames == ["Schedule", "Allowed values"]
    pairs = {
        (line[i], line[i + 1])
        for line in book["Allowed values"].iter_rows(values_only=True)
        for i in range(0, len(line) - 1, 3)
    }
    expected = {*LOCATION_KINDS.items(), *SAMPLE_TYPES.items(), *((m.id, m.title) for m in METHODS.values())}
    assert expected <= pairs


def test_the_xlsx_template_is_the_same_bytes_every_time() -> None:
    data = template_xlsx()
    assert data == template_xlsx()
    with zipfile.ZipFile(BytesIO(data)) as archive:
        assert {entry.date_time for entry in archive.infolist()} == {(2026, 1, 1, 0, 0, 0)}
    properties = openpyxl.load_workbook(BytesIO(data)).properties
    assert (properties.created, properties.modified) == (datetime(2026, 1, 1), datetime(2026, 1, 1))
