"""Opening data files: every sheet as a grid of raw cell values, with what the file says about its cells.

Readers, chosen for speed and completeness:

* .xlsx / .xlsm: python-calamine (Rust) for the values, after the archive checks below; the sheet's XML
  is then scanned once with byte-level regular expressions for what calamine does not report: hidden rows,
  the autofilter, error cells (calamine gives them as blanks), formulas and formulas saved without a value.
  The table parts (small) are parsed with defusedxml for their header and totals rows.
* .xls: xlrd, which gives error cells, dates and hidden rows; a sheet's filter range comes from its
  built-in ``_FilterDatabase`` name.
* .xlsb: python-calamine; hidden rows, filters and formulas are not read from this format (said in the notes).
* .ods: python-calamine for the values, the content part scanned for hidden rows (ODF marks rows hidden by
  a filter as ``filter`` and rows hidden by hand as ``collapse``).
* .csv / .tsv / .txt: decoded as UTF-8 (with or without BOM), UTF-16 (with BOM), cp1252 or latin-1;
  the delimiter (comma, semicolon, tab, bar) is sniffed and kept, since it settles decimal separators.
* .parquet: pyarrow (optional extra ``unbend[parquet]``, imported only here). The column names are the
  header row and each value arrives as a cell would: numbers stay numbers (NaN and nulls become blanks),
  text goes through the same reading rules as text cells, dates as dates; nested values as their text.

Workbooks are zip archives of XML (.xls is not). Before anything is parsed the archive is checked: it must
be a zip with a workbook part, and no part may unpack to an unreasonable size or ratio (a "zip bomb" or a
huge shared-strings part). Problems become :class:`ReadError` with one plain line.
"""
from __future__ import annotations

import csv
import datetime as _dt
import io
import os
import re
import zipfile
from dataclasses import dataclass, field

from unbend import UnbendError

__all__ = ["ReadError", "Grid", "Book", "open_book", "MAX_PART_BYTES", "MAX_TOTAL_BYTES", "MAX_RATIO",
           "MAX_CSV_BYTES", "col_letter", "col_index"]

#: Largest single part of a workbook archive, unpacked.
MAX_PART_BYTES = 400 * 2**20
#: Largest workbook archive, unpacked.
MAX_TOTAL_BYTES = 1024 * 2**20
#: Highest unpacked/packed ratio accepted for a part larger than 1 MB.
MAX_RATIO = 200
#: Largest CSV file read.
MAX_CSV_BYTES = 512 * 2**20

WORKBOOK_EXTS = (".xlsx", ".xlsm", ".xls", ".xlsb", ".ods")
TEXT_EXTS = (".csv", ".tsv", ".txt")
TABLE_EXTS = (".parquet",)


class ReadError(UnbendError):
    """The input file cannot be read; the message says why and what to do."""


def col_letter(j: int) -> str:
    """0 -> A, 25 -> Z, 26 -> AA."""
    s = ""
    j += 1
    while j:
        j, r = divmod(j - 1, 26)
        s = chr(65 + r) + s
    return s


def col_index(letters: str) -> int:
    """A -> 0, AA -> 26."""
    n = 0
    for ch in letters.upper():
        n = n * 26 + ord(ch) - 64
    return n - 1


@dataclass
class Table:
    """A named table (an Excel "list object") on a sheet, 0-based rows and columns, inclusive."""

    name: str
    top: int
    left: int
    bottom: int
    right: int
    header_rows: int = 1
    totals_rows: int = 0
    filtered: bool = False


@dataclass
class Grid:
    """One sheet: raw values by row (0-based), and what the file says about its cells.

    ``hidden`` maps a 0-based row to "filter" or "hand"; ``forced`` maps (row, col) to a reason code of
    :mod:`unbend.udfs.intake` (error value, formula without a saved value, summary formula);
    ``formulas`` keeps the formula text of those cells for messages.
    """

    name: str
    rows: list
    hidden: dict = field(default_factory=dict)
    forced: dict = field(default_factory=dict)
    formulas: dict = field(default_factory=dict)
    tables: list = field(default_factory=list)
    delimiter: str | None = None
    visible: bool = True
    notes: list = field(default_factory=list)


@dataclass
class Book:
    """A data file opened: its kind, its sheet names, and grids read on demand (cached)."""

    path: str
    kind: str  # "xlsx", "xls", "xlsb", "ods", "text" or "parquet"
    sheet_names: list
    visible: dict
    _loader: object = None
    _cache: dict = field(default_factory=dict)
    encoding: str = ""

    @property
    def base(self) -> str:
        return os.path.basename(self.path)

    @property
    def sheetless(self) -> bool:
        """A file with one table and no sheets (text, Parquet)."""
        return self.kind in ("text", "parquet")

    def grid(self, name: str) -> Grid:
        if name not in self._cache:
            self._cache[name] = self._loader(name)
        return self._cache[name]


# ----------------------------------------------------------------------------- opening
def open_book(path) -> Book:
    """Open a data file for reading.

    Raises
    ------
    ReadError
        Missing, unreadable, damaged or hostile file; a format unbend does not read.
    """
    path = os.fspath(path)
    if not os.path.exists(path):
        raise ReadError(f"no file at {path}; check the path.")
    if os.path.isdir(path):
        raise ReadError(f"{path} is a folder; give a workbook (.xlsx, .xls, .ods ...) or a .csv file.")
    ext = os.path.splitext(path)[1].lower()
    if ext in (".xlsx", ".xlsm"):
        return _open_xlsx(path)
    if ext == ".xls":
        return _open_xls(path)
    if ext in (".xlsb", ".ods"):
        return _open_calamine(path, ext[1:])
    if ext in TEXT_EXTS:
        return _open_text(path)
    if ext in TABLE_EXTS:
        return _open_parquet(path)
    raise ReadError(f"{os.path.basename(path)}: unbend reads .xlsx, .xlsm, .xls, .xlsb, .ods, .csv, .tsv, .txt "
                    "and .parquet files; save or export the data as one of those.")


def _check_archive(path: str, what: str = ".xlsx") -> zipfile.ZipFile:
    base = os.path.basename(path)
    try:
        zf = zipfile.ZipFile(path)
    except zipfile.BadZipFile:
        raise ReadError(f"{base} is not a workbook ({what} files are zip archives; this one is damaged or is "
                        f"another kind of file). Save it again as {what}, or export it as .csv.") from None
    names = set(zf.namelist())
    marker = "content.xml" if what == ".ods" else "workbook"
    if not any(marker in n for n in names):
        zf.close()
        raise ReadError(f"{base} is a zip archive but not a workbook; save it as {what}.")
    total = 0
    for info in zf.infolist():
        total += info.file_size
        if info.file_size > MAX_PART_BYTES:
            zf.close()
            raise ReadError(f"{base}: the part {info.filename} unpacks to {info.file_size / 2**20:.0f} MB, more than "
                            f"we read ({MAX_PART_BYTES // 2**20} MB).")
        if info.file_size > 2**20 and info.compress_size and info.file_size / info.compress_size > MAX_RATIO:
            zf.close()
            raise ReadError(f"{base}: the part {info.filename} is compressed "
                            f"{info.file_size / info.compress_size:.0f} to 1, which looks like a zip bomb; refusing "
                            "to open it.")
    if total > MAX_TOTAL_BYTES:
        zf.close()
        raise ReadError(f"{base} unpacks to {total / 2**20:.0f} MB, more than we read.")
    bad = zf.testzip()
    if bad is not None:
        zf.close()
        raise ReadError(f"{base} is damaged (part {bad} fails its check); save it again.")
    return zf


def _calamine(path, base):
    try:
        import python_calamine as pc
    except ImportError:  # pragma: no cover - a dependency
        raise ReadError("the python-calamine package is missing; reinstall unbend to read workbooks.") from None
    try:
        return pc.CalamineWorkbook.from_path(path)
    except Exception as e:
        raise ReadError(f"{base} could not be read as a workbook ({_short(e)}). Open it in your spreadsheet "
                        "program and save it again.") from None


def _short(e) -> str:
    text = str(e).splitlines()[0][:120] if str(e) else "no detail"
    return f"{type(e).__name__}: {text}"


def _sheet_rows(wb, name, base) -> list:
    try:
        return wb.get_sheet_by_name(name).to_python(skip_empty_area=False)
    except Exception as e:
        raise ReadError(f"{base} is damaged: the sheet {name!r} could not be read ({_short(e)}). Open it in your "
                        "spreadsheet program and save it again.") from None


def _visibility(wb) -> dict:
    out = {}
    for m in wb.sheets_metadata:
        out[m.name] = "Visible" in str(m.visible) and "Chart" not in str(getattr(m, "typ", ""))
    return out


# ----------------------------------------------------------------------------- xlsx
_NS_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"


def _open_xlsx(path: str) -> Book:
    base = os.path.basename(path)
    zf = _check_archive(path)
    zf.close()
    wb = _calamine(path, base)
    names = list(wb.sheet_names)
    parts = _xlsx_sheet_parts(path)

    def load(name):
        grid = Grid(name=name, rows=_sheet_rows(wb, name, base))
        part = parts.get(name)
        if part:
            try:
                _xlsx_meta(path, part, grid)
            except ReadError:
                raise
            except Exception as e:  # the values were read; say the extra information could not be
                grid.notes.append(f"hidden rows, tables and formulas of sheet {name!r} could not be read "
                                  f"({type(e).__name__}); all rows were used")
        return grid

    return Book(path=path, kind="xlsx", sheet_names=names, visible=_visibility(wb), _loader=load)


def _xml(data: bytes):
    from defusedxml import ElementTree as DET
    return DET.fromstring(data)


def _resolve(base_dir: str, target: str) -> str:
    if target.startswith("/"):
        return target.lstrip("/")
    parts = (base_dir + "/" + target).split("/")
    out = []
    for p in parts:
        if p == "..":
            if out:
                out.pop()
        elif p and p != ".":
            out.append(p)
    return "/".join(out)


def _xlsx_sheet_parts(path) -> dict:
    """{sheet name: part name of its XML} from the workbook part and its relationships."""
    with zipfile.ZipFile(path) as zf:
        names = set(zf.namelist())
        wb_part = "xl/workbook.xml" if "xl/workbook.xml" in names else next(
            (n for n in names if n.endswith("workbook.xml")), None)
        if wb_part is None:
            return {}
        folder = wb_part.rsplit("/", 1)[0]
        rels_part = f"{folder}/_rels/{wb_part.rsplit('/', 1)[1]}.rels"
        try:
            wb = _xml(zf.read(wb_part))
            rels = _xml(zf.read(rels_part)) if rels_part in names else None
        except Exception:
            return {}
    targets = {}
    if rels is not None:
        for r in rels:
            targets[r.get("Id")] = _resolve(folder, r.get("Target", ""))
    out = {}
    for el in wb.iter():
        if el.tag.endswith("}sheet"):
            rid = el.get(f"{{{_NS_REL}}}id")
            if rid in targets:
                out[el.get("name")] = targets[rid]
    return out


_ROW_HIDDEN = re.compile(rb'<row\b[^>]*?\bhidden="(?:1|true)"[^>]*>')
_R_ATTR = re.compile(rb'\br="([A-Z]*)(\d+)"')
_CELL_ERROR = re.compile(rb'<c\b([^>]*?\bt="e"[^>]*)>(.*?)</c>', re.S)
_CELL_FORMULA = re.compile(rb'<c\b([^>]*)>\s*<f\b([^>]*?)(?:/>|>([^<]*)</f>)\s*(<v\s*/>|<v>([^<]*)</v>)?', re.S)
_V = re.compile(rb"<v>([^<]*)</v>")
_AUTOFILTER = re.compile(rb'<autoFilter\b[^>]*?\bref="([^"]+)"[^>]*?(?:/>|>(.*?)</autoFilter>)', re.S)
_AGGREGATE = re.compile(r"^\s*(?:_xlfn\.)?(SUM|SUBTOTAL|AGGREGATE|AVERAGE|AVERAGEA|MEDIAN|MIN|MAX|COUNT|COUNTA|"
                        r"STDEV|STDEV\.S|STDEVA|VAR|VAR\.S)\s*\(", re.I)
_REF = re.compile(r"\$?([A-Z]{1,3})\$?(\d+)\s*:\s*\$?([A-Z]{1,3})\$?(\d+)")
_RANGE = re.compile(r"^\$?([A-Z]{1,3})\$?(\d+)(?::\$?([A-Z]{1,3})\$?(\d+))?$")


def _cell_at(attrs: bytes):
    m = _R_ATTR.search(attrs)
    if not m:
        return None
    return int(m.group(2)) - 1, col_index(m.group(1).decode())


def _area(ref: str):
    m = _RANGE.match(ref.strip())
    if not m:
        return None
    a, r1, b, r2 = m.groups()
    b, r2 = b or a, r2 or r1
    return int(r1) - 1, col_index(a), int(r2) - 1, col_index(b)


def _xlsx_meta(path: str, part: str, grid: Grid) -> None:
    """Hidden rows, filters, tables, error cells and formulas of one sheet, from its XML."""
    from ..intake import ERROR, NO_VALUE, SUMMARY

    with zipfile.ZipFile(path) as zf:
        names = set(zf.namelist())
        if part not in names:
            return
        xml = zf.read(part)
        rels_part = part.rsplit("/", 1)[0] + "/_rels/" + part.rsplit("/", 1)[1] + ".rels"
        table_parts = []
        if rels_part in names:
            for r in _xml(zf.read(rels_part)):
                if r.get("Type", "").endswith("/table"):
                    table_parts.append(_resolve(part.rsplit("/", 1)[0], r.get("Target", "")))
        for tp in table_parts:
            if tp in names:
                t = _xml(zf.read(tp))
                area = _area(t.get("ref", ""))
                if area:
                    filt = any(el.tag.endswith("}filterColumn") for el in t.iter())
                    grid.tables.append(Table(t.get("displayName") or t.get("name") or "table", area[0], area[1],
                                             area[2], area[3], int(t.get("headerRowCount", "1") or 1),
                                             int(t.get("totalsRowCount", "0") or 0), filt))
    filters = []
    for m in _AUTOFILTER.finditer(xml):
        area = _area(m.group(1).decode("ascii", "replace"))
        if area and m.group(2) and b"filterColumn" in m.group(2):
            filters.append(area)
    filters += [(t.top, t.left, t.bottom, t.right) for t in grid.tables if t.filtered]
    # each pattern runs only when its marker is in the part at all (a plain data sheet has none of them)
    for m in (_ROW_HIDDEN.finditer(xml) if (b'hidden="1"' in xml or b'hidden="true"' in xml) else ()):
        rm = re.search(rb'\br="(\d+)"', m.group(0))
        if not rm:
            continue
        r = int(rm.group(1)) - 1
        grid.hidden[r] = "filter" if any(f[0] < r <= f[2] for f in filters) else "hand"
    for m in (_CELL_ERROR.finditer(xml) if b't="e"' in xml else ()):
        at = _cell_at(m.group(1))
        v = _V.search(m.group(2))
        if at is not None:
            grid.forced[at] = ERROR
            grid.formulas[at] = v.group(1).decode("utf-8", "replace") if v else "#error"
    for m in (_CELL_FORMULA.finditer(xml) if (b"<f>" in xml or b"<f " in xml) else ()):
        at = _cell_at(m.group(1))
        if at is None:
            continue
        text = (m.group(3) or b"").decode("utf-8", "replace")
        has_value = m.group(4) is not None and not m.group(4).startswith(b"<v/") and not m.group(4).startswith(
            b"<v ") and (m.group(5) not in (None, b"") or b't="str"' in m.group(1))
        if not has_value and at not in grid.forced:
            grid.forced[at] = NO_VALUE
            grid.formulas[at] = "=" + text if text else "a formula"
        elif text and _aggregates_own_column(text, at):
            grid.forced[at] = SUMMARY
            grid.formulas[at] = "=" + text


def _aggregates_own_column(text: str, at) -> bool:
    """True for SUM(B2:B51) in column B (or SUBTOTAL/AGGREGATE of anything, which only summary rows use)."""
    m = _AGGREGATE.match(text)
    if not m:
        return False
    if m.group(1).upper() in ("SUBTOTAL", "AGGREGATE"):
        return True
    for a, _, b, _ in _REF.findall(text.upper()):
        if col_index(a) == at[1] == col_index(b):
            return True
    return False


# ----------------------------------------------------------------------------- xls, xlsb, ods
def _open_xls(path: str) -> Book:
    base = os.path.basename(path)
    try:
        import xlrd
    except ImportError:  # pragma: no cover - a dependency
        raise ReadError("the xlrd package is missing; reinstall unbend to read .xls files.") from None
    try:
        wb = xlrd.open_workbook(path, formatting_info=True, on_demand=True)
    except Exception as e:
        try:
            wb = xlrd.open_workbook(path, on_demand=True)
        except Exception:
            raise ReadError(f"{base} could not be read as an .xls workbook ({_short(e)}). Open it in your spreadsheet "
                            "program and save it again (as .xlsx, for instance).") from None
    names = wb.sheet_names()
    filter_areas = {}
    for nm in getattr(wb, "name_obj_list", []):
        if str(nm.name).lower() in ("_filterdatabase", "\x0d") or getattr(nm, "builtin", 0) and nm.name == "\r":
            try:
                sh, r1, r2, c1, c2 = nm.area2d(clipped=False)
                filter_areas[sh.name] = (r1, c1, r2 - 1, c2 - 1)
            except Exception:
                pass

    def load(name):
        from ..intake import ERROR
        sh = wb.sheet_by_name(name)
        rows = []
        grid = Grid(name=name, rows=rows)
        for r in range(sh.nrows):
            row = []
            for c, cell in enumerate(sh.row(r)):
                t = cell.ctype
                v = cell.value
                if t == xlrd.XL_CELL_DATE:
                    try:
                        d = xlrd.xldate_as_datetime(v, wb.datemode)
                        v = d.time() if v < 1 else (d.date() if v == int(v) else d)
                    except Exception:
                        pass
                elif t == xlrd.XL_CELL_ERROR:
                    text = xlrd.error_text_from_code.get(v, "#error")
                    grid.forced[(r, c)] = ERROR
                    grid.formulas[(r, c)] = text
                    v = text
                elif t == xlrd.XL_CELL_BOOLEAN:
                    v = bool(v)
                elif t in (xlrd.XL_CELL_EMPTY, xlrd.XL_CELL_BLANK):
                    v = ""
                row.append(v)
            rows.append(row)
        area = filter_areas.get(name)
        info = getattr(sh, "rowinfo_map", {}) or {}
        for r, ri in info.items():
            if getattr(ri, "hidden", 0):
                grid.hidden[r] = "filter" if area and area[0] < r <= area[2] else "hand"
        if not info and sh.nrows:
            grid.notes.append("hidden rows could not be read from this .xls file; all rows were used")
        return grid

    return Book(path=path, kind="xls", sheet_names=names, visible={n: True for n in names}, _loader=load)


_ODS_TABLE = re.compile(rb'<table:table\b[^>]*?\btable:name="([^"]*)"')
_ODS_ROW = re.compile(rb'<table:table-row\b([^>]*?)(/?)>')
_ODS_REPEAT = re.compile(rb'table:number-rows-repeated="(\d+)"')
_ODS_VIS = re.compile(rb'table:visibility="(\w+)"')


def _open_calamine(path: str, kind: str) -> Book:
    base = os.path.basename(path)
    if kind == "ods":
        _check_archive(path, ".ods").close()
    else:
        _check_archive(path, ".xlsb").close()
    wb = _calamine(path, base)
    names = list(wb.sheet_names)

    def load(name):
        grid = Grid(name=name, rows=_sheet_rows(wb, name, base))
        if kind == "ods":
            _ods_hidden(path, name, grid)
        else:
            grid.notes.append("hidden rows, filters and formulas are not read from .xlsb files, so every row was "
                              "used; save the workbook as .xlsx to have them honoured")
        return grid

    return Book(path=path, kind=kind, sheet_names=names, visible=_visibility(wb), _loader=load)


_ODS_CELL = re.compile(rb'<table:(?:covered-)?table-cell\b([^>]*?)(/?)>')
_ODS_COLS = re.compile(rb'table:number-columns-repeated="(\d+)"')
_ODS_ROW_END = re.compile(rb'</table:table-row>')
_ODS_FORMULA = re.compile(rb'table:formula="([^"]*)"')


def _ods_errors(xml, start, end, grid) -> None:
    """Error cells of one table (calamine reads them as blanks): walk its rows and cells, repeats included."""
    from ..intake import ERROR
    r = 0
    pos = start
    while True:
        m = _ODS_ROW.search(xml, pos, end)
        if not m:
            return
        rep = _ODS_REPEAT.search(m.group(1))
        n = int(rep.group(1)) if rep else 1
        if m.group(2):  # an empty self-closed row
            r, pos = r + n, m.end()
            continue
        stop = _ODS_ROW_END.search(xml, m.end(), end)
        row_end = stop.start() if stop else end
        if b'calcext:value-type="error"' in xml[m.end():row_end]:
            c = 0
            for cm in _ODS_CELL.finditer(xml, m.end(), row_end):
                reps = _ODS_COLS.search(cm.group(1))
                k = int(reps.group(1)) if reps else 1
                if b'calcext:value-type="error"' in cm.group(1):
                    f = _ODS_FORMULA.search(cm.group(1))
                    text = f.group(1).decode("utf-8", "replace").replace("of:", "", 1) if f else "#error"
                    for i in range(r, r + min(n, 1000)):
                        for j in range(c, c + min(k, 1000)):
                            grid.forced[(i, j)] = ERROR
                            grid.formulas[(i, j)] = text
                c += k
        r += n
        pos = row_end


def _ods_hidden(path, name, grid) -> None:
    """Rows hidden by a filter ("filter") or by hand ("collapse"), and error cells, from an .ods content part."""
    from xml.sax.saxutils import escape
    with zipfile.ZipFile(path) as zf:
        xml = zf.read("content.xml")
    want = escape(name, {'"': "&quot;"}).encode("utf-8")
    starts = [(m.start(), m.group(1)) for m in _ODS_TABLE.finditer(xml)]
    for k, (pos, nm) in enumerate(starts):
        if nm != want:
            continue
        end = starts[k + 1][0] if k + 1 < len(starts) else len(xml)
        r = 0
        for m in _ODS_ROW.finditer(xml, pos, end):
            attrs = m.group(1)
            rep = _ODS_REPEAT.search(attrs)
            n = int(rep.group(1)) if rep else 1
            vis = _ODS_VIS.search(attrs)
            if vis and vis.group(1) in (b"filter", b"collapse") and n < 100000:
                for i in range(r, r + n):
                    grid.hidden[i] = "filter" if vis.group(1) == b"filter" else "hand"
            r += n
        if b'calcext:value-type="error"' in xml[pos:end]:
            _ods_errors(xml, pos, end, grid)
        return


# ----------------------------------------------------------------------------- text files
def _open_text(path: str) -> Book:
    base = os.path.basename(path)
    size = os.path.getsize(path)
    if size > MAX_CSV_BYTES:
        raise ReadError(f"{base} is {size / 2**20:.0f} MB; split it, we read up to {MAX_CSV_BYTES // 2**20} MB.")
    with open(path, "rb") as fh:
        raw = fh.read()
    bom16 = raw.startswith((b"\xff\xfe", b"\xfe\xff"))
    if b"\x00" in raw[:4096] and not bom16:
        raise ReadError(f"{base} looks like a binary file, not CSV text.")
    text, encoding = None, ""
    for enc in ("utf-8-sig", "utf-16", "cp1252", "latin-1"):
        if enc == "utf-16" and not bom16:
            continue
        try:
            text = raw.decode(enc)
            encoding = enc
            break
        except UnicodeDecodeError:
            continue
    if text is None:  # pragma: no cover - latin-1 decodes anything
        raise ReadError(f"{base}: unknown text encoding; save it as UTF-8 CSV.")
    del raw
    sample = text[:65536]
    ext = os.path.splitext(path)[1].lower()
    try:
        delim = csv.Sniffer().sniff(sample, delimiters=",;\t|").delimiter
    except csv.Error:
        counts = {d: sample.count(d) for d in ("\t", ";", ",", "|")}
        delim = "\t" if ext == ".tsv" else max(counts, key=counts.get) if any(counts.values()) else ","
    try:
        rows = list(csv.reader(io.StringIO(text, newline=""), delimiter=delim))
    except csv.Error as e:
        raise ReadError(f"{base} could not be read as CSV ({e}).") from None
    del text
    if not any(any(c.strip() for c in r) for r in rows):
        raise ReadError(f"{base} is empty.")

    def load(name):
        return Grid(name=name, rows=rows, delimiter=delim)

    b = Book(path=path, kind="text", sheet_names=[os.path.splitext(base)[0]], visible={}, _loader=load,
             encoding=encoding)
    b.visible = {b.sheet_names[0]: True}
    return b


# ----------------------------------------------------------------------------- Parquet
#: The extra that brings pyarrow, named in the message when it is missing.
PARQUET_EXTRA = "pip install 'unbend[parquet]'"


def _open_parquet(path: str) -> Book:
    """A Parquet file as one grid: the column names, then one row per record, values as cells hold them."""
    base = os.path.basename(path)
    try:
        import pyarrow as pa
        import pyarrow.parquet as pq
    except ImportError:
        raise ReadError(f"{base} is a Parquet file; reading it needs pyarrow: {PARQUET_EXTRA}.") from None
    try:
        table = pq.read_table(path)
    except Exception as e:  # pyarrow raises several kinds for a damaged or foreign file
        raise ReadError(f"{base} could not be read as a Parquet file ({_short(e)}). Write it again, or export "
                        "the data as .csv.") from None
    if table.num_columns == 0:
        raise ReadError(f"{base} is empty.")
    columns = [_parquet_values(table.column(j), pa) for j in range(table.num_columns)]
    header = [str(nm) for nm in table.column_names]
    rows = [header] + [list(r) for r in zip(*columns)]

    def load(name):
        return Grid(name=name, rows=rows, notes=["row numbers count the column names as row 1, so the first "
                                                 "record is row 2"])

    name = os.path.splitext(base)[0]
    return Book(path=path, kind="parquet", sheet_names=[name], visible={name: True}, _loader=load)


def _parquet_values(col, pa) -> list:
    """One Parquet column as cell values: None for null and NaN, numbers as numbers, text as text."""
    t = col.type
    if pa.types.is_dictionary(t):
        col = col.cast(t.value_type)
        t = t.value_type
    if pa.types.is_floating(t):
        vals = col.to_pylist()
        return [None if (v is None or v != v) else v for v in vals]
    if pa.types.is_integer(t) or pa.types.is_boolean(t) or pa.types.is_string(t) or pa.types.is_large_string(t) \
            or pa.types.is_decimal(t) or pa.types.is_temporal(t) or pa.types.is_null(t):
        try:
            return col.to_pylist()
        except (ValueError, OverflowError):  # a date beyond what Python's datetime holds: its text
            return [None if v is None else str(v) for v in col.cast(pa.string()).to_pylist()]
    # nested, binary and other kinds: their text, which the reading rules then count as text
    return [None if v is None else str(v) for v in col.to_pylist()]


def is_blank(v) -> bool:
    return v is None or (isinstance(v, str) and not v.strip())


def as_text(v) -> str:
    """A header cell as text: numbers without a trailing .0, dates as ISO, spaces collapsed."""
    if v is None:
        return ""
    if isinstance(v, float) and v.is_integer():
        v = int(v)
    if isinstance(v, (_dt.datetime, _dt.date)):
        v = v.isoformat()
    return " ".join(str(v).replace("\u00a0", " ").split())
