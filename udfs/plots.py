"""The report's PNG plots, drawn from plain arrays.

:func:`plot_data` takes what the plots need from an analysis (numbers and
words only, picklable); :func:`draw` draws them with matplotlib's object
interface and the Agg canvas (no pyplot, no GUI backend to look for, about
a third faster to import).

With two or more cores, ``unbend report`` and ``unbend groups`` draw in a second
process (:class:`Drawer`; :func:`draw_groups` draws the latter's two PNGs):
started before the main process imports pandas and scipy,
it imports matplotlib while the data are read and fitted, then draws while the
main process writes the workbook. If that process cannot start or fails, the
plots are drawn in the main process, so the files are the same either way
(``tests/test_plots_drawer.py`` compares them byte for byte).

This module imports only numpy at the top and matplotlib inside :func:`draw`.
"""
from __future__ import annotations

import ntpath  # splits at \ and / alike, for a Windows path on any system
import os
import pickle
import subprocess
import sys

import numpy as np

from .outputs import atomic_save

__all__ = ["PLOT_FILES", "plot_data", "draw", "draw_groups", "Drawer"]

#: The plot files :func:`draw` writes, in its folder.
PLOT_FILES = ("before_after.png", "residuals.png", "scan.png")


def plot_data(a) -> dict:
    """Everything the plots show, as arrays and text (picklable, no engine objects)."""
    import unbend

    f = a.fit
    res = f.residuals
    x0 = f.x_names[0]
    t = a.scan
    yr = list(dict.fromkeys(t.sort_values("y_power", ascending=False)["y_power"]))
    xr = list(dict.fromkeys(t.sort_values("x_power", ascending=False)["x_power"]))
    grid = np.full((len(yr), len(xr)), np.nan)
    mark = [["" for _ in xr] for _ in yr]
    for row in t.itertuples(index=False):
        i, j = yr.index(row.y_power), xr.index(row.x_power)
        grid[i, j] = row.loglik
        if row.verdict.startswith("not possible"):
            mark[i][j] = "n/a"
        elif "curve" in row.verdict or "drift" in row.verdict:
            mark[i][j] = "bends"
        elif "fan" in row.verdict:
            mark[i][j] = "fans"
        else:
            mark[i][j] = "ok"
        if row.rank == 1:
            mark[i][j] = "best"
    col = lambda c: res[c].to_numpy(dtype=float)  # noqa: E731
    extra = _censored_plot_data(a, res)
    return extra | {
        "run_id": a.run_id, "n": int(f.n), "one_x": len(f.x_names) == 1,
        "x_name": x0, "y_name": a.y_name,
        "x_label_re": f"{f.x_expr.label} of {x0}", "y_label_re": f"{f.y_expr.label} of {a.y_name}",
        "x": col(x0), "y": col("y"), "x_re": col(f"{x0}_re"), "y_re": col("y_re"),
        "fitted": col("fitted"), "residual": col("residual"),
        "scan_grid": grid, "scan_marks": mark,
        "scan_y_labels": [unbend.rung_label(v) for v in yr], "scan_x_labels": [unbend.rung_label(v) for v in xr],
    }


def _censored_plot_data(a, res) -> dict:
    """Censored rows (drawn as open markers at their limit with a downward tick) and the half-limit line."""
    if "censored" not in res or not res["censored"].any():
        return {}
    f = a.fit
    out = {"censored": res["censored"].to_numpy(dtype=bool), "n_censored": int(res["censored"].sum())}
    h = getattr(a, "half_limit", None)
    if h is not None and len(f.x_names) == 1:
        # the half-limit line at the same powers, on the re-expressed scale of the censored fit's axes
        xr = res[f"{f.x_names[0]}_re"].to_numpy(dtype=float)
        out["half_x_re"] = xr
        out["half_fitted"] = h.coef[0] + h.coef[1] * xr
    return out


def _open_at_limit(ax, x, y, color):
    """Values below a limit: an open marker at the limit with a short tick pointing down."""
    ax.scatter(x, y, s=30, facecolors="none", edgecolors=color, linewidths=1.1, label="below a limit (at the limit)")
    lo, hi = ax.get_ylim()
    tick = 0.04 * (hi - lo)
    ax.vlines(x, y - tick, y, color=color, lw=1.1)
    ax.scatter(x, y - tick, marker="v", s=12, color=color, linewidths=0)


def _save_png(fig, folder, name, meta) -> str:
    """One figure as folder/name, written atomically; returns the path."""
    p = os.path.join(folder, name)
    # compress_level 1: the same pixels as the default 6, encoded in about a third of the time
    atomic_save(lambda t: fig.savefig(t, dpi=110, format="png", metadata=meta, pil_kwargs={"compress_level": 1}), p)
    return p


def draw(d: dict, folder) -> list:
    """PNG plots: before/after scatter, residuals against fitted, the scan as a picture; returns their paths."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    def subplots(*grid, figsize):
        fig = Figure(figsize=figsize)
        FigureCanvasAgg(fig)
        return fig, fig.subplots(*grid)

    os.makedirs(folder, exist_ok=True)
    paths = []
    meta = {"Software": "unbend", "unbend run": d["run_id"]}
    # many points: smaller, lighter markers so the cloud still shows where the points are dense
    n = d["n"]
    size = 14.0 if n <= 2000 else max(1.0, 14.0 * (2000.0 / n) ** 0.5)
    alpha = 1.0 if n <= 2000 else 0.5
    dots = dict(s=size, alpha=alpha, color="#2a6f97", linewidths=0)

    def label_room(ax) -> float:
        """Inches left of an axes for its y tick labels and y label, from the labels' length (no text measuring:
        tight_layout would draw every text once more)."""
        loc = ax.yaxis.get_major_locator()
        ticks = [t for t in loc() if ax.get_ylim()[0] <= t <= ax.get_ylim()[1]] or list(loc())
        width = max((len(t) for t in ax.yaxis.get_major_formatter().format_ticks(ticks)), default=1)
        return 0.42 + 0.075 * width  # y label and tick marks, then about 0.075 in per character at 10 pt

    def save(fig, name):
        paths.append(_save_png(fig, folder, name, meta))

    cz = d.get("censored")
    if cz is not None:  # measured values as dots, values below a limit drawn at the limit, open, pointing down
        keep = ~cz
        dots_m = dict(dots, label="measured")
        d = dict(d, x_m=d["x"][keep], y_m=d["y"][keep], x_re_m=d["x_re"][keep], y_re_m=d["y_re"][keep])
    fig, ax = subplots(1, 2, figsize=(10, 4.2))
    if cz is not None:
        ax[0].scatter(d["x_m"], d["y_m"], **dots_m)
        _open_at_limit(ax[0], d["x"][cz], d["y"][cz], "#7a4f9a")
        ax[0].legend(fontsize=8)
    else:
        ax[0].scatter(d["x"], d["y"], **dots)
    ax[0].set_xlabel(d["x_name"])
    ax[0].set_ylabel(d["y_name"])
    ax[0].set_title("Before: original units")
    if cz is not None:
        ax[1].scatter(d["x_re_m"], d["y_re_m"], **dots)
    else:
        ax[1].scatter(d["x_re"], d["y_re"], **dots)
    if d["one_x"]:
        order = np.argsort(d["x_re"])
        ax[1].plot(d["x_re"][order], d["fitted"][order], color="#c8553d",
                   label="censored fit (maximum likelihood)" if cz is not None else None)
    if cz is not None:
        _open_at_limit(ax[1], d["x_re"][cz], d["y_re"][cz], "#7a4f9a")
        if "half_fitted" in d:
            o = np.argsort(d["half_x_re"])
            ax[1].plot(d["half_x_re"][o], d["half_fitted"][o], color="#888888", ls="--",
                       label="half the limit substituted (comparison only: biased)")
        ax[1].legend(fontsize=7)
    ax[1].set_xlabel(d["x_label_re"])
    ax[1].set_ylabel(d["y_label_re"])
    ax[1].set_title("After re-expression, with the fitted line")
    room = [label_room(a) for a in ax]  # margins from the labels' length: no text measuring
    panel = (10 - room[0] - 0.15 - room[1]) / 2
    fig.subplots_adjust(left=room[0] / 10, right=1 - 0.15 / 10, bottom=0.13, top=0.92, wspace=room[1] / panel)
    save(fig, "before_after.png")

    fig, ax = subplots(figsize=(6.5, 4.2))
    ax.scatter(d["fitted"], d["residual"], **dots)
    if cz is not None:
        ax.text(0.01, 0.01, f"{d['n_censored']} values below a limit have no residual and are not drawn",
                transform=ax.transAxes, fontsize=8, color="#7a4f9a")
    ax.axhline(0, color="#888888", lw=1)
    ax.set_xlabel("fitted value (re-expressed scale)")
    ax.set_ylabel("residual")
    ax.set_title("Residuals against fitted: a curve or a fan means the line does not hold")
    ax.title.set_fontsize(10)
    fig.subplots_adjust(left=label_room(ax) / 6.5, right=0.975, bottom=0.13, top=0.92)
    save(fig, "residuals.png")

    grid, mark = d["scan_grid"], d["scan_marks"]
    fig, ax = subplots(figsize=(7, 5))
    im = ax.imshow(grid, cmap="viridis", aspect="auto")
    ax.set_xticks(range(len(d["scan_x_labels"])), d["scan_x_labels"], rotation=30, ha="right")
    ax.set_yticks(range(len(d["scan_y_labels"])), d["scan_y_labels"])
    ax.set_xlabel("x rung")
    ax.set_ylabel("y rung")
    finite = grid[np.isfinite(grid)]
    lo_, hi_ = (finite.min(), finite.max()) if finite.size else (0.0, 1.0)
    for i in range(grid.shape[0]):
        for j in range(grid.shape[1]):
            bright = np.isfinite(grid[i, j]) and hi_ > lo_ and (grid[i, j] - lo_) / (hi_ - lo_) > 0.7
            ax.text(j, i, mark[i][j], ha="center", va="center", color="black" if bright else "white",
                    fontsize=9, fontweight="bold" if mark[i][j] == "best" else "normal")
    fig.colorbar(im, ax=ax, label="log-likelihood (higher is better)")
    ax.set_title("Scan of rungs: likelihood, and what the residual checks say")
    fig.subplots_adjust(left=0.2, right=0.9, bottom=0.2, top=0.93)  # room for the colour bar's label
    save(fig, "scan.png")
    return paths


def draw_groups(d: dict, folder) -> list:
    """The PNGs of ``unbend groups`` from :func:`unbend.udfs.groups_report.plot_data`: all_series.png (every
    series re-expressed, with its line) and worst_series.png (the worst ten); returns their paths."""
    import matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.collections import LineCollection
    from matplotlib.figure import Figure

    os.makedirs(folder, exist_ok=True)
    meta = {"Software": "unbend", "unbend run": d["run_id"]}
    xr, yr, code, bad = d["xr"], d["yr"], d["code"], d["bad"]
    ok = code >= 0
    paths = []

    def save(fig, name):
        paths.append(_save_png(fig, folder, name, meta))

    fig = Figure(figsize=(9, 6))
    FigureCanvasAgg(fig)
    ax = fig.subplots()
    n = int(ok.sum())
    size = 10.0 if n <= 3000 else max(1.0, 10.0 * (3000.0 / n) ** 0.5)
    cmap = matplotlib.colormaps["tab20"]
    G = len(bad)
    # all groups at once (one scatter, one collection of lines): no pass over the rows per group
    rgba = np.array([cmap(i % 20) for i in range(min(G, 20))] or [(0, 0, 0, 1)])
    colours = rgba[np.arange(G) % len(rgba)] if G else np.zeros((0, 4))
    if G:
        colours[bad] = matplotlib.colors.to_rgba("#C8553D")
    pts = np.flatnonzero(ok)
    ax.scatter(xr[pts], yr[pts], s=size, c=colours[code[pts]] if G else None, alpha=0.55 if G > 20 else 0.8,
               linewidths=0)
    if G:
        lo = np.full(G, np.inf)
        hi = np.full(G, -np.inf)
        np.minimum.at(lo, code[pts], xr[pts])
        np.maximum.at(hi, code[pts], xr[pts])
        b0, b1 = d["intercept"], d["slope"]
        segs = np.stack([np.column_stack([lo, b0 + b1 * lo]), np.column_stack([hi, b0 + b1 * hi])], axis=1)
        ax.add_collection(LineCollection(segs[~bad], colors=colours[~bad], linewidths=0.9, alpha=0.7))
        ax.add_collection(LineCollection(segs[bad], colors=colours[bad], linewidths=2.0))
        for i, label in d["named"]:
            ax.annotate(label, (hi[i], b0[i] + b1[i] * hi[i]), fontsize=8, color="#C8553D", xytext=(3, 0),
                        textcoords="offset points")
    ax.set_xlabel(d["xlab"])
    ax.set_ylabel(d["ylab"])
    ax.set_title(f"Every {d['by_name']} on the common scale ({G} series; failing a residual check: red, worst five "
                 "named)", fontsize=10)
    fig.tight_layout()
    save(fig, "all_series.png")

    k = len(d["panels"])
    cols = 5 if k > 4 else max(k, 1)
    rows_ = max(1, -(-k // cols))
    fig = Figure(figsize=(3.0 * cols, 2.7 * rows_ + 0.6))
    FigureCanvasAgg(fig)
    axes = np.atleast_1d(fig.subplots(rows_, cols, squeeze=False)).ravel()
    for ax_, r in zip(axes, d["panels"]):
        sel = code == r["code"]
        colour = "#C8553D" if r["failing"] else "#2A6F97"
        ax_.scatter(xr[sel], yr[sel], s=12, color=colour, linewidths=0)
        xs = np.linspace(np.nanmin(xr[sel]), np.nanmax(xr[sel]), 2)
        ax_.plot(xs, r["intercept"] + r["slope"] * xs, color="#333333", lw=1)
        ax_.set_title(r["title"], fontsize=8)
        ax_.tick_params(labelsize=7)
    for ax_ in axes[k:]:
        ax_.set_visible(False)
    fig.supxlabel(d["xlab"], fontsize=9)
    fig.supylabel(d["ylab"], fontsize=9)
    fig.suptitle(f"The {k} series with the worst residual checks (red: fails a check), each with its line",
                 fontsize=10)
    fig.tight_layout()
    save(fig, "worst_series.png")
    return paths


def _cores() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - Windows and macOS
        return os.cpu_count() or 1


def _is_python(path) -> bool:
    """True for a Python interpreter's path (not a host program that embeds Python, nor a frozen application)."""
    return bool(path) and not getattr(sys, "frozen", False) and ntpath.basename(path).lower().startswith("python")


class Drawer:
    """The report's plots drawn in a second process, in parallel with the workbook.

    Start it first (the second process imports matplotlib at once), then
    :meth:`submit` the :func:`plot_data` and a folder, write the workbook, and
    call :meth:`result` for the paths of the PNGs. With one core, or when the
    second process cannot start, fails or reports an error, the plots are drawn
    in this process by :meth:`result` instead; ``drawn_in`` says which
    (``"second process"`` or ``"this process"``). Use it as a context manager:
    on leaving, a second process still running is stopped.
    """

    #: the second process: this Python, running :func:`_serve`
    command = (sys.executable, "-c", "from unbend.udfs.plots import _serve; _serve()")

    def __init__(self, parallel: bool | None = None):
        self.proc = None
        self.drawn_in = None
        self._job = None
        if parallel is None:
            parallel = _cores() >= 2 and _is_python(sys.executable)
        if parallel:
            try:
                self.proc = subprocess.Popen(self.command, stdin=subprocess.PIPE, stdout=subprocess.PIPE)
            except OSError:
                self.proc = None

    def submit(self, d: dict, folder, how=None) -> None:
        """Hand the plot data and the folder to the second process (it draws at once).

        ``how`` is the drawing function, a module-level function of this module called as ``how(d, folder)``
        (default :func:`draw`, the report's plots; :func:`draw_groups` for ``unbend groups``)."""
        self._job = (how or draw, d, os.fspath(folder))
        if self.proc is None:
            return
        try:
            self.proc.stdin.write(pickle.dumps(self._job, protocol=pickle.HIGHEST_PROTOCOL))
            self.proc.stdin.close()
        except OSError:  # it has ended already: result() draws here
            self._stop()

    def result(self) -> list:
        """The paths of the PNGs, once drawn (here, when the second process could not draw them)."""
        if self._job is None:
            raise RuntimeError("Drawer.result() before submit()")
        if self.proc is not None:
            try:
                raw = self.proc.stdout.read()
                self.proc.wait()
                status, value = pickle.loads(raw)
            except Exception:  # no answer, or a broken one: draw here
                status, value = "failed", None
            self._stop()
            if status == "drawn":
                self.drawn_in = "second process"
                return value
        self.drawn_in = "this process"
        how, d, folder = self._job
        return how(d, folder)

    def _stop(self) -> None:
        p, self.proc = self.proc, None
        if p is None:
            return
        for f in (p.stdin, p.stdout):
            try:
                f.close()
            except OSError:
                pass
        if p.poll() is None:
            p.kill()
        p.wait()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self._stop()
        return False


def _warm_up() -> None:
    """Load matplotlib, its fonts and the PNG writer by drawing a small figure nobody sees (done while the main
    process still reads and fits, so the real figures are drawn warm)."""
    import io

    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(2, 2))
    FigureCanvasAgg(fig)
    ax = fig.subplots(1, 2)[0]
    ax.scatter([1.0, 2.0], [1.0, 2.0], s=4, alpha=0.5, linewidths=0)
    ax.plot([1.0, 2.0], [1.0, 2.0])
    ax.set_title("0.5")
    ax.set_xlabel("x")
    fig.savefig(io.BytesIO(), dpi=30, format="png", pil_kwargs={"compress_level": 1})


def _serve() -> None:
    """The second process: read the job while matplotlib loads, draw, answer with the paths or the error."""
    import threading

    out = sys.stdout.buffer
    sys.stdout = sys.stderr  # anything a library prints goes to the user's stderr, not into the answer
    box = {}

    def take():
        box["raw"] = sys.stdin.buffer.read()

    reader = threading.Thread(target=take, daemon=True)
    reader.start()
    try:
        _warm_up()
        reader.join()
        if not box.get("raw"):  # the main process stopped before handing a job over
            return
        how, d, folder = pickle.loads(box["raw"])
        answer = ("drawn", how(d, folder))
    except BaseException as e:  # the main process draws instead, and meets the same problem there
        answer = ("failed", f"{type(e).__name__}: {e}")
    out.write(pickle.dumps(answer))
    out.flush()
