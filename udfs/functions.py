"""The unbend cell functions (xlwings user functions).

Each function is thin: cells -> numbers (:mod:`unbend.udfs.cells`), one
engine call through a content-keyed cache, result -> a cell table with a
header row. Any problem comes back as one line of text beginning
``unbend:``; a traceback never reaches a cell.

The parameters carry no type annotations on purpose: xlwings would read
annotations as converters. Each argument's description is given with
``xw.arg(..., doc=...)`` and kept in :data:`FUNCTIONS` as well.

How the spreadsheet program's values reach a function is set in one place,
:func:`cell_function`: every argument is read by :class:`unbend.udfs.host.HostCells`
(references cut to the used range, raw values normalised in one pass, error
codes of any age kept as error values), results go back through
:class:`unbend.udfs.host.HostResult`, and functions that fit a line are not
run while the function wizard is open.
"""
import dataclasses
import functools
import inspect

import numpy as np
import xlwings as xw

import unbend
from unbend import DomainError, UnbendError
from unbend.fitting import CAUTION
from unbend.calibration import inverse_columns
from unbend.predicting import prediction_columns
from unbend.wording import fitted_rung_words

from . import cells, intake
from .formula import model_formula
from .host import HostCells, HostProblem, HostReference, HostResult, SameCells
from .wording import ALL_GROUPS, SCAN_HEADERS, group_headers, inverse_headers, prediction_headers

CATEGORY = "unbend"

#: name -> {"doc": function description, "args": {argument: description}}
FUNCTIONS = {}

_cache = cells.ResultCache(maxsize=128)
#: Readings of y and x that many cells share (a thousand predictions over the same two columns).
_readings = SameCells()

_Y = ("Range of y values (the response), one column; numbers written as text are read, blanks, other text and "
      "errors are skipped and counted by reason.")
_X = "Range of x values (the predictor): one column, or a block with one column per predictor."
_YP = "Power for y: 2, 1, 0.5, 0 (log), -0.5, -1 ... Leave blank to use the suggested rung."
_XP = "Power for x, same choices as y_power. Leave blank to use the suggested rung."
_YS = "Start added to y before re-expressing, for zeros or negatives (default 0)."
_XS = "Start added to x before re-expressing (default 0)."


class Reference(str):
    """An argument description marking an argument that takes a cell reference as a reference.

    The function then receives an ``xlwings.Range`` for a reference (and a plain value otherwise)
    instead of the cell's value.
    """


#: Functions cheap enough to run while the function wizard shows a preview of the result; every
#: other function (any that fits a line) returns nothing until the wizard is closed.
PREVIEW_IN_WIZARD = frozenset({"UNBEND_APPLY", "UNBEND_UNDO"})


def _host_checked(fn, params):
    """Turn an argument the host could not hand over into an ``unbend:`` message naming it."""
    @functools.wraps(fn)
    def checked(*args, **kwargs):
        for name, a in zip(params, args):
            if type(a) is HostProblem:
                raise UnbendError(f"{name}: {a.message}")
        return fn(*args, **kwargs)
    return checked


def cell_function(**arg_docs):
    """Register a cell function: safe wrapper, xlwings decorators, argument descriptions.

    Every argument is read with :class:`~unbend.udfs.host.HostCells` (or kept as a reference with
    :class:`~unbend.udfs.host.HostReference` when its description is a :class:`Reference`); the
    result goes back through :class:`~unbend.udfs.host.HostResult`; the function is not called
    from the function wizard unless it is in :data:`PREVIEW_IN_WIZARD`.
    """
    def deco(fn):
        params = list(inspect.signature(fn).parameters)
        if set(params) != set(arg_docs):
            raise RuntimeError(f"{fn.__name__}: describe exactly its arguments {params}")
        wrapped = cells.safe(_host_checked(fn, params))
        for name in reversed(params):
            convert = HostReference if isinstance(arg_docs[name], Reference) else HostCells
            wrapped = xw.arg(name, convert, doc=str(arg_docs[name]))(wrapped)
        wrapped = xw.ret(HostResult)(wrapped)
        wrapped = xw.func(category=CATEGORY, call_in_wizard=fn.__name__ in PREVIEW_IN_WIZARD)(wrapped)
        FUNCTIONS[fn.__name__] = {"doc": (fn.__doc__ or "").strip(), "args": {k: str(v) for k, v in arg_docs.items()}}
        return wrapped
    return deco


# ----------------------------------------------------------------------------- inputs

def _yx(y, x, censor=False):
    """y as a vector and x as a block, rows used only, and the reading (reasons for the rows skipped).

    With ``censor=True`` (the functions that fit the line) y values below a limit written with it ("<0.5")
    are kept at their limit and marked in the reading's ``y_censored`` (see :func:`_censored`).
    The reading of equal cells is shared between calls (see ``SameCells``); the arrays returned are new.
    """
    parts = (y, x, "censored") if censor else (y, x)
    rows = _readings.get_or_read(parts, lambda: _read_yx(y, x, censor))
    return rows.y[rows.used], rows.X[rows.used], rows


def _censored(rows):
    """The engine's ``censored=`` for the rows used: a boolean array, or None when no value is censored."""
    return rows.y_censored[rows.used] if rows.n_censored else None


def _censored_header(rows):
    from .wording import CENSORED_ROW
    return [CENSORED_ROW] if rows.n_censored else []


def _censored_cells(rows):
    return [rows.n_censored] if rows.n_censored else []


def _read_yx(y, x, censor=False):
    rows = cells.read_rows(y, x, censor=censor)
    if not len(rows.columns[0]) or not np.any(rows.columns[0].reasons != intake.BLANK):
        raise UnbendError("y is empty; select the y column.")
    if x is not None and not any(np.any(c.reasons != intake.BLANK) for c in rows.columns[1:]):
        raise UnbendError("x is empty; select the x column.")
    cells.check_enough(rows)
    return rows


def _y_only(y, censor=False):
    """y alone, rows used only, and its reading (shared between calls on equal cells); with ``censor=True``
    values below a limit ("<0.5") are kept at their limit and marked, as in :func:`_yx`."""
    rows = _readings.get_or_read((y, "censored") if censor else (y,), lambda: cells.read_rows(y, censor=censor))
    return rows.y[rows.used], rows


def _reading_header():
    return ["read from text", "skipped, by reason"]


def _reading_cells(rows):
    return [sum(c.from_text for c in rows.columns), rows.skipped_words()]


def _powers(yv, X, y_power, x_power, y_start, x_start, c=None):
    yp = cells.optional_number(y_power, "y_power")
    xp = cells.optional_number(x_power, "x_power")
    ys = cells.optional_number(y_start, "y_start", 0.0)
    xs = cells.optional_number(x_start, "x_start", 0.0)
    if yp is None or xp is None:
        yp, xp = _cache.get_or_compute(
            ("pair", yv, X, yp, xp, ys, xs, c),
            lambda: unbend.best_pair(yv, X, y_start=ys, x_start=xs, y_power=yp, x_power=xp, censored=c))
    return yp, xp, ys, xs


def _fit(y, x, y_power, x_power, y_start, x_start, level=0.95, censor=True):
    """The fitted line and the reading of its cells (censored where y holds values below a limit)."""
    yv, X, rd = _yx(y, x, censor)
    c = _censored(rd)
    yp, xp, ys, xs = _powers(yv, X, y_power, x_power, y_start, x_start, c)
    return _cache.get_or_compute(
        ("fit", yv, X, yp, xp, ys, xs, level, c),
        lambda: unbend.fit(yv, X, y_power=yp, x_power=xp, y_start=ys, x_start=xs, level=level, censored=c)), rd


def _level(level):
    lv = cells.optional_number(level, "level", 0.95)
    if lv > 1 and lv < 100:
        lv = lv / 100.0  # 95 means 95%
    return lv


def _rows_table(pairs, header=("item", "value")):
    return cells.table(list(header), [[k, v] for k, v in pairs])


# --------------------------------------------------------------------------- functions

@cell_function(y=_Y, x="Optional x range; leave out to get the rung that makes y most symmetric.",
               which='Optional: "y" (default) for the y rung of the pair, "x" for its x rung.')
def UNBEND_POWER(y, x=None, which=None):
    """The y rung (or x rung with which="x") of the pair the scan ranks first, which UNBEND_FIT uses when powers are blank."""
    w = cells.optional_text(which, "which", ("y", "x"), "y")
    if x is None or (isinstance(x, str) and not x.strip()):
        if w == "x":
            raise UnbendError('which="x" needs an x range.')
        yv, rd = _y_only(y, censor=True)
        return cells.scalar(_symmetry(yv, 0.0, _censored(rd)).rung)
    yv, X, rd = _yx(y, x, True)
    c = _censored(rd)
    yp, xp = _cache.get_or_compute(("pair", yv, X, None, None, 0.0, 0.0, c),
                                   lambda: unbend.best_pair(yv, X, censored=c))
    return cells.scalar(yp if w == "y" else xp)


_SUGGEST_HEADER = ["power for", "estimate", "low 95%", "high 95%", "rung", "rung name", "rows used",
                   "rows skipped", "note"] + _reading_header()


def _suggest_row(s, rows):
    return [s.what, s.estimate, s.low, s.high, s.rung, s.label, s.n, rows.n_skipped, s.note] + _reading_cells(rows)


def _not_estimated_row(what, vals, other, rows):
    """UNBEND_SUGGEST's row for y or x when a value is 0 or below: no estimate, and why in words."""
    v = vals[np.isfinite(vals)]
    k = int(np.sum(v <= 0))
    start = unbend.propose_start(v.ravel(), 0.0)
    given = f"(given {'x' if what == 'y' else 'y'} at power {other:g}) "
    note = (f"{given}Not estimated: the likelihood over the power for {what} needs every {what} above 0, and {k} of "
            f"{v.size} {'is' if k == 1 else 'are'} not (smallest {float(v.min()):g}). UNBEND_SCAN and UNBEND_FIT take "
            f"{what}_start: with {what}_start {start:g} every {what} is above 0 and every rung can be tried. "
            f"Meanwhile the scan's best pair (last row) uses only the rungs these {what} values allow.")
    return [what, "", "", "", "", "", rows.n_used, rows.n_skipped, note] + _reading_cells(rows)


@cell_function(y=_Y, x="Optional x range (one column or a block).")
def UNBEND_SUGGEST(y, x=None):
    """Table: suggested power for y (and for x) with its 95% interval, the rung to use and a note."""
    if x is None or (isinstance(x, str) and not x.strip()):
        yv, rd = _y_only(y, censor=True)
        if np.any(yv[np.isfinite(yv)] <= 0):  # as with x given: a row that says why, not an error
            row = _symmetry_not_estimated_row(yv, rd)
        else:
            row = _suggest_row(_symmetry(yv, 0.0, _censored(rd)), rd)
        return cells.table(_SUGGEST_HEADER + _censored_header(rd), [row + _censored_cells(rd)])
    yv, X, rd = _yx(y, x, True)
    c = _censored(rd)
    yp, xp = _cache.get_or_compute(("pair", yv, X, None, None, 0.0, 0.0, c),
                                   lambda: unbend.best_pair(yv, X, censored=c))
    table = _cache.get_or_compute(("scan", yv, X, 0.0, 0.0, c), lambda: unbend.scan(yv, X, censored=c))
    note = _SUGGEST_HEADER.index("note")
    rows = []
    for what, own, vals, fn in (("y", yp, yv, lambda: unbend.suggest_power(yv, X, x_power=xp, censored=c)),
                                ("x", xp, X, lambda: unbend.suggest_x_power(yv, X, y_power=yp, censored=c))):
        other = xp if what == "y" else yp
        if np.any(vals[np.isfinite(vals)] <= 0):  # the power's likelihood needs every value above 0: say so
            rows.append(_not_estimated_row(what, vals, other, rd))
            continue
        s = _cache.get_or_compute(("s" + what, yv, X, other, c), fn)
        row = _suggest_row(s, rd)
        row[note] = f"(given {'x' if what == 'y' else 'y'} at power {other:g}) {row[note]} " \
                    f"{fitted_rung_words(s, own, other, table)}"
        rows.append(row)
    rows.append(["scan's best pair", "", "", "", "", f"y {unbend.rung_label(yp)}, x {unbend.rung_label(xp)}",
                 "", "", "the pair UNBEND_FIT and UNBEND_PREDICT use when the powers are left blank"])
    if rd.n_censored:
        rows = [r + [""] * (len(_SUGGEST_HEADER) - len(r)) + _censored_cells(rd) for r in rows]
    return cells.table(_SUGGEST_HEADER + _censored_header(rd), rows)


@cell_function(y=_Y, x=_X, y_start=_YS, x_start=_XS)
def UNBEND_SCAN(y, x, y_start=None, x_start=None):
    """Table: every y rung x x rung, best first, with likelihood, curvature, spread and normality checks and a verdict."""
    yv, X, rd = _yx(y, x, True)
    ys = cells.optional_number(y_start, "y_start", 0.0)
    xs = cells.optional_number(x_start, "x_start", 0.0)
    cm = _censored(rd)
    t = _cache.get_or_compute(("scan", yv, X, ys, xs, cm),
                              lambda: unbend.scan(yv, X, y_start=ys, x_start=xs, censored=cm))
    header = [SCAN_HEADERS[c] for c in t.columns] + ["rows skipped"] + _reading_header() + _censored_header(rd)
    extra = [rd.n_skipped] + _reading_cells(rd) + _censored_cells(rd)
    body = [list(r) + extra for r in t.itertuples(index=False)]
    return cells.table(header, body)


@cell_function(y=_Y, x=_X, y_power=_YP, x_power=_XP, y_start=_YS, x_start=_XS)
def UNBEND_FIT(y, x, y_power=None, x_power=None, y_start=None, x_start=None):
    """Two columns, label and value: coefficients with SE and 95% intervals, R², residual SD, rows used and skipped, checks, verdict."""
    f, rd = _fit(y, x, y_power, x_power, y_start, x_start)
    return _rows_table(rd.into_rows(f.rows()))


def _new_x(new_x, rd, k):
    """New x values read by the same rules as the fitted x (dates from the same origin, in the same unit)."""
    xs = rd.columns[1:]
    opts = [dict(date_origin=c.date_origin, date_unit=c.date_unit, decimal=c.decimal or None) for c in xs]
    if k == 1:
        return cells.read(new_x, "new_x", header=False, **opts[0]).values
    cols = cells.read_block(new_x, "new_x", header=False)
    if len(cols) != k and len(cols) == 1 and len(cols[0]) == k:
        cols = cells.read_block(new_x, "new_x", flat_as="row", header=False)
    if len(cols) == k and any(o["date_unit"] for o in opts):
        cols = [cells.read(c_cells, f"new_x{j + 1}", header=False, **opts[j])
                for j, c_cells in enumerate(_columns_of(new_x, k))]
    return np.column_stack([c.values for c in cols]) if cols else np.empty((0, k))


def _columns_of(block, k):
    rows = block if isinstance(block, (list, tuple)) else np.asarray(block, dtype=object).tolist()
    rows = [r if isinstance(r, (list, tuple)) else [r] for r in rows]
    return [[r[j] if j < len(r) else None for r in rows] for j in range(k)]


_PRED_COLS = ["median", "mean", "low", "high", "line_low", "line_high", "outside_range", "note"]


@cell_function(y=_Y, x=_X, new_x="The x value(s) to predict at: one cell, a column, or a block with one column per x.",
               y_power=_YP, x_power=_XP,
               what='Optional: "median", "mean", "low" or "high" to get just those values; blank for the full table.',
               level="Interval level, default 0.95 (95 also works).", y_start=_YS, x_start=_XS)
def UNBEND_PREDICT(y, x, new_x, y_power=None, x_power=None, what=None, level=None, y_start=None, x_start=None):
    """Predicted y in original units at new x: median, mean (Duan's smearing), interval, and an outside-range flag."""
    lv = _level(level)
    w = cells.optional_text(what, "what", ("median", "mean", "low", "high"), None)
    f, rd = _fit(y, x, y_power, x_power, y_start, x_start, 0.95)
    k = len(f.x_names)
    nx = _new_x(new_x, rd, k)
    if k > 1 and nx.shape[1] != k and nx.shape[0] == k and nx.shape[1] == 1:
        nx = nx.T
    if nx.shape[0] == 0:
        raise UnbendError("new_x is empty; give the x value(s) to predict at.")
    cens = bool(getattr(f, "n_censored", 0))
    p = f.predict(nx, level=lv) if cens else prediction_columns(f, nx, level=lv)
    if w is not None:
        vals = np.asarray(p[w])
        return cells.scalar(vals[0]) if vals.size == 1 else cells.column(vals)
    xcols = list(f.x_names) if k > 1 else ["new x"]
    words = prediction_headers(lv)
    if cens:
        from .wording import CENSORED_MEAN_HEADER
        words["mean"] = CENSORED_MEAN_HEADER
    header = (xcols + [words[c] for c in _PRED_COLS] + ["y power", "x power", "rows used", "rows skipped"]
              + _reading_header() + _censored_header(rd)
              + (["median below the lowest limit"] if cens else []))
    m = len(p["median"])
    columns = [np.asarray(p[c]) for c in f.x_names] + [np.asarray(p[c]) for c in _PRED_COLS[:-2]]
    columns += [np.where(p["outside_range"], "yes", "no"), np.asarray(p["note"], dtype=object)]
    columns += [np.full(m, f.y_power), np.full(m, f.x_power), np.full(m, f.n), np.full(m, rd.n_skipped)]
    columns += [np.full(m, v, dtype=object) for v in _reading_cells(rd) + _censored_cells(rd)]
    if cens:
        columns.append(np.where(np.asarray(p["below_limit"]), "yes", "no"))
    return cells.table(header, list(zip(*(c.tolist() for c in columns))))


@cell_function(y=_Y, x=_X, y_power=_YP, x_power=_XP, y_start=_YS, x_start=_XS)
def UNBEND_RESIDUALS(y, x, y_power=None, x_power=None, y_start=None, x_start=None):
    """Table for charting: re-expressed x and y, fitted, residual, standardized residual and a flag, one row per used row."""
    f, rd = _fit(y, x, y_power, x_power, y_start, x_start)
    r = f.residuals
    n = f.n
    where = rd.row_numbers[rd.used]  # positions in the ranges
    xre = [f"{nm}_re" for nm in f.x_names]
    header = (["row"] + [f"{nm} re-expressed" if len(f.x_names) > 1 else "x re-expressed" for nm in f.x_names]
              + ["y re-expressed", "fitted", "residual", "standardized residual", "flag", "y power", "x power",
                 "rows skipped"] + _reading_header() + _censored_header(rd))
    extra = _reading_cells(rd) + _censored_cells(rd)
    below = r["censored"].to_numpy() if "censored" in r.columns else np.zeros(n, dtype=bool)
    body = []
    for i in range(n):
        flags = ["below a limit (no residual: y is only known to lie below it)"] if below[i] else []
        if abs(r["standardized"].iloc[i]) > 2:
            flags.append("large residual")
        if r["cooks_distance"].iloc[i] > 4.0 / n:
            flags.append("influential")
        body.append([int(where[int(r["row"].iloc[i]) - 1])] + [r[c].iloc[i] for c in xre]
                    + [r["y_re"].iloc[i], r["fitted"].iloc[i], r["residual"].iloc[i], r["standardized"].iloc[i],
                       ", ".join(flags), f.y_power, f.x_power, rd.n_skipped] + extra)
    return cells.table(header, body)


@cell_function(values="Range of values, one column.", groups="Range of group labels, same length as values.")
def UNBEND_SPREAD(values, groups):
    """Table: the power that evens out spread across groups (log spread on log level), then each group's level and spread."""
    rd = cells.read_rows(values, y_name="values")
    v = rd.y
    g = cells.to_labels(groups, "groups")
    n = max(v.size, len(g))
    v = np.concatenate([v, np.full(n - v.size, np.nan)])
    g = list(g) + [None] * (n - len(g))
    s = _cache.get_or_compute(("spread", v, tuple(map(str, g))), lambda: unbend.spread_power(v, np.array(g, dtype=object)))
    rows = [["power for equal spread", s.estimate, s.low, s.high, s.note],
            ["rung to use", s.rung, "", "", s.label],
            ["rows used", s.n, "", "", ""],
            ["rows skipped", s.skipped, "", "", "value not used or group missing"]]
    rows += [[k, val, "", "", ""] for k, val in rd.table_rows()]
    rows += [
            ["group", "n", "level (median)", "spread (IQR)", "used in the line"]]
    for r in s.detail.itertuples(index=False):
        rows.append([r.group, r.n, r.level, r.spread, "yes" if r.used else "no"])
    return cells.table(["item", "value", "low 95%", "high 95%", "note"], rows)


@cell_function(values="Range of values, one column; every value plus the start must be above 0.",
               start="Optional start added to every value before re-expressing, for zeros or negatives (default 0).")
def UNBEND_SYMMETRY(values, start=None):
    """Table: the power that makes one column's distribution most symmetric (Box-Cox), its 95% interval and rung."""
    v, rd = _y_only(values, censor=True)
    st = cells.optional_number(start, "start", 0.0)
    rows = rd.into_rows(_symmetry(v, st, _censored(rd)).rows())
    if st:  # the power belongs to the values plus the start: say which start
        rows.insert(1, ("start added", st))
    return _rows_table(rows)


def _symmetry(v, start=0.0, censored=None):
    """The Box-Cox power for one column (shared between calls on equal values), values below a limit censored;
    zeros or negatives refused in the words of the cells: which start to give UNBEND_SYMMETRY."""
    try:
        return _cache.get_or_compute(("sym", v, start, censored),
                                     lambda: unbend.symmetry_power(v, start=start, censored=censored))
    except DomainError as e:
        raise UnbendError(_symmetry_needs(v, start) + f" Add a start of {e.proposed_start:g}: "
                          f"=UNBEND_SYMMETRY(values, {e.proposed_start:g}) adds it to every value first.") from None


def _symmetry_needs(v, start) -> str:
    v = v[np.isfinite(v)]
    k = int(np.sum(v + start <= 0))
    cur = f" after adding the start {start:g}" if start else ""
    return (f"The power that makes the values most symmetric (Box-Cox) needs every value above 0{cur}; {k} of "
            f"{v.size} {'is' if k == 1 else 'are'} not (smallest {float(v.min()):g}).")


def _symmetry_not_estimated_row(v, rows):
    """UNBEND_SUGGEST's row for y alone when a value is 0 or below."""
    start = unbend.propose_start(v[np.isfinite(v)], 0.0)
    note = (f"Not estimated. {_symmetry_needs(v, 0.0)} UNBEND_SYMMETRY takes a start: =UNBEND_SYMMETRY(y, "
            f"{start:g}) adds {start:g} to every y first, and every rung can be tried.")
    return ["values", "", "", "", "", "", rows.n_used, rows.n_skipped, note] + _reading_cells(rows)


def _column_through(engine_fn, values, power, start, missing_power):
    """Cells -> numbers -> express/unexpress -> a column (or one number for one cell)."""
    p = cells.optional_number(power, "power")
    if p is None:
        raise UnbendError(missing_power)
    s = cells.optional_number(start, "start", 0.0)
    return _shape_like(values, engine_fn(cells.to_numbers(values, "values"), p, s))


def _shape_like(cells_in, out):
    """A column of results, or one number for one cell."""
    if out.size == 1 and not isinstance(cells_in, (list, tuple, np.ndarray)):
        return cells.scalar(out[0])
    return cells.column(out)


@cell_function(values="Range of values to re-express.", power="Power: 2, 1, 0.5, 0 (log), -0.5, -1 or any number.",
               start="Optional start added before re-expressing (default 0).")
def UNBEND_APPLY(values, power, start=None):
    """The values re-expressed at a power (negative powers as -value^power, so order is kept)."""
    return _column_through(unbend.express, values, power, start, "give a power, such as 0.5 or 0 (log).")


@cell_function(values="Range of re-expressed values to take back to original units.",
               power="The power they were re-expressed with.", start="The start that was added (default 0).")
def UNBEND_UNDO(values, power, start=None):
    """Re-expressed values taken back to original units (the exact inverse of UNBEND_APPLY)."""
    return _column_through(unbend.unexpress, values, power, start,
                           "give the power the values were re-expressed with.")


@cell_function(y=_Y, x="Range of x values, one column.", y_power=_YP, x_power=_XP,
               x_cell=Reference('The cell to use as x in the formula: a reference such as B2, or text such as "B2" '
                                '(default "A2").'),
               what='"median" (default) or "mean" (adds the smearing correction).')
def UNBEND_FORMULA(y, x, y_power=None, x_power=None, x_cell=None, what=None):
    """Text: the fitted line as a formula in built-in functions (LN, EXP, POWER ...) that a colleague can paste without the add-in."""
    w = cells.optional_text(what, "what", ("median", "mean"), "median")
    ref = "A2" if x_cell is None or (isinstance(x_cell, str) and not x_cell.strip()) else x_cell
    if hasattr(ref, "get_address") and hasattr(ref, "shape"):  # a reference (xlwings Range)
        if tuple(ref.shape) != (1, 1):
            raise UnbendError(f"x_cell must be one cell; got a block of {ref.shape[0]} x {ref.shape[1]}.")
        ref = ref.get_address(False, False)  # relative, without the sheet: "B2"
    elif hasattr(ref, "address"):
        ref = ref.address
    if not isinstance(ref, str):
        raise UnbendError('x_cell must be a cell reference, such as B2, or text such as "B2".')
    f, _ = _fit(y, x, y_power, x_power, None, None)
    return model_formula(f, ref, w)


@cell_function(y=_Y, x=_X, y_power=_YP, x_power=_XP)
def UNBEND_EXPLAIN(y, x, y_power=None, x_power=None):
    """Text: a few plain sentences on the re-expression, the slope in original units, the residual checks and cautions."""
    f, rd = _fit(y, x, y_power, x_power, None, None)
    return " ".join([f.explain()] + rd.lines("position"))


# ------------------------------------------------------------------ calibration

_LV = "Interval level, default 0.95 (95 also works)."
_REP = ("Readings per sample, averaged on the re-expressed scale. Blank: 1 for a column, or the width of a block "
        "(one row per sample). For the readings of one sample in one row or column, give their count.")


def _replicates(value, default: int = 1):
    r = cells.optional_number(value, "replicates", float(default))
    if r < 1 or r != int(r):
        raise UnbendError(f"replicates must be a whole number of readings, 1 or more; got {r:g}.")
    return int(r)


def _calibration_fit(y, x, y_power, x_power, y_start, x_start):
    """The calibration line (one x) and the reading of the standards' cells."""
    f, rd = _fit(y, x, y_power, x_power, y_start, x_start, 0.95, censor=False)
    if len(f.x_names) != 1:
        raise UnbendError("reading x back from y needs one x column; select a single x column.")
    return f, rd


_INV_COLS = ["y", "readings", "x", "low", "high", "outside_range", "note"]


@cell_function(y="Range of the standards' measured y (the response), one column.",
               x="Range of the standards' known x (such as concentration), one column.",
               measured_y=("Readings of unknown samples: one column (one reading per sample), or a block with one "
                           "row per sample and one column per replicate reading."),
               y_power=_YP, x_power=_XP,
               what='Optional: "x", "low" or "high" to get just those numbers; blank for the full table.',
               level=_LV, replicates=_REP, y_start=_YS, x_start=_XS)
def UNBEND_INVERSE(y, x, measured_y, y_power=None, x_power=None, what=None, level=None, replicates=None,
                   y_start=None, x_start=None):
    """x read back from measured y with the calibration line: estimate, interval (Fieller's, in original units) and an outside-range flag."""
    lv = _level(level)
    w = cells.optional_text(what, "what", ("x", "low", "high"), None)
    f, rd = _calibration_fit(y, x, y_power, x_power, y_start, x_start)
    M = cells.to_block(measured_y, "measured_y")
    if M.shape[0] == 0:
        raise UnbendError("measured_y is empty; give the reading(s) to read x back from.")
    m = _replicates(replicates, M.shape[1])
    r = inverse_columns(f, M if M.shape[1] > 1 else M[:, 0], level=lv, replicates=m, name="measured_y")
    if w is not None:
        vals = np.asarray(r[w])
        return cells.scalar(vals[0]) if vals.size == 1 else cells.column(vals)
    words = inverse_headers(lv)
    header = [words[c] for c in _INV_COLS] + ["y power", "x power", "rows used", "rows skipped"] + _reading_header()
    if m > 1:
        header[0] = words["y_mean"]
    k = len(r["x"])
    columns = [np.asarray(r[c], dtype=float) for c in ("y", "x", "low", "high")]
    body_cols = [columns[0], np.asarray(r["readings"]), columns[1], columns[2], columns[3],
                 np.where(r["outside_range"], "yes", "no").tolist(), r["note"],
                 [f.y_power] * k, [f.x_power] * k, [f.n] * k, [rd.n_skipped] * k]
    body_cols += [[v] * k for v in _reading_cells(rd)]
    return cells.table_columns(header, body_cols)  # the same cells as cells.table, a column at a time


@cell_function(y="Range of the standards' measured y (the response), one column.",
               x="Range of the standards' known x (such as concentration), one column; include blanks at x = 0.",
               y_power=_YP, x_power=_XP,
               level="One-sided level of the decisions, default 0.95 (95 also works): false-positive and false-negative risks of 5%.",
               replicates="Readings averaged per sample (default 1).", y_start=_YS, x_start=_XS)
def UNBEND_LIMITS(y, x, y_power=None, x_power=None, level=None, replicates=None, y_start=None, x_start=None):
    """Table: critical level, detection and quantification limits in x units (Hubaux-Vos band, Currie, ICH 3.3 s/slope and 10 s/slope), each with its definition."""
    lv = _level(level)
    m = _replicates(replicates)
    f, rd = _calibration_fit(y, x, y_power, x_power, y_start, x_start)
    lim = f.detection_limits(level=lv, replicates=m)  # a few small sums: no cache needed
    rows = [[k, rd.n_skipped, rd.skipped_words() if rd.n_skipped else d] if k == "rows skipped" else [k, v, d]
            for k, v, d in lim.rows()]
    return cells.table(["item", "value", "definition"], rows)


# ------------------------------------------------------------------- many groups (issue 14)

_G = "Range of group labels (site, machine, batch ...), same length as y; blank labels are skipped and counted."


def _yxg(y, x, groups):
    """y and one x column as numbers (NaN where a row is skipped), group labels as they are, all brought to one
    length, and the reading (the shared rules: rows skipped by reason, values read from text)."""
    labels = cells.to_labels(groups, "groups")
    if not labels:
        raise UnbendError("y, x and groups must each be a range with values; select the three columns.")
    rows = _readings.get_or_read((y, x), lambda: _read_yx(y, x))
    if rows.X.shape[1] != 1:
        raise UnbendError(f"x has {rows.X.shape[1]} columns; the group functions take one x column (a line per "
                          "group).")
    n = max(rows.used.size, len(labels))  # trailing blanks were trimmed: back to one length
    pad = n - rows.used.size
    yv = np.concatenate([np.where(rows.used, rows.y, np.nan), np.full(pad, np.nan)])
    xv = np.concatenate([np.where(rows.used, rows.X[:, 0], np.nan), np.full(pad, np.nan)])
    labels = np.array(list(labels) + [None] * (n - len(labels)), dtype=object)
    return yv, xv, labels, rows


def _group_reasons(rows, labels):
    """Rows skipped by reason, in words: (for every row, {group label: for that group's rows}).

    A missing group label comes first (as the engine counts it); other rows give the reading's reason.
    """
    n = labels.size
    reasons = np.concatenate([rows.reasons, np.full(n - rows.reasons.size, intake.BLANK, dtype=rows.reasons.dtype)])
    index = {}
    codes = np.fromiter((-1 if v is None else index.setdefault(v, len(index)) for v in labels), dtype=np.int64,
                        count=n)
    have = codes >= 0
    k_codes = len(intake.REASON_KEYS)
    per = np.bincount(codes[have] * k_codes + reasons[have], minlength=len(index) * k_codes).reshape(-1, k_codes)
    per[:, intake.USED] = 0

    def words(counts):
        return dataclasses.replace(rows, reasons=np.repeat(np.arange(k_codes), counts)).skipped_words()

    all_words = words(per.sum(axis=0))
    missing = int(n - have.sum())
    if missing:
        lab = f"{missing} group label{'s' if missing != 1 else ''} missing"
        all_words = lab if all_words == "none" else f"{lab}, {all_words}"
    return all_words, {v: words(per[i]) for v, i in index.items()}


def _groups_fit(y, x, groups, y_power, x_power, y_start, x_start):
    yv, xv, labels, rows = _yxg(y, x, groups)
    yp = cells.optional_number(y_power, "y_power")
    xp = cells.optional_number(x_power, "x_power")
    ys = cells.optional_number(y_start, "y_start", 0.0)
    xs = cells.optional_number(x_start, "x_start", 0.0)
    gf = _cache.get_or_compute(
        ("groups", yv, xv, labels, yp, xp, ys, xs),
        lambda: unbend.fit_groups(yv, xv, labels, y_power=yp, x_power=xp, y_start=ys, x_start=xs))
    return gf, rows, labels


_GROUP_COLS = ["group", "n", "skipped", "y_power", "x_power", "intercept", "slope", "slope_low", "slope_high",
               "resid_sd", "r2", "curvature_p", "pattern_p", "spread_p", "normality_p", "own_y_power", "own_y_low",
               "own_y_high", "own_y_differs", "own_x_power", "own_x_low", "own_x_high", "own_x_differs",
               "equal_slopes_f", "equal_slopes_p", "verdict", "note"]


def _all_groups_row(gf):
    """The first row: every group together (common powers with their intervals, the one shared slope)."""
    row = dict.fromkeys(_GROUP_COLS, "")
    row.update(group=ALL_GROUPS, n=gf.n, skipped=gf.n_skipped, y_power=gf.y_power, x_power=gf.x_power,
               slope=gf.common_slope, equal_slopes_f=gf.equal_slopes_f, equal_slopes_p=gf.equal_slopes_p,
               verdict=gf.explain(),
               note="powers for all groups together (blank estimate: the power was given); slope: the one slope "
                    "every group would share, each keeping its own intercept")
    for what, s in (("y", gf.common.y), ("x", gf.common.x)):
        if s is not None:
            row.update({f"own_{what}_power": s.estimate, f"own_{what}_low": s.low, f"own_{what}_high": s.high})
    return [row[c] for c in _GROUP_COLS]


def _cell_label(v):
    """A group label as a cell value: numbers, text and TRUE/FALSE as they are; dates and times as ISO text."""
    if isinstance(v, (str, bool, int, float)):
        return v
    if hasattr(v, "isoformat"):
        return v.isoformat(sep=" ") if hasattr(v, "hour") and hasattr(v, "date") else v.isoformat()
    return str(v)


def _group_row(r):
    row = {c: r[c] for c in _GROUP_COLS if c in r.index}
    row["group"] = _cell_label(r["group"])
    for c in ("own_y_differs", "own_x_differs"):
        row[c] = ("yes" if r[c] else "no") if r["used"] and not np.isnan(r[c.replace("differs", "power")]) else ""
    row["note"] = r["reason"] if not r["used"] else ""
    row["equal_slopes_f"] = row["equal_slopes_p"] = ""
    return [row[c] for c in _GROUP_COLS]


@cell_function(y=_Y, x="Range of x values (the predictor), one column.", groups=_G,
               y_power="Power for y for every group: 2, 1, 0.5, 0 (log), -0.5, -1 ... Blank: chosen from all groups "
                       "together.",
               x_power="Power for x for every group, same choices. Blank: chosen from all groups together.",
               y_start=_YS, x_start=_XS)
def UNBEND_GROUPS(y, x, groups, y_power=None, x_power=None, y_start=None, x_start=None):
    """Table: one power for every group (with its interval), then each group's line, checks and own power."""
    gf, rows, labels = _groups_fit(y, x, groups, y_power, x_power, y_start, x_start)
    words = group_headers(gf.level)
    every, by_group = _group_reasons(rows, labels)
    body = [_all_groups_row(gf) + _reading_cells(rows)[:1] + [every]]
    body += [_group_row(r) + ["", by_group.get(r["group"], "none")] for _, r in gf.table.iterrows()]
    return cells.table([words[c] for c in _GROUP_COLS] + _reading_header(), body)


@cell_function(y=_Y, x="Range of x values (the predictor), one column.", groups=_G,
               group="The group to predict for: one cell holding its label.",
               new_x="The x value(s) to predict at: one cell or a column.",
               y_power=_YP.replace("suggested rung", "power chosen from all groups together"),
               x_power=_XP.replace("suggested rung", "power chosen from all groups together"),
               what='Optional: "median", "mean", "low" or "high" to get just those values; blank for the full table.',
               level="Interval level, default 0.95 (95 also works).", y_start=_YS, x_start=_XS)
def UNBEND_GROUP_PREDICT(y, x, groups, group, new_x, y_power=None, x_power=None, what=None, level=None,
                         y_start=None, x_start=None):
    """Predicted y in original units within one group, at the powers common to all groups: median, mean, intervals."""
    lv = _level(level)
    w = cells.optional_text(what, "what", ("median", "mean", "low", "high"), None)
    label = cells.to_labels(group, "group")
    if len(label) != 1 or label[0] is None:
        raise UnbendError("group must be one cell holding a group label.")
    gf, rows, labels = _groups_fit(y, x, groups, y_power, x_power, y_start, x_start)
    f = gf.line(label[0])
    nx = cells.to_numbers(new_x, "new_x")
    if nx.size == 0:
        raise UnbendError("new_x is empty; give the x value(s) to predict at.")
    p = prediction_columns(f, nx, level=lv)
    if w is not None:
        vals = np.asarray(p[w])
        return cells.scalar(vals[0]) if vals.size == 1 else cells.column(vals)
    words = prediction_headers(lv)
    row = gf.row(label[0])
    every, by_group = _group_reasons(rows, labels)
    header = ["new x"] + [words[c] for c in _PRED_COLS] + ["group", "y power", "x power", "group rows used",
                                                            "group rows skipped", "rows skipped (all groups)",
                                                            "group skipped, by reason", "read from text",
                                                            "skipped, by reason (all groups)"]
    m = len(p["median"])
    columns = [np.asarray(p["x"])] + [np.asarray(p[c]) for c in _PRED_COLS[:-2]]
    columns += [np.where(p["outside_range"], "yes", "no"), np.asarray(p["note"], dtype=object)]
    columns += [np.full(m, _cell_label(row["group"]), dtype=object), np.full(m, f.y_power), np.full(m, f.x_power),
                np.full(m, int(row["n"])), np.full(m, int(row["skipped"])), np.full(m, gf.n_skipped),
                np.full(m, by_group.get(label[0], "none"), dtype=object),
                np.full(m, _reading_cells(rows)[0]), np.full(m, every, dtype=object)]
    return cells.table(header, list(zip(*(c.tolist() for c in columns))))


__all__ = sorted(FUNCTIONS) + ["FUNCTIONS", "CATEGORY", "CAUTION"]
