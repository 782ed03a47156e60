"""Where the data sit in a file: the sheet, the header row, a units row, the columns asked for.

:func:`read_data` is the command's reading step: it opens the file (:mod:`.grids`), chooses the sheet
that holds the named columns (or the one given), finds the header row under any titles, notes or blank
rows (or takes the one given), skips a units row under it (its units go into the labels), takes the y,
x and group columns by header text or by letter, and reads their cells by the rules of
:mod:`unbend.udfs.intake`, with the row-level reasons the file gives: a table's totals row and rows whose
label says total, mean ... ("summary row"), rows hidden by a filter (skipped) or by hand (used), unless
``hidden`` says otherwise.

Header text matches ignore case, extra spaces, non-breaking spaces and line breaks; a column can also be
named by its letter (``E``), as long as no header reads like that letter.
"""
from __future__ import annotations

import dataclasses
import os
import re
from dataclasses import dataclass

import numpy as np

from .. import intake
from .grids import ReadError, as_text, col_index, col_letter, is_blank, open_book

__all__ = ["DataReading", "read_data", "find_header", "norm"]

#: Rows looked at for a header row (titles, notes and blank rows above it).
HEADER_SEARCH_ROWS = 60
SETTLE_DECIMAL = "add --decimal , (the values use a decimal comma) or --decimal . (a decimal point)"


def norm(text) -> str:
    """Header text as compared: case, extra spaces, non-breaking spaces and line breaks ignored."""
    return " ".join(as_text(text).split()).casefold()


@dataclass(frozen=True)
class DataReading:
    """The data the command analyses, and how they were read.

    Attributes
    ----------
    source : str
        "FILE, sheet NAME" (or the file name for a text file).
    sheet : str or None
    header_row : int
        Sheet row of the header (1-based).
    units_row : int or None
    y_name, x_names, groups_name : str, tuple of str, str or None
        Header texts of the columns used (made unique by their letter when two read alike).
    letters : tuple of str
        Column letters of y, then each x (then groups).
    rows : unbend.udfs.intake.RowsReading
        y and x values where used; reasons for the rest; ``row_numbers`` are sheet rows.
    groups : tuple or None
        Group labels, one per row of ``rows`` (None where blank).
    notes : tuple of str
        Sentences about the layout: the sheet chosen, where the header was found, a units row, hidden rows.
    hidden_used : int
        Hidden rows that were used (hidden by hand, or any with ``hidden="use"``).
    text_file : bool
        True for a .csv, .tsv or .txt file, where every value is text: "read from text" is then said only of
        values that were not plainly the number they hold (separators, units, signs, percent).
    """

    source: str
    path: str
    sheet: str | None
    header_row: int
    units_row: int | None
    y_name: str
    x_names: tuple
    groups_name: str | None
    letters: tuple
    rows: intake.RowsReading
    groups: tuple | None
    notes: tuple
    hidden_used: int = 0
    text_file: bool = False

    @property
    def y_label(self) -> str:
        """y's name with its unit or date origin, for axis labels."""
        return self.rows.columns[0].label

    @property
    def x_labels(self) -> tuple:
        return tuple(c.label for c in self.rows.columns[1:])

    @property
    def y(self) -> np.ndarray:
        """y of the rows used."""
        return self.rows.y[self.rows.used]

    @property
    def X(self) -> np.ndarray:
        """x of the rows used, one column per x."""
        return self.rows.X[self.rows.used]

    @property
    def row_numbers(self) -> np.ndarray:
        """Sheet row of each row used."""
        return self.rows.row_numbers[self.rows.used]

    def lines(self) -> list:
        """Every sentence about the reading: layout notes, then rows skipped by reason, text read, units, dates."""
        return list(self.notes) + self.rows.lines("row", text_file=self.text_file)

    def frame(self):
        """The rows used as a DataFrame (y, each x, groups), indexed by sheet row."""
        import pandas as pd
        data = {self.y_name: self.y}
        for j, nm in enumerate(self.x_names):
            data[nm] = self.X[:, j]
        if self.groups is not None:
            data[self.groups_name] = [g for g, u in zip(self.groups, self.rows.used) if u]
        return pd.DataFrame(data, index=pd.Index(self.row_numbers, name="row"))


# ----------------------------------------------------------------------------- header
def _is_value(v) -> bool:
    """A cell that holds data rather than a header word: a number, a date, a number written as text."""
    if v is None or isinstance(v, bool):
        return isinstance(v, bool)
    if isinstance(v, str):
        s = v.strip()
        if not s:
            return False
        p = intake._parse_text(s)
        return p.kind in (intake.USED, intake.LIMIT, intake.ABOVE, intake._DATE, intake._TIME, intake.ERROR)
    return True


def _filled(row) -> list:
    return [j for j, v in enumerate(row) if not is_blank(v)]


def _units_row(row, cols) -> dict:
    """{column: unit} when the row is a units row (every filled cell a unit, at least one), else {}."""
    filled = _filled(row)
    if not filled:
        return {}
    units = {}
    for j in filled:
        u = intake.looks_like_unit(row[j]) if isinstance(row[j], str) else ""
        if not u:
            return {}
        units[j] = u
    return units if any(j in units for j in cols) or not cols else {}


def _numbers_in(row, cols) -> int:
    return sum(1 for j in cols if j < len(row) and _is_value(row[j]))


def find_header(rows: list, wanted=(), limit: int = HEADER_SEARCH_ROWS):
    """(row index, how) of the header row: the first row holding every wanted header text ("names"), else the
    first row of two or more words with values under it, a units row allowed between ("layout"), else the
    first row that is not blank ("first"); (None, "") for an empty sheet."""
    lim = min(len(rows), limit)
    wanted = [w for w in wanted if w]
    if wanted:
        for r in range(lim):
            texts = {norm(v) for v in rows[r] if not is_blank(v)}
            if all(w in texts for w in wanted):
                return r, "names"
    nonblank = [r for r in range(min(len(rows), limit + 20)) if _filled(rows[r])]
    if not nonblank:
        return None, ""
    width = max(len(_filled(rows[r])) for r in nonblank)
    for k, r in enumerate(nonblank):
        if r >= lim:
            break
        filled = _filled(rows[r])
        if len(filled) < min(2, width) or any(_is_value(rows[r][j]) for j in filled):
            continue
        below = nonblank[k + 1:k + 3]
        if not below:
            continue
        nxt = rows[below[0]]
        if _numbers_in(nxt, filled) * 2 >= len(filled) or (
                _units_row(nxt, filled) and len(below) > 1 and _numbers_in(rows[below[1]], filled) * 2 >= len(filled)):
            return r, "layout"
    return nonblank[0], "first"


# ----------------------------------------------------------------------------- columns
def _headers(row) -> list:
    return [as_text(v) for v in row]


def _listing(headers) -> str:
    shown = [f"{col_letter(j)} {h}" for j, h in enumerate(headers) if h]
    return ", ".join(shown[:40]) + (", ..." if len(shown) > 40 else "") if shown else "(none)"


def _match(spec: str, headers: list, option: str) -> int:
    """The column index a --y/--x/--groups value names: header text first, then a column letter."""
    want = norm(spec)
    hits = [j for j, h in enumerate(headers) if h and norm(h) == want]
    if len(hits) > 1:
        exact = [j for j in hits if headers[j] == spec]
        if len(exact) == 1:
            return exact[0]
        letters = " or ".join(col_letter(j) for j in hits)
        raise ReadError(f"{len(hits)} columns are headed {spec!r} ({letters}); name the one you mean by its letter, "
                        f"such as {option} {col_letter(hits[0])}.")
    if hits:
        return hits[0]
    if re.fullmatch(r"[A-Za-z]{1,3}", spec.strip()):
        j = col_index(spec.strip())
        if j < max(len(headers), 1) and j < 16384:
            return j
    raise ReadError(f"no column named {spec!r} for {option}; the columns are: {_listing(headers)}. Give the header "
                    f"text or the column letter (such as {option} {col_letter(next((j for j, h in enumerate(headers) if h), 0))}).")


# ----------------------------------------------------------------------------- sheets
def _wanted(specs) -> list:
    return [norm(s) for s in specs if s and not re.fullmatch(r"[A-Za-z]{1,3}", s.strip())]


def _sheet_summary(book, name) -> str:
    try:
        g = book.grid(name)
    except ReadError:
        return f"{name!r} (could not be read)"
    r, _ = find_header(g.rows)
    if r is None:
        return f"{name!r} (empty)"
    heads = [h for h in _headers(g.rows[r]) if h]
    return f"{name!r} ({', '.join(heads[:12])}{', ...' if len(heads) > 12 else ''})"


def _choose_sheet(book, sheet, specs):
    """(sheet name, note) for the sheet to read."""
    names = book.sheet_names
    if book.sheetless:
        if sheet:
            kind = "a Parquet file" if book.kind == "parquet" else "a text file"
            raise ReadError(f"--sheet applies to workbooks only; this is {kind}.")
        return names[0], ""
    if sheet is not None:
        if sheet in names:
            return sheet, ""
        folded = [n for n in names if norm(n) == norm(sheet)]
        if len(folded) == 1:
            return folded[0], ""
        raise ReadError(f"no sheet named {sheet!r} in {book.base}; it has: {', '.join(names)}.")
    if not names:
        raise ReadError(f"{book.base} has no sheets.")
    wanted = _wanted(specs)
    order = [n for n in names if book.visible.get(n, True)] + [n for n in names if not book.visible.get(n, True)]
    if not wanted:  # columns by letter only: the first sheet with data in every column named
        widest = max(col_index(s.strip()) for s in specs if s)
        for n in order:
            rows = book.grid(n).rows
            h = find_header(rows)[0]
            if h is not None and len(rows[h]) > widest and len(_filled(rows[h])) > 1:
                return n, (f"Sheet {n!r} was used (the first with data in those columns; the workbook also has "
                           f"{', '.join(repr(m) for m in names if m != n)}; add --sheet NAME to choose)."
                           if len(names) > 1 else "")
        raise ReadError(f"every sheet of {book.base} is empty.")
    found = []
    for n in order:
        r, how = find_header(book.grid(n).rows, wanted)
        if how == "names":
            found.append(n)
    if not found:
        listing = "; ".join(_sheet_summary(book, n) for n in names)
        raise ReadError(f"no sheet of {book.base} holds the columns {', '.join(repr(s) for s in specs if s)}. "
                        f"Sheets and their columns: {listing}. Add --sheet NAME and name columns that are there "
                        "(or their letters).")
    n = found[0]
    if len(names) == 1:
        return n, ""
    others = [m for m in names if m != n]
    also = f" ({', '.join(repr(m) for m in found[1:])} also {'holds' if len(found) == 2 else 'hold'} them)" \
        if len(found) > 1 else ""
    return n, (f"Sheet {n!r} was used: it holds the named columns{also}; the workbook also has "
               f"{', '.join(repr(m) for m in others)}. Add --sheet NAME to choose another.")


# ----------------------------------------------------------------------------- reading
def read_data(path, y: str, x=(), *, sheet: str | None = None, header_row: int | None = None,
              decimal: str | None = None, hidden: str = "auto", groups: str | None = None,
              need: int = 3, censor: bool = False, limit_column: str | None = None,
              qualifier_column: str | None = None) -> DataReading:
    """Read the y, x (and group) columns of a data file by the shared reading rules.

    Parameters
    ----------
    path : str or path-like
        .xlsx, .xlsm, .xls, .xlsb, .ods, .csv, .tsv or .txt.
    y : str
        The y column: header text or column letter.
    x : sequence of str
        The x columns.
    sheet : str, optional
        The sheet; by default the first sheet that holds the named columns (said in the notes).
    header_row : int, optional
        The header's row number (1-based); by default found under titles, notes and blank rows.
    decimal : {",", ".", None}
        The decimal separator of numbers written as text, when a column's own values do not settle it.
    hidden : {"auto", "use", "skip"}
        "auto": rows hidden by a filter are skipped and rows hidden by hand are used; "use": all used;
        "skip": all skipped.
    groups : str, optional
        A column of group labels.
    need : int
        Fewest rows that must be usable.
    censor : bool
        Read y for a censored fit: y values below a limit whose limit is known are used at the limit and
        marked in ``rows.y_censored`` (:func:`unbend.udfs.intake.censor_column`); x values below a limit stay
        skipped (censoring applies to y only).
    limit_column : str, optional
        A column holding each row's detection limit, for y cells written as ND ("not detected") (needs censor).
    qualifier_column : str, optional
        A column of "<" marks beside a plain y column (needs censor).

    Returns
    -------
    DataReading

    Raises
    ------
    ReadError
        A file, sheet or column that cannot be used, the same column named twice, too few usable rows;
        each message names the column, what was found and what to type next.
    unbend.udfs.intake.ReadingRefused
        A column whose decimal separator stays open (the message names ``--decimal``).
    """
    if hidden not in ("auto", "use", "skip"):
        raise ReadError(f"--hidden must be use or skip; got {hidden!r}.")
    xs = list(x) if not isinstance(x, str) else [x]
    specs = [y] + xs + ([groups] if groups else [])
    extra = [(s_, opt) for s_, opt in ((limit_column, "--limit-column"), (qualifier_column, "--qualifier-column"))
             if s_]
    if extra and not censor:
        raise ReadError(f"{extra[0][1]} is for a censored fit of y; it cannot be used here.")
    book = open_book(path)
    name, sheet_note = _choose_sheet(book, sheet, specs + [s_ for s_, _ in extra])
    grid = book.grid(name)
    rows_ = grid.rows
    notes = [sheet_note] if sheet_note else []
    notes += [n[0].upper() + n[1:] + "." for n in grid.notes]
    where = f"sheet {name!r}" if not book.sheetless else book.base
    if header_row is not None:
        if header_row < 1 or header_row > len(rows_):
            raise ReadError(f"--header-row {header_row} is outside {where}, which has {len(rows_)} rows.")
        h, how = header_row - 1, "given"
    else:
        h, how = find_header(rows_, _wanted(specs))
        if h is None:
            raise ReadError(f"{where} of {book.base} is empty." if not book.sheetless else f"{book.base} is empty.")
    headers = _headers(rows_[h])
    try:
        cols = [_match(s, headers, opt) for s, opt in zip(specs, ["--y"] + ["--x"] * len(xs) + ["--groups"])]
    except ReadError as e:
        if how in ("names", "given"):
            raise
        raise ReadError(f"{e} The header was taken from row {h + 1}; if it is on another row, add "
                        f"--header-row N.") from None
    _refuse_same(cols, specs, headers, len(xs))
    extra_cols = {}
    for s_, opt in extra:
        try:
            j = _match(s_, headers, opt)
        except ReadError as e:
            raise ReadError(f"{e} The header was taken from row {h + 1}.") from None
        if j in cols[:1 + len(xs)]:
            raise ReadError(f"{opt} {s_} names a column already used as y or x ({col_letter(j)}); name the column "
                            "that holds the limits or the '<' marks.")
        extra_cols[opt] = j
    if how == "layout" and h > 0:
        notes.append(f"The header is on row {h + 1}; the {h} row(s) above it (titles, notes or blanks) were not read "
                     "as data (add --header-row N to choose another row).")
    elif how == "names" and h > 0:
        notes.append(f"The header is on row {h + 1} (the first row with the named columns); the rows above it were "
                     "not read as data.")
    start = h + 1
    units = _units_row(rows_[start], cols) if start < len(rows_) else {}
    units_row = None
    if units and start + 1 < len(rows_):
        units_row = start + 1
        notes.append(f"Row {start + 1} holds units ({', '.join(f'{headers[j]}: {units[j]}' for j in cols if j in units)})"
                     "; it was not read as data.")
        start += 1
    end = _data_end(rows_, start, cols, grid)
    table = next((t for t in grid.tables if t.top <= h < t.top + max(t.header_rows, 1)
                  and all(t.left <= j <= t.right for j in cols)), None)
    if table is not None:
        end = max(end, table.bottom + 1)
    n = max(end - start, 0)
    row_numbers = np.arange(start + 1, start + n + 1)
    rr, shown, hidden_used, hidden_notes = _row_reasons(grid, start, end, cols, hidden, table)
    notes += hidden_notes
    y_names = _unique_names([headers[j] or col_letter(j) for j in cols], cols)
    readings = _read_columns(grid, cols[:1 + len(xs)], y_names, start, end, decimal, units)
    if censor:
        readings[0] = _censor_y(grid, readings[0], extra_cols, headers, start, end, decimal, units)
    rows = intake.combine(readings[0], readings[1:], row_reasons=rr, row_numbers=row_numbers, row_shown=shown)
    glabels = None
    if groups:
        j = cols[-1]
        glabels = tuple(_label(r[j] if j < len(r) else None) for r in rows_[start:end])
    reading = DataReading(source=f"{book.base}, sheet {name}" if not book.sheetless else book.base,
                          path=os.fspath(path), sheet=name if not book.sheetless else None, header_row=h + 1,
                          units_row=units_row, y_name=y_names[0], x_names=tuple(y_names[1:1 + len(xs)]),
                          groups_name=y_names[-1] if groups else None, letters=tuple(col_letter(j) for j in cols),
                          rows=rows, groups=glabels, notes=tuple(notes), hidden_used=hidden_used,
                          text_file=book.kind == "text")
    if rows.n_used < need:
        raise ReadError(_too_few(reading, need))
    return reading


def _censor_y(grid, y, extra_cols, headers, start, end, decimal, units):
    """y read for a censored fit, with limits from --limit-column and marks from --qualifier-column."""
    limits = qualifiers = None
    n = len(y)
    if "--limit-column" in extra_cols:
        j = extra_cols["--limit-column"]
        nm = headers[j] or col_letter(j)
        lim = _read_columns(grid, [j], [nm], start, end, decimal, units)[0]
        limits = _pad(lim, n).values[:n]
    qname = "qualifier"
    if "--qualifier-column" in extra_cols:
        j = extra_cols["--qualifier-column"]
        qname = headers[j] or col_letter(j)
        qualifiers = [(r[j] if j < len(r) else None) for r in grid.rows[start:end]]
    return intake.censor_column(y, limits=limits, qualifiers=qualifiers, qualifier_name=qname)


def _read_columns(grid, cols, names, start, end, decimal, units) -> list:
    """Each chosen column read by the shared rules; a column whose own texts leave the decimal separator open
    takes the one the file's other columns settled (when they agree), else it is refused."""
    n = max(end - start, 0)
    rows_ = grid.rows
    cells_of, readings, open_ = {}, {}, {}
    for j, nm in zip(cols, names):
        cells_of[j] = [(r[j] if j < len(r) and r[j] != "" else None) for r in rows_[start:end]]
        try:
            readings[j] = _read_one(grid, cells_of[j], j, nm, start, decimal, units)
        except intake.DecimalLeftOpen as e:
            open_[j] = e
    if open_:
        settled = {r.decimal for r in readings.values() if r.decimal_how == "values"}
        for j, e in open_.items():
            if len(settled) != 1:
                raise e
            nm = names[cols.index(j)]
            readings[j] = _read_one(grid, cells_of[j], j, nm, start, "file" + settled.pop(), units)
            settled = {readings[j].decimal}
    return [_pad(readings[j], n) for j in cols]


def _read_one(grid, cells, j, nm, start, decimal, units):
    forced = {r - start: code for (r, c), code in grid.forced.items() if c == j and start <= r < start + len(cells)}
    rd = intake.read_flat(cells, nm, decimal=decimal, delimiter=grid.delimiter, forced=forced or None,
                          settle=SETTLE_DECIMAL, header=False)
    if j in units and not rd.unit and not rd.date_unit:
        rd = dataclasses.replace(rd, unit=units[j])
    return _with_formula_examples(rd, grid, start, j)


def _refuse_same(cols, specs, headers, nx) -> None:
    """The same column named twice (--y v --x V) is refused."""
    roles = ["--y"] + ["--x"] * nx + ["--groups"]
    seen = {}
    for j, s, role in zip(cols, specs, roles):
        if j in seen:
            first_spec, first_role = seen[j]
            what = "two different columns" if first_role != role else "each column once"
            raise ReadError(f"{first_role} {first_spec} and {role} {s} name the same column ({col_letter(j)}, "
                            f"{headers[j]!r}); choose {what}.")
        seen[j] = (s, role)


def _unique_names(names, cols) -> list:
    out = []
    for nm, j in zip(names, cols):
        if sum(1 for m in names if norm(m) == norm(nm)) > 1:
            nm = f"{nm} ({col_letter(j)})"
        out.append(nm)
    return out


def _label(v):
    if v is None:
        return None
    if isinstance(v, str):
        s = " ".join(v.split())
        return s or None
    if isinstance(v, float) and v != v:
        return None
    return v


def _data_end(rows, start, cols, grid) -> int:
    """One past the last row with a value in the chosen columns: blank rows and notes (plain text) further
    down are not data, while a summary label is (so it is counted as a summary row)."""
    end = len(rows)
    while end > start:
        r = rows[end - 1]
        if any(j < len(r) and (_is_value(r[j]) or intake.is_summary_label(r[j])) for j in cols) or any(
                (end - 1, j) in grid.forced for j in cols):
            break
        end -= 1
    return end


def _row_reasons(grid, start, end, cols, hidden, table):
    """Row-level reasons (summary labels in other columns, a table's totals rows, hidden rows)."""
    import pandas as pd

    n = max(end - start, 0)
    rr = np.zeros(n, dtype=np.uint8)
    shown = {}
    notes = []
    if table is not None and table.totals_rows:
        for r in range(table.bottom - table.totals_rows + 1, table.bottom + 1):
            if start <= r < end:
                rr[r - start] = intake.SUMMARY
                shown[r - start] = f"totals row of table {table.name}"
    width = max((len(r) for r in grid.rows[start:end]), default=0) if n else 0
    for j in range(width):
        if j in cols:
            continue
        col = np.fromiter(((r[j] if j < len(r) else None) for r in grid.rows[start:end]), dtype=object, count=n)
        codes, uniq = pd.factorize(col)
        hit_u = np.fromiter((intake.is_summary_label(u) for u in uniq), dtype=bool, count=len(uniq))
        if hit_u.any():
            idx = np.flatnonzero((codes >= 0) & hit_u[np.maximum(codes, 0)])
            for i in idx.tolist():
                if rr[i] == 0:
                    rr[i] = intake.SUMMARY
                    shown[i] = f"{col_letter(j)} {intake._shown(col[i])}"
    hidden_used = 0
    n_filter = n_hand = 0
    for r, why in grid.hidden.items():
        if not start <= r < end or rr[r - start]:
            continue
        if why == "filter":
            n_filter += 1
            if hidden in ("auto", "skip"):
                rr[r - start] = intake.FILTERED
            else:
                hidden_used += 1
        else:
            n_hand += 1
            if hidden == "skip":
                rr[r - start] = intake.HIDDEN
            else:
                hidden_used += 1
    if n_filter and hidden == "use":
        notes.append(f"{n_filter} row(s) hidden by a filter were used, as --hidden use asks.")
    if n_hand and hidden != "skip":
        notes.append(f"{n_hand} row(s) hidden by hand (not by a filter) were used; add --hidden skip to leave "
                     "them out.")
    if n_filter and hidden != "use":
        notes.append(f"{n_filter} row(s) hidden by a filter were skipped; add --hidden use to include them.")
    return rr, shown, hidden_used, notes


def _with_formula_examples(rd, grid, start, j):
    """Examples of formula cells show the formula, so a summary row or a missing value can be found."""
    if not grid.formulas:
        return rd
    ex = []
    for code, i, shown in rd.examples:
        f = grid.formulas.get((start + i, j))
        ex.append((code, i, repr(f) if f else shown))
    return dataclasses.replace(rd, examples=tuple(ex))


def _pad(rd, n):
    k = n - len(rd)
    if k <= 0:
        return rd
    return dataclasses.replace(rd, values=np.concatenate([rd.values, np.full(k, np.nan)]),
                               reasons=np.concatenate([rd.reasons, np.full(k, intake.BLANK, dtype=np.uint8)]),
                               limits=np.concatenate([rd.limits, np.full(k, np.nan)]),
                               censored=np.concatenate([rd.censored, np.zeros(k, dtype=bool)]))


def _too_few(reading: DataReading, need: int) -> str:
    rows = reading.rows
    names = " and ".join([reading.y_name] + list(reading.x_names))
    from ..wording import LIMIT_ACTION, NO_VALUE_ACTION, example_place
    ex = next((f" (such as {example_place('row', r, c, v)})" for _, r, c, v in rows.examples if v), "")
    span = f" (rows {rows.row_numbers[0]}-{rows.row_numbers[-1]})" if rows.used.size else ""
    counts = rows.counts()
    action = (f" Formulas without saved values: {NO_VALUE_ACTION}." if counts.get(intake.NO_VALUE) else "") + (
        f" Values below a detection limit: {LIMIT_ACTION}." if counts.get(intake.LIMIT) else "")
    return (f"need at least {need} rows where {names} are numbers; found {rows.n_used} in {reading.source}"
            f"{span}. Skipped: {rows.skipped_words()}"
            f"{ex}.{action} Check the column names (--y, --x), --sheet and --header-row.")
