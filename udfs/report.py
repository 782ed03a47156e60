"""The report: one analysis of y against x written as a workbook and PNG plots."""
from __future__ import annotations

import uuid
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

import unbend
from unbend import DomainError, UnbendError
from unbend.fitting import CAUTION
from unbend.wording import fitted_rung_words, line_words

from . import cells
from .plots import PLOT_FILES  # noqa: F401  (the plot files write_plots writes, in its folder)
from .outputs import atomic_save
from .xlsx import GENERAL, P_FORMAT, SMART, Book, Column, Style
from .wording import PREDICTION_HELP, SCAN_HEADERS, SCAN_HELP, prediction_headers

__all__ = ["Analysis", "analyse", "summary_lines", "write_report", "write_plots"]




@dataclass
class Analysis:
    """Everything the report shows, computed once by the engine.

    ``suggest_y`` / ``suggest_x`` are None when the data do not allow the
    estimate (zeros or negatives without a start); ``notes`` then say why and
    what to type.
    """

    source: str
    y_name: str
    x_names: list
    y: np.ndarray
    X: np.ndarray
    suggest_y: unbend.PowerSuggestion | None
    suggest_x: unbend.PowerSuggestion | None
    scan: pd.DataFrame
    fit: unbend.LineFit
    predictions: pd.DataFrame
    spread: unbend.PowerSuggestion | None = None
    invented: bool = False
    notes: list = field(default_factory=list)
    #: How the data file was read (unbend.udfs.files.DataReading), when the data came from a file: its rows
    #: skipped by reason, values read from text, units and dates replace the engine's generic skipped list.
    reading: object = None
    #: Written into the workbook's properties and every plot, so files of one run can be told apart from another's.
    run_id: str = field(default_factory=lambda: uuid.uuid4().hex)
    #: True for rows whose y is below a detection limit (y holds the limit); None when no value is censored.
    censored: np.ndarray | None = None
    #: For comparison only: the least-squares line at the same powers with each censored value replaced by half
    #: its limit (None without censored values, or when that line cannot be fitted).
    half_limit: object = None


def _numbers(series) -> np.ndarray:
    return cells.to_numbers(list(series), "column") if len(series) else np.array([])


# ----------------------------------------------------------------------------- which rungs the data allow
def _allowed(values: np.ndarray, rungs, start: float):
    """(rungs the values allow after adding ``start``, rungs they do not)."""
    ok, out = [], []
    for p in rungs:
        try:
            unbend.Reexpression(p, start).check(values, "values")
            ok.append(p)
        except DomainError:
            out.append(p)
    return ok, out


def _nice_start(values: np.ndarray, start: float) -> float:
    """unbend.propose_start for the log (so every rung works), as the shortest decimal that still works."""
    prop = unbend.propose_start(values + start, 0.0) + start
    for d in range(1, 18):
        cand = float(f"{prop:.{d}g}")
        if np.all(values + cand > 0):
            return cand
    return prop


def _what_is_below(values: np.ndarray, start: float, name: str) -> str:
    v = values + start
    neg, zero = int(np.sum(v < 0)), int(np.sum(v == 0))
    parts = ([f"{neg} value{'s' if neg != 1 else ''} below 0"] if neg else []) + \
            ([f"{zero} zero{'s' if zero != 1 else ''}"] if zero else [])
    after = f" after adding the start {start:g}" if start else ""
    return f"{name} has {' and '.join(parts)}{after} (smallest {float(values.min()):g})"


def _left_out(values, rungs_out, start, name, opt) -> str:
    """The sentence that says which rungs the scan left out for one variable, and the start to type."""
    strict = [p for p in rungs_out if p <= 0]
    loose = [p for p in rungs_out if p > 0]
    groups = []
    if loose:
        groups.append(f"{_labels(loose)}, which need every {name} at 0 or above")
    if strict:
        groups.append(f"{_labels(strict)}, which need every {name} above 0")
    s = _nice_start(values, start)
    return (f"{_what_is_below(values, start, name)}, so the scan leaves out {', and '.join(groups)}. To include "
            f"them, add a start: {opt} {s:g} (unbend's proposal, from the smallest {name} and the smallest gap "
            f"between distinct values).")


def _labels(powers) -> str:
    names = [f"{unbend.rung_label(p)} ({p:g})" for p in powers]
    return names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]


def _pinned_refused(power, values, start, name, opt_power, opt_start, allowed) -> str:
    s = _nice_start(values, start)
    return (f"{opt_power} {power:g} ({unbend.rung_label(power)}) cannot be used: {_what_is_below(values, start, name)}. "
            f"Add a start ({opt_start} {s:g}), or choose a power these data allow: "
            f"{opt_power} {_or([f'{p:g}' for p in allowed])}.")


def _or(items) -> str:
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " or " + items[-1]


# ----------------------------------------------------------------------------- the analysis
def analyse(df: pd.DataFrame, y_col: str, x_cols: list, groups_col: str | None = None, *,
            source: str = "", invented: bool = False, y_power=None, x_power=None, y_start: float = 0.0,
            x_start: float = 0.0, level: float = 0.95, censored=None) -> Analysis:
    """Run the engine over the chosen columns: suggestions, scan, fit at the best pair, predictions.

    ``y_power`` / ``x_power`` pin a power (None: the pair the scan ranks
    first); ``y_start`` / ``x_start`` are added before re-expressing;
    ``level`` is the level of every interval. Zeros and negatives never stop
    the analysis: the scan ranks only the rungs the data allow, and the notes
    say which were left out and which start would bring them back.
    ``censored`` (one flag per row of ``df``) marks y values below a detection limit, held at their limit:
    every step then uses the censored likelihood, and a half-limit line is kept for comparison.
    """
    n = len(df)
    y = cells.to_numbers(list(df[y_col]), y_col)
    X = np.column_stack([cells.to_numbers(list(df[c]), c) for c in x_cols]) if n else np.zeros((0, len(x_cols)))
    y, X = cells.pad_rows(y, X) if X.size else (y, X)
    if y.shape[0] != X.shape[0]:
        y, X = cells.pad_rows(y, X)
    names = [str(c) for c in x_cols]
    yname, xname = str(y_col), ", ".join(names)
    ok = np.isfinite(y) & np.isfinite(X).all(axis=1)
    yu, xu = y[ok], X[ok].ravel()
    notes = []
    base = tuple(unbend.LADDER)
    y_try = base + ((y_power,) if y_power is not None and y_power not in base else ())
    x_try = base + ((x_power,) if x_power is not None and x_power not in base else ())
    y_ok, y_out = _allowed(yu, y_try, y_start) if yu.size else (list(y_try), [])
    x_ok, x_out = _allowed(xu, x_try, x_start) if xu.size else (list(x_try), [])
    if y_power is not None and y_power in y_out:
        raise UnbendError(_pinned_refused(y_power, yu, y_start, yname, "--y-power", "--y-start", y_ok))
    if x_power is not None and x_power in x_out:
        raise UnbendError(_pinned_refused(x_power, xu, x_start, xname, "--x-power", "--x-start", x_ok))
    if y_out:
        notes.append(_left_out(yu, [p for p in y_out if p in base], y_start, yname, "--y-start"))
    if x_out:
        notes.append(_left_out(xu, [p for p in x_out if p in base], x_start, xname, "--x-start"))
    c = _censored_rows(censored, y.shape[0])
    scan = unbend.scan(y, X, y_start=y_start, x_start=x_start, rungs=y_ok, x_rungs=x_ok, censored=c)
    yp, xp = unbend.best_pair(y, X, y_start=y_start, x_start=x_start, y_power=y_power, x_power=x_power,
                              table=scan, censored=c)
    sy = sx = None
    if yu.size and np.all(yu + y_start > 0):
        sy = unbend.suggest_power(y, X, x_power=xp, level=level, y_start=y_start, x_start=x_start, censored=c)
    else:
        notes.append(f"Power for {yname}: not estimated, because the Box-Cox likelihood needs every {yname} above 0 "
                     f"and {_what_is_below(yu, y_start, yname)}. With --y-start {_nice_start(yu, y_start):g} it is "
                     "estimated; meanwhile the scan ranks the rungs these data allow.")
    if xu.size and np.all(xu + x_start > 0):
        sx = unbend.suggest_x_power(y, X, y_power=yp, level=level, y_start=y_start, x_start=x_start, censored=c)
    else:
        notes.append(f"Power for {xname}: not estimated, because the likelihood over the x power needs every "
                     f"{xname} above 0 and {_what_is_below(xu, x_start, xname)}. With --x-start "
                     f"{_nice_start(xu, x_start):g} it is estimated; meanwhile the scan ranks the rungs these data "
                     "allow.")
    f = unbend.fit(y, X, y_power=yp, x_power=xp, y_start=y_start, x_start=x_start, level=level, x_names=names,
                   y_name=yname, censored=c)
    new = _prediction_points(f)
    p = f.predict(new, level=level)
    spread = None
    half = _half_limit_line(y, X, c, notes, y_power=yp, x_power=xp, y_start=y_start, x_start=x_start, level=level,
                            x_names=names, y_name=yname) if c is not None else None
    if groups_col is not None and c is not None:
        notes.append(f"Spread against level across groups: not estimated, because {int(c.sum())} {yname} value(s) "
                     "are below a limit and the spread-against-level power has no censored version.")
    elif groups_col is not None:
        labels = np.array(cells.to_labels(list(df[groups_col]), groups_col) + [None] * max(0, y.size - len(df)),
                          dtype=object)[: y.size]
        try:
            spread = unbend.spread_power(y, labels, level=level, start=y_start)
        except DomainError:
            notes.append(f"Spread against level across groups: not estimated, because it needs every {yname} above "
                         f"0 and {_what_is_below(yu, y_start, yname)}; with --y-start {_nice_start(yu, y_start):g} "
                         "it is estimated.")
    return Analysis(source=source, y_name=yname, x_names=names, y=y, X=X, suggest_y=sy, suggest_x=sx,
                    scan=scan, fit=f, predictions=p, spread=spread, invented=invented, notes=notes, censored=c,
                    half_limit=half)


def _censored_rows(censored, n: int):
    """The censored flags as a boolean array of length n, or None when nothing is censored."""
    if censored is None:
        return None
    c = np.zeros(n, dtype=bool)
    given = np.asarray(censored, dtype=bool).reshape(-1)[:n]
    c[:given.size] = given
    return c if c.any() else None


def _half_limit_line(y, X, c, notes, **fit_args):
    """The half-limit line for comparison, or None with a note when it cannot be fitted at these powers."""
    try:
        return unbend.half_limit(y, X, c, **fit_args)
    except UnbendError as e:
        notes.append(f"The comparison line with half the limit substituted could not be fitted at these powers: {e}")
        return None


def censored_lines(a: Analysis) -> list:
    """Sentences about values below a limit: the method, how many, the half-limit comparison, predictions below
    the lowest limit (empty without censored values)."""
    f = a.fit
    if a.censored is None or not getattr(f, "n_censored", 0):
        return []
    lo, hi = f.limits[0], f.limits[-1]
    lim = f"limit {lo:.4g}" if len(f.limits) == 1 else f"limits {lo:.4g} to {hi:.4g}"
    out = [f"Method: maximum likelihood with censored values. {f.n_censored} of {f.n} values of {a.y_name} "
           f"({f.n_censored / f.n:.0%}) are below a detection {lim}; each counts as lying somewhere below its limit "
           "(normal errors on the re-expressed scale), so none is dropped or replaced by a guess. R² is not "
           "given: it is not defined with censored values."]
    h = a.half_limit
    if h is not None:
        k = len(f.x_names)
        slopes = "; ".join(f"a slope for {nm} of {h.coef[1 + j]:.4g} (censored fit: {f.coef[1 + j]:.4g})"
                           for j, nm in enumerate(f.x_names))
        out.append(f"For comparison only: substituting half the limit for each censored value (common practice, "
                   f"known to bias slopes and spreads) gives, at the same powers, {slopes}, and an intercept of "
                   f"{h.coef[0]:.4g} (censored fit: {f.coef[0]:.4g}). Use the censored fit.")
    below = a.predictions["below_limit"].to_numpy(dtype=bool) if "below_limit" in a.predictions else None
    if below is not None and below.any():
        out.append(f"{int(below.sum())} of the {below.size} predictions {'has' if below.sum() == 1 else 'have'} a "
                   f"median below the lowest limit "
                   f"({lo:.4g}): the data there were reported only as below a limit, so they are extrapolation "
                   "below the limits (flagged in the prediction table).")
    if len(f.x_names) == 1:
        out.append("The sheet of the model in built-in formulas is not written for a censored fit: its formulas refit "
                   "the line by least squares, which would take the limits as measured values.")
    return out


def _prediction_points(f) -> np.ndarray:
    lo, hi = f.x_min, f.x_max
    if len(lo) == 1:
        pts = np.quantile(f.residuals[f.x_names[0]].to_numpy(), [0.0, 0.25, 0.5, 0.75, 1.0])
        pts = np.append(pts, hi[0] * 1.25 if hi[0] > 0 else hi[0] + (hi[0] - lo[0]) * 0.25)
        return np.unique(pts)
    med = np.array([np.median(f.residuals[nm]) for nm in f.x_names])
    rows = []
    for q in (0.1, 0.5, 0.9):
        r = med.copy()
        r[0] = np.quantile(f.residuals[f.x_names[0]], q)
        rows.append(r)
    return np.array(rows)


def _fmt(v) -> str:
    if isinstance(v, (float, np.floating)):
        if not np.isfinite(v):
            return "unbounded" if np.isinf(v) else "-"
        return f"{v:.4g}"
    return str(v)


def _note(s) -> str:
    """The suggestion's note without its skipped-rows sentence (the summary lists those once)."""
    return s.note.split(f" {s.skipped} row(s) skipped")[0] if s.skipped else s.note


def _cap(text: str) -> str:
    return text[:1].upper() + text[1:]


def summary_lines(a: Analysis) -> list:
    """The report's summary in plain sentences (also printed by the command)."""
    f = a.fit
    out = [f"Data: {a.source}" if a.source else "Data: (given directly)",
           f"y = {a.y_name}; x = {', '.join(a.x_names)}. Rows used: {f.n}; rows skipped: {f.n_skipped}"
           + (" (row numbers count data rows: 1 is the first row under the header)." if f.skipped else ".")]
    if a.invented:
        out.append("These demo numbers are invented by unbend's own script; they are not measurements.")
    if a.reading is not None:  # issue 9: the file's own reading says which rows were skipped and why
        rd = a.reading.rows
        out[1] = (f"y = {a.y_name}; x = {', '.join(a.x_names)}. Rows used: {rd.n_used}; rows skipped: "
                  f"{rd.n_skipped} (row numbers are the rows of {a.reading.source}).")
        out.extend(a.reading.lines())
        out.extend(_date_origin_lines(a))
    elif f.skipped:
        out.append("Skipped: " + "; ".join(f"row {r}: {why}" for r, why in f.skipped[:5])
                   + ("; ..." if len(f.skipped) > 5 else "") + ".")
    top = a.scan.iloc[0]
    if top.y_power == f.y_power and top.x_power == f.x_power:
        out.append(f"Fit: a straight line of {line_words(f)}. This is the pair of rungs the scan ranks first of "
                   f"{len(a.scan)} (ranked on the likelihood, with pairs whose residuals curve or drift pushed down; "
                   "never on R\u00b2).")
    else:
        out.append(f"Fit: a straight line of {line_words(f)}, at the powers given. The scan of {len(a.scan)} pairs "
                   f"of rungs ranks {top.y_rung} of {a.y_name} with {top.x_rung} of {', '.join(a.x_names)} first "
                   "(ranked on the likelihood, with pairs whose residuals curve or drift pushed down; never on "
                   "R\u00b2).")
    out.extend(censored_lines(a))
    xs = " and ".join(a.x_names)
    for s, name, fitted, other, given in (
            (a.suggest_y, a.y_name, f.y_power, f.x_power, f"{xs} at {f.x_expr.label}"),
            (a.suggest_x, xs, f.x_power, f.y_power, f"{a.y_name} at {f.y_expr.label}")):
        if s is None:  # not estimable on these data; a note says why
            continue
        out.append(f"Power for {name} alone, with {given}: estimate {_fmt(s.estimate)}, {s.level:.0%} interval "
                   f"{_fmt(s.low)} to {_fmt(s.high)}. {_cap(_note(s))} "
                   + fitted_rung_words(s, fitted, other, a.scan, name))
    out.extend(a.notes)
    out.extend(_negative_median_lines(a))
    out.append(f.verdict)
    out.append(f.slope_reading())
    for w in f.warnings:
        if not w.startswith(f"{f.n_skipped} row(s) skipped"):
            out.append("Warning: " + w)
    if a.spread is not None:
        out.append(f"Spread against level across groups: power {_fmt(a.spread.estimate)} "
                   f"({_fmt(a.spread.low)} to {_fmt(a.spread.high)}); rung {a.spread.label}. {a.spread.note}")
    out.append("CAUTION: " + CAUTION)
    return out


def _negative_median_lines(a: Analysis) -> list:
    """Predictions whose median is below 0 from a line on y that were all 0 or above: said, with where."""
    from unbend.predicting import NEGATIVE_MEDIAN

    p = a.predictions
    neg = np.array([NEGATIVE_MEDIAN in str(n) for n in p["note"]], dtype=bool)
    if not neg.any():
        return []
    k, m = int(neg.sum()), len(p)
    where = ""
    if len(a.x_names) == 1:
        where = f" (at {a.x_names[0]} = {', '.join(f'{v:.4g}' for v in p[a.x_names[0]].to_numpy()[neg])})"
    t = a.fit.y_expr
    on = a.y_name if t.is_identity else f"the {t.label} of {a.y_name}"
    return [f"{k} of the {m} predictions {'has' if k == 1 else 'have'} a median below 0{where}, though no "
            f"{a.y_name} observed is: the line fitted to {on} gives values below 0 there, which a line on the log "
            f"or a root of {a.y_name} cannot do. Do not use {'it' if k == 1 else 'them'}; the scan shows how the "
            "other y rungs fare (--y-power pins one)."]


def _date_origin_lines(a: Analysis) -> list:
    """For a y or x read from dates: the count starts at the column's first date, which is a choice, not a zero.

    Every rung but raw depends on that choice; the rungs that need values above 0 need a start, since the first
    date counts as 0. Says which rung the fit uses and what a start means in days (or hours).
    """
    f, out = a.fit, []
    for c in a.reading.rows.columns:
        if not c.date_unit or c.date_origin is None:
            continue
        if c.label == a.y_name:
            expr, opt, what = f.y_expr, "--y-start", "y"
        elif c.label in a.x_names:
            expr, opt, what = f.x_expr, "--x-start", "x"
        else:
            continue
        origin = c.label[len(c.name) + 2:-1].split(" since ", 1)[-1]
        unit = c.date_unit
        s = (f"{c.name} counts {unit} from {origin}, the first date in the column, not from a natural zero. "
             f"Raw {c.name} (power 1) does not depend on that choice; every other rung does. ")
        if expr.power == 1:
            s += f"The fit uses raw {c.name}. "
        else:
            s += (f"The fit uses {unbend.rung_label(expr.power)} of {c.name}, which treats "
                  + (f"{origin}" if not expr.start else f"{expr.start:g} {unit} before {origin}")
                  + f" as the start of the process: use it only if that is so. ")
        if expr.start:
            s += f"{opt} {expr.start:g} counts from {expr.start:g} {unit} before {origin}."
        else:
            s += (f"If the process began earlier (an installation or start-up day), give the {unit} between as a "
                  f"start: {opt} N counts from N {unit} before {origin}. Log, reciprocal root and reciprocal need "
                  f"such a start, because the first date counts as 0.")
        out.append(s)
    return out


def prediction_points_text(a: Analysis) -> str:
    if len(a.x_names) == 1:
        return (f"Predictions at the smallest, lower-quartile, median, upper-quartile and largest observed "
                f"{a.x_names[0]}, and at 25% beyond the largest to show what extrapolation looks like.")
    return (f"Predictions at the 10th, 50th and 90th percentiles of {a.x_names[0]}, with the other x columns at "
            "their medians.")


def _prediction_rows(a: Analysis):
    p = a.predictions
    words = prediction_headers(a.fit.level)
    cols = ["median", "mean", "low", "high", "line_low", "line_high", "outside_range", "note"]
    below = "below_limit" in p
    if below:
        from .wording import CENSORED_MEAN_HEADER
        words["mean"] = CENSORED_MEAN_HEADER
    header = list(a.x_names) + [words[c] for c in cols] + (["median below the lowest limit"] if below else [])
    rows = []
    for i in range(len(p)):
        r = [p[c].iloc[i] for c in a.x_names]
        r += [p[c].iloc[i] for c in cols[:-2]]
        r += ["yes" if p["outside_range"].iloc[i] else "no", p["note"].iloc[i]]
        if below:
            r.append("yes" if p["below_limit"].iloc[i] else "no")
        rows.append(r)
    return header, rows




# ----------------------------------------------------------------------------- the workbook
_FACE = "Liberation Sans"  # a metric match for the common sans fonts, present wherever LibreOffice is
S_TITLE = Style(font=_FACE, bold=True, size=14)
S_HEADER = Style(font=_FACE, bold=True, fill="E8EEF4", wrap=True, valign="bottom", halign="center")
S_NOTE = Style(font=_FACE, italic=True, color="555555")
S_CAUTION = Style(font=_FACE, bold=True, color="9C2A00")
WARN = "FBE3D6"
#: Formats chosen by the size of a number (about four significant digits), see :func:`sheets.smart_format`.
_SMART = ["#,##0", "0.0", "0.000", "0.00000", "0.00E+00"]


def _smart_index(v: np.ndarray) -> np.ndarray:
    a = np.abs(np.asarray(v, dtype=float))
    with np.errstate(invalid="ignore"):
        return np.select([a >= 1000, a >= 100, (a >= 1) | (a == 0), a >= 0.001], [0, 1, 2, 3], 4)


def _smart_style(v, base: Style | None = None) -> Style | None:
    if not isinstance(v, (float, np.floating)) or not np.isfinite(v):
        return base
    return (base or Style()).with_(num_format=_SMART[int(_smart_index(np.array([v]))[0])])


def _wrapped(sh, r, text, width, style=None, per_line=120):
    sh.merge(r, 1, width, text, (style or Style()).with_(wrap=True, valign="top"))
    sh.height(r, 15 * max(1, len(text) // per_line + 1))


def _small_table(sh, top, left, header, rows, *, number_format=GENERAL, formats=None, row_formats=None,
                 row_fill=None, text_style=None):
    """A header row and a few data rows written cell by cell; returns the row after the last one.

    ``formats`` maps a header to a number format for its column (SMART: by each
    number's size); ``row_formats`` maps a row's first cell to a format for its
    numbers; ``row_fill(row) -> colour or None`` shades a whole row.
    """
    formats = formats or {}
    row_formats = row_formats or {}
    longest = max((len(str(h)) for h in header), default=0)
    for j, h in enumerate(header):
        sh.text(top, left + j, h, S_HEADER)
    sh.height(top, 15 * (1 + longest // 14))
    col_fmt = [formats.get(h, number_format) for h in header]
    r = top + 1
    for row in rows:
        row = list(row)
        fill = row_fill(row) if row_fill else None
        rf = row_formats.get(row[0]) if row else None
        for j, v in enumerate(row):
            if isinstance(v, np.generic):
                v = v.item()
            base = text_style if isinstance(v, str) else None
            if fill:
                base = (base or Style()).with_(fill=fill)
            if isinstance(v, float):
                nf = rf or (col_fmt[j] if j < len(col_fmt) else number_format)
                st = _smart_style(v, base) if nf == SMART else (base or Style()).with_(num_format=nf)
            else:
                st = base
            sh.value(r, left + j, v, st)
        r += 1
    return r


def _summary_sheet(book, a):
    sh = book.sheet("Summary")
    sh.text(1, 1, f"unbend report: {a.y_name} against {', '.join(a.x_names)}", S_TITLE)
    header, rows = _prediction_rows(a)
    width = max(len(header), 9)
    r = 3
    for line in summary_lines(a):
        _wrapped(sh, r, line, width, S_CAUTION if line.startswith(("CAUTION", "Warning")) else None)
        r += 1
    r += 1
    from .wording import CENSORED_PREDICTION_HELP
    helps = CENSORED_PREDICTION_HELP if "below_limit" in a.predictions else PREDICTION_HELP
    _wrapped(sh, r, prediction_points_text(a) + " " + helps, width, S_NOTE)
    r += 1
    out_col = header.index("outside x range")
    _small_table(sh, r, 1, header, rows, number_format=SMART, row_fill=lambda row: WARN if row[out_col] == "yes"
                 else None)
    for j in range(1, width + 1):
        sh.width(j, 15)
    sh.width(header.index("note") + 1, 40)  # the note (a censored fit adds a column after it)
    return sh


def _scan_sheet(book, a):
    sh = book.sheet("Scan")
    sh.text(1, 1, "Every pair of rungs, best first", S_TITLE)
    _wrapped(sh, 2, SCAN_HELP, 13, S_NOTE)
    _small_table(sh, 4, 1, [SCAN_HEADERS[c] for c in a.scan.columns], a.scan.itertuples(index=False),
                 formats={"curvature p": P_FORMAT, "pattern p": P_FORMAT, "spread p": P_FORMAT,
                          "normality p": P_FORMAT, "R\u00b2 re-expressed": "0.0000", "R\u00b2 original units": "0.0000",
                          "log-likelihood (y units)": "0.00"})
    for j, w in {1: 7, 2: 9, 3: 9, 4: 16, 5: 16, 6: 14, 7: 12, 8: 12, 9: 12, 10: 12, 11: 13, 12: 13, 13: 52,
                 14: 10}.items():
        sh.width(j, w)


def _fit_sheet(book, a):
    f = a.fit
    sh = book.sheet("Fit")
    sh.text(1, 1, f"The line: {f.explain().split('. ', 1)[0][len('A straight line of '):]}", S_TITLE)
    items = f.rows() if a.reading is None else a.reading.rows.into_rows(f.rows())  # rows skipped, by reason
    wrap = Style(wrap=True, valign="top", halign="left")
    _small_table(sh, 3, 1, ["item", "value"], items, text_style=wrap,
                 row_formats={k: P_FORMAT for k, _ in items if k.endswith(": p") or " p (" in k})
    for i, (k, v) in enumerate(items):
        if isinstance(v, str) and len(v) > 70:
            sh.height(4 + i, 15 * (len(v) // 70 + 1))
    sh.width(1, 50)
    sh.width(2, 75)


def _residual_sheet(book, a):
    """One row per data row used, written as one block, with three native charts beside it."""
    f = a.fit
    sh = book.sheet("Residuals")
    res = f.residuals
    n = f.n
    large = np.abs(res["standardized"].to_numpy(float)) > 2
    infl = res["cooks_distance"].to_numpy(float) > 4.0 / n
    flags = np.where(large & infl, "large residual, influential",
                     np.where(large, "large residual", np.where(infl, "influential", ""))).tolist()
    if "censored" in res:  # a censored row has no residual: its y is only known to lie below its limit
        flags = ["below a limit (no residual)" if c_ else fl for c_, fl in zip(res["censored"].tolist(), flags)]
    if a.reading is not None:  # rows of the sheet or file, not positions among the rows used
        res["row"] = a.reading.row_numbers[res["row"].to_numpy(dtype=int) - 1]
    cols = ["row", "y"] + list(f.x_names) + ["y_re"] + [f"{nm}_re" for nm in f.x_names] + \
           ["fitted", "residual", "standardized", "studentized", "leverage", "cooks_distance", "flag"]
    nice = {"row": "data row", "y": a.y_name, "y_re": f"{a.y_name} re-expressed", "fitted": "fitted (re-expressed)",
            "residual": "residual", "standardized": "standardized residual", "studentized": "studentized residual",
            "leverage": "leverage", "cooks_distance": "Cook's distance", "flag": "flag"}
    for nm in f.x_names:
        nice[nm] = nm
        nice[f"{nm}_re"] = f"{nm} re-expressed"
    _wrapped(sh, 1, ("One row per data row used (data row = the row in the data file). " if a.reading is not None
                     else "One row per data row used (data row 1 = the first row under the header). ") +
             "Standardized residuals beyond \u00b12 are flagged 'large residual'; a Cook's distance above 4/n "
             "(leverage times residual: how much the row moves the line) is flagged 'influential'.", len(cols), S_NOTE,
             per_line=150)
    header = [nice[c] for c in cols]
    for j, h in enumerate(header):
        sh.text(2, 1 + j, h, S_HEADER)
    sh.height(2, 15 * (1 + max(len(h) for h in header) // 14))
    fixed = Style(num_format="0.0000")
    smart = [Style(num_format=fm) for fm in _SMART]
    block = []
    for c in cols:
        if c == "flag":
            block.append(Column("text", flags))
        elif c == "row":
            block.append(Column("number", res["row"].to_numpy(float)))
        elif c in ("residual", "standardized", "studentized", "leverage", "cooks_distance"):
            block.append(Column("number", res[c].to_numpy(float), fixed))
        else:
            v = res[c].to_numpy(float)
            block.append(Column("number", v, styles=smart, style_index=_smart_index(v)))
    sh.block(3, 1, block, n)
    last = 2 + n
    ci = {c: i + 1 for i, c in enumerate(cols)}
    rng = lambda c: (3, last, ci[c])  # noqa: E731
    x0 = f.x_names[0]
    anchor = len(cols) + 2
    for j in range(1, len(cols) + 1):
        sh.width(j, 14)
    sh.width(len(cols), 24)
    sh.freeze(3, 1)
    sh.scatter("Before: original units", rng(x0), rng("y"), x0, a.y_name, 2, anchor)
    sh.scatter(f"After: {f.y_expr.label} of {a.y_name} against {f.x_expr.label} of {x0}", rng(f"{x0}_re"),
               rng("y_re"), f"{f.x_expr.label} of {x0}", f"{f.y_expr.label} of {a.y_name}", 21, anchor)
    sh.scatter("Residuals against fitted: look for a curve or a fan", rng("fitted"), rng("residual"),
               "fitted (re-expressed)", "residual", 40, anchor)


def _spread_sheet(book, a):
    sh = book.sheet("Spread")
    sh.text(1, 1, "Spread against level across groups", S_TITLE)
    wrap = Style(wrap=True, valign="top", halign="left")
    _small_table(sh, 3, 1, ["item", "value"], a.spread.rows(), text_style=wrap)
    d = a.spread.detail
    _small_table(sh, 16, 1, ["group", "n", "level (median)", "spread (IQR)", "used"],
                 [[g, n_, lv, sp, "yes" if u else "no"] for g, n_, lv, sp, u in d.itertuples(index=False)])
    sh.width(1, 28)
    sh.width(2, 70)


def build_report(a: Analysis, path) -> str:
    """Write the report workbook to ``path`` (not atomically; see :func:`write_report`)."""
    book = Book(path)
    book.properties(title=f"unbend report: {a.y_name} against {', '.join(a.x_names)}",
                    comments="Written by unbend. Check the residuals before using any number.")
    book.custom_property("unbend run", a.run_id)
    _summary_sheet(book, a)
    _scan_sheet(book, a)
    _fit_sheet(book, a)
    _residual_sheet(book, a)
    if a.spread is not None and a.spread.detail is not None:
        _spread_sheet(book, a)
    f = a.fit
    readings = getattr(a, "readings", None)  # `--readings` (udfs/calibrate.py)
    if readings is not None:
        from .calibrate import add_readings_sheet
        add_readings_sheet(book, readings, f.x_names[0], a.y_name)
    if len(f.x_names) == 1 and getattr(f, "n_censored", 0):
        pass  # the formula sheet refits by least squares, which would take the limits as values: not written
    elif len(f.x_names) == 1:
        from .portable import add_portable_sheet
        new = a.predictions[f.x_names[0]].to_numpy()
        add_portable_sheet(book, a.y, a.X[:, 0], new, y_power=f.y_power, x_power=f.x_power,
                           y_start=f.y_expr.start, x_start=f.x_expr.start, level=f.level, invented_data=a.invented,
                           y_name=a.y_name, x_name=f.x_names[0], title="Model in formulas", capacity=None,
                           readings=() if readings is None else readings.table["reading"].to_numpy())
    for sh in book.sheets[:-1] if len(f.x_names) == 1 and not getattr(f, "n_censored", 0) else book.sheets:
        sh.printable()
    book.close()
    return str(path)


def write_report(a: Analysis, out_path) -> str:
    """Write the report workbook atomically (a temporary file in the same folder, then one rename)."""
    return atomic_save(lambda tmp: build_report(a, tmp), out_path)


def write_plots(a: Analysis, folder) -> list:
    """PNG plots: before/after scatter, residuals against fitted, the scan as a picture (see udfs/plots.py)."""
    from .plots import draw, plot_data

    return draw(plot_data(a), folder)
