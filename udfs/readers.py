"""Reading data files safely: .xlsx workbooks and .csv text.

Workbooks are zip archives of XML. Before anything is parsed the archive is
checked: it must be a zip with a workbook part, and no part may unpack to an
unreasonable size or ratio (a "zip bomb" or a huge shared-strings part).
openpyxl parses the XML with defusedxml when it is installed (it is one of
our dependencies), which refuses entity expansion ("billion laughs").
Problems become :class:`ReadError` with one plain line.
"""
from __future__ import annotations

import csv
import io
import os
import zipfile

import pandas as pd

from unbend import UnbendError

__all__ = ["ReadError", "read_table", "MAX_PART_BYTES", "MAX_TOTAL_BYTES", "MAX_RATIO"]

#: Largest single part of a workbook archive, unpacked.
MAX_PART_BYTES = 400 * 2**20
#: Largest workbook archive, unpacked.
MAX_TOTAL_BYTES = 1024 * 2**20
#: Highest unpacked/packed ratio accepted for a part larger than 1 MB.
MAX_RATIO = 200
#: Largest CSV file read.
MAX_CSV_BYTES = 512 * 2**20


class ReadError(UnbendError):
    """The input file cannot be read; the message says why and what to do."""


def _check_archive(path: str) -> None:
    try:
        zf = zipfile.ZipFile(path)
    except zipfile.BadZipFile:
        raise ReadError(f"{os.path.basename(path)} is not a workbook (.xlsx files are zip archives; this one is "
                        "damaged or is another kind of file). Save it again as .xlsx, or export it as .csv.") from None
    with zf:
        names = set(zf.namelist())
        if "xl/workbook.xml" not in names and not any(n.endswith("workbook.xml") for n in names):
            raise ReadError(f"{os.path.basename(path)} is a zip archive but not a workbook; save it as .xlsx.")
        total = 0
        for info in zf.infolist():
            total += info.file_size
            if info.file_size > MAX_PART_BYTES:
                raise ReadError(f"{os.path.basename(path)}: the part {info.filename} unpacks to "
                                f"{info.file_size / 2**20:.0f} MB, more than we read ({MAX_PART_BYTES // 2**20} MB).")
            if info.file_size > 2**20 and info.compress_size and info.file_size / info.compress_size > MAX_RATIO:
                raise ReadError(f"{os.path.basename(path)}: the part {info.filename} is compressed {info.file_size / info.compress_size:.0f}"
                                " to 1, which looks like a zip bomb; refusing to open it.")
        if total > MAX_TOTAL_BYTES:
            raise ReadError(f"{os.path.basename(path)} unpacks to {total / 2**20:.0f} MB, more than we read.")
        bad = zf.testzip()
        if bad is not None:
            raise ReadError(f"{os.path.basename(path)} is damaged (part {bad} fails its check); save it again.")


def _read_xlsx(path: str, sheet: str | None) -> pd.DataFrame:
    import openpyxl
    from openpyxl.xml import DEFUSEDXML

    if not DEFUSEDXML:  # pragma: no cover - defusedxml is a dependency
        raise ReadError("the defusedxml package is missing; reinstall unbend so workbooks are read safely.")
    _check_archive(path)
    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except Exception as e:  # openpyxl raises many kinds on damaged files
        raise ReadError(f"{os.path.basename(path)} could not be read as a workbook ({type(e).__name__}: "
                        f"{str(e).splitlines()[0][:120] if str(e) else 'no detail'}).") from None
    try:
        if sheet is None:
            ws = wb.worksheets[0]
        elif sheet in wb.sheetnames:
            ws = wb[sheet]
        else:
            raise ReadError(f"no sheet named {sheet!r} in {os.path.basename(path)}; it has: {', '.join(wb.sheetnames)}.")
        try:
            rows = ws.iter_rows(values_only=True)
            header = None
            for r in rows:
                if r is not None and any(v is not None and str(v).strip() != "" for v in r):
                    header = r
                    break
            if header is None:
                raise ReadError(f"the sheet {ws.title!r} is empty.")
            names = [str(h).strip() if h is not None else f"column {i + 1}" for i, h in enumerate(header)]
            data = [list(r[:len(names)]) + [None] * (len(names) - len(r)) for r in rows]
        except ReadError:
            raise
        except Exception as e:  # a damaged sheet inside a sound archive shows up only while reading rows
            raise ReadError(f"{os.path.basename(path)} is damaged: the sheet {ws.title!r} could not be read "
                            f"({type(e).__name__}). Open it in your spreadsheet program and save it again.") from None
    finally:
        wb.close()
    return pd.DataFrame(data, columns=_unique(names))


def _unique(names):
    seen = {}
    out = []
    for n in names:
        k = seen.get(n, 0)
        out.append(n if k == 0 else f"{n} ({k + 1})")
        seen[n] = k + 1
    return out


def _read_csv(path: str) -> pd.DataFrame:
    size = os.path.getsize(path)
    if size > MAX_CSV_BYTES:
        raise ReadError(f"{os.path.basename(path)} is {size / 2**20:.0f} MB; split it, we read up to "
                        f"{MAX_CSV_BYTES // 2**20} MB.")
    raw = open(path, "rb").read()
    if b"\x00" in raw[:4096] and not raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise ReadError(f"{os.path.basename(path)} looks like a binary file, not CSV text.")
    text = None
    for enc in ("utf-8-sig", "utf-16", "cp1252", "latin-1"):
        try:
            text = raw.decode(enc)
            if enc == "utf-16" and not raw.startswith((b"\xff\xfe", b"\xfe\xff")):
                continue
            break
        except UnicodeDecodeError:
            continue
    if text is None:  # pragma: no cover - latin-1 decodes anything
        raise ReadError(f"{os.path.basename(path)}: unknown text encoding; save it as UTF-8 CSV.")
    sample = text[:65536]
    try:
        dialect = csv.Sniffer().sniff(sample, delimiters=",;\t|")
        delim = dialect.delimiter
    except csv.Error:
        delim = ","
    try:
        rows = list(csv.reader(io.StringIO(text, newline=""), delimiter=delim))
    except csv.Error as e:
        raise ReadError(f"{os.path.basename(path)} could not be read as CSV ({e}).") from None
    rows = [r for r in rows if any(c.strip() for c in r)]
    if not rows:
        raise ReadError(f"{os.path.basename(path)} is empty.")
    names = _unique([c.strip() or f"column {i + 1}" for i, c in enumerate(rows[0])])
    width = len(names)
    body = [(r + [""] * width)[:width] for r in rows[1:]]
    df = pd.DataFrame(body, columns=names)
    # decimal comma: with ';' or tab as delimiter, "1,5" means 1.5 (common practice in many locales)
    for c in df.columns:
        s = df[c].str.strip()
        num = pd.to_numeric(s, errors="coerce")
        if delim != "," and num.isna().sum() > s.eq("").sum():
            alt = pd.to_numeric(s.str.replace(",", ".", regex=False), errors="coerce")
            if alt.notna().sum() > num.notna().sum():
                num = alt
        df[c] = [v if pd.notna(v) else (t if t else None) for v, t in zip(num, s)]
    return df


def read_table(path, sheet: str | None = None) -> pd.DataFrame:
    """Read a .xlsx or .csv file into a DataFrame, one column per header cell.

    Raises
    ------
    ReadError
        Missing, unreadable, damaged or hostile file; unknown sheet.
    """
    path = os.fspath(path)
    if not os.path.exists(path):
        raise ReadError(f"no file at {path}; check the path.")
    if os.path.isdir(path):
        raise ReadError(f"{path} is a folder; give a .xlsx or .csv file.")
    ext = os.path.splitext(path)[1].lower()
    if ext in (".xlsx", ".xlsm"):
        return _read_xlsx(path, sheet)
    if ext in (".csv", ".txt", ".tsv"):
        if sheet:
            raise ReadError("--sheet applies to workbooks only; this is a CSV file.")
        return _read_csv(path)
    raise ReadError(f"{os.path.basename(path)}: unbend reads .xlsx and .csv files; save or export the data as one of those.")


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
