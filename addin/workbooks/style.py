"""The look every shipped workbook shares: fonts, fills, formats, headers, print setup, charts.

One place, so the trader's, the structurer's and the control workbooks read alike
and a change of style is one edit.  Deterministic saving lives here too: a rebuild
gives the committed bytes.
"""

from __future__ import annotations

import io
import re
import textwrap
import zipfile
from datetime import datetime
from pathlib import Path

from openpyxl import Workbook
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.formula import ArrayFormula

from rootvar.addin.cli.text import CAUTION

_FIXED_TIME = datetime(2026, 1, 5, 9, 0, 0)
_STAMP = b"2026-01-05T09:00:00Z"
TITLE = Font(bold=True, size=13)
BOLD = Font(bold=True)
NOTE = Font(italic=True, size=9, color="555555")
INPUT = PatternFill("solid", fgColor="EEF2F5")  # pale blue-grey: cells a user may change


def save_deterministic(wb: Workbook, path: Path) -> None:
    """Save with fixed document times and zip timestamps, so rebuilds are byte-identical."""
    wb.properties.creator = "rootvar"
    wb.properties.created = _FIXED_TIME
    wb.properties.modified = _FIXED_TIME
    wb.properties.lastModifiedBy = "rootvar"
    raw = io.BytesIO()
    wb.save(raw)
    raw.seek(0)
    out = io.BytesIO()
    with zipfile.ZipFile(raw) as src, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            fixed = zipfile.ZipInfo(info.filename, date_time=(1980, 1, 1, 0, 0, 0))
            fixed.compress_type = zipfile.ZIP_DEFLATED
            fixed.external_attr = 0o644 << 16
            data = src.read(info.filename)
            if info.filename == "docProps/core.xml":
                # openpyxl stamps the save time into "modified"; pin it
                data = re.sub(rb"(<dcterms:modified[^>]*>)[^<]*", rb"\g<1>" + _STAMP, data)
            dst.writestr(fixed, data)
    path.write_bytes(out.getvalue())


def heading(ws, title: str, note: str = CAUTION) -> None:
    """A sheet's title in A1 and its note (the caution by default) in A2."""
    ws["A1"], ws["A2"] = title, note
    ws["A1"].font, ws["A2"].font = TITLE, NOTE


#: One format per kind of quantity (tests check each kind of cell).
FORMATS = {
    "price": "0.0000",
    "vol": "0.00%",
    "rate": "0.00%",
    # probabilities as percentages, scientific where tiny (below 0.1%)
    "probability": "[=0]0%;[<0.001]0.00E+00;0.00%",
    "bp": "0.0",
    "seconds": "0.00",
    "years": "0.00",
    "step_years": "0.00000",
    "days": "0.00",
    "variance": "0.0000",
    "variance_log": "0.00E+00",  # quantiles and levels spanning decades
    "ratio": "0.000",
    "param": "0.00",
    "count": "#,##0",
    "seed": "0",  # at most 15 digits, all a spreadsheet keeps
    "z": "0.00",
    # Greeks in their own units: four decimals, gamma (per unit spot squared) six; error
    # figures that span decades (a certified 1e-9 beside a standard error) scientific
    "greek": "0.0000",
    "gamma": "0.000000",
    "greek_difference": "+0.0000;-0.0000;0.0000",
    "gamma_difference": "+0.000000;-0.000000;0.000000",
    "error_estimate": "0.0E+00",
}

#: Width rule: a column is as wide as its longest header word plus 2, at least
#: as wide as its values need, and a header wraps into lines of that width; the
#: header row is 15 points tall per wrapped line.
LINE_HEIGHT = 15.0


def header_lines(text: str, width: float) -> list[str]:
    """The lines a wrapped header takes in a column of ``width`` characters."""
    return textwrap.wrap(str(text), max(1, int(width) - 1), break_long_words=False) or [""]


#: Characters of plain (not bold) text a line holds per unit of column width: the unit is a
#: digit's width, and running lower-case text is narrower (common practice, no source).
TEXT_PER_WIDTH = 1.1


def text_lines(text: str, width: float) -> int:
    """Lines a wrapped plain text takes in a column of ``width`` characters."""
    chars = max(1, int(width * TEXT_PER_WIDTH))
    return len(textwrap.wrap(str(text), chars, break_long_words=False)) or 1


def table_header(ws, row: int, col: int, headers, min_widths=None) -> None:
    """Write a bold, wrapped header row and fit widths and row height to it."""
    min_widths = min_widths or {}
    tallest = 1
    for j, text in enumerate(headers):
        letter = get_column_letter(col + j)
        cell = ws.cell(row=row, column=col + j, value=text)
        cell.font = BOLD
        cell.alignment = Alignment(wrap_text=True, vertical="bottom")
        longest_word = max((len(w) for w in str(text).split()), default=4)
        width = max(
            longest_word + 2, min_widths.get(j, 10), ws.column_dimensions[letter].width or 0
        )
        ws.column_dimensions[letter].width = width
        tallest = max(tallest, len(header_lines(str(text), width)))
    ws.row_dimensions[row].height = LINE_HEIGHT * tallest


def print_setup(ws, title_rows: str | None = None) -> None:
    """Landscape, one page wide, title rows repeated on every page."""
    ws.page_setup.orientation = "landscape"
    ws.page_setup.paperSize = ws.PAPERSIZE_A4
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 0
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    ws.print_options.gridLines = False
    if title_rows:
        ws.print_title_rows = title_rows


def number_format(ws, ref: str, kind: str) -> None:
    """Give a cell or range the number format of a kind of quantity (:data:`FORMATS`)."""
    for row in ws[ref] if ":" in ref else [[ws[ref]]]:
        for cell in row:
            cell.number_format = FORMATS[kind]


def axes(chart, x_title: str, y_title: str) -> None:
    """Axes set explicitly, shown in every spreadsheet program."""
    chart.x_axis.title, chart.y_axis.title = x_title, y_title
    for axis in (chart.x_axis, chart.y_axis):
        axis.delete = False
        axis.majorTickMark = "out"
    chart.x_axis.tickLblPos = chart.y_axis.tickLblPos = "low"


_MARKERS = ("circle", "square", "triangle", "diamond", "x")
_DASHES = ("solid", "dash", "sysDot", "lgDash", "dashDot")


def line_style(series, k: int) -> None:
    """Markers and dashes so overlapping lines stay visible."""
    series.marker.symbol = _MARKERS[k % len(_MARKERS)]
    series.marker.size = 7
    series.graphicalProperties.line.dashStyle = _DASHES[k % len(_DASHES)]
    series.graphicalProperties.line.width = 22000
    series.smooth = False


def column_widths(ws, widths):
    """Set column widths (characters) from a letter -> width mapping."""
    for col, width in widths.items():
        ws.column_dimensions[col].width = width


def array_formula(ws, top_left: str, rows: int, cols: int, text: str) -> None:
    """Write ``text`` as an array formula over the ``rows x cols`` block it fills."""
    cell = ws[top_left]
    last = get_column_letter(cell.column + cols - 1) + str(cell.row + rows - 1)
    ws[top_left] = ArrayFormula(f"{top_left}:{last}", text)


BREACH = PatternFill("solid", fgColor="F4C7C3")  # rose: the cell that breached, and its rule
