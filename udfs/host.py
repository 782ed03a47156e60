"""What the desktop spreadsheet program hands over, turned into the common cell vocabulary.

The Windows spreadsheet program calls a cell function through xlwings' COM server. Each argument
reaches Python either as a Range (a reference: ``A:A``, ``Data[load]``, ``F2``) or as a plain value
(a literal, an array constant, another formula's result), in pywin32's shapes:

* one cell is a scalar; a block is a tuple of rows, each a tuple of cells;
* an empty cell is ``None``; a number is ``float``; text is ``str``; TRUE/FALSE is ``bool``;
* a date is pywin32's ``TimeType``, a ``datetime`` subclass carrying a UTC time zone;
* a cell formatted as currency is ``decimal.Decimal`` (COM's currency type);
* a cell error is an ``int``: the COM error code 0x800A0000 plus Excel's error number.

This module turns those into the vocabulary the rest of ``unbend.udfs`` reads (:mod:`.cells`):
``None`` for a blank (empty text included, as xlwings does), ``float``, ``str``, ``bool``, a naive
``datetime``, and every error value as its text (``"#N/A"``, ``"#SPILL!"`` ...), so that no error
code can be read as a number and every one is skipped and counted as an error value. A block made
only of numbers comes back as a read-only float array (the fast path); anything else as a
:class:`CellRows`, a tuple of rows. A block equal to one handed over a moment before (a thousand
cells reading the same columns) gets the same result back, and :class:`SameCells` lets the cell
functions reuse the reading made of it.

It also holds the xlwings converters the cell functions use (see ``functions.cell_function``):

* :class:`HostCells` reads a reference itself: whole columns, whole rows and other large
  references are first cut at the end of the sheet's used range (``Worksheet.UsedRange``), so
  ``A:A`` costs what its filled part costs; the values are then taken raw (``Range.Value``) and
  normalised here in one pass, skipping xlwings' per-cell cleaning. Plain values are normalised the
  same way.
* :class:`HostReference` keeps a reference as a reference (like xlwings' ``"range"`` converter),
  for arguments that want a cell's address rather than its value; a plain value is normalised.
* :class:`HostResult` hands a result back in a shape COM can carry: a rectangle of rows of
  ``float``/``int``/``str``/``bool`` (dates through xlwings' own date conversion), with no NaN or
  infinity, skipping xlwings' per-cell cleaning on the way out too.

Nothing here needs Windows: the module imports ``xlwings.conversion``, which imports everywhere.
"""
from __future__ import annotations

import datetime as _dt
import decimal
import itertools
import operator
import re
import threading

import numpy as np
from xlwings.conversion import Accessor, Pipeline

__all__ = [
    "ERROR_NAMES",
    "COM_ERROR_BASE",
    "error_name",
    "is_error_code",
    "normalise",
    "read_range",
    "HostProblem",
    "HostCells",
    "HostReference",
    "HostResult",
    "TRIM_ABOVE",
    "SameCells",
    "CellRows",
]

#: A cell error arrives as this COM error code plus Excel's error number (0x800A0000 as a signed
#: 32-bit integer). source: xlwings' own ``_xlwindows.cell_errors`` table (#DIV/0! 2007 arrives as
#: -2146826281 = COM_ERROR_BASE + 2007; the six other classic errors follow the same rule).
COM_ERROR_BASE = -2146828288
_ERROR_LAST = COM_ERROR_BASE + 0xFFFF  # the error number is the low 16 bits of the code

#: Excel's error numbers and the text a cell shows.
#: source: Microsoft's XlCVError enumeration for the Excel object model (xlErrNull 2000, xlErrDiv0
#: 2007, xlErrValue 2015, xlErrRef 2023, xlErrName 2029, xlErrNum 2036, xlErrNA 2042,
#: xlErrGettingData 2043, xlErrSpill 2045, xlErrConnect 2046, xlErrBlocked 2047, xlErrUnknown 2048,
#: xlErrField 2049, xlErrCalc 2050), as listed in the com4j type-library bindings for Excel
#: (repository exceljava, com/exceljava/com4j/excel/XlCVError.java).
#: 2051 (#BUSY!) is not in that enumeration; source: a public test suite that observed
#: Range.Value2 = -2146826237 for a #BUSY! cell. Any other code in the error range (a newer error
#: Excel may add) is still an error value: see :func:`error_name`.
ERROR_NAMES = {
    2000: "#NULL!",
    2007: "#DIV/0!",
    2015: "#VALUE!",
    2023: "#REF!",
    2029: "#NAME?",
    2036: "#NUM!",
    2042: "#N/A",
    2043: "#GETTING_DATA",
    2045: "#SPILL!",
    2046: "#CONNECT!",
    2047: "#BLOCKED!",
    2048: "#UNKNOWN!",
    2049: "#FIELD!",
    2050: "#CALC!",
    2051: "#BUSY!",
}
#: The text given to an error number that has no name here; it is an error value all the same.
UNNAMED_ERROR = "#N/A"

#: References with at least this many cells, or that reach the sheet's last row or column (whole
#: columns and rows), are cut at the end of the sheet's used range before their values are read; a
#: smaller one is read as it is (the cut costs round trips of its own, and a table column lies inside
#: the used range anyway).
TRIM_ABOVE = 65_536
SHEET_ROWS = 1_048_576  # rows and columns of a worksheet (common practice: the sheet limits since 2007)
SHEET_COLUMNS = 16_384


def is_error_code(v) -> bool:
    """True for an ``int`` (not a bool) in the range COM uses for cell errors."""
    return type(v) is int and COM_ERROR_BASE <= v <= _ERROR_LAST


def error_name(code: int) -> str:
    """The text of a cell error code, e.g. -2146826243 -> ``"#SPILL!"``.

    Codes without a name here (errors newer than this table) are given ``"#N/A"``: the reading
    rules skip them as error values like any other, which is all that matters for the numbers.
    """
    return ERROR_NAMES.get(code - COM_ERROR_BASE, UNNAMED_ERROR)


def _cell(v):
    """One value as pywin32 hands it over -> the common vocabulary."""
    t = type(v)
    if t is float or v is None or t is bool:
        return v
    if t is str:
        return v if v else None  # an empty text (a formula returning "") reads as a blank, as in xlwings
    if t is int:
        if COM_ERROR_BASE <= v <= _ERROR_LAST:
            return error_name(v)
        return float(v)
    if isinstance(v, decimal.Decimal):  # a currency-formatted cell
        return float(v)
    if isinstance(v, _dt.datetime):  # pywin32's TimeType (UTC-labelled wall time) or a plain datetime
        return _dt.datetime(v.year, v.month, v.day, v.hour, v.minute, v.second, v.microsecond)
    if isinstance(v, _dt.date):
        return _dt.datetime(v.year, v.month, v.day)
    if isinstance(v, str):
        return str(v) or None
    if isinstance(v, bool):
        return bool(v)
    if isinstance(v, float):
        return float(v)
    if isinstance(v, int):
        return _cell(int(v))
    if isinstance(v, np.generic):
        return _cell(v.item())
    return str(v)


_PLAIN = frozenset({float, str, type(None), bool})


def normalise(value):
    """What the host handed over -> the common cell vocabulary.

    Parameters
    ----------
    value : scalar, tuple of rows, flat tuple or list
        As pywin32 gives it (``Range.Value``, or an argument that is not a reference).

    Returns
    -------
    scalar, numpy.ndarray or tuple of rows
        One value for one cell. For a block: a new 2-D float array when every cell is a number
        (the fast path), otherwise a tuple of rows (tuples) of ``None``/``float``/``str``/``bool``/
        ``datetime`` with error values as their text. A flat sequence is one row (as xlwings reads it).
    """
    if not isinstance(value, (tuple, list)):
        return _cell(value)
    if not value:
        return [[None]]
    rows = value if isinstance(value[0], (tuple, list)) else (value,)
    widths = set(map(len, rows))
    width = max(widths)
    if len(widths) > 1:  # not from a Range (those are rectangular): pad as a block
        rows = [tuple(r) + (None,) * (width - len(r)) for r in rows]
    flat = list(map(_FIRST, rows)) if width == 1 else list(itertools.chain.from_iterable(rows))
    kinds = set(map(type, flat))
    seen = _recent.find(flat, kinds, width)
    if seen is not None:  # the same cells as a moment ago (another cell reading the same range)
        return seen
    block = _normalise_block(rows, flat, kinds, width)
    _recent.keep(flat, kinds, width, block)
    return block


def _normalise_block(rows, flat, kinds, width):
    if kinds == {float}:  # every cell a number: one C-speed conversion, no per-cell work
        arr = np.array(flat, dtype=float).reshape(len(rows), width)
        arr.flags.writeable = False  # it may be handed out again (see _RecentBlocks)
        return arr
    if kinds <= {float, decimal.Decimal}:  # currency cells among the numbers
        arr = np.array([float(v) for v in flat], dtype=float).reshape(len(rows), width)
        arr.flags.writeable = False
        return arr
    if kinds <= _PLAIN and not (str in kinds and "" in set(flat)):  # already in the vocabulary
        return CellRows(rows if type(rows) is tuple else map(tuple, rows), kinds)
    cells = list(map(_cell, flat))
    return CellRows(zip(*[iter(cells)] * width), set(map(type, cells)))  # rows of `width` cells


class _RecentBlocks:
    """The last few blocks the host handed over, and what :func:`normalise` made of them.

    Each formula reads its ranges when it recalculates; a thousand cells over the same columns hand
    over a thousand equal blocks. A block equal to a recent one, value for value and type for type,
    gets the same (immutable) result back. ``==`` alone is not enough: TRUE equals 1.0, and an
    error code equals the float of the same value, so where bools or ints occur the types are
    compared cell by cell too. (Decimal and float, or the COM date type and a plain date, normalise
    alike, so their equality is enough.)
    """

    def __init__(self, size: int = 8, min_cells: int = 64, max_cells: int = 200_000):
        self.size, self.min_cells, self.max_cells = size, min_cells, max_cells
        self._entries = []  # (key, flat, kinds, types or None, result), most recent last
        self._lock = threading.Lock()

    @staticmethod
    def _types(flat, kinds):
        return tuple(map(type, flat)) if (bool in kinds or int in kinds) else None

    def _kept(self, flat) -> bool:
        return self.min_cells <= len(flat) <= self.max_cells  # small blocks are cheap; huge ones cost memory

    def find(self, flat, kinds, width):
        if not self._kept(flat):
            return None
        key = (len(flat), width, flat[0], flat[-1])
        with self._lock:
            for i, (k, f, kd, types, result) in enumerate(self._entries):
                if k == key and kd == kinds and f == flat and types == self._types(flat, kinds):
                    self._entries.append(self._entries.pop(i))
                    return result
        return None

    def keep(self, flat, kinds, width, result):
        if not self._kept(flat):
            return
        entry = ((len(flat), width, flat[0], flat[-1]), flat, frozenset(kinds), self._types(flat, kinds), result)
        with self._lock:
            self._entries.append(entry)
            del self._entries[:-self.size]


_recent = _RecentBlocks()


class CellRows(tuple):
    """A block in the cell vocabulary: a tuple of rows (tuples), with the set of cell types in it."""

    def __new__(cls, rows, kinds):
        self = super().__new__(cls, rows)
        self.kinds = frozenset(kinds)
        return self


_FIRST = operator.itemgetter(0)


class SameCells:
    """Readings of cells seen a moment ago, found again by the cells themselves.

    Every formula reads its ranges each time it recalculates, so a thousand cells over the same two
    columns read the same values a thousand times. This keeps the last few readings, keyed by the
    cells as :func:`normalise` hands them over, and gives one back only when the new cells equal the
    old ones value for value and type for type (``True`` is not ``1.0``; an array must match bit for
    bit). Anything it cannot key exactly (lists from a Python caller, unhashable cells) is read anew.

    Parameters
    ----------
    size : int
        Readings kept (least recently used dropped first).
    max_cells : int
        Larger arguments are not kept.
    """

    def __init__(self, size: int = 8, max_cells: int = 200_000):
        self.size, self.max_cells = size, max_cells
        self._entries = []  # [(key, parts' exact forms, reading, the parts)], most recent last
        self._lock = threading.Lock()
        self.hits = self.misses = 0

    def _exact(self, part):
        """(hashable key, exact form) of one argument, or None when it cannot be keyed exactly."""
        if part is None or type(part) in _SCALARS:
            return (type(part), part), (type(part), part)
        if isinstance(part, np.ndarray):
            if part.dtype.kind not in "fiub" or part.size > self.max_cells:
                return None
            raw = part.tobytes()
            return ("a", part.dtype.str, part.shape, hash(raw)), raw
        if type(part) is CellRows and part:
            if len(part) * len(part[0]) > self.max_cells:
                return None
            key = ("r", len(part), part[0], part[-1])
            # == is type-strict for floats, text, blanks and dates (none equals another kind); only
            # TRUE/FALSE equal 1.0/0.0, so where they occur the types are compared cell by cell too
            types = tuple(map(type, itertools.chain.from_iterable(part))) if bool in part.kinds else None
            return key, (part, types)
        return None

    def get_or_read(self, parts: tuple, read):
        """``read()``'s result for these arguments, from a reading of equal cells when there is one."""
        frozen = all(map(_immutable, parts))
        with self._lock:  # the very same unchangeable objects (normalise hands out one result for equal blocks)
            for i, entry in enumerate(self._entries if frozen else ()):
                if len(entry[3]) == len(parts) and all(a is b for a, b in zip(entry[3], parts)):
                    self._entries.append(self._entries.pop(i))
                    self.hits += 1
                    return entry[2]
        exact = [self._exact(p) for p in parts]
        if any(e is None for e in exact):
            return read()
        key = tuple(e[0] for e in exact)
        forms = [e[1] for e in exact]
        with self._lock:
            for i, (k, f, reading, _) in enumerate(self._entries):
                if k == key and all(_same(a, b) for a, b in zip(f, forms)):
                    self._entries.append(self._entries.pop(i))
                    self.hits += 1
                    return reading
            self.misses += 1
        reading = read()
        with self._lock:
            self._entries.append((key, forms, reading, tuple(parts)))
            del self._entries[:-self.size]
        return reading


_SCALARS = frozenset({float, str, bool, _dt.datetime})


def _immutable(part) -> bool:
    """True for what cannot change after it was seen: None, a scalar, a CellRows, a read-only array."""
    return (part is None or type(part) in _SCALARS or type(part) is CellRows
            or (isinstance(part, np.ndarray) and not part.flags.writeable))


def _same(a, b) -> bool:
    if type(a) is bytes:
        return a == b
    if type(a) is tuple and len(a) == 2 and type(a[0]) is CellRows:  # (rows, types or None)
        return a[1] == b[1] and a[0] == b[0]
    return a == b


class HostProblem:
    """An argument that could not be read; the cell function turns it into an ``unbend:`` message."""

    __slots__ = ("message",)

    def __init__(self, message: str):
        self.message = message

    def __repr__(self):
        return f"HostProblem({self.message!r})"


_ADDRESS = re.compile(r"^\$?([A-Z]{1,3})?\$?(\d+)?(?::\$?([A-Z]{1,3})?\$?(\d+)?)?$")


def _last_cell(address: str):
    """(last row, last column) of an A1-style address such as "$A$1:$D$120", "$A:$D" or "$B$7"."""
    m = _ADDRESS.match(address.strip().upper())
    if not m:
        return None
    c1, r1, c2, r2 = m.groups()
    if ":" not in address:
        c2, r2 = c1, r1
    row = int(r2) if r2 else SHEET_ROWS
    col = _column_number(c2) if c2 else SHEET_COLUMNS
    return row, col


def _column_number(letters: str) -> int:
    n = 0
    for ch in letters:
        n = n * 26 + ord(ch) - 64
    return n


def _needs_cut(row, col, rows, cols) -> bool:
    return rows * cols >= TRIM_ABOVE or row + rows - 1 >= SHEET_ROWS or col + cols - 1 >= SHEET_COLUMNS


def read_range(rng):
    """The values of a reference, cut at the end of the sheet's used range, normalised.

    Round trips to the program: one for a single cell (its value); three for a small block (its
    number of areas, its values); six for a whole column or another large reference (also the used
    range's address and the cut). The reference's position and size come from what xlwings has
    already asked for (``Range.shape``, ``row``, ``column``, ``sheet``).

    Parameters
    ----------
    rng : xlwings.Range
        As xlwings' conversion hands it to a converter (``ctx.range``).

    Returns
    -------
    scalar, numpy.ndarray, list of lists or HostProblem
        As :func:`normalise`. A reference of more than one cell always gives a block (never a
        scalar), even when the used range leaves one cell of it.
    """
    xl = rng.api
    rows, cols = rng.shape
    if rows == 1 and cols == 1:
        return normalise(xl.Value)
    if xl.Areas.Count > 1:
        return HostProblem("give one block of cells; the reference has several separate areas.")
    row, col = rng.row, rng.column
    if _needs_cut(row, col, rows, cols):
        last = _last_cell(rng.sheet.api.UsedRange.Address)
        if last is not None:
            n = min(rows, last[0] - row + 1)
            m = min(cols, last[1] - col + 1)
            if n <= 0 or m <= 0:  # the whole reference lies beyond the used range: all blank
                return [[None] * (cols if cols <= 256 else 1)]
            if (n, m) != (rows, cols):
                xl = xl.Resize(n, m)
    value = xl.Value
    if not isinstance(value, (tuple, list)):
        value = ((value,),)
    return normalise(value)


def _problem(exc) -> HostProblem:
    text = " ".join(str(exc).split()) or type(exc).__name__
    return HostProblem(f"the spreadsheet program could not hand the cells over ({text[:120]}).")


class _ReadStage:
    def __init__(self, keep_reference: bool):
        self.keep_reference = keep_reference

    def __call__(self, ctx):
        try:
            if ctx.range is None:
                ctx.value = normalise(ctx.value)
            elif self.keep_reference:
                ctx.value = ctx.range
            else:
                ctx.value = read_range(ctx.range)
        except Exception as exc:  # a COM failure: say so in the cell instead of a bare error
            ctx.value = _problem(exc)


class HostCells(Accessor):
    """xlwings converter: a reference's values read fast (see the module notes), plain values normalised."""

    @classmethod
    def reader(cls, options):
        return Pipeline().append_stage(_ReadStage(keep_reference=False))


class HostReference(Accessor):
    """xlwings converter: a reference stays an ``xlwings.Range``; a plain value is normalised."""

    @classmethod
    def reader(cls, options):
        return Pipeline().append_stage(_ReadStage(keep_reference=True))


_INF = float("inf")
_COM_PLAIN = frozenset({float, str, int, bool})


def _out_cell(v, engine):
    t = type(v)
    if t is float:
        return v if (v == v and v != _INF and v != -_INF) else ""
    if t is str or t is bool or t is int:
        return v
    if v is None:
        return ""
    if isinstance(v, np.generic):
        return _out_cell(v.item(), engine)
    if isinstance(v, (_dt.date, _dt.datetime)):
        return engine.impl.prepare_xl_data_element(v, None)  # xlwings' own date conversion for COM
    if isinstance(v, bool):
        return bool(v)
    if isinstance(v, int):
        return int(v)
    if isinstance(v, float):
        return _out_cell(float(v), engine)
    if isinstance(v, decimal.Decimal):
        return _out_cell(float(v), engine)
    return " ".join(str(v).split())


class _WriteStage:
    def __call__(self, ctx):
        value = ctx.value
        if isinstance(value, np.ndarray):
            value = value.tolist()
        if not isinstance(value, (list, tuple)):
            rows = [[value]]
        elif not value:
            rows = [[""]]
        elif not isinstance(value[0], (list, tuple)):
            rows = [list(value)]
        else:
            rows = value
        widths = set(map(len, rows))
        flat = itertools.chain.from_iterable(rows)
        if len(widths) == 1 and set(map(type, flat)) <= _COM_PLAIN and _finite(rows):
            ctx.value = [r if type(r) is list else list(r) for r in rows]  # already what COM carries
            return
        width = max(widths)
        engine = ctx.engine
        ctx.value = [[_out_cell(v, engine) for v in r] + [""] * (width - len(r)) for r in rows]


def _finite(rows) -> bool:
    """No NaN or infinity among the float cells (one vectorised test)."""
    floats = [v for v in itertools.chain.from_iterable(rows) if type(v) is float]
    return not floats or bool(np.isfinite(np.array(floats)).all())


class HostResult(Accessor):
    """xlwings return converter: a rectangle of COM-safe cells, without per-cell cleaning of plain ones."""

    @classmethod
    def writer(cls, options):
        return Pipeline().append_stage(_WriteStage())
