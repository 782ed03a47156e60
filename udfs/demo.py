"""Demo workbooks built from invented, seeded data in scenarios of our own.

Each workbook has: a Notes sheet in plain words; the data in a spreadsheet
table on the Data sheet; cells that call the unbend functions (they need
xlwings); a model sheet written entirely in built-in formulas that reads the
Data sheet, so it recalculates without the add-in; native charts before and
after re-expression and of the residuals; and the xlwings configuration sheet
that names the UDF module.

Formulas that return a table are stored as dynamic arrays (:mod:`.spill`), so
they spill in versions that have them. Every workbook comes twice: ``.xlsx``
(no macros, for colleagues) and ``.xlsm``, a macro-enabled copy that carries
xlwings' standalone VBA module, taken from the ``quickstart_standalone.xlsm``
template of the xlwings installed here, so Import Functions works in it as it
is, with or without the xlwings add-in.
"""
from __future__ import annotations

import os
import zipfile

import numpy as np
from openpyxl import Workbook
from openpyxl.chart import Reference
from openpyxl.styles import Alignment
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.formula import ArrayFormula
from openpyxl.worksheet.table import Table, TableStyleInfo

import unbend
from unbend import demo_data
from unbend.fitting import CAUTION

from .sheets import HEADER_FONT, NOTE_FONT, TITLE_FONT, atomic_save, printable, put, scatter_chart, set_widths
from .spill import put_spilling, save_spilling

__all__ = ["SCENARIOS", "build_demo_workbooks", "build_demo_workbook", "DEMO_REPORT_SCENARIO", "standalone_template",
           "MACRO_NOTES"]

#: Rows below the data that the model sheet already links to, for data added later.
LINKED_SPARE = 200

SCENARIOS = {
    "river_sediment": dict(
        make=demo_data.river_sediment, table="RiverData", y="sediment_t_per_day", x="discharge_m3s",
        title="River monitoring: suspended sediment against discharge",
        story=("A river-monitoring team samples suspended sediment (tonnes per day) at different discharges "
               "(cubic metres per second). Load climbs much faster than flow and its scatter grows with it; logs "
               "of both straighten the relation. Loads are added up over a year, so the average (the smeared "
               "mean), not the typical value, is what matters for totals."),
        new_x=[5.0, 50.0, 200.0, 600.0]),
    "tool_life": dict(
        make=demo_data.tool_life, table="ToolData", y="tool_life_min", x="cutting_speed_m_min",
        title="Machine shop: cutting-tool life against cutting speed",
        story=("A machine shop records how many minutes a cutting tool lasts at different cutting speeds "
               "(metres per minute). Life falls steeply as speed rises; logs of both turn the curve into a line."),
        new_x=[100.0, 150.0, 250.0, 350.0]),
    "fleet_fuel": dict(
        make=demo_data.fleet_fuel, table="FleetData", y="km_per_litre", x="payload_t",
        title="Delivery fleet: fuel economy against payload",
        story=("A delivery fleet logs kilometres per litre at different payloads (tonnes). Economy is a rate; its "
               "reciprocal, litres per kilometre, rises in a straight line with payload."),
        new_x=[1.0, 6.0, 11.0, 15.0]),
    "batch_defects": dict(
        make=demo_data.batch_defects, table="DefectData", y="defects", x="batch_size",
        title="Production: defect counts against batch size",
        story=("A production line counts defects in each batch. Counts scatter more when they are larger; the "
               "square root steadies them."),
        new_x=[500.0, 2500.0, 4800.0, 7000.0]),
    "detector_calibration": dict(
        make=demo_data.detector_calibration, table="DetectorData", y="signal_counts", x="conc_ug_per_l",
        title="Lab calibration: detector signal against standard concentration, used backwards",
        story=("A lab reads a detector's signal (counts) for standards of known concentration (micrograms per "
               "litre), three readings of each, then reads unknown samples and wants their concentration back with "
               "an honest interval. The detector saturates gently: the signal grows more slowly than the "
               "concentration, and its scatter grows with it; logs of both straighten the relation. Reading x back "
               "from a signal inverts that line, and the interval comes out lopsided in micrograms per litre."),
        new_x=[1.0, 10.0, 50.0, 150.0],
        samples=demo_data.detector_samples, samples_table="SampleData"),
    "assay_batches": dict(
        make=demo_data.assay_batches, table="AssayData", y="result_mg_per_l", groups="batch",
        title="Lab assays: spread grows with level",
        story=("A lab runs assay batches at concentrations from about 2 to 300 mg/L. Within each batch the "
               "results scatter more at higher levels; spread against level suggests the power that evens the "
               "spread out.")),
    "gauging_network": dict(
        make=demo_data.gauging_network, table="NetData", y="sediment_t_per_day", x="discharge_m3s",
        groups="station", kind="network",
        title="Gauging network: sediment against discharge at 30 stations",
        story=("A river authority samples suspended sediment (tonnes per day) and discharge (cubic metres per "
               "second) at 30 gauging stations. Every station's load climbs faster than its flow; one re-expression "
               "for all stations (here logs of both) puts every slope on the same scale, so stations can be "
               "compared. Station 'G17 below the weir' sits below a weir that traps coarse sediment, and its "
               "readings bend another way: its residuals curve and its own power for y leaves the common one out. "
               "A few readings are missing (blank cells); they are skipped and counted."),
        new_x=[10.0, 50.0, 150.0, 400.0], predict_for=("G17 below the weir", "G05")),
}


def DEMO_REPORT_SCENARIO(paths):
    """(name, path, y column, x column) of the scenario `unbend demo` reports on."""
    name = "river_sediment"
    path = next(p for p in paths if os.path.basename(p) == f"{name}.xlsx")
    sc = SCENARIOS[name]
    return name, path, sc["y"], sc["x"]


def _notes(ws, sc, extra, macro_notes=()):
    put(ws, 1, 1, sc["title"]).font = TITLE_FONT
    lines = [
        "INVENTED DATA: " + demo_data.INVENTED + " The scenario is made up to show the method.",
        "",
        sc["story"],
        "",
        "What is in this workbook:",
        "- Data: the measurements as a table. Add new rows at the bottom of the table; formulas that use its "
        "columns grow with it.",
    ] + extra + [
        "- xlwings.conf: tells xlwings where the unbend functions are (UDF module unbend.udfs).",
        "",
        "Formulas that return a table spill into the cells below and to the right in versions with dynamic "
        "arrays. A version without them shows only the table's first value: select a block of cells starting at "
        "the formula, as large as the table, click in the formula bar and press Ctrl+Shift+Enter.",
    ] + list(macro_notes) + [
        "",
        "Cautions: " + CAUTION,
    ]
    for i, line in enumerate(lines, start=3):
        c = put(ws, i, 1, line)
        c.alignment = Alignment(wrap_text=True, vertical="top")
        ws.row_dimensions[i].height = 15 * max(1, len(line) // 100 + 1)
    set_widths(ws, {1: 110})


def _data_sheet(wb, sc, df):
    ws = wb.create_sheet("Data")
    cols = list(df.columns)
    for j, c in enumerate(cols, start=1):
        put(ws, 1, j, c).font = HEADER_FONT
    for i, row in enumerate(df.itertuples(index=False), start=2):
        for j, v in enumerate(row, start=1):
            put(ws, i, j, v)
    ref = f"A1:{get_column_letter(len(cols))}{len(df) + 1}"
    t = Table(displayName=sc["table"], ref=ref)
    t.tableStyleInfo = TableStyleInfo(name="TableStyleLight9", showRowStripes=True)
    ws.add_table(t)
    set_widths(ws, {j: 22 for j in range(1, len(cols) + 1)})
    return ws


def _config_sheet(wb):
    ws = wb.create_sheet("xlwings.conf")
    put(ws, 1, 1, "UDF Modules")
    put(ws, 1, 2, "unbend.udfs")
    set_widths(ws, {1: 20, 2: 20})


def _chart(ws, title, xref, yref, xlabel, ylabel, anchor):
    return scatter_chart(ws, title, xref, yref, xlabel, ylabel, anchor, height=8.5, width=15.0)


def _addin_sheet(wb, sc, yref, xref, new_first, new_last):
    ws = wb.create_sheet("With the add-in")
    put(ws, 1, 1, "Cells that call the unbend functions").font = TITLE_FONT
    note = put(ws, 2, 1, "These formulas need xlwings with the UDF module unbend.udfs (Windows desktop spreadsheet "
                         "program; see Notes). Without it they show a name error; the 'Model (no add-in)' sheet "
                         "gives the same line in built-in formulas. Tables spill where the program has dynamic arrays.")
    note.font = NOTE_FONT
    note.alignment = Alignment(wrap_text=True)
    ws.merge_cells("A2:H2")
    ws.row_dimensions[2].height = 32
    rows = [
        ("rung for y", f"=UNBEND_POWER({yref},{xref})"),
        ("rung for x", f'=UNBEND_POWER({yref},{xref},"x")'),
        ("in words", f"=UNBEND_EXPLAIN({yref},{xref})"),
        ("formula to share (median)", f'=UNBEND_FORMULA({yref},{xref},,,B20)'),
        ("formula to share (mean)", f'=UNBEND_FORMULA({yref},{xref},,,"B20","mean")'),
    ]
    put(ws, 3, 3, "the formula in column B, as text").font = NOTE_FONT
    r = 4
    for label, formula in rows:
        put(ws, r, 1, label).font = HEADER_FONT
        put_spilling(ws, f"B{r}", formula)  # one value, but stored the same way: no implicit-intersection @
        put(ws, r, 3, formula).font = NOTE_FONT
        r += 1
    put(ws, 10, 1, "Predictions at the new x values of the model sheet (one row per new x):").font = HEADER_FONT
    put_spilling(ws, "A11", f"=UNBEND_PREDICT({yref},{xref},'Model (no add-in)'!$A${new_first}:$A${new_last})")
    put(ws, 19, 1, "x for the shared formula").font = HEADER_FONT
    put(ws, 20, 1, "x value:")
    put(ws, 20, 2, 50.0)
    put(ws, 22, 1, "Suggested powers:").font = HEADER_FONT
    put_spilling(ws, "A23", f"=UNBEND_SUGGEST({yref},{xref})")
    put(ws, 28, 1, "The fit:").font = HEADER_FONT
    put_spilling(ws, "A29", f"=UNBEND_FIT({yref},{xref})")
    put(ws, 75, 1, "Every pair of rungs:").font = HEADER_FONT
    put_spilling(ws, "A76", f"=UNBEND_SCAN({yref},{xref})")
    put(ws, 115, 1, "Residual table for charts:").font = HEADER_FONT
    put_spilling(ws, "A116", f"=UNBEND_RESIDUALS({yref},{xref})")
    for r in (11, 23, 29, 76, 116):
        put(ws, r - 1, 3, ws.cell(row=r, column=1).value.text).font = NOTE_FONT
    set_widths(ws, {1: 28, 2: 30, 3: 90})


def _link_model_to_data(model, data_ws, n_data, y_col, x_col):
    """Point the model sheet's y and x cells at the Data sheet, for the data rows and spare rows."""
    table = next(t for t in model.tables.values() if t.displayName.startswith("UnbendData"))
    first = int("".join(ch for ch in table.ref.split(":")[0] if ch.isdigit())) + 1
    for i in range(n_data + LINKED_SPARE):
        src = i + 2
        put(model, first + i, 1, f'=IF(ISNUMBER(Data!${y_col}${src}),Data!${y_col}${src},"")', formula=True)
        put(model, first + i, 2, f'=IF(ISNUMBER(Data!${x_col}${src}),Data!${x_col}${src},"")', formula=True)
    return first


def _regression_book(name, sc, macro_notes=()):
    from .portable import NEW_COLUMNS, add_portable_sheet

    df = sc["make"]()
    y = df[sc["y"]].to_numpy(float)
    x = df[sc["x"]].to_numpy(float)
    yp, xp = unbend.best_pair(y, x)
    wb = Workbook()
    notes = wb.active
    notes.title = "Notes"
    data_ws = _data_sheet(wb, sc, df)
    samples = sc["samples"]() if "samples" in sc else None
    model = add_portable_sheet(wb, y, x, sc["new_x"], y_power=yp, x_power=xp, title="Model (no add-in)",
                               y_name=sc["y"], x_name=sc["x"], invented_data=True, spare_rows=LINKED_SPARE,
                               readings=() if samples is None else samples["reading_1"].to_numpy(float))
    cols = list(df.columns)
    ycol, xcol = get_column_letter(cols.index(sc["y"]) + 1), get_column_letter(cols.index(sc["x"]) + 1)
    first = _link_model_to_data(model, data_ws, len(df), ycol, xcol)
    new_table = [t for t in model.tables.values() if "NewX" in t.displayName][0]
    nf, nl = (int("".join(ch for ch in part if ch.isdigit())) for part in new_table.ref.split(":"))
    yref, xref = f"{sc['table']}[{sc['y']}]", f"{sc['table']}[{sc['x']}]"
    _addin_sheet(wb, sc, yref, xref, nf + 1, nl)
    extra = []
    if samples is not None:
        extra = _calibration_sheets(wb, sc, samples, yref, xref)

    charts = wb.create_sheet("Charts")
    put(charts, 1, 1, "Charts (built-in; they follow the model sheet)").font = TITLE_FONT
    last = first + len(df) + LINKED_SPARE - 1
    ref = lambda col: Reference(model, min_col=_col_index(col), min_row=first, max_row=last)  # noqa: E731
    _chart(charts, "Before: original units", ref("B"), ref("A"), sc["x"], sc["y"], "A3")
    _chart(charts, f"After: {unbend.rung_label(yp)} of y against {unbend.rung_label(xp)} of x", ref("E"), ref("D"),
           "x re-expressed", "y re-expressed", "J3")
    _chart(charts, "Residuals against the line: look for a curve or a fan", ref("F"), ref("G"),
           "line at this x (re-expressed)", "residual", "A21")
    _config_sheet(wb)
    _notes(notes, sc, [
        f"- Model (no add-in): the straight line of {unbend.rung_label(yp)} of y on {unbend.rung_label(xp)} of x in "
        "built-in formulas only. It reads the Data sheet, and its yellow cells (powers, starts, level) can be changed. "
        "Predictions come back in original units with intervals and an extrapolation flag.",
        "- With the add-in: the same analysis through the unbend cell functions (needs xlwings).",
        "- Charts: the data before and after re-expression, and the residuals; they work without the add-in.",
    ] + extra, macro_notes)
    return wb


def _calibration_sheets(wb, sc, samples, yref, xref) -> list:
    """Samples (their readings, as a table) and 'Read back' (UNBEND_INVERSE and UNBEND_LIMITS cells)."""
    ws = wb.create_sheet("Samples")
    cols = list(samples.columns)
    for j, c in enumerate(cols, start=1):
        put(ws, 1, j, c).font = HEADER_FONT
    for i, row in enumerate(samples.itertuples(index=False), start=2):
        for j, v in enumerate(row, start=1):
            put(ws, i, j, v)
    last = len(samples) + 1
    t = Table(displayName=sc["samples_table"], ref=f"A1:{get_column_letter(len(cols))}{last}")
    t.tableStyleInfo = TableStyleInfo(name="TableStyleLight9", showRowStripes=True)
    ws.add_table(t)
    set_widths(ws, {j: 20 for j in range(1, len(cols) + 1)})
    st = sc["samples_table"]
    first_read = get_column_letter(cols.index("reading_1") + 1)
    last_read = get_column_letter(len(cols))
    rb = wb.create_sheet("Read back")
    put(rb, 1, 1, "Concentration read back from a signal (needs the add-in)").font = TITLE_FONT
    note = put(rb, 2, 1, "Invented numbers. Each formula inverts the calibration line of the Data sheet (log signal on "
                         "log concentration): the x estimate, and the x values whose interval for the reading "
                         "contains it (Fieller's interval), taken back to micrograms per litre. 'made_up_at' on the "
                         "Samples sheet is what the invented samples were made up at: compare. Without the add-in, "
                         "the block 'x from a measured y' on the 'Model (no add-in)' sheet does the same in built-in "
                         "formulas for one reading at a time.")
    note.font = NOTE_FONT
    note.alignment = Alignment(wrap_text=True, vertical="top")
    rb.merge_cells("A2:H2")
    rb.row_dimensions[2].height = 62
    blocks = [
        (4, "Each sample's first reading (one reading per sample):",
         f"=UNBEND_INVERSE({yref},{xref},{st}[reading_1])"),
        (20, "Each sample's three readings together (one row per sample; their mean on the log scale):",
         f"=UNBEND_INVERSE({yref},{xref},Samples!${first_read}$2:${last_read}${last},,,,,3)"),
        (36, "Critical level, detection and quantification limits (one-sided 95%):",
         f"=UNBEND_LIMITS({yref},{xref})"),
    ]
    for r, label, formula in blocks:
        put(rb, r, 1, label).font = HEADER_FONT
        put(rb, r + 1, 1, formula).font = NOTE_FONT  # the formula below, as text
        put_spilling(rb, f"A{r + 2}", formula)
    put(rb, 60, 1, "With log concentration the blank (x = 0) has no place on the scale, so the limits table says in "
                   "words that the limits are not defined for this line; a calibration with a blank standard, fitted "
                   "with an x start or at a power above 0, gives them.").font = NOTE_FONT
    set_widths(rb, {1: 16, 2: 14, 3: 14, 4: 14, 5: 14, 6: 14, 7: 14, 8: 40})
    return [
        "- Samples: invented unknown samples, three readings each, with the concentration each was made up at "
        "(unknown in real use; here to compare).",
        "- Read back: UNBEND_INVERSE cells (concentration from a signal, with its interval, one row per sample) "
        "and UNBEND_LIMITS (critical level, detection and quantification limits, each with its definition).",
        "- Model (no add-in), block 'x from a measured y': type a signal and get the concentration and its interval "
        "in built-in formulas (Fieller's interval on the log scale, taken back).",
    ]


def _col_index(letter: str) -> int:
    from openpyxl.utils import column_index_from_string
    return column_index_from_string(letter)


def _spread_book(name, sc, macro_notes=()):
    df = sc["make"]()
    wb = Workbook()
    notes = wb.active
    notes.title = "Notes"
    _data_sheet(wb, sc, df)
    n = len(df)
    last = n + 1 + LINKED_SPARE
    groups = list(dict.fromkeys(df[sc["groups"]]))
    ws = wb.create_sheet("Spread vs level")
    put(ws, 1, 1, "Spread against level, in built-in formulas").font = TITLE_FONT
    put(ws, 2, 1, "For each batch: the median (level) and the interquartile range (spread); then the straight line of "
                  "LN(spread) on LN(level). The suggested power is 1 minus its slope (0 = log, 0.5 = square root).").font = NOTE_FONT
    head = ["batch", "values", "level (median)", "spread (IQR)", "LN level", "LN spread"]
    for j, h in enumerate(head, start=1):
        put(ws, 4, j, h).font = HEADER_FONT
    gcol, vcol = "A", "B"
    rng_g = f"Data!${gcol}$2:${gcol}${last}"
    rng_v = f"Data!${vcol}$2:${vcol}${last}"
    for i, g in enumerate(groups):
        r = 5 + i
        put(ws, r, 1, g)
        put(ws, r, 2, f"=COUNTIFS({rng_g},A{r},{rng_v},\"<>\")", formula=True)
        ws[f"C{r}"] = ArrayFormula(f"C{r}", f"=MEDIAN(IF({rng_g}=A{r},IF(ISNUMBER({rng_v}),{rng_v})))")
        ws[f"D{r}"] = ArrayFormula(
            f"D{r}", f"=QUARTILE(IF({rng_g}=A{r},IF(ISNUMBER({rng_v}),{rng_v})),3)"
                     f"-QUARTILE(IF({rng_g}=A{r},IF(ISNUMBER({rng_v}),{rng_v})),1)")
        put(ws, r, 5, f"=LN(C{r})", formula=True)
        put(ws, r, 6, f"=LN(D{r})", formula=True)
    g_last = 4 + len(groups)
    put(ws, g_last + 2, 1, "slope of LN spread on LN level").font = HEADER_FONT
    put(ws, g_last + 2, 3, f"=SLOPE(F5:F{g_last},E5:E{g_last})", formula=True)
    put(ws, g_last + 3, 1, "suggested power (1 - slope)").font = HEADER_FONT
    put(ws, g_last + 3, 3, f"=1-C{g_last + 2}", formula=True)
    put(ws, g_last + 4, 1, "With the add-in (interval and rung):").font = HEADER_FONT
    yref, gref = f"{sc['table']}[{sc['y']}]", f"{sc['table']}[{sc['groups']}]"
    put_spilling(ws, f"A{g_last + 5}", f"=UNBEND_SPREAD({yref},{gref})")
    put(ws, g_last + 20, 1, "Symmetry power of all results (with the add-in):").font = HEADER_FONT
    put_spilling(ws, f"A{g_last + 21}", f"=UNBEND_SYMMETRY({yref})")
    set_widths(ws, {1: 30, 2: 10, 3: 16, 4: 16, 5: 12, 6: 12})
    xr = Reference(ws, min_col=5, min_row=5, max_row=g_last)
    yr = Reference(ws, min_col=6, min_row=5, max_row=g_last)
    _chart(ws, "LN spread against LN level", xr, yr, "LN level (median)", "LN spread (IQR)", "H4")
    _config_sheet(wb)
    _notes(notes, sc, [
        "- Spread vs level: each batch's median and interquartile range in built-in formulas, the line of LN spread "
        "on LN level and the power it suggests; a chart of the same. The add-in cells give the interval and rung.",
        f"- The group formulas read rows 2 to {last} of the Data sheet, so rows added to the table are included.",
    ], macro_notes)
    return wb


def _network_book(name, sc, macro_notes=()):
    """Many stations: the cell functions for one power for all and a line per station, the lines as the engine
    gives them when the workbook is built, and a native chart of every station's slope with its interval."""
    from openpyxl.chart import LineChart, Series
    from openpyxl.chart.error_bar import ErrorBars
    from openpyxl.chart.data_source import NumDataSource, NumRef

    df = sc["make"]()
    wb = Workbook()
    notes = wb.active
    notes.title = "Notes"
    _data_sheet(wb, sc, df)
    yref, xref, gref = (f"{sc['table']}[{sc[k]}]" for k in ("y", "x", "groups"))
    gf = unbend.fit_groups(df[sc["y"]].to_numpy(float), df[sc["x"]].to_numpy(float), df[sc["groups"]].to_numpy())

    ws = wb.create_sheet("With the add-in")
    put(ws, 1, 1, "Cells that call the unbend functions for many stations").font = TITLE_FONT
    note = put(ws, 2, 1, "These formulas need xlwings with the UDF module unbend.udfs (see Notes); without it they "
                         "show a name error, and the 'Lines' sheet shows what they gave when this workbook was built. "
                         "Tables spill where the program has dynamic arrays.")
    note.font = NOTE_FONT
    note.alignment = Alignment(wrap_text=True)
    ws.merge_cells("A2:H2")
    ws.row_dimensions[2].height = 32
    put(ws, 4, 1, "Predict for station:").font = HEADER_FONT
    put(ws, 4, 2, sc["predict_for"][0])
    put(ws, 5, 1, "New discharges:").font = HEADER_FONT
    for i, v in enumerate(sc["new_x"]):
        put(ws, 6 + i, 1, v)
    first_new, last_new = 6, 5 + len(sc["new_x"])
    put(ws, 11, 1, "Predictions in original units for the station in B4 (same powers for every station):").font = \
        HEADER_FONT
    f_pred = f"=UNBEND_GROUP_PREDICT({yref},{xref},{gref},$B$4,$A${first_new}:$A${last_new})"
    put(ws, 11, 6, f_pred[1:]).font = NOTE_FONT
    put_spilling(ws, "A12", f_pred)
    other = sc["predict_for"][1]
    put(ws, 18, 1, f"One number: the bias-corrected mean for {other} at the first new discharge:").font = HEADER_FONT
    f_one = f'=UNBEND_GROUP_PREDICT({yref},{xref},{gref},"{other}",$A${first_new},,,"mean")'
    put_spilling(ws, "A19", f_one)
    put(ws, 19, 3, f_one[1:]).font = NOTE_FONT
    put(ws, 21, 1, "One power for every station, then one row per station:").font = HEADER_FONT
    f_all = f"=UNBEND_GROUPS({yref},{xref},{gref})"
    put(ws, 21, 6, f_all[1:]).font = NOTE_FONT
    put_spilling(ws, "A22", f_all)
    set_widths(ws, {1: 24, 2: 22, 3: 14})

    lines = wb.create_sheet("Lines")
    put(lines, 1, 1, "Each station's line as unbend computed it when this workbook was built (from the invented "
                     "data on the Data sheet; it does not follow later edits: the add-in cells do)").font = TITLE_FONT
    put(lines, 2, 1, gf.explain()).alignment = Alignment(wrap_text=True, vertical="top")
    lines.merge_cells("A2:J2")
    lines.row_dimensions[2].height = 75
    head = ["station", "rows used", "slope", "slope low 95%", "slope high 95%", "above the slope",
            "below the slope", "one slope for all", "own y power", "verdict"]
    for j, h in enumerate(head, start=1):
        put(lines, 4, j, h).font = HEADER_FONT
    t = gf.table[gf.table["used"]].sort_values("slope", kind="mergesort")
    for i, r in enumerate(t.itertuples(), start=5):
        vals = [r.group, int(r.n), r.slope, r.slope_low, r.slope_high, r.slope_high - r.slope, r.slope - r.slope_low,
                gf.common_slope, r.own_y_power, r.verdict]
        for j, v in enumerate(vals, start=1):
            put(lines, i, j, v, number_format="0.0000" if isinstance(v, float) else None)
    last = 4 + len(t)
    set_widths(lines, {1: 20, 2: 10, 3: 10, 4: 12, 5: 12, 6: 12, 7: 12, 8: 14, 9: 12, 10: 80})
    ch = LineChart()
    ch.title = "Slope of each station (log-log) with its 95% interval"
    ch.y_axis.title = "slope"
    ch.x_axis.title = "station"
    ch.height, ch.width = 9.0, 24.0
    cats = Reference(lines, min_col=1, min_row=5, max_row=last)
    s1 = Series(Reference(lines, min_col=3, min_row=5, max_row=last), title="slope")
    s1.graphicalProperties.line.noFill = True
    s1.marker.symbol = "circle"
    s1.marker.size = 5

    def ref(col):
        return NumDataSource(numRef=NumRef(f=f"'Lines'!${get_column_letter(col)}$5:${get_column_letter(col)}${last}"))

    s1.errBars = ErrorBars(errDir="y", errBarType="both", errValType="cust", noEndCap=False, plus=ref(6),
                           minus=ref(7))
    s2 = Series(Reference(lines, min_col=8, min_row=5, max_row=last), title="one slope for all")
    s2.marker.symbol = "none"
    ch.append(s1)
    ch.append(s2)
    ch.set_categories(cats)
    ch.x_axis.delete = False
    ch.y_axis.delete = False
    lines.add_chart(ch, f"A{last + 3}")
    _config_sheet(wb)
    _notes(notes, sc, [
        "- With the add-in: UNBEND_GROUPS (one power for every station with its interval, then each station's line, "
        "checks, verdict and own power) and UNBEND_GROUP_PREDICT (predictions in original units within one station). "
        "Change the station in B4 or the discharges under it.",
        "- Lines: the same lines as numbers and a chart of every station's slope with its interval, computed when "
        "the workbook was built; the command 'unbend groups' writes such a workbook for any file.",
        f"- The formulas read the whole table, so rows added to it are included. {gf.n_skipped} readings are blank "
        "and are skipped and counted.",
    ], macro_notes)
    return wb


def standalone_template() -> str:
    """xlwings' own template with its standalone VBA module (``quickstart_standalone.xlsm``), as installed."""
    import xlwings
    return os.path.join(os.path.dirname(xlwings.__file__), "quickstart_standalone.xlsm")


def MACRO_NOTES(macro_enabled: bool) -> list:
    """The Notes lines that say which copy this is and how its functions are switched on."""
    import xlwings
    v = xlwings.__version__
    if not macro_enabled:
        return ["", "This copy (.xlsx) has no macros: colleagues can open it anywhere. To use the unbend functions, "
                    "open the macro-enabled copy (.xlsm) beside it (see the README, 'For spreadsheet users')."]
    return ["", f"This copy (.xlsm) carries xlwings' standalone VBA module (from xlwings {v}), so it needs neither a "
                "VBA reference nor the xlwings add-in. Once: install Python, xlwings and unbend, run 'xlwings config "
                "create', and allow 'Trust access to the VBA project object model' (Trust Center, Macro Settings). "
                "Then open this file, enable its macros, and run the macro ImportPythonUDFs (Alt+F8), or click Import "
                "Functions on the xlwings tab.",
            f"The module is tied to xlwings {v}; with another xlwings version installed, rebuild these files with "
            "'unbend demo'."]


def _macro_enabled(wb):
    """Give the workbook xlwings' standalone VBA project (openpyxl copies it from the template on save)."""
    wb.vba_archive = zipfile.ZipFile(standalone_template())
    wb.code_name = "ThisWorkbook"  # the template's project has ThisWorkbook, Sheet1 and Sheet2 modules
    for i, ws in enumerate(wb.worksheets, start=1):
        ws.sheet_properties.codeName = f"Sheet{i}"
    return wb


def build_demo_workbook(name: str, folder, macro_enabled: bool = False) -> str:
    """Build one demo workbook into ``folder`` (``.xlsx``, or the macro-enabled ``.xlsm``); returns its path."""
    sc = SCENARIOS[name]
    notes = MACRO_NOTES(macro_enabled)
    if sc.get("kind") == "network":
        wb = _network_book(name, sc, notes)
    else:
        wb = _spread_book(name, sc, notes) if "groups" in sc else _regression_book(name, sc, notes)
    printable(wb)
    if macro_enabled:
        _macro_enabled(wb)
    path = os.path.join(folder, f"{name}.{'xlsm' if macro_enabled else 'xlsx'}")
    try:
        return atomic_save(lambda tmp: save_spilling(wb, tmp), path)
    finally:
        if wb.vba_archive is not None:
            wb.vba_archive.close()


def build_demo_workbooks(folder, macro_enabled: bool = True) -> list:
    """Build every demo workbook into ``folder``: the ``.xlsx`` files, then the ``.xlsm`` copies; returns their paths."""
    os.makedirs(folder, exist_ok=True)
    paths = [build_demo_workbook(name, folder) for name in SCENARIOS]
    if macro_enabled:
        paths += [build_demo_workbook(name, folder, macro_enabled=True) for name in SCENARIOS]
    return paths
