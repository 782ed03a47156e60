"""Writing cells and workbooks: text stays text, missing stays blank, files land atomically."""
from __future__ import annotations

import math
import os
import tempfile

import numpy as np
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

from .outputs import atomic_save, same_file  # noqa: F401  (kept here for the writers that import them from sheets)

__all__ = [
    "put",
    "put_text",
    "printable",
    "scatter_chart",
    "CAUTION_FONT",
    "WARN_FILL",
    "GENERAL",
    "P_FORMAT",
    "SMART",
    "smart_format",
    "write_rows",
    "atomic_save",
    "same_file",
    "set_widths",
    "HEADER_FONT",
    "TITLE_FONT",
    "NOTE_FONT",
]

_FACE = "Liberation Sans"  # a metric match for the common sans fonts, present wherever LibreOffice is
TITLE_FONT = Font(name=_FACE, bold=True, size=14)
HEADER_FONT = Font(name=_FACE, bold=True)
NOTE_FONT = Font(name=_FACE, italic=True, color="555555")
CAUTION_FONT = Font(name=_FACE, bold=True, color="9C2A00")
HEADER_FILL = PatternFill("solid", fgColor="E8EEF4")
WARN_FILL = PatternFill("solid", fgColor="FBE3D6")
from .xlsx import GENERAL, P_FORMAT, SMART  # noqa: E402,F401  (number formats, defined once in xlsx.py)

_FORMULA_START = ("=", "+", "-", "@")


def put_text(ws, row: int, col: int, text):
    """Write text that must never become a live formula (data, labels from files)."""
    c = ws.cell(row=row, column=col)
    c.value = str(text)
    c.data_type = "s"  # openpyxl would read a leading '=' as a formula
    return c


def put(ws, row: int, col: int, value, *, formula: bool = False, number_format: str | None = None):
    """Write one value: numbers as numbers, NaN/inf/None as blank, text as text.

    Only ``formula=True`` lets a string starting with '=' become a formula.
    """
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, str):
        if formula and value.startswith("="):
            c = ws.cell(row=row, column=col, value=value)
        else:
            c = put_text(ws, row, col, value)
    elif value is None or (isinstance(value, float) and not math.isfinite(value)):
        c = ws.cell(row=row, column=col)
        c.value = None
    else:
        c = ws.cell(row=row, column=col, value=value)
    if number_format:
        c.number_format = number_format
    return c


def smart_format(v: float) -> str:
    """A display format that shows about four significant digits, with thousands separators."""
    a = abs(v)
    if a >= 1000:
        return "#,##0"
    if a >= 100:
        return "0.0"
    if a >= 1 or a == 0:
        return "0.000"
    if a >= 0.001:
        return "0.00000"
    return "0.00E+00"


def write_rows(ws, top: int, left: int, header, rows, *, number_format: str = GENERAL, formats=None,
               row_formats=None):
    """A header row then data rows; returns the row after the last one written.

    ``formats`` maps a header to a number format for that column;
    ``row_formats`` maps the first cell of a row to a format for its numbers.
    """
    formats = formats or {}
    row_formats = row_formats or {}
    longest = max((len(str(h)) for h in header), default=0)
    for j, h in enumerate(header):
        c = put(ws, top, left + j, h)
        c.font = HEADER_FONT
        c.fill = HEADER_FILL
        c.alignment = Alignment(wrap_text=True, vertical="bottom", horizontal="center")
    ws.row_dimensions[top].height = 15 * (1 + longest // 14)
    col_fmt = [formats.get(h, number_format) for h in header]
    r = top + 1
    for row in rows:
        row = list(row)
        rf = row_formats.get(row[0]) if row else None
        for j, v in enumerate(row):
            nf = (rf or col_fmt[j] if j < len(col_fmt) else number_format) if isinstance(v, float) else None
            if nf == SMART:
                nf = smart_format(v) if math.isfinite(v) else None
            put(ws, r, left + j, v, number_format=nf)
        r += 1
    return r


def set_widths(ws, widths: dict):
    for col, w in widths.items():
        key = get_column_letter(col) if isinstance(col, int) else col
        ws.column_dimensions[key].width = w


def printable(wb):
    """Landscape pages, each sheet one page wide, so a printed or PDF copy reads well."""
    for ws in wb.worksheets:
        ws.page_setup.orientation = "landscape"
        ws.sheet_properties.pageSetUpPr.fitToPage = True
        ws.page_setup.fitToWidth = 1
        ws.page_setup.fitToHeight = 0


def scatter_chart(ws, title, xref, yref, xlabel, ylabel, anchor, *, height=9.0, width=16.0):
    """A native scatter chart (points only) that any spreadsheet program draws without the add-in."""
    from openpyxl.chart import ScatterChart, Series

    ch = ScatterChart()
    ch.title = title
    ch.style = 2
    ch.x_axis.title = xlabel
    ch.y_axis.title = ylabel
    ch.legend = None
    s = Series(yref, xref, title=title)
    s.marker.symbol = "circle"
    s.marker.size = 5
    s.marker.graphicalProperties.solidFill = "2A6F97"
    s.marker.graphicalProperties.line.solidFill = "2A6F97"
    s.graphicalProperties.line.noFill = True
    ch.series.append(s)
    ch.x_axis.delete = False
    ch.y_axis.delete = False
    ch.x_axis.number_format = "General"
    ch.y_axis.number_format = "General"
    ch.x_axis.majorGridlines = None
    ch.x_axis.tickLblPos = "low"
    ch.y_axis.tickLblPos = "low"
    ch.height, ch.width = height, width
    ws.add_chart(ch, anchor)
    return ch


class OpenpyxlSheet:
    """An openpyxl worksheet behind the same small interface as :class:`unbend.udfs.xlsx.Sheet`.

    Writers that serve both new XlsxWriter workbooks and openpyxl workbooks
    (the portable model sheet) write through this interface; rows and
    columns are 1-based.
    """

    def __init__(self, ws):
        self.ws = ws
        self._styles = {}

    @property
    def title(self) -> str:
        return self.ws.title

    def _apply(self, c, style):
        if style is None:
            return c
        from openpyxl.styles import Border, Side

        key = style
        parts = self._styles.get(key)
        if parts is None:
            font = Font(name=style.font, bold=style.bold or None, italic=style.italic or None, size=style.size,
                        color=style.color) if (style.font or style.bold or style.italic or style.size
                                               or style.color) else None
            fill = PatternFill("solid", fgColor=style.fill) if style.fill else None
            side = Side(style="thin", color=style.border) if style.border else None
            border = Border(left=side, right=side, top=side, bottom=side) if side else None
            align = Alignment(wrap_text=style.wrap or None, horizontal=style.halign, vertical=style.valign) \
                if (style.wrap or style.halign or style.valign) else None
            parts = self._styles[key] = (font, fill, border, align, style.num_format)
        font, fill, border, align, nf = parts
        if font is not None:
            c.font = font
        if fill is not None:
            c.fill = fill
        if border is not None:
            c.border = border
        if align is not None:
            c.alignment = align
        if nf:
            c.number_format = nf
        return c

    def text(self, row, col, text, style=None):
        from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE

        c = self.ws.cell(row=row, column=col)
        c.value = ILLEGAL_CHARACTERS_RE.sub("", str(text))[:32767]
        c.data_type = "s"  # openpyxl would read a leading '=' as a formula
        return self._apply(c, style)

    def value(self, row, col, v, style=None):
        if isinstance(v, np.generic):
            v = v.item()
        if isinstance(v, str):
            return self.text(row, col, v, style)
        c = self.ws.cell(row=row, column=col)
        if v is None or (isinstance(v, float) and not math.isfinite(v)):
            c.value = None
        else:
            c.value = v
        return self._apply(c, style)

    number = value

    def blank(self, row, col, style):
        return self._apply(self.ws.cell(row=row, column=col), style)

    def formula(self, row, col, text, style=None, value=None):
        if not text.startswith("="):
            raise AssertionError("formula text must start with '='")
        c = self.ws.cell(row=row, column=col)
        c.value = text
        return self._apply(c, style)

    def merge(self, row, col1, col2, text, style=None):
        self.text(row, col1, text, style)
        self.ws.merge_cells(start_row=row, start_column=col1, end_row=row, end_column=col2)

    def width(self, col, w):
        self.ws.column_dimensions[get_column_letter(col)].width = w

    def height(self, row, h):
        self.ws.row_dimensions[row].height = h

    def printable(self, print_area=None):
        self.ws.page_setup.orientation = "landscape"
        self.ws.page_setup.fitToWidth = 1
        self.ws.page_setup.fitToHeight = 0
        self.ws.sheet_properties.pageSetUpPr.fitToPage = True
        if print_area:
            self.ws.print_area = print_area

    def table(self, first_row, first_col, last_row, last_col, name, headers, style_name, header_style=None):
        from openpyxl.worksheet.table import Table, TableStyleInfo

        t = Table(displayName=name, ref=f"{get_column_letter(first_col)}{first_row}:"
                                        f"{get_column_letter(last_col)}{last_row}")
        t.tableStyleInfo = TableStyleInfo(name=style_name.replace(" ", ""), showRowStripes=True)
        self.ws.add_table(t)

    def validation(self, row, col, spec: dict):
        from openpyxl.worksheet.datavalidation import DataValidation

        dv = DataValidation(type=spec["validate"], operator=spec["criteria"], formula1=str(spec["minimum"]),
                            formula2=str(spec["maximum"]), allow_blank=bool(spec.get("ignore_blank", True)),
                            showErrorMessage=True, errorTitle=spec.get("error_title"),
                            error=spec.get("error_message"))
        dv.add(f"{get_column_letter(col)}{row}")
        self.ws.add_data_validation(dv)

    def block(self, first_row, first_col, columns, n):
        """Write a row block cell by cell (openpyxl has no faster way); formulas from ``Column.formula_at``."""
        for j, colspec in enumerate(columns):
            col = first_col + j
            vals = colspec.values
            for i in range(n):
                r = first_row + i
                style = colspec.style if colspec.styles is None else colspec.styles[int(colspec.style_index[i])]
                if colspec.kind == "formula":
                    self.formula(r, col, colspec.formula_at(r), style)
                elif colspec.kind == "text":
                    v = vals[i] if i < len(vals) else None
                    if v is None or v == "":
                        self.blank(r, col, style)
                    else:
                        self.text(r, col, v, style)
                else:
                    self.value(r, col, vals[i] if i < len(vals) else None, style)
