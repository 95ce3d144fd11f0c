"""Sample labels as PDF: real WeasyPrint renders read back with pypdf, and their QR codes read
back with a real decoder.

The samples are fictional (the Hollin Brook footbridge job of our own scenario). Reading a QR
code needs ``pdftoppm`` (Debian's poppler-utils) and the ``zxing-cpp`` package; without them
those tests are skipped with the reason, unless CLAYBENCH_REQUIRE_BROWSER=1 (as in CI), where
they fail instead.
"""

from __future__ import annotations

import importlib
import os
import shutil
import subprocess
from collections.abc import Callable, Sequence
from io import BytesIO
from types import ModuleType
from typing import NoReturn

import pytest
from PIL import Image
from pypdf import PdfReader

from server.reports.labels import Label, label_sheet_pdf, single_label_pdf

MM = 72 / 25.4  # points in a millimetre (computed: 72 pt to the inch of 25.4 mm)
A4_PT = (595.28, 841.89)  # 210 x 297 mm (ISO 216)
ROLL_PT = (62 * MM, 29 * MM)  # 175.7 x 82.2 pt (computed)
CELL_MM = (70, 37)  # one label of the 3 x 8 A4 sheet (common practice)
SHEET_TOP_MM = 0.5  # 297 - 8 x 37 = 1 mm, split above and below (computed)
TOLERANCE_PT = 0.5
HOSTILE = 'HB<b>&"x"</b>'  # markup a person might type into a code
CODE_32 = "HB2025031BH01U100S0001SPLITAPART"  # 32 characters and no place to break a line
REQUIRE_ENV = "CLAYBENCH_REQUIRE_BROWSER"

Render = Callable[[Sequence[Label]], bytes]
LAYOUTS = pytest.mark.parametrize("render", [label_sheet_pdf, single_label_pdf], ids=["sheet", "roll"])


def sample(n: int, code: str | None = None) -> Label:
    """The n-th fictional sample of the job: every label differs in code, depth and address."""
    top = 0.5 * n
    return Label(
        sample_code=code if code is not None else f"HB-S{n:02d}",
        job_number="J-2025-031",
        location="BH1" if n % 2 else "TP2, east abutment",
        depth=f"{top:.2f}–{top + 0.45:.2f} m",
        sample_type="U100" if n % 2 else "Bulk bag",
        url=f"https://claybench.example/samples/{1000 + n}",
    )


TWENTY_FIVE = [sample(n) for n in range(1, 26)]


def pages_of(pdf: bytes) -> list[str]:
    return [page.extract_text() or "" for page in PdfReader(BytesIO(pdf)).pages]


def page_sizes(pdf: bytes) -> list[tuple[float, float]]:
    return [(float(p.mediabox.width), float(p.mediabox.height)) for p in PdfReader(BytesIO(pdf)).pages]


@pytest.fixture(scope="module")
def sheet() -> bytes:
    return label_sheet_pdf(TWENTY_FIVE)


@pytest.fixture(scope="module")
def roll() -> bytes:
    return single_label_pdf(TWENTY_FIVE)


def _missing(reason: str) -> NoReturn:
    """Skip a test whose tool is absent, or fail it where the run must have every tool."""
    if os.environ.get(REQUIRE_ENV) == "1":
        pytest.fail(f"{reason} ({REQUIRE_ENV}=1)")
    pytest.skip(reason)


def _zxing() -> ModuleType:
    try:
        return importlib.import_module("zxingcpp")
    except ImportError:
        _missing("no zxing-cpp (pip install zxing-cpp); QR decoding skipped")


@pytest.fixture(scope="module")
def rasterise() -> Callable[[bytes, int], Image.Image]:
    """Page n (from 1) of a PDF as a greyscale image at 300 dpi, drawn by poppler's pdftoppm."""
    tool = shutil.which("pdftoppm")
    if tool is None:
        _missing("no pdftoppm (apt-get install poppler-utils); rasterised checks skipped")

    def draw(pdf: bytes, page: int) -> Image.Image:
        out = subprocess.run(
            [tool, "-r", "300", "-gray", "-png", "-f", str(page), "-l", str(page), "-singlefile", "-"],
            input=pdf,
            capture_output=True,
            check=True,
        )
        return Image.open(BytesIO(out.stdout)).convert("L")

    return draw


@pytest.fixture(scope="module")
def read_qr_codes(rasterise: Callable[[bytes, int], Image.Image]) -> Callable[[bytes, int], list[str]]:
    """The texts of every QR code on page n of a PDF, as a scanner reads the printed page."""
    zxingcpp = _zxing()

    def read(pdf: bytes, page: int) -> list[str]:
        found = zxingcpp.read_barcodes(rasterise(pdf, page), formats=zxingcpp.BarcodeFormat.QRCode)
        return sorted(code.text for code in found)

    return read


def test_every_sheet_label_prints_its_code_job_number_and_depth_on_its_page(sheet: bytes) -> None:
    pages = pages_of(sheet)
    for i, label in enumerate(TWENTY_FIVE):
        text = pages[i // 24]  # 24 labels a sheet, filled in order (common practice)
        assert label.sample_code in text and label.job_number in text and label.depth in text
        assert label.location in text and label.sample_type in text


def test_every_single_label_prints_its_code_job_number_and_depth_on_its_own_page(roll: bytes) -> None:
    for label, text in zip(TWENTY_FIVE, pages_of(roll), strict=True):
        assert label.sample_code in text and label.job_number in text and label.depth in text
        assert label.location in text and label.sample_type in text


def test_twenty_five_labels_make_two_a4_sheets(sheet: bytes) -> None:
    sizes = page_sizes(sheet)
    assert len(sizes) == 2  # 24 to a sheet, then 1 (computed)
    for width, height in sizes:
        assert width == pytest.approx(A4_PT[0], abs=TOLERANCE_PT)  # ISO 216
        assert height == pytest.approx(A4_PT[1], abs=TOLERANCE_PT)


def test_twenty_five_labels_make_twenty_five_pages_of_62_by_29_mm(roll: bytes) -> None:
    sizes = page_sizes(roll)
    assert len(sizes) == 25  # one label a page
    for width, height in sizes:
        assert width == pytest.approx(ROLL_PT[0], abs=TOLERANCE_PT)  # 62 mm (computed)
        assert height == pytest.approx(ROLL_PT[1], abs=TOLERANCE_PT)  # 29 mm (computed)


def test_each_sheet_label_prints_inside_its_own_70_by_37_mm_cell_row_by_row(sheet: bytes) -> None:
    page = PdfReader(BytesIO(sheet)).pages[0]
    starts: dict[str, tuple[float, float]] = {}

    def visit(text: str, cm: list[float], tm: list[float], font: object, size: float) -> None:
        # Where the run starts on the page: the text matrix's origin through the CTM (PDF 1.7, 9.4.2).
        x = tm[4] * cm[0] + tm[5] * cm[2] + cm[4]
        y = tm[4] * cm[1] + tm[5] * cm[3] + cm[5]
        starts.setdefault(text.strip(), (x, y))

    page.extract_text(visitor_text=visit)
    width, height = CELL_MM[0] * MM, CELL_MM[1] * MM
    for i, label in enumerate(TWENTY_FIVE[:24]):
        x, y = starts[label.sample_code]
        column, row = i % 3, i // 3  # 3 across, filled row by row (common practice)
        from_top = A4_PT[1] - y
        assert column * width < x < (column + 1) * width
        assert SHEET_TOP_MM * MM + row * height < from_top < SHEET_TOP_MM * MM + (row + 1) * height


@LAYOUTS
def test_the_same_labels_give_the_same_bytes(render: Render) -> None:
    labels = TWENTY_FIVE[:3]
    assert render(labels) == render(labels)


@LAYOUTS
def test_markup_typed_into_a_code_prints_as_text(render: Render) -> None:
    text = pages_of(render([sample(1, code=HOSTILE)]))[0]
    assert HOSTILE in text  # autoescaped: the tags print, none is obeyed


@LAYOUTS
def test_a_32_character_code_prints_whole(render: Render) -> None:
    assert len(CODE_32) == 32
    text = pages_of(render([sample(1, code=CODE_32)]))[0]
    # A long code may wrap onto a second line; no character of it may be lost.
    assert CODE_32 in text.replace("\n", "")


def test_a_32_character_code_leaves_the_edges_of_a_single_label_blank(
    rasterise: Callable[[bytes, int], Image.Image],
) -> None:
    image = rasterise(single_label_pdf([sample(1, code=CODE_32)]), 1)
    edge = round(0.5 * 300 / 25.4)  # 0.5 mm at 300 dpi (computed), inside the 1 mm padding
    w, h = image.size
    for box in ((0, 0, edge, h), (w - edge, 0, w, h), (0, 0, w, edge), (0, h - edge, w, h)):
        darkest, _ = image.crop(box).getextrema()
        assert darkest == 255, f"ink at the page edge {box}: the label overflows"


def test_each_qr_code_of_a_sheet_carries_its_sample_address(
    sheet: bytes, read_qr_codes: Callable[[bytes, int], list[str]]
) -> None:
    assert read_qr_codes(sheet, 1) == sorted(label.url for label in TWENTY_FIVE[:24])
    assert read_qr_codes(sheet, 2) == [TWENTY_FIVE[24].url]


def test_the_qr_code_of_a_single_label_carries_its_sample_address(
    roll: bytes, read_qr_codes: Callable[[bytes, int], list[str]]
) -> None:
    for page in (1, 25):
        assert read_qr_codes(roll, page) == [TWENTY_FIVE[page - 1].url]


@LAYOUTS
def test_an_empty_list_of_labels_is_refused_with_a_plain_message(render: Render) -> None:
    with pytest.raises(ValueError, match="no labels to print"):
        render([])
