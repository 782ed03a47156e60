"""Writing new workbooks with XlsxWriter, with a fast path for long blocks of rows.

Why
---
XlsxWriter writes a correct workbook with native charts, tables, number
formats, data validation and print settings, and it can write the
dynamic-array metadata that spilling formulas need. Written cell by cell it
costs several microseconds a cell (and a formula about 0.5 ms, most of it
spent looking for newer function names to prefix), too slow for a report on
200,000 rows with a dozen columns each. So the few hundred cells at the top of
each sheet are written through XlsxWriter's own calls, and long row blocks
(the residual table, the data of the model sheet) through :meth:`Sheet.block`,
which renders whole rows of XML at once when the workbook is saved.

How the fast path fits into XlsxWriter
--------------------------------------
:class:`_BlockSheet` subclasses XlsxWriter's worksheet (the documented
``worksheet_class`` hook of ``Workbook.add_worksheet``) and replaces its row
loop (``_write_rows``) by one that writes the ordinary cells row by row, as
XlsxWriter does, and each block's rows where the block sits. A block column
of formulas is written as one *shared formula* (ECMA-376 Part 1, 18.3.1.40,
``t="shared"``): the formula text once, in the block's first cell, and a
reference to it in every other cell, which is how spreadsheet programs store
a formula filled down a column.

No formula cell carries a cached value (single formulas get an empty one).
A cached value is what a program shows until it recalculates, and
LibreOffice out of the box keeps cached values of .xlsx files instead of
recalculating (XlsxWriter's default cached 0 would be shown as 0); a
formula without a cached value is computed on opening by every spreadsheet
program, and XlsxWriter also asks for a full calculation on load. A viewer
that cannot calculate shows those cells blank, never a wrong number.

The fast path relies on a few XlsxWriter internals (``_write_rows``,
``_write_row``, ``_write_cell``, ``_write_empty_row``, ``_check_dimensions``,
``_get_range_data``, ``fh``, a table's ``range``/``a_range``/``autofilter``
entries and ``Format._get_xf_index``); the versions it was written against
are pinned in pyproject.toml, and ``tests/test_xlsx_writer.py`` reads the
result back with openpyxl and recalculates it in LibreOffice.

Text is always written as text (``write_string``), never as a formula,
whatever it starts with.
"""
from __future__ import annotations

import functools
import itertools
import math
import re
from dataclasses import dataclass

import numpy as np

__all__ = ["Style", "Book", "Sheet", "Column", "col_letter", "cell_ref"]

#: Numbers as the spreadsheet shows them by default (no forced decimals).
GENERAL = "General"
#: Pick a format by the size of each number (see :func:`unbend.udfs.sheets.smart_format`).
SMART = "smart"
#: p-values: tiny ones as "<0.0001" rather than 0.0000.
P_FORMAT = '[<0.0001]"<0.0001";0.0000'

_ILLEGAL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f]")
_MAX_TEXT = 32767


def col_letter(col: int) -> str:
    """Column letters of a 1-based column number."""
    s = ""
    while col:
        col, r = divmod(col - 1, 26)
        s = chr(65 + r) + s
    return s


def cell_ref(row: int, col: int) -> str:
    """A1-style reference of a 1-based row and column."""
    return f"{col_letter(col)}{row}"


def clean_text(s) -> str:
    """Text as a cell can hold it: no control characters, at most 32,767 characters."""
    return _ILLEGAL.sub("", str(s))[:_MAX_TEXT]


@dataclass(frozen=True)
class Style:
    """A cell's look, independent of the library that writes it."""

    bold: bool = False
    italic: bool = False
    size: float | None = None
    color: str | None = None          # font colour, "RRGGBB"
    fill: str | None = None           # background, "RRGGBB"
    border: str | None = None         # thin border on all sides in this colour
    num_format: str | None = None
    wrap: bool = False
    halign: str | None = None         # "left", "center", "right"
    valign: str | None = None         # "top", "bottom", "center"
    font: str | None = None

    def with_(self, **kw) -> "Style":
        d = dict(self.__dict__)
        d.update(kw)
        return Style(**d)

    def xlsxwriter(self) -> dict:
        p = {}
        if self.bold:
            p["bold"] = True
        if self.italic:
            p["italic"] = True
        if self.size:
            p["font_size"] = self.size
        if self.color:
            p["font_color"] = "#" + self.color
        if self.fill:
            p["bg_color"] = "#" + self.fill
            p["pattern"] = 1
        if self.border:
            p["border"] = 1
            p["border_color"] = "#" + self.border
        if self.num_format:
            p["num_format"] = self.num_format
        if self.wrap:
            p["text_wrap"] = True
        if self.halign:
            p["align"] = self.halign
        if self.valign:
            p["valign"] = {"center": "vcenter"}.get(self.valign, self.valign)
        if self.font:
            p["font_name"] = self.font
        return p


@dataclass
class Column:
    """One column of a row block.

    kind "number": ``values`` are floats (NaN or infinite: a blank cell);
    kind "text": strings (None: blank); kind "value": any of these or
    booleans, each written as what it is; kind "formula": ``formula_at(row)``
    gives the formula text of a row (rows differ only in their relative
    references, so the column is written as one shared formula filled down)
    and ``values`` is None (every cell is left for the spreadsheet program to
    compute: LibreOffice keeps a cached value it finds, and computes an
    empty one) or one value per cell. ``style`` is the style of every cell,
    or ``styles`` with ``style_index`` (an integer per row) picks one per cell.
    """

    kind: str
    values: object = None
    style: Style | None = None
    formula_at: object = None
    styles: list | None = None
    style_index: object = None


# ----------------------------------------------------------------------------- the XlsxWriter side
def _worksheet_class():
    from xlsxwriter.worksheet import Worksheet

    class _BlockSheet(Worksheet):
        """XlsxWriter's worksheet plus row blocks rendered at save time."""

        def __init__(self):
            super().__init__()
            self._unbend_blocks = []  # (first_row0, last_row0, renderer)

        def _get_range_data(self, row_start, col_start, row_end, col_end):
            # a chart over a row block gets no cached copy of its points (as in XlsxWriter's constant_memory
            # mode): spreadsheet programs draw charts from the cells
            if any(r0 <= row_end and row_start <= r1 for r0, r1, _ in self._unbend_blocks):
                return ()
            return super()._get_range_data(row_start, col_start, row_end, col_end)

        def _write_rows(self):
            if not self._unbend_blocks:
                return super()._write_rows()
            blocks = sorted(self._unbend_blocks, key=lambda b: b[0])
            rows = sorted(set(r for r, cells in self.table.items() if cells) | set(self.row_info)
                          | set(self.comments))
            bi = 0
            for row_num in rows:
                while bi < len(blocks) and blocks[bi][0] <= row_num:
                    if blocks[bi][1] >= row_num:
                        raise RuntimeError(f"row {row_num + 1} is inside a row block and also has single cells "
                                           "or a row setting")
                    blocks[bi][2](self.fh)
                    bi += 1
                cells = self.table.get(row_num)
                info = self.row_info.get(row_num)
                if cells:
                    self._write_row(row_num, None, info) if info else self._write_row(row_num, None)
                    for col_num in sorted(cells):
                        self._write_cell(row_num, col_num, cells[col_num])
                    self._xml_end_tag("row")
                else:
                    self._write_empty_row(row_num, None, info)
            while bi < len(blocks):
                blocks[bi][2](self.fh)
                bi += 1

    return _BlockSheet


class Book:
    """A new workbook written with XlsxWriter; :meth:`close` saves it."""

    def __init__(self, path):
        import xlsxwriter

        self.path = str(path)
        self.wb = xlsxwriter.Workbook(self.path, {
            "strings_to_formulas": False, "strings_to_urls": False, "strings_to_numbers": False,
            "nan_inf_to_errors": False, "use_future_functions": False})
        self._formats = {}
        self._cls = _worksheet_class()
        self.sheets = []

    def fmt(self, style: Style | None):
        if style is None:
            return None
        f = self._formats.get(style)
        if f is None:
            f = self._formats[style] = self.wb.add_format(style.xlsxwriter())
        return f

    def sheet(self, name: str) -> "Sheet":
        s = Sheet(self, self.wb.add_worksheet(name, worksheet_class=self._cls))
        self.sheets.append(s)
        return s

    def sheet_names(self) -> list:
        return [s.ws.get_name() for s in self.sheets]

    def table_names(self) -> set:
        return {t.lower() for s in self.sheets for t in s.table_names}

    def properties(self, **kw):
        self.wb.set_properties(kw)

    def custom_property(self, name, value):
        self.wb.set_custom_property(name, value)

    def close(self):
        """Save. The archive is compressed at zlib level 1: about three times faster than the default on
        long sheets, for files about a fifth larger."""
        import xlsxwriter.workbook as xwb

        real = getattr(xwb, "ZipFile", None)
        if real is not None:
            xwb.ZipFile = functools.partial(real, compresslevel=1)
        try:
            self.wb.close()
        finally:
            if real is not None:
                xwb.ZipFile = real


class Sheet:
    """One worksheet; rows and columns are 1-based, as spreadsheet programs number them."""

    def __init__(self, book: Book, ws):
        self.book = book
        self.ws = ws
        self.table_names = []
        self._shared = 0

    @property
    def title(self) -> str:
        return self.ws.get_name()

    # ------------------------------------------------------------------ single cells
    def text(self, row, col, text, style: Style | None = None):
        self.ws.write_string(row - 1, col - 1, clean_text(text), self.book.fmt(style))

    def number(self, row, col, v, style: Style | None = None):
        v = float(v)
        if math.isfinite(v):
            self.ws.write_number(row - 1, col - 1, v, self.book.fmt(style))
        elif style is not None:
            self.ws.write_blank(row - 1, col - 1, None, self.book.fmt(style))

    def value(self, row, col, v, style: Style | None = None):
        """Write any value: numbers as numbers, None/NaN/inf as blank, booleans as booleans, the rest as text."""
        if isinstance(v, np.generic):
            v = v.item()
        if v is None:
            if style is not None:
                self.ws.write_blank(row - 1, col - 1, None, self.book.fmt(style))
        elif isinstance(v, bool):
            self.ws.write_boolean(row - 1, col - 1, v, self.book.fmt(style))
        elif isinstance(v, (int, float)):
            self.number(row, col, v, style)
        else:
            self.text(row, col, v, style)

    def blank(self, row, col, style: Style | None):
        self.ws.write_blank(row - 1, col - 1, None, self.book.fmt(style))

    def formula(self, row, col, text: str, style: Style | None = None, value=None):
        """A formula; ``value`` is the cached result to store (default: none, so every program computes it)."""
        if not text.startswith("="):
            raise AssertionError("formula text must start with '='")
        v = "" if value is None else value
        if isinstance(v, float) and not math.isfinite(v):
            v = ""
        self.ws.write_formula(row - 1, col - 1, text, self.book.fmt(style), v)

    def merge(self, row, col1, col2, text, style: Style | None = None):
        """Text across columns ``col1`` to ``col2`` of one row."""
        self.ws.merge_range(row - 1, col1 - 1, row - 1, col2 - 1, clean_text(text), self.book.fmt(style))

    # ------------------------------------------------------------------ layout
    def width(self, col, w):
        self.ws.set_column(col - 1, col - 1, w)

    def height(self, row, h):
        self.ws.set_row(row - 1, h)

    def freeze(self, row, col):
        self.ws.freeze_panes(row - 1, col - 1)

    def printable(self, print_area: str | None = None):
        """Landscape, one page wide, as many pages tall as it takes."""
        self.ws.set_landscape()
        self.ws.fit_to_pages(1, 0)
        if print_area:
            self.ws.print_area(print_area)

    def table(self, first_row, first_col, last_row, last_col, name, headers, style_name, header_style=None):
        """A spreadsheet table over cells already written (its header row included).

        XlsxWriter checks and records every cell of a table's range, about
        100 bytes and a microsecond a cell; for a table over a row block the
        table is added over its header and first row and then given its full
        range (the ``range``, ``a_range`` and ``autofilter`` entries XlsxWriter
        keeps for it).
        """
        from xlsxwriter.utility import xl_range

        short = min(last_row, first_row + 1)
        ret = self.ws.add_table(first_row - 1, first_col - 1, short - 1, last_col - 1, {
            "name": name, "style": style_name, "autofilter": True,
            "columns": [{"header": clean_text(h), "header_format": self.book.fmt(header_style)} for h in headers]})
        if ret != 0:
            raise ValueError(f"the table {name!r} cannot be added (XlsxWriter says {ret})")
        if short != last_row:
            t = self.ws.tables[-1]
            full = xl_range(first_row - 1, first_col - 1, last_row - 1, last_col - 1)
            if t.get("range") != xl_range(first_row - 1, first_col - 1, short - 1, last_col - 1):
                raise RuntimeError("this XlsxWriter keeps tables differently; update unbend.udfs.xlsx.Sheet.table")
            t["range"] = t["a_range"] = t["autofilter"] = full
        self.table_names.append(name)

    def validation(self, row, col, spec: dict):
        self.ws.data_validation(row - 1, col - 1, row - 1, col - 1, spec)

    def scatter(self, title, x_range, y_range, x_label, y_label, anchor_row, anchor_col, *, height=9.0,
                width=16.0):
        """A native scatter chart (points only) of two ranges on this sheet, ``(first_row, last_row, col)``."""
        ch = self.book.wb.add_chart({"type": "scatter"})
        name = self.title.replace("'", "''")

        def ref(r):
            return [name, r[0] - 1, r[2] - 1, r[1] - 1, r[2] - 1]

        ch.add_series({"name": clean_text(title)[:255], "categories": ref(x_range), "values": ref(y_range),
                       "marker": {"type": "circle", "size": 5, "border": {"color": "#2A6F97"},
                                  "fill": {"color": "#2A6F97"}}})
        ch.set_title({"name": clean_text(title)[:255], "name_font": {"size": 12, "bold": True}})
        ch.set_x_axis({"name": clean_text(x_label)[:255], "num_format": "General", "label_position": "low",
                       "major_gridlines": {"visible": False}})
        ch.set_y_axis({"name": clean_text(y_label)[:255], "num_format": "General", "label_position": "low",
                       "major_gridlines": {"visible": True, "line": {"color": "#D9D9D9"}}})
        ch.set_legend({"none": True})
        ch.set_size({"width": width * 37.8, "height": height * 37.8})  # centimetres to pixels at 96 dpi
        self.ws.insert_chart(anchor_row - 1, anchor_col - 1, ch)
        return ch

    # ------------------------------------------------------------------ row blocks
    def block(self, first_row: int, first_col: int, columns: list, n: int):
        """``n`` rows from ``first_row``, one :class:`Column` per column from ``first_col``; rendered at save.

        No single cell may be written in these rows.
        """
        if n <= 0:
            return
        ws = self.ws
        r0, r1 = first_row - 1, first_row - 1 + n - 1
        c0, c1 = first_col - 1, first_col - 1 + len(columns) - 1
        if ws._check_dimensions(r1, c1) or ws._check_dimensions(r0, c0):
            raise ValueError(f"rows {first_row} to {first_row + n - 1} do not fit on a sheet")
        parts = []
        for j, col in enumerate(columns):
            letter = col_letter(first_col + j)
            parts.append(self._column_renderer(col, letter, first_row, n))
        ws._unbend_blocks.append((r0, r1, _BlockRenderer(first_row, n, parts)))

    def _column_renderer(self, col: Column, letter: str, first_row: int, n: int):
        fmt = self.book.fmt
        if col.styles is not None:
            idx = [fmt(s)._get_xf_index() if s is not None else 0 for s in col.styles]
            sidx = np.asarray(col.style_index, dtype=np.int64)
            s_attr = [f' s="{idx[k]}"' if idx[k] else "" for k in range(len(idx))]
            const = None
        else:
            x = fmt(col.style)._get_xf_index() if col.style is not None else 0
            const = f' s="{x}"' if x else ""
            s_attr = sidx = None
        si = None
        if col.kind == "formula":
            si = self._shared
            self._shared += 1
        return _ColumnPart(col, letter, first_row, n, const, s_attr, sidx, si)


def _esc(s: str) -> str:
    return s.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


class _ColumnPart:
    """Renders one block column for a chunk of rows: a piece of the row template and its argument lists.

    A row of the block is ``template.format(row_number, *arguments)``: the
    pieces of all columns joined, each using ``{0}`` for the row number and its
    own numbered fields for its values, so a whole chunk is rendered by one
    ``map`` over the rows (C speed) rather than cell by cell.
    """

    def __init__(self, col, letter, first_row, n, const, s_attr, sidx, si):
        self.col, self.letter, self.first_row, self.n = col, letter, first_row, n
        self.const, self.s_attr, self.sidx, self.si = const, s_attr, sidx, si
        if col.kind == "formula":
            if col.values is not None:
                raise ValueError("a formula block column is left for the spreadsheet program to compute; "
                                 "give no values")
            text = col.formula_at(first_row)
            text = text[1:] if text.startswith("=") else text
            last = first_row + n - 1
            self.master = (f'<f t="shared" ref="{letter}{first_row}:{letter}{last}" si="{si}">{_esc(text)}</f>'
                           if n > 1 else f"<f>{_esc(text)}</f>")
            self.shared = f'<f t="shared" si="{si}"/>'

    def _styles(self, i0, i1):
        if self.const is not None:
            return None
        return [self.s_attr[k] for k in self.sidx[i0:i1].tolist()]

    def piece(self, i0: int, i1: int, k: int):
        """(template piece, list of argument lists); ``k`` is the number of the piece's first field."""
        col, L = self.col, self.letter
        styles = self._styles(i0, i1)
        s = "" if self.const is None else self.const
        if col.kind == "formula":
            if styles is None:
                return f'<c r="{L}{{0}}"{s}>{self.shared}</c>', []
            return f'<c r="{L}{{0}}"{{{k}}}>{self.shared}</c>', [styles]
        vals = col.values[i0:i1]
        arr = np.asarray(vals, dtype=float) if col.kind == "number" else _as_floats(vals)
        if arr is not None:
            text = repr(arr.tolist())[1:-1].split(", ")  # shortest round-trip digits, in C
            ok = np.isfinite(arr)
            if not ok.all():
                text = [f"<v>{t}</v>" if good else "" for t, good in zip(text, ok.tolist())]
                inner = f"{{{k}}}"
            else:
                inner = f"<v>{{{k}}}</v>"
            if styles is None:
                return f'<c r="{L}{{0}}"{s}>{inner}</c>', [text]
            inner = inner.replace(f"{{{k}}}", f"{{{k + 1}}}")
            return f'<c r="{L}{{0}}"{{{k}}}>{inner}</c>', [styles, text]
        rows = range(self.first_row + i0, self.first_row + i1)
        ss = itertools.repeat(s) if styles is None else styles
        if col.kind == "text":
            cells = [_text_cell(L, r, st, v) for r, v, st in zip(rows, vals, ss)]
        else:
            cells = [_value_cell(L, r, st, v) for r, v, st in zip(rows, vals, ss)]
        return f"{{{k}}}", [cells]

    def first_cell(self) -> str:
        """The block's first cell of a formula column: the one that holds the shared formula's text."""
        s = self.const if self.const is not None else self.s_attr[int(self.sidx[0])]
        return f'<c r="{self.letter}{self.first_row}"{s}>{self.master}</c>'


def _as_floats(vals):
    """The values as a float array when every one is a real number (not a boolean), else None."""
    if isinstance(vals, np.ndarray) and vals.dtype.kind == "f":
        return vals
    try:
        if any(type(v) not in (float, int) for v in vals):
            return None
    except TypeError:
        return None
    return np.asarray(vals, dtype=float)


def _text_cell(L, r, s, v) -> str:
    if v is None or v == "":
        return f'<c r="{L}{r}"{s}/>' if s else ""
    t = _esc(clean_text(v))
    sp = ' xml:space="preserve"' if t[:1].isspace() or t[-1:].isspace() else ""
    return f'<c r="{L}{r}"{s} t="inlineStr"><is><t{sp}>{t}</t></is></c>'


def _value_cell(L, r, s, v) -> str:
    """A cell holding a number, a boolean or text (never a formula), or a blank one."""
    if isinstance(v, bool):
        return f'<c r="{L}{r}"{s} t="b"><v>{int(v)}</v></c>'
    if isinstance(v, (int, float)) and math.isfinite(v):
        return f'<c r="{L}{r}"{s}><v>{float(v)!r}</v></c>'
    if isinstance(v, str) and v != "":
        t = _esc(clean_text(v))
        sp = ' xml:space="preserve"' if t[:1].isspace() or t[-1:].isspace() else ""
        return f'<c r="{L}{r}"{s} t="inlineStr"><is><t{sp}>{t}</t></is></c>'
    return f'<c r="{L}{r}"{s}/>' if s else ""


class _BlockRenderer:
    CHUNK = 8192

    def __init__(self, first_row, n, parts):
        self.first_row, self.n, self.parts = first_row, n, parts

    def __call__(self, fh):
        for i0 in range(0, self.n, self.CHUNK):
            i1 = min(self.n, i0 + self.CHUNK)
            pieces, args = [], []
            for p in self.parts:
                piece, more = p.piece(i0, i1, 1 + len(args))
                pieces.append(piece)
                args.extend(more)
            template = '<row r="{0}">' + "".join(pieces) + "</row>"
            rows = range(self.first_row + i0, self.first_row + i1)
            lines = list(map(template.format, rows, *args))
            if i0 == 0 and any(p.col.kind == "formula" for p in self.parts):
                lines[0] = self._first_row(lines[0])
            fh.write("".join(lines))

    def _first_row(self, line: str) -> str:
        """The block's first row again, with the text of each shared formula in its cell."""
        for p in self.parts:
            if p.col.kind == "formula":
                start = line.index(f'<c r="{p.letter}{self.first_row}"')
                end = line.index("</c>", start) + len("</c>")
                line = line[:start] + p.first_cell() + line[end:]
        return line
