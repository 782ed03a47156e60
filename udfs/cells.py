"""Cell values in, cell values out: the layer between spreadsheet ranges and the engine.

Arguments arrive the way xlwings hands them over: a scalar for one cell, a flat
list for one row *or* one column, a list of rows for a block, ``None`` for a
blank cell, ``str`` for text (a cell error is ``None``, or text such as
``"#N/A"`` when errors are passed as text), ``bool``, ``datetime``, ``int`` or
``float``.  Numpy arrays and pandas objects are accepted as well.

Rules used throughout (our own decisions, kept in one place):

* What counts as a number, and why any other value is skipped, is decided by
  :mod:`unbend.udfs.intake`, the one set of reading rules the command uses
  too: numbers written as text (``" 12.5 "``, ``"1.234,5"``, ``"12 mg/L"``,
  ``"45%"``) are read, dates and times become days or hours since a stated
  origin, summary labels and values below a detection limit are skipped in
  their own categories; ``True``/``False`` and ``±inf`` are never numbers.
  Every value not used becomes ``NaN`` and its reason is counted:
  :func:`read`, :func:`read_block` and :func:`read_rows` keep the reasons;
  :func:`to_numbers` and :func:`to_block` give the numbers alone.
* Trailing blank cells (``None``) at the end of a range are dropped, so a whole
  column such as ``A:A`` costs no more than its filled part.  Use
  :func:`pad_rows` to bring several trimmed ranges back to one length.
* Arguments are never modified; every array returned is new.
* Output never contains ``NaN`` or ``inf``: a missing value is written as ``""``
  (a blank-looking cell).
* Every message to the user is one line beginning ``"unbend: "``.
"""
from __future__ import annotations

import array as _array
import datetime as _dt
import functools
import hashlib
import itertools
import math
import numbers
import threading
from collections import OrderedDict

import numpy as np

from unbend import DomainError, UnbendError

__all__ = [
    "CellError",
    "read",
    "read_block",
    "read_rows",
    "check_enough",
    "CELL_ERRORS",
    "to_numbers",
    "to_block",
    "to_labels",
    "pad_rows",
    "table",
    "column",
    "scalar",
    "error_text",
    "safe",
    "optional_number",
    "optional_text",
    "key_of",
    "ResultCache",
]

_NAN = float("nan")
#: Longest message handed back to a cell.
_MAX_TEXT = 250
#: Cell types that numpy may convert in one go (``None`` becomes NaN there).
#: ``bool`` and ``str`` are deliberately absent: numpy would read True as 1.0 and "12" as 12.0.
_FAST_TYPES = frozenset({float, int, type(None), np.float64})
#: Spreadsheet error values as they arrive when errors are passed as text.
CELL_ERRORS = frozenset({
    "#DIV/0!", "#N/A", "#NAME?", "#NULL!", "#NUM!", "#REF!", "#VALUE!", "#DATA!",
    "#SPILL!", "#CALC!", "#FIELD!", "#BLOCKED!", "#CONNECT!", "#BUSY!", "#UNKNOWN!",
    "#GETTING_DATA", "#PYTHON!",
})


class CellError(Exception):
    """A cell argument cannot be used; ``str()`` is one line starting ``"unbend: "``."""

    def __init__(self, message: str):
        text = " ".join(str(message).split())
        if not text.startswith("unbend:"):
            text = "unbend: " + text
        super().__init__(text)


# --------------------------------------------------------------------------- cells in

def _cell_number(v) -> float:
    """One cell value as a float; anything that is not a finite real number is NaN."""
    t = type(v)
    if t is float or t is np.float64:
        return float(v) if math.isfinite(v) else _NAN
    if v is None or isinstance(v, (bool, np.bool_, str, bytes, np.timedelta64)):
        return _NAN
    if isinstance(v, (list, tuple, dict, set, np.ndarray)):
        if isinstance(v, np.ndarray) and v.ndim == 0:
            return _cell_number(v.item())
        raise CellError("a cell holds a list or array; give a range of cells (rows x columns).")
    if isinstance(v, numbers.Real):
        try:
            f = float(v)
        except (OverflowError, TypeError, ValueError):
            return _NAN
        return f if math.isfinite(f) else _NAN
    return _NAN


def _floats(flat: list) -> np.ndarray:
    """A new 1-D float array from a list of cell values (fast path when all are plain numbers)."""
    # Fastest: one C-speed pass. array('d') refuses text and blanks; it accepts bools, which can only
    # hide where a value is 0 or 1, so only those cells get their type looked at.
    try:
        arr = np.frombuffer(_array.array("d", flat), dtype=float).copy()
    except (TypeError, OverflowError, ValueError):
        arr = None
    if arr is not None:
        hits = np.flatnonzero((arr == 1.0) | (arr == 0.0))
        if not any(type(flat[i]) not in _FAST_TYPES for i in hits.tolist()):
            bad = ~np.isfinite(arr)
            if bad.any():
                arr[bad] = np.nan
            return arr
    if set(map(type, flat)) <= _FAST_TYPES:  # two C-speed passes: the type check, then the conversion
        try:
            try:
                arr = np.fromiter(flat, dtype=float, count=len(flat))
            except TypeError:  # blanks (None): numpy's array() reads them as NaN
                arr = np.array(flat, dtype=float)
        except (OverflowError, TypeError, ValueError):
            pass
        else:
            bad = ~np.isfinite(arr)
            if bad.any():
                arr[bad] = np.nan
            return arr
    return np.fromiter(map(_cell_number, flat), dtype=float, count=len(flat))


def _is_blank_row(row) -> bool:
    return isinstance(row, (list, tuple)) and all(c is None for c in row)


def _trim(seq, blank, end: int, is_blank) -> int:
    """Length of ``seq[:end]`` once trailing items equal to ``blank`` are dropped.

    Works on chunks with ``list.count`` (C speed); falls back to a plain loop if
    comparing a cell with ``blank`` misbehaves (for example a numpy array in a cell).
    """
    try:
        start, step = end, 256
        while end:
            start = max(0, end - step)
            if seq[start:end].count(blank) != end - start:
                break
            end, step = start, min(step * 2, 1 << 16)
        while end - start > 32:  # seq[start:end] holds a non-blank; narrow it down
            mid = (start + end) // 2
            if seq[mid:end].count(blank) == end - mid:
                end = mid
            else:
                start = mid
    except Exception:  # an odd object in a cell; the slow loop below decides
        pass
    while end and is_blank(seq[end - 1]):
        end -= 1
    return end


def _trim_cells(flat: list) -> list:
    end = _trim(flat, None, len(flat), lambda c: c is None)
    return flat if end == len(flat) else flat[:end]


def _trim_rows(rows: list) -> list:
    end = len(rows)
    while end and _is_blank_row(rows[end - 1]):
        end = _trim(rows, rows[end - 1], end, _is_blank_row)
    return rows if end == len(rows) else rows[:end]


def _parse(cells, numeric: bool, name: str):
    """Sort an argument into ``(kind, data)``.

    kind is ``"array"`` (data a new float ndarray, only when ``numeric``),
    ``"row"`` (a flat list: one row or one column, orientation unknown),
    ``"column"`` (a flat list that came as one-cell rows), ``"rows"``
    (a list of row sequences, trailing blank rows already dropped) or
    ``"blank"`` (rows that were all blank; data is the width of the first).
    Lists handed in are never changed.
    """
    if cells is None:
        return "row", []
    if isinstance(cells, (str, bytes, bool, np.bool_)):
        return "row", [cells]
    if hasattr(cells, "to_numpy") and not isinstance(cells, np.ndarray):  # pandas objects
        try:
            cells = cells.to_numpy()
        except Exception as exc:
            raise CellError(f"{name}: could not read {type(cells).__name__} as cells ({exc}).") from None
    if isinstance(cells, np.ndarray):
        if cells.ndim > 2:
            raise CellError(f"{name}: expected a range of cells (rows x columns); got {cells.ndim} dimensions.")
        kind = cells.dtype.kind
        if numeric and kind in "fiu":
            arr = cells.astype(float)  # always a copy
            arr[~np.isfinite(arr)] = np.nan
            return "array", arr
        if numeric and kind in "bc":  # booleans and complex numbers: never numbers
            return "array", np.full(cells.shape, np.nan)
        if kind == "M":  # dates: as datetime objects (tolist() of nanoseconds would give integers)
            cells = cells.astype("datetime64[us]")
        elif kind == "m":
            cells = cells.astype("timedelta64[us]")
        cells = cells.tolist()  # python objects, new lists
        if not isinstance(cells, list):
            return "row", [cells]
    if isinstance(cells, (list, tuple)):
        if not cells:
            return "row", []
        if not isinstance(cells[0], (list, tuple, np.ndarray)):
            return "row", cells
        first = cells[0]
        cells = _trim_rows(cells)  # first: a whole column is mostly blank rows
        if not cells:  # all blank: keep the width of the range for to_block
            return "blank", len(first)
        try:  # one column: every row has exactly one cell (map/chain run at C speed)
            if set(map(len, cells)) == {1}:
                return "column", list(itertools.chain.from_iterable(cells))
        except TypeError:
            pass
        if set(map(type, cells)) <= {list, tuple}:
            return "rows", cells
        rows = []
        for r in cells:
            if isinstance(r, np.ndarray):
                if r.ndim != 1:
                    raise CellError(f"{name}: expected a range of cells (rows x columns); got nested arrays.")
                r = r.tolist()
            elif not isinstance(r, (list, tuple)):
                raise CellError(f"{name}: the range mixes whole rows with single cells; give rows x columns.")
            rows.append(r)
        return "rows", rows
    return "row", [cells]


def _block(rows: list) -> np.ndarray:
    """A new 2-D float array from row sequences; short rows are padded with NaN."""
    widths = set(map(len, rows))
    w = max(widths, default=0)
    if len(widths) > 1:
        rows = [list(r) + [None] * (w - len(r)) for r in rows]
    flat = list(itertools.chain.from_iterable(rows))
    return _floats(flat).reshape(len(rows), w)


def _one_dim(kind: str, data: list, name: str) -> list:
    """The cells of a one-row or one-column list argument, as a flat list (trailing blanks kept)."""
    if kind == "blank":
        return []
    if kind != "rows":
        return data
    rows = data
    if len(rows) == 1:
        return list(rows[0])
    width = max(map(len, rows), default=0)
    if width <= 1:
        return [r[0] if len(r) else None for r in rows]
    raise CellError(f"{name} must be one row or one column; got a block of {len(rows)} rows x {width} columns.")


def to_numbers(cells, name: str = "values") -> np.ndarray:
    """Read one row or one column of cells as numbers.

    Parameters
    ----------
    cells : scalar, list, list of lists, numpy array or pandas Series
        As xlwings delivers it.  Ragged rows are padded with blanks.
    name : str
        What the argument is called in messages.

    Returns
    -------
    numpy.ndarray
        New 1-D float array, read by the shared rules (:func:`read` keeps the
        reasons): numbers, and numbers written as text, as numbers; a column of
        dates as days (or hours) since its earliest; every other cell (blank,
        other text, error, bool, a summary label, a value below a detection
        limit, inf) is NaN.  Trailing blank cells are dropped; a blank argument
        gives an empty array.

    Raises
    ------
    CellError
        For a block with more than one row and more than one column, or a
        range nested deeper than rows x columns.
    unbend.udfs.intake.ReadingRefused
        When texts leave the decimal separator open (``"1.234"`` alone).
    """
    return read(cells, name).values


def read(cells, name: str = "values", **options):
    """Read one row or one column of cells by the reading rules, keeping every value's reason.

    Parameters
    ----------
    cells : scalar, list, list of lists, numpy array or pandas Series
        As xlwings delivers it.
    name : str
        What the argument is called in messages.
    **options
        Passed to :func:`unbend.udfs.intake.read_column` (``decimal``, ``date_origin`` ...).

    Returns
    -------
    unbend.udfs.intake.ColumnReading
        Trailing blank cells dropped; a blank argument gives an empty reading.
    """
    from .intake import read_flat

    kind, data = _parse(cells, True, name)
    if kind == "array":
        if data.ndim == 2 and data.shape[0] > 1 and data.shape[1] > 1:
            raise CellError(f"{name} must be one row or one column; "
                            f"got a block of {data.shape[0]} rows x {data.shape[1]} columns.")
        data = data.reshape(-1)
    else:
        data = _trim_cells(_one_dim(kind, data, name))
    return read_flat(data, name, **options)


def read_block(cells, name: str = "x", flat_as: str = "column", **options) -> list:
    """Read a block of cells (rows x columns) column by column by the reading rules.

    Returns
    -------
    list of unbend.udfs.intake.ColumnReading
        One per column, named ``name`` for a single column and ``name1``,
        ``name2`` ... otherwise; all of one length (trailing blank rows dropped).
    """
    from .intake import read_flat

    if flat_as not in ("column", "row"):
        raise ValueError("flat_as must be 'column' or 'row'")
    kind, data = _parse(cells, True, name)
    if kind == "array":
        arr = data if data.ndim == 2 else (data.reshape(-1)[:, None] if flat_as == "column" else data.reshape(1, -1))
        cols = [arr[:, j] for j in range(arr.shape[1])]
    elif kind == "blank":
        cols = [[] for _ in range(max(int(data), 1))]
    elif kind == "rows":
        widths = set(map(len, data))
        w = max(widths, default=0)
        rows = data if len(widths) <= 1 else [list(r) + [None] * (w - len(r)) for r in data]
        cols = [list(c) for c in zip(*rows)] if w else []
    else:
        flat = _trim_cells(data)
        cols = [flat] if (kind == "column" or flat_as == "column") else [[v] for v in flat]
    names = [name] if len(cols) == 1 else [f"{name}{j + 1}" for j in range(len(cols))]
    out = [read_flat(c, nm, **options) for c, nm in zip(cols, names)]
    n = max((len(r) for r in out), default=0)
    return [_pad_reading(r, n) for r in out]


def _pad_reading(r, n):
    """A reading lengthened to n cells with blanks (trimming can shorten one column of a block)."""
    import dataclasses

    from .intake import BLANK

    k = n - len(r)
    if k <= 0:
        return r
    return dataclasses.replace(r, values=np.concatenate([r.values, np.full(k, np.nan)]),
                               reasons=np.concatenate([r.reasons, np.full(k, BLANK, dtype=np.uint8)]),
                               limits=np.concatenate([r.limits, np.full(k, np.nan)]),
                               censored=np.concatenate([r.censored, np.zeros(k, dtype=bool)]))


def read_rows(y, x=None, *, y_name: str = "y", x_name: str = "x", censor: bool = False):
    """Read y and x cells into rows used and rows skipped by reason (the cell functions' common first step).

    A row of x given as a one-row block beside a row of y is read as the x column. With ``censor=True``
    (functions that fit a censored line) y values below a limit written with it ("<0.5") are used at their
    limit and marked in ``y_censored`` (:func:`unbend.udfs.intake.censor_column`).

    Returns
    -------
    unbend.udfs.intake.RowsReading
        Row numbers count positions in the ranges (1 is the first cell).
    """
    from .intake import combine

    yr = read(y, y_name)
    if censor:
        from .intake import censor_column
        yr = censor_column(yr)
    if x is None:
        return combine(yr, [])
    xs = read_block(x, x_name)
    if xs and len(xs[0]) == 1 and len(xs) > 1 and len(yr) > 1 and len(xs) == len(yr):
        xs = [read(x[0] if isinstance(x, (list, tuple)) else np.asarray(x).reshape(-1), x_name)]
    return combine(yr, xs)


def check_enough(rows, need: int = 3, y_name: str = "y", x_name: str = "x") -> None:
    """Refuse, in words with the reasons, when fewer than ``need`` rows can be used."""
    if rows.n_used >= need:
        return
    both = f"{y_name} and {x_name} are" if len(rows.columns) > 1 else f"{y_name} is"
    why = rows.skipped_words()
    from .wording import example_place

    ex = next((f" (such as {example_place('position', *e[1:])})" for e in rows.examples if e[3]), "")
    raise CellError(f"need at least {need} rows where {both} numbers; found {rows.n_used}. Skipped: {why}{ex}. "
                    "Select the ranges that hold the data, or fix the values shown.")


def to_block(cells, name: str = "x", flat_as: str = "column") -> np.ndarray:
    """Read a block of cells (rows x columns) as numbers.

    Parameters
    ----------
    cells : scalar, list, list of lists, numpy array or pandas object
        As xlwings delivers it; ragged rows are padded with NaN.
    name : str
        What the argument is called in messages.
    flat_as : {"column", "row"}
        How to read a flat list or 1-D array.  xlwings passes one row and one
        column alike as a flat list; a predictor range is a column, so that is
        the default.  Ask xlwings for ``ndim=2`` to keep the true orientation.

    Returns
    -------
    numpy.ndarray
        New 2-D float array; non-numbers are NaN, trailing blank rows dropped.
        The width is that of the widest row kept (of the first row when every
        row is blank).
    """
    if flat_as not in ("column", "row"):
        raise ValueError("flat_as must be 'column' or 'row'")
    kind, data = _parse(cells, True, name)
    if kind == "array":
        arr = data
        if arr.ndim < 2:
            arr = arr.reshape(-1)
            arr = arr[:, None] if flat_as == "column" else arr[None, :]
        return arr
    if kind == "blank":
        return np.empty((0, data))
    cols = read_block(cells, name, flat_as)
    if not cols:
        return np.empty((0, 0))
    return np.column_stack([c.values for c in cols])


def _label(v):
    if isinstance(v, np.generic):
        v = v.item()
    if v is None:
        return None
    if isinstance(v, str):
        s = v.strip()
        return None if not s or s.upper() in CELL_ERRORS else s
    if isinstance(v, float):
        return v if math.isfinite(v) else None
    if isinstance(v, (list, tuple, dict, set, np.ndarray)):
        raise CellError("a cell holds a list or array; give a range of cells (rows x columns).")
    return v


def to_labels(cells, name: str = "groups") -> list:
    """Read one row or one column of group labels.

    Parameters
    ----------
    cells : scalar, list, list of lists, numpy array or pandas Series
    name : str
        What the argument is called in messages.

    Returns
    -------
    list
        One Python object per cell: numbers stay numbers, bools stay bools,
        dates stay dates, text is stripped; blanks, empty text, cell errors
        (``"#N/A"`` ...) and nan/inf become ``None``.  Trailing blank cells are
        dropped, as in :func:`to_numbers`, so both give the same length.
    """
    kind, data = _parse(cells, False, name)
    return [_label(v) for v in _trim_cells(_one_dim(kind, data, name))]


def pad_rows(*arrays: np.ndarray) -> tuple:
    """Pad arrays with NaN rows so all have as many rows as the longest.

    Trimming trailing blanks can leave two same-size ranges (say ``A:A`` and
    ``B:B``) with different lengths; this restores one length so rows pair up.
    It cannot tell a mismatched selection from trimmed blanks; compare the raw
    range sizes first if that matters.

    Returns
    -------
    tuple of numpy.ndarray
        New arrays (1-D stay 1-D, 2-D stay 2-D).
    """
    n = max((a.shape[0] for a in arrays), default=0)
    out = []
    for a in arrays:
        pad = np.full((n - a.shape[0],) + a.shape[1:], np.nan)
        out.append(np.concatenate([np.asarray(a, dtype=float), pad]))
    return tuple(out)


# --------------------------------------------------------------------------- cells out

_INF = float("inf")


def _out(v):
    """One value as a plain Python cell value; missing, nan and inf become ""."""
    t = type(v)
    if t is float:  # the common case first, without the slower checks below
        return v if (v == v and v != _INF and v != -_INF) else ""
    if t is str or t is int or t is bool:
        return v
    if isinstance(v, np.ndarray) and v.size == 1:
        v = v.reshape(-1)[0]
    if isinstance(v, np.generic) and not isinstance(v, (np.datetime64, np.timedelta64)):
        v = v.item()
    if v is None:
        return ""
    if isinstance(v, (bool, str)):
        return v
    if isinstance(v, int):
        return int(v)
    if isinstance(v, numbers.Real):
        try:
            f = float(v)
        except (OverflowError, TypeError, ValueError):
            return ""
        return f if math.isfinite(f) else ""
    try:
        missing = bool(v != v)  # NaT and friends; pd.NA refuses bool() and lands in except
    except Exception:
        missing = True
    if missing:
        return ""
    if isinstance(v, (_dt.date, _dt.time)):
        return v
    return " ".join(str(v).split())


def _row_values(row) -> list:
    if isinstance(row, (str, bytes)) or not hasattr(row, "__iter__"):
        return [row]
    return list(row)


def table(header, rows) -> list:
    """Shape a result as a spilling block of plain cell values.

    Parameters
    ----------
    header : list of str or None
        First row; ``None`` or empty for no header row.
    rows : iterable of rows
        Each row an iterable of values (or one value).  A 2-D numpy array or
        pandas DataFrame works too.

    Returns
    -------
    list of list
        Python ``float``/``int``/``str``/``bool`` (dates pass through); every
        None, nan and inf is ``""``; all rows padded with ``""`` to one width.
        Never empty: nothing at all gives ``[[""]]``.
    """
    if hasattr(rows, "to_numpy"):
        rows = rows.to_numpy()
    body = [list(r) if type(r) in (list, tuple) else _row_values(r) for r in (() if rows is None else rows)]
    if header is not None and len(_row_values(header)):
        body.insert(0, _row_values(header))
    width = max(map(len, body), default=0)
    if width == 0:
        return [[""]]
    if _plain_cells(body):  # nothing to clean: only pad (one C-speed type check, one vectorised finiteness check)
        return [r + [""] * (width - len(r)) for r in body]
    return [[_out(v) for v in r] + [""] * (width - len(r)) for r in body]


_PLAIN_OUT = frozenset({float, int, str, bool})
_PLAIN_KEEP = frozenset({int, str, bool})


def _out_column(c) -> list:
    """One column of a result as plain cell values, as :func:`_out` makes them, at C speed where it can."""
    if isinstance(c, np.ndarray) and c.ndim == 1 and c.dtype.kind in "fiub":
        vals = c.tolist()  # Python floats, ints or bools
        if c.dtype.kind == "f":
            for i in np.flatnonzero(~np.isfinite(c)).tolist():
                vals[i] = ""
        return vals
    vals = c.tolist() if isinstance(c, np.ndarray) else list(c)
    kinds = set(map(type, vals))
    if kinds <= _PLAIN_KEEP:
        return vals
    if kinds == {float}:
        return _out_column(np.array(vals, dtype=float))
    return [_out(v) for v in vals]


def table_columns(header, columns) -> list:
    """:func:`table` for a result given column by column: the same cells, built a column at a time.

    Parameters
    ----------
    header : list of str or None
        First row; ``None`` or empty for no header row.
    columns : list of columns
        Each a numpy array or a list, all of one length (one value per row).

    Returns
    -------
    list of list
        Exactly what ``table(header, zip(*columns))`` returns, without a pass
        over every cell in Python for numeric columns (10^4 rows x 11
        columns in a few milliseconds).
    """
    cols = [_out_column(c) for c in columns]
    lengths = {len(c) for c in cols}
    if len(lengths) > 1:
        raise ValueError(f"columns of different lengths: {sorted(lengths)}")
    body = list(map(list, zip(*cols)))
    head = _row_values(header) if header is not None else []
    width = max(len(head), len(cols) if body else 0)  # every body row has one cell per column
    if head:
        body.insert(0, [_out(v) for v in head])  # a short row: cleaned cell by cell, as table() would
    if width == 0:
        return [[""]]
    if head and len(head) != len(cols):
        body = [r + [""] * (width - len(r)) for r in body]
    return body


def _plain_cells(body: list) -> bool:
    """True when every cell is a finite float, an int, a str or a bool (what :func:`_out` leaves unchanged)."""
    if not set(map(type, itertools.chain.from_iterable(body))) <= _PLAIN_OUT:
        return False
    floats = [v for v in itertools.chain.from_iterable(body) if type(v) is float]
    return not floats or bool(np.isfinite(np.array(floats)).all())


def column(values, header=None) -> list:
    """Shape values as a one-column spill, with an optional header cell on top.

    Parameters
    ----------
    values : scalar, list, numpy array or pandas Series
    header : str, optional

    Returns
    -------
    list of list
        ``[[header], [v1], [v2], ...]`` with the same cleaning as :func:`table`.
    """
    if hasattr(values, "to_numpy"):
        values = values.to_numpy()
    if isinstance(values, np.ndarray):
        if values.ndim == 2 and values.shape[0] > 1 and values.shape[1] > 1:
            raise CellError(f"expected one column of values; got {values.shape[0]} x {values.shape[1]}.")
        values = values.reshape(-1).tolist()
    values = _row_values(values)
    return table([header] if header not in (None, "") else None, [[v] for v in values])


def scalar(value):
    """One result for one cell.

    Returns
    -------
    float or str
        A real number as a Python float; nan, inf and None as ``""``; text unchanged.

    Raises
    ------
    CellError
        For anything else (a bool, a list, a date ...).
    """
    if isinstance(value, np.ndarray) and value.size == 1:
        value = value.reshape(-1)[0]
    if isinstance(value, np.generic) and not isinstance(value, np.timedelta64):
        value = value.item()
    if value is None:
        return ""
    if isinstance(value, str):
        return value
    if isinstance(value, numbers.Real) and not isinstance(value, bool):
        f = _cell_number(value)
        return "" if math.isnan(f) else f
    raise CellError(f"expected one number for one cell; got {type(value).__name__}.")


# --------------------------------------------------------------------------- errors

def _one_line(text: str, limit: int = _MAX_TEXT) -> str:
    text = " ".join(text.split())
    return text if len(text) <= limit else text[:limit - 1] + "\u2026"


def error_text(exc: BaseException) -> str:
    """The message a cell shows for an exception: one line starting ``"unbend: "``.

    Parameters
    ----------
    exc : BaseException

    Returns
    -------
    str
        The message of an :class:`unbend.UnbendError` or :class:`CellError`,
        prefixed; any other exception as "unexpected problem (...); please
        report it".  At most about 250 characters, never a traceback.
    """
    try:
        msg = " ".join(str(exc).split())
    except Exception:
        msg = ""
    if isinstance(exc, (UnbendError, CellError)):
        if msg.startswith("unbend:"):
            msg = msg[len("unbend:"):].lstrip()
        if isinstance(exc, DomainError):
            msg = _start_in_cell_words(msg, exc.proposed_start)
        return _one_line("unbend: " + (msg or "the input cannot be used."))
    kind = type(exc).__name__
    detail = f"{kind}: {_one_line(msg, 120)}" if msg else kind
    return _one_line(f"unbend: unexpected problem ({detail}); please report it")


def _start_in_cell_words(msg: str, start: float) -> str:
    """The engine's advice ("Add a start of 0.5 (start=0.5), choose power 1, or use the Yeo-Johnson family ...")
    in the cells' words: the argument that takes the start (y_start, x_start or start), and no option the cell
    functions do not have."""
    head, sep, _ = msg.partition(" Add a start of ")
    if not sep:
        return msg
    what = "y_" if " y value" in head else "x_" if " x value" in head else ""
    return f"{head} Add a start of {start:g} (the {what}start argument), or give {what}power 1 (raw)."


def safe(fn):
    """Wrap a cell function so an exception becomes its :func:`error_text` instead.

    Parameters
    ----------
    fn : callable
        The cell function.

    Returns
    -------
    callable
        Same name, docstring and signature as ``fn`` (xlwings reads them,
        ``inspect.signature`` follows ``__wrapped__``); returns ``fn``'s result,
        or one line of text for any ``Exception``.  ``KeyboardInterrupt`` and
        ``SystemExit`` still propagate.
    """
    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except Exception as exc:
            return error_text(exc)
    return wrapper


# --------------------------------------------------------------------------- options

def _shown(v) -> str:
    return _one_line(repr(v), 40)


def optional_number(v, name: str, default=None):
    """An optional numeric option: blank gives ``default``, a number gives a float.

    Raises
    ------
    CellError
        For text (even text that looks like a number), bools, nan/inf and ranges.
    """
    if isinstance(v, np.generic):
        v = v.item()
    if v is None or (isinstance(v, str) and not v.strip()):
        return default
    if isinstance(v, numbers.Real) and not isinstance(v, bool):
        f = _cell_number(v)
        if math.isfinite(f):
            return f
    hint = "; type it without quotes" if isinstance(v, str) and math.isfinite(_text_number(v)) else ""
    raise CellError(f"{name} must be a number (or left blank); got {_shown(v)}{hint}.")


def _text_number(s: str) -> float:
    try:
        return float(s)
    except ValueError:
        return _NAN


def optional_text(v, name: str, choices, default=None):
    """An optional word option: blank gives ``default``; otherwise one of ``choices``.

    Matching ignores case and surrounding spaces; the choice is returned as
    spelled in ``choices``.

    Raises
    ------
    CellError
        Listing the choices, for anything that is not one of them.
    """
    if v is None or (isinstance(v, str) and not v.strip()):
        return default
    if isinstance(v, str):
        wanted = v.strip().casefold()
        for c in choices:
            if str(c).casefold() == wanted:
                return c
    listed = ", ".join(str(c) for c in choices)
    raise CellError(f"{name} must be one of: {listed} (or left blank); got {_shown(v)}.")


# --------------------------------------------------------------------------- cache

def _feed(h, part) -> None:
    if part is None:
        h.update(b"N;")
    elif isinstance(part, (bool, np.bool_)):
        h.update(b"B1;" if part else b"B0;")
    elif isinstance(part, np.ndarray) or isinstance(part, np.generic):
        arr = np.asarray(part)
        h.update(f"A{arr.dtype.str}{arr.shape};".encode())
        if arr.dtype.kind == "O":
            _feed(h, arr.tolist())
        else:
            h.update(np.ascontiguousarray(arr).data)
    elif isinstance(part, int):
        h.update(f"I{part};".encode())
    elif isinstance(part, float):
        h.update(f"F{part.hex()};".encode())
    elif isinstance(part, str):
        b = part.encode("utf-8", "surrogatepass")
        h.update(f"S{len(b)};".encode() + b)
    elif isinstance(part, bytes):
        h.update(f"Y{len(part)};".encode() + part)
    elif isinstance(part, (tuple, list)):
        h.update(f"{'T' if isinstance(part, tuple) else 'L'}{len(part)}(".encode())
        for p in part:
            _feed(h, p)
        h.update(b")")
    elif isinstance(part, (_dt.date, _dt.time, _dt.timedelta, complex, numbers.Number)):
        r = f"{type(part).__qualname__}:{part!r}".encode()
        h.update(f"R{len(r)};".encode() + r)
    else:
        raise TypeError(f"cannot build a cache key from {type(part).__name__}")


def key_of(*parts) -> str:
    """A content key for cache look-ups.

    Arrays are keyed by dtype, shape and bytes (so equal content in different
    arrays gives the same key); ints, floats, bools, text, None, dates and
    nested tuples/lists by type and value.  ``1``, ``1.0`` and ``True`` differ.

    Returns
    -------
    str
        32 hex digits (BLAKE2b, 16-byte digest).
    """
    h = hashlib.sha256()  # hardware-assisted on current processors
    _feed(h, parts)
    return h.hexdigest()


def _nbytes(obj, depth: int = 0) -> int:
    """Bytes of the numpy arrays in obj (looking a few levels into containers and dataclasses)."""
    if isinstance(obj, np.ndarray):
        return int(obj.nbytes)
    if depth >= 3:
        return 0
    if isinstance(obj, (tuple, list)):
        return sum(_nbytes(o, depth + 1) for o in obj)
    if isinstance(obj, dict):
        return sum(_nbytes(o, depth + 1) for o in obj.values())
    fields = getattr(obj, "__dataclass_fields__", None)
    if fields:
        return sum(_nbytes(getattr(obj, f, None), depth + 1) for f in fields)
    return 0


class ResultCache:
    """Least-recently-used store of computed results, keyed by content.

    Bounded by number of entries and by bytes: an entry is charged the bytes
    of the arrays in its key parts plus those in its result.  Thread-safe; the
    computation runs outside the lock, so two threads asking for the same new
    key may both compute it (the second result is kept).  Exceptions are not
    cached.  Cached results are shared: do not modify them.

    Parameters
    ----------
    maxsize : int
        Most entries kept.
    maxbytes : int
        Most bytes charged in total (default 256 MB).
    """

    def __init__(self, maxsize: int = 64, maxbytes: int = 256 * 2**20):
        if maxsize < 1 or maxbytes < 1:
            raise ValueError("maxsize and maxbytes must be positive")
        self.maxsize = int(maxsize)
        self.maxbytes = int(maxbytes)
        self._data: OrderedDict[str, tuple] = OrderedDict()
        self._bytes = 0
        self._lock = threading.Lock()
        self.hits = self.misses = self.evictions = 0

    def __len__(self) -> int:
        with self._lock:
            return len(self._data)

    @property
    def nbytes(self) -> int:
        """Bytes currently charged."""
        with self._lock:
            return self._bytes

    def clear(self) -> None:
        """Forget every entry (the counters stay)."""
        with self._lock:
            self._data.clear()
            self._bytes = 0

    def get_or_compute(self, key_parts, compute):
        """Return the cached result for ``key_parts``, computing it with ``compute()`` if absent.

        Parameters
        ----------
        key_parts : tuple or list
            Arrays, numbers, text, None ... that decide the result (see :func:`key_of`).
        compute : callable
            Called with no arguments on a miss.
        """
        parts = tuple(key_parts) if isinstance(key_parts, (tuple, list)) else (key_parts,)
        key = key_of(*parts)
        with self._lock:
            if key in self._data:
                self._data.move_to_end(key)
                self.hits += 1
                return self._data[key][0]
            self.misses += 1
        result = compute()
        size = _nbytes(parts) + _nbytes(result)
        if size > self.maxbytes:
            return result
        with self._lock:
            old = self._data.pop(key, None)
            if old is not None:
                self._bytes -= old[1]
            self._data[key] = (result, size)
            self._bytes += size
            while len(self._data) > self.maxsize or self._bytes > self.maxbytes:
                _, (_, s) = self._data.popitem(last=False)
                self._bytes -= s
                self.evictions += 1
        return result
