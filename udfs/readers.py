"""Reading data files: the names older code uses, kept over :mod:`unbend.udfs.files`.

The readers themselves live in :mod:`unbend.udfs.files` (:mod:`~unbend.udfs.files.grids` opens
.xlsx/.xlsm/.xls/.xlsb/.ods/.csv/.tsv/.txt safely, :mod:`~unbend.udfs.files.layout` finds the sheet, the
header row and the columns, and reads them by the shared rules of :mod:`unbend.udfs.intake`).
"""
from __future__ import annotations

import pandas as pd

from . import intake
from .files.grids import (MAX_CSV_BYTES, MAX_PART_BYTES, MAX_RATIO, MAX_TOTAL_BYTES, ReadError, as_text,
                          open_book)
from .files.layout import DataReading, find_header, read_data

__all__ = ["ReadError", "read_table", "read_data", "DataReading", "pick_columns", "MAX_PART_BYTES",
           "MAX_TOTAL_BYTES", "MAX_RATIO", "MAX_CSV_BYTES"]


def _unique(names):
    seen = {}
    out = []
    for n in names:
        k = seen.get(n, 0)
        out.append(n if k == 0 else f"{n} ({k + 1})")
        seen[n] = k + 1
    return out


def read_table(path, sheet: str | None = None) -> pd.DataFrame:
    """Read a sheet (the first by default) or a text file into a DataFrame, one column per header cell.

    The header row is found under titles, notes and blank rows; each column holds numbers where the
    reading rules read one (numbers written as text included) and the cell's text (stripped) or None
    elsewhere.  A column whose decimal separator stays open keeps its texts.

    Raises
    ------
    ReadError
        Missing, unreadable, damaged or hostile file; unknown sheet.
    """
    book = open_book(path)
    if book.kind == "text" and sheet:
        raise ReadError("--sheet applies to workbooks only; this is a text file.")
    name = book.sheet_names[0] if sheet is None or book.kind == "text" else sheet
    if name not in book.sheet_names:
        raise ReadError(f"no sheet named {sheet!r} in {book.base}; it has: {', '.join(book.sheet_names)}.")
    grid = book.grid(name)
    h, _ = find_header(grid.rows)
    if h is None:
        raise ReadError(f"the sheet {name!r} is empty." if book.kind != "text" else f"{book.base} is empty.")
    head = grid.rows[h]
    names = _unique([as_text(v) or f"column {j + 1}" for j, v in enumerate(head)])
    body = [r for r in grid.rows[h + 1:] if any(v not in (None, "") and not (isinstance(v, str) and not v.strip())
                                                 for v in r)]
    data = {}
    for j, nm in enumerate(names):
        cells = [(r[j] if j < len(r) else None) for r in body]
        cells = [None if (isinstance(v, str) and not v.strip()) else v for v in cells]
        try:
            rd = intake.read_flat(cells, nm, delimiter=grid.delimiter, header=False)
            vals = rd.values
            used = rd.reasons == intake.USED
        except intake.ReadingRefused:
            vals, used = None, [False] * len(cells)
        out = []
        for i, v in enumerate(cells):
            if used[i] if i < len(used) else False:
                out.append(float(vals[i]))
            elif isinstance(v, str):
                out.append(v.strip())
            else:
                out.append(v)
        data[nm] = out
    return pd.DataFrame(data, columns=names)


def pick_columns(df: pd.DataFrame, names, what: str) -> list:
    """Check that every named column exists; the message lists the ones that do."""
    out = []
    for n in names:
        if n in df.columns:
            out.append(n)
            continue
        match = [c for c in df.columns if str(c).strip().lower() == str(n).strip().lower()]
        if match:
            out.append(match[0])
            continue
        raise ReadError(f"no column named {n!r} for {what}; the columns are: {', '.join(map(str, df.columns))}.")
    return out
