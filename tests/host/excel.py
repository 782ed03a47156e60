"""A fake spreadsheet object model that hands values over the way COM (pywin32) does.

What a real ``Range.Value`` gives through pywin32, and so what these fakes give (from memory:
pywin32's VARIANT conversion, and xlwings' own ``_xlwindows.py`` which is written against it):

* one cell: the value itself; more than one cell: a tuple of rows, each a tuple of cells;
* an empty cell: ``None``; a number: ``float``; text: ``str``; TRUE/FALSE: ``bool``;
* a date: ``pywintypes.TimeType`` (a ``datetime`` subclass, UTC time zone);
* a cell formatted as currency: ``decimal.Decimal`` (VT_CY);
* a cell error: an ``int``, the COM error code 0x800A0000 + the XlCVError number, e.g. #DIV/0!
  (2007) arrives as -2146826281 (xlwings' own table in ``_xlwindows.cell_errors`` lists the seven
  classic ones).

Every property read or method call on a fake object counts as one COM round trip
(:attr:`Application.calls`), so a test can say how many a function makes; the time those round
trips take in the real program cannot be measured here.
"""
from __future__ import annotations

import datetime as dt
import re

from .stubs import IID, TimeType, com_error

RANGE_IID = "{00020846-0000-0000-C000-000000000046}"  # Excel's Range interface (xlwings checks it)
SHEET_ROWS = 1_048_576  # rows in a worksheet (common practice: the sheet's row limit)
SHEET_COLS = 16_384
MISSING = -2147352572  # DISP_E_PARAMNOTFOUND: what VBA passes for an omitted Optional argument


def col_index(letters: str) -> int:
    n = 0
    for ch in letters.upper():
        n = n * 26 + ord(ch) - 64
    return n


def col_letters(n: int) -> str:
    s = ""
    while n:
        n, r = divmod(n - 1, 26)
        s = chr(65 + r) + s
    return s


_REF = re.compile(r"^\$?([A-Za-z]{1,3})?\$?(\d+)?$")


def parse_ref(ref: str):
    """'A1:B10', 'A:A', '3:3', 'B2' -> (row, col, nrows, ncols)."""
    parts = ref.replace("$", "").split(":")
    if len(parts) == 1:
        parts = parts * 2
    (c1, r1), (c2, r2) = (_REF.match(p).groups() for p in parts)
    r1 = int(r1) if r1 else 1
    r2 = int(r2) if r2 else SHEET_ROWS
    c1 = col_index(c1) if c1 else 1
    c2 = col_index(c2) if c2 else SHEET_COLS
    return r1, c1, r2 - r1 + 1, c2 - c1 + 1


class Com:
    """Base of the fakes: reading a public attribute or calling a method is one counted round trip."""

    _app = None

    def __getattribute__(self, name):
        if name[:1].isupper():
            app = object.__getattribute__(self, "_app")
            if app is not None:
                app.calls += 1
        return object.__getattribute__(self, name)


class _TypeAttr:
    def __init__(self, iid):
        self.iid = iid


class _TypeInfo:
    def __init__(self, iid, name):
        self._iid, self._name = iid, name

    def GetTypeAttr(self):
        return _TypeAttr(self._iid)

    def GetDocumentation(self, index):
        return (self._name, None, 0, None)


class _OleObj:
    def __init__(self, iid, name):
        self._info = _TypeInfo(iid, name)

    def GetTypeInfo(self):
        return self._info


class _Count(Com):
    def __init__(self, app, n):
        self._app, self._n = app, n

    @property
    def Count(self):
        return self._n


class Range(Com):
    """A block of cells on a :class:`Worksheet`."""

    def __init__(self, sheet, row, col, nrows, ncols):
        self._app = sheet._app
        self._sheet, self._r, self._c, self._nr, self._nc = sheet, row, col, nrows, ncols
        self._oleobj_ = _OleObj(IID(RANGE_IID), "Range")
        self.formula = None

    def __repr__(self):
        return f"<fake Range {self._sheet._name}!{self.address_text()}>"

    def address_text(self, row_abs=True, col_abs=True):
        def one(r, c):
            return f"{'$' if col_abs else ''}{col_letters(c)}{'$' if row_abs else ''}{r}"
        first = one(self._r, self._c)
        if self._nr == 1 and self._nc == 1:
            return first
        return first + ":" + one(self._r + self._nr - 1, self._c + self._nc - 1)

    # ------------------------------------------------------------ COM properties and methods
    @property
    def Value(self):
        return self._sheet._values(self._r, self._c, self._nr, self._nc)

    @property
    def Value2(self):
        return self.Value

    @property
    def Row(self):
        return self._r

    @property
    def Column(self):
        return self._c

    @property
    def Rows(self):
        return _Count(self._app, self._nr)

    @property
    def Columns(self):
        return _Count(self._app, self._nc)

    @property
    def Count(self):
        return self._nr * self._nc

    @property
    def Areas(self):
        return _Count(self._app, 1)

    @property
    def Worksheet(self):
        return self._sheet

    @property
    def Parent(self):
        return self._sheet

    @property
    def Application(self):
        return self._app

    @property
    def Address(self):
        return self.address_text()

    def GetAddress(self, RowAbsolute=True, ColumnAbsolute=True, ReferenceStyle=1, External=False, *a):
        text = self.address_text(RowAbsolute, ColumnAbsolute)
        if External:
            text = f"[{self._sheet._book._name}]{self._sheet._name}!{text}"
        return text

    def Resize(self, RowSize=None, ColumnSize=None):
        return Range(self._sheet, self._r, self._c, RowSize or self._nr, ColumnSize or self._nc)

    def Cells(self, row, col):
        return Range(self._sheet, self._r + row - 1, self._c + col - 1, 1, 1)

    @property
    def Formula(self):
        return self.formula or ""

    @property
    def Formula2(self):
        return self.formula or ""

    @property
    def HasSpill(self):
        return False


class MultiAreaRange(Range):
    """A union of blocks such as (A1:A5,A10:A20): Value gives the first area only, as COM does."""

    def __init__(self, sheet, areas):
        first = areas[0]
        super().__init__(sheet, first._r, first._c, first._nr, first._nc)
        self._areas = areas

    @property
    def Areas(self):
        return _Count(self._app, len(self._areas))


class Worksheet(Com):
    def __init__(self, book, name):
        self._app, self._book, self._name = book._app, book, name
        self._cells = {}  # (row, col) -> value, as COM would hand it over
        self._extra_used = (0, 0)  # formatted but empty cells beyond the data (they widen UsedRange)
        self._cache = {}

    # ------------------------------------------------------------ building the sheet (not COM)
    def put(self, ref: str, rows) -> Range:
        """Write a block of values with its top-left cell at ``ref``; returns the block."""
        r0, c0, _, _ = parse_ref(ref)
        rows = [list(r) if isinstance(r, (list, tuple)) else [r] for r in rows]
        for i, row in enumerate(rows):
            for j, v in enumerate(row):
                if v is None:
                    self._cells.pop((r0 + i, c0 + j), None)
                else:
                    self._cells[(r0 + i, c0 + j)] = v
        self._cache.clear()
        return Range(self, r0, c0, len(rows), max(map(len, rows), default=1))

    def put_column(self, ref: str, values) -> Range:
        return self.put(ref, [[v] for v in values])

    def format_beyond(self, rows: int = 0, cols: int = 0) -> None:
        """Format empty cells below/right of the data (the used range grows; values do not)."""
        self._extra_used = (rows, cols)
        self._cache.clear()

    def ref(self, text: str) -> Range:
        r, c, nr, nc = parse_ref(text)
        return Range(self, r, c, nr, nc)

    def _values(self, r, c, nr, nc):
        if nr == 1 and nc == 1:
            return self._cells.get((r, c))
        key = (r, c, nr, nc)
        hit = self._cache.get(key)
        if hit is None:  # built once per block: the transfer itself is not what is timed
            get = self._cells.get
            hit = tuple(tuple(get((i, j)) for j in range(c, c + nc)) for i in range(r, r + nr))
            self._cache[key] = hit
        return hit

    # ------------------------------------------------------------ COM
    @property
    def Name(self):
        return self._name

    @property
    def Parent(self):
        return self._book

    @property
    def Application(self):
        return self._app

    @property
    def UsedRange(self):
        box = self._cache.get("used")
        if box is None:  # worked out once per change of the sheet: the program keeps it at hand too
            if not self._cells:
                box = (1, 1, 1, 1)
            else:
                rows = [k[0] for k in self._cells]
                cols = [k[1] for k in self._cells]
                r0, c0 = min(rows), min(cols)
                r1 = min(SHEET_ROWS, max(rows) + self._extra_used[0])
                c1 = min(SHEET_COLS, max(cols) + self._extra_used[1])
                box = (r0, c0, r1 - r0 + 1, c1 - c0 + 1)
            self._cache["used"] = box
        return Range(self, *box)

    def Range(self, cell1, cell2=None):
        if isinstance(cell1, str):
            return self.ref(cell1 if cell2 is None else f"{cell1}:{cell2}")
        a, b = cell1, cell2 or cell1
        return Range(self, a._r, a._c, b._r + b._nr - a._r, b._c + b._nc - a._c)

    def Cells(self, row, col):
        return Range(self, row, col, 1, 1)


class _Sheets(Com):
    def __init__(self, book):
        self._app, self._book = book._app, book

    def __iter__(self):
        return iter(self._book._sheets)

    @property
    def Count(self):
        return len(self._book._sheets)

    def __call__(self, key):
        if isinstance(key, int):
            return self._book._sheets[key - 1]
        for s in self._book._sheets:
            if s._name == key:
                return s
        raise com_error(-2147352565, "Invalid index.", None, None)


class _VBComponents(Com):
    def __init__(self, book):
        self._app, self._book = book._app, book
        self.modules = {}  # name -> VBA text

    def __call__(self, name):
        if name not in self.modules:
            raise com_error(-2147352565, "Subscript out of range", None, None)
        return name

    def Remove(self, name):
        self.modules.pop(name, None)

    def Import(self, path):
        with open(path, encoding="utf-8") as f:
            text = f.read()
        name = re.search(r'Attribute VB_Name = "([^"]+)"', text).group(1)
        self.modules[name] = text


class _VBProject(Com):
    def __init__(self, book):
        self._app = book._app
        self._components = _VBComponents(book)

    @property
    def VBComponents(self):
        return self._components


class Workbook(Com):
    def __init__(self, app, name):
        self._app, self._name = app, name
        self._sheets = []
        self._vbproject = _VBProject(self)

    def add_sheet(self, name: str) -> Worksheet:
        ws = Worksheet(self, name)
        self._sheets.append(ws)
        return ws

    @property
    def Name(self):
        return self._name

    @property
    def FullName(self):
        return "C:\\Users\\analyst\\" + self._name

    @property
    def Worksheets(self):
        return _Sheets(self)

    Sheets = Worksheets

    @property
    def Application(self):
        return self._app

    @property
    def VBProject(self):
        return self._vbproject


class _WorksheetFunction(Com):
    def __init__(self, app):
        self._app = app

    def Unique(self, *a):
        if not self._app.dynamic_arrays:
            raise AttributeError("Unique")
        return a[0]


class Application(Com):
    """The spreadsheet program: counts round trips and records MacroOptions (function descriptions)."""

    def __init__(self, version="16.0", dynamic_arrays=True):
        self._app = None  # the application does not count its own attributes below
        self.calls = 0
        self.version = version
        self.dynamic_arrays = dynamic_arrays
        self.macro_options = {}
        self._app = self

    @property
    def Version(self):
        return self.version

    @property
    def Hwnd(self):
        return 1

    @property
    def WorksheetFunction(self):
        return _WorksheetFunction(self)

    def MacroOptions(self, Macro=None, **kw):
        self.macro_options[Macro] = kw

    def Run(self, *a):
        raise AssertionError(f"Application.Run was not expected: {a}")

    def book(self, name="analysis.xlsm") -> Workbook:
        return Workbook(self, name)


def com_date(y, m, d, hh=0, mm=0, ss=0):
    """A date cell as pywin32 hands it over (pywintypes.TimeType, UTC time zone)."""
    return TimeType(y, m, d, hh, mm, ss, tzinfo=dt.timezone.utc)
