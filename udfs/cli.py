"""The `unbend` command: `unbend demo` and `unbend report`.

Bad input gives one line on stderr and a non-zero exit status, never a
traceback. A report's workbook and plots are put in place together, never
over the input, never over an existing file unless ``--overwrite`` is given
and never over a read-only one (see :mod:`unbend.udfs.outputs`).

Start-up is kept short: this module imports only the standard library at the
top; numpy, pandas, scipy, the engine and the workbook and plot writers are
imported inside the commands that use them, so ``unbend --help`` answers at
once.
"""
from __future__ import annotations

import argparse
import math
import os
import sys
import time

from unbend import __version__  # the engine package's __init__ loads nothing heavy

EXIT_BAD_INPUT = 2
EXIT_UNEXPECTED = 3


class Progress:
    """Step messages on stderr, shown only once the work has taken more than a moment."""

    def __init__(self, quiet: bool = False, after: float = 0.7):
        self.t0 = time.monotonic()
        self.quiet = quiet
        self.after = after
        self.pending = []

    def step(self, text: str):
        if self.quiet:
            return
        self.pending.append(text)
        if time.monotonic() - self.t0 >= self.after:
            for t in self.pending:
                print(f"unbend: {t} ...", file=sys.stderr, flush=True)
            self.pending = []


def _fail(msg: str, code: int = EXIT_BAD_INPUT) -> int:
    msg = " ".join(str(msg).split())
    if not msg.startswith("unbend:"):
        msg = "unbend: " + msg
    print(msg, file=sys.stderr)
    return code


def _new_folder(base: str) -> str:
    path = os.path.abspath(base)
    k = 1
    while True:
        try:
            os.makedirs(path)  # fails if it exists, so two demo runs never share a folder
            return path
        except FileExistsError:
            k += 1
            path = os.path.abspath(f"{base}-{k}")


def cmd_demo(args) -> int:
    from .demo import build_demo_workbooks, DEMO_REPORT_SCENARIO
    from .readers import read_table
    from .report import analyse, write_plots, write_report

    prog = Progress(args.quiet)
    folder = _new_folder(args.out or "unbend-demo")
    prog.step("building the demo workbooks")
    books = build_demo_workbooks(folder)
    name, path, y_col, x_col = DEMO_REPORT_SCENARIO(books)
    prog.step(f"analysing {os.path.basename(path)}")
    df = read_table(path, "Data")
    a = analyse(df, y_col, [x_col], source=f"{os.path.basename(path)}, sheet Data", invented=True)
    prog.step("writing the report")
    rep = write_report(a, os.path.join(folder, f"report_{name}.xlsx"))
    pngs = write_plots(a, os.path.join(folder, f"plots_{name}"))
    _print_summary(a)
    print("\nFiles written:")
    for p in books + [rep] + pngs:
        print("  " + os.path.relpath(p))
    return 0


def print_sentences(title: str, lines) -> None:
    """A summary as the commands print it: the title underlined, the first two lines together, then one
    paragraph per sentence, wrapped at 100 characters."""
    import textwrap

    print(title)
    print("=" * len(title))
    for i, line in enumerate(lines):
        if i >= 2:
            print()
        print("\n".join(textwrap.wrap(line, 100)))


def _print_summary(a):
    import pandas as pd

    from .report import summary_lines

    print_sentences("unbend summary", summary_lines(a))
    print("\nScan, top 5 of", len(a.scan), "pairs:")
    cols = ["rank", "y_rung", "x_rung", "loglik", "curvature_p", "spread_p", "r2", "verdict"]
    with pd.option_context("display.width", 200, "display.max_colwidth", 48):
        print(a.scan.head(5)[cols].to_string(index=False, float_format=lambda v: f"{v:.4g}"))
    mean_words = "normal-theory mean" if getattr(a.fit, "n_censored", 0) else "smeared mean"
    print(f"\nPredictions in original units (median, {mean_words}, prediction interval):")
    p = a.predictions
    show = list(a.x_names) + ["median", "mean", "low", "high", "outside_range"]
    print(p[show].to_string(index=False, float_format=lambda v: f"{v:.4g}"))


# ----------------------------------------------------------------------------- reading the data (issue 9)
def read_report_data(args, data: str):
    """The command's reading step: the file read by the shared rules, and a frame of the rows used.

    Returns (reading, frame, y label, x labels, group label): the frame's columns are the labels (header text
    with its unit or date origin), so every table, chart and sentence of the report shows them.
    """
    from .files import read_data

    reading = read_data(data, args.y, args.x, sheet=args.sheet, header_row=args.header_row, decimal=args.decimal,
                        hidden=args.hidden or "auto", groups=args.groups, censor=True,
                        limit_column=getattr(args, "limit_column", None),
                        qualifier_column=getattr(args, "qualifier_column", None))
    labels = [reading.y_label, *reading.x_labels]
    seen = set()
    for i, (lab, letter) in enumerate(zip(labels, reading.letters)):
        if lab in seen:
            labels[i] = f"{lab} ({letter})"
        seen.add(labels[i])
    df = reading.frame()
    names = labels + ([reading.groups_name] if reading.groups_name else [])
    df.columns = names
    return reading, df, labels[0], labels[1:], (reading.groups_name if args.groups else None)


def add_reading_options(r) -> None:
    """The report's options about reading the data file."""
    r.add_argument("--header-row", type=int, metavar="N",
                   help="the row number of the header (default: found under titles, notes and blank rows)")
    r.add_argument("--decimal", choices=[",", "."],
                   help="decimal separator of numbers written as text, when a column's own values do not settle it")
    r.add_argument("--hidden", choices=["use", "skip"],
                   help="hidden rows: use or skip them all (default: rows hidden by a filter are skipped, rows "
                        "hidden by hand are used)")
    add_limit_options(r)


def add_limit_options(r) -> None:
    """Options for y values below a detection limit (fitted as censored values)."""
    r.add_argument("--limit-column", metavar="COLUMN",
                   help="a column holding the detection limit of each row: a y cell written as ND or 'not "
                        "detected' is fitted as below that limit (y cells such as <0.5 carry their own limit)")
    r.add_argument("--qualifier-column", metavar="COLUMN",
                   help="a column of '<' marks beside a plain y column: a '<' makes the y value beside it a "
                        "detection limit (blank or '=' means measured)")


# ----------------------------------------------------------------------------- report: reading the data
def _read_input(args, prog):
    """The reading, a frame of the rows used and the chosen columns; (reading, df, y, xs, group or None)."""

    data = os.path.abspath(args.data)
    prog.step(f"reading {os.path.basename(data)}")
    reading, df, ycol, xcols, gcol = read_report_data(args, data)
    return reading, df, ycol, xcols, gcol


# ----------------------------------------------------------------------------- report: model choices
class OptionError(ValueError):
    """A model option the command cannot use; the message names the option."""


def _model_choices(args) -> dict:
    """--y-power, --x-power, --y-start, --x-start and --level, checked, as keyword arguments of ``analyse``."""
    out = {}
    for opt, key in (("--y-power", "y_power"), ("--x-power", "x_power")):
        v = getattr(args, key)
        if v is not None and not (math.isfinite(v) and -100 <= v <= 100):
            raise OptionError(f"{opt} must be a power between -100 and 100, such as 1, 0.5, 0 (log) or -1; got {v:g}.")
        out[key] = v
    for opt, key in (("--y-start", "y_start"), ("--x-start", "x_start")):
        v = getattr(args, key)
        if not math.isfinite(v):
            raise OptionError(f"{opt} must be a finite number, such as 0.5; got {v:g}.")
        out[key] = v
    lv = args.level
    if math.isfinite(lv) and 1 < lv < 100:
        lv = lv / 100.0  # 95 means 95%, as in the cell functions
    if not (math.isfinite(lv) and 0 < lv < 1):
        raise OptionError(f"--level must be between 0 and 1 (such as 0.95) or a percentage (such as 95); got "
                          f"{args.level:g}.")
    out["level"] = lv
    return out


# ----------------------------------------------------------------------------- report: the command
def _out_path(args, data: str, default_suffix: str = "_unbend_report.xlsx") -> str:
    """--out checked (a .xlsx, never the input), or DATA plus ``default_suffix`` beside the data."""
    from .outputs import same_file

    out = os.path.abspath(args.out) if args.out else os.path.splitext(data)[0] + default_suffix
    if not out.lower().endswith(".xlsx"):
        raise OptionError("--out must name a .xlsx file.")
    if os.path.exists(data) and same_file(out, data):
        raise OptionError("--out names the input file; unbend never writes over its input. Choose another name.")
    return out


def _censored_of(reading):
    """Flags for the rows used whose y is below a detection limit, or None."""
    rows = reading.rows
    return None if rows.y_censored is None else rows.y_censored[rows.used]


def cmd_report(args) -> int:
    from .outputs import ReportFiles
    from .plots import PLOT_FILES, Drawer

    prog = Progress(args.quiet)
    data = os.path.abspath(args.data)
    out = _out_path(args, data)
    choices = _model_choices(args)
    if args.readings and len(args.x) != 1:  # before any work (the check in _back_calculate stays)
        raise OptionError(f"--readings reads x back from a line with one x; {len(args.x)} --x columns were given.")
    with ReportFiles(out, PLOT_FILES, overwrite=args.overwrite) as files:  # checks --out before any work
        with Drawer() as drawer:  # a second process loads matplotlib now, while this one reads and fits
            from .plots import plot_data
            from .report import analyse, write_report

            reading, df, ycol, xcols, gcol = _read_input(args, prog)
            prog.step("choosing powers and scanning the rungs")
            a = analyse(df, ycol, xcols, gcol, source=reading.source, censored=_censored_of(reading), **choices)
            a.reading = reading
            if args.readings:  # issue 13: x read back from measured y (udfs/calibrate.py)
                a.readings = _back_calculate(args, data, reading, a, choices["level"], prog)
            drawer.submit(plot_data(a), files.staged_plots)
            prog.step("writing the report workbook and drawing the plots")
            write_report(a, files.staged_workbook)
            drawer.result()
        rep, pngs = files.publish()
    _print_summary(a)
    if getattr(a, "readings", None) is not None:
        from .calibrate import print_readings
        print_readings(a.readings, a.x_names[0], a.y_name)
    print("\nFiles written:")
    for p in [rep] + pngs:
        print("  " + p)
    return 0


def _back_calculate(args, data, reading, a, level, prog):
    """--readings: read the readings (a column of the data file, or a file) and read x back from each."""
    from .calibrate import back_calculate, read_readings

    if len(a.x_names) != 1:
        raise OptionError(f"--readings reads x back from a line with one x; this report has {len(a.x_names)} "
                          "(give one --x).")
    if getattr(a.fit, "n_censored", 0):  # the inverse interval is the least-squares one; no censored version yet
        raise OptionError(f"--readings reads x back from a least-squares line, but {a.fit.n_censored} standards "
                          "are below a limit and were fitted as censored values; reading x back from a censored "
                          "calibration is not supported. Leave out --readings, or give standards with measured "
                          "values.")
    prog.step("reading x back from the readings")
    rd, how = read_readings(args.readings, data, reading.y_name, sheet=args.sheet, header_row=args.header_row,
                            decimal=args.decimal, hidden=args.hidden or "auto")
    return back_calculate(a.fit, rd, how, level, standards_skipped=reading.rows.n_skipped)


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="unbend", description="Choose a re-expression that straightens your data, "
                                "fit the line and predict in original units.")
    p.add_argument("--version", action="version", version=f"unbend {__version__}")
    sub = p.add_subparsers(dest="command")
    d = sub.add_parser("demo", help="build the demo workbooks in a new folder, analyse one and write its report")
    d.add_argument("--out", help="folder to create (default: unbend-demo, or unbend-demo-2 ... if taken)")
    d.add_argument("--quiet", action="store_true", help="no progress messages")
    r = sub.add_parser("report", help="write a report workbook and plots for y against x from a .xlsx or .csv file")
    # reading the data
    r.add_argument("data", help="the data file (.xlsx, .xlsm, .xls, .xlsb, .ods, .csv, .tsv, .txt or .parquet) with a "
                   "header row")
    r.add_argument("--y", required=True, help="the y column: header text or column letter (such as E)")
    r.add_argument("--x", required=True, action="append",
                   help="an x column (header text or letter); repeat for more than one")
    r.add_argument("--sheet", help="sheet name (workbooks only; default: the sheet that holds the named columns)")
    r.add_argument("--groups", help="a group column, for the spread-against-level power")
    add_reading_options(r)
    r.add_argument("--readings", metavar="COLUMN|FILE",
                   help="measured y of unknown samples: x is read back from each through the fitted line, with an "
                        "interval, and the detection limits are added (a Readings sheet). An existing file's path "
                        "names a file (its column headed like the y column, else its first column with a number); "
                        "anything else names a column of the data file (header text or letter)")
    # model choices: the same arguments as the cell functions
    m = r.add_argument_group("model choices (the same as the cell functions' arguments)")
    m.add_argument("--y-power", type=float, metavar="P",
                   help="pin the power for y: 2, 1, 0.5, 0 (log), -0.5, -1 or any power between -100 and 100 "
                        "(default: the pair of rungs the scan ranks first)")
    m.add_argument("--x-power", type=float, metavar="P", help="pin the power for x, same choices as --y-power")
    m.add_argument("--y-start", type=float, default=0.0, metavar="S",
                   help="added to every y before re-expressing, for zeros or negatives (default 0)")
    m.add_argument("--x-start", type=float, default=0.0, metavar="S",
                   help="added to every x before re-expressing (default 0)")
    m.add_argument("--level", type=float, default=0.95, metavar="L",
                   help="level of the intervals, 0.95 or 95 (default 0.95)")
    # output
    o = r.add_argument_group("output")
    o.add_argument("--out", help="report file to write (.xlsx; default DATA_unbend_report.xlsx); its plots go to "
                                 "the folder REPORT_plots beside it")
    o.add_argument("--overwrite", action="store_true",
                   help="replace an existing report and its plots (never a read-only file)")
    o.add_argument("--quiet", action="store_true", help="no progress messages")
    _add_groups_parser(sub)
    return p


def _add_groups_parser(sub) -> None:
    """`unbend groups`: many series, one re-expression for all, a line for each (udfs/groups_report.py)."""
    g = sub.add_parser("groups", help="one re-expression for many series (sites, machines, batches) and a line "
                                      "for each: a workbook and plots")
    g.add_argument("data", help="the data file (.xlsx, .xlsm, .xls, .xlsb, .ods, .csv, .tsv, .txt or .parquet)")
    g.add_argument("--y", required=True, help="the y column: header text or column letter")
    g.add_argument("--x", required=True, help="the x column: header text or column letter")
    g.add_argument("--by", required=True, help="the column that names each row's series (station, machine, batch)")
    g.add_argument("--sheet", help="sheet name (workbooks only; default: the sheet that holds the named columns)")
    add_reading_options(g)
    m = g.add_argument_group("model choices (the same for every series)")
    m.add_argument("--y-power", type=float, metavar="P",
                   help="pin the power for y: 2, 1, 0.5, 0 (log), -0.5, -1 ... (default: chosen from all series "
                        "together)")
    m.add_argument("--x-power", type=float, metavar="P", help="pin the power for x, same choices as --y-power")
    m.add_argument("--y-start", type=float, default=0.0, metavar="S", help="added to every y before re-expressing")
    m.add_argument("--x-start", type=float, default=0.0, metavar="S", help="added to every x before re-expressing")
    m.add_argument("--level", type=float, default=0.95, metavar="L", help="level of the intervals, 0.95 or 95")
    o = g.add_argument_group("output")
    o.add_argument("--out", help="workbook to write (.xlsx; default DATA_unbend_groups.xlsx); its plots go to the "
                                 "folder NAME_plots beside it")
    o.add_argument("--overwrite", action="store_true", help="replace an existing workbook and its plots")
    o.add_argument("--quiet", action="store_true", help="no progress messages")


def main(argv=None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as e:  # argparse has printed its own one-line usage error
        return int(e.code or 0)
    if args.command is None:
        parser.print_help()
        return 0
    try:
        if args.command == "groups":
            from .plots import Drawer
            with Drawer() as drawer:  # started before the heavy imports, so matplotlib loads while they run
                from .groups_report import cmd_groups
                return cmd_groups(args, drawer)
        return cmd_demo(args) if args.command == "demo" else cmd_report(args)
    except KeyboardInterrupt:
        return _fail("stopped.", 130)
    except BrokenPipeError:  # `unbend report ... | head`: the reader stopped reading what we print
        return _reader_gone()
    except MemoryError:
        return _fail("the data are too large for this machine's memory.", EXIT_UNEXPECTED)
    except Exception as e:  # never a traceback
        return _explain(e)


def _reader_gone() -> int:
    """Stdout's reader has closed it: say so on stderr, and keep Python from failing again when it flushes stdout."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):  # stdout is not a file (inside another program)
        pass
    return _fail("the printed summary was cut short because the program reading it stopped reading; run again "
                 "without the pipe to see all of it, with the files written at its end.", 1)


def _explain(e: Exception) -> int:
    """One line for any problem: ours in our words, the system's with the file it concerns."""
    from unbend._validation import DomainError, UnbendError

    from .outputs import OutputError

    if isinstance(e, (OptionError, OutputError)):
        return _fail(str(e))
    if isinstance(e, DomainError):  # the report checks domains first; this is a safety net
        head = str(e).split(" Add a start")[0]
        return _fail(f"{head} Choose a start (--y-start, --x-start) or another power (--y-power, --x-power).")
    if isinstance(e, UnbendError):
        return _fail(str(e))
    if isinstance(e, OSError):
        return _fail(f"could not read or write a file ({e.strerror or e}: {e.filename or ''}).")
    return _fail(f"unexpected problem ({type(e).__name__}: {str(e)[:160]}); please report it.", EXIT_UNEXPECTED)


def run() -> None:
    """The console script: :func:`main`, then exit at once.

    Every file is closed and in place when :func:`main` returns; tearing down
    the interpreter (freeing pandas, matplotlib and numpy objects, stopping
    thread pools) then takes about 0.3 s on this project's machine, a tenth of
    a report on 10,000 rows, and does nothing the user needs. So the output is
    flushed and the process ends without it (``os._exit``). Call :func:`main`
    to run the command inside another program.
    """
    code = main()
    _exit_now(code)


def _exit_now(code: int) -> None:
    try:
        sys.stdout.flush()
        sys.stderr.flush()
    finally:
        os._exit(code)


if __name__ == "__main__":
    run()
