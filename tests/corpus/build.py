"""Build a corpus of messy data files, each with the reading it must give.

Every file is invented here, from seeded random numbers, in scenarios of our own (a pump test, a
sediment survey, a lab's calibration runs); none of it is a measurement.  Each case knows its clean
data (the rows that must be used, with their true values) and what must be skipped and why, or the
words of the refusal it must give.  Files are written the way spreadsheet programs and exports write
them: openpyxl for .xlsx (as a program that does not calculate writes them), LibreOffice for .xls and
.ods (one ``soffice --headless --convert-to`` call per format for the whole corpus), text exports in
UTF-8, UTF-16 and cp1252 with comma, semicolon and tab delimiters.

Run ``python tests/corpus/build.py FOLDER`` to write the corpus into FOLDER and list it.
"""
from __future__ import annotations

import csv
import datetime as dt
import os
import shutil
import subprocess
import sys
import zipfile
from dataclasses import dataclass, field

import numpy as np

__all__ = ["Case", "CASES", "build_all"]


@dataclass
class Case:
    """One messy file and the reading it must give.

    ``y``/``x`` are the clean values of the rows that must be used (in file order); ``skipped`` maps a reason
    key of unbend.udfs.intake.REASON_KEYS to the rows it must skip; ``refuse`` is a list of words the refusal
    must contain (then nothing is used); ``args`` are the options of ``unbend report``.
    """

    name: str
    file: str
    build: object
    args: dict
    y: list = field(default_factory=list)
    x: list = field(default_factory=list)
    skipped: dict = field(default_factory=dict)
    refuse: tuple = ()
    labels: tuple = ()        # expected (y label, x label) when units or dates go into them
    notes: tuple = ()         # words expected in the reading's sentences
    convert: str = ""         # "xls" or "ods": built as .xlsx, then converted by LibreOffice
    from_text: int | None = None


def pump(n=24, seed=1, scale=1.0, digits=3):
    """Invented pump test: flow against pump speed, a power curve with a little scatter (not measurements)."""
    rng = np.random.default_rng(seed)
    x = np.round(rng.uniform(5.0, 60.0, n), 2)
    y = np.round(scale * 0.8 * x ** 1.4 * rng.lognormal(0.0, 0.08, n), digits)
    return [float(v) for v in y], [float(v) for v in x]


def _csv(path, rows, delimiter=",", encoding="utf-8", quoting=csv.QUOTE_MINIMAL):
    with open(path, "w", newline="", encoding=encoding) as fh:
        w = csv.writer(fh, delimiter=delimiter, quoting=quoting, lineterminator="\r\n")
        w.writerows(rows)
    return path


def _wb():
    import openpyxl
    return openpyxl.Workbook()


def _fmt(v, dec=".", thou="", nd=None):
    s = f"{v:,.{nd}f}" if nd is not None else f"{v:,}"
    s = s.replace(",", "\0").replace(".", dec).replace("\0", thou)
    return s


# ----------------------------------------------------------------------------- builders
def b_clean_csv(folder):
    y, x = pump(seed=1)
    return _csv(os.path.join(folder, "clean.csv"), [["speed", "flow"]] + [[a, b] for a, b in zip(x, y)])


def b_title_block(folder):
    y, x = pump(seed=2)
    wb = _wb()
    ws = wb.active
    ws.title = "Pump test"
    ws["A1"] = "Invented pump test for unbend's reading tests (not measurements)"
    ws["A2"] = "Run by the test suite; speeds in rpm/10"
    ws.append([])
    ws.append(["speed", "flow", "operator"])
    for a, b in zip(x, y):
        ws.append([a, b, "test"])
    wb.save(os.path.join(folder, "title_block.xlsx"))
    return os.path.join(folder, "title_block.xlsx")


def b_header_row_given(folder):
    y, x = pump(seed=3)
    wb = _wb()
    ws = wb.active
    ws.append(["Site:", "north bank", "Date:", "invented"])  # two notes that look like a header
    ws.append(["Crew:", "test suite"])
    ws.append([])
    ws.append(["speed", "flow"])
    for a, b in zip(x, y):
        ws.append([a, b])
    wb.save(os.path.join(folder, "header_row_given.xlsx"))
    return os.path.join(folder, "header_row_given.xlsx")


def b_units_row(folder):
    y, x = pump(seed=4)
    wb = _wb()
    ws = wb.active
    ws.append(["speed", "flow"])
    ws.append(["(rpm)", "(L/s)"])
    for a, b in zip(x, y):
        ws.append([a, b])
    wb.save(os.path.join(folder, "units_row.xlsx"))
    return os.path.join(folder, "units_row.xlsx")


def b_table_totals(folder):
    from openpyxl.worksheet.table import Table
    y, x = pump(seed=5)
    wb = _wb()
    ws = wb.active
    ws.title = "Data"
    ws.append(["speed", "flow"])
    for a, b in zip(x, y):
        ws.append([a, b])
    ws.append([max(x), max(y)])  # a totals row showing the largest values: only the table says it is one
    t = Table(displayName="PumpRuns", ref=f"A1:B{len(x) + 2}")
    t.totalsRowCount = 1
    ws.add_table(t)
    wb.save(os.path.join(folder, "table_totals.xlsx"))
    return os.path.join(folder, "table_totals.xlsx")


def b_total_lines_csv(folder):
    y, x = pump(seed=6)
    rows = [["run", "speed", "flow"]] + [[f"r{i + 1}", a, b] for i, (a, b) in enumerate(zip(x, y))]
    rows += [["Total", round(sum(x), 2), round(sum(y), 3)], ["Mittelwert", round(np.mean(x), 2),
                                                               round(np.mean(y), 3)]]
    return _csv(os.path.join(folder, "total_lines.csv"), rows)


def b_semicolon_eu(folder):
    y, x = pump(seed=7, scale=60.0, digits=1)  # flows in the thousands: "1.412,5"
    y[0] = 1412.0  # written "1.412": one thousand four hundred and twelve
    rows = [["Drehzahl", "Förderstrom"]] + [[_fmt(a, ",", ".", 2), _fmt(b, ",", ".", 0 if b == 1412.0 else 1)]
                                            for a, b in zip(x, y)]
    return _csv(os.path.join(folder, "semicolon_eu.csv"), rows, delimiter=";", encoding="cp1252")


def b_us_thousands(folder):
    y, x = pump(seed=8, scale=60.0, digits=2)
    rows = [["speed", "flow"]] + [[a, _fmt(b, ".", ",", 2)] for a, b in zip(x, y)]
    return _csv(os.path.join(folder, "us_thousands.csv"), rows)


def b_eu_text_xlsx(folder):
    y, x = pump(seed=9, scale=60.0, digits=2)
    wb = _wb()
    ws = wb.active
    ws.append(["speed", "flow"])
    for a, b in zip(x, y):
        ws.append([a, _fmt(b, ",", ".", 2)])
        ws.cell(ws.max_row, 2).number_format = "@"
    wb.save(os.path.join(folder, "eu_text.xlsx"))
    return os.path.join(folder, "eu_text.xlsx")


def b_text_numbers(folder):
    y, x = pump(seed=10)
    wb = _wb()
    ws = wb.active
    ws.append(["speed", "flow"])
    for i, (a, b) in enumerate(zip(x, y)):
        ws.append([a, repr(b) if i % 3 == 0 else b])  # every third flow typed into a text-formatted cell
        if i % 3 == 0:
            ws.cell(ws.max_row, 2).number_format = "@"
    wb.save(os.path.join(folder, "text_numbers.xlsx"))
    return os.path.join(folder, "text_numbers.xlsx")


def b_units_in_cells(folder):
    y, x = pump(seed=11)
    rows = [["speed", "suspended solids"]] + [[a, f"{b} mg/L"] for a, b in zip(x, y)]
    return _csv(os.path.join(folder, "units_in_cells.csv"), rows)


def b_percent(folder):
    y, x = pump(seed=12)
    xs = [round(v / 100.0, 4) for v in x]  # speeds as fractions of the rated speed, written as percents
    rows = [["load", "flow"]] + [[f"{round(a * 100, 2)}%", b] for a, b in zip(xs, y)]
    return _csv(os.path.join(folder, "percent.csv"), rows)


def b_currency(folder):
    y, x = pump(seed=13, scale=40.0, digits=2)
    rows = [["hours", "cost"]] + [[a, f"${_fmt(b, '.', ',', 2)}"] for a, b in zip(x, y)]
    return _csv(os.path.join(folder, "currency.csv"), rows)


DATE0 = dt.datetime(2024, 3, 4)


def _days(n, seed):
    rng = np.random.default_rng(seed)
    return sorted(int(v) for v in rng.choice(np.arange(0, 200), n, replace=False))


def b_dates_xlsx(folder):
    d = _days(24, 14)
    rng = np.random.default_rng(14)
    y = [float(round(5.0 * (v + 3) ** 0.7 * rng.lognormal(0, 0.05), 3)) for v in d]
    wb = _wb()
    ws = wb.active
    ws.append(["sampled on", "sediment"])
    for v, b in zip(d, y):
        ws.append([(DATE0 + dt.timedelta(days=v)).date(), b])
    wb.save(os.path.join(folder, "dates.xlsx"))
    return os.path.join(folder, "dates.xlsx")


def b_dates_csv(folder):
    d = _days(24, 15)
    rng = np.random.default_rng(15)
    y = [float(round(5.0 * (v + 3) ** 0.7 * rng.lognormal(0, 0.05), 3)) for v in d]
    rows = [["date", "sediment"]] + [[(DATE0 + dt.timedelta(days=v)).date().isoformat(), b] for v, b in zip(d, y)]
    return _csv(os.path.join(folder, "dates.csv"), rows)


def b_times_csv(folder):
    rng = np.random.default_rng(16)
    mins = sorted(int(v) for v in rng.choice(np.arange(6 * 60, 18 * 60, 5), 20, replace=False))
    y = [float(round(2.0 + 0.3 * (m / 60.0) ** 1.2 * rng.lognormal(0, 0.05), 3)) for m in mins]
    rows = [["time", "temperature rise"]] + [[f"{m // 60:02d}:{m % 60:02d}", b] for m, b in zip(mins, y)]
    return _csv(os.path.join(folder, "times.csv"), rows)


def b_limits_csv(folder):
    y, x = pump(seed=17)
    rows = [["speed", "residue"]] + [[a, b] for a, b in zip(x, y)]
    rows[3][1] = "<0.5"
    rows[7][1] = "< 0.5"
    rows[11][1] = "ND"
    return _csv(os.path.join(folder, "limits.csv"), rows)


def b_errors_xlsx(folder):
    y, x = pump(seed=18)
    wb = _wb()
    ws = wb.active
    ws.append(["speed", "flow"])
    for i, (a, b) in enumerate(zip(x, y)):
        ws.append([a, "#N/A" if i == 4 else ("#DIV/0!" if i == 9 else b)])  # openpyxl writes these as error cells
    wb.save(os.path.join(folder, "errors.xlsx"))
    return os.path.join(folder, "errors.xlsx")


def b_filtered(folder, name="filtered.xlsx"):
    y, x = pump(seed=19)
    wb = _wb()
    ws = wb.active
    ws.append(["pump", "speed", "flow"])
    for i, (a, b) in enumerate(zip(x, y)):
        ws.append(["P1" if i % 4 else "P2", a, b])
    ws.auto_filter.ref = f"A1:C{len(x) + 1}"
    ws.auto_filter.add_filter_column(0, ["P1"])
    for i in range(len(x)):
        if i % 4 == 0:
            ws.row_dimensions[i + 2].hidden = True  # as a spreadsheet program saves a filtered table
    wb.save(os.path.join(folder, name))
    return os.path.join(folder, name)


def b_hand_hidden(folder, name="hand_hidden.xlsx"):
    y, x = pump(seed=20)
    wb = _wb()
    ws = wb.active
    ws.append(["speed", "flow"])
    for a, b in zip(x, y):
        ws.append([a, b])
    for r in (3, 8):
        ws.row_dimensions[r].hidden = True
    wb.save(os.path.join(folder, name))
    return os.path.join(folder, name)


def b_sheets(folder):
    y, x = pump(seed=21)
    wb = _wb()
    wb.active.title = "About"
    wb.active["A1"] = "Invented pump tests for unbend's reading tests."
    ws = wb.create_sheet("Summary")
    ws.append(["pump", "runs"])
    ws.append(["P1", 24])
    ws = wb.create_sheet("Runs")
    ws.append(["speed", "flow"])
    for a, b in zip(x, y):
        ws.append([a, b])
    wb.save(os.path.join(folder, "sheets.xlsx"))
    return os.path.join(folder, "sheets.xlsx")


def b_letters(folder):
    y, x = pump(seed=22)
    wb = _wb()
    ws = wb.active
    ws.append(["run", "speed", "note", "flow"])
    for i, (a, b) in enumerate(zip(x, y)):
        ws.append([i + 1, a, "", b])
    wb.save(os.path.join(folder, "letters.xlsx"))
    return os.path.join(folder, "letters.xlsx")


def b_same_column(folder):
    y, x = pump(seed=23)
    return _csv(os.path.join(folder, "same_column.csv"), [["v", "q"]] + [[a, b] for a, b in zip(x, y)])


def b_header_spaces(folder):
    y, x = pump(seed=24)
    wb = _wb()
    ws = wb.active
    ws.append(["Pump\nspeed", "Flow\u00a0 rate  "])
    for a, b in zip(x, y):
        ws.append([a, b])
    wb.save(os.path.join(folder, "header_spaces.xlsx"))
    return os.path.join(folder, "header_spaces.xlsx")


def b_for_xls(folder):
    y, x = pump(seed=25)
    wb = _wb()
    ws = wb.active
    ws.title = "Runs"
    ws.append(["run", "speed", "flow"])
    for i, (a, b) in enumerate(zip(x, y)):
        ws.append([f"r{i + 1}", a, b])
    ws.append(["Summe", sum(x), sum(y)])
    ws.row_dimensions[5].hidden = True
    wb.save(os.path.join(folder, "lo_xls.xlsx"))
    return os.path.join(folder, "lo_xls.xlsx")


def b_for_ods(folder):
    return b_filtered(folder, "lo_ods.xlsx")


def b_for_ods_errors(folder):
    path = b_errors_xlsx(folder)
    target = os.path.join(folder, "lo_errors.xlsx")
    shutil.copyfile(path, target)
    return target


def b_utf16_tab(folder):
    y, x = pump(seed=26)
    rows = [["Drehzahl", "Förderstrom"]] + [[_fmt(a, ",", "", 2), _fmt(b, ",", "", 3)] for a, b in zip(x, y)]
    path = os.path.join(folder, "utf16_tab.txt")
    with open(path, "w", newline="", encoding="utf-16") as fh:
        w = csv.writer(fh, delimiter="\t", lineterminator="\r\n")
        w.writerows(rows)
    return path


def b_cp1252(folder):
    y, x = pump(seed=27)
    rows = [["Température °C", "Débit µg/L"]] + [[_fmt(a, ",", "", 2), _fmt(b, ",", "", 3)] for a, b in zip(x, y)]
    return _csv(os.path.join(folder, "cp1252.csv"), rows, delimiter=";", encoding="cp1252")


def b_no_values(folder):
    y, x = pump(seed=28)
    wb = _wb()
    ws = wb.active
    ws.append(["speed", "flow"])
    for i, a in enumerate(x):
        ws.append([a, f"=0.8*A{i + 2}^1.4"])  # formulas written by a program that does not calculate
    wb.save(os.path.join(folder, "no_values.xlsx"))
    return os.path.join(folder, "no_values.xlsx")


def b_some_no_values(folder):
    y, x = pump(seed=29)
    wb = _wb()
    ws = wb.active
    ws.append(["speed", "flow"])
    for i, (a, b) in enumerate(zip(x, y)):
        ws.append([a, f"=B{i + 1}*1.01" if i in (5, 6) else b])
    wb.save(os.path.join(folder, "some_no_values.xlsx"))
    return os.path.join(folder, "some_no_values.xlsx")


def b_ambiguous_tsv(folder):
    rng = np.random.default_rng(30)
    x = sorted(int(v) for v in rng.choice(np.arange(1, 60), 20, replace=False))
    y = [f"{(1 + 0.05 * v) * 1.1:.3f}" for v in x]  # every value like 1.234: a point or a thousands separator?
    rows = [["speed", "flow"]] + [[a, b] for a, b in zip(x, y)]
    return _csv(os.path.join(folder, "ambiguous.tsv"), rows, delimiter="\t")


def b_conflict_tsv(folder):
    y, x = pump(seed=31)
    rows = [["speed", "flow"]] + [[a, str(b).replace(".", ",") if i % 2 else b] for i, (a, b) in
                                  enumerate(zip(x, y))]
    return _csv(os.path.join(folder, "conflict.tsv"), rows, delimiter="\t")


def b_sum_formula(folder):
    """A totals row of =SUM(...) cells with their calculated values stored, as a spreadsheet program saves it."""
    y, x = pump(seed=32)
    wb = _wb()
    ws = wb.active
    ws.append(["speed", "flow"])
    for a, b in zip(x, y):
        ws.append([a, b])
    n = len(x) + 1
    ws.append([f"=AVERAGE(A2:A{n})", f"=SUM(B2:B{n})"])
    path = os.path.join(folder, "sum_formula.xlsx")
    wb.save(path)
    _store_values(path, {f"A{n + 1}": float(np.mean(x)), f"B{n + 1}": float(sum(y))})
    return path


def _store_values(path, values):
    """Write calculated values into formula cells of sheet1 (what a calculating program stores)."""
    import re
    tmp = path + ".tmp"
    with zipfile.ZipFile(path) as zin, zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED) as zout:
        for item in zin.infolist():
            data = zin.read(item.filename)
            if item.filename == "xl/worksheets/sheet1.xml":
                text = data.decode()
                for ref, v in values.items():
                    text = re.sub(rf'(<c r="{ref}"[^>]*>\s*<f>[^<]*</f>)\s*<v\s*/>', rf"\g<1><v>{v!r}</v>", text)
                data = text.encode()
            zout.writestr(item, data)
    os.replace(tmp, path)


def b_total_in_x(folder):
    y, x = pump(seed=33)
    rows = [["speed", "flow"]] + [[a, b] for a, b in zip(x, y)] + [["TOTAL:", round(sum(y), 3)]]
    return _csv(os.path.join(folder, "total_in_x.csv"), rows)


def b_unlabelled_totals(folder):
    y, x = pump(seed=34)
    rows = [["speed", "flow"]] + [[a, b] for a, b in zip(x, y)] + [[round(sum(x), 2), round(sum(y), 3)]]
    return _csv(os.path.join(folder, "unlabelled_totals.csv"), rows)


def b_blank_and_notes(folder):
    y, x = pump(seed=35)
    rows = [["speed", "flow"]] + [[a, b] for a, b in zip(x[:10], y[:10])] + [["", ""]] + \
        [[a, b] for a, b in zip(x[10:], y[10:])] + [["", ""], ["Notes: invented runs for tests.", ""]]
    return _csv(os.path.join(folder, "blank_and_notes.csv"), rows)


def b_booleans_text(folder):
    y, x = pump(seed=36)
    wb = _wb()
    ws = wb.active
    ws.append(["speed", "flow"])
    for i, (a, b) in enumerate(zip(x, y)):
        ws.append([a, True if i == 2 else ("n/a" if i == 3 else b)])
    wb.save(os.path.join(folder, "booleans_text.xlsx"))
    return os.path.join(folder, "booleans_text.xlsx")


# ----------------------------------------------------------------------------- cases
def _drop(values, idx):
    return [v for i, v in enumerate(values) if i not in set(idx)]


def _cases():
    c = []
    y, x = pump(seed=1)
    c.append(Case("clean csv", "clean.csv", b_clean_csv, dict(y="flow", x=["speed"]), y, x))
    y, x = pump(seed=2)
    c.append(Case("title block above the header", "title_block.xlsx", b_title_block, dict(y="flow", x=["speed"]),
                  y, x, notes=("header is on row 4",)))
    c.append(Case("title block, columns by letter", "title_block.xlsx", b_title_block, dict(y="B", x=["A"]),
                  y, x, notes=("header is on row 4",)))
    y, x = pump(seed=3)
    c.append(Case("header row given", "header_row_given.xlsx", b_header_row_given,
                  dict(y="flow", x=["speed"], header_row=4), y, x))
    c.append(Case("header found by the column names", "header_row_given.xlsx", b_header_row_given,
                  dict(y="flow", x=["speed"]), y, x, notes=("header is on row 4",)))
    y, x = pump(seed=4)
    c.append(Case("units row under the header", "units_row.xlsx", b_units_row, dict(y="flow", x=["speed"]), y, x,
                  labels=("flow (L/s)", "speed (rpm)"), notes=("holds units",)))
    y, x = pump(seed=5)
    c.append(Case("table totals row (table metadata)", "table_totals.xlsx", b_table_totals,
                  dict(y="flow", x=["speed"]), y, x, skipped={"summary row": 1}, notes=("totals row",)))
    y, x = pump(seed=6)
    c.append(Case("Total and Mittelwert lines in a CSV", "total_lines.csv", b_total_lines_csv,
                  dict(y="flow", x=["speed"]), y, x, skipped={"summary row": 2}))
    y, x = pump(seed=7, scale=60.0, digits=1)
    y[0] = 1412.0
    c.append(Case("semicolon CSV, thousands dots, decimal commas", "semicolon_eu.csv", b_semicolon_eu,
                  dict(y="Förderstrom", x=["Drehzahl"]), y, x, from_text=2 * len(y)))
    y, x = pump(seed=8, scale=60.0, digits=2)
    c.append(Case("1,234.50 in a comma CSV", "us_thousands.csv", b_us_thousands, dict(y="flow", x=["speed"]), y, x))
    y, x = pump(seed=9, scale=60.0, digits=2)
    c.append(Case("1.234,56 as text in a workbook", "eu_text.xlsx", b_eu_text_xlsx, dict(y="flow", x=["speed"]),
                  y, x, from_text=len(y)))
    y, x = pump(seed=10)
    c.append(Case("numbers as text in a text-formatted column", "text_numbers.xlsx", b_text_numbers,
                  dict(y="flow", x=["speed"]), y, x, from_text=8))
    y, x = pump(seed=11)
    c.append(Case("12 mg/L in the cells", "units_in_cells.csv", b_units_in_cells,
                  dict(y="suspended solids", x=["speed"]), y, x, labels=("suspended solids (mg/L)", "speed")))
    y, x = pump(seed=12)
    c.append(Case("percent", "percent.csv", b_percent, dict(y="flow", x=["load"]), y,
                  [round(v / 100.0, 4) for v in x], notes=("percent sign",)))
    y, x = pump(seed=13, scale=40.0, digits=2)
    c.append(Case("currency", "currency.csv", b_currency, dict(y="cost", x=["hours"]), y, x,
                  labels=("cost ($)", "hours")))
    d = _days(24, 14)
    rng = np.random.default_rng(14)
    yd = [float(round(5.0 * (v + 3) ** 0.7 * rng.lognormal(0, 0.05), 3)) for v in d]
    c.append(Case("dates as x (date cells)", "dates.xlsx", b_dates_xlsx, dict(y="sediment", x=["sampled on"]), yd,
                  [float(v - d[0]) for v in d],
                  labels=("sediment", f"sampled on (days since {(DATE0 + dt.timedelta(days=d[0])).date()})")))
    d = _days(24, 15)
    rng = np.random.default_rng(15)
    yd = [float(round(5.0 * (v + 3) ** 0.7 * rng.lognormal(0, 0.05), 3)) for v in d]
    c.append(Case("dates as x (ISO text)", "dates.csv", b_dates_csv, dict(y="sediment", x=["date"]), yd,
                  [float(v - d[0]) for v in d]))
    rng = np.random.default_rng(16)
    mins = sorted(int(v) for v in rng.choice(np.arange(6 * 60, 18 * 60, 5), 20, replace=False))
    yt = [float(round(2.0 + 0.3 * (m / 60.0) ** 1.2 * rng.lognormal(0, 0.05), 3)) for m in mins]
    c.append(Case("times of day as x", "times.csv", b_times_csv, dict(y="temperature rise", x=["time"]), yt,
                  [m / 60.0 for m in mins], labels=("temperature rise", "time (hours since midnight)")))
    y, x = pump(seed=17)
    c.append(Case("<0.5 and ND", "limits.csv", b_limits_csv, dict(y="residue", x=["speed"]), _drop(y, [2, 6, 10]),
                  _drop(x, [2, 6, 10]), skipped={"below a detection limit": 3}, notes=("leaves them out",)))
    y, x = pump(seed=18)
    c.append(Case("error values", "errors.xlsx", b_errors_xlsx, dict(y="flow", x=["speed"]), _drop(y, [4, 9]),
                  _drop(x, [4, 9]), skipped={"error value": 2}))
    y, x = pump(seed=19)
    hid = [i for i in range(len(x)) if i % 4 == 0]
    c.append(Case("rows hidden by a filter", "filtered.xlsx", b_filtered, dict(y="flow", x=["speed"]),
                  _drop(y, hid), _drop(x, hid), skipped={"hidden by a filter": len(hid)},
                  notes=("hidden by a filter were skipped",)))
    c.append(Case("rows hidden by a filter, --hidden use", "filtered.xlsx", b_filtered,
                  dict(y="flow", x=["speed"], hidden="use"), y, x, notes=("were used",)))
    y, x = pump(seed=20)
    c.append(Case("rows hidden by hand", "hand_hidden.xlsx", b_hand_hidden, dict(y="flow", x=["speed"]), y, x,
                  notes=("hidden by hand",)))
    c.append(Case("rows hidden by hand, --hidden skip", "hand_hidden.xlsx", b_hand_hidden,
                  dict(y="flow", x=["speed"], hidden="skip"), _drop(y, [1, 6]), _drop(x, [1, 6]),
                  skipped={"hidden row": 2}))
    y, x = pump(seed=21)
    c.append(Case("several sheets, none named", "sheets.xlsx", b_sheets, dict(y="flow", x=["speed"]), y, x,
                  notes=("'Runs' was used",)))
    c.append(Case("no sheet holds the columns", "sheets.xlsx", b_sheets, dict(y="flow", x=["rate"]),
                  refuse=("no sheet", "'About'", "'Runs' (speed, flow)", "--sheet")))
    y, x = pump(seed=22)
    c.append(Case("columns by letter", "letters.xlsx", b_letters, dict(y="D", x=["B"]), y, x))
    c.append(Case("the same column twice", "same_column.csv", b_same_column, dict(y="v", x=["V"]),
                  refuse=("same column", "--y v", "--x V")))
    y, x = pump(seed=24)
    c.append(Case("header with line breaks and non-breaking spaces", "header_spaces.xlsx", b_header_spaces,
                  dict(y="flow rate", x=["pump speed"]), y, x))
    y, x = pump(seed=25)
    c.append(Case(".xls saved by LibreOffice: Summe line, hidden row used", "lo_xls.xls", b_for_xls,
                  dict(y="flow", x=["speed"]), y, x, skipped={"summary row": 1}, convert="xls",
                  notes=("hidden by hand",)))
    y, x = pump(seed=19)
    c.append(Case(".ods saved by LibreOffice: filtered rows", "lo_ods.ods", b_for_ods, dict(y="flow", x=["speed"]),
                  _drop(y, hid), _drop(x, hid), skipped={"hidden by a filter": len(hid)}, convert="ods"))
    y, x = pump(seed=18)
    c.append(Case(".ods saved by LibreOffice: error values", "lo_errors.ods", b_for_ods_errors,
                  dict(y="flow", x=["speed"]), _drop(y, [4, 9]), _drop(x, [4, 9]), skipped={"error value": 2},
                  convert="ods"))
    y, x = pump(seed=26)
    c.append(Case("UTF-16 tab export with decimal commas", "utf16_tab.txt", b_utf16_tab,
                  dict(y="Förderstrom", x=["Drehzahl"]), y, x))
    y, x = pump(seed=27)
    c.append(Case("cp1252 semicolon CSV", "cp1252.csv", b_cp1252, dict(y="Débit µg/L", x=["Température °C"]), y, x))
    c.append(Case("formulas without saved values", "no_values.xlsx", b_no_values, dict(y="flow", x=["speed"]),
                  refuse=("formula without a saved value", "=0.8*A2^1.4", "spreadsheet program")))
    y, x = pump(seed=29)
    c.append(Case("a few formulas without values", "some_no_values.xlsx", b_some_no_values,
                  dict(y="flow", x=["speed"]), _drop(y, [5, 6]), _drop(x, [5, 6]),
                  skipped={"formula without a saved value": 2}, notes=("save it",)))
    c.append(Case("decimal separator left open", "ambiguous.tsv", b_ambiguous_tsv, dict(y="flow", x=["speed"]),
                  refuse=("flow", "--decimal ,", "--decimal .")))
    rng = np.random.default_rng(30)
    xa = sorted(int(v) for v in rng.choice(np.arange(1, 60), 20, replace=False))
    c.append(Case("decimal separator given as a point", "ambiguous.tsv", b_ambiguous_tsv,
                  dict(y="flow", x=["speed"], decimal="."), [float(f"{(1 + 0.05 * v) * 1.1:.3f}") for v in xa],
                  [float(v) for v in xa]))
    c.append(Case("decimal separator given as a comma (thousands points)", "ambiguous.tsv", b_ambiguous_tsv,
                  dict(y="flow", x=["speed"], decimal=","), [float(f"{(1 + 0.05 * v) * 1.1:.3f}") * 1000 for v in xa],
                  [float(v) for v in xa]))
    c.append(Case("decimal points and commas mixed", "conflict.tsv", b_conflict_tsv, dict(y="flow", x=["speed"]),
                  refuse=("decimal point", "decimal comma", "--decimal")))
    y, x = pump(seed=32)
    c.append(Case("SUM and AVERAGE formulas in a totals row", "sum_formula.xlsx", b_sum_formula,
                  dict(y="flow", x=["speed"]), y, x, skipped={"summary row": 1}, notes=("SUM(",)))
    y, x = pump(seed=33)
    c.append(Case("TOTAL: in the x column", "total_in_x.csv", b_total_in_x, dict(y="flow", x=["speed"]), y, x,
                  skipped={"summary row": 1}))
    y, x = pump(seed=34)
    c.append(Case("totals row without a label", "unlabelled_totals.csv", b_unlabelled_totals,
                  dict(y="flow", x=["speed"]), y, x, skipped={"summary row": 1}, notes=("sum of the rows above",)))
    y, x = pump(seed=35)
    c.append(Case("blank row inside, notes below", "blank_and_notes.csv", b_blank_and_notes,
                  dict(y="flow", x=["speed"]), y, x, skipped={"blank": 1}))
    y, x = pump(seed=36)
    c.append(Case("TRUE and n/a among the numbers", "booleans_text.xlsx", b_booleans_text,
                  dict(y="flow", x=["speed"]), _drop(y, [2, 3]), _drop(x, [2, 3]),
                  skipped={"true/false value": 1, "not a number": 1}))
    return c


CASES = _cases()


def build_all(folder: str, soffice: str | None = None) -> dict:
    """Write every case's file into ``folder``; returns {file name: path}. LibreOffice converts the .xls and
    .ods cases (one call per format); without ``soffice`` those files are missing from the result."""
    os.makedirs(folder, exist_ok=True)
    out = {}
    convert = {"xls": [], "ods": []}
    for case in CASES:
        if case.file in out:
            continue
        path = case.build(folder)
        if case.convert:
            convert[case.convert].append(path)
        else:
            out[case.file] = path
    soffice = soffice if soffice is not None else shutil.which("soffice")
    for fmt, paths in convert.items():
        if not paths or not soffice:
            continue
        outdir = os.path.join(folder, fmt)
        subprocess.run([soffice, "--headless", "--norestore", "--convert-to", fmt, "--outdir", outdir, *paths],
                       capture_output=True, timeout=240, check=False,
                       env={**os.environ, "HOME": os.path.join(folder, ".soffice-home")})
        for p in paths:
            stem = os.path.splitext(os.path.basename(p))[0]
            target = os.path.join(outdir, f"{stem}.{fmt}")
            if os.path.exists(target):
                final = os.path.join(folder, f"{stem}.{fmt}")
                os.replace(target, final)
                out[os.path.basename(final)] = final
    return out


if __name__ == "__main__":  # pragma: no cover - a helper for people
    files = build_all(sys.argv[1] if len(sys.argv) > 1 else "corpus")
    for case in CASES:
        print(f"{case.name:55s} {files.get(case.file, '(not built)')}")
