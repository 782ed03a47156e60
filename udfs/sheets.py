"""Writing cells and workbooks: text stays text, missing stays blank, files land atomically."""
from __future__ import annotations

import math
import os
import tempfile

import numpy as np
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

__all__ = ["put", "put_text", "printable", "write_rows", "atomic_save", "same_file", "set_widths", "HEADER_FONT",
           "TITLE_FONT", "NOTE_FONT"]

TITLE_FONT = Font(bold=True, size=14)
HEADER_FONT = Font(bold=True)
NOTE_FONT = Font(italic=True, color="555555")
HEADER_FILL = PatternFill("solid", fgColor="E8EEF4")
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


def write_rows(ws, top: int, left: int, header, rows, *, number_format: str = "0.0000"):
    """A header row then data rows; returns the row after the last one written."""
    for j, h in enumerate(header):
        c = put(ws, top, left + j, h)
        c.font = HEADER_FONT
        c.fill = HEADER_FILL
        c.alignment = Alignment(wrap_text=True, vertical="top")
    r = top + 1
    for row in rows:
        for j, v in enumerate(row):
            nf = number_format if isinstance(v, float) else None
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


def same_file(a, b) -> bool:
    """True when two paths name the same file (or would, once created)."""
    try:
        if os.path.exists(a) and os.path.exists(b):
            return os.path.samefile(a, b)
    except OSError:
        pass
    return os.path.realpath(os.fspath(a)) == os.path.realpath(os.fspath(b))


def atomic_save(save, path) -> str:
    """Call ``save(tmp_path)`` then move the file into place in one step.

    The temporary file sits in the target folder so the final rename never
    crosses file systems; on failure it is removed and ``path`` is untouched.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    os.makedirs(folder, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".unbend-", suffix=os.path.splitext(path)[1], dir=folder)
    os.close(fd)
    try:
        save(tmp)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path
