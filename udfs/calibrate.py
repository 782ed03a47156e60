"""`unbend report --readings`: x read back from measured y, and the calibration's limits, in the report.

Where the readings come from (one rule, said in ``--help`` and the README):

* ``--readings VALUE`` names a **file** when VALUE is the path of an existing
  file; otherwise it names a **column** of the data file (header text or
  letter, as ``--y`` and ``--x``), read by the same reading rules as the
  standards (same ``--sheet``, ``--header-row``, ``--decimal``, ``--hidden``).
* In a readings file, the readings are the column whose header reads like the
  y column's header; if no column does, the first column (from the left) that
  holds at least one number. The file needs a header row (the first row that
  is not blank is taken as the header when the layout does not show one; a
  header row holding only numbers is refused, so no reading is ever taken for
  a header). Workbooks: the first visible sheet that has such a column.
* Each reading is one sample (m = 1). Cells that are not numbers are skipped
  and counted by reason, as for the standards, with their row numbers.

The back-calculated table is :meth:`unbend.LineFit.inverse` (Fieller's interval
on the re-expressed scale, taken back end by end); the limits are
:meth:`unbend.LineFit.detection_limits` (the rows UNBEND_LIMITS shows).
"""
from __future__ import annotations

import os
from dataclasses import dataclass

import numpy as np
import pandas as pd

__all__ = ["ReadingsResult", "read_readings", "back_calculate", "readings_lines", "add_readings_sheet"]


@dataclass
class ReadingsResult:
    """Readings read from a file and x read back from them."""

    how: str                      # "column 'signal' of data.xlsx, sheet Samples" (where the readings came from)
    reading: object               # unbend.udfs.files.DataReading of the readings column
    table: pd.DataFrame           # one row per reading used: row, reading, x, low, high, outside_range, note
    limits: object                # unbend.calibration.CalibrationLimits
    level: float
    standards_skipped: int | None = None  # rows of the standards' file skipped (the fit sees used rows only)


def _is_file(value: str) -> bool:
    return os.path.isfile(value)


def read_readings(value: str, data_path: str, y_name: str, *, sheet=None, header_row=None, decimal=None,
                  hidden="auto"):
    """(DataReading, description) of the readings named by ``--readings VALUE`` (see the module notes).

    Raises
    ------
    unbend.udfs.files.ReadError
        The column or file cannot be read, or holds no number; the message names ``--readings``.
    """
    from .files import ReadError, read_data
    from .files.grids import open_book
    from .files.layout import _headers, _is_value, find_header, norm
    from . import intake
    from .files.grids import col_letter

    if not _is_file(value):
        try:
            rd = read_data(data_path, value, (), sheet=sheet, header_row=header_row, decimal=decimal, hidden=hidden,
                           need=1)
        except ReadError as e:
            raise ReadError(f"--readings {value!r}: it is not an existing file, so it names a column of the data "
                            f"file; {str(e).replace('--y ', '--readings ')}") from None
        return rd, f"column {rd.y_name!r} of {rd.source}"

    path = os.path.abspath(value)
    book = open_book(path)
    names = book.sheet_names
    order = [n for n in names if book.visible.get(n, True)] or list(names)
    tried = []
    for name in order:
        rows = book.grid(name).rows
        h, _how = find_header(rows)
        if h is None:
            tried.append(f"{name!r} is empty")
            continue
        headers = _headers(rows[h])
        filled = [j for j, hd in enumerate(headers) if hd]
        if filled and all(_is_value(rows[h][j]) for j in filled if j < len(rows[h])):
            raise ReadError(f"--readings {value}: the first row of {'sheet ' + repr(name) if book.kind != 'text' else 'the file'} "
                            "holds numbers, not a header; add a header row (such as the name of the y column) "
                            "above the readings, so that no reading is taken for a header.")
        same = [j for j in filled if norm(headers[j]) == norm(y_name)]
        j = same[0] if same else None
        if j is None:
            for k in range(max(len(r) for r in rows[h:]) if rows[h:] else 0):
                cells = [(r[k] if k < len(r) else None) for r in rows[h + 1:]]
                col = intake.read_column(cells, "readings", decimal=decimal, header=False)
                if np.any(col.reasons == intake.USED):
                    j = k
                    break
        if j is None:
            tried.append(f"{name!r} has no column with a number")
            continue
        try:
            rd = read_data(path, col_letter(j), (), sheet=name if book.kind != "text" else None, header_row=h + 1,
                           decimal=decimal, hidden=hidden, need=1)
        except ReadError as e:
            raise ReadError(f"--readings {value}: {str(e).replace('--y ', '--readings ')}") from None
        why = ("headed like the y column" if same else "the first column with a number")
        return rd, f"column {rd.y_name!r} ({why}) of {rd.source}"
    raise ReadError(f"--readings {value}: no readings found ({'; '.join(tried)}). Give a file with a header row and "
                    "a column of measured y.")


def back_calculate(fit, rd, how: str, level: float, standards_skipped: int | None = None) -> ReadingsResult:
    """x read back from every reading used (one sample each), and the limits of the line."""
    vals = rd.y
    t = fit.inverse(vals, level=level, replicates=1)
    table = pd.DataFrame({"row": rd.row_numbers, "reading": vals, "x": t["x"].to_numpy(),
                          "low": t["low"].to_numpy(), "high": t["high"].to_numpy(),
                          "outside_range": t["outside_range"].to_numpy(), "note": t["note"].tolist()})
    return ReadingsResult(how=how, reading=rd, table=table, limits=fit.detection_limits(level=level),
                          level=level, standards_skipped=standards_skipped)


def _fmt(v) -> str:
    v = float(v)
    if np.isnan(v):
        return "-"
    if np.isinf(v):
        return "no end"
    return f"{v:.4g}"


def readings_lines(res: ReadingsResult, x_name: str, y_name: str) -> list:
    """Sentences for the printed summary and the sheet: where the readings came from, rows skipped, counts."""
    t = res.table
    rd = res.reading
    n = len(t)
    closed = int(np.sum(np.isfinite(t["low"].to_numpy(float)) & np.isfinite(t["high"].to_numpy(float))))
    out = [f"Readings: {res.how}. Readings used: {rd.rows.n_used}; rows skipped: {rd.rows.n_skipped}.",
           *rd.rows.lines("row"),
           f"{x_name} read back from {n} reading(s) of {y_name} with {res.level:.4g} intervals (Fieller's interval on "
           f"the re-expressed scale, taken back end by end): {closed} closed, {n - closed} with an end that does not "
           f"exist (said in the note); {int(t['outside_range'].sum())} outside the standards' {x_name} range "
           "(extrapolation)."]
    lim = res.limits
    if np.isfinite(lim.detection_x):
        out.append(f"Detection limit (Hubaux-Vos, one-sided {lim.level:.4g}): {_fmt(lim.detection_x)} {x_name}; "
                   f"critical level {_fmt(lim.critical_x)} {x_name}; quantification limit (Currie, 10 sigma) "
                   f"{_fmt(lim.quantification_x)} {x_name}.")
    else:
        out.append("Detection limit (Hubaux-Vos): not defined: " + lim.why.get("detection_x", "see the Readings sheet")
                   + ".")
    return out


def print_readings(res: ReadingsResult, x_name: str, y_name: str) -> None:
    """The lines of :func:`readings_lines` and the first rows of the table, on stdout."""
    import textwrap

    print("\nx read back from the readings")
    for line in readings_lines(res, x_name, y_name):
        print("\n".join(textwrap.wrap(line, 100, break_on_hyphens=False)))
    t = res.table.head(20).copy()
    t["outside_range"] = np.where(t["outside_range"], "yes", "no")
    show = t.rename(columns={"reading": y_name, "x": x_name})
    with pd.option_context("display.width", 200, "display.max_colwidth", 60):
        print(show.drop(columns=["note"]).to_string(index=False, float_format=lambda v: f"{v:.4g}"))
    if len(res.table) > 20:
        print(f"... {len(res.table) - 20} more rows on the Readings sheet.")


def add_readings_sheet(book, res: ReadingsResult, x_name: str, y_name: str) -> None:
    """The report's "Readings" sheet: sentences, the back-calculated table, then the limits."""
    from unbend.calibration import CALIBRATION_CAUTION
    from .report import S_CAUTION, S_NOTE, S_TITLE, _small_table, _wrapped
    from .wording import inverse_headers
    from .xlsx import SMART

    sh = book.sheet("Readings")
    sh.text(1, 1, f"{x_name} read back from measured {y_name}", S_TITLE)
    r = 3
    for line in readings_lines(res, x_name, y_name):
        _wrapped(sh, r, line, 8)
        r += 1
    _wrapped(sh, r, "Caution: " + CALIBRATION_CAUTION, 8, S_CAUTION)
    r += 1
    _wrapped(sh, r, "An end that does not exist is shown as 'no end'; the note says why in words. Rows are the rows "
                    "of the readings' file.", 8, S_NOTE)
    r += 2
    w = inverse_headers(res.level)
    header = ["row", w["y"], w["x"], w["low"], w["high"], w["outside_range"], w["note"]]
    t = res.table
    body = []
    for i in range(len(t)):
        row = [float(t["row"].iloc[i]), float(t["reading"].iloc[i])]
        for c in ("x", "low", "high"):
            v = float(t[c].iloc[i])
            row.append("no end" if np.isinf(v) else ("" if np.isnan(v) else v))
        row += ["yes" if t["outside_range"].iloc[i] else "no", t["note"].iloc[i]]
        body.append(row)
    r = _small_table(sh, r, 1, header, body, number_format=SMART, formats={"row": "0"})
    r += 1
    sh.text(r, 1, "Limits from the calibration line (the rows UNBEND_LIMITS shows)", S_TITLE)
    r += 1
    lim_rows = [[k, ("" if isinstance(v, float) and not np.isfinite(v) else v), d] for k, v, d in res.limits.rows()]
    if res.standards_skipped is not None:  # the file's count, as UNBEND_LIMITS shows the cells' count
        lim_rows = [[k, res.standards_skipped, "rows of the standards skipped; the Summary sheet lists them by reason"]
                    if k == "rows skipped" else [k, v, d] for k, v, d in lim_rows]
    _small_table(sh, r, 1, ["item", "value", "definition"], lim_rows, number_format=SMART)
    for j, wd in {1: 30, 2: 16, 3: 16, 4: 16, 5: 16, 6: 14, 7: 70}.items():
        sh.width(j, wd)
