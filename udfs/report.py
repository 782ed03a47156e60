"""The report: one analysis of y against x written as a workbook and PNG plots."""
from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from openpyxl import Workbook
from openpyxl.chart import Reference
from openpyxl.styles import Alignment

import unbend
from unbend import UnbendError
from unbend.fitting import CAUTION
from unbend.wording import fitted_rung_words, line_words

from . import cells
from .sheets import (CAUTION_FONT, GENERAL, NOTE_FONT, P_FORMAT, SMART, TITLE_FONT, WARN_FILL, atomic_save, printable,
                     put, scatter_chart, set_widths, write_rows)
from .wording import PREDICTION_HELP, SCAN_HEADERS, SCAN_HELP, prediction_headers

__all__ = ["Analysis", "analyse", "summary_lines", "write_report", "write_plots"]


@dataclass
class Analysis:
    """Everything the report shows, computed once by the engine."""

    source: str
    y_name: str
    x_names: list
    y: np.ndarray
    X: np.ndarray
    suggest_y: unbend.PowerSuggestion
    suggest_x: unbend.PowerSuggestion
    scan: pd.DataFrame
    fit: unbend.LineFit
    predictions: pd.DataFrame
    spread: unbend.PowerSuggestion | None = None
    invented: bool = False
    notes: list = field(default_factory=list)


def _numbers(series) -> np.ndarray:
    return cells.to_numbers(list(series), "column") if len(series) else np.array([])


def analyse(df: pd.DataFrame, y_col: str, x_cols: list, groups_col: str | None = None, *,
            source: str = "", invented: bool = False) -> Analysis:
    """Run the engine over the chosen columns: suggestions, scan, fit at the best pair, predictions."""
    n = len(df)
    y = cells.to_numbers(list(df[y_col]), y_col)
    X = np.column_stack([cells.to_numbers(list(df[c]), c) for c in x_cols]) if n else np.zeros((0, len(x_cols)))
    y, X = cells.pad_rows(y, X) if X.size else (y, X)
    if y.shape[0] != X.shape[0]:
        y, X = cells.pad_rows(y, X)
    scan = unbend.scan(y, X)
    yp, xp = unbend.best_pair(y, X, table=scan)
    sy = unbend.suggest_power(y, X, x_power=xp)
    sx = unbend.suggest_x_power(y, X, y_power=yp)
    names = [str(c) for c in x_cols]
    f = unbend.fit(y, X, y_power=yp, x_power=xp, x_names=names, y_name=str(y_col))
    new = _prediction_points(f)
    p = f.predict(new)
    spread = None
    if groups_col is not None:
        spread = unbend.spread_power(y, np.array(cells.to_labels(list(df[groups_col]), groups_col)
                                                 + [None] * max(0, y.size - len(df)), dtype=object)[: y.size])
    return Analysis(source=source, y_name=str(y_col), x_names=names, y=y, X=X, suggest_y=sy, suggest_x=sx,
                    scan=scan, fit=f, predictions=p, spread=spread, invented=invented)


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
    if f.skipped:
        out.append("Skipped: " + "; ".join(f"row {r}: {why}" for r, why in f.skipped[:5])
                   + ("; ..." if len(f.skipped) > 5 else "") + ".")
    out.append(f"Fit: a straight line of {line_words(f)}. This is the pair of rungs the scan ranks first of "
               f"{len(a.scan)} (ranked on the likelihood, with pairs whose residuals curve or drift pushed down; "
               "never on R\u00b2).")
    xs = " and ".join(a.x_names)
    for s, name, fitted, other, given in (
            (a.suggest_y, a.y_name, f.y_power, f.x_power, f"{xs} at {f.x_expr.label}"),
            (a.suggest_x, xs, f.x_power, f.y_power, f"{a.y_name} at {f.y_expr.label}")):
        out.append(f"Power for {name} alone, with {given}: estimate {_fmt(s.estimate)}, {s.level:.0%} interval "
                   f"{_fmt(s.low)} to {_fmt(s.high)}. {_cap(_note(s))} "
                   + fitted_rung_words(s, fitted, other, a.scan, name))
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
    header = list(a.x_names) + [words[c] for c in cols]
    rows = []
    for i in range(len(p)):
        r = [p[c].iloc[i] for c in a.x_names]
        r += [p[c].iloc[i] for c in cols[:-2]]
        r += ["yes" if p["outside_range"].iloc[i] else "no", p["note"].iloc[i]]
        rows.append(r)
    return header, rows




def _wrapped(ws, r, text, width, font=None, per_line=120):
    c = put(ws, r, 1, text)
    c.alignment = Alignment(wrap_text=True, vertical="top")
    if font is not None:
        c.font = font
    ws.merge_cells(start_row=r, start_column=1, end_row=r, end_column=width)
    ws.row_dimensions[r].height = 15 * max(1, len(text) // per_line + 1)
    return c


def build_report_workbook(a: Analysis) -> Workbook:
    """The report as an openpyxl workbook (not yet saved)."""
    f = a.fit
    wb = Workbook()
    ws = wb.active
    ws.title = "Summary"
    put(ws, 1, 1, f"unbend report: {a.y_name} against {', '.join(a.x_names)}").font = TITLE_FONT
    header, rows = _prediction_rows(a)
    width = max(len(header), 9)
    r = 3
    for line in summary_lines(a):
        _wrapped(ws, r, line, width, CAUTION_FONT if line.startswith(("CAUTION", "Warning")) else None)
        r += 1
    r += 1
    _wrapped(ws, r, prediction_points_text(a) + " " + PREDICTION_HELP, width, NOTE_FONT)
    r += 1
    top = r
    end = write_rows(ws, r, 1, header, rows, number_format=SMART)
    out_col = header.index("outside x range") + 1
    for rr in range(top + 1, end):
        if ws.cell(row=rr, column=out_col).value == "yes":
            for cc in range(1, len(header) + 1):
                ws.cell(row=rr, column=cc).fill = WARN_FILL
    set_widths(ws, {j: 15 for j in range(1, width + 1)})
    set_widths(ws, {len(header): 40})

    # scan
    ws2 = wb.create_sheet("Scan")
    put(ws2, 1, 1, "Every pair of rungs, best first").font = TITLE_FONT
    _wrapped(ws2, 2, SCAN_HELP, 13, NOTE_FONT)
    write_rows(ws2, 4, 1, [SCAN_HEADERS[c] for c in a.scan.columns], a.scan.itertuples(index=False),
               number_format=GENERAL, formats={"curvature p": P_FORMAT, "pattern p": P_FORMAT, "spread p": P_FORMAT,
                                               "normality p": P_FORMAT, "R\u00b2 re-expressed": "0.0000",
                                               "R\u00b2 original units": "0.0000",
                                               "log-likelihood (y units)": "0.00"})
    set_widths(ws2, {1: 7, 2: 9, 3: 9, 4: 16, 5: 16, 6: 14, 7: 12, 8: 12, 9: 12, 10: 12, 11: 13, 12: 13, 13: 52,
                     14: 10})

    # fit
    ws3 = wb.create_sheet("Fit")
    put(ws3, 1, 1, f"The line: {f.explain().split('. ', 1)[0][len('A straight line of '):]}").font = TITLE_FONT
    write_rows(ws3, 3, 1, ["item", "value"], f.rows(), number_format=GENERAL,
               row_formats={k: P_FORMAT for k, _ in f.rows() if k.endswith(": p") or " p (" in k})
    for row in ws3.iter_rows(min_row=4, min_col=1, max_col=2):
        for c in row:
            c.alignment = Alignment(wrap_text=True, vertical="top", horizontal="left")
            if isinstance(c.value, str) and len(c.value) > 70:
                ws3.row_dimensions[c.row].height = 15 * (len(c.value) // 70 + 1)
    set_widths(ws3, {1: 50, 2: 75})

    # residuals with native charts
    ws4 = wb.create_sheet("Residuals")
    res = f.residuals.copy()
    n = f.n
    flags = []
    for sd, cook in zip(res["standardized"], res["cooks_distance"]):
        fl = []
        if abs(sd) > 2:
            fl.append("large residual")
        if cook > 4.0 / n:
            fl.append("influential")
        flags.append(", ".join(fl))
    res["flag"] = flags
    cols = ["row", "y"] + list(f.x_names) + ["y_re"] + [f"{nm}_re" for nm in f.x_names] + \
           ["fitted", "residual", "standardized", "studentized", "leverage", "cooks_distance", "flag"]
    nice = {"row": "data row", "y": a.y_name, "y_re": f"{a.y_name} re-expressed", "fitted": "fitted (re-expressed)",
            "residual": "residual", "standardized": "standardized residual", "studentized": "studentized residual",
            "leverage": "leverage", "cooks_distance": "Cook's distance", "flag": "flag"}
    for nm in f.x_names:
        nice[nm] = nm
        nice[f"{nm}_re"] = f"{nm} re-expressed"
    _wrapped(ws4, 1, "One row per data row used (data row 1 = the first row under the header). Standardized "
                     "residuals beyond \u00b12 are flagged 'large residual'; a Cook's distance above 4/n (leverage "
                     "times residual: how much the row moves the line) is flagged 'influential'.", len(cols), NOTE_FONT,
             per_line=150)
    last = write_rows(ws4, 2, 1, [nice[c] for c in cols], res[cols].itertuples(index=False), number_format=SMART,
                      formats={nice[c]: "0.0000" for c in ["residual", "standardized", "studentized", "leverage",
                                                           "cooks_distance"]})
    ci = {c: i + 1 for i, c in enumerate(cols)}
    ref = lambda c: Reference(ws4, min_col=ci[c], min_row=3, max_row=last - 1)  # noqa: E731
    x0 = f.x_names[0]
    from openpyxl.utils import get_column_letter as L
    anchor_col = len(cols) + 2
    set_widths(ws4, {j: 14 for j in range(1, len(cols) + 1)})
    set_widths(ws4, {len(cols): 24})
    scatter_chart(ws4, "Before: original units", ref(x0), ref("y"), x0, a.y_name, f"{L(anchor_col)}2")
    scatter_chart(ws4, f"After: {f.y_expr.label} of {a.y_name} against {f.x_expr.label} of {x0}", ref(f"{x0}_re"),
               ref("y_re"), f"{f.x_expr.label} of {x0}", f"{f.y_expr.label} of {a.y_name}", f"{L(anchor_col)}21")
    scatter_chart(ws4, "Residuals against fitted: look for a curve or a fan", ref("fitted"), ref("residual"),
               "fitted (re-expressed)", "residual", f"{L(anchor_col)}40")

    if a.spread is not None and a.spread.detail is not None:
        ws5 = wb.create_sheet("Spread")
        put(ws5, 1, 1, "Spread against level across groups").font = TITLE_FONT
        write_rows(ws5, 3, 1, ["item", "value"], a.spread.rows(), number_format=GENERAL)
        d = a.spread.detail
        write_rows(ws5, 16, 1, ["group", "n", "level (median)", "spread (IQR)", "used"],
                   [[g, n_, lv, sp, "yes" if u else "no"] for g, n_, lv, sp, u in d.itertuples(index=False)],
                   number_format=GENERAL)
        for row in ws5.iter_rows(min_row=4, max_row=14, min_col=2, max_col=2):
            for c in row:
                c.alignment = Alignment(wrap_text=True, vertical="top", horizontal="left")
        set_widths(ws5, {1: 28, 2: 70})

    if len(f.x_names) == 1:
        from .portable import add_portable_sheet
        new = a.predictions[f.x_names[0]].to_numpy()
        add_portable_sheet(wb, a.y, a.X[:, 0], new, y_power=f.y_power, x_power=f.x_power,
                           y_start=f.y_expr.start, x_start=f.x_expr.start, invented_data=a.invented,
                           y_name=a.y_name, x_name=f.x_names[0], title="Model in formulas")
    return wb


def write_report(a: Analysis, out_path) -> str:
    """Write the report workbook atomically; returns its path."""
    wb = build_report_workbook(a)
    printable(wb)
    return atomic_save(wb.save, out_path)


def write_plots(a: Analysis, folder) -> list:
    """PNG plots: before/after scatter, residuals against fitted, the scan as a picture."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    os.makedirs(folder, exist_ok=True)
    f = a.fit
    res = f.residuals
    x0 = f.x_names[0]
    paths = []

    fig, ax = plt.subplots(1, 2, figsize=(10, 4.2))
    ax[0].scatter(res[x0], res["y"], s=14, color="#2a6f97")
    ax[0].set_xlabel(x0)
    ax[0].set_ylabel(a.y_name)
    ax[0].set_title("Before: original units")
    ax[1].scatter(res[f"{x0}_re"], res["y_re"], s=14, color="#2a6f97")
    order = np.argsort(res[f"{x0}_re"].to_numpy())
    if len(f.x_names) == 1:
        ax[1].plot(res[f"{x0}_re"].to_numpy()[order], res["fitted"].to_numpy()[order], color="#c8553d")
    ax[1].set_xlabel(f"{f.x_expr.label} of {x0}")
    ax[1].set_ylabel(f"{f.y_expr.label} of {a.y_name}")
    ax[1].set_title("After re-expression, with the fitted line")
    fig.tight_layout()
    p = os.path.join(folder, "before_after.png")
    atomic_save(lambda t: fig.savefig(t, dpi=110, format="png"), p)
    plt.close(fig)
    paths.append(p)

    fig, ax = plt.subplots(figsize=(6.5, 4.2))
    ax.scatter(res["fitted"], res["residual"], s=14, color="#2a6f97")
    ax.axhline(0, color="#888888", lw=1)
    ax.set_xlabel("fitted value (re-expressed scale)")
    ax.set_ylabel("residual")
    ax.set_title("Residuals against fitted: a curve or a fan means the line does not hold")
    ax.title.set_fontsize(10)
    fig.tight_layout()
    p = os.path.join(folder, "residuals.png")
    atomic_save(lambda t: fig.savefig(t, dpi=110, format="png"), p)
    plt.close(fig)
    paths.append(p)

    t = a.scan
    yr = list(dict.fromkeys(t.sort_values("y_power", ascending=False)["y_power"]))
    xr = list(dict.fromkeys(t.sort_values("x_power", ascending=False)["x_power"]))
    grid = np.full((len(yr), len(xr)), np.nan)
    mark = np.full((len(yr), len(xr)), "", dtype=object)
    for row in t.itertuples(index=False):
        i, j = yr.index(row.y_power), xr.index(row.x_power)
        grid[i, j] = row.loglik
        if row.verdict.startswith("not possible"):
            mark[i, j] = "n/a"
        elif "curve" in row.verdict or "drift" in row.verdict:
            mark[i, j] = "bends"
        elif "fan" in row.verdict:
            mark[i, j] = "fans"
        else:
            mark[i, j] = "ok"
        if row.rank == 1:
            mark[i, j] = "best"
    fig, ax = plt.subplots(figsize=(7, 5))
    im = ax.imshow(grid, cmap="viridis", aspect="auto")
    ax.set_xticks(range(len(xr)), [unbend.rung_label(v) for v in xr], rotation=30, ha="right")
    ax.set_yticks(range(len(yr)), [unbend.rung_label(v) for v in yr])
    ax.set_xlabel("x rung")
    ax.set_ylabel("y rung")
    finite = grid[np.isfinite(grid)]
    lo_, hi_ = (finite.min(), finite.max()) if finite.size else (0.0, 1.0)
    for i in range(len(yr)):
        for j in range(len(xr)):
            bright = np.isfinite(grid[i, j]) and hi_ > lo_ and (grid[i, j] - lo_) / (hi_ - lo_) > 0.7
            ax.text(j, i, mark[i, j], ha="center", va="center", color="black" if bright else "white",
                    fontsize=9, fontweight="bold" if mark[i, j] == "best" else "normal")
    fig.colorbar(im, ax=ax, label="log-likelihood (higher is better)")
    ax.set_title("Scan of rungs: likelihood, and what the residual checks say")
    fig.tight_layout()
    p = os.path.join(folder, "scan.png")
    atomic_save(lambda t_: fig.savefig(t_, dpi=110, format="png"), p)
    plt.close(fig)
    paths.append(p)
    return paths
