"""`unbend groups`: many series in one file, one re-expression for all, a line for each.

The data are read by the same rules as ``unbend report`` (:func:`unbend.udfs.files.read_data`, so every row
is used or skipped with its reason counted), plus Parquet. :func:`unbend.fit_groups` does the statistics; this
module writes what it found: a workbook (the common powers, the summary sentences, the series table worst
residual checks first, the equal-slopes test, a native chart of every series' slope with its interval) and two
PNG plots (every series re-expressed on one panel; the worst ten, one panel each). Files are staged and put in
place together (:class:`unbend.udfs.outputs.ReportFiles`), never over the input.

numpy, pandas, the engine, XlsxWriter and matplotlib are imported here, so the command's parser (``cli.py``)
stays light; this module is imported only when the command runs.
"""
from __future__ import annotations

import os
import uuid
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

import unbend
from unbend.express import Reexpression, rung_label
from unbend.fitting import CAUTION

from .outputs import atomic_save
from .report import _nice_start  # the start the report proposes, so both commands propose the same
from .wording import group_headers
from .xlsx import P_FORMAT, Book, Style

__all__ = ["GroupsAnalysis", "analyse_groups", "summary_lines", "series_order", "write_workbook", "write_plots",
           "plot_data",
           "PLOT_FILES", "TABLE_COLS", "cmd_groups"]

#: The PNG files written in the plots folder.
PLOT_FILES = ["all_series.png", "worst_series.png"]
#: Series in the small multiples.
WORST_SHOWN = 10
#: Series drawn in the workbook's slope chart (the worst ones first when there are more).
CHART_MAX = 100
#: The series table's columns (engine names; headers from :data:`unbend.udfs.wording.GROUP_HEADERS`).
TABLE_COLS = ["group", "n", "skipped", "slope", "slope_low", "slope_high", "intercept", "resid_sd", "r2",
              "curvature_p", "pattern_p", "spread_p", "normality_p", "verdict", "own_y_power", "own_y_low",
              "own_y_high", "own_y_differs", "own_x_power", "own_x_low", "own_x_high", "own_x_differs", "note"]
P_COLS = {"curvature_p", "pattern_p", "spread_p", "normality_p"}


@dataclass
class GroupsAnalysis:
    """What ``unbend groups`` read and fitted."""

    fit: object                 # unbend.GroupFit
    y_name: str
    x_name: str
    by_name: str
    source: str
    y: np.ndarray               # rows handed to fit_groups (the reading's used rows)
    x: np.ndarray
    groups: np.ndarray
    row_numbers: np.ndarray     # the file's row of each of those
    reading: object = None      # unbend.udfs.files.DataReading
    invented: bool = False
    run_id: str = field(default_factory=lambda: uuid.uuid4().hex)

    @property
    def rows_skipped(self) -> int:
        """Every row not in any line's rows: skipped while reading, plus rows whose group label is blank."""
        return (self.reading.rows.n_skipped if self.reading is not None else 0) + self.fit.n_skipped


def analyse_groups(reading, *, y_power=None, x_power=None, y_start=0.0, x_start=0.0, level=0.95,
                   invented=False) -> GroupsAnalysis:
    """:func:`unbend.fit_groups` on the rows a :class:`~unbend.udfs.files.DataReading` used."""
    rows = reading.rows
    used = np.asarray(rows.used, bool)
    g = np.array([v for v, u in zip(reading.groups, used) if u], dtype=object)
    y = reading.y
    x = reading.X[:, 0]
    for v, power, start, name, opt in ((y, y_power, y_start, reading.y_label, "y"),
                                       (x, x_power, x_start, reading.x_labels[0], "x")):
        low = float(np.min(v)) + start if v.size else 1.0
        if power is None and not low > 0:  # choosing a power needs every value above 0 (Box-Cox, Box-Tidwell)
            raise unbend.UnbendError(
                f"{name} has values at or below 0 after the start (smallest {low:g}), so its power cannot be chosen "
                f"from the data. Add --{opt}-start (such as {_nice_start(v, start):g}) or pin --{opt}-power 1 (raw).")
    gf = unbend.fit_groups(y, x, g, y_power=y_power, x_power=x_power, y_start=y_start, x_start=x_start,
                           level=level)
    return GroupsAnalysis(fit=gf, y_name=reading.y_label, x_name=reading.x_labels[0], by_name=reading.groups_name,
                          source=reading.source, y=y, x=x, groups=g, row_numbers=reading.row_numbers,
                          reading=reading, invented=invented)


# ----------------------------------------------------------------------------- words
def _n(k: int, one: str, many: str | None = None) -> str:
    return f"{k} {one if k == 1 else (many or one + 's')}"


def _f(v) -> str:
    return f"{v:.4g}" if np.isfinite(v) else "-"


def _label(v) -> str:
    return v.isoformat() if hasattr(v, "isoformat") else str(v)


def power_sentence(what: str, name: str, power: float, pinned: bool, s, level: float) -> str:
    """One sentence about a common power: as given, or the estimate, its interval and the rung used."""
    if pinned or s is None:
        return f"Power for {name} ({what}), every series: {power:g} ({rung_label(power)}), as given."
    return (f"Power for {name} ({what}), all series together (a line per series): estimate {_f(s.estimate)}, "
            f"{level * 100:g}% interval {_f(s.low)} to {_f(s.high)}; used: {power:g} ({rung_label(power)})."
            + (f" {s.note}" if s.note else ""))


def worst_sentence(a: GroupsAnalysis, k: int = 3) -> str:
    """The series whose residual checks fail, worst first (at most ``k`` named), or that none fails."""
    gf = a.fit
    failing = set(gf._failing().tolist())
    if not failing:
        return "No series fails a residual check (curvature, pattern or spread)."
    w = gf.worst(len(failing))
    named = []
    for _, r in w.head(k).iterrows():
        ps = [f"{nm} p = {r[c]:.3g}" for nm, c in (("curvature", "curvature_p"), ("pattern", "pattern_p"),
                                                   ("spread", "spread_p")) if np.isfinite(r[c])]
        named.append(f"{_label(r['group'])} ({', '.join(ps)})")
    more = len(failing) - len(named)
    return (f"Worst residual checks first: {'; '.join(named)}" + (f"; and {_n(more, 'more series', 'more series')}"
                                                                  if more else "") + ".")


def summary_lines(a: GroupsAnalysis) -> list:
    """The sentences of the summary (printed and at the top of the workbook)."""
    gf = a.fit
    out = [f"Data: {a.source}",
           f"y = {a.y_name}; x = {a.x_name}; series = {a.by_name}. {_n(gf.n_groups, 'series', 'series')} "
           f"({gf.n_groups_used} with a line); rows used: {gf.n}; rows skipped: {a.rows_skipped}"
           + (f" (row numbers are the rows of {a.source})." if a.reading is not None else ".")]
    if a.invented:
        out.append("These demo numbers are invented by unbend's own script; they are not measurements.")
    if a.reading is not None:
        out.extend(a.reading.lines())
    if gf.n_skipped:
        rows = [int(a.row_numbers[r - 1]) for r, why in gf.skipped[:5]]
        out.append(f"Skipped {_n(gf.n_skipped, 'row')} whose {a.by_name} is blank (such as row "
                   f"{', '.join(map(str, rows))}).")
    c = gf.common
    out.append(power_sentence("y", a.y_name, c.y_power, c.y_pinned, c.y, gf.level))
    out.append(power_sentence("x", a.x_name, c.x_power, c.x_pinned, c.x, gf.level))
    if c.note:
        note = c.note.replace(" whole groups)", " whole series)")  # the engine's word for a series is "group"
        out.append(note[:1].upper() + note[1:] + ("" if note.endswith(".") else "."))
    out.append(gf.explain("series"))
    a_, b_ = gf.equal_slopes_df
    if np.isfinite(gf.equal_slopes_p):
        out.append(f"Equal slopes: F = {gf.equal_slopes_f:.4g} on {a_} and {b_} degrees of freedom, p = "
                   f"{gf.equal_slopes_p:.3g}; the one slope every series would share is {gf.common_slope:.4g}.")
    out.append(worst_sentence(a))
    left = gf.left_out
    if len(left):
        shown = "; ".join(f"{_label(r.group)}: {r.reason}" for r in left.head(5).itertuples())
        out.append(f"Left out: {shown}" + (f"; and {len(left) - 5} more (see the Series sheet)." if len(left) > 5
                                            else "."))
    out.append("CAUTION: " + CAUTION)
    return out


# ----------------------------------------------------------------------------- the series table
def series_order(gf) -> pd.DataFrame:
    """The table's rows: series with a line, worst residual checks first (as ``GroupFit.worst``), then the
    series left out, in label order."""
    worst = gf.worst(gf.n_groups_used)
    left = gf.table[~gf.table["used"]]
    return pd.concat([worst, left], ignore_index=True)


def _table_rows(gf) -> list:
    rows = []
    for _, r in series_order(gf).iterrows():
        row = []
        for c in TABLE_COLS:
            if c == "group":
                v = r["group"]
                v = v if isinstance(v, (str, int, float)) and not isinstance(v, bool) else _label(v)
            elif c == "note":
                v = r["reason"] if not r["used"] else ""
            elif c in ("own_y_differs", "own_x_differs"):
                own = r[c.replace("differs", "power")]
                v = ("yes" if r[c] else "no") if r["used"] and np.isfinite(own) else ""
            else:
                v = r[c]
                if isinstance(v, (float, np.floating)) and not np.isfinite(v):
                    v = None
            row.append(v)
        rows.append(row)
    return rows


# ----------------------------------------------------------------------------- the workbook
_FACE = "Liberation Sans"
S_TITLE = Style(font=_FACE, bold=True, size=14)
S_HEADER = Style(font=_FACE, bold=True, fill="E8EEF4", wrap=True, valign="bottom", halign="center")
S_NOTE = Style(font=_FACE, italic=True, color="555555")
S_CAUTION = Style(font=_FACE, bold=True, color="9C2A00")
S_WRAP = Style(wrap=True, valign="top", halign="left")
S_NUM = Style(num_format="0.0000")
S_P = Style(num_format=P_FORMAT)
S_FAIL = Style(fill="FBE3D6")
WORST_HELP = ("One row per series, the worst residual checks first: series that fail more checks (curvature and "
              "spread at 5%, pattern at 1%), then by their smallest p-value relative to its cut-off; series left "
              "out (too few rows, x or y that does not vary) last. Shaded rows fail at least one check. Each "
              "series' own power estimate and interval sit beside the common one: 'wants another power' means its "
              "own interval leaves the common power out.")


def _wrapped(sh, r, text, width, style=None, per_line=110):
    sh.merge(r, 1, width, text, (style or Style()).with_(wrap=True, valign="top"))
    sh.height(r, 15 * max(1, len(text) // per_line + 1))


def _item_rows(a: GroupsAnalysis) -> list:
    """The labelled rows of the fit, with the reading's skipped rows by reason added."""
    gf = a.fit
    items = []
    for k, v in gf.rows():
        if k == "rows skipped":
            items.append(("rows skipped: blank series label", v))
            if a.reading is not None:
                items.append(("rows skipped while reading the file", a.reading.rows.n_skipped))
                items.extend(a.reading.rows.table_rows())
            items.append(("rows skipped, in all", a.rows_skipped))
        elif k == "rows skipped, by reason":
            continue
        else:
            items.append((k, v))
    return items


def _summary_sheet(book, a):
    sh = book.sheet("Summary")
    sh.text(1, 1, f"unbend groups: {a.y_name} against {a.x_name}, one line per {a.by_name}", S_TITLE)
    r = 3
    for line in summary_lines(a):
        _wrapped(sh, r, line, 8, S_CAUTION if line.startswith("CAUTION") else None)
        r += 1
    r += 1
    sh.text(r, 1, "Common powers, intervals, rungs and the equal-slopes test", S_TITLE)
    r += 1
    sh.text(r, 1, "item", S_HEADER)
    sh.text(r, 2, "value", S_HEADER)
    for k, v in _item_rows(a):
        r += 1
        sh.text(r, 1, k, S_WRAP)
        if isinstance(v, (float, np.floating)):
            sh.value(r, 2, float(v), (S_P if k.endswith(": p") else S_NUM).with_(halign="left"))
        else:
            v = v.item() if isinstance(v, np.generic) else v
            sh.value(r, 2, v, S_WRAP if isinstance(v, str) else Style(halign="left"))
            if isinstance(v, str) and len(v) > 90:
                sh.height(r, 15 * (len(v) // 90 + 1))
    sh.width(1, 42)
    sh.width(2, 80)
    for j in range(3, 9):
        sh.width(j, 4)


def _series_sheet(book, a):
    gf = a.fit
    sh = book.sheet("Series")
    words = group_headers(gf.level)
    words["note"] = "left out because"
    sh.text(1, 1, f"Every series ({a.by_name}), worst residual checks first", S_TITLE)
    _wrapped(sh, 2, WORST_HELP, 12, S_NOTE, per_line=160)
    header = [words[c] for c in TABLE_COLS]
    for j, h in enumerate(header):
        sh.text(4, 1 + j, h, S_HEADER)
    sh.height(4, 45)
    rows = _table_rows(gf)
    failing = set(gf._failing().tolist())
    row_fail = [g in failing for g in series_order(gf)["group"].tolist()]
    for i, row in enumerate(rows):
        rr = 5 + i
        fail = row_fail[i]
        for j, (c, v) in enumerate(zip(TABLE_COLS, row)):
            st = S_P if c in P_COLS else (S_NUM if isinstance(v, (float, np.floating)) else None)
            if c in ("verdict", "note"):
                st = Style()
            if fail:
                st = (st or Style()).with_(fill="FBE3D6")
            sh.value(rr, 1 + j, v.item() if isinstance(v, np.generic) else v, st)
    last = 4 + max(len(rows), 1)
    sh.table(4, 1, last, len(header), "Series", header, "Table Style Light 1", S_HEADER)
    for j, c in enumerate(TABLE_COLS):
        sh.width(1 + j, 60 if c == "verdict" else 28 if c == "note" else 11)
    sh.freeze(5, 2)


def _slopes_sheet(book, a):
    """Every series' slope with its interval, as numbers and as a native chart (XlsxWriter)."""
    gf = a.fit
    sh = book.sheet("Slopes")
    t = gf.table[gf.table["used"]]
    if len(t) > CHART_MAX:
        keep = set(gf.worst(CHART_MAX)["group"].tolist())
        t = t[t["group"].isin(keep)]
        note = (f"The chart shows the {CHART_MAX} series with the worst residual checks of {gf.n_groups_used}; "
                "the Series sheet lists them all.")
    else:
        note = "Every series with a line."
    t = t.sort_values(["slope", "group"], key=lambda s: s if s.name == "slope" else s.map(str), kind="mergesort")
    pct = f"{gf.level * 100:g}%"
    sh.text(1, 1, f"Slopes on the common scale ({rung_label(gf.y_power)} of {a.y_name} against "
                  f"{rung_label(gf.x_power)} of {a.x_name}), with {pct} intervals", S_TITLE)
    _wrapped(sh, 2, note + f" Sorted by slope. The line across is the one slope every series would share "
             f"({gf.common_slope:.4g}); equal slopes F test p = {gf.equal_slopes_p:.3g}. Slopes are comparable "
             "because every series uses the same powers.", 8, S_NOTE)
    header = ["series", "slope", f"slope low {pct}", f"slope high {pct}", "above the slope", "below the slope",
              "one slope for all"]
    for j, h in enumerate(header):
        sh.text(4, 1 + j, h, S_HEADER)
    sh.height(4, 30)
    for i, r in enumerate(t.itertuples()):
        rr = 5 + i
        g = r.group
        sh.value(rr, 1, g if isinstance(g, (str, int, float)) and not isinstance(g, bool) else _label(g))
        for j, v in enumerate([r.slope, r.slope_low, r.slope_high, r.slope_high - r.slope, r.slope - r.slope_low,
                               gf.common_slope]):
            sh.number(rr, 2 + j, float(v), S_NUM)
    for j in range(1, 8):
        sh.width(j, 13)
    n = len(t)
    if n == 0:
        return
    first, last = 5, 4 + n
    name = "Slopes"
    from xlsxwriter.utility import xl_range_abs

    def ref(col):  # a custom error bar takes its values as a formula (a list would be literal values)
        return f"='{name}'!{xl_range_abs(first - 1, col, last - 1, col)}"

    plus = (t["slope_high"] - t["slope"]).to_numpy(float).tolist()
    minus = (t["slope"] - t["slope_low"]).to_numpy(float).tolist()
    chart = book.wb.add_chart({"type": "line"})
    cats = [name, first - 1, 0, last - 1, 0]
    chart.add_series({
        "name": "slope", "categories": cats, "values": [name, first - 1, 1, last - 1, 1],
        "line": {"none": True}, "marker": {"type": "circle", "size": 4, "fill": {"color": "#2A6F97"},
                                           "border": {"color": "#2A6F97"}},
        "y_error_bars": {"type": "custom", "plus_values": ref(4), "minus_values": ref(5), "plus_data": plus,
                         "minus_data": minus, "end_style": 1,
                         "line": {"color": "#2A6F97"}}})
    chart.add_series({"name": "one slope for all", "categories": cats, "values": [name, first - 1, 6, last - 1, 6],
                      "line": {"color": "#C8553D", "dash_type": "dash", "width": 1.25}, "marker": {"type": "none"}})
    chart.set_title({"name": f"Slope of each series with its {pct} interval", "name_font": {"size": 12}})
    chart.set_x_axis({"name": a.by_name, "num_font": {"rotation": -45, "size": 8}, "label_position": "low"})
    chart.set_y_axis({"name": "slope (common scale)", "num_format": "General",
                      "major_gridlines": {"visible": True, "line": {"color": "#D9D9D9"}}})
    chart.set_legend({"position": "bottom"})
    chart.set_size({"width": max(640, min(1600, 24 * n + 160)), "height": 420})
    sh.ws.insert_chart(3, 8, chart)


def build_workbook(a: GroupsAnalysis, path) -> str:
    """Write the workbook to ``path`` (not atomically; see :func:`write_workbook`)."""
    book = Book(path)
    book.properties(title=f"unbend groups: {a.y_name} against {a.x_name} by {a.by_name}",
                    comments="Written by unbend. Check each series' residuals before using any number.")
    book.custom_property("unbend run", a.run_id)
    _summary_sheet(book, a)
    _series_sheet(book, a)
    _slopes_sheet(book, a)
    for sh in book.sheets:
        sh.printable()
    book.close()
    return str(path)


def write_workbook(a: GroupsAnalysis, out_path) -> str:
    """The workbook, saved atomically."""
    return atomic_save(lambda tmp: build_workbook(a, tmp), out_path)


# ----------------------------------------------------------------------------- plots
def _re(a: GroupsAnalysis):
    gf = a.fit
    ty = Reexpression(gf.y_power, gf.y_start)
    tx = Reexpression(gf.x_power, gf.x_start)
    return ty, tx


def plot_data(a: GroupsAnalysis) -> dict:
    """Everything the two PNGs show, as arrays and text (picklable, no engine objects; drawn by
    :func:`unbend.udfs.plots.draw_groups`, in a second process when there is a second core)."""
    gf = a.fit
    ty, tx = _re(a)
    t = gf.table[gf.table["used"]]
    label_of = {k: i for i, k in enumerate(t["group"].tolist())}
    code = np.array([label_of.get(v, -1) for v in a.groups.tolist()])
    ok = code >= 0
    yr = np.full(a.y.shape, np.nan)
    xr = np.full(a.x.shape, np.nan)
    yr[ok] = ty.apply(a.y[ok])
    xr[ok] = tx.apply(a.x[ok])
    worst = gf.worst(WORST_SHOWN)
    failing = set(gf._failing().tolist())
    groups = t["group"].tolist()
    bad = np.array([g in failing for g in groups], dtype=bool)
    named = set(worst["group"].head(5).tolist())
    panels = []
    for r in worst.itertuples():
        ps = [f"{nm} {_pshort(v)}" for nm, v in (("curv.", r.curvature_p), ("patt.", r.pattern_p),
                                                 ("spread", r.spread_p)) if np.isfinite(v)]
        panels.append({"code": label_of[r.group], "failing": r.group in failing, "intercept": float(r.intercept),
                       "slope": float(r.slope), "title": f"{_label(r.group)}\n" + ", ".join(ps)})
    return {"run_id": a.run_id, "by_name": a.by_name, "ylab": f"{ty.label} of {a.y_name}",
            "xlab": f"{tx.label} of {a.x_name}", "xr": xr, "yr": yr, "code": code, "bad": bad,
            "intercept": t["intercept"].to_numpy(float), "slope": t["slope"].to_numpy(float),
            "named": [(int(i), _label(groups[i])) for i in np.flatnonzero(bad) if groups[i] in named],
            "panels": panels}


def write_plots(a: GroupsAnalysis, folder) -> list:
    """all_series.png (every series re-expressed, with its line) and worst_series.png (the worst ten)."""
    from .plots import draw_groups

    return draw_groups(plot_data(a), folder)


def _pshort(p: float) -> str:
    return "p<0.001" if p < 0.001 else f"p={p:.3f}"


# ----------------------------------------------------------------------------- the command
def print_summary(a: GroupsAnalysis) -> None:
    from .cli import print_sentences

    print_sentences("unbend groups summary", summary_lines(a))
    w = a.fit.worst(5)
    if len(w):
        print("\nWorst residual checks first (top 5 of", a.fit.n_groups_used, "series):")
        cols = ["group", "n", "slope", "slope_low", "slope_high", "curvature_p", "pattern_p", "spread_p",
                "own_y_power"]
        with pd.option_context("display.width", 200):
            print(w[cols].to_string(index=False, float_format=lambda v: f"{v:.4g}"))


def out_path(args, data: str) -> str:
    from .cli import _out_path
    return _out_path(args, data, "_unbend_groups.xlsx")


def cmd_groups(args, drawer=None) -> int:
    """``unbend groups DATA --y COLUMN --x COLUMN --by COLUMN``: read, fit, write, print.

    ``drawer``: a :class:`unbend.udfs.plots.Drawer` already started (the command starts one before importing
    this module); None starts one here."""
    from .cli import Progress, _model_choices
    from .files import read_data
    from .outputs import ReportFiles
    from .plots import Drawer, draw_groups

    prog = Progress(args.quiet)
    data = os.path.abspath(args.data)
    out = out_path(args, data)
    choices = _model_choices(args)
    with ReportFiles(out, PLOT_FILES, overwrite=args.overwrite) as files:  # checks --out before any work
        with drawer or Drawer() as drawer:  # a second process loads matplotlib while this one reads and fits
            prog.step(f"reading {os.path.basename(data)}")
            reading = read_data(data, args.y, [args.x], sheet=args.sheet, header_row=args.header_row,
                                decimal=args.decimal, hidden=args.hidden or "auto", groups=args.by)
            prog.step("choosing the common powers and fitting every series")
            a = analyse_groups(reading, **choices)
            drawer.submit(plot_data(a), files.staged_plots, draw_groups)
            prog.step("writing the workbook and drawing the plots")
            write_workbook(a, files.staged_workbook)
            drawer.result()
        book, pngs = files.publish()
    print_summary(a)
    print("\nFiles written:")
    for p in [book] + pngs:
        print("  " + p)
    return 0
